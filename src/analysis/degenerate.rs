//! Degenerate and extreme data, caught at the analysis level so no number is reported that
//! the data cannot support.
//!
//! - **Scale.** Every column of a specification's design (outcome, regressors, instruments,
//!   controls) must have its largest absolute value within [`SMALLEST`, `LARGEST`]: cross
//!   products of such columns stay finite and normal in double precision (whose range is
//!   about 2.2e-308 to 1.8e308), so no sum of squares overflows to infinity or underflows to
//!   zero. A column outside is an error naming it and the power of ten to divide or multiply
//!   it by (a `[derive]` rescales it). An all-zero column is left to the collinearity check.
//! - **An outcome without variation** in the estimation sample, or one the regressors fit
//!   exactly (residual sum of squares below [`EXACT_FIT`] times the total), leaves nothing to
//!   test: the coefficients' standard errors are zero or rounding noise, so every statistic
//!   built from them is meaningless. Such a specification keeps its point estimates, reports
//!   its inference and the tests involving the outcome as not available, and its hypotheses
//!   are `undetermined` with the reason.
//! - **Support.** A test statistic that left its distribution's support by rounding (a
//!   negative χ² or F) or is not finite is not reported as a number.

use crate::data::Design;
use crate::distribution::Reference;
use crate::error::{Error, Result};
use crate::plan::Spec;
use crate::results::{SpecResult, Term, TestResult};
use nalgebra::DMatrix;

/// Largest magnitude a design column may reach (its square, 1e300, is still finite).
pub const LARGEST: f64 = 1e150;

/// Smallest largest-magnitude a non-zero design column may have (its square, 1e-300, is
/// still a normal double).
pub const SMALLEST: f64 = 1e-150;

/// Residual sum of squares below this share of the total is an exact fit: about the square
/// of a few hundred units of double-precision rounding (2.2e-16) in the residuals.
pub const EXACT_FIT: f64 = 1e-24;

fn largest(values: &[f64]) -> f64 {
    // Eight running maxima over blocks of eight, combined at the end: the maximum does not
    // round, so the order changes nothing (a NaN is passed over by `max` in any order), and
    // the fixed-width blocks let the eight chains run as vector lanes.
    let mut lanes = [0.0f64; 8];
    let blocks = values.chunks_exact(8);
    let tail = blocks.remainder();
    for block in blocks {
        for (lane, v) in lanes.iter_mut().zip(block) {
            *lane = lane.max(v.abs());
        }
    }
    for (lane, v) in lanes.iter_mut().zip(tail) {
        *lane = lane.max(v.abs());
    }
    lanes.iter().fold(0.0, |m, &v| m.max(v))
}

/// The design's columns by name: outcome, then focal, exogenous and instrument columns.
fn columns(d: &Design, outcome: &str) -> Vec<(String, f64)> {
    let mut out = vec![(outcome.to_string(), largest(d.y_raw.as_slice()))];
    let named = |m: &DMatrix<f64>, names: &[String]| -> Vec<(String, f64)> {
        names
            .iter()
            .enumerate()
            .filter(|(j, _)| *j < m.ncols())
            .map(|(j, n)| (n.clone(), largest(m.column(j).as_slice())))
            .collect()
    };
    out.extend(named(&d.focal, &d.focal_names));
    out.extend(named(&d.exog, &d.exog_names));
    out.extend(named(&d.instruments, &d.instrument_names));
    out
}

/// An error for the first design column whose scale leaves double precision no room.
pub fn check_scales(spec: &Spec, d: &Design) -> Result<()> {
    for (name, m) in columns(d, &spec.outcome) {
        let fix = if m > LARGEST {
            let p = m.log10().floor();
            format!("its values reach {m:e}, so sums of their squares overflow; rescale it, e.g. derive `{name}_scaled = \"{name} / 1e{p}\"` and use that")
        } else if m > 0.0 && m < SMALLEST {
            let p = -m.log10().ceil();
            format!("its largest value is {m:e}, so sums of their squares underflow to zero; rescale it, e.g. derive `{name}_scaled = \"{name} * 1e{p}\"` and use that")
        } else if !m.is_finite() {
            format!("it holds a value that is not finite ({m})")
        } else {
            continue;
        };
        return Err(Error::Estimation {
            spec: spec.id.clone(),
            message: format!("column `{name}` cannot be estimated in double precision: {fix}"),
        });
    }
    Ok(())
}

