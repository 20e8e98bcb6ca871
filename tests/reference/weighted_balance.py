#!/usr/bin/env python3
"""Reference values for weighted balance and differential-attrition checks.

Run from the crate root: python3 tests/reference/weighted_balance.py
Writes tests/reference/fixtures/weighted_balance.json with the library versions.

The data are invented and seeded here (default_rng(20261206)): 7 randomization blocks of
unequal size with unequal treated shares, 4 clusters nested in each block, two baseline
covariates with block shifts and a weight-related shift (so weighted and unweighted means
differ), a positive sampling weight w, an observed-outcome indicator, and rows that test the
order in which rows leave: row 0 has no weight (it leaves like a missing value), row 1 has
weight zero (left out and counted before singletons are looked for), row 2 is alone in an
eighth block (a singleton, dropped), row 3 shares a ninth block only with row 1 (so once the
zero weight has left, it is alone and dropped too), and row 4 misses covariate x2 (dropped
from balance only).

Source of every value: statsmodels WLS(y, design, weights=w), with design = [arm, one dummy
column per block] (no constant) for a blocked case and [1, arm] without blocks: the arm
coefficient's estimate, standard error and p-value for each covariate and for the observed
indicator, and the F form of the Wald test of the covariate slopes in the weighted regression
of the arm on the covariates (and the dummies, or a constant), statsmodels `wald_test`; under
cov_type HC1, and for the blocked design also nonrobust (classical: s^2 = sum w u^2 / (n - K)
times (X'WX)^-1) and HC3 (leverage of the weighted rows), and cluster (groups = the clusters; statsmodels' default small-sample factor
G/(G-1)·(N-1)/(N-K), K counting every dummy; the blocks are not nested in the clusters).
Weighted arm means: numpy.average(x, weights=w) within each arm. The p-values refer t to the
residual df (n - K), or G - 1 clustered, and F to (k, the same df), with scipy.
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
    rng = np.random.default_rng(20261206)
    sizes = [20, 28, 16, 32, 24, 36, 20]
    shares = [0.5, 0.25, 0.5, 0.625, 1 / 3, 0.5, 0.4]
    block, cluster, arm = [9, 9, 7, 9], [36, 36, 35, 36], [0, 1, 1, 0]
    for b, (n, p) in enumerate(zip(sizes, shares)):
        treated = np.zeros(n, dtype=int)
        treated[rng.permutation(n)[: int(round(n * p))]] = 1
        block += [b] * n
        cluster += [4 * b + (i % 4) for i in range(n)]
        arm += list(treated)
    block, cluster, arm = np.array(block), np.array(cluster), np.array(arm)
    n = len(block)
    w = np.round(rng.gamma(2.0, 1.5, n) + 0.2, 4)
    shift = rng.normal(0, 1.0, 10)[block]
    cshift = rng.normal(0, 0.5, 37)[cluster]
    x1 = np.round(30 + 4 * shift + cshift + 0.8 * w + rng.normal(0, 2, n), 5)
    x2 = np.round(0.5 * shift - 0.2 * w + 0.25 * arm + rng.normal(0, 1, n), 5)
    p_obs = np.clip(0.8 - 0.15 * arm + 0.03 * w, 0.05, 0.98)
    observed = (rng.uniform(size=n) < p_obs).astype(int)
    w = w.astype(float)
    w[0] = np.nan
    w[1] = 0.0
    x2[4] = np.nan
    return dict(block=block, cluster=cluster, arm=arm, x1=x1, x2=x2, w=w, observed=observed)


def dummies(block):
    levels = sorted(set(block))
    return np.column_stack([(block == l).astype(float) for l in levels])


def fit(y, x, block, cluster, w, kind, blocked):
    x = x.reshape(len(y), -1)
    if blocked:
        design = np.column_stack([x, dummies(block)])
    else:
        design = np.column_stack([np.ones(len(y)), x])
    model = sm.WLS(y, design, weights=w)
    if kind == "classical":
        return model.fit()
    if kind in ("hc1", "hc3"):
        return model.fit(cov_type=kind.upper())
    return model.fit(cov_type="cluster", cov_kwds={"groups": cluster})


def df_of(res, kind, cluster):
    """The reference distribution's df: the residual df, or G - 1 when clustered."""
    return len(set(cluster)) - 1 if kind == "cluster" else res.df_resid


