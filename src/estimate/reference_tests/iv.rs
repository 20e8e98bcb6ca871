//! 2SLS fixtures: linearmodels IV2SLS (coefficients, classical/HC0/HC1/one- and two-way
//! cluster SEs, first-stage F and partial R², Durbin, Wu–Hausman, Sargan, Basmann) and
//! statsmodels OLS (first stages, reduced form, control-function Wald tests).

use super::{load, Fixture, Tracker, OLS_KINDS};
use crate::estimate::{
    endogeneity, first_stages, overidentification, reduced_form, tsls, CovSpec, EstimateError,
};

/// Covariance kinds linearmodels offers for 2SLS.
const IV_KINDS: [&str; 5] = ["classical", "hc0", "hc1", "cluster", "twoway"];

/// The inputs of a 2SLS fixture.
struct IvData {
    y: nalgebra::DVector<f64>,
    exog: nalgebra::DMatrix<f64>,
    endog: nalgebra::DMatrix<f64>,
    instruments: nalgebra::DMatrix<f64>,
}

fn iv_data(fx: &Fixture) -> IvData {
    IvData {
        y: fx.vector(&fx.setup["outcome"]),
        exog: fx.matrix(&fx.setup["exog"]),
        endog: fx.matrix(&fx.setup["endog"]),
        instruments: fx.matrix(&fx.setup["instruments"]),
    }
}

/// 2SLS coefficients, fit statistics and standard errors per covariance kind.
fn check_tsls(fx: &Fixture, d: &IvData, t: &mut Tracker) {
    for kind in IV_KINDS {
        let fit = tsls(
            &d.y,
            &d.exog,
            &d.endog,
            &d.instruments,
            true,
            &fx.spec(kind),
        )
        .expect("2sls");
        t.fit("2sls ", &fit, &fx.expected);
        t.vector(
            &format!("2sls se {kind}"),
            &fit.std_errors(),
            &fx.expected["se"][kind],
        );
        let g = fx.expected["clusters"][kind].as_u64().map(|g| g as usize);
        assert_eq!(fit.clusters, g, "clusters {kind}");
    }
    for spec in [CovSpec::Hc2, CovSpec::Hc3] {
        let err = tsls(&d.y, &d.exog, &d.endog, &d.instruments, true, &spec);
        assert!(matches!(
            err,
            Err(EstimateError::CovarianceUnavailable { .. })
        ));
    }
}

/// First stages and reduced form under every OLS covariance kind.
fn check_first_stage_and_reduced_form(fx: &Fixture, d: &IvData, t: &mut Tracker) {
    for kind in OLS_KINDS {
        let spec = fx.spec(kind);
        let stages = first_stages(&d.exog, &d.endog, &d.instruments, true, &spec).expect("first");
        for (j, stage) in stages.iter().enumerate() {
            let ex = &fx.expected["first_stage"][j];
            t.vector("first stage coef", &stage.fit.coef, &ex["coef"]);
            t.vector(
                &format!("first stage se {kind}"),
                &stage.fit.std_errors(),
                &ex["se"][kind],
            );
            t.scalar("first stage f", stage.f.statistic, &ex["f"]);
            t.scalar(
                &format!("first stage robust_f {kind}"),
                stage.robust_f.statistic,
                &ex["robust_f"][kind],
            );
            t.scalar(
                "first stage partial r2",
                stage.partial_r_squared,
                &ex["partial_r_squared"],
            );
        }
        let rf = reduced_form(&d.y, &d.exog, &d.instruments, true, &spec).expect("reduced form");
        let ex = &fx.expected["reduced_form"];
        t.vector("reduced form coef", &rf.coef, &ex["coef"]);
        t.vector(
            &format!("reduced form se {kind}"),
            &rf.std_errors(),
            &ex["se"][kind],
        );
    }
}

/// Durbin, Wu–Hausman and the control-function test per covariance kind.
fn check_endogeneity(fx: &Fixture, d: &IvData, t: &mut Tracker) {
    let ex = &fx.expected["endogeneity"];
    for kind in OLS_KINDS {
        let e = endogeneity(
            &d.y,
            &d.exog,
            &d.endog,
            &d.instruments,
            true,
            &fx.spec(kind),
        )
        .expect("endogeneity");
        t.scalar("durbin", e.durbin.statistic, &ex["durbin"]);
        t.scalar("wu-hausman", e.wu_hausman.statistic, &ex["wu_hausman"]);
        let crate::distribution::Reference::F { df2, .. } = e.wu_hausman.reference else {
            panic!("wu-hausman refers to F");
        };
        assert_eq!(df2 as u64, ex["wu_hausman_df2"].as_u64().expect("df2"));
        let cf = &ex["control_function"][kind];
        t.scalar(
            &format!("control function {kind}"),
            e.control_function.statistic,
            cf,
        );
    }
}

/// Sargan and Basmann (or `None` when exactly identified).
fn check_overidentification(fx: &Fixture, d: &IvData, t: &mut Tracker) {
    let o = overidentification(&d.y, &d.exog, &d.endog, &d.instruments).expect("overid");
    let ex = &fx.expected["overidentification"];
    match o {
        None => assert!(ex.is_null(), "fixture is overidentified"),
        Some(o) => {
            t.scalar("sargan", o.sargan.statistic, &ex["sargan"]);
            t.scalar("basmann", o.basmann.statistic, &ex["basmann"]);
        }
    }
}

fn check_iv(case: &str) {
    let fx = load(case);
    assert_eq!(
        fx.n as u64,
        fx.expected["n"].as_u64().map_or(0, |n| n),
        "{case}: n"
    );
    let d = iv_data(&fx);
    let mut t = Tracker::default();
    check_tsls(&fx, &d, &mut t);
    check_first_stage_and_reduced_form(&fx, &d, &mut t);
    check_endogeneity(&fx, &d, &mut t);
    check_overidentification(&fx, &d, &mut t);
    t.finish(case);
}

/// linearmodels / statsmodels: one endogenous, one instrument (exactly identified).
#[test]
fn iv_exactly_identified() {
    check_iv("iv_just");
}

/// linearmodels / statsmodels: one endogenous, two instruments.
#[test]
fn iv_overidentified() {
    check_iv("iv_over");
}

/// linearmodels / statsmodels: two endogenous, three instruments.
#[test]
fn iv_two_endogenous() {
    check_iv("iv_two_endog");
}

/// Internal identity (no library needed, but also in the fixtures): Wu–Hausman equals the
/// classical control-function F.
#[test]
fn wu_hausman_is_classical_control_function_f() {
    for case in ["iv_just", "iv_over", "iv_two_endog"] {
        let fx = load(case);
        let d = iv_data(&fx);
        let e = endogeneity(
            &d.y,
            &d.exog,
            &d.endog,
            &d.instruments,
            true,
            &CovSpec::Classical,
        )
        .expect("endogeneity");
        let rel = (e.wu_hausman.statistic / e.control_function.statistic - 1.0).abs();
        assert!(rel < 1e-10, "{case}: {rel}");
    }
}
