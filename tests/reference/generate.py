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
  * Hansen's J and Shea's partial R^2 (iv_gmm.json, for the data of the iv_* cases): see
    gmm_expected below (linearmodels IVGMM j_stat, first-stage "shea.rsquared").
  * Fixed effects (fe_one, fe_two, fe_nested, fe_singletons): the same libraries on explicit
    dummy columns; see the comments above fixed_effect_cases, nested_case, singleton_case.
    These cases draw from their own generator, default_rng(SEED + 1), so the earlier cases
    keep their data.
  * plan_timeseries / plan_missing (.csv + .json): data and expected values for end-to-end
    tests through the plan path, default_rng(SEED + 2); the JSON "plan" object states the
    specification and the CSV conventions.
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
from linearmodels.iv import IV2SLS, IVGMM
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

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


INT_COLUMNS = ("g1", "g2", "f1", "f2")


def write(name, description, df, setup, expected):
    columns = {c: [None if pd.isna(v) else (int(v) if c in INT_COLUMNS else float(v)) for v in df[c]] for c in df.columns}
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
    gmm = {}
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
        gmm[name] = gmm_expected(data, setup)
    write_json("iv_gmm", {"case": "iv_gmm", "description": "Hansen's J (two-step GMM) and Shea's partial R^2 "
               "for the data of the iv_* fixtures", "seed": SEED, "versions": VERSIONS, "expected": gmm})
    fixed_effect_cases()
    plan_cases()


def write_json(name, doc):
    with open(os.path.join(OUT, name + ".json"), "w") as fh:
        json.dump(doc, fh, indent=None, separators=(",", ":"))
        fh.write("\n")


# ---------------------------------------------------------------------------------------
# Hansen's J and Shea's partial R^2.
#
#   * Hansen's J: linearmodels IVGMM with its defaults iter_limit=2 (2SLS, then one efficient
#     step), center=False, debiased=False: S = (1/n) sum u_i^2 z_i z_i' ("robust") or
#     (1/n) sum_g (sum_{i in g} z_i u_i)(...)' ("clustered", g1) at the 2SLS residuals, and
#     J = n gbar' S^{-1} gbar at the second-step estimate (j_stat). Cross-checked below
#     against a direct numpy evaluation of the same formula.
#   * Shea's partial R^2: linearmodels first_stage.diagnostics["shea.rsquared"], which is
#     (se_ols/se_2sls)^2 (1 - R2_2sls)/(1 - R2_ols) = [(X'X)^-1]_jj / [(Xhat'Xhat)^-1]_jj.
# ---------------------------------------------------------------------------------------


def gmm_fit(df, setup, weight):
    dep = df[setup["outcome"]]
    exog = pd.DataFrame(design(df, setup["exog"]), columns=setup["exog"], index=df.index)
    if weight == "robust":
        model = IVGMM(dep, exog, df[setup["endog"]], df[setup["instruments"]], weight_type="robust")
    else:
        model = IVGMM(dep, exog, df[setup["endog"]], df[setup["instruments"]], weight_type="clustered",
                      clusters=df["g1"].to_numpy())
    return model.fit()


def numpy_j(df, setup, weight):
    """Two-step GMM J by definition (see the comment above)."""
    y = df[setup["outcome"]].to_numpy(float)
    x = design(df, setup["endog"] + setup["exog"])
    z = design(df, setup["instruments"] + setup["exog"])
    n = len(y)
    xhat = z @ np.linalg.lstsq(z, x, rcond=None)[0]
    u = y - x @ np.linalg.lstsq(xhat, y, rcond=None)[0]
    ze = z * u[:, None]
    if weight == "clustered":
        labels = np.unique(df["g1"].to_numpy(), return_inverse=True)[1]
        sums = np.zeros((labels.max() + 1, z.shape[1]))
        np.add.at(sums, labels, ze)
        s = sums.T @ sums / n
    else:
        s = ze.T @ ze / n
    w = np.linalg.inv(s)
    zx, zy = z.T @ x / n, z.T @ y / n
    b = np.linalg.solve(zx.T @ w @ zx, zx.T @ w @ zy)
    g = z.T @ (y - x @ b) / n
    return float(n * g @ w @ g)


