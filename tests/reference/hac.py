#!/usr/bin/env python3
"""Reference fixture for HAC (Bartlett kernel) errors: tests/reference/fixtures/hac.json.

Regenerate from the crate root with `python3 tests/reference/hac.py` (numpy, statsmodels,
linearmodels). The series are invented here from default_rng(20261203): an outcome, one
endogenous regressor, two instruments and one control, with AR(1) errors and instruments.

sworn's bandwidth b gives rows d apart the weight 1 - d/b; b = L + 1 is "L lags" in the
1987 parametrisation that statsmodels (maxlags=L) and linearmodels (bandwidth=L) use.
Where each expected value comes from:
  * OLS HAC covariance: statsmodels OLS cov_type="HAC", maxlags=L, use_correction=True
    (the factor n/(n-k)); asserted equal to a direct numpy sandwich.
  * 2SLS HAC covariance: linearmodels IV2SLS cov_type="kernel", kernel="bartlett",
    bandwidth=L, debiased=True; asserted equal to a direct numpy sandwich on X-hat.
  * LIML HAC covariance: linearmodels IVLIML cov_type="kernel", bandwidth=L, debiased=True.
  * First-stage robust F and Anderson-Rubin at beta0 = 0: statsmodels OLS with HAC and
    wald_test(use_f=True), i.e. Wald/q.
  * Hansen's J with a HAC weight: two-step GMM written out in numpy (Omega from the 2SLS
    residuals, uncentered, no small-sample factor), asserted equal to linearmodels IVGMM
    weight_type="kernel", bandwidth=L, center=False, two steps.
  * Rows missing from the sample keep their place: the "gap" case drops rows and computes
    the sandwich with the dropped rows' scores set to zero (numpy).
  * Newey-West (1994) automatic bandwidth: the published formula for the Bartlett kernel
    (n = floor(4 (T/100)^(2/9)), gamma = 1.1447 (s1/s0)^(2/3), b = gamma T^(1/3), weights
    on every non-intercept score) written out in numpy independently of sworn (typed from
    memory of the paper). linearmodels' own automatic bandwidth is recorded for information:
    it rounds up and standardises the score columns, so it is not the same number.
"""
import json
import math
import os
import platform

import linearmodels
import numpy as np
import statsmodels
import statsmodels.api as sm
from linearmodels.iv import IV2SLS, IVGMM, IVLIML

SEED = 20261203
OUT = os.path.join(os.path.dirname(__file__), "fixtures", "hac.json")


def ar1(rng, n, rho):
    e = rng.standard_normal(n)
    out = np.empty(n)
    out[0] = e[0]
    for t in range(1, n):
        out[t] = rho * out[t - 1] + e[t]
    return out


def bartlett_meat(scores, positions, b):
    meat = scores.T @ scores
    n = len(positions)
    for i in range(n):
        for j in range(i + 1, n):
            d = positions[j] - positions[i]
            w = 1.0 - d / b
            if w <= 0:
                break
            c = w * np.outer(scores[i], scores[j])
            meat += c + c.T
    return meat


def sandwich(x, u, positions, b):
    n, k = x.shape
    bread = np.linalg.inv(x.T @ x)
    meat = bartlett_meat(x * u[:, None], positions, b)
    return bread @ meat @ bread * n / (n - k)


def nw1994(x, u, positions, constant):
    n = len(u)
    h = (np.delete(x, constant, axis=1) if constant is not None else x).sum(axis=1) * u
    m = int(math.floor(4 * (n / 100) ** (2 / 9)))
    sigma = np.zeros(m + 1)
    for t in range(n):
        for s in range(t, n):
            d = positions[s] - positions[t]
            if d > m:
                break
            sigma[d] += h[t] * h[s]
    sigma /= n
    s0 = sigma[0] + 2 * sigma[1:].sum()
    s1 = 2 * (np.arange(1, m + 1) * sigma[1:]).sum()
    gamma = 1.1447 * ((s1 / s0) ** 2) ** (1 / 3)
    return gamma * n ** (1 / 3)


