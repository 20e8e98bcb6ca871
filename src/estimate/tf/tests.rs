//! Tests of the tF critical value and p-value.
//!
//! Sources: values recalled from Lee, McCrary, Moreira and Porter (2022, AER 112), each
//! marked "from memory"; the fixture `tests/reference/fixtures/ar_tf.json` written by
//! `tests/reference/anderson_rubin.py` (an independent scipy implementation: quad of the
//! normal density over the rejection set, golden-section maximisation over f₀, brentq in c), at
//! 1e-8 relative.

use serde_json::Value;

use super::{tf_critical_value, tf_p_value};
use crate::estimate::reference_tests::Tracker;

fn fixture() -> Value {
    crate::testing::fixture("ar_tf.json")
}

/// From memory (LMMP 2022): no finite 5% critical value for F below 1.96² = 3.8415.
#[test]
fn no_finite_value_below_chi_square_quantile() {
    assert_eq!(tf_critical_value(3.0, 0.05), None);
    assert_eq!(tf_critical_value(3.84, 0.05), None);
    let c = tf_critical_value(3.9, 0.05).expect("finite above 3.8415");
    assert!(c > 10.0, "{c}");
}

/// From memory (LMMP 2022, table of the tF function): c_0.05(10) ≈ 3.43.
#[test]
fn about_3_4_at_f_10() {
    let c = tf_critical_value(10.0, 0.05).expect("finite");
    println!("c_0.05(10) = {c}");
    assert!((c - 3.43).abs() < 0.02, "{c}");
}

/// From memory (LMMP 2022): the standard 1.96 is reached at F ≈ 104.7; the scipy
/// reference puts the threshold at 104.6707, so c(104.6) > 1.96 and c(104.75) = 1.96.
#[test]
fn standard_value_reached_near_104_7() {
    let z = -crate::inference::quantile(&crate::distribution::Reference::Normal, 0.025);
    let below = tf_critical_value(104.6, 0.05).expect("finite");
    let above = tf_critical_value(104.75, 0.05).expect("finite");
    println!("c(104.6) = {below}, c(104.75) = {above}");
    assert!(below > z + 1e-9, "{below}");
    assert_eq!(above, z);
}

/// c_α(F) decreases in F and in α.
#[test]
fn monotone_in_f_and_alpha() {
    let cs: Vec<f64> = [4.5, 8.0, 15.0, 40.0, 90.0]
        .iter()
        .map(|&f| tf_critical_value(f, 0.05).expect("finite"))
        .collect();
    assert!(cs.windows(2).all(|w| w[0] > w[1]), "{cs:?}");
    let a = tf_critical_value(20.0, 0.01).expect("finite");
    let b = tf_critical_value(20.0, 0.10).expect("finite");
    assert!(a > cs[2] && cs[2] > b, "{a} {b}");
}

/// scipy reference values: critical values and p-values to 1e-8.
#[test]
fn tf_against_scipy() {
    let doc = fixture();
    let ex = &doc["expected"];
    let mut t = Tracker::default();
    for row in ex["critical"].as_array().expect("critical") {
        let (f, a) = (
            row["f"].as_f64().expect("f"),
            row["alpha"].as_f64().expect("a"),
        );
        let c = tf_critical_value(f, a).expect("finite");
        t.scalar("critical value", c, &row["c"]);
    }
    for row in ex["p_values"].as_array().expect("p") {
        let (tt, f) = (row["t"].as_f64().expect("t"), row["f"].as_f64().expect("f"));
        t.scalar("p-value", tf_p_value(tt, f), &row["p"]);
    }
    t.finish("ar_tf");
}

/// The p-value is the smallest α with |t| > c_α(F): a bisection on α of that indicator
/// (the monotone search) lands on `tf_p_value`.
#[test]
fn p_value_is_the_monotone_search() {
    for (tt, f) in [(2.5, 10.0), (3.0, 30.0)] {
        let p = tf_p_value(tt, f);
        let rejects = |a: f64| tf_critical_value(f, a).is_some_and(|c| tt.abs() > c);
        let (mut lo, mut hi) = (1e-6, 0.999);
        for _ in 0..24 {
            let mid = 0.5 * (lo + hi);
            if rejects(mid) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        assert!((hi - p).abs() < 1e-6, "t {tt} F {f}: search {hi} vs {p}");
    }
}

/// The regula falsi search ends where the bisection it replaced ends: the root is in both
/// final brackets, so they agree to the 1e-13 relative width (checked at 2e-13).
#[test]
fn the_illinois_search_agrees_with_bisection() {
    for f in [4.0, 6.5, 10.0, 23.1, 50.0, 90.0] {
        let alpha = 0.05;
        let g = |c: f64| super::worst_rejection(f, c) - alpha;
        let z = 1.959_963_984_540_054;
        let (mut lo, mut hi) = (z, 2.0 * z);
        while g(hi) > 0.0 {
            lo = hi;
            hi *= 2.0;
        }
        let (a, b) = (lo, hi);
        while hi - lo > 1e-13 * hi {
            let mid = 0.5 * (lo + hi);
            if g(mid) > 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let fast = super::bracket_root(g, a, b);
        assert!(
            (fast - hi).abs() <= 2e-13 * hi,
            "F {f}: Illinois {fast} vs bisection {hi}"
        );
    }
}