def gmm_expected(df, setup):
    """Hansen's J (robust, clustered by g1; None when exactly identified) and Shea's R^2."""
    over = len(setup["instruments"]) > len(setup["endog"])
    out = {"hansen_j": {}}
    for weight, kind in (("robust", "hc0"), ("clustered", "cluster")):
        if not over:
            out["hansen_j"][kind] = None
            continue
        res = gmm_fit(df, setup, weight)
        j = float(res.j_stat.stat)
        assert int(res.j_stat.df) == len(setup["instruments"]) - len(setup["endog"])
        assert np.isclose(j, numpy_j(df, setup, weight), rtol=1e-9), (j, numpy_j(df, setup, weight))
        out["hansen_j"][kind] = j
    diag = lm_fit(df, setup, "classical").first_stage.diagnostics
    out["shea_partial_r_squared"] = [float(diag.loc[e, "shea.rsquared"]) for e in setup["endog"]]
    out["partial_r_squared"] = [float(diag.loc[e, "partial.rsquared"]) for e in setup["endog"]]
    return out


# ---------------------------------------------------------------------------------------
# Fixed effects. sworn sweeps the fixed effects out of every column and counts the absorbed
# levels in the degrees of freedom; the oracle is the same model with explicit dummy columns
# (statsmodels OLS, linearmodels IV2SLS / IVGMM), whose K counts every dummy. All levels of
# the first dimension get a dummy and no constant is added; every further dimension drops
# one level per connected component of its bipartite graph with the first, so the dummy
# matrix has full column rank, equal to numpy's matrix_rank of all dummies (asserted).
# Only the coefficients of the non-dummy columns are compared; they come first in sworn's
# order ([endog | exog] for 2SLS, [instruments | exog] for first stages / reduced form).
# ---------------------------------------------------------------------------------------

FE_OLS_KINDS = ["classical", "hc0", "hc1", "hc2", "hc3", "cluster"]
FE_IV_KINDS = ["classical", "hc0", "hc1", "cluster"]


def with_kinds(fn, *args):
    """Run fn with the covariance kinds of the fixed-effect cases. Two-way clusters are left
    out there: the library's two-way matrix of the dummies regression can need the
    eigenvalue fix on its full (dummies included) matrix, which is not the fix sworn applies
    to the block of the swept coefficients."""
    global OLS_KINDS, IV_KINDS
    saved = (OLS_KINDS, IV_KINDS)
    OLS_KINDS, IV_KINDS = FE_OLS_KINDS, FE_IV_KINDS
    try:
        return fn(*args)
    finally:
        OLS_KINDS, IV_KINDS = saved


def fe_dummies(df, dims):
    """Full-rank dummy columns for the fixed effects `dims` (added to a copy of df)."""
    out = df.copy()
    names = []
    first = dims[0]
    for d in dims:
        levels = sorted(df[d].unique())
        drop = set()
        if d != first:
            a = np.unique(df[first].to_numpy(), return_inverse=True)[1]
            b = np.unique(df[d].to_numpy(), return_inverse=True)[1]
            na, nb = a.max() + 1, b.max() + 1
            graph = coo_matrix((np.ones(len(a)), (a, na + b)), shape=(na + nb, na + nb))
            _, comp = connected_components(graph, directed=False)
            seen = set()
            for lev_idx, lev in enumerate(levels):
                c = comp[na + lev_idx]
                if c not in seen:
                    seen.add(c)
                    drop.add(lev)
        for lev in levels:
            if lev in drop:
                continue
            name = f"D_{d}_{lev}"
            out[name] = (df[d] == lev).astype(float)
            names.append(name)
    every = np.column_stack([(df[d] == lev).to_numpy(float) for d in dims for lev in sorted(df[d].unique())])
    rank = int(np.linalg.matrix_rank(every))
    assert rank == len(names) == int(np.linalg.matrix_rank(design(out, names)))
    return out, names, rank


