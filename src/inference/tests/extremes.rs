//! Far tails: asymptotic expansions from the literature, limits of the `f64` range, and the
//! promise that no tail is ever NaN.

use super::{assert_rel, chi2, f, t, TAIL};
use crate::distribution::Reference;
use crate::inference::{log10_lower_tail, log10_upper_tail, lower_tail, upper_tail};
use std::f64::consts::{LN_10, PI};

/// ln √(2π).
const LN_SQRT_2PI: f64 = 0.918_938_533_204_672_8;

/// ln Q(x) by the asymptotic series Q(x) ~ φ(x)/x · (1 - 1/x² + 1·3/x⁴ - 1·3·5/x⁶ + …),
/// Abramowitz and Stegun (1964), 26.2.12 (from memory). Truncated after ten terms; at
/// x ≥ 30 the first omitted term is below 1e-22.
fn normal_tail_asymptotic_ln(x: f64) -> f64 {
    let mut term = 1.0;
    let mut sum = 1.0;
    for k in 1..=10 {
        term *= -((2 * k - 1) as f64) / (x * x);
        sum += term;
    }
    -0.5 * x * x - LN_SQRT_2PI - x.ln() + sum.ln()
}

/// Normal tail at 38 and 40 (where it is subnormal or underflows) against A&S 26.2.12.
#[test]
fn normal_far_tail_matches_asymptotic_series() {
    for x in [30.0, 38.0, 40.0, 100.0, 1e4] {
        let expected = normal_tail_asymptotic_ln(x) / LN_10;
        assert_rel(
            log10_upper_tail(&Reference::Normal, x),
            expected,
            1e-12,
            &format!("log10 Q({x})"),
        );
        assert_rel(
            log10_lower_tail(&Reference::Normal, -x),
            expected,
            1e-12,
            &format!("log10 P(-{x})"),
        );
    }
    // Q(38) ≈ 2.885e-316 is subnormal but representable: it must not be flushed to zero.
    // Expected value: mpmath 1.3.0 at 60 digits, erfc(38/√2)/2 = 2.8854283510039645e-316.
    let q38 = upper_tail(&Reference::Normal, 38.0);
    assert!(q38 > 0.0, "Q(38) flushed to zero");
    assert_rel(q38, 2.885_428_35e-316, 1e-6, "Q(38), subnormal precision");
}

/// log10 P(T ≥ t) for t with 5 df by the hypergeometric series
/// I_x(a, b) = x^a (1-x)^b / (a B(a, b)) · [1 + Σ_n B(a+1, n+1)/B(a+b, n+1) x^(n+1)],
/// Abramowitz and Stegun (1964), 26.5.4 (from memory), with a = 5/2, b = 1/2,
/// B(5/2, 1/2) = Γ(5/2)Γ(1/2)/Γ(3) = 3π/8 and x = 5 / (5 + t²), P = I_x / 2 (A&S 26.7.1).
fn student5_tail_series_log10(t: f64) -> f64 {
    let (a, b) = (2.5, 0.5);
    let r = 5.0 * (1.0 / t) * (1.0 / t); // 5 / t², without forming t²
    let ln_x = 5f64.ln() - 2.0 * t.ln() - r.ln_1p();
    let ln_y = -r.ln_1p();
    let x = r / (1.0 + r);
    let (mut coef, mut power, mut sum) = ((a + b) / (a + 1.0), x, 1.0);
    for n in 0..20 {
        sum += coef * power;
        coef *= (a + b + n as f64 + 1.0) / (a + n as f64 + 2.0);
        power *= x;
    }
    let ln_i = a * ln_x + b * ln_y - (a * 3.0 * PI / 8.0).ln() + sum.ln();
    (ln_i - 2f64.ln()) / LN_10
}

/// Student's t far tail, including t = 1e200 where t² overflows `f64`.
#[test]
fn student_far_tail_matches_series() {
    for tt in [1e3, 1e6, 1e60, 1e100, 1e200] {
        let expected = student5_tail_series_log10(tt);
        assert_rel(
            log10_upper_tail(&t(5.0), tt),
            expected,
            1e-12,
            &format!("log10 P(T5 >= {tt:e})"),
        );
    }
    // Below 1e-300 but representable: stays positive and accurate.
    // Expected: scipy 1.17.1, stats.t.sf(1e60, 5) = 9.490167245562364e-300.
    assert_rel(
        upper_tail(&t(5.0), 1e60),
        9.490_167_245_562_364e-300,
        1e-13,
        "P(T5 >= 1e60)",
    );
}

