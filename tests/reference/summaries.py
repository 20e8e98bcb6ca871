"""Reference values for multiple-testing and field-experiment summaries.

Run from the crate root: python3 tests/reference/summaries.py
Writes tests/reference/fixtures/summary_{bky,romano_wolf,indices,balance,lee}.json, each
recording the library versions. All data are invented and seeded here.

Sources, one per fixture:
* summary_bky: statsmodels `multipletests(method="fdr_tsbky")` reject decisions at a grid of
  levels (statsmodels gives decisions, not sharpened q-values; the Rust test checks that each
  q-value is <= alpha exactly for the rejected hypotheses).
* summary_romano_wolf: a direct numpy implementation of the Romano-Wolf step-down (one
  max over the still-active hypotheses per step, loops written out, then a running maximum).
* summary_indices: numpy implementations of the equally weighted (Kling, Liebman and Katz
  2007) and inverse-covariance weighted (Anderson 2008) indices.
* summary_balance: statsmodels OLS with cov_type nonrobust / HC1 / HC3 / cluster, t-tests of
  the arm coefficient and `f_test` of all covariate slopes in the regression of the arm.
* summary_lee: a numpy implementation of Lee (2009) trimming with the fractional boundary
  weight written as clipped cumulative weights.
"""
import json
import os

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm
from statsmodels.stats.multitest import multipletests

HERE = os.path.dirname(os.path.abspath(__file__))
FIXTURES = os.path.join(HERE, "fixtures")
VERSIONS = {
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "statsmodels": statsmodels.__version__,
}


