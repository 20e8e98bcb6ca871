//! Tests of the Anderson–Rubin test and set.
//!
//! Sources: the fixtures `tests/reference/fixtures/ar_*.json` written by
//! `tests/reference/anderson_rubin.py` (statsmodels OLS + wald_test for AR(β), scipy.stats.f
//! for p-values and critical values, scipy brentq on a dense grid for the set endpoints), at
//! 1e-8 relative; and internal identities (AR equals c at every finite endpoint; absorbing
//! fixed effects equals including their dummies, Frisch–Waugh–Lovell).

use crate::estimate::IvColumns;
use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::{anderson_rubin, SetShape};
use crate::estimate::reference_tests::{load, Fixture, Tracker};
use crate::estimate::{Absorbed, CovSpec};
use crate::inference::test_p_value;

/// The expected shape named in a fixture.
fn shape(name: &str) -> SetShape {
    match name {
        "bounded" => SetShape::Bounded,
        "rays" => SetShape::TwoRays,
        "whole" => SetShape::WholeLine,
        "empty" => SetShape::Empty,
        _ => SetShape::Other,
    }
}

/// A fixture endpoint: null is infinite (−∞ as a lower, +∞ as an upper end).
fn end(v: &Value, lower: bool) -> f64 {
    match v.as_f64() {
        Some(x) => x,
        None if lower => f64::NEG_INFINITY,
        None => f64::INFINITY,
    }
}

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
        let ar = anderson_rubin(
            IvColumns::new(&y, &exog, &endog, &z),
            &spec,
            &Absorbed::NONE,
            beta0,
            level,
        )
        .expect("ar");
        t.scalar(
            &format!("statistic {kind}"),
            ar.test.statistic,
            &ex["statistic"],
        );
        t.scalar(
            &format!("p-value {kind}"),
            test_p_value(&ar.test),
            &ex["p_value"],
        );
        t.scalar(
            &format!("critical value {kind}"),
            ar.critical_value,
            &ex["critical_value"],
        );
        let expected_pieces = ex["pieces"].as_array().expect("pieces");
        assert_eq!(
            ar.set.pieces.len(),
            expected_pieces.len(),
            "{case} {kind}: {:?} vs {expected_pieces:?}",
            ar.set.pieces
        );
        for (got, want) in ar.set.pieces.iter().zip(expected_pieces) {
            let (lo, hi) = (end(&want[0], true), end(&want[1], false));
            for (g, w) in [(got.0, lo), (got.1, hi)] {
                if w.is_finite() {
                    t.scalar(&format!("endpoint {kind}"), g, &Value::from(w));
                    // AR(endpoint) = c: the endpoint is a boundary point of the set.
                    let at = anderson_rubin(
                        IvColumns::new(&y, &exog, &endog, &z),
                        &spec,
                        &Absorbed::NONE,
                        g,
                        level,
                    )
                    .expect("ar at endpoint");
                    let rel = (at.test.statistic - at.critical_value).abs() / at.critical_value;
                    assert!(
                        rel < 1e-8,
                        "{case} {kind}: AR(end) = {} vs c",
                        at.test.statistic
                    );
                } else {
                    assert_eq!(g, w, "{case} {kind}: infinite end");
                }
            }
        }
        let want = shape(ex["shape"].as_str().expect("shape"));
        assert_eq!(ar.set.shape(), want, "{case} {kind}");
        assert_eq!(
            ar.set.contains(beta0),
            ar.test.statistic <= ar.critical_value
        );
    }
    t.finish(case);
}

/// Strong instrument (first-stage F far above c): a bounded interval, closed form for the
/// classical and L = 1 robust kinds, the grid for two-way.
#[test]
fn ar_bounded_interval() {
    check_case("ar_bounded");
}

/// Weak but present instrument with ρ = −0.99: the first-stage F is below c, so AR(β) → F_fs < c
/// as β → ±∞ (unbounded), while near β* = β − ρσ_u/σ_v the residual variance nearly
/// vanishes and AR is large: the set is the union of two rays.
#[test]
fn ar_two_rays() {
    check_case("ar_rays");
}

/// Irrelevant instruments (π = 0 and no direct effect): AR(β) is small for every β and
/// the set is the whole line (L = 2: the robust kinds go through the grid).
#[test]
fn ar_whole_line() {
    check_case("ar_whole");
}

/// Over-identified, one instrument with a direct effect on y: no β makes both reduced-form
/// coefficients proportional to the first stage, min AR > c, the set is empty
/// (classical: closed form; HC1: grid).
#[test]
fn ar_empty_set() {
    check_case("ar_empty");
}

/// Two instruments, heteroskedastic errors: bounded sets from the grid for HC0–HC3 and
/// one- and two-way clusters, and from the quadratic for classical.
#[test]
fn ar_over_identified_robust() {
    check_case("ar_over");
}

