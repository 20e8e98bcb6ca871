//! 2SLS fixtures: linearmodels IV2SLS (coefficients, classical/HC0/HC1/one- and two-way
//! cluster SEs, first-stage F, partial R² and Shea's partial R², Durbin, Wu–Hausman, Sargan,
//! Basmann), linearmodels IVGMM (Hansen's J) and statsmodels OLS (first stages, reduced form,
//! control-function Wald tests). The checks are shared with the fixed-effect cases, which
//! pass swept data, their own covariance kinds and the [`Absorbed`] of each kind.

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::{load, Fixture, Tracker, OLS_KINDS};
use crate::estimate::{
    endogeneity, first_stages, hansen_j, overidentification, reduced_form, tsls, Absorbed, CovSpec,
    EstimateError,
};

/// Covariance kinds linearmodels offers for 2SLS.
const IV_KINDS: [&str; 5] = ["classical", "hc0", "hc1", "cluster", "twoway"];

/// The inputs of a 2SLS fixture.
pub(super) struct IvData {
    pub(super) y: DVector<f64>,
    pub(super) exog: DMatrix<f64>,
    pub(super) endog: DMatrix<f64>,
    pub(super) instruments: DMatrix<f64>,
}

/// The 2SLS inputs named in `setup` (outcome, exog, endog, instruments).
pub(super) fn iv_data(fx: &Fixture, setup: &Value) -> IvData {
    IvData {
        y: fx.vector(&setup["outcome"]),
        exog: fx.matrix(&setup["exog"]),
        endog: fx.matrix(&setup["endog"]),
        instruments: fx.matrix(&setup["instruments"]),
    }
}

/// One 2SLS check: data, expected values, covariance kinds and absorbed coefficients.
pub(super) struct IvCheck<'a> {
    pub(super) fx: &'a Fixture,
    pub(super) d: IvData,
    pub(super) ex: &'a Value,
    /// Kinds for the OLS-type regressions (first stage, reduced form, control function).
    pub(super) ols_kinds: Vec<String>,
    /// Kinds for 2SLS itself.
    pub(super) iv_kinds: Vec<String>,
    /// OLS kinds the estimators must refuse (HC2/HC3 with two absorbed dimensions).
    pub(super) refused: Vec<String>,
    /// The absorbed coefficients for a kind.
    pub(super) absorbed: &'a dyn Fn(&str) -> Absorbed,
}