/// P(χ²₁ ≥ x) = 2 Q(√x), since χ²₁ is the square of a standard normal (the definition of
/// chi-square; A&S §26.4 states it for ν = 1 — from memory). The chi-square side runs
/// through the incomplete-gamma continued fraction, the normal side through Laplace's
/// continued fraction for the Mills ratio, so this compares two independent routes.
#[test]
fn chi_square_one_df_matches_twice_normal_tail() {
    for x in [100.0_f64, 800.0, 2000.0, 1e5, 1e7] {
        let expected = 2f64.log10() + log10_upper_tail(&Reference::Normal, x.sqrt());
        assert_rel(
            log10_upper_tail(&chi2(1.0), x),
            expected,
            1e-10,
            &format!("log10 P(chi2_1 >= {x})"),
        );
    }
    let expected = 2.0 * upper_tail(&Reference::Normal, 20.0);
    assert_rel(
        upper_tail(&chi2(1.0), 400.0),
        expected,
        TAIL,
        "P(chi2_1 >= 400)",
    );
}

/// Every reference the tool can produce, including limiting and extreme parameters.
fn all_references() -> Vec<Reference> {
    let inf = f64::INFINITY;
    let mut refs = vec![Reference::Normal];
    refs.extend([0.5, 1.0, 3.7, 30.0, 1e7, inf].map(t));
    refs.extend(
        [
            (1.0, 1.0),
            (0.3, 5.0),
            (7.0, inf),
            (inf, 9.0),
            (300.0, 400.0),
            (2.0, 1e6),
        ]
        .map(|(a, b)| f(a, b)),
    );
    refs.extend([0.2, 1.0, 50.0, 1e6].map(chi2));
    refs
}

/// Arguments from the smallest subnormal to the largest `f64`, both signs, and infinities.
fn all_arguments() -> Vec<f64> {
    let magnitudes = [
        0.0,
        5e-324,
        f64::MIN_POSITIVE,
        1e-300,
        1e-10,
        0.5,
        1.0,
        3.0,
        30.0,
        1e3,
        1e10,
        1e150,
        1e300,
        f64::MAX,
        f64::INFINITY,
    ];
    magnitudes.iter().flat_map(|&m| [m, -m]).collect()
}

/// Normal or t: a law on the whole line.
fn is_symmetric(r: &Reference) -> bool {
    matches!(r, Reference::Normal | Reference::StudentT { .. })
}

/// The normal itself, or t with infinite df.
fn is_normal_law(r: &Reference) -> bool {
    match *r {
        Reference::Normal => true,
        Reference::StudentT { df } => df == f64::INFINITY,
        _ => false,
    }
}

/// Whether ln of the tail at x fits in an `f64`: not for the normal once x²/2 overflows
/// (|x| near 1.9e154), nor for F(k, ∞) once k x / 2
/// does, nor for F(∞, k) once k / (2x) does.
fn log_is_representable(r: &Reference, x: f64) -> bool {
    match *r {
        Reference::F { df1, df2 } if df2 == f64::INFINITY => df1 * x < f64::MAX,
        Reference::F { df1, df2 } if df1 == f64::INFINITY => df2 / x < f64::MAX,
        _ => x.abs() < 1e150 || !is_normal_law(r),
    }
}

/// No tail is NaN or outside [0, 1]; log tails are ≤ 0 and finite wherever the log itself
/// is representable (for the normal that ends where x²/2 overflows, near 1.9e154).
#[test]
fn tails_are_never_nan_and_logs_stay_finite() {
    for r in all_references() {
        for x in all_arguments() {
            let what = format!("{r:?} at {x:e}");
            for p in [upper_tail(&r, x), lower_tail(&r, x)] {
                assert!((0.0..=1.0).contains(&p), "{what}: tail {p}");
            }
            let (lu, ll) = (log10_upper_tail(&r, x), log10_lower_tail(&r, x));
            assert!(lu <= 0.0 && ll <= 0.0, "{what}: log tails {lu}, {ll}");
            let inside = x.is_finite() && (is_symmetric(&r) || x > 0.0);
            let representable = log_is_representable(&r, x);
            if inside && representable {
                assert!(
                    lu.is_finite() && ll.is_finite(),
                    "{what}: log tails {lu}, {ll}"
                );
            }
        }
    }
}

/// Invalid parameters and NaN arguments give NaN rather than a made-up probability.
#[test]
fn invalid_input_gives_nan() {
    for r in [
        t(0.0),
        t(-1.0),
        t(f64::NAN),
        f(0.0, 3.0),
        f(f64::INFINITY, f64::INFINITY),
        chi2(f64::INFINITY),
    ] {
        assert!(upper_tail(&r, 1.0).is_nan(), "{r:?}");
        assert!(log10_lower_tail(&r, 1.0).is_nan(), "{r:?}");
    }
    assert!(upper_tail(&Reference::Normal, f64::NAN).is_nan());
    assert!(lower_tail(&chi2(2.0), f64::NAN).is_nan());
}