/// Frisch–Waugh–Lovell: demeaning by group and passing `Absorbed { df: G }` gives the same
/// statistic, df and set as including the G group dummies in W (classical, HC1, cluster).
#[test]
fn absorbed_fixed_effects_equal_dummies() {
    let fx = load("ar_over");
    let y = fx.vector(&fx.setup["outcome"]);
    let x = fx.matrix(&fx.setup["endog"]);
    let z = fx.matrix(&fx.setup["instruments"]);
    let w1 = fx.vector(&Value::from("w1"));
    let groups: Vec<usize> = fx.columns["g2"].iter().map(|&g| g as usize).collect();
    let g = groups.iter().max().expect("groups") + 1;
    let n = y.len();
    let mut dummies = DMatrix::zeros(n, g + 1);
    for (i, &gi) in groups.iter().enumerate() {
        dummies[(i, gi)] = 1.0;
        dummies[(i, g)] = w1[i];
    }
    let demean = |m: &DMatrix<f64>| {
        let mut out = m.clone();
        for j in 0..m.ncols() {
            let mut sums = vec![0.0; g];
            let mut counts = vec![0.0; g];
            for (i, &gi) in groups.iter().enumerate() {
                sums[gi] += m[(i, j)];
                counts[gi] += 1.0;
            }
            for (i, &gi) in groups.iter().enumerate() {
                out[(i, j)] -= sums[gi] / counts[gi];
            }
        }
        out
    };
    let ym = DMatrix::from_column_slice(n, 1, y.as_slice());
    let yd = DVector::from_column_slice(demean(&ym).as_slice());
    let wd = demean(&DMatrix::from_column_slice(n, 1, w1.as_slice()));
    let absorbed = Absorbed {
        df: g,
        nested_df: 0,
        leverage: None,
    };
    for spec in [
        CovSpec::Classical,
        CovSpec::Hc1,
        CovSpec::Cluster {
            ids: fx.columns["g1"].iter().map(|&v| v as usize).collect(),
        },
    ] {
        let full = anderson_rubin(
            IvColumns::new(&y, &dummies, &x, &z),
            &spec,
            &Absorbed::NONE,
            0.5,
            0.95,
        )
        .expect("dummies");
        let within = anderson_rubin(
            IvColumns::new(&yd, &wd, &demean(&x), &demean(&z)),
            &spec,
            &absorbed,
            0.5,
            0.95,
        )
        .expect("absorbed");
        assert_eq!(full.test.reference, within.test.reference, "{spec:?}");
        let rel = (full.test.statistic - within.test.statistic).abs() / full.test.statistic;
        assert!(rel < 1e-9, "{spec:?}: {rel}");
        assert_eq!(full.set.pieces.len(), within.set.pieces.len());
        for (a, b) in full.set.pieces.iter().zip(&within.set.pieces) {
            assert!((a.0 - b.0).abs() < 1e-8 * a.0.abs().max(1.0), "{a:?} {b:?}");
            assert!((a.1 - b.1).abs() < 1e-8 * a.1.abs().max(1.0), "{a:?} {b:?}");
        }
    }
}

/// More than one endogenous column and a level outside (0, 1) are errors, not numbers.
#[test]
fn invalid_inputs_are_errors() {
    let fx = load("ar_bounded");
    let y = fx.vector(&fx.setup["outcome"]);
    let exog = fx.matrix(&fx.setup["exog"]);
    let x = fx.matrix(&fx.setup["endog"]);
    let z = fx.matrix(&fx.setup["instruments"]);
    let two = crate::estimate::linear::hcat(&x, &z);
    assert!(anderson_rubin(
        IvColumns::new(&y, &exog, &two, &z),
        &CovSpec::Hc1,
        &Absorbed::NONE,
        0.0,
        0.95
    )
    .is_err());
    assert!(anderson_rubin(
        IvColumns::new(&y, &exog, &x, &z),
        &CovSpec::Hc1,
        &Absorbed::NONE,
        0.0,
        1.0
    )
    .is_err());
    assert!(anderson_rubin(
        IvColumns::new(&y, &exog, &x, &z),
        &CovSpec::Hc1,
        &Absorbed::NONE,
        f64::NAN,
        0.9
    )
    .is_err());
}

