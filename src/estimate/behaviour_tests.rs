//! Error paths and conventions, on small hand-built designs (expected values derived by
//! hand in each test's comment; no library output is needed for them).

use nalgebra::{DMatrix, DVector};

use super::{
    collinear_columns, endogeneity, first_stages, ols, overidentification, tsls, Absorbed, CovSpec,
    EstimateError,
};
use crate::distribution::Reference;

/// A small design: intercept, a dummy d, its complement 1 − d, and a trend.
fn dummy_trap() -> DMatrix<f64> {
    DMatrix::from_fn(8, 4, |i, j| match j {
        0 => 1.0,
        1 => (i % 2) as f64,
        2 => 1.0 - (i % 2) as f64,
        _ => i as f64,
    })
}

fn outcome(n: usize) -> DVector<f64> {
    DVector::from_fn(n, |i, _| ((i * 7) % 5) as f64 + 0.5 * i as f64)
}

/// 1 = d + (1 − d): the column named is the LATER one in the caller's order.
#[test]
fn collinear_names_the_later_column() {
    let x = dummy_trap();
    assert_eq!(collinear_columns(&x), vec![2]);
    let reordered = DMatrix::from_columns(&[x.column(1), x.column(2), x.column(0), x.column(3)]);
    assert_eq!(collinear_columns(&reordered), vec![2]);
    let zero = DMatrix::from_columns(&[
        x.column(0).into_owned(),
        x.column(3) * 0.0,
        x.column(3).into_owned(),
    ]);
    assert_eq!(collinear_columns(&zero), vec![1]);
    let full = DMatrix::from_columns(&[x.column(0), x.column(1), x.column(3)]);
    assert!(collinear_columns(&full).is_empty());
}

/// OLS refuses a rank-deficient design and names the dependent column.
#[test]
fn ols_rank_deficient() {
    let err = ols(
        &outcome(8),
        &dummy_trap(),
        true,
        &CovSpec::Classical,
        &Absorbed::NONE,
    );
    assert_eq!(
        err,
        Err(EstimateError::RankDeficient { dependent: vec![2] })
    );
}

/// NaN input, too few rows, a single cluster, mismatched rows.
#[test]
fn ols_input_errors() {
    let x = dummy_trap().columns(0, 2).into_owned();
    let mut y = outcome(8);
    let one_cluster = CovSpec::Cluster { ids: vec![0; 8] };
    let err = ols(&y, &x, true, &one_cluster, &Absorbed::NONE);
    assert_eq!(err, Err(EstimateError::TooFewClusters { clusters: 1 }));
    let short = x.rows(0, 2).into_owned();
    let err = ols(
        &y.rows(0, 2).into_owned(),
        &short,
        true,
        &CovSpec::Classical,
        &Absorbed::NONE,
    );
    assert_eq!(err, Err(EstimateError::TooFewObservations { n: 2, k: 2 }));
    let err = ols(
        &y.rows(0, 7).into_owned(),
        &x,
        true,
        &CovSpec::Classical,
        &Absorbed::NONE,
    );
    assert!(matches!(err, Err(EstimateError::DimensionMismatch { .. })));
    y[3] = f64::NAN;
    assert_eq!(
        ols(&y, &x, true, &CovSpec::Classical, &Absorbed::NONE),
        Err(EstimateError::NotFinite)
    );
}

/// A dummy for one observation gives it leverage 1, so HC2/HC3 are undefined.
#[test]
fn unit_leverage_is_an_error() {
    let x = DMatrix::from_fn(
        6,
        2,
        |i, j| if j == 0 { 1.0 } else { (i == 4) as u8 as f64 },
    );
    let err = ols(&outcome(6), &x, true, &CovSpec::Hc3, &Absorbed::NONE);
    assert_eq!(err, Err(EstimateError::UnitLeverage { observation: 4 }));
    assert!(ols(&outcome(6), &x, true, &CovSpec::Hc1, &Absorbed::NONE).is_ok());
}

