//! Tests of the inference module against sources outside the project: published tables,
//! asymptotic expansions and identities from the literature, and reference libraries
//! (scipy, mpmath, statsmodels). Every expected value names its source beside it.
//!
//! Tolerances live here, in one place, so a change in the accuracy promise is one edit.

mod corrections;
mod extremes;
mod identities;
mod p_values;
mod reference_values;
mod tables;

use crate::distribution::Reference;

/// Relative agreement expected with a reference library in the body of a distribution.
const LIBRARY: f64 = 1e-13;
/// Relative agreement expected in far tails and with asymptotic expansions.
const TAIL: f64 = 1e-11;

/// Student's t with `df` degrees of freedom.
fn t(df: f64) -> Reference {
    Reference::StudentT { df }
}

/// Snedecor's F.
fn f(df1: f64, df2: f64) -> Reference {
    Reference::F { df1, df2 }
}

/// Chi-square with `df` degrees of freedom.
fn chi2(df: f64) -> Reference {
    Reference::ChiSquare { df }
}

/// Asserts |actual - expected| ≤ tol · |expected|.
fn assert_rel(actual: f64, expected: f64, tol: f64, what: &str) {
    let err = (actual - expected).abs() / expected.abs();
    assert!(
        err <= tol,
        "{what}: got {actual:e}, expected {expected:e} (relative error {err:e} > {tol:e})"
    );
}

/// Asserts that `actual` rounds to a table entry printed with `decimals` decimals: it lies
/// within half a unit of the last printed digit (plus a hair for the binary representation).
fn assert_printed(actual: f64, printed: f64, decimals: i32, what: &str) {
    let half_unit = 0.5 * 10f64.powi(-decimals) * (1.0 + 1e-9);
    assert!(
        (actual - printed).abs() <= half_unit,
        "{what}: got {actual}, the table prints {printed} ({decimals} decimals)"
    );
}
