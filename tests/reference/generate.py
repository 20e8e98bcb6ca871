#!/usr/bin/env python3
"""Reference fixtures for sworn's numerical core (src/estimate/).

Regenerate from the crate root with

    python3 tests/reference/generate.py

(needs numpy, scipy, statsmodels, linearmodels, pandas; `pip install numpy scipy
statsmodels linearmodels pandas`). Every data set is invented here from a seeded generator
(numpy default_rng(20261201)); no external data is used. Each case is written to
tests/reference/fixtures/<case>.json holding the data columns, the setup, the expected
values and the library versions. The Rust tests in src/estimate/reference_tests*.rs read
them and compare to 1e-8 relative.

Where each expected value comes from:
  * OLS coefficients, classical/HC0/HC1/HC2/HC3 and one-way cluster SEs: statsmodels OLS.
    statsmodels' cluster option (use_correction=True, the default) multiplies the sandwich
    by G/(G-1)*(N-1)/(N-K), which is CR1 as sworn defines it; checked below against a direct
    numpy evaluation of that formula.
  * Two-way clustered SEs (OLS): statsmodels with a two-column `groups` (cov_cluster_2groups,
    V_A + V_B - V_AB, each term with its own G/(G-1)*(N-1)/(N-K)); checked against numpy.
  * 2SLS: linearmodels IV2SLS with debiased=True: "unadjusted" gives s^2 with n-k,
    "robust" gives HC1 (n/(n-k)) and debiased=False gives HC0, "clustered" multiplies by
    G/(G-1)*(N-1)/(N-K) per dimension (checked in linearmodels' covariance.py), one- and
    two-way.
  * First stage: statsmodels OLS of each endogenous variable on [instruments | exog]
    (coefficients, SEs); partial R^2 and the classical F from linearmodels'
    first_stage.diagnostics; the robust F is statsmodels' wald_test (use_f, i.e. Wald/q)
    with that fit's covariance, and also cross-checked against linearmodels' f.stat / q.
  * Reduced form: statsmodels OLS of y on [instruments | exog].
  * Durbin, Wu-Hausman, Sargan, Basmann: linearmodels' IVResults attributes.
  * Two-way covariances that are not positive semi-definite: sworn clamps negative
    eigenvalues at zero (Cameron, Gelbach and Miller 2011, section 2.3); neither library
    does, so for kind "twoway" the expected SEs and Wald statistics are computed here with
    numpy.linalg.eigh from the library's own two-way matrix (psd_fix below), and
    "twoway_fix_applied" records whether the fix changed anything. When it did not, the
    numpy Wald value is asserted equal to the library's.
  * Control-function test: statsmodels OLS of y on [endog | exog | first-stage residuals]
    with each covariance, joint wald_test of the residual coefficients (use_f -> Wald/q).
"""
import json
import os
import platform

import linearmodels
import numpy as np
import pandas as pd
import scipy
import statsmodels
import statsmodels.api as sm
from linearmodels.iv import IV2SLS

SEED = 20261201
OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "fixtures")
VERSIONS = {
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "statsmodels": statsmodels.__version__,
    "linearmodels": linearmodels.__version__,
    "python": platform.python_version(),
}
OLS_KINDS = ["classical", "hc0", "hc1", "hc2", "hc3", "cluster", "twoway"]
IV_KINDS = ["classical", "hc0", "hc1", "cluster", "twoway"]


def design(df, names):
    """Columns named in `names`; "const" is a column of ones."""
    cols = [np.ones(len(df)) if c == "const" else df[c].to_numpy(float) for c in names]
    return np.column_stack(cols) if cols else np.empty((len(df), 0))


def sm_fit(y, x, kind, df):
    """statsmodels OLS with one of sworn's covariance kinds."""
    model = sm.OLS(y, x)
    if kind == "classical":
        return model.fit()
    if kind in ("hc0", "hc1", "hc2", "hc3"):
        return model.fit(cov_type=kind.upper())
    if kind == "cluster":
        return model.fit(cov_type="cluster", cov_kwds={"groups": df["g1"].to_numpy()})
    groups = df[["g1", "g2"]].to_numpy()
    return model.fit(cov_type="cluster", cov_kwds={"groups": groups})