def within(df, cols, dummies):
    """M_D applied to columns (numpy lstsq on the dummy columns)."""
    d = design(df, dummies)
    v = design(df, cols)
    return v - d @ np.linalg.lstsq(d, v, rcond=None)[0]


def truncate(value, k):
    """Keep the first k entries of every list inside a nested dict/list structure of vectors."""
    if isinstance(value, dict):
        return {key: truncate(v, k) for key, v in value.items()}
    if isinstance(value, list) and value and isinstance(value[0], float):
        return value[:k]
    if isinstance(value, list):
        return [truncate(v, k) for v in value]
    return value


def fe_ols_expected(df, outcome, regressors, dims):
    data, dummies, rank = fe_dummies(df, dims)
    ex = with_kinds(ols_expected, data, outcome, regressors + dummies)
    yw = within(data, [outcome], dummies)[:, 0]
    ex = truncate(ex, len(regressors))
    ex["r_squared"] = float(1 - ex["rss"] / (yw @ yw))
    ex["absorbed_df"] = rank
    return ex


def fe_iv_expected(df, setup, dims):
    data, dummies, rank = fe_dummies(df, dims)
    oracle = dict(setup, exog=setup["exog"] + dummies)
    ex = with_kinds(iv_expected, data, oracle)
    k_iv = len(setup["endog"]) + len(setup["exog"])
    k_z = len(setup["instruments"]) + len(setup["exog"])
    stages = [truncate(s, k_z) for s in ex.pop("first_stage")]
    rf = truncate(ex.pop("reduced_form"), k_z)
    ex = truncate(ex, k_iv)
    ex["first_stage"], ex["reduced_form"] = stages, rf
    y = data[setup["outcome"]].to_numpy(float)
    yw = within(data, [setup["outcome"]], dummies)[:, 0]
    ex["r_squared"] = float(1 - ex["rss"] / (yw @ yw))
    ex["absorbed_df"] = rank
    gmm = gmm_expected(data, oracle)
    ex["hansen_j"] = gmm["hansen_j"]
    ex["shea_partial_r_squared"] = gmm["shea_partial_r_squared"]
    assert y.shape[0] == ex["n"]
    return ex


def invent_fe(rng, n, levels1=15, levels2=None, split=False):
    """IV-style data with fixed effects f1 (and f2) that shift y, d1 and the instruments."""
    df = invent(rng, n)
    f1 = rng.integers(0, levels1, n)
    df["f1"] = f1
    a1 = rng.normal(0, 1.5, levels1)
    shift = a1[f1]
    if levels2 is not None:
        f2 = rng.integers(0, levels2, n)
        if split:
            # Two components: levels of f1 below levels1 // 2 only meet f2 levels below
            # levels2 // 2, the rest only the rest.
            half1, half2 = levels1 // 2, levels2 // 2
            low = f1 < half1
            f2 = np.where(low, rng.integers(0, half2, n), rng.integers(half2, levels2, n))
        df["f2"] = f2
        shift = shift + rng.normal(0, 1.0, levels2)[f2]
    for c, scale in (("y", 1.0), ("d1", 0.7), ("d2", -0.4), ("z2", 0.5), ("w1", 0.3)):
        df[c] = df[c] + scale * shift
    return df


