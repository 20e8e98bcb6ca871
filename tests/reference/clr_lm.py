#!/usr/bin/env python3
"""Reference fixture for the Kleibergen LM and Moreira CLR tests (src/estimate/clr.rs).

Regenerate from the crate root with

    python3 tests/reference/clr_lm.py

(needs numpy, scipy and ivmodels from PyPI). Every data set is invented here from a seeded
generator (numpy default_rng); no external data. Writes tests/reference/fixtures/clr_lm.json
with the data, the setup, the expected values and the library versions.

It also writes tests/reference/fixtures/clr_sets.json: the LM and CLR confidence sets (95%)
on further invented cases, from two references:
  * ivmodels.tests.inverse_lagrange_multiplier_test and
    inverse_conditional_likelihood_ratio_test (tol=1e-10); and
  * a brute-force scan written here: the LM statistic and the CLR conditional p-value
    (numpy formulas below; the p-value from ivmodels'
    conditional_likelihood_ratio_critical_value_function, "moreira2003conditional",
    tol=1e-11, conditioning on Q_T, which is ivmodels' s_min for one regressor) on
    SCAN + 1 points beta = centre + scale * tan(theta), theta uniform on [-pi/2, pi/2]
    (both ends the exact limit at +-infinity, from e = -x), every sign change refined by
    bisection in beta to 1e-14 relative.
ivmodels' inverse LM searches outward from LIML for the outermost crossing on each side, so
it can miss inner pieces (LM also dips to zero where the AR statistic peaks); the fixture
records, per set, whether ivmodels agrees with the scan ("ivmodels_agrees", endpoints to
1e-6 relative) and the Rust tests check against the scan.

Where each expected value comes from (one endogenous regressor, homoskedastic variant):
  * LM statistic and p-value: ivmodels.tests.lagrange_multiplier_test(Z, X, y, beta0,
    C=exogenous columns, fit_intercept=True).
  * CLR statistic and conditional p-value: ivmodels.tests.conditional_likelihood_ratio_test
    with critical_values="moreira2003conditional" (numerical integration of the
    conditional law given the conditioning statistic) and tol=1e-10.
  * The conditioning statistic (called q_t in the fixture) is not returned by ivmodels; it
    is computed here with numpy from its textbook definition (Moreira 2003):
    (n - L - |W|) * xt' P xt / xt' M xt with xt = x - e (e' M x)/(e' M e), e = y - x beta0,
    P the projection on M_W Z and M = I - P_[Z|W]. The script checks that its own numpy
    LM and CLR (the same formulas) agree with ivmodels to 1e-10 relative, which pins the
    degrees-of-freedom convention (n - L - |W|, the intercept counted in |W|).
"""
import importlib.metadata
import json
import os
import platform


import numpy as np
import scipy
from ivmodels.tests import (
    conditional_likelihood_ratio_test,
    inverse_conditional_likelihood_ratio_test,
    inverse_lagrange_multiplier_test,
    lagrange_multiplier_test,
)
from ivmodels.tests.conditional_likelihood_ratio import (
    conditional_likelihood_ratio_critical_value_function,
)

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "fixtures")
VERSIONS = {
    "ivmodels": importlib.metadata.version("ivmodels"),
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "python": platform.python_version(),
}


def own(y, x, Z, W, beta0):
    """LM, CLR and the conditioning statistic with numpy (W includes the constant)."""
    n, L = Z.shape
    D = np.column_stack([Z, W])

    def m(A, v):
        return v - A @ np.linalg.lstsq(A, v, rcond=None)[0]

    e = y - x * beta0
    ew, xw = m(W, e), m(W, x)
    me, mx = m(D, e), m(D, x)
    pe, px = ew - me, xw - mx
    df = n - L - W.shape[1]
    rho = (me @ mx) / (me @ me)
    pxt, mxt = px - rho * pe, mx - rho * me
    qs = df * (pe @ pe) / (me @ me)
    qt = df * (pxt @ pxt) / (mxt @ mxt)
    qst2 = df**2 * (pe @ pxt) ** 2 / ((me @ me) * (mxt @ mxt))
    lm = qst2 / qt
    clr = 0.5 * (qs - qt + np.sqrt((qs - qt) ** 2 + 4 * qst2))
    return lm, clr, qt


