#!/usr/bin/env python3
"""Reference fixture for probability weights: tests/reference/fixtures/weights.json.

Regenerate from the crate root with `python3 tests/reference/weights.py` (numpy, pandas,
statsmodels, linearmodels). The data are invented here from default_rng(20261204): 160 rows
in 16 clusters, an outcome y, one endogenous regressor x, two instruments z1 and z2, one
control c and a positive sampling weight w; one row has no weight (it leaves the sample like
any missing value) and one row has weight zero (dropped and counted). The references see the
158 rows that remain (w > 0 and every value present).

Where each expected value comes from:
  * Weighted OLS, its R^2 and residual SD: statsmodels WLS(y, X, weights=w); standard errors
    with cov_type "HC0", "HC1" and "cluster" (groups = g). statsmodels' cluster default
    (use_correction=True, df_correction=True) multiplies by G/(G-1) * (n-1)/(n-k): the CR1
    factor sworn uses. R^2 is WLS's rsquared (weighted, centred), residual SD sqrt(scale).
  * Weighted 2SLS: linearmodels IV2SLS(..., weights=w) with cov_type "robust", debiased=True
    (HC1, n/(n-k)) and "clustered", debiased=True (G/(G-1) * (n-1)/(n-k)).
  * Weighted LIML (HC1): linearmodels IVLIML(..., weights=w), cov_type "robust", debiased=True.
  * First stage of the weighted 2SLS: the partial R^2 from linearmodels' first_stage
    diagnostics (weighted); the robust F is statsmodels WLS of x on [instruments, controls]
    with HC1 and wald_test(use_f=True) on the instruments (Wald/q).
  * Anderson-Rubin at beta0 = 0 (HC1): statsmodels WLS of y on [instruments, controls] with
    HC1, wald_test(use_f=True) on the instruments.
  * Every weighted fit is also asserted equal to an unweighted fit on rows scaled by sqrt(w)
    (statsmodels OLS / linearmodels IV2SLS), which is how sworn computes it.
"""
import json
import os
import platform

import linearmodels
import numpy as np
import pandas as pd
import statsmodels
import statsmodels.api as sm
from linearmodels.iv import IV2SLS, IVLIML

SEED = 20261204
OUT = os.path.join(os.path.dirname(__file__), "fixtures", "weights.json")


def make_data():
    rng = np.random.default_rng(SEED)
    n, G = 160, 16
    g = np.repeat(np.arange(G), n // G)
    a = rng.standard_normal(G)[g]
    z1 = rng.standard_normal(n)
    z2 = (rng.uniform(size=n) < 0.5).astype(float)
    c = rng.uniform(0, 5, n)
    u = rng.standard_normal(n) * (1 + 0.5 * c / 5) + 0.5 * a
    x = 0.8 * z1 + 0.6 * z2 + 0.3 * c + 0.5 * u + rng.standard_normal(n)
    y = 1.0 + 1.5 * x - 0.4 * c + u
    w = np.round(rng.uniform(0.2, 4.0, n), 3)
    w_col = [float(v) for v in w]
    w_col[7] = None  # missing weight: dropped like a missing value
    w_col[19] = 0.0  # zero weight: dropped and counted
    return {"g": g, "z1": z1, "z2": z2, "c": c, "x": x, "y": y, "w": w_col}


def main():
    data = make_data()
    df = pd.DataFrame(data)
    df["w"] = pd.to_numeric(df["w"])
    used = df[df["w"].notna() & (df["w"] > 0)].reset_index(drop=True)
    n = len(used)
    w = used["w"].to_numpy()
    const = np.ones(n)
    X = np.column_stack([const, used["x"], used["c"]])
    y = used["y"].to_numpy()
    names = ["intercept", "x", "c"]
    out = {"n": n, "dropped_missing": 1, "dropped_zero_weight": 1}

    # Weighted OLS.
    ols = {}
    for kind, kw in [("hc0", dict(cov_type="HC0")), ("hc1", dict(cov_type="HC1")),
                     ("cluster", dict(cov_type="cluster", cov_kwds={"groups": used["g"].to_numpy()}))]:
        fit = sm.WLS(y, X, weights=w).fit(**kw)
        scaled = sm.OLS(y * np.sqrt(w), X * np.sqrt(w)[:, None]).fit(**kw)
        assert np.allclose(fit.bse, scaled.bse, rtol=1e-10)
        ols[kind] = dict(zip(names, map(float, fit.bse)))
        coef = dict(zip(names, map(float, fit.params)))
        r2 = float(fit.rsquared)
        sd = float(np.sqrt(fit.scale))
    out["ols"] = {"coef": coef, "se": ols, "r_squared": r2, "residual_sd": sd}

    # Weighted 2SLS and LIML.
    dep = used["y"]
    exog = pd.DataFrame({"intercept": const, "c": used["c"]})
    endog = used[["x"]]
    inst = used[["z1", "z2"]]
    iv = {}
    for kind, kw in [("hc1", dict(cov_type="robust", debiased=True)),
                     ("cluster", dict(cov_type="clustered", clusters=used["g"], debiased=True))]:
        fit = IV2SLS(dep, exog, endog, inst, weights=used["w"]).fit(**kw)
        sw = np.sqrt(w)
        scaled = IV2SLS(dep * sw, exog.mul(sw, axis=0), endog.mul(sw, axis=0),
                        inst.mul(sw, axis=0)).fit(**kw)
        assert np.allclose(fit.std_errors, scaled.std_errors, rtol=1e-10)
        iv[kind] = {k: float(v) for k, v in fit.std_errors.items()}
        coef = {k: float(v) for k, v in fit.params.items()}
        if kind == "hc1":
            diag = fit.first_stage.diagnostics
            partial = float(diag.loc["x", "partial.rsquared"])
    liml = IVLIML(dep, exog, endog, inst, weights=used["w"]).fit(cov_type="robust", debiased=True)
    out["tsls"] = {"coef": coef, "se": iv}
    out["liml"] = {"coef": {k: float(v) for k, v in liml.params.items()},
                   "se": {k: float(v) for k, v in liml.std_errors.items()},
                   "kappa": float(liml.kappa)}

    # First stage (robust F) and Anderson-Rubin at 0, both HC1 Wald/q on the instruments.
    Z = np.column_stack([used["z1"], used["z2"], const, used["c"]])
    hyp = np.zeros((2, 4))
    hyp[0, 0] = hyp[1, 1] = 1.0
    fs = sm.WLS(used["x"].to_numpy(), Z, weights=w).fit(cov_type="HC1")
    rf = sm.WLS(y, Z, weights=w).fit(cov_type="HC1")
    out["first_stage"] = {
        "partial_r_squared": partial,
        "robust_f_hc1": float(fs.wald_test(hyp, use_f=True, scalar=True).statistic),
        "r_squared": float(fs.rsquared),
    }
    out["reduced_form_r_squared"] = float(rf.rsquared)
    out["ar_statistic_at_0_hc1"] = float(rf.wald_test(hyp, use_f=True, scalar=True).statistic)

    columns = {k: [None if v is None else float(v) for v in vals] if k != "g" else [int(v) for v in vals]
               for k, vals in data.items()}
    doc = {
        "case": "weights",
        "description": "probability weights: weighted OLS (HC0, HC1, CR1), weighted 2SLS and LIML, first stage and AR, against statsmodels WLS and linearmodels with weights",
        "versions": {"python": platform.python_version(), "numpy": np.__version__,
                     "pandas": pd.__version__, "statsmodels": statsmodels.__version__,
                     "linearmodels": linearmodels.__version__},
        "seed": SEED,
        "data": columns,
        "expected": out,
    }
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