def arm_row(y, arm, block, cluster, w, kind, blocked):
    res = fit(y, arm.astype(float), block, cluster, w, kind, blocked)
    at = 0 if blocked else 1
    est, se = res.params[at], res.bse[at]
    df = df_of(res, kind, cluster)
    p = 2 * scipy.stats.t.sf(abs(est / se), df)
    return dict(
        difference=est,
        std_error=se,
        p_value=p,
        df=df,
        mean_treated=float(np.average(y[arm == 1], weights=w[arm == 1])),
        mean_comparison=float(np.average(y[arm == 0], weights=w[arm == 0])),
    )


def drop_singletons(block, keep):
    """Repeatedly drop kept rows alone in their block."""
    keep = keep.copy()
    while True:
        counts = {b: int(np.sum(keep & (block == b))) for b in set(block)}
        alone = keep & np.array([counts[b] == 1 for b in block])
        if not alone.any():
            return keep
        keep &= ~alone


def usable(d):
    """Rows with a present, positive weight."""
    w = d["w"]
    return ~np.isnan(w) & (np.nan_to_num(w) > 0)


def joint(x, a, b, c, w, kind, blocked):
    k = x.shape[1]
    res = fit(a.astype(float), x, b, c, w, kind, blocked)
    first = 0 if blocked else 1
    r = np.zeros((k, res.params.shape[0]))
    r[:, first : first + k] = np.eye(k)
    f = float(np.squeeze(res.wald_test(r, use_f=True, scalar=True).statistic))
    bs = res.params[first : first + k]
    vs = res.cov_params()[first : first + k, first : first + k]
    assert abs(f - float(bs @ np.linalg.solve(vs, bs)) / k) <= 1e-9 * abs(f)
    df2 = df_of(res, kind, c)
    return f, df2, float(scipy.stats.f.sf(f, k, df2))


def case(d, kind, blocked):
    covs = np.column_stack([d["x1"], d["x2"]])
    base = usable(d)
    complete = base & ~np.isnan(covs).any(axis=1)
    keep = drop_singletons(d["block"], complete) if blocked else complete
    b, c, a = d["block"][keep], d["cluster"][keep], d["arm"][keep]
    x, w = covs[keep], d["w"][keep]
    rows = [arm_row(x[:, j], a, b, c, w, kind, blocked) for j in range(2)]
    f, df2, p = joint(x, a, b, c, w, kind, blocked)
    ka = drop_singletons(d["block"], base) if blocked else base
    att = arm_row(
        d["observed"][ka].astype(float),
        d["arm"][ka],
        d["block"][ka],
        d["cluster"][ka],
        d["w"][ka],
        kind,
        blocked,
    )
    att["n"] = int(ka.sum())
    return dict(
        kind=kind,
        blocked=blocked,
        n=int(keep.sum()),
        blocks=len(set(b)) if blocked else None,
        dropped_zero_weight=int(np.sum(np.nan_to_num(d["w"], nan=1.0) == 0.0)),
        rows=rows,
        joint_f=f,
        joint_df_denom=df2,
        joint_p=p,
        attrition=att,
    )


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
    cases = [
        case(d, "hc1", True),
        case(d, "cluster", True),
        case(d, "hc1", False),
        case(d, "classical", True),
        case(d, "hc3", True),
    ]
    out = dict(
        source="statsmodels WLS with explicit block dummies (tests/reference/weighted_balance.py)",
        versions=VERSIONS,
        data={k: clean(v) for k, v in d.items()},
        cases=clean(cases),
    )
    with open(os.path.join(FIXTURES, "weighted_balance.json"), "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
