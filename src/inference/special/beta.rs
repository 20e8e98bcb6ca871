//! The regularized incomplete beta function I_x(a, b), in log space.
//!
//! Invariants: a, b > 0 (checked by the caller); the point is held as x and y = 1 - x, each
//! with its logarithm, so neither is recovered from the other by cancellation; the pair
//! returned satisfies I_x(a, b) + I_y(b, a) = 1 to rounding.

use super::extended::Extended;
use super::{ln_beta, ln_one_minus_exp, log1pmx, stirling_remainder};
use super::{LN_SQRT_2PI, MAX_TERMS, TINY, TOLERANCE};

/// A point x = u / (u + v) of the unit interval with its complement y = v / (u + v).
#[derive(Debug, Clone, Copy)]
pub(crate) struct UnitPoint {
    /// x.
    pub x: f64,
    /// y = 1 - x.
    pub y: f64,
    /// ln x.
    pub ln_x: f64,
    /// ln y.
    pub ln_y: f64,
}

impl UnitPoint {
    /// The point for weights u, v ≥ 0 given directly and as logarithms. The direct values
    /// are used where they neither overflow nor underflow (one rounding each); otherwise x
    /// and y come from the logarithms, so the point stays representable in log form at any scale.
    pub fn from_weights(u: f64, v: f64, ln_u: f64, ln_v: f64) -> Self {
        let sum = u + v;
        let usable = |w: f64, ln_w: f64| w >= f64::MIN_POSITIVE || ln_w == f64::NEG_INFINITY;
        if sum.is_finite() && sum > 0.0 {
            let (x, y) = (u / sum, v / sum);
            if usable(x, ln_u) && usable(y, ln_v) {
                let ln_x = if x <= 0.5 { x.ln() } else { (-y).ln_1p() };
                let ln_y = if y <= 0.5 { y.ln() } else { (-x).ln_1p() };
                return UnitPoint { x, y, ln_x, ln_y };
            }
        }
        Self::from_log_weights(ln_u, ln_v)
    }

    /// The point from ln u and ln v alone (either may be ±inf).
    fn from_log_weights(ln_u: f64, ln_v: f64) -> Self {
        let d = ln_v - ln_u;
        let ln_x = -softplus(d);
        let ln_y = -softplus(-d);
        UnitPoint {
            x: ln_x.exp(),
            y: ln_y.exp(),
            ln_x,
            ln_y,
        }
    }

    /// The point 1 - x.
    fn mirrored(self) -> Self {
        UnitPoint {
            x: self.y,
            y: self.x,
            ln_x: self.ln_y,
            ln_y: self.ln_x,
        }
    }

    /// x in double-double, taken as 1 - y where x is the larger side (y is then the
    /// accurate one), so the continued fraction sees the point the logs describe.
    fn x_extended(self) -> Extended {
        if self.x > 0.5 {
            Extended::one_minus(self.y)
        } else {
            Extended::from_f64(self.x)
        }
    }
}

/// ln(1 + e^d), exact in both tails; +inf for d = +inf and 0 for d = -inf.
fn softplus(d: f64) -> f64 {
    if d > 0.0 {
        d + (-d).exp().ln_1p()
    } else {
        d.exp().ln_1p()
    }
}

/// ln(x^a y^b / B(a, b)), the prefix of the incomplete beta function.
///
/// # Formula
/// Directly from ln x, ln y and a stable ln B when a or b is below 10. When both are 10 or
/// more, the saddle-point form (after Loader 2000, "Fast and accurate computation of
/// binomial probabilities"), in which no large terms cancel:
/// ½ ln(ab/n) - ln √(2π) - a g(e/a) - b g(-e/b) - δ(a) - δ(b) + δ(n), with n = a + b,
/// e = b x - a y (= n x - a), g(t) = t - ln(1 + t) and Stirling's δ (A&S 6.1.40).
fn ln_prefix(a: f64, b: f64, p: UnitPoint) -> f64 {
    let interior = p.x >= f64::MIN_POSITIVE && p.y >= f64::MIN_POSITIVE;
    if a < 10.0 || b < 10.0 || !interior {
        return a * p.ln_x + b * p.ln_y - ln_beta(a, b);
    }
    let n = a + b;
    let e = b * p.x - a * p.y;
    let stirling = stirling_remainder(n) - stirling_remainder(a) - stirling_remainder(b);
    let deviance = a * log1pmx(e / a, n * p.x / a) + b * log1pmx(-e / b, n * p.y / b);
    -deviance + 0.5 * (a * b / n).ln() - LN_SQRT_2PI + stirling
}

/// The continued fraction of I_x(a, b) by the modified Lentz method, in double-double.
///
/// # Formula
/// I_x(a, b) = x^a y^b / (a B(a, b)) · 1/(1+ d1/(1+ d2/(1+ …))), with
/// d_2m+1 = -(a+m)(a+b+m) x / ((a+2m)(a+2m+1)), d_2m = m(b-m) x / ((a+2m-1)(a+2m))
/// (Abramowitz and Stegun 1964, 26.5.8). Near x = 1 the odd terms approach -1 and cancel
/// against 1, magnifying rounding by 1/y; double-double keeps that below `f64` rounding.
fn fraction(a: f64, b: f64, x: Extended) -> f64 {
    let lift = Extended::from_f64;
    let one = lift(1.0);
    let (ea, eb) = (lift(a), lift(b));
    let guard = |v: Extended| if v.abs_f64() < TINY { lift(TINY) } else { v };
    let mut c = one;
    let mut d = one / guard(one - (ea + eb) * x / (ea + one));
    let mut h = d;
    for m in 1..MAX_TERMS {
        let em = lift(m as f64);
        let a2m = ea + em + em;
        let even = em * (eb - em) * x / ((a2m - one) * a2m);
        let odd = -((ea + em) * (ea + eb + em) * x) / (a2m * (a2m + one));
        let mut step = one;
        for coef in [even, odd] {
            d = one / guard(one + coef * d);
            c = guard(one + coef / c);
            step = d * c;
            h = h * step;
        }
        if (step - one).abs_f64() <= TOLERANCE {
            break;
        }
    }
    h.to_f64()
}

/// ln I_x(a, b) by the continued fraction, for x below the switch point.
fn ln_direct(a: f64, b: f64, p: UnitPoint) -> f64 {
    (ln_prefix(a, b, p) - a.ln() + fraction(a, b, p.x_extended()).ln()).min(0.0)
}

/// (ln I_x(a, b), ln I_y(b, a)): the log of the regularized incomplete beta function at `p`
/// and the log of its complement 1 - I_x(a, b) = I_y(b, a).
///
/// # Formula
/// The continued fraction (A&S 26.5.8) is applied to whichever side has x < (a+1)/(a+b+2),
/// where it converges fast and gives the smaller of the two values; the other is
/// ln(1 - exp(·)) by the symmetry I_x(a, b) = 1 - I_y(b, a) (A&S 26.5.2).
pub(crate) fn ln_beta_reg(a: f64, b: f64, p: UnitPoint) -> (f64, f64) {
    if p.ln_x == f64::NEG_INFINITY {
        return (f64::NEG_INFINITY, 0.0);
    }
    if p.ln_y == f64::NEG_INFINITY {
        return (0.0, f64::NEG_INFINITY);
    }
    if p.x < (a + 1.0) / (a + b + 2.0) {
        let ln_i = ln_direct(a, b, p);
        (ln_i, ln_one_minus_exp(ln_i))
    } else {
        let ln_c = ln_direct(b, a, p.mirrored());
        (ln_one_minus_exp(ln_c), ln_c)
    }
}
