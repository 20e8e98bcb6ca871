"""Reference values for balance and attrition under a blocked (and clustered) assignment.

Run from the crate root: python3 tests/reference/blocked_balance.py
Writes tests/reference/fixtures/blocked_balance.json with the library versions.

The data are invented and seeded here: 8 randomization blocks of unequal size with unequal
treated shares (so that the within-block difference differs from the pooled one), 3 clusters
in each block (clusters nested in blocks), three baseline covariates with block-level shifts
(one missing value), an observed-outcome indicator with differential attrition, and one unit
alone in a ninth block.

Source of every value: statsmodels OLS with one explicit dummy column per block (no constant),
the arm coefficient's estimate, standard error and p-value for each covariate and for the
observed indicator, and the Wald statistic of the covariate slopes in the regression of the
arm on the covariates and the dummies (statsmodels `wald_test`, F form), under cov_type
nonrobust, HC1, HC3 and cluster (statsmodels' default small-sample correction
G/(G-1)·(N-1)/(N-K), K counting every dummy). The unit alone in its block is dropped before
fitting, the convention sworn documents for absorbed fixed effects; a row missing a covariate
is dropped from the balance regressions only (complete cases).
"""
import json
import os

import numpy as np
import pandas
import scipy
import statsmodels
import statsmodels.api as sm

HERE = os.path.dirname(os.path.abspath(__file__))
FIXTURES = os.path.join(HERE, "fixtures")
VERSIONS = {
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "statsmodels": statsmodels.__version__,
    "pandas": pandas.__version__,
}


def data():
    rng = np.random.default_rng(20261204)
    sizes = [18, 24, 30, 21, 27, 36, 15, 33]
    shares = [0.5, 0.25, 0.6, 1 / 3, 0.5, 0.75, 0.4, 0.5]
    block, cluster, arm = [], [], []
    for b, (n, p) in enumerate(zip(sizes, shares)):
        treated = np.zeros(n, dtype=int)
        treated[rng.permutation(n)[: int(round(n * p))]] = 1
        block += [b] * n
        cluster += [3 * b + (i % 3) for i in range(n)]
        arm += list(treated)
    # The unit alone in its block (block 8, cluster 24), treated.
    block.append(8)
    cluster.append(24)
    arm.append(1)
    block, cluster, arm = np.array(block), np.array(cluster), np.array(arm)
    n = len(block)
    shift = rng.normal(0, 1.0, 9)[block]
    cshift = rng.normal(0, 0.5, 25)[cluster]
    x1 = np.round(10 + 2 * shift + cshift + rng.normal(0, 1, n), 6)
    x2 = np.round(0.4 * shift + 0.3 * arm + rng.normal(0, 1, n), 6)
    x3 = np.round(50 + 5 * rng.gamma(2.0, 1.0, n) - 3 * shift, 6)
    x2[17] = np.nan
    p_obs = 0.85 - 0.1 * arm + 0.05 * shift
    observed = (rng.uniform(size=n) < p_obs).astype(int)
    return dict(block=block, cluster=cluster, arm=arm, x1=x1, x2=x2, x3=x3, observed=observed)


def dummies(block):
    levels = sorted(set(block))
    return np.column_stack([(block == l).astype(float) for l in levels])


def fit(y, x, block, cluster, kind):
    design = np.column_stack([x, dummies(block)])
    model = sm.OLS(y, design)
    if kind == "classical":
        return model.fit()
    if kind == "hc1":
        return model.fit(cov_type="HC1")
    if kind == "hc3":
        return model.fit(cov_type="HC3")
    return model.fit(cov_type="cluster", cov_kwds={"groups": cluster})


def df_of(res, kind, cluster):
    """The reference distribution's df: the residual df, or G - 1 when clustered."""
    return len(set(cluster)) - 1 if kind == "cluster" else res.df_resid


def arm_row(y, arm, block, cluster, kind):
    res = fit(y, arm.astype(float), block, cluster, kind)
    est, se = res.params[0], res.bse[0]
    df = df_of(res, kind, cluster)
    p = 2 * scipy.stats.t.sf(abs(est / se), df)
    return dict(difference=est, std_error=se, p_value=p, df=df)


def drop_singletons(block):
    counts = {b: int(np.sum(block == b)) for b in set(block)}
    return np.array([counts[b] > 1 for b in block])


def case(d, kind):
    keep_all = drop_singletons(d["block"])
    covs = np.column_stack([d["x1"], d["x2"], d["x3"]])
    complete = keep_all & ~np.isnan(covs).any(axis=1)
    keep = complete & drop_singletons(np.where(complete, d["block"], -1))
    b, c, a, x = d["block"][keep], d["cluster"][keep], d["arm"][keep], covs[keep]
    rows = [arm_row(x[:, j], a, b, c, kind) for j in range(3)]
    joint = fit(a.astype(float), x, b, c, kind)
    k = x.shape[1]
    r = np.zeros((k, joint.params.shape[0]))
    r[:, :k] = np.eye(k)
    wald = joint.wald_test(r, use_f=True, scalar=True)
    df2 = df_of(joint, kind, c)
    f = float(np.squeeze(wald.statistic))
    # Our own arithmetic of the same statistic from statsmodels' coefficients and covariance.
    bs, vs = joint.params[:k], joint.cov_params()[:k, :k]
    f_direct = float(bs @ np.linalg.solve(vs, bs)) / k
    assert abs(f - f_direct) <= 1e-9 * abs(f)
    out = dict(
        kind=kind,
        n=int(keep.sum()),
        blocks=len(set(b)),
        rows=rows,
        mean_treated=[float(np.mean(x[a == 1, j])) for j in range(3)],
        joint_f=f,
        joint_df_denom=df2,
        joint_p=float(scipy.stats.f.sf(f, k, df2)),
    )
    ka = keep_all
    out["attrition"] = arm_row(
        d["observed"][ka].astype(float), d["arm"][ka], d["block"][ka], d["cluster"][ka], kind
    )
    out["attrition"]["n"] = int(ka.sum())
    out["singletons_dropped"] = int((~ka).sum())
    return out


def clean(x):
    if isinstance(x, dict):
        return {k: clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple, np.ndarray)):
        return [clean(v) for v in x]
    if isinstance(x, (np.integer,)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        return None if np.isnan(x) else float(x)
    return x


def main():
    d = data()
    cases = [case(d, k) for k in ["classical", "hc1", "hc3", "cluster"]]
    out = dict(
        source="statsmodels OLS with explicit block dummies (tests/reference/blocked_balance.py)",
        versions=VERSIONS,
        data={k: clean(v) for k, v in d.items()},
        cases=clean(cases),
    )
    with open(os.path.join(FIXTURES, "blocked_balance.json"), "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
