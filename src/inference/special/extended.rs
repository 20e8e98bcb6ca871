//! Double-double ("extended") arithmetic: a value held as an unevaluated sum hi + lo of two
//! `f64`s, carrying about 106 bits.
//!
//! Used only where a recurrence amplifies rounding errors: the incomplete-beta continued
//! fraction near x = 1, whose partial numerators approach -1 and cancel against 1.
//!
//! Invariants: |lo| ≤ ½ ulp(hi) after every operation (renormalised by `quick_two_sum`).
//! Error-free transformations follow Dekker (1971) and Knuth (TAOCP vol. 2, 4.2.2).

use std::ops::{Add, Div, Mul, Neg, Sub};

use crate::exact::{two_prod, two_sum};

/// A double-double number hi + lo.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Extended {
    /// Leading part.
    pub hi: f64,
    /// Trailing part, below half an ulp of `hi`.
    pub lo: f64,
}

/// s + e = a + b exactly, assuming |a| ≥ |b| (Dekker's fast two-sum).
fn quick_two_sum(a: f64, b: f64) -> Extended {
    let (hi, lo) = crate::exact::quick_two_sum(a, b);
    Extended { hi, lo }
}

impl Extended {
    /// The exact value of an `f64`.
    pub fn from_f64(x: f64) -> Self {
        Extended { hi: x, lo: 0.0 }
    }

    /// 1 - y, exactly (up to the double-double precision), for the complement of a point.
    pub fn one_minus(y: f64) -> Self {
        let (s, e) = two_sum(1.0, -y);
        quick_two_sum(s, e)
    }

    /// The value rounded to `f64`.
    pub fn to_f64(self) -> f64 {
        self.hi + self.lo
    }

    /// |self| as an `f64`, for convergence tests and guards.
    pub fn abs_f64(self) -> f64 {
        self.to_f64().abs()
    }
}

impl Add for Extended {
    type Output = Extended;
    fn add(self, other: Extended) -> Extended {
        let (s, e) = two_sum(self.hi, other.hi);
        let (t, f) = two_sum(self.lo, other.lo);
        let head = quick_two_sum(s, e + t);
        quick_two_sum(head.hi, head.lo + f)
    }
}

impl Neg for Extended {
    type Output = Extended;
    fn neg(self) -> Extended {
        Extended {
            hi: -self.hi,
            lo: -self.lo,
        }
    }
}

impl Sub for Extended {
    type Output = Extended;
    fn sub(self, other: Extended) -> Extended {
        self + (-other)
    }
}

impl Mul for Extended {
    type Output = Extended;
    fn mul(self, other: Extended) -> Extended {
        let (p, e) = two_prod(self.hi, other.hi);
        quick_two_sum(p, e + (self.hi * other.lo + self.lo * other.hi))
    }
}

impl Div for Extended {
    type Output = Extended;
    /// Long division with two correction steps.
    fn div(self, other: Extended) -> Extended {
        let q1 = self.hi / other.hi;
        let r = self - other * Extended::from_f64(q1);
        let q2 = r.hi / other.hi;
        let r = r - other * Extended::from_f64(q2);
        let q3 = r.hi / other.hi;
        let head = quick_two_sum(q1, q2);
        head + Extended::from_f64(q3)
    }
}
