//! Field-experiment summaries: summary indices, balance tables, differential attrition and
//! Lee bounds.
//!
//! Role: the descriptive and robustness tables that accompany a randomized evaluation,
//! built on [`ols`] and [`wald`] so that every standard error follows the plan's
//! [`CovSpec`]. Statistics are returned as [`TestStatistic`] values; p-values are left to
//! `crate::inference`.
//!
//! Conventions shared by the functions here:
//! * The arm is binary: `treated[i]` is true in the treated arm, false in the comparison arm.
//! * In summary indices a NaN component is missing; an infinite one is an error. Every other
//!   input must be finite ([`SummaryError::NotFinite`] / [`EstimateError::NotFinite`]).
//! * Standard deviations use the n − 1 divisor.

mod balance;
mod bounds;
mod index;
#[cfg(test)]
mod tests;

pub use balance::{balance, differential_attrition, BalanceRow, BalanceTable};
pub use bounds::{lee_bounds, LeeBounds, TrimmedArm};
pub use index::{inverse_covariance, mean_z};

use nalgebra::DVector;

use super::EstimateError;

/// Why a summary could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SummaryError {
    /// An estimation step failed.
    #[error(transparent)]
    Estimate(#[from] EstimateError),
    /// An input of the wrong length.
    #[error("{what} has {got} entries, expected {expected}")]
    Length {
        /// Which input.
        what: &'static str,
        /// Entries expected (the number of rows).
        expected: usize,
        /// Entries found.
        got: usize,
    },
    /// No components, covariates or rows.
    #[error("nothing to summarise: {what} is empty")]
    Empty {
        /// Which input.
        what: &'static str,
    },
    /// An infinite value (or a NaN where missing values are not allowed).
    #[error("the inputs contain an infinite value, or a NaN where none is allowed")]
    NotFinite,
    /// A component with fewer than two non-missing values in the reference group.
    #[error("component {component} has {available} non-missing value(s) in the reference group; at least 2 are needed")]
    ReferenceTooSmall {
        /// Component (column) index.
        component: usize,
        /// Non-missing reference values.
        available: usize,
    },
    /// A component (or the index, `component = None`) constant in the reference group.
    #[error("{} has zero standard deviation in the reference group", match .component { Some(c) => format!("component {c}"), None => "the summary index".to_string() })]
    ConstantInReference {
        /// Component index, or None for the index itself.
        component: Option<usize>,
    },
    /// Too few reference rows with every component observed to estimate their covariance.
    #[error("{complete} reference row(s) have every component observed; more than {components} are needed")]
    TooFewCompleteRows {
        /// Complete reference rows.
        complete: usize,
        /// Components.
        components: usize,
    },
    /// The components' covariance in the reference group is not positive definite.
    #[error("the covariance of the standardised components in the reference group is singular")]
    SingularCovariance,
    /// An arm with no observations, or with no observed outcome (Lee bounds).
    #[error("the {arm} arm has no {what}")]
    EmptyArm {
        /// "treated" or "comparison".
        arm: &'static str,
        /// "observations" or "observed outcomes".
        what: &'static str,
    },
}

fn check_len(what: &'static str, expected: usize, got: usize) -> Result<(), SummaryError> {
    if expected != got {
        return Err(SummaryError::Length {
            what,
            expected,
            got,
        });
    }
    Ok(())
}

/// Count, mean and n − 1 standard deviation (two-pass) of the values.
fn moments(values: &[f64]) -> (usize, f64, f64) {
    let n = values.len();
    if n == 0 {
        return (0, f64::NAN, f64::NAN);
    }
    let mean = values.iter().sum::<f64>() / n as f64;
    if n < 2 {
        return (n, mean, f64::NAN);
    }
    let ss: f64 = values.iter().map(|v| (v - mean) * (v - mean)).sum();
    (n, mean, (ss / (n - 1) as f64).sqrt())
}

fn indicator(flags: &[bool]) -> DVector<f64> {
    DVector::from_iterator(
        flags.len(),
        flags.iter().map(|&t| if t { 1.0 } else { 0.0 }),
    )
}

fn arm_counts(treated: &[bool]) -> Result<(usize, usize), SummaryError> {
    let nt = treated.iter().filter(|&&t| t).count();
    let nc = treated.len() - nt;
    if nt == 0 {
        return Err(SummaryError::EmptyArm {
            arm: "treated",
            what: "observations",
        });
    }
    if nc == 0 {
        return Err(SummaryError::EmptyArm {
            arm: "comparison",
            what: "observations",
        });
    }
    Ok((nt, nc))
}
