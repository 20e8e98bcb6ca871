//! The regularized incomplete gamma functions P(a, x) and Q(a, x) = 1 - P(a, x), in log space.
//!
//! Invariants: a > 0 (checked by the caller); x may be any non-NaN value (x ≤ 0 is the lower
//! end of the support, +inf the upper); the pair returned satisfies P + Q = 1 to rounding.

use super::{ln_gamma_pos, ln_one_minus_exp, log1pmx, stirling_remainder};
use super::{LN_SQRT_2PI, MAX_TERMS, TINY, TOLERANCE};

/// ln(x^a e^-x / Γ(a)), the common prefix of the incomplete gamma function.
///
/// # Formula
/// Direct below a = 10; from 10 on, -a·g((x - a)/a) + ½ ln a - ln √(2π) - δ(a), with
/// g(t) = t - ln(1 + t) and Stirling's δ (A&S 6.1.40): the saddle-point form of Loader (2000,
/// "Fast and accurate computation of binomial probabilities"), which keeps full relative
/// accuracy where a ln x and x are both large and nearly cancel.
fn ln_prefix(a: f64, x: f64) -> f64 {
    if a < 10.0 {
        a * x.ln() - x - ln_gamma_pos(a)
    } else {
        -a * log1pmx((x - a) / a, x / a) + 0.5 * a.ln() - LN_SQRT_2PI - stirling_remainder(a)
    }
}

/// Series Σ_n x^n / ((a+1)…(a+n)), so that P(a, x) = prefix / a · series (A&S 6.5.29).
fn series(a: f64, x: f64) -> f64 {
    let mut term = 1.0;
    let mut sum = 1.0;
    for n in 1..MAX_TERMS {
        term *= x / (a + n as f64);
        sum += term;
        if term <= sum * TOLERANCE {
            break;
        }
    }
    sum
}

/// Continued fraction for Q(a, x) / prefix (Legendre's, A&S 6.5.31), by modified Lentz.
fn fraction(a: f64, x: f64) -> f64 {
    let guard = |d: f64| if d.abs() < TINY { TINY } else { d };
    let mut b = x + 1.0 - a;
    let mut c = 1.0 / TINY;
    let mut d = 1.0 / guard(b);
    let mut h = d;
    for i in 1..MAX_TERMS {
        let an = -(i as f64) * (i as f64 - a);
        b += 2.0;
        d = 1.0 / guard(an * d + b);
        c = guard(b + an / c);
        h *= d * c;
        if (d * c - 1.0).abs() <= TOLERANCE {
            break;
        }
    }
    h
}

/// (ln P(a, x), ln Q(a, x)).
///
/// # Formula
/// The series (A&S 6.5.29) for x < a + 1, where P is the smaller side, else the continued
/// fraction (A&S 6.5.31) for Q; the other side is ln(1 - exp(·)).
pub(crate) fn ln_gamma_reg(a: f64, x: f64) -> (f64, f64) {
    if x <= 0.0 {
        return (f64::NEG_INFINITY, 0.0);
    }
    if x == f64::INFINITY {
        return (0.0, f64::NEG_INFINITY);
    }
    let prefix = ln_prefix(a, x);
    if x < a + 1.0 {
        let ln_p = (prefix - a.ln() + series(a, x).ln()).min(0.0);
        (ln_p, ln_one_minus_exp(ln_p))
    } else {
        let ln_q = (prefix + fraction(a, x).ln()).min(0.0);
        (ln_one_minus_exp(ln_q), ln_q)
    }
}