def main():
    rng = np.random.default_rng(SEED)
    n = 150
    z1 = ar1(rng, n, 0.6)
    z2 = ar1(rng, n, 0.3)
    w = ar1(rng, n, 0.5)
    v = ar1(rng, n, 0.5)
    u = ar1(rng, n, 0.6) + 0.5 * v
    x = 0.6 * z1 + 0.4 * z2 + 0.3 * w + v
    y = 1.0 + 0.8 * x - 0.5 * w + u
    ones = np.ones(n)
    positions = np.arange(n)
    lags = 4
    b = lags + 1.0
    expected = {"bandwidth": b}

    # OLS of y on [x, w, 1].
    X = np.column_stack([x, w, ones])
    ols = sm.OLS(y, X).fit(cov_type="HAC", cov_kwds={"maxlags": lags, "use_correction": True})
    direct = sandwich(X, ols.resid, positions, b)
    assert np.allclose(ols.cov_params(), direct, rtol=1e-10, atol=0)
    expected["ols_coef"] = ols.params.tolist()
    expected["ols_cov"] = np.asarray(ols.cov_params()).tolist()

    # 2SLS of y on [x | w, 1] with instruments [z1, z2].
    exog = np.column_stack([w, ones])
    Z = np.column_stack([z1, z2, w, ones])
    iv = IV2SLS(y, exog, x[:, None], np.column_stack([z1, z2])).fit(
        cov_type="kernel", kernel="bartlett", bandwidth=lags, debiased=True
    )
    # linearmodels orders [exog | endog]; sworn [endog | exog].
    order = [2, 0, 1]
    params = np.asarray(iv.params)[order]
    lm_cov = np.asarray(iv.cov)[np.ix_(order, order)]
    Xf = np.column_stack([x, w, ones])
    xhat = Z @ np.linalg.lstsq(Z, Xf, rcond=None)[0]
    resid = y - Xf @ params
    direct = sandwich(xhat, resid, positions, b)
    assert np.allclose(lm_cov, direct, rtol=1e-9, atol=0)
    expected["tsls_coef"] = params.tolist()
    expected["tsls_cov"] = lm_cov.tolist()

    # LIML with the same kernel (linearmodels IVLIML, debiased).
    liml = IVLIML(y, exog, x[:, None], np.column_stack([z1, z2])).fit(
        cov_type="kernel", kernel="bartlett", bandwidth=lags, debiased=True
    )
    expected["liml_coef"] = np.asarray(liml.params)[order].tolist()
    expected["liml_cov"] = np.asarray(liml.cov)[np.ix_(order, order)].tolist()

    # First stage: x on [z1, z2, w, 1], robust F of the instruments (Wald/2).
    fs = sm.OLS(x, Z).fit(cov_type="HAC", cov_kwds={"maxlags": lags, "use_correction": True})
    r = np.zeros((2, 4))
    r[0, 0] = r[1, 1] = 1
    expected["first_stage_robust_f"] = float(fs.wald_test(r, use_f=True, scalar=True).statistic)
    expected["first_stage_cov"] = np.asarray(fs.cov_params()).tolist()
    # Anderson-Rubin at beta0 = 0: y on [z1, z2, w, 1], instruments jointly (Wald/2).
    rf = sm.OLS(y, Z).fit(cov_type="HAC", cov_kwds={"maxlags": lags, "use_correction": True})
    expected["ar_statistic_at_0"] = float(rf.wald_test(r, use_f=True, scalar=True).statistic)

    # Hansen's J, two-step GMM with the Bartlett weight at the 2SLS residuals.
    zu = Z * resid[:, None]
    omega = bartlett_meat(zu, positions, b)
    oi = np.linalg.inv(omega)
    a = Xf.T @ Z @ oi
    beta2 = np.linalg.solve(a @ Z.T @ Xf, a @ Z.T @ y)
    e2 = y - Xf @ beta2
    g = Z.T @ e2
    expected["hansen_j"] = float(g @ oi @ g)
    gmm = IVGMM(y, exog, x[:, None], np.column_stack([z1, z2]), weight_type="kernel",
                kernel="bartlett", bandwidth=lags, center=False).fit(iter_limit=2)
    assert abs(gmm.j_stat.stat - expected["hansen_j"]) <= 1e-9 * expected["hansen_j"]

    # A gap: rows 10..12 and 70 leave the sample; neighbours keep their distance.
    keep = np.array([i for i in range(n) if i not in (10, 11, 12, 70)])
    Xg = X[keep]
    coef = np.linalg.lstsq(Xg, y[keep], rcond=None)[0]
    ug = y[keep] - Xg @ coef
    expected["gap_rows_dropped"] = [10, 11, 12, 70]
    expected["gap_ols_coef"] = coef.tolist()
    expected["gap_ols_cov"] = sandwich(Xg, ug, keep, b).tolist()

    # Newey-West (1994) automatic bandwidth for the OLS and 2SLS scores.
    expected["nw1994_ols"] = float(nw1994(X, ols.resid, positions, 2))
    expected["nw1994_tsls"] = float(nw1994(xhat, resid, positions, 2))
    expected["nw1994_gap_ols"] = float(nw1994(Xg, ug, keep, 2))
    auto = IV2SLS(y, exog, x[:, None], np.column_stack([z1, z2])).fit(
        cov_type="kernel", kernel="bartlett", debiased=True
    )
    expected["linearmodels_auto_bandwidth_for_information"] = float(auto.cov_config["bandwidth"])

    doc = {
        "source": "tests/reference/hac.py",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "statsmodels": statsmodels.__version__,
            "linearmodels": linearmodels.__version__,
        },
        "setup": {"lags_1987": lags, "columns": "ols: [x, w, 1]; 2sls: [x | w, 1], instruments [z1, z2]"},
        "data": {"y": y.tolist(), "x": x.tolist(), "w": w.tolist(), "z1": z1.tolist(), "z2": z2.tolist()},
        "expected": expected,
    }
    with open(OUT, "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")
    print("wrote", OUT)
    print({k: v for k, v in expected.items() if not isinstance(v, list)})


if __name__ == "__main__":
    main()
