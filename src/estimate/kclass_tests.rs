//! Tests of the k-class estimators.
//!
//! Sources: linearmodels IVLIML through the fixtures `tests/reference/fixtures/weak_kclass_*`
//! written by `tests/reference/weak_iv.py` (LIML, Fuller(1), Fuller(4), κ = 0.5; classical,
//! HC0, HC1, CR1, two-way; κ_LIML also recomputed there with scipy's generalized symmetric
//! eigensolver); the identity κ = 1 ⇔ 2SLS against this crate's `tsls` (itself checked
//! against linearmodels IV2SLS); and the Frisch–Waugh–Lovell identity for absorbed fixed
//! effects (dummies in the design versus within-transformed data with `Absorbed`).

use crate::estimate::IvColumns;
use nalgebra::{DMatrix, DVector};

use super::{kclass, KClass};
use crate::estimate::reference_tests::{load, Fixture, Tracker, TOL};
use crate::estimate::{tsls, Absorbed, CovSpec, EstimateError};

/// Covariance kinds linearmodels offers for k-class estimators.
const KINDS: [&str; 5] = ["classical", "hc0", "hc1", "cluster", "twoway"];

/// The estimators each fixture holds, with the matching [`KClass`].
const ESTIMATORS: [(&str, KClass); 4] = [
    ("liml", KClass::Liml),
    ("fuller1", KClass::Fuller { alpha: 1.0 }),
    ("fuller4", KClass::Fuller { alpha: 4.0 }),
    ("kappa_half", KClass::Kappa { kappa: 0.5 }),
];

struct Data {
    y: DVector<f64>,
    exog: DMatrix<f64>,
    endog: DMatrix<f64>,
    instruments: DMatrix<f64>,
}

fn data(fx: &Fixture) -> Data {
    Data {
        y: fx.vector(&fx.setup["outcome"]),
        exog: fx.matrix(&fx.setup["exog"]),
        endog: fx.matrix(&fx.setup["endog"]),
        instruments: fx.matrix(&fx.setup["instruments"]),
    }
}

fn fit(d: &Data, spec: &CovSpec, which: KClass) -> Result<super::KClassFit, EstimateError> {
    kclass(
        IvColumns::new(&d.y, &d.exog, &d.endog, &d.instruments),
        true,
        spec,
        which,
        &Absorbed::NONE,
    )
}

/// Every estimator × covariance kind of one fixture against linearmodels IVLIML.
fn check_fixture(case: &str) {
    let fx = load(case);
    let d = data(&fx);
    let ex = &fx.expected;
    assert_eq!(fx.n as u64, ex["n"].as_u64().expect("n"));
    let mut t = Tracker::default();
    for (label, which) in ESTIMATORS {
        let e = &ex["estimators"][label];
        for kind in KINDS {
            let got = fit(&d, &fx.spec(kind), which).expect("k-class fit");
            t.vector(&format!("{label} coef"), &got.fit.coef, &e["coef"]);
            t.scalar(&format!("{label} kappa"), got.kappa, &e["kappa"]);
            t.scalar(
                &format!("{label} kappa_liml"),
                got.kappa_liml,
                &e["kappa_liml"],
            );
            t.scalar(&format!("{label} rss"), got.fit.rss, &e["rss"]);
            t.scalar(
                &format!("{label} r_squared"),
                got.fit.r_squared,
                &e["r_squared"],
            );
            t.scalar(
                &format!("{label} residual_sd"),
                got.fit.residual_sd,
                &e["residual_sd"],
            );
            t.vector(
                &format!("{label} se {kind}"),
                &got.fit.std_errors(),
                &e["se"][kind],
            );
            assert_eq!(got.fit.df_resid as u64, e["df_resid"].as_u64().expect("df"));
            let clusters = ex["clusters"][kind].as_u64().map(|g| g as usize);
            assert_eq!(got.fit.clusters, clusters, "{case} {kind}");
        }
    }
    // κ_LIML recomputed with scipy.linalg.eigh on the generalized problem.
    let liml = fit(&d, &CovSpec::Classical, KClass::Liml).expect("liml");
    t.scalar(
        "kappa_liml (scipy eigh)",
        liml.kappa_liml,
        &ex["kappa_liml"],
    );
    t.finish(case);
}

/// linearmodels IVLIML, one endogenous regressor, three instruments.
#[test]
fn liml_fuller_overidentified() {
    check_fixture("weak_kclass_over");
}

