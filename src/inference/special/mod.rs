//! Special functions behind the tails, evaluated in log space: the regularized incomplete
//! beta ([`beta`]) and gamma ([`gamma`]) functions, and the log-gamma pieces they share.
//!
//! Every probability here is returned as its *natural logarithm*, so results stay finite far
//! below the smallest `f64` (a tail of 10^-5000 is about -11513 here). Tails are computed
//! directly — never as `1 - cdf` — by applying the series or continued fraction to the side
//! on which it gives the smaller of two complementary values; the other side is then
//! `ln(1 - exp(·))`, which is accurate because that side is the larger one.
//!
//! Invariants: callers pass valid parameters (a, b > 0); results lie in [-inf, 0] and are
//! never NaN for such inputs.

pub(crate) mod beta;
mod extended;
pub(crate) mod gamma;

use statrs::function::gamma::ln_gamma;

/// ln √(2π).
pub(crate) const LN_SQRT_2PI: f64 = 0.918_938_533_204_672_8;
/// Relative tolerance at which series and continued fractions stop: one ulp of 1, the
/// smallest change a step can still make (a tighter one may never be met).
const TOLERANCE: f64 = f64::EPSILON;
/// Guard against division by zero in the modified Lentz algorithm.
const TINY: f64 = 1e-300;
/// Iteration cap: convergence needs O(√max(a, b)) terms, far below this for any df in use.
const MAX_TERMS: usize = 200_000;

/// ln(1 - e^l) for l ≤ 0, accurate for l near 0 and for l very negative.
pub(crate) fn ln_one_minus_exp(l: f64) -> f64 {
    if l > -std::f64::consts::LN_2 {
        (-l.exp_m1()).ln()
    } else {
        (-l.exp()).ln_1p()
    }
}

/// t - ln(1 + t) for t > -1, given t and 1 + t as the caller computed each without
/// cancellation (so neither is derived from the other near t = -1 or t = 0).
///
/// # Formula
/// For |t| < ½, with v = t / (2 + t) (so ln(1 + t) = 2 artanh v): t v - 2 Σ_{j≥1} v^(2j+1)/(2j+1)
/// (the artanh series); otherwise t - ln(1 + t) directly.
pub(crate) fn log1pmx(t: f64, one_plus_t: f64) -> f64 {
    if t.abs() >= 0.5 {
        return t - one_plus_t.ln();
    }
    let v = t / (2.0 + t);
    let v2 = v * v;
    let mut sum = t * v;
    let mut power = 2.0 * v;
    for j in 1..200 {
        power *= v2;
        let next = sum - power / (2 * j + 1) as f64;
        if next == sum {
            break;
        }
        sum = next;
    }
    sum
}

/// Remainder of Stirling's series, lnΓ(x) - [(x - ½) ln x - x + ln √(2π)], for x ≥ 10.
///
/// # Formula
/// Σ_k B_2k / (2k (2k-1) x^(2k-1)), k = 1..8 (Abramowitz and Stegun 1964, 6.1.40); the first
/// omitted term is below 2e-18 at x = 10.
pub(crate) fn stirling_remainder(x: f64) -> f64 {
    const C: [f64; 8] = [
        1.0 / 12.0,
        -1.0 / 360.0,
        1.0 / 1260.0,
        -1.0 / 1680.0,
        1.0 / 1188.0,
        -691.0 / 360_360.0,
        1.0 / 156.0,
        -3617.0 / 122_400.0,
    ];
    let r = 1.0 / (x * x);
    C.iter().rev().fold(0.0, |acc, c| acc * r + c) / x
}

/// lnΓ(x) for x > 0: statrs' Lanczos form below 10, Stirling's series from 10 on.
pub(crate) fn ln_gamma_pos(x: f64) -> f64 {
    if x < 10.0 {
        ln_gamma(x)
    } else {
        (x - 0.5) * x.ln() - x + LN_SQRT_2PI + stirling_remainder(x)
    }
}

/// lnΓ(a) - lnΓ(a + b) for a, b > 0, without cancelling two large logarithms when a ≥ 10.
///
/// # Formula
/// From Stirling's series: -(a - ½) ln(1 + b/a) - b ln(a + b) + b + δ(a) - δ(a + b), with δ
/// the series remainder (Abramowitz and Stegun 1964, 6.1.40).
fn ln_gamma_ratio(a: f64, b: f64) -> f64 {
    if a < 10.0 {
        return ln_gamma_pos(a) - ln_gamma_pos(a + b);
    }
    let n = a + b;
    -(a - 0.5) * (b / a).ln_1p() - b * n.ln() + b + stirling_remainder(a) - stirling_remainder(n)
}

/// ln B(a, b) = lnΓ(a) + lnΓ(b) - lnΓ(a + b) for a, b > 0.
pub(crate) fn ln_beta(a: f64, b: f64) -> f64 {
    let (small, large) = if a < b { (a, b) } else { (b, a) };
    ln_gamma_pos(small) + ln_gamma_ratio(large, small)
}