def psd_fix(v):
    """Clamp negative eigenvalues of a symmetric matrix at zero; (matrix, changed)."""
    w, q = np.linalg.eigh((v + v.T) / 2)
    if w.min() >= 0:
        return v, False
    return q @ np.diag(np.maximum(w, 0)) @ q.T, True


def wald_f(params, cov, idx):
    """b_S' V_S^{-1} b_S / |S| by a linear solve."""
    b, v = np.asarray(params)[idx], np.asarray(cov)[np.ix_(idx, idx)]
    return float(b @ np.linalg.solve(v, b) / len(idx))


def se_and_wald(fit, kind, idx=None):
    """SEs and (optionally) Wald/q of `idx` for a statsmodels fit, with the two-way fix."""
    if kind != "twoway":
        f = None
        if idx is not None:
            hyp = np.eye(len(fit.params))[idx]
            f = float(fit.wald_test(hyp, use_f=True, scalar=True).statistic)
        return fit.bse.tolist(), f, None
    cov, changed = psd_fix(np.asarray(fit.cov_params()))
    f = None if idx is None else wald_f(fit.params, cov, idx)
    if idx is not None and not changed:
        hyp = np.eye(len(fit.params))[idx]
        assert np.isclose(f, fit.wald_test(hyp, use_f=True, scalar=True).statistic, rtol=1e-10)
    return np.sqrt(np.diag(cov)).tolist(), f, changed


def numpy_cr1(x, u, ids):
    """CR1 by definition: G/(G-1)(N-1)/(N-K) (X'X)^-1 (sum_g s_g s_g') (X'X)^-1."""
    n, k = x.shape
    bread = np.linalg.inv(x.T @ x)
    labels = np.unique(ids, return_inverse=True)[1]
    sums = np.zeros((labels.max() + 1, k))
    np.add.at(sums, labels, x * u[:, None])
    g = sums.shape[0]
    return g / (g - 1) * (n - 1) / (n - k) * bread @ (sums.T @ sums) @ bread


def numpy_twoway(x, u, a, b):
    """Cameron-Gelbach-Miller two-way: V_A + V_B - V_AB."""
    cells = a.astype(np.int64) * (b.max() + 1) + b
    return numpy_cr1(x, u, a) + numpy_cr1(x, u, b) - numpy_cr1(x, u, cells)


def ols_expected(df, outcome, regressors):
    y, x = df[outcome].to_numpy(float), design(df, regressors)
    base = sm.OLS(y, x).fit()
    out = {
        "coef": base.params.tolist(),
        "n": int(base.nobs),
        "df_resid": int(base.df_resid),
        "rss": float(base.ssr),
        "r_squared": float(base.rsquared),
        "residual_sd": float(np.sqrt(base.scale)),
        "se": {},
        "clusters": {},
    }
    for kind in OLS_KINDS:
        out["se"][kind], _, changed = se_and_wald(sm_fit(y, x, kind, df), kind)
        if changed is not None:
            out["twoway_fix_applied"] = changed
    u = base.resid
    assert np.allclose(numpy_cr1(x, u, df["g1"].to_numpy()), sm_fit(y, x, "cluster", df).cov_params(), rtol=1e-10)
    two = numpy_twoway(x, u, df["g1"].to_numpy(), df["g2"].to_numpy())
    assert np.allclose(two, sm_fit(y, x, "twoway", df).cov_params(), rtol=1e-10)
    out["clusters"] = {"cluster": int(df["g1"].nunique()), "twoway": int(min(df["g1"].nunique(), df["g2"].nunique()))}
    return out


def lm_fit(df, setup, kind):
    """linearmodels IV2SLS with one of sworn's covariance kinds."""
    dep = df[setup["outcome"]]
    exog = pd.DataFrame(design(df, setup["exog"]), columns=setup["exog"], index=df.index)
    model = IV2SLS(dep, exog, df[setup["endog"]], df[setup["instruments"]])
    if kind == "classical":
        return model.fit(cov_type="unadjusted", debiased=True)
    if kind == "hc0":
        return model.fit(cov_type="robust", debiased=False)
    if kind == "hc1":
        return model.fit(cov_type="robust", debiased=True)
    clusters = df["g1"] if kind == "cluster" else df[["g1", "g2"]]
    return model.fit(cov_type="clustered", clusters=clusters, debiased=True)


