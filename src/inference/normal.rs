//! Tails of the standard normal distribution.
//!
//! Below x = 8 the upper tail is ½ Q(½, x²/2), the regularized upper incomplete gamma
//! function (for x ≥ 0; the lower tail by symmetry). From 8 on it is φ(x) · R(x), with the
//! Mills ratio R evaluated by Laplace's continued fraction, so the logarithm stays finite and
//! accurate for every finite x, long after the tail itself underflows (near x = 38.5). The
//! two routes share no code, which lets the tests check one against the other.
//!
//! Invariants: never NaN for non-NaN x; upper(x) = lower(-x) exactly; upper(+inf) = 0.

use super::special::gamma::ln_gamma_reg;
use super::special::{ln_one_minus_exp, LN_SQRT_2PI};
use std::f64::consts::LN_2;

/// √(2π).
const SQRT_2PI: f64 = 2.506_628_274_631_000_5;
/// Where the continued fraction takes over from the incomplete gamma function.
const FRACTION_FROM: f64 = 8.0;
/// Depth of the continued fraction; at x = 8 its truncation error is far below 1e-17.
const FRACTION_DEPTH: usize = 120;

/// Mills ratio R(x) = Φ̄(x) / φ(x) for x ≥ 8.
///
/// # Formula
/// R(x) = 1/(x+ 1/(x+ 2/(x+ 3/(x+ …)))), Laplace's continued fraction (Abramowitz and Stegun
/// 1964, 26.2.14), evaluated from the bottom up.
fn mills_ratio(x: f64) -> f64 {
    let mut t = x;
    for k in (1..=FRACTION_DEPTH).rev() {
        t = x + k as f64 / t;
    }
    1.0 / t
}

/// x² as an unevaluated sum hi + lo (lo from a fused multiply-add), so that e^(-x²/2)
/// carries no rounding error from the square; None once x² overflows.
fn square_parts(x: f64) -> Option<(f64, f64)> {
    let hi = x * x;
    hi.is_finite().then(|| (hi, x.mul_add(x, -hi)))
}

/// ln P(Z ≥ x) for x ≥ 0 by the incomplete gamma function: ln ½ + ln Q(½, x²/2).
fn ln_upper_body(x: f64) -> f64 {
    ln_gamma_reg(0.5, 0.5 * x * x).1 - LN_2
}

/// P(Z ≥ x).
pub(crate) fn upper(x: f64) -> f64 {
    if x < FRACTION_FROM {
        return ln_upper(x).exp();
    }
    match square_parts(x) {
        Some((hi, lo)) => (-0.5 * hi).exp() * ((-0.5 * lo).exp() * mills_ratio(x) / SQRT_2PI),
        None => 0.0,
    }
}

/// ln P(Z ≥ x).
pub(crate) fn ln_upper(x: f64) -> f64 {
    if x < 0.0 {
        return ln_one_minus_exp(ln_upper_body(-x));
    }
    if x < FRACTION_FROM {
        return ln_upper_body(x);
    }
    match square_parts(x) {
        Some((hi, lo)) => -0.5 * hi + (mills_ratio(x).ln() - 0.5 * lo - LN_SQRT_2PI),
        None => f64::NEG_INFINITY,
    }
}
