//! Quantiles (inverse distribution functions) to full `f64` precision.
//!
//! The quantile is found by bisection on the bit patterns of non-negative `f64`s: ordered
//! as integers, they can be halved at most 64 times before two neighbours remain, so the
//! search always ends with the representable x whose computed tail is nearest the target.
//! The search compares log tails, so targets far below the smallest normal `f64` work too.
//!
//! Invariants: the result is the representable x nearest the quantile of the computed
//! tails; for the symmetric references the search runs on the smaller tail and the sign is
//! applied after, so quantile(1 - p) = -quantile(p) whenever 1 - p is exact; p = 0 and
//! p = 1 give the ends of the support; p outside [0, 1], NaN p or an invalid reference give
//! NaN. An exact quantile below the smallest subnormal comes out as that subnormal.
//!
//! Memo: each search costs some 64 tail evaluations (for t and F, incomplete beta functions
//! in double-double arithmetic), and a run, and above all a rehearsal, asks for the same few
//! quantiles again and again (the t critical value of every interval with the same degrees
//! of freedom). Each thread keeps the answers it computed, keyed by the bit patterns of the
//! reference's parameters and p; the function is pure, so a remembered answer is the same
//! bits a new search would give. The memo is emptied when it reaches [`MEMO_CAPACITY`].

use super::tails::{is_valid, ln_lower_tail, ln_upper_tail};
use crate::distribution::Reference;

/// Which tail is matched to the target probability.
#[derive(Clone, Copy)]
enum Side {
    /// Find x with P(X ≤ x) = target.
    Lower,
    /// Find x with P(X ≥ x) = target.
    Upper,
}

/// Quantile: the x with P(X ≤ x) = p, for 0 < p < 1, to full precision.
///
/// p = 0 and p = 1 give the ends of the support (±inf, or 0 for F and chi-square). NaN for
/// p outside [0, 1], NaN p, or an invalid reference.
pub fn quantile(reference: &Reference, p: f64) -> f64 {
    let key = memo_key(reference, p);
    if let Some(x) = MEMO.with(|m| m.borrow().get(&key).copied()) {
        return x;
    }
    let x = compute(reference, p);
    MEMO.with(|m| {
        let mut m = m.borrow_mut();
        if m.len() >= MEMO_CAPACITY {
            m.clear();
        }
        m.insert(key, x);
    });
    x
}

/// Remembered quantiles per thread, at most this many.
const MEMO_CAPACITY: usize = 4096;

thread_local! {
    static MEMO: std::cell::RefCell<std::collections::HashMap<[u64; 4], f64>> =
        std::cell::RefCell::new(std::collections::HashMap::new());
}

/// The memo's key: the reference's kind and parameters and p, as bit patterns.
fn memo_key(reference: &Reference, p: f64) -> [u64; 4] {
    let (kind, a, b) = match *reference {
        Reference::Normal => (0, 0.0, 0.0),
        Reference::StudentT { df } => (1, df, 0.0),
        Reference::F { df1, df2 } => (2, df1, df2),
        Reference::ChiSquare { df } => (3, df, 0.0),
    };
    [kind, a.to_bits(), b.to_bits(), p.to_bits()]
}

/// The quantile itself (see [`quantile`]).
fn compute(reference: &Reference, p: f64) -> f64 {
    if !is_valid(reference) || !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    let symmetric = matches!(reference, Reference::Normal | Reference::StudentT { .. });
    if p == 0.0 {
        return if symmetric { f64::NEG_INFINITY } else { 0.0 };
    }
    if p == 1.0 {
        return f64::INFINITY;
    }
    match *reference {
        Reference::Normal | Reference::StudentT { .. } => symmetric_quantile(reference, p),
        Reference::F { .. } | Reference::ChiSquare { .. } => {
            if p <= 0.5 {
                solve(reference, Side::Lower, p)
            } else {
                solve(reference, Side::Upper, 1.0 - p)
            }
        }
    }
}

/// Quantile of a distribution symmetric about 0: solved on the positive half for the
/// smaller tail (1 - p is exact for p ≥ ½), then signed.
fn symmetric_quantile(reference: &Reference, p: f64) -> f64 {
    if p == 0.5 {
        return 0.0;
    }
    let x = solve(reference, Side::Upper, p.min(1.0 - p));
    if p < 0.5 {
        -x
    } else {
        x
    }
}

/// The non-negative x at which the chosen tail equals `target`, for a target in [0, ½] on
/// the upper side of a symmetric law or any target on the monotone side of a positive one.
fn solve(reference: &Reference, side: Side, target: f64) -> f64 {
    let ln_target = target.ln();
    let ln_tail = |x: f64| match side {
        Side::Lower => ln_lower_tail(reference, x),
        Side::Upper => ln_upper_tail(reference, x),
    };
    // `beyond(x)`: x is at or past the quantile. Monotone: false at 0, true at +inf.
    let beyond = |x: f64| match side {
        Side::Lower => ln_tail(x) >= ln_target,
        Side::Upper => ln_tail(x) <= ln_target,
    };
    if beyond(0.0) {
        return 0.0;
    }
    let (mut below, mut above) = (0_u64, f64::MAX.to_bits());
    if !beyond(f64::MAX) {
        return f64::INFINITY;
    }
    while above - below > 1 {
        let mid = below + (above - below) / 2;
        if beyond(f64::from_bits(mid)) {
            above = mid;
        } else {
            below = mid;
        }
    }
    let (lo, hi) = (f64::from_bits(below), f64::from_bits(above));
    if (ln_tail(lo) - ln_target).abs() < (ln_tail(hi) - ln_target).abs() {
        lo
    } else {
        hi
    }
}

#[cfg(test)]
mod memo_tests {
    use super::*;

    #[test]
    fn a_remembered_quantile_is_the_same_bits_as_a_fresh_search() {
        let cases = [
            (Reference::StudentT { df: 71.0 }, 0.975),
            (
                Reference::F {
                    df1: 1.0,
                    df2: 2302.0,
                },
                0.95,
            ),
            (Reference::ChiSquare { df: 3.5 }, 0.05),
            (Reference::Normal, 1e-300),
        ];
        for (r, p) in cases {
            let fresh = compute(&r, p);
            let first = quantile(&r, p);
            let again = quantile(&r, p);
            assert_eq!(fresh.to_bits(), first.to_bits(), "{r:?} {p}");
            assert_eq!(first.to_bits(), again.to_bits(), "{r:?} {p}");
        }
        // Parameters that differ in the last bit are different keys.
        let df = 71.0f64;
        let near = f64::from_bits(df.to_bits() + 1);
        let a = quantile(&Reference::StudentT { df }, 0.975);
        let b = quantile(&Reference::StudentT { df: near }, 0.975);
        assert_eq!(
            b.to_bits(),
            compute(&Reference::StudentT { df: near }, 0.975).to_bits()
        );
        assert!(a.is_finite() && b.is_finite());
    }
}
