//! p-values by direction, test p-values, critical values and confidence intervals.

use super::{assert_rel, chi2, f, t, LIBRARY};
use crate::distribution::{Reference, TestStatistic};
use crate::inference::{
    confidence_interval, critical_value, log10_p_value, one_sided_bound, p_value, test_p_value,
    Direction,
};

/// Two-sided, greater and less p-values of a t statistic.
/// Expected: scipy 1.17.1, 2 * stats.t.sf(2.0, 10) = 0.07338803477074037 and
/// stats.t.sf(2.0, 10) = 0.03669401738537018.
#[test]
fn directions_of_a_t_statistic() {
    let r = t(10.0);
    assert_rel(
        p_value(2.0, &r, Direction::TwoSided),
        0.07338803477074037,
        LIBRARY,
        "two-sided",
    );
    assert_rel(
        p_value(-2.0, &r, Direction::TwoSided),
        0.07338803477074037,
        LIBRARY,
        "two-sided, negative",
    );
    assert_rel(
        p_value(2.0, &r, Direction::Greater),
        0.03669401738537018,
        LIBRARY,
        "greater",
    );
    assert_rel(
        p_value(-2.0, &r, Direction::Less),
        0.03669401738537018,
        LIBRARY,
        "less",
    );
    assert_rel(
        p_value(2.0, &r, Direction::Less),
        1.0 - 0.03669401738537018,
        LIBRARY,
        "less, wrong side",
    );
    assert_eq!(p_value(0.0, &r, Direction::TwoSided), 1.0);
}

/// A z statistic of 40 has a two-sided p-value that underflows; its log does not.
/// Expected: log10(2) + log10 Q(40), with Q(40) from the A&S 26.2.12 series in
/// `extremes.rs`; here via mpmath 1.3.0: log10(erfc(40/sqrt(2))) = -349.13597646368186
#[test]
fn log10_p_value_survives_underflow() {
    let z = Reference::Normal;
    assert_eq!(p_value(40.0, &z, Direction::TwoSided), 0.0);
    let l = log10_p_value(-40.0, &z, Direction::TwoSided);
    assert_rel(
        l,
        -349.135_976_463_681_86,
        1e-12,
        "log10 two-sided p at z = 40",
    );
    assert_rel(
        log10_p_value(-40.0, &z, Direction::Less),
        l - 2f64.log10(),
        1e-14,
        "less",
    );
}

/// F and chi-square statistics reject only in the upper tail.
/// Expected: scipy 1.17.1, stats.f.sf(3.0, 4, 50) = 0.026963406052932723,
/// stats.chi2.sf(12.0, 5) = 0.03478778050624185.
#[test]
fn test_p_values_of_f_and_chi_square() {
    let wald = TestStatistic {
        statistic: 3.0,
        reference: f(4.0, 50.0),
    };
    assert_rel(test_p_value(&wald), 0.026963406052932723, LIBRARY, "F");
    let lm = TestStatistic {
        statistic: 12.0,
        reference: chi2(5.0),
    };
    assert_rel(
        test_p_value(&lm),
        0.03478778050624185,
        LIBRARY,
        "chi-square",
    );
    assert!(p_value(12.0, &chi2(5.0), Direction::Greater).is_nan());
    let tstat = TestStatistic {
        statistic: -2.0,
        reference: t(10.0),
    };
    assert_rel(
        test_p_value(&tstat),
        0.07338803477074037,
        LIBRARY,
        "t is two-sided",
    );
}

/// Wald intervals. Expected: scipy 1.17.1, stats.t.ppf(0.975, 10) = 2.228138851986274 and
/// stats.norm.ppf(0.975) = 1.959963984540054.
#[test]
fn confidence_intervals() {
    let [lo, hi] = confidence_interval(-1.9, 0.4, &t(10.0), 0.95);
    assert_rel(lo, -1.9 - 0.4 * 2.228138851986274, LIBRARY, "lower");
    assert_rel(hi, -1.9 + 0.4 * 2.228138851986274, LIBRARY, "upper");
    assert_rel(
        critical_value(&Reference::Normal, 0.95),
        1.959963984540054,
        LIBRARY,
        "z",
    );
    let [lo, hi] = confidence_interval(3.0, 0.0, &Reference::Normal, 0.9);
    assert_eq!([lo, hi], [3.0, 3.0]);
    for bad in [
        confidence_interval(1.0, -0.1, &t(5.0), 0.95),
        confidence_interval(1.0, 0.1, &t(5.0), 1.0),
        confidence_interval(1.0, 0.1, &chi2(5.0), 0.95),
        confidence_interval(1.0, f64::NAN, &t(5.0), 0.95),
    ] {
        assert!(bad[0].is_nan() && bad[1].is_nan(), "{bad:?}");
    }
}

/// Serialized names are the plan format's keys (shared/design/plan-format.md,
/// `[[hypothesis]].direction` and `[family.*].correction`).
#[test]
fn serialized_names_follow_the_plan_format() {
    use crate::inference::Correction;
    let json = |v: Result<String, serde_json::Error>| v.expect("serializes");
    let directions = [Direction::TwoSided, Direction::Greater, Direction::Less];
    let names: Vec<String> = directions
        .iter()
        .map(|d| json(serde_json::to_string(d)))
        .collect();
    assert_eq!(names, ["\"two-sided\"", "\"greater\"", "\"less\""]);
    let corrections = [
        Correction::None,
        Correction::Bonferroni,
        Correction::Holm,
        Correction::BenjaminiHochberg,
    ];
    let names: Vec<String> = corrections
        .iter()
        .map(|c| json(serde_json::to_string(c)))
        .collect();
    assert_eq!(
        names,
        [
            "\"none\"",
            "\"bonferroni\"",
            "\"holm\"",
            "\"benjamini-hochberg\""
        ]
    );
}

/// The one-sided bound uses the 1 − alpha quantile: 1.6448536269514715 for the standard normal
/// at 5% (Python's `statistics.NormalDist().inv_cdf(0.95)`) and 1.8124611228116756 for t(10)
/// (scipy `t.ppf(0.95, 10)`).
#[test]
fn one_sided_bounds_use_the_one_sided_quantile() {
    let lower = one_sided_bound(1.0, 0.5, &Reference::Normal, 0.05, Direction::Greater);
    let want = 1.0 - 0.5 * 1.6448536269514715;
    assert!(lower.is_some_and(|b| (b - want).abs() < 1e-12), "{lower:?}");
    let t10 = t(10.0);
    let upper = one_sided_bound(-2.0, 0.25, &t10, 0.05, Direction::Less);
    let want = -2.0 + 0.25 * 1.8124611228116756;
    assert!(upper.is_some_and(|b| (b - want).abs() < 1e-10), "{upper:?}");
    assert_eq!(
        one_sided_bound(1.0, 0.5, &Reference::Normal, 0.05, Direction::TwoSided),
        None
    );
    assert_eq!(
        one_sided_bound(1.0, f64::NAN, &Reference::Normal, 0.05, Direction::Greater),
        None
    );
    assert_eq!(
        one_sided_bound(1.0, 0.5, &Reference::Normal, 0.6, Direction::Greater),
        None
    );
}