impl IvCheck<'_> {
    /// 2SLS coefficients, fit statistics and standard errors per covariance kind.
    fn tsls(&self, t: &mut Tracker) {
        let d = &self.d;
        for kind in &self.iv_kinds {
            let ab = (self.absorbed)(kind);
            let spec = self.fx.spec(kind);
            let fit = tsls(&d.y, &d.exog, &d.endog, &d.instruments, true, &spec, &ab);
            let fit = fit.expect("2sls");
            t.fit("2sls ", &fit, self.ex);
            t.vector(
                &format!("2sls se {kind}"),
                &fit.std_errors(),
                &self.ex["se"][kind.as_str()],
            );
            let g = self.ex["clusters"][kind.as_str()]
                .as_u64()
                .map(|g| g as usize);
            assert_eq!(fit.clusters, g, "clusters {kind}");
            assert_eq!(
                Some(fit.df_resid as u64),
                self.ex["df_resid"].as_u64(),
                "2sls df"
            );
        }
        for spec in [CovSpec::Hc2, CovSpec::Hc3] {
            let ab = (self.absorbed)("hc2");
            let err = tsls(&d.y, &d.exog, &d.endog, &d.instruments, true, &spec, &ab);
            assert!(matches!(
                err,
                Err(EstimateError::CovarianceUnavailable { .. })
            ));
        }
    }

    /// First stages (with Shea's partial R²) and reduced form under every OLS kind.
    fn first_stage_and_reduced_form(&self, t: &mut Tracker) {
        let d = &self.d;
        for kind in &self.refused {
            let (spec, ab) = (self.fx.spec(kind), (self.absorbed)(kind));
            let err = first_stages(&d.exog, &d.endog, &d.instruments, true, &spec, &ab);
            assert!(matches!(
                err,
                Err(EstimateError::CovarianceUnavailable { .. })
            ));
        }
        for kind in &self.ols_kinds {
            let (spec, ab) = (self.fx.spec(kind), (self.absorbed)(kind));
            let stages =
                first_stages(&d.exog, &d.endog, &d.instruments, true, &spec, &ab).expect("first");
            for (j, stage) in stages.iter().enumerate() {
                let ex = &self.ex["first_stage"][j];
                t.vector("first stage coef", &stage.fit.coef, &ex["coef"]);
                t.vector(
                    &format!("first stage se {kind}"),
                    &stage.fit.std_errors(),
                    &ex["se"][kind.as_str()],
                );
                t.scalar("first stage f", stage.f.statistic, &ex["f"]);
                t.scalar(
                    &format!("first stage robust_f {kind}"),
                    stage.robust_f.statistic,
                    &ex["robust_f"][kind.as_str()],
                );
                t.scalar(
                    "first stage partial r2",
                    stage.partial_r_squared,
                    &ex["partial_r_squared"],
                );
                if let Some(shea) = self.ex["shea_partial_r_squared"].get(j) {
                    t.scalar("first stage shea r2", stage.shea_partial_r_squared, shea);
                }
            }
            let rf = reduced_form(&d.y, &d.exog, &d.instruments, true, &spec, &ab)
                .expect("reduced form");
            let ex = &self.ex["reduced_form"];
            t.vector("reduced form coef", &rf.coef, &ex["coef"]);
            t.vector(
                &format!("reduced form se {kind}"),
                &rf.std_errors(),
                &ex["se"][kind.as_str()],
            );
        }
    }

    /// Durbin, Wu–Hausman and the control-function test per covariance kind.
    fn endogeneity(&self, t: &mut Tracker) {
        let (d, ex) = (&self.d, &self.ex["endogeneity"]);
        for kind in &self.ols_kinds {
            let (spec, ab) = (self.fx.spec(kind), (self.absorbed)(kind));
            let e = endogeneity(&d.y, &d.exog, &d.endog, &d.instruments, true, &spec, &ab)
                .expect("endogeneity");
            t.scalar("durbin", e.durbin.statistic, &ex["durbin"]);
            t.scalar("wu-hausman", e.wu_hausman.statistic, &ex["wu_hausman"]);
            let crate::distribution::Reference::F { df2, .. } = e.wu_hausman.reference else {
                panic!("wu-hausman refers to F");
            };
            assert_eq!(df2 as u64, ex["wu_hausman_df2"].as_u64().expect("df2"));
            let cf = &ex["control_function"][kind.as_str()];
            t.scalar(
                &format!("control function {kind}"),
                e.control_function.statistic,
                cf,
            );
        }
    }

    /// Sargan and Basmann (or `None` when exactly identified).
    fn overidentification(&self, t: &mut Tracker) {
        let d = &self.d;
        let ab = (self.absorbed)("classical");
        let o = overidentification(&d.y, &d.exog, &d.endog, &d.instruments, &ab).expect("overid");
        let ex = &self.ex["overidentification"];
        match o {
            None => assert!(ex.is_null(), "fixture is overidentified"),
            Some(o) => {
                t.scalar("sargan", o.sargan.statistic, &ex["sargan"]);
                t.scalar("basmann", o.basmann.statistic, &ex["basmann"]);
            }
        }
    }

    /// Every 2SLS check.
    pub(super) fn run(&self, t: &mut Tracker) {
        self.tsls(t);
        self.first_stage_and_reduced_form(t);
        self.endogeneity(t);
        self.overidentification(t);
    }
}

