//! Tests of the Anderson–Rubin curve (the statistic on a grid of coefficient values).
//!
//! Sources: the fixtures `tests/reference/fixtures/ar_*.json` written by
//! `tests/reference/anderson_rubin.py`: AR(β₀) from statsmodels OLS + `wald_test`, and the
//! set's finite endpoints from scipy brentq, where statsmodels' AR equals the critical value
//! (scipy.stats.f). So at three points per case and covariance kind (β₀ and the two ends of a
//! bounded set) the curve meets an outside value; at every other grid point it must equal the
//! single-null test [`anderson_rubin`] (the same statistic, computed without the shared
//! quadratic form).

use crate::estimate::IvColumns;
use serde_json::Value;

use super::{anderson_rubin, anderson_rubin_curve};
use crate::estimate::reference_tests::{load, Fixture, Tracker};
use crate::estimate::Absorbed;

fn check_case(case: &str) {
    let fx: Fixture = load(case);
    let y = fx.vector(&fx.setup["outcome"]);
    let exog = fx.matrix(&fx.setup["exog"]);
    let endog = fx.matrix(&fx.setup["endog"]);
    let z = fx.matrix(&fx.setup["instruments"]);
    let beta0 = fx.setup["beta0"].as_f64().expect("beta0");
    let level = fx.setup["confidence"].as_f64().expect("confidence");
    let mut t = Tracker::default();
    for kind in fx.setup["kinds"].as_array().expect("kinds") {
        let kind = kind.as_str().expect("kind");
        let ex = &fx.expected[kind];
        let spec = fx.spec(kind);
        let c = ex["critical_value"].as_f64().expect("critical value");
        // Outside values: AR(β₀), and AR = c at each finite endpoint.
        let ends: Vec<f64> = ex["pieces"]
            .as_array()
            .expect("pieces")
            .iter()
            .flat_map(|p| [p[0].as_f64(), p[1].as_f64()])
            .flatten()
            .collect();
        let cols = IvColumns::new(&y, &exog, &endog, &z);
        let mut grid = vec![beta0];
        grid.extend(&ends);
        let curve = anderson_rubin_curve(cols, &spec, &Absorbed::NONE, &grid).expect("curve");
        t.scalar(
            &format!("curve at beta0 {kind}"),
            curve[0].expect("finite"),
            &ex["statistic"],
        );
        for (b, v) in ends.iter().zip(&curve[1..]) {
            let v = v.expect("finite");
            assert!(
                (v - c).abs() / c < 1e-6,
                "{case} {kind}: curve at the reference endpoint {b} is {v}, critical value {c}"
            );
        }
        // Every point of a wide grid equals the single-null test.
        let grid: Vec<f64> = (0..41).map(|i| -10.0 + 0.5 * i as f64 + 0.013).collect();
        let curve = anderson_rubin_curve(cols, &spec, &Absorbed::NONE, &grid).expect("curve");
        for (b, v) in grid.iter().zip(&curve) {
            let single = anderson_rubin(cols, &spec, &Absorbed::NONE, *b, level).expect("ar");
            t.scalar(
                &format!("curve against the single-null test {kind}"),
                v.expect("finite"),
                &Value::from(single.test.statistic),
            );
        }
    }
    t.finish(case);
}

#[test]
fn curve_meets_the_reference_bounded() {
    check_case("ar_bounded");
}

#[test]
fn curve_meets_the_reference_two_rays() {
    check_case("ar_rays");
}

#[test]
fn curve_meets_the_reference_whole_line() {
    check_case("ar_whole");
}

#[test]
fn curve_meets_the_reference_over_identified() {
    check_case("ar_over");
}

#[test]
fn curve_refuses_a_non_finite_grid() {
    let fx: Fixture = load("ar_bounded");
    let y = fx.vector(&fx.setup["outcome"]);
    let exog = fx.matrix(&fx.setup["exog"]);
    let endog = fx.matrix(&fx.setup["endog"]);
    let z = fx.matrix(&fx.setup["instruments"]);
    let spec = fx.spec("hc1");
    let r = anderson_rubin_curve(
        IvColumns::new(&y, &exog, &endog, &z),
        &spec,
        &Absorbed::NONE,
        &[0.0, f64::NAN],
    );
    assert!(r.is_err());
}