/// Exact fit y = 2 + 3t: coefficients by hand; t-reference uses n − k, or G − 1 clustered.
#[test]
fn exact_fit_and_references() {
    let x = DMatrix::from_fn(6, 2, |i, j| if j == 0 { 1.0 } else { i as f64 });
    let y = DVector::from_fn(6, |i, _| 2.0 + 3.0 * i as f64);
    let fit = ols(&y, &x, true, &CovSpec::Classical, &Absorbed::NONE).expect("fit");
    assert!((fit.coef[0] - 2.0).abs() < 1e-14 && (fit.coef[1] - 3.0).abs() < 1e-14);
    assert!(fit.rss < 1e-24 && (fit.r_squared - 1.0).abs() < 1e-14);
    assert_eq!(fit.coef_reference, Reference::StudentT { df: 4.0 });
    let ids = vec![0, 0, 1, 1, 2, 2];
    let clustered = ols(&y, &x, true, &CovSpec::Cluster { ids }, &Absorbed::NONE).expect("fit");
    assert_eq!(clustered.coef_reference, Reference::StudentT { df: 2.0 });
    let two = CovSpec::TwoWay {
        first: vec![0, 0, 1, 1, 2, 2],
        second: vec![0, 1, 0, 1, 0, 1],
    };
    let fit = ols(&y, &x, true, &two, &Absorbed::NONE).expect("fit");
    assert_eq!(
        (fit.clusters, fit.coef_reference),
        (Some(2), Reference::StudentT { df: 1.0 })
    );
}

/// Invented IV data: z drives d, the outcome depends on d.
fn iv_inputs() -> (DVector<f64>, DMatrix<f64>, DMatrix<f64>, DMatrix<f64>) {
    let n = 12;
    let z = DMatrix::from_fn(n, 2, |i, j| ((i * (j + 3)) % 7) as f64);
    let d = DMatrix::from_fn(n, 1, |i, _| z[(i, 0)] * 0.5 + ((i * 5) % 3) as f64);
    let exog = DMatrix::from_element(n, 1, 1.0);
    let y = DVector::from_fn(n, |i, _| 1.0 + 2.0 * d[(i, 0)] + ((i * 11) % 4) as f64);
    (y, exog, d, z)
}

/// Order condition, collinear instruments, HC2 refused, overidentification None when exact.
#[test]
fn iv_errors_and_exact_identification() {
    let (y, exog, d, z) = iv_inputs();
    let none = DMatrix::zeros(12, 0);
    let err = tsls(
        &y,
        &exog,
        &d,
        &none,
        true,
        &CovSpec::Classical,
        &Absorbed::NONE,
    );
    assert_eq!(
        err,
        Err(EstimateError::UnderIdentified {
            instruments: 0,
            endogenous: 1
        })
    );
    let doubled = DMatrix::from_columns(&[z.column(0).into_owned(), z.column(0) * 2.0]);
    let err = tsls(
        &y,
        &exog,
        &d,
        &doubled,
        true,
        &CovSpec::Classical,
        &Absorbed::NONE,
    );
    assert_eq!(
        err,
        Err(EstimateError::InstrumentsRankDeficient { dependent: vec![1] })
    );
    let err = tsls(&y, &exog, &d, &z, true, &CovSpec::Hc2, &Absorbed::NONE);
    let refused = EstimateError::CovarianceUnavailable {
        estimator: "2sls",
        kind: "hc2",
    };
    assert_eq!(err, Err(refused));
    let just = z.columns(0, 1).into_owned();
    assert_eq!(
        overidentification(&y, &exog, &d, &just, &Absorbed::NONE),
        Ok(None)
    );
    assert!(overidentification(&y, &exog, &d, &z, &Absorbed::NONE)
        .expect("overid")
        .is_some());
}