/// Hansen's J with the HC0 and the g1-clustered weight against `expected` (an object with
/// keys "hc0" and "cluster", null when exactly identified).
pub(super) fn check_hansen_j(
    fx: &Fixture,
    d: &IvData,
    expected: &Value,
    absorbed: &dyn Fn(&str) -> Absorbed,
    t: &mut Tracker,
) {
    for kind in ["hc0", "cluster"] {
        let ab = absorbed(kind);
        let spec = fx.spec(kind);
        let j = hansen_j(&d.y, &d.exog, &d.endog, &d.instruments, &spec, &ab).expect("j");
        match (j, &expected[kind]) {
            (None, Value::Null) => {}
            (Some(j), e) if e.is_number() => {
                t.scalar(&format!("hansen j {kind}"), j.statistic, e);
                let over = d.instruments.ncols() - d.endog.ncols();
                assert_eq!(
                    j.reference,
                    crate::distribution::Reference::ChiSquare { df: over as f64 }
                );
            }
            (got, e) => panic!("hansen j {kind}: got {got:?}, expected {e}"),
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
    let none = |_: &str| Absorbed::NONE;
    let check = IvCheck {
        fx: &fx,
        d: iv_data(&fx, &fx.setup),
        ex: &fx.expected,
        ols_kinds: OLS_KINDS.iter().map(|k| k.to_string()).collect(),
        iv_kinds: IV_KINDS.iter().map(|k| k.to_string()).collect(),
        refused: Vec::new(),
        absorbed: &none,
    };
    let mut t = Tracker::default();
    check.run(&mut t);
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

/// linearmodels IVGMM `j_stat` (two steps, uncentered, no small-sample factor; robust and
/// clustered by g1) and linearmodels' first-stage "shea.rsquared", from `iv_gmm.json`, on the
/// data of the iv_* fixtures. Exactly identified: J is `None`; with one endogenous
/// regressor Shea's R² equals the partial R².
#[test]
fn hansen_j_and_shea() {
    let doc = crate::testing::fixture("iv_gmm.json");
    let mut t = Tracker::default();
    for case in ["iv_just", "iv_over", "iv_two_endog"] {
        let fx = load(case);
        let d = iv_data(&fx, &fx.setup);
        let ex = &doc["expected"][case];
        check_hansen_j(&fx, &d, &ex["hansen_j"], &|_| Absorbed::NONE, &mut t);
        let spec = CovSpec::Classical;
        let none = Absorbed::NONE;
        let stages = first_stages(&d.exog, &d.endog, &d.instruments, true, &spec, &none)
            .expect("first stages");
        for (j, stage) in stages.iter().enumerate() {
            let shea = &ex["shea_partial_r_squared"][j];
            t.scalar("shea r2", stage.shea_partial_r_squared, shea);
            if d.endog.ncols() == 1 {
                let rel = (stage.shea_partial_r_squared / stage.partial_r_squared - 1.0).abs();
                assert!(
                    rel < 1e-12,
                    "{case}: one endogenous, shea = partial ({rel})"
                );
            }
        }
    }
    // Two-way clusters are refused for J.
    let fx = load("iv_over");
    let d = iv_data(&fx, &fx.setup);
    let err = hansen_j(
        &d.y,
        &d.exog,
        &d.endog,
        &d.instruments,
        &fx.spec("twoway"),
        &Absorbed::NONE,
    );
    assert!(matches!(
        err,
        Err(EstimateError::CovarianceUnavailable { .. })
    ));
    t.finish("iv_gmm");
}

/// Internal identity (no library needed, but also in the fixtures): Wu–Hausman equals the
/// classical control-function F.
#[test]
fn wu_hausman_is_classical_control_function_f() {
    for case in ["iv_just", "iv_over", "iv_two_endog"] {
        let fx = load(case);
        let d = iv_data(&fx, &fx.setup);
        let e = endogeneity(
            &d.y,
            &d.exog,
            &d.endog,
            &d.instruments,
            true,
            &CovSpec::Classical,
            &Absorbed::NONE,
        )
        .expect("endogeneity");
        let rel = (e.wu_hausman.statistic / e.control_function.statistic - 1.0).abs();
        assert!(rel < 1e-10, "{case}: {rel}");
    }
}
