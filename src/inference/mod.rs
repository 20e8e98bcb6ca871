//! Inference from test statistics: tail probabilities, p-values, critical values,
//! confidence intervals and multiple-testing corrections.
//!
//! Pure functions over [`Reference`] and [`TestStatistic`]: no I/O, no state, no panics.
//! Tails are computed directly from the incomplete beta and gamma functions (never as
//! 1 - cdf), so small p-values keep their relative accuracy down to the smallest subnormal,
//! and the `log10_*` forms stay finite far beyond that, letting a report state how small a
//! p-value is instead of printing 0.
//!
//! Invariants: for a valid reference (see [`is_valid`]) and a non-NaN argument, no function
//! here returns NaN except where documented (a directional p-value of an F or chi-square
//! statistic, an interval from a non-symmetric reference, a level outside (0, 1)).

mod bky;
mod correction;
mod normal;
mod partial;
mod quantile;
mod special;
mod stepdown;
mod tails;

#[cfg(test)]
mod tests;

pub use bky::bky_q_values;
pub use correction::{adjust, Correction};
pub use partial::{imbens_manski_interval, ImbensManski};
pub use quantile::quantile;
pub use stepdown::{
    romano_wolf, romano_wolf_enumerated, StepDownError, OBSERVED_DRAW_TOLERANCE, TIE_TOLERANCE,
};
pub use tails::{is_valid, log10_lower_tail, log10_upper_tail, lower_tail, upper_tail};

use crate::distribution::{Reference, TestStatistic};
use serde::Serialize;
use std::f64::consts::LOG10_2;

/// The alternative a hypothesis states, as named in a plan's `[[hypothesis]].direction`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Direction {
    /// The parameter differs from the null value.
    TwoSided,
    /// The parameter exceeds the null value.
    Greater,
    /// The parameter falls short of the null value.
    Less,
}

/// Whether a reference is the law of a signed (t- or z-) statistic.
fn is_symmetric(reference: &Reference) -> bool {
    matches!(reference, Reference::Normal | Reference::StudentT { .. })
}

/// p-value of a t- or z-statistic in the given direction.
///
/// # Formula
/// Two-sided: 2 P(T ≥ |t|) (capped at 1); greater: P(T ≥ t); less: P(T ≤ t). Each is one
/// directly computed tail, so it is accurate however small.
///
/// For an F or chi-square reference (which reject only in the upper tail) the two-sided
/// p-value is the upper tail and a directional one is NaN: a squared statistic carries no
/// direction. NaN also for a NaN statistic or an invalid reference.
pub fn p_value(statistic: f64, reference: &Reference, direction: Direction) -> f64 {
    if !is_symmetric(reference) {
        return match direction {
            Direction::TwoSided => upper_tail(reference, statistic),
            Direction::Greater | Direction::Less => f64::NAN,
        };
    }
    match direction {
        Direction::TwoSided => (2.0 * upper_tail(reference, statistic.abs())).min(1.0),
        Direction::Greater => upper_tail(reference, statistic),
        Direction::Less => lower_tail(reference, statistic),
    }
}

/// log10 of [`p_value`]: finite where the p-value underflows, for reports such as
/// "p = 10^-412.3". Same conventions and NaN cases as [`p_value`].
pub fn log10_p_value(statistic: f64, reference: &Reference, direction: Direction) -> f64 {
    if !is_symmetric(reference) {
        return match direction {
            Direction::TwoSided => log10_upper_tail(reference, statistic),
            Direction::Greater | Direction::Less => f64::NAN,
        };
    }
    match direction {
        Direction::TwoSided => (LOG10_2 + log10_upper_tail(reference, statistic.abs())).min(0.0),
        Direction::Greater => log10_upper_tail(reference, statistic),
        Direction::Less => log10_lower_tail(reference, statistic),
    }
}

/// p-value of a chi-square or F statistic: its upper tail (for a t or z statistic, the
/// two-sided p-value, the only direction-free reading of it).
pub fn test_p_value(t: &TestStatistic) -> f64 {
    p_value(t.statistic, &t.reference, Direction::TwoSided)
}

/// The two-sided critical value q = quantile((1 + level) / 2) of a normal or t reference,
/// so that estimate ± q·se covers with probability `level`. NaN for a level outside (0, 1)
/// or a reference that is not symmetric about 0.
pub fn critical_value(reference: &Reference, level: f64) -> f64 {
    if !(is_symmetric(reference) && level > 0.0 && level < 1.0) {
        return f64::NAN;
    }
    // (1 + level)/2 rounds; its complement (1 - level)/2 is exact for level ≥ ½, and the
    // symmetric quantile is solved on that smaller tail.
    -quantile(reference, 0.5 * (1.0 - level))
}

/// The one-sided confidence bound a one-sided test at level `alpha` implies: for `greater`
/// the lower bound β̂ − q·se, for `less` the upper bound β̂ + q·se, with q the 1 − alpha
/// quantile of `reference` (normal or Student's t). The test rejects the null exactly when the
/// null lies beyond the bound. `None` for a two-sided direction, alpha outside (0, ½), a
/// negative or NaN standard error, or a reference that is not symmetric about 0.
pub fn one_sided_bound(
    estimate: f64,
    std_error: f64,
    reference: &Reference,
    alpha: f64,
    direction: Direction,
) -> Option<f64> {
    if !(is_symmetric(reference) && alpha > 0.0 && alpha < 0.5 && std_error >= 0.0) {
        return None;
    }
    let q = -quantile(reference, alpha);
    match direction {
        Direction::TwoSided => None,
        Direction::Greater => Some(estimate - q * std_error),
        Direction::Less => Some(estimate + q * std_error),
    }
    .filter(|b| b.is_finite())
}

/// Confidence interval estimate ± q·se, with q the (1 + level)/2 quantile of `reference`
/// (normal or Student's t).
///
/// # Formula
/// [β̂ - q se, β̂ + q se], the Wald interval. NaN bounds for a negative or NaN standard
/// error and in the cases where [`critical_value`] is NaN.
pub fn confidence_interval(
    estimate: f64,
    std_error: f64,
    reference: &Reference,
    level: f64,
) -> [f64; 2] {
    let q = critical_value(reference, level);
    if std_error.is_nan() || std_error < 0.0 || q.is_nan() {
        return [f64::NAN, f64::NAN];
    }
    let half_width = q * std_error;
    [estimate - half_width, estimate + half_width]
}