def fixed_effect_cases():
    rng = np.random.default_rng(SEED + 1)
    ols_regs = ["d1", "w1", "w2", "x3"]
    iv_setup = {"estimator": "2sls", "outcome": "y", "endog": ["d1"], "exog": ["w1", "w2"],
                "instruments": ["z1", "z2"], "intercept": True}
    ols_cols = ["y", "d1", "w1", "w2", "x3", "g1", "g2"]
    iv_cols = ["y", "d1", "w1", "w2", "z1", "z2", "g1", "g2"]
    cases = [
        ("fe_one", "one fixed effect f1 (15 levels), clusters g1/g2 not nested in it", ["f1"],
         invent_fe(rng, 420)),
        ("fe_two", "two fixed effects f1 (15) and f2 (8) whose level graph has two connected components",
         ["f1", "f2"], invent_fe(rng, 450, 15, 8, split=True)),
    ]
    for name, description, dims, df in cases:
        data = df[sorted(set(ols_cols + iv_cols)) + dims]
        setup = {"absorb": dims, "ols_kinds": FE_OLS_KINDS, "iv_kinds": FE_IV_KINDS,
                 "ols": {"estimator": "ols", "outcome": "y", "regressors": ols_regs, "intercept": True},
                 "iv": iv_setup}
        expected = {"ols": fe_ols_expected(data, "y", ols_regs, dims), "iv": fe_iv_expected(data, iv_setup, dims)}
        write(name, description, data, setup, expected)
    nested_case(rng, ols_regs, iv_setup)
    singleton_case(rng, ols_regs, iv_setup)


def nested_case(rng, ols_regs, iv_setup):
    """A fixed effect nested in the cluster variable g1: K of the CR1 factor leaves it out.

    sworn's CR1 for this case: V = G/(G-1) * (n-1)/(n-K) * (Xw'Xw)^-1 (sum_g s_g s_g') (Xw'Xw)^-1
    with Xw the regressors swept of the fixed effect, s_g = sum_{i in g} xw_i u_i, and
    K = the number of swept regressors only (the nested levels, constant included, are not
    counted). The dummies fit (statsmodels / linearmodels, K_full = K + levels) gives the
    same matrix times (n - K_full)/(n - K); both are computed and asserted equal.
    """
    df = invent_fe(rng, 400)
    # f1 nested in g1: two sub-levels per cluster.
    df["f1"] = df["g1"] * 2 + (rng.random(len(df)) < 0.5)
    assert df.groupby("f1")["g1"].nunique().max() == 1 and df["f1"].value_counts().min() >= 2
    cols = ["y", "d1", "w1", "w2", "x3", "z1", "z2", "g1", "g2", "f1"]
    data = df[cols]
    data_d, dummies, rank = fe_dummies(data, ["f1"])
    n, g = len(data), data["g1"].nunique()
    y = data["y"].to_numpy(float)
    out = {"absorbed_df": rank, "n": n, "clusters": g}
    # OLS.
    x_full = design(data_d, ols_regs + dummies)
    k, k_full = len(ols_regs), x_full.shape[1]
    sm_cl = sm.OLS(y, x_full).fit(cov_type="cluster", cov_kwds={"groups": data["g1"].to_numpy()})
    v_sm = np.asarray(sm_cl.cov_params())[:k, :k] * (n - k_full) / (n - k)
    xw = within(data_d, ols_regs, dummies)
    u = sm_cl.resid
    v_np = numpy_cr1(xw, u, data["g1"].to_numpy())
    assert np.allclose(v_sm, v_np, rtol=1e-9, atol=0)
    classical = sm.OLS(y, x_full).fit()
    out["ols"] = {"coef": sm_cl.params[:k].tolist(), "se": {"cluster": np.sqrt(np.diag(v_np)).tolist(),
                                                             "classical": classical.bse[:k].tolist()},
                  "df_resid": int(classical.df_resid)}
    # 2SLS (linearmodels on the dummies, clustered, debiased: (n-1)/(n-K_full) G/(G-1)).
    setup_d = dict(iv_setup, exog=iv_setup["exog"] + dummies)
    res = lm_fit(data_d, setup_d, "cluster")
    names = iv_setup["endog"] + iv_setup["exog"]
    k_iv, k_iv_full = len(names), len(setup_d["endog"]) + len(setup_d["exog"])
    v_lm = res.cov.loc[names, names].to_numpy() * (n - k_iv_full) / (n - k_iv)
    out["iv"] = {"coef": [float(res.params[c]) for c in names], "se": {"cluster": np.sqrt(np.diag(v_lm)).tolist(),
                 "classical": ours_order(lm_fit(data_d, setup_d, "classical").std_errors, dict(setup_d, exog=iv_setup["exog"]))}}
    setup = {"absorb": ["f1"], "ols": {"estimator": "ols", "outcome": "y", "regressors": ols_regs, "intercept": True},
             "iv": iv_setup}
    write("fe_nested", "fixed effect f1 nested in the cluster variable g1 (CR1 without the nested levels)",
          data, setup, out)


