#!/usr/bin/env python3
"""Reference fixtures for randomization inference and the wild cluster bootstrap
(src/estimate/resample.rs and its submodules).

Regenerate from the crate root with

    python3 tests/reference/resampling.py

(needs numpy, scipy, statsmodels). Every data set is invented here from a seeded numpy
generator (default_rng); no external data. Writes tests/reference/fixtures/resample_*.json
with the data, the setup, the expected values and the library versions.

Where each expected value comes from (brute force, independent of the Rust algebra):
  * Randomization tests: every distinct assignment is listed explicitly (itertools
    combinations / a set of permutations, per block, Cartesian product over blocks); for
    each one the full regression of y - null*t on [t* | W] is refitted with statsmodels OLS
    (cov_type nonrobust / HC1 / HC3 / cluster with its default small-sample correction
    G/(G-1)*(n-1)/(n-k)); the statistic is the coefficient or its t value.
  * Randomization AR: statsmodels OLS of y - x*beta0 on [Z* | W] and its wald_test of the
    Z coefficients (use_f=True), i.e. Wald/L, for every assignment Z*.
  * Wild cluster bootstrap: the restricted fit (numpy lstsq of y - null*x_j on the other
    columns), then for every one of the 2^G Rademacher (6^G Webb) weight vectors the
    bootstrap outcome is built and refitted explicitly with numpy lstsq, and the CR1
    variance is computed from its residuals by the textbook formula
    (X'X)^-1 (sum_g X_g'u_g u_g'X_g) (X'X)^-1 * G/(G-1)*(n-1)/(n-k); the observed t is
    checked against statsmodels cluster standard errors.
  * p-values: counts of draws with |T*| >= |T|(1 - 1e-12), T* >= T - 1e-12|T|,
    T* <= T + 1e-12|T| (the contract), divided by the number of draws.
  * Assignment counts: Python's exact integers (math.comb, math.factorial).
"""
import itertools
import json
import math
import os
import platform

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "fixtures")
VERSIONS = {
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "statsmodels": statsmodels.__version__,
    "python": platform.python_version(),
}
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


def distinct_perms(values):
    """All distinct orderings of a list (a multiset), as tuples: positions of each distinct
    value chosen in turn by itertools.combinations."""
    m = len(values)
    kinds = sorted(set(values))
    want = [values.count(v) for v in kinds]
    out = []

    def place(k, free, current):
        if k == len(kinds):
            out.append(tuple(current))
            return
        for chosen in itertools.combinations(free, want[k]):
            nxt = list(current)
            for p in chosen:
                nxt[p] = kinds[k]
            place(k + 1, [p for p in free if p not in chosen], nxt)

    place(0, list(range(m)), [None] * m)
    assert len(out) == len(set(out)) == math.factorial(m) // math.prod(
        math.factorial(c) for c in want)
    return out


def assignments(t, strata):
    """Every distinct assignment: t permuted within each stratum (list of index lists)."""
    per = [distinct_perms([t[i] for i in s]) for s in strata]
    out = []
    for combo in itertools.product(*per):
        a = np.array(t, dtype=float)
        for s, vals in zip(strata, combo):
            a[s] = vals
        out.append(a)
    return out


def sm_fit(y, X, cov, ids=None):
    model = sm.OLS(y, X)
    if cov == "classical":
        return model.fit()
    if cov in ("hc1", "hc3"):
        return model.fit(cov_type=cov.upper())
    return model.fit(cov_type="cluster", cov_kwds={"groups": np.asarray(ids)})


def ri_stat(y0, X, j, cov, statistic, ids):
    fit = sm_fit(y0, X, cov, ids)
    return float(fit.params[j]) if statistic == "estimate" else float(fit.tvalues[j])


def ri_case(name, y, X, j, null, cov, statistic, design, strata, unit_of_group=None, ids=None):
    """Brute-force randomization test; strata list groups, unit_of_group maps groups to units."""
    t = X[:, j].copy()
    y0 = y - null * t
    if unit_of_group is None:
        group_t = list(t)
    else:
        group_t = [t[units[0]] for units in unit_of_group]
    stats = []
    for a in assignments(group_t, strata):
        if unit_of_group is None:
            tstar = a
        else:
            tstar = np.empty(len(t))
            for g, units in enumerate(unit_of_group):
                tstar[units] = a[g]
        Xs = X.copy()
        Xs[:, j] = tstar
        stats.append(ri_stat(y0, Xs, j, cov, statistic, ids))
    obs = ri_stat(y0, X, j, cov, statistic, ids)
    case = {
        "name": name,
        "y": y.tolist(),
        "x": X.tolist(),
        "treatment": j,
        "null": null,
        "design": design,
        "cov": {"kind": cov, "ids": None if ids is None else [int(i) for i in ids]},
        "statistic": statistic,
        "observed": obs,
        "stats_sorted": sorted(stats),
    }
    case.update(counts(obs, stats))
    return case