def ours_order(series, setup):
    """linearmodels orders [exog, endog]; sworn orders [endog | exog]."""
    return [float(series[c]) for c in setup["endog"] + setup["exog"]]


def first_stage_expected(df, setup, results):
    z_names = setup["instruments"] + setup["exog"]
    z = design(df, z_names)
    q = len(setup["instruments"])
    diag = results["classical"].first_stage.diagnostics
    stages = []
    for name in setup["endog"]:
        d = df[name].to_numpy(float)
        stage = {"coef": sm.OLS(d, z).fit().params.tolist(), "se": {}, "robust_f": {}}
        for kind in OLS_KINDS:
            se, f, _ = se_and_wald(sm_fit(d, z, kind, df), kind, list(range(q)))
            stage["se"][kind], stage["robust_f"][kind] = se, f
        stage["f"] = float(diag.loc[name, "f.stat"])
        stage["partial_r_squared"] = float(diag.loc[name, "partial.rsquared"])
        assert np.isclose(stage["f"], stage["robust_f"]["classical"], rtol=1e-10)
        lm_hc1 = results["hc1"].first_stage.diagnostics.loc[name, "f.stat"] / q
        assert np.isclose(lm_hc1, stage["robust_f"]["hc1"], rtol=1e-10)
        stages.append(stage)
    return stages


def control_function_expected(df, setup):
    z = design(df, setup["instruments"] + setup["exog"])
    x = design(df, setup["endog"] + setup["exog"])
    resid = [df[e].to_numpy(float) - z @ np.linalg.lstsq(z, df[e].to_numpy(float), rcond=None)[0] for e in setup["endog"]]
    aug = np.column_stack([x] + resid)
    y = df[setup["outcome"]].to_numpy(float)
    p, k = len(setup["endog"]), x.shape[1]
    idx = list(range(k, k + p))
    return {kind: se_and_wald(sm_fit(y, aug, kind, df), kind, idx)[1] for kind in OLS_KINDS}


def iv_se(res, kind, setup):
    """linearmodels SEs in sworn's order, with the two-way fix applied."""
    if kind != "twoway":
        return ours_order(res.std_errors, setup)
    names = setup["endog"] + setup["exog"]
    cov, _ = psd_fix(res.cov.loc[names, names].to_numpy())
    return np.sqrt(np.diag(cov)).tolist()


def iv_expected(df, setup):
    results = {kind: lm_fit(df, setup, kind) for kind in IV_KINDS}
    base = results["classical"]
    y = df[setup["outcome"]].to_numpy(float)
    out = {
        "coef": ours_order(base.params, setup),
        "n": int(base.nobs),
        "df_resid": int(base.df_resid),
        "rss": float(base.resid_ss),
        "r_squared": float(1 - base.resid_ss / np.sum((y - y.mean()) ** 2)),
        "residual_sd": float(np.sqrt(base.resid_ss / base.df_resid)),
        "se": {kind: iv_se(r, kind, setup) for kind, r in results.items()},
        "clusters": {"cluster": int(df["g1"].nunique()), "twoway": int(min(df["g1"].nunique(), df["g2"].nunique()))},
        "first_stage": first_stage_expected(df, setup, results),
        "endogeneity": {
            "durbin": float(base.durbin().stat),
            "wu_hausman": float(base.wu_hausman().stat),
            "wu_hausman_df2": int(base.wu_hausman().df_denom),
            "control_function": control_function_expected(df, setup),
        },
    }
    rf = {"coef": None, "se": {}}
    z = design(df, setup["instruments"] + setup["exog"])
    for kind in OLS_KINDS:
        fit = sm_fit(y, z, kind, df)
        rf["coef"] = fit.params.tolist()
        rf["se"][kind] = se_and_wald(fit, kind)[0]
    out["reduced_form"] = rf
    if len(setup["instruments"]) > len(setup["endog"]):
        out["overidentification"] = {"sargan": float(base.sargan.stat), "basmann": float(base.basmann.stat)}
    return out