def case(name, seed, n, L, pi, rho, beta, n_exog):
    """Invented design: x = Z pi + v, y = x beta + W gamma + u, corr(u, v) = rho."""
    rng = np.random.default_rng(seed)
    Z = rng.normal(size=(n, L))
    C = rng.normal(size=(n, n_exog))
    u = rng.normal(size=n)
    v = rho * u + np.sqrt(1 - rho**2) * rng.normal(size=n)
    x = Z @ np.full(L, pi) + C @ np.full(n_exog, 0.3) + v
    y = 1.5 + x * beta + C @ np.full(n_exog, -0.7) + u
    beta0 = 0.0
    W = np.column_stack([np.ones(n), C])
    lm, lm_p = lagrange_multiplier_test(Z, x.reshape(-1, 1), y, np.array([beta0]), C=C)
    clr, clr_p = conditional_likelihood_ratio_test(
        Z, x.reshape(-1, 1), y, np.array([beta0]), C=C,
        critical_values="moreira2003conditional", tol=1e-10,
    )
    my_lm, my_clr, qt = own(y, x, Z, W, beta0)
    assert abs(my_lm - lm) <= 1e-10 * abs(lm), (name, my_lm, lm)
    assert abs(my_clr - clr) <= 1e-10 * abs(clr), (name, my_clr, clr)
    data = {f"z{j + 1}": Z[:, j].tolist() for j in range(L)}
    data.update({f"c{j + 1}": C[:, j].tolist() for j in range(n_exog)})
    data.update({"y": y.tolist(), "x": x.tolist()})
    return {
        "name": name,
        "data": data,
        "setup": {
            "outcome": "y",
            "endog": ["x"],
            "instruments": [f"z{j + 1}" for j in range(L)],
            "exog": ["const"] + [f"c{j + 1}" for j in range(n_exog)],
            "beta0": beta0,
            "seed": seed,
        },
        "expected": {
            "lm": float(lm), "lm_p_value": float(lm_p),
            "clr": float(clr), "clr_p_value": float(clr_p),
            "q_t": float(qt),
        },
    }


SCAN = 20000
ALPHA = 0.05


def reduced(y, x, Z, W):
    """M_W and M_[Z|W] residuals of y and x."""
    D = np.column_stack([Z, W])

    def m(A, v):
        return v - A @ np.linalg.lstsq(A, v, rcond=None)[0]

    return (m(W, y), m(W, x)), (m(D, y), m(D, x))


def stats_at(red, df, L, b1, b2):
    """(LM, CLR p-value) for e = b1 * y - b2 * x, from the textbook formulas."""
    (wy, wx), (dy, dx) = red
    ew, me = b1 * wy - b2 * wx, b1 * dy - b2 * dx
    pe, px = ew - me, (wx - dx)
    if b1 != 0.0:
        rho = (me @ dx) / (me @ me)
        pxt, mxt = px - rho * pe, dx - rho * me
    else:
        # beta = infinity: e is along x and x - rho e vanishes; its direction tends to
        # Y Omega^{-1} (b2, b1) for b = (b1, -b2) (Omega = M-residual cross products of
        # (y, x)), the complement of e uncorrelated with it, which we use here.
        om = np.array([[dy @ dy, dy @ dx], [dx @ dy, dx @ dx]])
        g = np.linalg.solve(om, np.array([b2, b1]))
        pxt, mxt = g[0] * (wy - dy) + g[1] * px, g[0] * dy + g[1] * dx
    qs = df * (pe @ pe) / (me @ me)
    qt = df * (pxt @ pxt) / (mxt @ mxt)
    qst2 = df**2 * (pe @ pxt) ** 2 / ((me @ me) * (mxt @ mxt))
    lm = qst2 / qt
    clr = 0.5 * (qs - qt + np.sqrt((qs - qt) ** 2 + 4 * qst2))
    p = conditional_likelihood_ratio_critical_value_function(
        k=L, mx=1, md=0, lambdas=np.array([qt]), z=clr,
        critical_values="moreira2003conditional", tol=1e-11,
    )
    return lm, float(p)