def randomization_cases(rng):
    cases = []
    # 12 units, 6 treated, complete randomisation: C(12, 6) = 924 assignments.
    n = 12
    t = np.zeros(n)
    t[rng.permutation(n)[:6]] = 1.0
    c1 = rng.normal(size=n)
    y = 1.0 + 0.8 * t + 0.5 * c1 + rng.normal(size=n)
    X = np.column_stack([np.ones(n), t, c1])
    complete = {"kind": "complete"}
    strata = [list(range(n))]
    for cov, stat, null in [("classical", "t", 0.0), ("hc1", "t", 0.0), ("hc3", "t", 0.5),
                            ("classical", "estimate", 0.0), ("hc1", "estimate", 0.3)]:
        cases.append(ri_case(f"complete_{cov}_{stat}_{null}", y, X, 1, null, cov, stat,
                             complete, strata))
    # Blocked: 3 blocks of 4 units, 2 treated each: 6^3 = 216 assignments; block dummies.
    blocks = np.repeat([0, 1, 2], 4)
    tb = np.zeros(n)
    for b in range(3):
        idx = np.where(blocks == b)[0]
        tb[rng.permutation(idx)[:2]] = 1.0
    d = np.column_stack([(blocks == b).astype(float) for b in range(3)])
    yb = d @ np.array([0.5, -0.3, 1.2]) + 0.6 * tb + 0.4 * c1 + rng.normal(size=n)
    Xb = np.column_stack([tb, d, c1])
    bstrata = [list(np.where(blocks == b)[0]) for b in range(3)]
    bdesign = {"kind": "blocked", "blocks": blocks.tolist()}
    for cov, stat in [("hc1", "t"), ("classical", "estimate")]:
        cases.append(ri_case(f"blocked_{cov}_{stat}", yb, Xb, 0, 0.0, cov, stat, bdesign,
                             bstrata))
    # Clustered: 8 clusters of sizes 2-4, 4 treated clusters: C(8, 4) = 70; CR1 errors.
    sizes = [2, 3, 4, 2, 3, 4, 3, 2]
    clusters = np.repeat(np.arange(8), sizes)
    nc = len(clusters)
    tc_cluster = np.zeros(8)
    tc_cluster[rng.permutation(8)[:4]] = 1.0
    tc = tc_cluster[clusters]
    cc = rng.normal(size=nc)
    yc = 0.2 + 0.7 * tc + 0.3 * cc + rng.normal(size=8)[clusters] + rng.normal(size=nc)
    Xc = np.column_stack([np.ones(nc), tc, cc])
    units = [list(np.where(clusters == g)[0]) for g in range(8)]
    cdesign = {"kind": "clustered", "clusters": clusters.tolist()}
    cases.append(ri_case("clustered_cluster_t", yc, Xc, 1, 0.0, "cluster", "t", cdesign,
                         [list(range(8))], unit_of_group=units, ids=clusters))
    # Multi-valued treatment 0/1/2, three units each, complete: 9!/(3!3!3!) = 1680.
    nm = 9
    tm = rng.permutation(np.repeat([0.0, 1.0, 2.0], 3))
    cm = rng.normal(size=nm)
    ym = 0.5 + 0.4 * tm + 0.5 * cm + rng.normal(size=nm)
    Xm = np.column_stack([np.ones(nm), tm, cm])
    for cov, stat in [("classical", "t"), ("hc1", "estimate")]:
        cases.append(ri_case(f"multi_{cov}_{stat}", ym, Xm, 1, 0.0, cov, stat, complete,
                             [list(range(nm))]))
    return cases


def ar_stat(y0, Z, W, cov):
    D = np.column_stack([Z, W])
    fit = sm_fit(y0, D, cov)
    L = Z.shape[1]
    hyp = np.eye(D.shape[1])[:L]
    return float(np.squeeze(fit.wald_test(hyp, use_f=True, scalar=True).statistic))