/// Why an outcome leaves nothing to test.
#[derive(Debug, Clone, PartialEq)]
pub struct OutcomeProblem {
    /// What is wrong, in words.
    pub reason: String,
    /// The outcome has no variation at all (rather than being fitted exactly).
    pub constant: bool,
}

/// Why the outcome leaves nothing to test, if it does: no variation in the sample, or an
/// exact fit (`rss` against the total sum of squares of the outcome as swept).
pub fn outcome_problem(spec: &Spec, d: &Design, rss: f64) -> Option<OutcomeProblem> {
    let problem = |reason: String, constant| Some(OutcomeProblem { reason, constant });
    let first = d.y_raw.iter().next().copied()?;
    if d.y_raw.iter().all(|v| *v == first) {
        return problem(format!(
            "the outcome `{}` takes the single value {first} in all {} rows of the estimation sample, so no effect on it can be estimated",
            spec.outcome, d.n
        ), true);
    }
    let mean = d.y.mean();
    let tss: f64 = d.y.iter().map(|v| (v - mean) * (v - mean)).sum();
    let swept_constant = d.y.iter().all(|v| *v == d.y[0]);
    if swept_constant || rss.is_nan() || rss <= EXACT_FIT * tss {
        return problem(format!(
            "the regressors fit the outcome `{}` exactly (residual sum of squares {} of a total {}), so t statistics and tests are not defined",
            spec.outcome,
            crate::format::num(rss),
            crate::format::num(tss)
        ), false);
    }
    None
}

/// Blank a term's test (serialised as null, shown as "n/a"); with `all`, its standard error
/// and interval too, keeping only the estimate.
fn blank_term(t: &mut Term, all: bool) {
    t.statistic = f64::NAN;
    t.p_value = f64::NAN;
    if all {
        t.std_error = f64::NAN;
        t.ci = [f64::NAN, f64::NAN];
    }
}

/// Withhold what an outcome without usable variation cannot support: each term's t and p
/// (a ratio of rounding noise), and each test that involves the outcome (reduced form,
/// endogeneity, over-identification, Anderson–Rubin, the LIML alternative). An exact fit
/// keeps its estimates, standard errors (zero up to rounding, which is the right answer) and
/// fit measures; a constant outcome keeps only the estimates, since its R² is 0/0. The first
/// stages do not involve the outcome and stay.
pub fn withhold(result: &mut SpecResult, constant: bool) {
    result
        .terms
        .values_mut()
        .for_each(|t| blank_term(t, constant));
    if constant {
        result.r_squared = f64::NAN;
        result.within_r_squared = result.within_r_squared.map(|_| f64::NAN);
    }
    result.reduced_form = None;
    result.endogeneity = None;
    result.overidentification = None;
    result.anderson_rubin = None;
    result.lm_clr = None;
    result.liml = None;
}

/// A test statistic within its distribution's support, or a blank (not reported as a
/// number): χ² and F statistics are non-negative, and every statistic is finite.
pub fn in_support(mut t: TestResult) -> TestResult {
    let signed = matches!(
        t.distribution,
        Reference::Normal | Reference::StudentT { .. }
    );
    if !t.statistic.is_finite() || (!signed && t.statistic < 0.0) || !t.p_value.is_finite() {
        t.statistic = f64::NAN;
        t.p_value = f64::NAN;
    }
    t
}

#[cfg(test)]
mod tests {
    use super::largest;

    /// The largest absolute value, a NaN passed over and an infinity kept, whatever the
    /// position (in the blocks of eight and in the tail after them).
    #[test]
    fn largest_absolute_value_in_any_position() {
        for at in 0..20 {
            let mut v: Vec<f64> = (0..20).map(|i| (i as f64 - 9.5) * 0.1).collect();
            v[at] = -7.0;
            assert_eq!(largest(&v), 7.0);
            v[(at + 3) % 20] = f64::NAN;
            assert_eq!(largest(&v), 7.0);
            v[(at + 5) % 20] = f64::NEG_INFINITY;
            assert_eq!(largest(&v), f64::INFINITY);
        }
        assert_eq!(largest(&[]), 0.0);
        assert_eq!(largest(&[f64::NAN]), 0.0);
    }
}
