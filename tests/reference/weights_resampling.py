#!/usr/bin/env python3
"""Reference fixture for resampled tests of weighted specifications, by brute force:
tests/reference/fixtures/weights_resampling.json.

Regenerate from the crate root with `python3 tests/reference/weights_resampling.py` (numpy,
statsmodels, linearmodels; seconds). The data are invented here from default_rng(20261206).

Cases (every statistic refitted from scratch by a library, once per draw):
  * wild_ols: 8 clusters of 4 to 7 rows, weighted OLS of y on [x, 1, c] with probability
    weights w. The restricted wild cluster bootstrap of H0: beta_x = null, in weighted terms:
    the restricted fit is WLS of y - null x on [1, c] (coefficients g, residuals u), draw e
    (one of all 2^8 Rademacher vectors, +-1 per cluster) sets y* = null x + [1, c] g + u e,
    and the statistic is the CR1 t of beta_x = null from statsmodels WLS(y*, X, weights=w)
    with cov_type "cluster" (G/(G-1) (n-1)/(n-k)). All 256 vectors, the all-ones one the
    observed fit.
  * wild_ols_fe: the same bootstrap with a fixed effect h nested in the clusters (each
    cluster's first and second half of rows), as explicit indicator columns in every WLS fit;
    statistics rescaled by sqrt((n - 2)/(n - k)) to sworn's CR1 factor, which leaves nested
    levels out of its count (the counts do not depend on a constant factor).
  * wild_tsls: the same clusters, weighted 2SLS of y on [x, 1, c] with instruments z1, z2.
    The wild restricted efficient bootstrap in weighted terms: restricted structural fit WLS
    of y - null x on [1, c] (g, u); efficient reduced form WLS of x on [z1, z2, 1, c, u], its
    fitted part without u's term x_hat and the residual v = x - x_hat; draw e sets
    x* = x_hat + v e, y* = null x* + [1, c] g + u e, and the statistic is the CR1 t of
    beta_x = null of linearmodels IV2SLS(y*, [1, c], x*, [z1, z2], weights=w), "clustered",
    debiased=True. All 256 vectors.
  * ri_t, ri_estimate: 12 units, 6 treated (t binary), weighted OLS of y on [t, 1, c]. Every
    one of the 924 assignments of the observed t values to the units (weights staying with
    their units); y0 = y - null t; statistic the HC1 t (null 0) or the estimate (null 0.4)
    of t* in statsmodels WLS(y0, [t*, 1, c], weights=w).
  * ri_ar: the same units with an endogenous x (drawn after the columns above from
    default_rng(SEED + 1), so they are unchanged), weighted 2SLS of y on [x, 1, c] with the
    assignment t as the instrument. The randomization Anderson-Rubin test of beta_x = 0.5:
    y0 = y - 0.5 x is fixed, t is re-drawn (all 924 assignments, weights staying with their
    units) and the statistic is the Wald statistic of t*'s coefficient in statsmodels
    WLS(y0, [t*, 1, c], weights=w) with cov_type "HC1" (one instrument: the square of its t).
Counts use the tie rule |T*| >= |T| (1 - 1e-12) (and the one-sided versions), as sworn does.
"""
import itertools
import json
import os
import platform

import linearmodels
import numpy as np
import pandas as pd
import statsmodels
import statsmodels.api as sm
from linearmodels.iv import IV2SLS

SEED = 20261206
OUT = os.path.join(os.path.dirname(__file__), "fixtures", "weights_resampling.json")
TIE = 1e-12


def counts(obs, stats):
    stats = np.asarray(stats)
    tol = TIE * abs(obs)
    return {
        "count_two": int(np.sum(np.abs(stats) >= abs(obs) - tol)),
        "count_upper": int(np.sum(stats >= obs - tol)),
        "count_lower": int(np.sum(stats <= obs + tol)),
        "draws": int(len(stats)),
    }