def clean(x):
    """JSON-ready: NaN becomes null, numpy scalars become floats."""
    if isinstance(x, dict):
        return {k: clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [clean(v) for v in x]
    if isinstance(x, np.ndarray):
        return clean(x.tolist())
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (int, np.integer)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        x = float(x)
        return None if np.isnan(x) else x
    return x


def write(name, doc):
    doc = {"generator": "tests/reference/summaries.py", "versions": VERSIONS, **doc}
    with open(os.path.join(FIXTURES, name), "w") as f:
        json.dump(clean(doc), f, indent=1)
        f.write("\n")


# --- sharpened q-values: statsmodels two-stage decisions ----------------------------------
def bky_fixture(rng):
    families = []
    for m, share in [(5, 0.4), (12, 0.5), (30, 0.3), (60, 0.2), (25, 0.0)]:
        alt = rng.random(m) < share
        z = rng.normal(size=m) + np.where(alt, rng.uniform(1.5, 4.0, size=m), 0.0)
        from scipy.stats import norm

        p = 2 * norm.sf(np.abs(z))
        families.append(p)
    # A family with exact ties.
    families.append(np.array([0.01, 0.01, 0.02, 0.02, 0.02, 0.3, 0.001, 0.04, 0.04]))
    levels = np.concatenate([np.linspace(0.002, 0.3, 150), [0.35, 0.5, 0.7, 0.9]])
    out = []
    for p in families:
        decisions = []
        for a in levels:
            reject = multipletests(p, alpha=a, method="fdr_tsbky")[0]
            decisions.append({"alpha": float(a), "reject": reject.tolist()})
        out.append({"p": p.tolist(), "decisions": decisions})
    write("summary_bky.json", {"families": out})


# --- Romano-Wolf step-down ------------------------------------------------------------------
def romano_wolf_numpy(obs, draws, two_sided):
    score = np.abs if two_sided else (lambda v: v)
    s_obs = score(obs)
    s_draws = score(draws)
    order = sorted(range(len(obs)), key=lambda h: -s_obs[h])  # stable for ties
    B = draws.shape[0]
    adjusted = np.empty(len(obs))
    running = 0.0
    for j, h in enumerate(order):
        active = order[j:]
        hits = 0
        for b in range(B):
            if max(s_draws[b, k] for k in active) >= s_obs[h]:
                hits += 1
        running = max(running, hits / B)
        adjusted[h] = running
    return adjusted


def romano_wolf_fixture(rng):
    cases = []
    for S, B, effects in [(4, 200, [2.5, 0.0, 1.0, -2.2]), (7, 500, [0, 0, 3.0, 0.5, 0, -1.5, 2.0])]:
        corr = 0.5 * np.ones((S, S)) + 0.5 * np.eye(S)
        chol = np.linalg.cholesky(corr)
        obs = chol @ rng.normal(size=S) + np.array(effects)
        null = (chol @ rng.normal(size=(S, B - 1))).T
        draws = np.vstack([obs, null])
        cases.append({
            "observed": obs.tolist(),
            "draws": draws.tolist(),
            "two_sided": romano_wolf_numpy(obs, draws, True).tolist(),
            "one_sided": romano_wolf_numpy(obs, draws, False).tolist(),
        })
    write("summary_romano_wolf.json", {"cases": cases})


# --- summary indices ----------------------------------------------------------------------
def z_scores(x, ref, flip):
    z = np.empty_like(x)
    for c in range(x.shape[1]):
        col = x[ref, c]
        col = col[~np.isnan(col)]
        mu, sd = col.mean(), col.std(ddof=1)
        z[:, c] = (-1.0 if flip[c] else 1.0) * (x[:, c] - mu) / sd
    return z


def restandardise(raw, ref):
    r = raw[ref]
    r = r[~np.isnan(r)]
    return (raw - r.mean()) / r.std(ddof=1)


def mean_z_numpy(x, ref, flip):
    z = z_scores(x, ref, flip)
    with np.errstate(invalid="ignore"):
        raw = np.nanmean(z, axis=1)  # all-NaN rows give NaN (warning silenced below)
    return restandardise(raw, ref)


def inverse_covariance_numpy(x, ref, flip):
    z = z_scores(x, ref, flip)
    complete = ref & ~np.isnan(z).any(axis=1)
    sigma = np.cov(z[complete], rowvar=False, ddof=1)
    w = np.linalg.inv(sigma).sum(axis=1)
    avail = ~np.isnan(z)
    num = np.where(avail, z * w, 0.0).sum(axis=1)
    den = np.where(avail, w, 0.0).sum(axis=1)
    raw = np.where(avail.any(axis=1), num / np.where(den == 0, np.nan, den), np.nan)
    return restandardise(raw, ref)


def indices_fixture(rng):
    n, k = 120, 4
    ref = rng.random(n) < 0.5
    latent = rng.normal(size=n) + 0.4 * (~ref)
    load = np.array([1.0, 0.6, -0.8, 0.3])
    x = latent[:, None] * load + rng.normal(size=(n, k)) * np.array([1.0, 2.0, 0.5, 1.5])
    x = x + np.array([10.0, -3.0, 100.0, 0.0])
    x[rng.random((n, k)) < 0.08] = np.nan
    x[5, :] = np.nan  # a row with no component
    flip = [False, False, True, False]
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        mz = mean_z_numpy(x, ref, flip)
    ic = inverse_covariance_numpy(x, ref, flip)
    write("summary_indices.json", {
        "components": x.tolist(), "reference": ref.tolist(), "flip": flip,
        "mean_z": mz.tolist(), "inverse_covariance": ic.tolist(),
    })


# --- balance table and differential attrition ---------------------------------------------
def balance_fixture(rng):
    n, G = 150, 15
    clusters = rng.integers(0, G, size=n)
    clusters[:G] = np.arange(G)  # every cluster present, ids dense
    treated = rng.random(n) < 0.5
    cluster_shock = rng.normal(size=G)[clusters]
    x = np.column_stack([
        rng.normal(size=n) + 0.5 * cluster_shock,
        rng.exponential(2.0, size=n),
        (rng.random(n) < 0.3).astype(float),
        40 + 8 * rng.normal(size=n) + 0.3 * treated,
    ])
    observed = rng.random(n) < np.where(treated, 0.85, 0.75)
    arm = treated.astype(float)
    cases = []
    for kind, kw in [
        ("classical", dict(cov_type="nonrobust")),
        ("hc1", dict(cov_type="HC1", use_t=True)),
        ("hc3", dict(cov_type="HC3", use_t=True)),
        ("cluster", dict(cov_type="cluster", cov_kwds={"groups": clusters}, use_t=True)),
    ]:
        # use_t: t(n - k) references (t(G - 1) clustered) as sworn reports, not normal ones.
        diff, se, p = [], [], []
        for j in range(x.shape[1]):
            fit = sm.OLS(x[:, j], sm.add_constant(arm)).fit(**kw)
            diff.append(fit.params[1]); se.append(fit.bse[1]); p.append(fit.pvalues[1])
        joint = sm.OLS(arm, sm.add_constant(x)).fit(**kw)
        r = np.eye(x.shape[1] + 1)[1:]
        ft = joint.f_test(r)
        att = sm.OLS(observed.astype(float), sm.add_constant(arm)).fit(**kw)
        cases.append({
            "kind": kind, "difference": diff, "std_error": se, "p_value": p,
            "joint_f": float(np.squeeze(ft.fvalue)), "joint_p": float(ft.pvalue),
            "joint_df_denom": float(ft.df_denom),
            "attrition": {"difference": att.params[1], "std_error": att.bse[1],
                          "p_value": att.pvalues[1]},
        })
    write("summary_balance.json", {
        "covariates": x.tolist(), "treated": treated.tolist(), "observed": observed.tolist(),
        "clusters": clusters.tolist(),
        "mean_treated": x[treated].mean(axis=0).tolist(),
        "mean_comparison": x[~treated].mean(axis=0).tolist(),
        "cases": cases,
    })


# --- Lee bounds -----------------------------------------------------------------------------
def trimmed_low_mean(values, kept):
    """Mean of the lowest `kept` units of mass: weights clip(kept - (0, 1, 2, ...), 0, 1)."""
    v = np.sort(values)
    w = np.clip(kept - np.arange(len(v)), 0.0, 1.0)
    return float((w * v).sum() / w.sum())


def lee_numpy(y, observed, treated):
    qt = observed[treated].mean()
    qc = observed[~treated].mean()
    yt = y[treated & observed]
    yc = y[~treated & observed]
    if qt >= qc:
        p = (qt - qc) / qt
        kept = len(yt) * (1 - p)
        lo = trimmed_low_mean(yt, kept) - yc.mean()
        hi = -trimmed_low_mean(-yt, kept) - yc.mean()
        return "treated", p, lo, hi
    p = (qc - qt) / qc
    kept = len(yc) * (1 - p)
    lo = yt.mean() + trimmed_low_mean(-yc, kept)
    hi = yt.mean() - trimmed_low_mean(yc, kept)
    return "comparison", p, lo, hi


def lee_fixture(rng):
    cases = []
    for n, pt, pc in [(203, 0.9, 0.7), (157, 0.6, 0.8), (400, 0.75, 0.74)]:
        treated = rng.random(n) < 0.5
        observed = rng.random(n) < np.where(treated, pt, pc)
        y = rng.lognormal(1.0, 0.7, size=n) + 0.5 * treated
        y = np.round(y, 1)  # ties in the outcome
        y[~observed] = np.nan
        arm, p, lo, hi = lee_numpy(y, observed, treated)
        cases.append({
            "outcome": y.tolist(), "observed": observed.tolist(), "treated": treated.tolist(),
            "trimmed_arm": arm, "trim_share": p, "lower": lo, "upper": hi,
        })
    write("summary_lee.json", {"cases": cases})


if __name__ == "__main__":
    rng = np.random.default_rng(20240611)
    bky_fixture(rng)
    romano_wolf_fixture(rng)
    indices_fixture(rng)
    balance_fixture(rng)
    lee_fixture(rng)
    print("wrote summary_*.json with", VERSIONS)