def invent(rng, n, n_endog=1):
    """Invented field-study style data with clusters, heteroskedasticity and endogeneity."""
    g1 = rng.integers(0, 30, n)
    g2 = rng.integers(0, 12, n)
    w1 = rng.normal(0, 1, n)
    w2 = (rng.random(n) < 0.4).astype(float)
    z = rng.normal(0, 1, (n, 3))
    z[:, 0] = (rng.random(n) < 0.5).astype(float)
    common = rng.normal(0, 1, n)
    df = pd.DataFrame({"w1": w1, "w2": w2, "z1": z[:, 0], "z2": z[:, 1], "z3": z[:, 2], "g1": g1, "g2": g2})
    u = (0.8 * common + rng.normal(0, 1, n) + rng.normal(0, 0.5, 30)[g1] + rng.normal(0, 0.4, 12)[g2]) * (1 + 0.4 * np.abs(w1))
    df["d1"] = 0.9 * z[:, 0] + 0.4 * z[:, 1] + 0.3 * w1 + common + rng.normal(0, 1, n)
    df["d2"] = 0.2 * z[:, 0] - 0.3 * z[:, 1] + 0.7 * z[:, 2] + 0.5 * common + rng.normal(0, 1, n)
    df["y"] = 1.5 - 0.8 * df["d1"] + (0.5 * df["d2"] if n_endog == 2 else 0) + 0.6 * w1 - 0.4 * w2 + u
    df["x3"] = rng.normal(2, 1.5, n)
    df["yb"] = (df["y"] + rng.normal(0, 1, n) > 1.0).astype(float)
    return df


def write(name, description, df, setup, expected):
    columns = {c: [None if pd.isna(v) else (int(v) if c in ("g1", "g2") else float(v)) for v in df[c]] for c in df.columns}
    doc = {"case": name, "description": description, "seed": SEED, "versions": VERSIONS,
           "data": columns, "setup": setup, "expected": expected}
    with open(os.path.join(OUT, name + ".json"), "w") as fh:
        json.dump(doc, fh, indent=None, separators=(",", ":"))
        fh.write("\n")


def main():
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(SEED)
    df = invent(rng, 400)
    ols_setup = {"estimator": "ols", "outcome": "y", "regressors": ["const", "d1", "w1", "w2", "x3"], "intercept": True}
    cols = ["y", "d1", "w1", "w2", "x3", "g1", "g2"]
    write("ols_errors", "OLS with every error type", df[cols], ols_setup, ols_expected(df, "y", ols_setup["regressors"]))

    lpm_setup = dict(ols_setup, outcome="yb")
    cols = ["yb", "d1", "w1", "w2", "x3", "g1", "g2"]
    write("ols_binary_lpm", "linear probability model, binary outcome", df[cols], lpm_setup, ols_expected(df, "yb", lpm_setup["regressors"]))

    miss = invent(rng, 360)[["y", "d1", "w1", "w2", "x3", "g1", "g2"]].copy()
    for c, share in (("y", 0.05), ("d1", 0.04), ("x3", 0.03)):
        miss.loc[rng.random(len(miss)) < share, c] = np.nan
    complete = miss.dropna().reset_index(drop=True)
    expected = ols_expected(complete, "y", ols_setup["regressors"])
    expected["rows_before_deletion"] = len(miss)
    write("ols_missing", "OLS after listwise deletion of rows with a missing value (NaN in JSON as null)", miss, ols_setup, expected)

    iv_cols = ["y", "d1", "d2", "w1", "w2", "z1", "z2", "z3", "g1", "g2"]
    cases = [
        ("iv_just", "2SLS, one endogenous, one instrument", 1, ["z1"], 420),
        ("iv_over", "2SLS, one endogenous, two instruments", 1, ["z1", "z2"], 380),
        ("iv_two_endog", "2SLS, two endogenous, three instruments", 2, ["z1", "z2", "z3"], 450),
    ]
    for name, description, n_endog, instruments, n in cases:
        data = invent(rng, n, n_endog)[iv_cols]
        setup = {"estimator": "2sls", "outcome": "y", "endog": ["d1", "d2"][:n_endog], "exog": ["const", "w1", "w2"],
                 "instruments": instruments, "intercept": True}
        write(name, description, data, setup, iv_expected(data, setup))


if __name__ == "__main__":
    main()