def scan_set(inside, centre, scale):
    """Pieces of {beta: inside(beta)} by the scan described in the module docstring."""
    thetas = np.linspace(-np.pi / 2, np.pi / 2, SCAN + 1)
    flags = [inside(None)] + [inside(centre + scale * np.tan(t)) for t in thetas[1:-1]]
    flags.append(flags[0])
    bounds = []
    for j in range(SCAN):
        if flags[j] != flags[j + 1]:
            lo = -np.inf if j == 0 else centre + scale * np.tan(thetas[j])
            hi = np.inf if j + 1 == SCAN else centre + scale * np.tan(thetas[j + 1])
            if not (np.isfinite(lo) and np.isfinite(hi)):
                # an end cell: bisect in theta, where the cell is finite
                lo_t, hi_t, lo_in = thetas[j], thetas[j + 1], flags[j]
                lo_t = lo_t if j > 0 else np.nextafter(lo_t, 0.0)
                hi_t = hi_t if j + 1 < SCAN else np.nextafter(hi_t, 0.0)
                for _ in range(200):
                    mid = 0.5 * (lo_t + hi_t)
                    if mid in (lo_t, hi_t):
                        break
                    if inside(centre + scale * np.tan(mid)) == lo_in:
                        lo_t = mid
                    else:
                        hi_t = mid
                bounds.append(centre + scale * np.tan(0.5 * (lo_t + hi_t)))
                continue
            lo_in = flags[j]
            for _ in range(200):
                mid = 0.5 * (lo + hi)
                if abs(hi - lo) <= 1e-14 * max(abs(mid), 1e-300) or mid in (lo, hi):
                    break
                if inside(mid) == lo_in:
                    lo = mid
                else:
                    hi = mid
            bounds.append(0.5 * (lo + hi))
    pieces, start = [], (-np.inf if flags[0] else None)
    for b in bounds:
        if start is None:
            start = b
        else:
            pieces.append([start, b])
            start = None
    if start is not None:
        pieces.append([start, np.inf])
    return pieces


def jsonable(pieces):
    return [[float(a) if np.isfinite(a) else str(a), float(b) if np.isfinite(b) else str(b)]
            for a, b in pieces]


def agrees(a, b):
    if len(a) != len(b):
        return False
    for (a0, a1), (b0, b1) in zip(a, b):
        for u, v in ((a0, b0), (a1, b1)):
            if np.isinf(u) or np.isinf(v):
                if u != v:
                    return False
            elif abs(u - v) > 1e-6 * max(abs(u), abs(v), 1.0):
                return False
    return True