/// Monte Carlo size at 5% under a weak design: n = 100, L = 3 instruments, concentration
/// parameter μ² = n·‖π‖² = 3 (π = 0.1 for each instrument), corr(u, v) = 0.95, null
/// β = 0 true, 20,000 replications. The homoskedastic AR test is exact under normal errors
/// (Anderson and Rubin 1949), so its rate must lie within 3 Monte Carlo standard errors of
/// 0.05; the 2SLS t-test (classical SE, t(n − k) critical value) over-rejects far beyond.
/// Run with `cargo test --release -- --ignored ar_monte_carlo --nocapture`.
#[test]
#[ignore]
fn ar_monte_carlo_size() {
    use crate::estimate::tsls;
    use crate::inference::{p_value, Direction};
    let (reps, n, l) = (20_000usize, 100usize, 3usize);
    let (pi, rho) = (0.1, 0.95);
    let mut rng = crate::random::SplitMix64::new(20_261_201);
    let (mut ar_rejections, mut t_rejections) = (0usize, 0usize);
    let exog = DMatrix::from_element(n, 1, 1.0);
    for _ in 0..reps {
        let z = DMatrix::from_fn(n, l, |_, _| rng.normal());
        let mut x = DMatrix::zeros(n, 1);
        let mut y = DVector::zeros(n);
        for i in 0..n {
            let (e1, e2) = (rng.normal(), rng.normal());
            let v = e1;
            let u = rho * e1 + (1.0 - rho * rho).sqrt() * e2;
            x[(i, 0)] = pi * (z[(i, 0)] + z[(i, 1)] + z[(i, 2)]) + v;
            y[i] = u; // β = 0 and no intercept effect
        }
        let ar = anderson_rubin(
            IvColumns::new(&y, &exog, &x, &z),
            &CovSpec::Classical,
            &Absorbed::NONE,
            0.0,
            0.95,
        )
        .expect("ar");
        if test_p_value(&ar.test) < 0.05 {
            ar_rejections += 1;
        }
        let fit = tsls(
            &y,
            &exog,
            &x,
            &z,
            true,
            &CovSpec::Classical,
            &Absorbed::NONE,
        )
        .expect("2sls");
        let t = fit.coef[0] / fit.cov[(0, 0)].sqrt();
        if p_value(t, &fit.coef_reference, Direction::TwoSided) < 0.05 {
            t_rejections += 1;
        }
    }
    let rate = |k: usize| k as f64 / reps as f64;
    let se = |p: f64| (p * (1.0 - p) / reps as f64).sqrt();
    let (ar_rate, t_rate) = (rate(ar_rejections), rate(t_rejections));
    let null_se = se(0.05);
    println!("Monte Carlo, {reps} replications, n = {n}, L = {l}, mu^2 = 3, rho = {rho}:");
    println!(
        "  AR rejection rate at 5%:   {ar_rate:.4} (MC s.e. {:.4})",
        se(ar_rate)
    );
    println!(
        "  2SLS t rejection at 5%:    {t_rate:.4} (MC s.e. {:.4})",
        se(t_rate)
    );
    println!("  MC s.e. at the nominal 0.05: {null_se:.4}");
    assert!((ar_rate - 0.05).abs() <= 3.0 * null_se, "AR rate {ar_rate}");
    assert!((t_rate - 0.05).abs() > 3.0 * null_se, "t rate {t_rate}");
}

/// The closed-form quadratic sets, worked by hand: β² − 6β + 5 = (β − 1)(β − 5).
#[test]
fn quadratic_shapes_by_hand() {
    use super::set::quadratic_set;
    let inf = f64::INFINITY;
    let bounded = quadratic_set(1.0, 3.0, 5.0, 1.0);
    assert_eq!(bounded.pieces, vec![(1.0, 5.0)]);
    assert_eq!(bounded.shape(), SetShape::Bounded);
    let rays = quadratic_set(-1.0, -3.0, -5.0, 1.0);
    assert_eq!(rays.pieces, vec![(-inf, 1.0), (5.0, inf)]);
    assert_eq!(rays.shape(), SetShape::TwoRays);
    assert_eq!(quadratic_set(1.0, 0.0, 1.0, 1.0).shape(), SetShape::Empty);
    assert_eq!(
        quadratic_set(-1.0, 0.0, -1.0, 1.0).shape(),
        SetShape::WholeLine
    );
    // a at rounding level is 0: −2β + 4 ≤ 0, the ray [2, ∞), shape Other.
    let ray = quadratic_set(1e-17, 1.0, 4.0, 1.0);
    assert_eq!(ray.pieces, vec![(2.0, inf)]);
    assert_eq!(ray.shape(), SetShape::Other);
    assert!(!ray.is_bounded());
    // Touching rays (a < 0, Δ = 0) merge into the whole line.
    assert_eq!(
        quadratic_set(-1.0, -1.0, -1.0, 1.0).shape(),
        SetShape::WholeLine
    );
}

/// Small a: the root near 1/2 of 1e-10 β² − 2β + 1 keeps full precision (the textbook
/// formula (h − √Δ)/a would lose about ten digits to cancellation). Exact value:
/// 1/(1 + √(1 − 1e-10)).
#[test]
fn quadratic_without_cancellation() {
    let set = super::set::quadratic_set(1e-10, 1.0, 1.0, 1.0);
    let exact = 1.0 / (1.0 + (1.0 - 1e-10f64).sqrt());
    assert_eq!(set.pieces.len(), 1);
    assert!((set.pieces[0].0 - exact).abs() <= 2.0 * f64::EPSILON * exact);
    assert!((set.pieces[0].1 - 2e10).abs() / 2e10 < 1e-9);
}
