#!/usr/bin/env python3
"""Reference fixture for the Kleibergen LM and Moreira CLR tests (src/estimate/clr.rs).

Regenerate from the crate root with

    python3 tests/reference/clr_lm.py

(needs numpy, scipy and ivmodels from PyPI). Every data set is invented here from a seeded
generator (numpy default_rng); no external data. Writes tests/reference/fixtures/clr_lm.json
with the data, the setup, the expected values and the library versions.

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
from ivmodels.tests import conditional_likelihood_ratio_test, lagrange_multiplier_test

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


if __name__ == "__main__":
    main()
