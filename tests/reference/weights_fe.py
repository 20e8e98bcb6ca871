#!/usr/bin/env python3
"""Reference fixture for probability weights with absorbed fixed effects and leverage-based
errors: tests/reference/fixtures/weights_fe.json.

Regenerate from the crate root with `python3 tests/reference/weights_fe.py` (numpy, pandas,
statsmodels, linearmodels). The data are invented here from default_rng(20261205): 180 rows
in 15 clusters g, two crossed groupings r (12 levels) and s (6 levels) used as fixed effects,
an outcome y with level effects of both, one endogenous regressor x, two instruments z1 and
z2, one control c and a positive sampling weight w. Three rows test the order in which rows
leave: row 0 is alone in level 99 of r (a singleton, dropped), rows 1 and 2 form level 98 of r
but row 2 has weight zero (dropped and counted first), which leaves row 1 a singleton (dropped
too); row 3 has no weight (it leaves like any missing value).

Where each expected value comes from (fixed effects as explicit indicator columns: the
intercept and one column per level but the first of each grouping):
  * Weighted OLS with r, and with r and s: statsmodels WLS(y, [x, c, dummies], weights=w),
    cov_type "nonrobust" (classical: s^2 = sum w u^2 / (n-k) times (X'WX)^-1), "HC0", "HC1",
    "HC2", "HC3" and "cluster" (groups = g; statsmodels' default
    factor G/(G-1) * (n-1)/(n-k), k counting the indicator columns, which is sworn's CR1
    factor when no fixed effect is nested in the clusters: asserted below). R^2 is WLS's
    rsquared (weighted, centred); the within R^2 is 1 - ssr / ssr of WLS(y, dummies);
    the residual SD sqrt(scale). HC2/HC3 only with r alone (sworn computes the absorbed
    leverage for one fixed effect).
  * The same weighted OLS with r absorbed by linearmodels AbsorbingLS(weights=w): asserted
    equal to the explicit-dummy coefficients (a second library, not stored).
  * Weighted 2SLS with r, and with r and s: linearmodels IV2SLS(y, [const, c, dummies], x,
    [z1, z2], weights=w), cov_type "unadjusted", debiased=True (classical, s^2 with n-k),
    "robust", debiased=True (HC1, n/(n-k)) and "clustered",
    debiased=True (G/(G-1) * (n-1)/(n-k)).
  * Weighted OLS without fixed effects (x, the c control and an intercept) with classical,
    HC2 and HC3 errors: statsmodels WLS; its leverage is that of the sqrt(w)-scaled design
    (asserted against OLS on scaled rows). With one fixed effect the leverage of the
    indicator columns is part of WLS's (sworn adds w_i / sum of the level's weights).
"""
import json
import os
import platform

import linearmodels
import numpy as np
import pandas as pd
import statsmodels
import statsmodels.api as sm
from linearmodels.iv import IV2SLS
from linearmodels.iv.absorbing import AbsorbingLS

SEED = 20261205
OUT = os.path.join(os.path.dirname(__file__), "fixtures", "weights_fe.json")