def drop_singletons_pd(df, dims):
    """Iteratively drop rows alone in their level of any dimension; returns the kept mask."""
    keep = np.ones(len(df), bool)
    while True:
        changed = False
        for d in dims:
            counts = df.loc[keep, d].map(df.loc[keep, d].value_counts())
            single = counts.index[counts.to_numpy() == 1]
            if len(single):
                keep[df.index.get_indexer(single)] = False
                changed = True
        if not changed:
            return keep


def singleton_case(rng, ols_regs, iv_setup):
    """Two fixed effects with singletons, one of which only appears after another is dropped."""
    df = invent_fe(rng, 380, 12, 6).reset_index(drop=True)
    extra = invent_fe(rng, 4, 12, 6).reset_index(drop=True)
    # Row A: f1 level 100 (a singleton), f2 level 50. Row B: f2 level 50 too, f1 an ordinary
    # level: after A goes, B is alone in f2 level 50 and goes as well. Rows C, D: singletons
    # in f2 (levels 60 and 61) with ordinary f1 levels.
    extra["f1"] = [100, 3, 5, 7]
    extra["f2"] = [50, 50, 60, 61]
    df = pd.concat([df, extra], ignore_index=True)
    cols = ["y", "d1", "w1", "w2", "x3", "z1", "z2", "g1", "g2", "f1", "f2"]
    data = df[cols]
    keep = drop_singletons_pd(data, ["f1", "f2"])
    assert (~keep).sum() == 4
    kept = data[keep].reset_index(drop=True)
    expected = {"ols": fe_ols_expected(kept, "y", ols_regs, ["f1", "f2"]),
                "iv": fe_iv_expected(kept, iv_setup, ["f1", "f2"])}
    expected["kept"] = [bool(k) for k in keep]
    expected["rows_before"] = len(data)
    setup = {"absorb": ["f1", "f2"], "ols_kinds": FE_OLS_KINDS, "iv_kinds": FE_IV_KINDS,
             "ols": {"estimator": "ols", "outcome": "y", "regressors": ols_regs, "intercept": True}, "iv": iv_setup}
    write("fe_singletons", "two fixed effects with singleton rows (dropped iteratively; the oracle is the "
          "dummies regression on the remaining rows)", data, setup, expected)


# ---------------------------------------------------------------------------------------
# End-to-end plan fixtures: CSV data plus expected values for a test through the plan path.
# Numbers in the CSV are written with repr(float) (shortest round-trip form), so parsing
# them gives the very doubles the expected values were computed from; a missing cell is NA.
# ---------------------------------------------------------------------------------------


def write_csv(name, df, fmt):
    path = os.path.join(OUT, name + ".csv")
    with open(path, "w", newline="") as fh:
        fh.write(",".join(df.columns) + "\n")
        for row in df.itertuples(index=False):
            fh.write(",".join(fmt[c](v) for c, v in zip(df.columns, row)) + "\n")


def num(v):
    return "NA" if pd.isna(v) else repr(float(v))


def whole(v):
    return "NA" if pd.isna(v) else str(int(v))


def named(series, names):
    return {c: float(series[c]) for c in names}