def cluster_data(rng):
    G = 8
    sizes = rng.integers(4, 8, size=G)
    g = np.repeat(np.arange(G), sizes)
    n = len(g)
    z1 = rng.normal(size=n)
    z2 = (rng.uniform(size=n) < 0.5).astype(float)
    c = rng.uniform(0, 3, n)
    common = rng.normal(size=n)
    x = 0.7 * z1 + 0.5 * z2 + 0.3 * c + common + 0.5 * rng.normal(size=G)[g]
    y = (0.5 + 0.4 * x - 0.6 * c + 0.8 * common + rng.normal(size=G)[g]
         + rng.normal(size=n) * (1 + 0.3 * c))
    w = np.round(rng.uniform(0.3, 3.0, n), 3)
    return {"g": g, "y": y, "x": x, "c": c, "z1": z1, "z2": z2, "w": w}


def wls_cr1_t(y, X, w, g, null):
    fit = sm.WLS(y, X, weights=w).fit(cov_type="cluster", cov_kwds={"groups": g})
    return float((fit.params[0] - null) / fit.bse[0])


def wild_ols(d, null):
    X = np.column_stack([d["x"], np.ones(len(d["y"])), d["c"]])
    W = X[:, 1:]
    obs = wls_cr1_t(d["y"], X, d["w"], d["g"], null)
    r = sm.WLS(d["y"] - null * d["x"], W, weights=d["w"]).fit()
    fitted, u = W @ r.params, r.resid
    stats = []
    for e in itertools.product([1.0, -1.0], repeat=8):
        ys = null * d["x"] + fitted + u * np.asarray(e)[d["g"]]
        stats.append(wls_cr1_t(ys, X, d["w"], d["g"], null))
    assert abs(stats[0] - obs) < 1e-10 * abs(obs)
    return obs, stats