/// linearmodels IVLIML, three weak instruments (κ_LIML well above 1).
#[test]
fn liml_fuller_weak_instruments() {
    check_fixture("weak_kclass_weak");
}

/// linearmodels IVLIML, exactly identified (κ_LIML = 1: LIML is 2SLS, Fuller is not).
#[test]
fn liml_fuller_exactly_identified() {
    check_fixture("weak_kclass_just");
    let fx = load("weak_kclass_just");
    let liml = fit(&data(&fx), &CovSpec::Classical, KClass::Liml).expect("liml");
    assert_eq!(liml.kappa_liml, 1.0);
}

/// linearmodels IVLIML, two endogenous regressors, four instruments.
#[test]
fn liml_fuller_two_endogenous() {
    check_fixture("weak_kclass_two_endog");
}

/// κ = 1 is 2SLS: coefficients and every covariance equal `tsls` to rounding (the two
/// solve different but equivalent systems: (Q'X)b = Q'y versus least squares on X̂).
#[test]
fn kappa_one_is_two_stage_least_squares() {
    for case in [
        "weak_kclass_over",
        "weak_kclass_two_endog",
        "weak_kclass_weak",
    ] {
        let fx = load(case);
        let d = data(&fx);
        let mut worst: f64 = 0.0;
        for kind in KINDS {
            let spec = fx.spec(kind);
            let k1 = fit(&d, &spec, KClass::Kappa { kappa: 1.0 }).expect("kappa 1");
            let ts = tsls(
                &d.y,
                &d.exog,
                &d.endog,
                &d.instruments,
                true,
                &spec,
                &Absorbed::NONE,
            )
            .expect("2sls");
            let pairs = [
                (k1.fit.coef.as_slice(), ts.coef.as_slice()),
                (k1.fit.cov.as_slice(), ts.cov.as_slice()),
                (k1.fit.resid.as_slice(), ts.resid.as_slice()),
            ];
            for (a, b) in pairs {
                let scale = b.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
                for (x, e) in a.iter().zip(b) {
                    worst = worst.max((x - e).abs() / scale);
                }
            }
            assert_eq!(k1.fit.clusters, ts.clusters);
            assert_eq!(k1.fit.coef_reference, ts.coef_reference);
        }
        println!("{case}: kappa = 1 versus tsls, largest difference relative to max |entry|: {worst:.2e}");
        assert!(worst < 1e-12, "{case}: {worst}");
    }
}

/// HC2/HC3 are refused, as for 2SLS.
#[test]
fn leverage_covariances_refused() {
    let fx = load("weak_kclass_over");
    let d = data(&fx);
    for spec in [CovSpec::Hc2, CovSpec::Hc3] {
        let err = fit(&d, &spec, KClass::Liml);
        assert!(matches!(
            err,
            Err(EstimateError::CovarianceUnavailable { .. })
        ));
    }
}

/// Non-finite α or κ are errors; an outcome in the span of the regressors is named as
/// index k (the LIML variance ratio is 0/0).
#[test]
fn invalid_inputs() {
    let fx = load("weak_kclass_over");
    let d = data(&fx);
    let spec = CovSpec::Classical;
    let nan = fit(&d, &spec, KClass::Fuller { alpha: f64::NAN });
    assert_eq!(nan, Err(EstimateError::NotFinite));
    let inf = fit(
        &d,
        &spec,
        KClass::Kappa {
            kappa: f64::INFINITY,
        },
    );
    assert_eq!(inf, Err(EstimateError::NotFinite));
    let exact = Data {
        y: d.endog.column(0) * 2.0 + d.exog.column(1) - d.exog.column(0),
        ..d
    };
    let k = exact.endog.ncols() + exact.exog.ncols();
    assert_eq!(
        fit(&exact, &spec, KClass::Liml),
        Err(EstimateError::RankDeficient { dependent: vec![k] })
    );
}

/// Within-transformation: subtracts group means of `ids` from every column of `m`.
pub(crate) fn demean(m: &DMatrix<f64>, ids: &[usize]) -> DMatrix<f64> {
    let groups = ids.iter().max().map_or(0, |g| g + 1);
    let mut out = m.clone();
    for j in 0..m.ncols() {
        let (mut sum, mut count) = (vec![0.0; groups], vec![0.0; groups]);
        for (i, &g) in ids.iter().enumerate() {
            sum[g] += m[(i, j)];
            count[g] += 1.0;
        }
        for (i, &g) in ids.iter().enumerate() {
            out[(i, j)] -= sum[g] / count[g];
        }
    }
    out
}