def set_case(name, seed, n, L, pi, rho, beta, n_exog):
    """The LM and CLR sets on an invented design (as in case())."""
    rng = np.random.default_rng(seed)
    Z = rng.normal(size=(n, L))
    C = rng.normal(size=(n, n_exog))
    u = rng.normal(size=n)
    v = rho * u + np.sqrt(1 - rho**2) * rng.normal(size=n)
    x = Z @ np.full(L, pi) + C @ np.full(n_exog, 0.3) + v
    y = 1.5 + x * beta + C @ np.full(n_exog, -0.7) + u
    W = np.column_stack([np.ones(n), C])
    red = reduced(y, x, Z, W)
    df = n - L - W.shape[1]
    (wy, wx), (dy, dx) = red
    pxv, pyv = wx - dx, wy - dy
    centre = (pxv @ pyv) / (pxv @ pxv)
    scale = np.sqrt(((dy - centre * dx) @ (dy - centre * dx)) / df / (pxv @ pxv))

    def at(b):
        return stats_at(red, df, L, 0.0, -1.0) if b is None else stats_at(red, df, L, 1.0, b)

    crit = scipy.stats.chi2.ppf(1 - ALPHA, df=1)
    lm_scan = scan_set(lambda b: at(b)[0] <= crit, centre, scale)
    clr_scan = scan_set(lambda b: at(b)[1] >= ALPHA, centre, scale)
    X = x.reshape(-1, 1)
    lm_iv = inverse_lagrange_multiplier_test(Z, X, y, alpha=ALPHA, C=C, tol=1e-10).boundaries
    clr_iv = inverse_conditional_likelihood_ratio_test(
        Z, X, y, alpha=ALPHA, C=C, tol=1e-10).boundaries
    lm_iv = [list(p) for p in lm_iv]
    clr_iv = [list(p) for p in clr_iv]
    data = {f"z{j + 1}": Z[:, j].tolist() for j in range(L)}
    data.update({f"c{j + 1}": C[:, j].tolist() for j in range(n_exog)})
    data.update({"y": y.tolist(), "x": x.tolist()})
    return {
        "name": name,
        "data": data,
        "setup": {
            "outcome": "y", "endog": ["x"],
            "instruments": [f"z{j + 1}" for j in range(L)],
            "exog": ["const"] + [f"c{j + 1}" for j in range(n_exog)],
            "confidence": 1 - ALPHA, "seed": seed,
        },
        "expected": {
            "lm_scan": jsonable(lm_scan), "clr_scan": jsonable(clr_scan),
            "lm_ivmodels": jsonable(lm_iv), "clr_ivmodels": jsonable(clr_iv),
            "lm_ivmodels_agrees": agrees(lm_iv, lm_scan),
            "clr_ivmodels_agrees": agrees(clr_iv, clr_scan),
            "lm_at_infinity": float(at(None)[0]), "clr_p_at_infinity": at(None)[1],
        },
        "note": "" if agrees(lm_iv, lm_scan) else (
            "ivmodels' inverse LM set differs from the scan: its outward search from LIML "
            "stops at the first crossing on each side and misses the other pieces; the "
            "scan (every crossing on the whole line) is the reference"),
    }


def write_sets():
    cases = [
        set_case("strong_two", 11, 150, 2, 0.6, 0.5, 1.0, 1),
        set_case("weak_three_unbounded", 20261204, 120, 3, 0.12, 0.6, 0.5, 1),
        set_case("moderate_three", 31, 150, 3, 0.25, 0.7, 0.5, 1),
        set_case("moderate_four", 5, 200, 4, 0.2, -0.5, -1.0, 2),
        set_case("very_weak_four", 8, 100, 4, 0.03, 0.9, 0.0, 1),
    ]
    with open(os.path.join(OUT, "clr_sets.json"), "w") as fh:
        json.dump({"versions": VERSIONS, "alpha": ALPHA, "scan_cells": SCAN,
                   "cases": cases}, fh)
    for c in cases:
        e = c["expected"]
        print(c["name"], {k: v for k, v in e.items()})


def main():
    cases = [
        # weak instruments, three of them, a true effect: CLR and LM differ visibly
        case("weak_three", 20261204, 120, 3, 0.12, 0.6, 0.5, 1),
        # strong instruments, four, a null effect
        case("strong_four", 777, 200, 4, 0.5, -0.4, 0.0, 2),
        # two instruments, moderate, a true effect (cos^0 integrand at L = 2)
        case("moderate_two", 4242, 80, 2, 0.3, 0.3, 0.8, 1),
    ]
    os.makedirs(OUT, exist_ok=True)
    with open(os.path.join(OUT, "clr_lm.json"), "w") as fh:
        json.dump({"versions": VERSIONS, "cases": cases}, fh)
    for c in cases:
        print(c["name"], c["expected"])
    write_sets()


if __name__ == "__main__":
    main()