/// With an instrument equal to the endogenous regressor, 2SLS is OLS (P_Z d = d), the first
/// stage fits exactly, and the control-function residual column is zero, hence dependent
/// (index k = 2 of [endog | exog | V̂]).
#[test]
fn instrument_equal_to_regressor_gives_ols() {
    let (y, exog, d, _) = iv_inputs();
    let iv = tsls(&y, &exog, &d, &d, true, &CovSpec::Hc1, &Absorbed::NONE).expect("2sls");
    let x = DMatrix::from_columns(&[d.column(0), exog.column(0)]);
    let ls = ols(&y, &x, true, &CovSpec::Hc1, &Absorbed::NONE).expect("ols");
    assert!((&iv.coef - &ls.coef).amax() < 1e-12 && (&iv.cov - &ls.cov).amax() < 1e-12);
    let stage =
        &first_stages(&exog, &d, &d, true, &CovSpec::Classical, &Absorbed::NONE).expect("first")[0];
    assert!(stage.fit.rss < 1e-20 && (stage.partial_r_squared - 1.0).abs() < 1e-12);
    assert!(stage.f.statistic.is_infinite() && stage.f.statistic > 0.0);
    let e = endogeneity(
        &y,
        &exog,
        &d,
        &d,
        true,
        &CovSpec::Classical,
        &Absorbed::NONE,
    );
    assert_eq!(e, Err(EstimateError::RankDeficient { dependent: vec![2] }));
}

/// Hansen's J needs a nonsingular moment covariance: 2 clusters cannot support 4 moment
/// conditions (the clustered meat has rank at most 2); exact identification gives `None`.
#[test]
fn hansen_j_singular_and_exact() {
    let (y, exog, d, z) = iv_inputs();
    let two = CovSpec::Cluster {
        ids: (0..12).map(|i| i % 2).collect(),
    };
    let err = super::hansen_j(&y, &exog, &d, &z, &two, &Absorbed::NONE);
    assert_eq!(
        err,
        Err(EstimateError::SingularMomentCovariance { moments: 3 })
    );
    let just = z.columns(0, 1).into_owned();
    let none = super::hansen_j(&y, &exog, &d, &just, &CovSpec::Hc0, &Absorbed::NONE);
    assert_eq!(none, Ok(None));
}

/// Absorbed coefficients count against the sample: 12 rows cannot carry 2 regressors and
/// 10 absorbed levels (n ≤ k + a).
#[test]
fn absorbed_degrees_of_freedom_limit_the_sample() {
    let (y, exog, d, _) = iv_inputs();
    let x = DMatrix::from_columns(&[d.column(0), exog.column(0)]);
    let absorbed = Absorbed {
        df: 10,
        nested_df: 0,
        leverage: None,
    };
    let err = ols(&y, &x, true, &CovSpec::Classical, &absorbed);
    assert_eq!(err, Err(EstimateError::TooFewObservations { n: 12, k: 12 }));
}

/// A large mean in the outcome changes no test: the control-function F and κ_LIML with y + 10¹³ equal those with y to 1e-6 (absolute below 1; every
/// value an integer, so both outcomes are exact). Checks that the rule reporting an exact fit's F as +∞, and the
/// LIML rule for an outcome in the span of the controls, look at residuals against the
/// rounding of the fit, not against the outcome's mean.
#[test]
fn a_large_outcome_mean_changes_no_test() {
    let n = 2000;
    let z = DMatrix::from_fn(n, 2, |i, j| ((i * (j + 3) + i / 7) % 5) as f64);
    let d = DMatrix::from_fn(n, 1, |i, _| z[(i, 0)] + ((i * 11) % 4) as f64);
    let exog = DMatrix::from_element(n, 1, 1.0);
    let y0 = DVector::from_fn(n, |i, _| 2.0 * d[(i, 0)] + ((i * 13) % 9) as f64);
    let shifted = y0.add_scalar(1e13);
    let close = |a: f64, b: f64, what: &str| {
        assert!(a.is_finite() && b.is_finite(), "{what}: {a} vs {b}");
        assert!(
            (a - b).abs() <= 1e-6 * b.abs().max(1.0),
            "{what}: {a} vs {b}"
        );
    };
    let cf = |y: &DVector<f64>| {
        endogeneity(y, &exog, &d, &z, true, &CovSpec::Hc1, &Absorbed::NONE)
            .expect("endogeneity")
            .control_function
            .statistic
    };
    close(cf(&shifted), cf(&y0), "control-function F");
    let kappa = |y: &DVector<f64>| {
        super::kclass(
            super::IvColumns::new(y, &exog, &d, &z),
            true,
            &CovSpec::Hc1,
            super::KClass::Liml,
            &Absorbed::NONE,
        )
        .expect("liml")
        .kappa
    };
    close(kappa(&shifted) - 1.0, kappa(&y0) - 1.0, "κ_LIML − 1");
}
