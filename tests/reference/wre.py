#!/usr/bin/env python3
"""Reference fixtures for the wild restricted efficient (WRE) cluster bootstrap of a 2SLS
coefficient (Davidson and MacKinnon 2010, JBES 28; src/estimate/resample/wre.rs).

Regenerate from the crate root with

    python3 tests/reference/wre.py

(needs numpy, scipy, statsmodels). Every data set is invented here from a seeded numpy
generator (default_rng); no external data. Writes tests/reference/fixtures/resample_wre.json
with the data, the setup, the expected values and the library versions.

Where each expected value comes from (brute force, independent of the Rust code):
  * Observed t: explicit 2SLS, Xhat = Z (Z'Z)^-1 Z'X with Z = [instruments | exog],
    X = [endog | exog], b = (Xhat'Xhat)^-1 Xhat'y, structural residuals u = y - X b, and the
    textbook CR1 sandwich (Xhat'Xhat)^-1 (sum_g Xhat_g'u_g u_g'Xhat_g) (Xhat'Xhat)^-1
    * G/(G-1) * (n-1)/(n-k); t = (b_0 - null)/se_0. The 2SLS coefficients are checked
    against statsmodels' IV2SLS (statsmodels.sandbox.regression.gmm).
  * WRE data-generating process: restricted structural fit, numpy lstsq of y - null*x on W
    (gamma, residuals u); efficient reduced form, lstsq of x on [Z, W, u]; pi = its Z and W
    coefficients; v = x - [Z, W] pi (the u term is NOT subtracted, Davidson and MacKinnon
    2010, section 4). For every one of the 2^G Rademacher (6^G Webb) weight vectors w
    (cluster weights, expanded to observations): x* = [Z, W] pi + v*w,
    y* = null*x* + W gamma + u*w, refitted by the explicit 2SLS above with CR1.
  * p-values: counts of draws with |T*| >= |T|(1 - 1e-12), T* >= T - 1e-12|T|,
    T* <= T + 1e-12|T| (the project's contract), divided by the number of draws.
"""
import itertools
import json
import math
import os
import platform

import numpy as np
import scipy
import statsmodels
from statsmodels.sandbox.regression.gmm import IV2SLS

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


def tsls_cr1_t(y, x, W, Zx, null, ids):
    """Explicit 2SLS of y on [x | W] with instruments [Zx | W]; CR1 t of coefficient 0."""
    X = np.column_stack([x, W])
    Z = np.column_stack([Zx, W])
    n, k = X.shape
    xhat = Z @ np.linalg.solve(Z.T @ Z, Z.T @ X)
    bread = np.linalg.inv(xhat.T @ xhat)
    b = bread @ (xhat.T @ y)
    u = y - X @ b
    groups = np.unique(ids)
    meat = np.zeros((k, k))
    for g in groups:
        s = xhat[ids == g].T @ u[ids == g]
        meat += np.outer(s, s)
    G = len(groups)
    V = bread @ meat @ bread * G / (G - 1) * (n - 1) / (n - k)
    return (b[0] - null) / np.sqrt(V[0, 0]), b


def wre_case(rng, name, G, weights, n_instr, null):
    sizes = rng.integers(3, 8, size=G)
    ids = np.repeat(np.arange(G), sizes)
    n = len(ids)
    Zx = rng.normal(size=(n, n_instr)) + 0.5 * rng.normal(size=(G, n_instr))[ids]
    w1 = rng.normal(size=n)
    W = np.column_stack([np.ones(n), w1])
    common = rng.normal(size=n)
    x = Zx @ np.linspace(0.8, 0.4, n_instr) + 0.3 * w1 + common + rng.normal(size=G)[ids]
    y = (0.5 + 0.4 * x - 0.7 * w1 + 0.8 * common + rng.normal(size=G)[ids]
         + rng.normal(size=n) * (1 + 0.3 * np.abs(w1)))
    obs, b = tsls_cr1_t(y, x, W, Zx, null, ids)
    sm_b = IV2SLS(y, np.column_stack([x, W]), np.column_stack([Zx, W])).fit().params
    assert np.max(np.abs(sm_b - b)) < 1e-10 * np.max(np.abs(b)), (sm_b, b)
    # Restricted structural fit.
    yr = y - null * x
    gamma = np.linalg.lstsq(W, yr, rcond=None)[0]
    u = yr - W @ gamma
    # Efficient reduced form: x on [Z, W, u]; keep the Z, W part.
    ZW = np.column_stack([Zx, W])
    coef = np.linalg.lstsq(np.column_stack([ZW, u]), x, rcond=None)[0]
    x_fit = ZW @ coef[:-1]
    v = x - x_fit
    if weights == "rademacher":
        points = [1.0, -1.0]
    else:
        a, c = math.sqrt(0.5), math.sqrt(1.5)
        points = [1.0, -1.0, a, -a, c, -c]
    stats = []
    ones = None
    for wv in itertools.product(points, repeat=G):
        we = np.asarray(wv)[ids]
        xs = x_fit + v * we
        ys = null * xs + W @ gamma + u * we
        t, _ = tsls_cr1_t(ys, xs, W, Zx, null, ids)
        stats.append(float(t))
        if all(p == 1.0 for p in wv):
            ones = float(t)
    assert abs(ones - obs) < 1e-10 * abs(obs), (ones, obs)
    case = {
        "name": name, "y": y.tolist(), "exog": W.tolist(), "endog": x.tolist(),
        "instruments": Zx.tolist(), "null": null, "clusters": ids.tolist(),
        "weights": weights, "observed": float(obs), "stats_sorted": sorted(stats),
    }
    case.update(counts(obs, stats))
    return case


def main():
    rng = np.random.default_rng(20101)
    cases = [
        wre_case(rng, "rademacher_g8_just", 8, "rademacher", 1, 0.4),
        wre_case(rng, "rademacher_g8_over_null0", 8, "rademacher", 2, 0.0),
        wre_case(rng, "webb_g4_over", 4, "webb", 3, 0.2),
    ]
    os.makedirs(OUT, exist_ok=True)
    with open(os.path.join(OUT, "resample_wre.json"), "w") as f:
        json.dump({"versions": VERSIONS, "cases": cases}, f, indent=1)
    for c in cases:
        print(c["name"], "observed", c["observed"], "p", c["count_two"] / c["draws"])


if __name__ == "__main__":
    main()