def nested_halves(g):
    """Each cluster split into its first and second half of rows: levels nested in g."""
    h = np.zeros(len(g), dtype=int)
    for c in np.unique(g):
        rows = np.flatnonzero(g == c)
        h[rows] = 2 * c + (np.arange(len(rows)) >= len(rows) // 2)
    return h


def wild_ols_fe(d, null):
    n = len(d["y"])
    D = pd.get_dummies(d["h"], drop_first=True, dtype=float).to_numpy()
    X = np.column_stack([d["x"], np.ones(n), d["c"], D])
    W = X[:, 1:]
    # statsmodels counts every indicator column in its CR1 factor (n-1)/(n-k); sworn leaves
    # out levels nested in the clusters (all of them here), so its t is larger by
    # sqrt((n - 2) / (n - k)), k = X's columns, 2 = x and c. A constant factor: the counts
    # are unaffected, the statistics rescaled.
    k = X.shape[1]
    factor = np.sqrt((n - 2) / (n - k))
    obs = wls_cr1_t(d["y"], X, d["w"], d["g"], null) * factor
    r = sm.WLS(d["y"] - null * d["x"], W, weights=d["w"]).fit()
    fitted, u = W @ r.params, r.resid
    stats = []
    for e in itertools.product([1.0, -1.0], repeat=8):
        ys = null * d["x"] + fitted + u * np.asarray(e)[d["g"]]
        stats.append(wls_cr1_t(ys, X, d["w"], d["g"], null) * factor)
    assert abs(stats[0] - obs) < 1e-10 * abs(obs)
    return obs, stats


def iv_t(y, x, d, null):
    n = len(y)
    exog = pd.DataFrame({"const": np.ones(n), "c": d["c"]})
    fit = IV2SLS(pd.Series(y, name="y"), exog, pd.Series(x, name="x"),
                 pd.DataFrame({"z1": d["z1"], "z2": d["z2"]}), weights=pd.Series(d["w"])).fit(
        cov_type="clustered", clusters=pd.Series(d["g"]), debiased=True)
    return float((fit.params["x"] - null) / fit.std_errors["x"])


def wild_tsls(d, null):
    n = len(d["y"])
    W = np.column_stack([np.ones(n), d["c"]])
    obs = iv_t(d["y"], d["x"], d, null)
    r = sm.WLS(d["y"] - null * d["x"], W, weights=d["w"]).fit()
    fitted, u = W @ r.params, r.resid
    ZW = np.column_stack([d["z1"], d["z2"], W])
    rf = sm.WLS(d["x"], np.column_stack([ZW, u]), weights=d["w"]).fit()
    x_hat = ZW @ rf.params[:-1]
    v = d["x"] - x_hat
    stats = []
    for e in itertools.product([1.0, -1.0], repeat=8):
        ee = np.asarray(e)[d["g"]]
        xs = x_hat + v * ee
        ys = null * xs + fitted + u * ee
        stats.append(iv_t(ys, xs, d, null))
    assert abs(stats[0] - obs) < 1e-9 * abs(obs)
    return obs, stats


def ri_data(rng):
    n = 12
    t = np.zeros(n)
    t[rng.permutation(n)[:6]] = 1.0
    c = rng.uniform(0, 4, n)
    y = 1.0 + 0.8 * t + 0.5 * c + rng.normal(size=n) * (1 + 0.2 * c)
    w = np.round(rng.uniform(0.3, 3.0, n), 3)
    return {"t": t, "y": y, "c": c, "w": w}


def ri_case(d, null, statistic):
    n = len(d["y"])
    y0 = d["y"] - null * d["t"]

    def stat(tt):
        fit = sm.WLS(y0, np.column_stack([tt, np.ones(n), d["c"]]), weights=d["w"]).fit(
            cov_type="HC1")
        return float(fit.params[0] if statistic == "estimate" else fit.tvalues[0])

    obs = stat(d["t"])
    stats = []
    for treated in itertools.combinations(range(n), 6):
        tt = np.zeros(n)
        tt[list(treated)] = 1.0
        stats.append(stat(tt))
    return obs, stats


def with_endogenous(d):
    rng = np.random.default_rng(SEED + 1)
    n = len(d["y"])
    d["x"] = 0.6 * d["t"] + 0.3 * d["c"] + rng.normal(size=n)
    return d


def ri_ar_case(d, beta0):
    n = len(d["y"])
    y0 = d["y"] - beta0 * d["x"]

    def stat(tt):
        fit = sm.WLS(y0, np.column_stack([tt, np.ones(n), d["c"]]), weights=d["w"]).fit(
            cov_type="HC1")
        return float(fit.params[0] ** 2 / fit.cov_params()[0, 0])

    obs = stat(d["t"])
    stats = []
    for treated in itertools.combinations(range(n), 6):
        tt = np.zeros(n)
        tt[list(treated)] = 1.0
        stats.append(stat(tt))
    return obs, stats


def case(obs, stats, **extra):
    out = {"observed": obs, "stats_sorted": sorted(stats)}
    out.update(counts(obs, stats))
    out.update(extra)
    return out


def main():
    rng = np.random.default_rng(SEED)
    cd = cluster_data(rng)
    rd = with_endogenous(ri_data(rng))
    cd["h"] = nested_halves(cd["g"])
    expected = {
        "wild_ols": case(*wild_ols(cd, 0.2), null=0.2),
        "wild_tsls": case(*wild_tsls(cd, -0.5), null=-0.5),
        "wild_ols_fe": case(*wild_ols_fe(cd, 0.2), null=0.2),
        "ri_t": case(*ri_case(rd, 0.0, "t"), null=0.0),
        "ri_estimate": case(*ri_case(rd, 0.4, "estimate"), null=0.4),
        "ri_ar": case(*ri_ar_case(rd, 0.5), null=0.5),
    }
    doc = {
        "case": "weights_resampling",
        "description": "resampled tests of weighted specifications by brute force: the weighted restricted wild cluster bootstrap (OLS) and wild restricted efficient bootstrap (2SLS) over all 2^8 Rademacher vectors, and weighted randomization tests (OLS t and estimate, 2SLS Anderson-Rubin) over all 924 assignments, each draw refitted by statsmodels WLS or linearmodels IV2SLS with weights",
        "versions": {"python": platform.python_version(), "numpy": np.__version__,
                     "pandas": pd.__version__, "statsmodels": statsmodels.__version__,
                     "linearmodels": linearmodels.__version__},
        "seed": SEED,
        "clustered": {k: [int(v) for v in vals] if k in ("g", "h") else [float(v) for v in vals]
                      for k, vals in cd.items()},
        "randomized": {k: [float(v) for v in vals] for k, vals in rd.items()},
        "expected": expected,
    }
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