def plan_cases():
    rng = np.random.default_rng(SEED + 2)
    # Weekly series: z is an AR(1) cost shifter, w an exogenous control, p the price.
    n = 200
    z, p, y = np.zeros(n), np.zeros(n), np.zeros(n)
    w = rng.normal(0, 1, n)
    e = rng.normal(0, 1, n)
    v = 0.6 * e + rng.normal(0, 0.8, n)
    z[0], p[0] = rng.normal(0, 1), rng.normal(5, 1)
    for t in range(1, n):
        z[t] = 0.5 * z[t - 1] + rng.normal(0, 1)
        p[t] = 2.0 + 0.5 * p[t - 1] + 0.8 * z[t - 1] + 0.3 * w[t] + v[t]
    y = 10.0 - 1.2 * p + 0.5 * w + e * (1 + 0.3 * np.abs(w))
    ts = pd.DataFrame({"week": np.arange(1, n + 1), "y": y, "p": p, "z": z, "w": w})
    write_csv("plan_timeseries", ts, {"week": whole, "y": num, "p": num, "z": num, "w": num})
    est = ts.sort_values("week").copy()
    est["z_lag"] = est["z"].shift(1)
    est["p_lag"] = est["p"].shift(1)
    est = est.iloc[1:].reset_index(drop=True)
    est["const"] = 1.0
    model = IV2SLS(est["y"], est[["const", "w"]], est[["p"]], est[["z_lag", "p_lag"]])
    res = model.fit(cov_type="robust", debiased=True)
    classical = model.fit(cov_type="unadjusted", debiased=True)
    zmat = est[["z_lag", "p_lag", "const", "w"]].to_numpy()
    stage = sm.OLS(est["p"].to_numpy(), zmat).fit(cov_type="HC1")
    robust_f = float(stage.wald_test(np.eye(4)[:2], use_f=True, scalar=True).statistic)
    diag = classical.first_stage.diagnostics
    names = ["p", "const", "w"]
    expected = {
        "n": int(res.nobs),
        "coef": named(res.params, names),
        "se_hc1": named(res.std_errors, names),
        "df_resid": int(res.df_resid),
        "first_stage": {"f": float(diag.loc["p", "f.stat"]), "f_df": [2, int(res.nobs) - 4],
                        "robust_f_hc1": robust_f, "robust_f_df": [2, int(res.nobs) - 4],
                        "partial_r_squared": float(diag.loc["p", "partial.rsquared"])},
        "sargan": float(res.sargan.stat),
        "sargan_df": int(res.sargan.df),
    }
    assert np.isclose(res.first_stage.diagnostics.loc["p", "f.stat"] / 2, robust_f, rtol=1e-10)
    plan = {
        "data": "plan_timeseries.csv: columns week (integer 1..200, rows stored in week order), y, p, z, w (decimals)",
        "model": "2SLS of y on p (endogenous), w and an intercept",
        "instruments": "z_lag and p_lag: z and p lagged by one week (sort by week, shift by one row; the first row has no lag and is dropped, leaving 199 rows)",
        "errors": "hc1 (heteroskedasticity-robust, n/(n-k))",
        "coefficient names": "p, const (intercept), w",
        "first_stage": "p on z_lag, p_lag, const, w: classical F on the two excluded instruments, F(2, n - 4); robust F = HC1 Wald / 2, referred to F(2, n - 4)",
        "sargan": "n R^2 of the 2SLS residuals on all instruments, chi2(1)",
    }
    doc = {"case": "plan_timeseries", "description": "weekly series, 2SLS with lagged instruments, hc1",
           "seed": SEED + 2, "versions": VERSIONS, "plan": plan, "expected": expected}
    write_json("plan_timeseries", doc)

    # Cross-section with missing cells and a region fixed effect with two singleton levels.
    n = 300
    regions = np.array([f"region-{c}" for c in "abcdefghijkl"])
    region = regions[rng.integers(0, len(regions), n)]
    group = rng.integers(1, 26, n).astype(float)
    x = rng.normal(0, 1, n)
    x1 = rng.normal(1, 2, n)
    x2 = (rng.random(n) < 0.3).astype(float)
    shift = dict(zip(regions, rng.normal(0, 1, len(regions))))
    reg_effect = np.array([shift[r] for r in region])
    y = 1.0 + 0.7 * x - 0.2 * x1 + 0.9 * x2 + reg_effect + rng.normal(0, 0.5, 26)[group.astype(int)] + rng.normal(0, 1, n)
    miss = pd.DataFrame({"y": y, "x": x, "x1": x1, "x2": x2, "group": group, "region": region})
    # Two rows in regions of their own (the singletons); they never get a missing cell.
    miss.loc[17, "region"] = "region-island"
    miss.loc[211, "region"] = "region-outpost"
    for c, share in (("y", 0.04), ("x1", 0.05), ("x2", 0.03), ("group", 0.03)):
        hole = rng.random(n) < share
        hole[[17, 211]] = False
        miss.loc[hole, c] = np.nan
    write_csv("plan_missing", miss, {"y": num, "x": num, "x1": num, "x2": num, "group": whole,
                                     "region": lambda v: v})
    complete = miss.dropna(subset=["y", "x", "x1", "x2", "group"]).reset_index(drop=True)
    complete["const"] = 1.0
    names = ["const", "x", "x1", "x2"]
    fit = sm.OLS(complete["y"], complete[names]).fit(cov_type="cluster", cov_kwds={"groups": complete["group"].to_numpy()})
    counts = complete["region"].map(complete["region"].value_counts())
    fe = complete[counts.to_numpy() > 1].reset_index(drop=True)
    assert len(complete) - len(fe) == 2 and fe["region"].value_counts().min() > 1
    levels = sorted(fe["region"].unique())
    dummies = pd.DataFrame({f"D_{r}": (fe["region"] == r).astype(float) for r in levels})
    xfe = pd.concat([fe[["x", "x1", "x2"]], dummies], axis=1)
    fe_fit = sm.OLS(fe["y"], xfe).fit(cov_type="cluster", cov_kwds={"groups": fe["group"].to_numpy()})
    fe_names = ["x", "x1", "x2"]
    resid = fe_fit.resid.to_numpy()
    yw = fe["y"].to_numpy() - fe.groupby("region")["y"].transform("mean").to_numpy()
    expected = {
        "rows": n,
        "pooled": {"n": int(fit.nobs), "coef": named(fit.params, names), "se_cluster": named(fit.bse, names),
                   "df_resid": int(fit.df_resid), "clusters": int(complete["group"].nunique())},
        "fixed_effect": {"n": int(fe_fit.nobs), "singletons_dropped": int(len(complete) - len(fe)),
                         "levels": len(levels), "absorbed_df": len(levels),
                         "coef": named(fe_fit.params, fe_names), "se_cluster": named(fe_fit.bse, fe_names),
                         "df_resid": int(fe_fit.df_resid), "clusters": int(fe["group"].nunique()),
                         "within_r_squared": float(1 - resid @ resid / (yw @ yw))},
    }
    plan = {
        "data": "plan_missing.csv: columns y, x, x1, x2 (decimals), group (integer label 1..25), region (string label); a missing cell is written NA (in y, x1, x2 and group)",
        "pooled": "OLS of y on an intercept, x, x1, x2 after listwise deletion of rows with a missing cell in y, x, x1, x2 or group; errors clustered by group (CR1: G/(G-1)(n-1)/(n-K))",
        "fixed_effect": "the same after listwise deletion, with region absorbed (no intercept column): the two regions with a single remaining row (region-island, region-outpost) are dropped as singletons first; CR1 by group counts every region level in K (region is not nested in group); within R^2 = 1 - RSS / sum of squares of y demeaned by region",
        "coefficient names": "const (intercept), x, x1, x2",
    }
    doc = {"case": "plan_missing", "description": "OLS with missing cells, cluster errors, and a region fixed effect with singletons",
           "seed": SEED + 2, "versions": VERSIONS, "plan": plan, "expected": expected}
    write_json("plan_missing", doc)


if __name__ == "__main__":
    main()