/// Group dummies (one per level, no reference level).
pub(crate) fn dummies(ids: &[usize]) -> DMatrix<f64> {
    let groups = ids.iter().max().map_or(0, |g| g + 1);
    DMatrix::from_fn(ids.len(), groups, |i, g| f64::from(u8::from(ids[i] == g)))
}

/// Frisch–Waugh–Lovell: fixed effects of g2 as dummies in exog, or swept out of every
/// column with `Absorbed { df: G }`, give the same coefficients, κ and standard errors
/// (classical, HC1, CR1 on the non-nested g1) — every df counts the absorbed ones. Two-way
/// clustering is left out: its eigenvalue clamp acts on the whole matrix, dummy block
/// included, so it is not invariant to sweeping the dummies out (g2 is also a cluster
/// dimension here, and the clamp does bind).
#[test]
fn absorbed_fixed_effects_match_dummies() {
    let fx = load("weak_kclass_over");
    let d = data(&fx);
    let g2: Vec<usize> = fx.columns["g2"].iter().map(|&v| v as usize).collect();
    let w1 = d.exog.columns(1, 1).into_owned();
    let with_dummies = crate::estimate::linear::hcat(&w1, &dummies(&g2));
    let groups = with_dummies.ncols() - 1;
    let absorbed = Absorbed {
        df: groups,
        nested_df: 0,
        leverage: None,
    };
    let y_w = DVector::from_column_slice(
        demean(&DMatrix::from_column_slice(fx.n, 1, d.y.as_slice()), &g2).as_slice(),
    );
    let (w1_w, endog_w, instr_w) = (
        demean(&w1, &g2),
        demean(&d.endog, &g2),
        demean(&d.instruments, &g2),
    );
    let mut worst: f64 = 0.0;
    for kind in ["classical", "hc1", "cluster"] {
        let spec = fx.spec(kind);
        for (_, which) in ESTIMATORS {
            let full = kclass(
                IvColumns::new(&d.y, &with_dummies, &d.endog, &d.instruments),
                false,
                &spec,
                which,
                &Absorbed::NONE,
            )
            .expect("dummies");
            let within = kclass(
                IvColumns::new(&y_w, &w1_w, &endog_w, &instr_w),
                false,
                &spec,
                which,
                &absorbed,
            )
            .expect("within");
            let se_full = full.fit.std_errors();
            let se_within = within.fit.std_errors();
            for j in 0..2 {
                worst = worst.max((full.fit.coef[j] / within.fit.coef[j] - 1.0).abs());
                worst = worst.max((se_full[j] / se_within[j] - 1.0).abs());
            }
            worst = worst.max((full.kappa / within.kappa - 1.0).abs());
            worst = worst.max((full.kappa_liml / within.kappa_liml - 1.0).abs());
            assert_eq!(full.fit.df_resid, within.fit.df_resid);
        }
    }
    println!("dummies versus absorbed: largest relative difference {worst:.2e}");
    assert!(worst < TOL, "{worst}");
}

/// A constant outcome lies in the span of the exogenous columns: the pencil's root along it
/// is 0/0, and κ_LIML is the smallest root over the endogenous column alone,
/// ‖M_exog d‖² / ‖M_Z d‖² with one endogenous column (the ratio is then the same for every
/// β ≠ 0). Before, this was reached or refused by rounding noise in the partialled outcome.
#[test]
fn constant_outcome_takes_kappa_from_the_endogenous_columns() {
    let fx = load("weak_kclass_over");
    let mut d = data(&fx);
    d.y = DVector::from_element(d.y.len(), 5.0);
    let residual_norm = |m: &DMatrix<f64>| {
        let qr = m.clone().qr();
        let coef = qr
            .r()
            .solve_upper_triangular(&(qr.q().transpose() * &d.endog))
            .expect("full rank");
        (&d.endog - m * coef).norm_squared()
    };
    let z = DMatrix::from_columns(
        &d.instruments
            .column_iter()
            .chain(d.exog.column_iter())
            .collect::<Vec<_>>(),
    );
    let want = residual_norm(&d.exog) / residual_norm(&z);
    let zqr = crate::estimate::qr::PivotedQr::new(&z).expect("instruments");
    let excluded = d.instruments.ncols();
    let kappa = super::liml_kappa(&d.y, &d.exog, &d.endog, &zqr, excluded).expect("kappa");
    assert!(want > 1.0);
    assert!((kappa - want).abs() <= 1e-12 * want, "{kappa} vs {want}");
}