def ar_cases(rng):
    cases = []
    n = 12
    z = np.zeros(n)
    z[rng.permutation(n)[:6]] = 1.0
    w1 = rng.normal(size=n)
    v = rng.normal(size=n)
    x = 0.3 + 1.0 * z + 0.4 * w1 + v
    y = 0.5 + 0.7 * x + 0.2 * w1 + 0.6 * v + rng.normal(size=n)
    W = np.column_stack([np.ones(n), w1])
    for cov, beta0 in [("classical", 0.0), ("hc1", 0.7), ("hc3", 1.5)]:
        y0 = y - x * beta0
        obs = ar_stat(y0, z[:, None], W, cov)
        stats = [ar_stat(y0, a[:, None], W, cov) for a in assignments(list(z), [list(range(n))])]
        case = {
            "name": f"ar_{cov}_{beta0}",
            "y": y.tolist(), "exog": W.tolist(), "endog": x.tolist(),
            "instruments": z[:, None].tolist(), "beta0": beta0,
            "design": {"kind": "complete"}, "cov": {"kind": cov, "ids": None},
            "observed": obs, "stats_sorted": sorted(stats),
        }
        case.update(counts(obs, stats))
        cases.append(case)
    return cases


def cr1_t(y, X, j, null, ids):
    n, k = X.shape
    xtx_inv = np.linalg.inv(X.T @ X)
    b = np.linalg.lstsq(X, y, rcond=None)[0]
    u = y - X @ b
    groups = np.unique(ids)
    meat = np.zeros((k, k))
    for g in groups:
        s = X[ids == g].T @ u[ids == g]
        meat += np.outer(s, s)
    G = len(groups)
    V = xtx_inv @ meat @ xtx_inv * G / (G - 1) * (n - 1) / (n - k)
    return (b[j] - null) / np.sqrt(V[j, j])


def wild_case(rng, name, G, weights, j, null):
    sizes = rng.integers(3, 8, size=G)
    ids = np.repeat(np.arange(G), sizes)
    n = len(ids)
    x1 = rng.normal(size=n) + rng.normal(size=G)[ids]
    x2 = rng.normal(size=n)
    y = 1.0 + 0.3 * x1 - 0.5 * x2 + rng.normal(size=G)[ids] + rng.normal(size=n) * (1 + 0.5 * np.abs(x1))
    X = np.column_stack([np.ones(n), x1, x2])
    obs = cr1_t(y, X, j, null, ids)
    sm_t = (sm_fit(y, X, "cluster", ids).params[j] - null) / sm_fit(y, X, "cluster", ids).bse[j]
    assert abs(obs - sm_t) < 1e-10 * abs(obs), (obs, sm_t)
    others = [c for c in range(X.shape[1]) if c != j]
    yr = y - null * X[:, j]
    br = np.linalg.lstsq(X[:, others], yr, rcond=None)[0]
    u_r = yr - X[:, others] @ br
    fitted_r = y - u_r
    if weights == "rademacher":
        points = [1.0, -1.0]
    else:
        a, c = math.sqrt(0.5), math.sqrt(1.5)
        points = [1.0, -1.0, a, -a, c, -c]
    stats = []
    for wv in itertools.product(points, repeat=G):
        ystar = fitted_r + u_r * np.asarray(wv)[ids]
        stats.append(float(cr1_t(ystar, X, j, null, ids)))
    case = {
        "name": name, "y": y.tolist(), "x": X.tolist(), "coef_index": j, "null": null,
        "clusters": ids.tolist(), "weights": weights, "observed": float(obs),
        "stats_sorted": sorted(stats),
    }
    case.update(counts(obs, stats))
    return case


def count_cases():
    def multinomial(*ks):
        return math.factorial(sum(ks)) // math.prod(math.factorial(k) for k in ks)
    return [
        {"what": "C(12,6)", "n": 12, "ones": 6, "count": str(math.comb(12, 6))},
        {"what": "C(30,15)", "n": 30, "ones": 15, "count": str(math.comb(30, 15))},
        {"what": "C(130,65)", "n": 130, "ones": 65, "count": str(math.comb(130, 65))},
        {"what": "C(140,70)", "n": 140, "ones": 70, "count": str(math.comb(140, 70))},
        {"what": "multinomial(4,5,6)", "multi": [4, 5, 6], "count": str(multinomial(4, 5, 6))},
        {"what": "u128 max", "count": str(2**128 - 1)},
    ]


def main():
    rng = np.random.default_rng(20240611)
    ri = randomization_cases(rng)
    ar = ar_cases(rng)
    wild = [wild_case(rng, "wild_rademacher_g10", 10, "rademacher", 1, 0.0),
            wild_case(rng, "wild_rademacher_g10_null", 10, "rademacher", 2, -0.4),
            wild_case(rng, "wild_webb_g5", 5, "webb", 1, 0.1)]
    files = {"resample_ri.json": ri, "resample_ar.json": ar, "resample_wild.json": wild,
             "resample_counts.json": count_cases()}
    for fname, cases in files.items():
        with open(os.path.join(OUT, fname), "w") as f:
            json.dump({"versions": VERSIONS, "cases": cases}, f, indent=1)
            f.write("\n")
        print(fname, len(cases))


if __name__ == "__main__":
    main()