def make_data():
    rng = np.random.default_rng(SEED)
    n, G = 180, 15
    g = np.repeat(np.arange(G), n // G)
    r = rng.integers(0, 12, n)
    s = rng.integers(0, 6, n)
    r[0] = 99
    r[1] = r[2] = 98
    alpha = rng.normal(0, 1.0, 100)[r]
    gamma = rng.normal(0, 0.7, 6)[s]
    a = rng.standard_normal(G)[g]
    z1 = rng.standard_normal(n)
    z2 = (rng.uniform(size=n) < 0.5).astype(float)
    c = rng.uniform(0, 5, n) + 0.3 * alpha
    u = rng.standard_normal(n) * (1 + 0.5 * c / 5) + 0.5 * a
    x = 0.8 * z1 + 0.6 * z2 + 0.3 * c + 0.5 * u + 0.4 * alpha + rng.standard_normal(n)
    y = 1.0 + 1.5 * x - 0.4 * c + alpha + gamma + u
    w = np.round(rng.uniform(0.2, 4.0, n), 3)
    w_col = [float(v) for v in w]
    w_col[2] = 0.0
    w_col[3] = None
    return {"g": g, "r": r, "s": s, "z1": z1, "z2": z2, "c": c, "x": x, "y": y, "w": w_col}


def drop_singletons(df, fes):
    """Rows alone in their level of any fixed effect, dropped until none remains."""
    while True:
        alone = np.zeros(len(df), dtype=bool)
        for fe in fes:
            alone |= df.groupby(fe)[fe].transform("size").to_numpy() == 1
        if not alone.any():
            return df
        df = df[~alone].reset_index(drop=True)


def dummies(df, fes):
    """One indicator column per level but the first of each grouping."""
    parts = [pd.get_dummies(df[fe], prefix=fe, drop_first=True, dtype=float) for fe in fes]
    return pd.concat(parts, axis=1)


def not_nested(df, fe):
    """No level of `fe` lies within a single cluster (so sworn's CR1 factor is statsmodels')."""
    return bool((df.groupby(fe)["g"].nunique() > 1).all())


def ols_case(df, fes, kinds):
    w = df["w"].to_numpy()
    D = dummies(df, fes)
    X = pd.concat([df[["x", "c"]], D], axis=1)
    X.insert(0, "const", 1.0)
    y = df["y"].to_numpy()
    se = {}
    for kind in kinds:
        kw = {"cluster": dict(cov_type="cluster", cov_kwds={"groups": df["g"].to_numpy()}),
              "classical": dict(cov_type="nonrobust")}.get(kind, dict(cov_type=kind.upper()))
        fit = sm.WLS(y, X.to_numpy(), weights=w).fit(**kw)
        se[kind] = {"x": float(fit.bse[1]), "c": float(fit.bse[2])}
    fe_only = sm.WLS(y, np.column_stack([np.ones(len(df)), D.to_numpy()]), weights=w).fit()
    absorbed = AbsorbingLS(df["y"], df[["x", "c"]], absorb=df[fes].astype("category"),
                           weights=df["w"]).fit()
    assert np.allclose(absorbed.params[["x", "c"]].to_numpy(), fit.params[1:3], rtol=1e-9)
    return {
        "n": len(df),
        "levels": {fe: int(df[fe].nunique()) for fe in fes},
        "coef": {"x": float(fit.params[1]), "c": float(fit.params[2])},
        "se": se,
        "r_squared": float(fit.rsquared),
        "within_r_squared": float(1.0 - fit.ssr / fe_only.ssr),
        "residual_sd": float(np.sqrt(fit.scale)),
    }


def iv_case(df, fes):
    exog = pd.concat([df[["c"]], dummies(df, fes)], axis=1)
    exog.insert(0, "const", 1.0)
    se = {}
    for kind, kw in [("classical", dict(cov_type="unadjusted", debiased=True)),
                     ("hc1", dict(cov_type="robust", debiased=True)),
                     ("cluster", dict(cov_type="clustered", clusters=df["g"], debiased=True))]:
        fit = IV2SLS(df["y"], exog, df[["x"]], df[["z1", "z2"]], weights=df["w"]).fit(**kw)
        se[kind] = {k: float(fit.std_errors[k]) for k in ["x", "c"]}
    return {"n": len(df), "coef": {k: float(fit.params[k]) for k in ["x", "c"]}, "se": se}


def leverage_case(df):
    w = df["w"].to_numpy()
    X = sm.add_constant(df[["x", "c"]].to_numpy())
    y = df["y"].to_numpy()
    out = {"coef": None, "se": {}}
    for kind in ["nonrobust", "HC2", "HC3"]:
        fit = sm.WLS(y, X, weights=w).fit(cov_type=kind)
        sw = np.sqrt(w)
        scaled = sm.OLS(y * sw, X * sw[:, None]).fit(cov_type=kind)
        assert np.allclose(fit.bse, scaled.bse, rtol=1e-10)
        out["coef"] = dict(zip(["intercept", "x", "c"], map(float, fit.params)))
        out["se"]["classical" if kind == "nonrobust" else kind.lower()] = dict(zip(["intercept", "x", "c"], map(float, fit.bse)))
    return out


def main():
    data = make_data()
    df = pd.DataFrame(data)
    df["w"] = pd.to_numeric(df["w"])
    complete = df[df["w"].notna()]
    positive = complete[complete["w"] > 0].reset_index(drop=True)
    expected = {"dropped_missing": 1, "dropped_zero_weight": 1}
    for name, fes in [("one", ["r"]), ("two", ["r", "s"])]:
        used = drop_singletons(positive, fes)
        assert all(not_nested(used, fe) for fe in fes)
        kinds = ["classical", "hc0", "hc1", "cluster"] + (["hc2", "hc3"] if len(fes) == 1 else [])
        case = ols_case(used, fes, kinds)
        case["singletons_dropped"] = len(positive) - len(used)
        expected["ols_" + name] = case
        expected["tsls_" + name] = iv_case(used, fes)
    expected["ols_no_fe"] = leverage_case(positive)
    expected["ols_no_fe"]["n"] = len(positive)
    columns = {k: [None if v is None else float(v) for v in vals]
               if k in ("w", "z1", "z2", "c", "x", "y") else [int(v) for v in vals]
               for k, vals in data.items()}
    doc = {
        "case": "weights_fe",
        "description": "probability weights with absorbed fixed effects (one and two) and HC2/HC3: weighted OLS against statsmodels WLS with explicit indicator columns (AbsorbingLS cross-check), weighted 2SLS against linearmodels IV2SLS with weights and indicator columns",
        "versions": {"python": platform.python_version(), "numpy": np.__version__,
                     "pandas": pd.__version__, "statsmodels": statsmodels.__version__,
                     "linearmodels": linearmodels.__version__},
        "seed": SEED,
        "data": columns,
        "expected": expected,
    }
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
