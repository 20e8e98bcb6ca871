//! HAC (Bartlett kernel) errors against `tests/reference/fixtures/hac.json`, written by
//! `tests/reference/hac.py`: statsmodels OLS HAC (use_correction), linearmodels IV2SLS
//! and IVLIML kernel covariances (debiased), statsmodels Wald tests for the first-stage robust F and
//! Anderson–Rubin, two-step GMM J (numpy, equal to linearmodels IVGMM), the dropped-rows
//! convention (numpy) and the Newey–West (1994) bandwidth rule (numpy, from the paper).

use crate::estimate::IvColumns;
use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::{load, Tracker};
use crate::estimate::{
    anderson_rubin, first_stages, hansen_j, kclass, newey_west_1994_bandwidth, ols, tsls, Absorbed,
    CovSpec, KClass,
};

fn matrix_entries(t: &mut Tracker, what: &str, got: &DMatrix<f64>, expected: &Value) {
    let rows = expected.as_array().expect("matrix");
    for (i, row) in rows.iter().enumerate() {
        for (j, e) in row.as_array().expect("row").iter().enumerate() {
            t.scalar(what, got[(i, j)], e);
        }
    }
}

#[test]
fn hac_matches_statsmodels_and_linearmodels() {
    let fx = load("hac");
    let ex = &fx.expected;
    let n = fx.n;
    let col = |name: &str| DVector::from_vec(fx.columns[name].clone());
    let ones = DVector::from_element(n, 1.0);
    let (y, x, w) = (col("y"), col("x"), col("w"));
    let b = ex["bandwidth"].as_f64().expect("bandwidth");
    let cov = CovSpec::Hac {
        positions: (0..n).collect(),
        bandwidth: b,
    };
    let none = Absorbed::NONE;
    let xo = DMatrix::from_columns(&[x.clone(), w.clone(), ones.clone()]);
    let exog = DMatrix::from_columns(&[w.clone(), ones.clone()]);
    let endog = DMatrix::from_columns(std::slice::from_ref(&x));
    let z = DMatrix::from_columns(&[col("z1"), col("z2")]);
    let mut t = Tracker::default();

    let fit = ols(&y, &xo, true, &cov, &none).expect("ols");
    t.vector("ols coef", &fit.coef, &ex["ols_coef"]);
    matrix_entries(&mut t, "ols cov", &fit.cov, &ex["ols_cov"]);

    let iv = tsls(&y, &exog, &endog, &z, true, &cov, &none).expect("2sls");
    t.vector("2sls coef", &iv.coef, &ex["tsls_coef"]);
    matrix_entries(&mut t, "2sls cov", &iv.cov, &ex["tsls_cov"]);

    let liml = kclass(
        IvColumns::new(&y, &exog, &endog, &z),
        true,
        &cov,
        KClass::Liml,
        &none,
    )
    .expect("liml");
    t.vector("liml coef", &liml.fit.coef, &ex["liml_coef"]);
    matrix_entries(&mut t, "liml cov", &liml.fit.cov, &ex["liml_cov"]);

    let stage = &first_stages(&exog, &endog, &z, true, &cov, &none).expect("first stage")[0];
    matrix_entries(
        &mut t,
        "first-stage cov",
        &stage.fit.cov,
        &ex["first_stage_cov"],
    );
    t.scalar(
        "first-stage robust F",
        stage.robust_f.statistic,
        &ex["first_stage_robust_f"],
    );
    let ar = anderson_rubin(
        IvColumns::new(&y, &exog, &endog, &z),
        &cov,
        &none,
        0.0,
        0.95,
    )
    .expect("ar");
    t.scalar("AR at 0", ar.test.statistic, &ex["ar_statistic_at_0"]);
    let j = hansen_j(&y, &exog, &endog, &z, &cov, &none)
        .expect("J")
        .expect("over-identified");
    t.scalar("Hansen J", j.statistic, &ex["hansen_j"]);

    let ols_resid = &fit.resid;
    let nw = newey_west_1994_bandwidth(&xo, Some(2), ols_resid, &(0..n).collect::<Vec<_>>());
    t.scalar("NW1994 ols", nw.expect("nw"), &ex["nw1994_ols"]);
    let xhat = {
        let zf = DMatrix::from_columns(&[col("z1"), col("z2"), w.clone(), ones.clone()]);
        let proj = zf.clone() * (zf.transpose() * &zf).try_inverse().expect("Z'Z") * zf.transpose();
        &proj * &xo
    };
    let nw = newey_west_1994_bandwidth(&xhat, Some(2), &iv.resid, &(0..n).collect::<Vec<_>>());
    t.scalar("NW1994 2sls", nw.expect("nw"), &ex["nw1994_tsls"]);

    let dropped: Vec<usize> = ex["gap_rows_dropped"]
        .as_array()
        .expect("rows")
        .iter()
        .map(|v| v.as_u64().expect("row") as usize)
        .collect();
    let keep: Vec<usize> = (0..n).filter(|i| !dropped.contains(i)).collect();
    let xg = DMatrix::from_fn(keep.len(), 3, |i, j| xo[(keep[i], j)]);
    let yg = DVector::from_fn(keep.len(), |i, _| y[keep[i]]);
    let gap = CovSpec::Hac {
        positions: keep.clone(),
        bandwidth: b,
    };
    let fit = ols(&yg, &xg, true, &gap, &none).expect("gap ols");
    t.vector("gap coef", &fit.coef, &ex["gap_ols_coef"]);
    matrix_entries(&mut t, "gap cov", &fit.cov, &ex["gap_ols_cov"]);
    let nw = newey_west_1994_bandwidth(&xg, Some(2), &fit.resid, &keep);
    t.scalar("NW1994 gap", nw.expect("nw"), &ex["nw1994_gap_ols"]);
    t.finish("hac");
}
