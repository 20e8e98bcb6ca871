//! Randomization-inference intervals by test inversion under a constant additive effect.
//!
//! Under the model "every unit's outcome moves by τ when treated", the sharp null τ = τ₀ is
//! tested by [`randomization_statistics`](super::randomization::randomization_statistics)
//! with `null` = τ₀; the interval is the set of τ₀ not rejected at level α by the two-sided
//! test (Fisher-style inversion; Imbens and Rubin 2015, ch. 5). Every candidate τ₀ is
//! tested on the same draws: enumerated draws in the same order, random draws from the same
//! seeded per-draw streams, so the p-value is a deterministic function of τ₀.
//!
//! The draws are fitted once: each keeps the pieces of its fit that are linear in τ₀
//! ([`NullFamily`](super::family::NullFamily)), so a candidate costs O(draws) rather
//! than a pass of every draw over its rows. Under two-way and HAC errors, whose draws refit
//! in full, each candidate is tested by its own pass.
//!
//! Search: from the estimate b̂ (the observed statistic is 0 there, so it is not rejected),
//! step outward b̂ ± s·2ᵏ (s the model standard error, k = 0, 1, …, [`MAX_DOUBLINGS`]) until
//! a candidate is rejected, then bisect between the last candidate not rejected and the
//! first rejected until they are at most [`RELATIVE_TOLERANCE`]·s apart; the endpoint
//! reported is the candidate not rejected. A side with no rejection out to b̂ ± s·2^12 is
//! reported unbounded. A randomization p-value need not be monotone in τ₀, so the result is
//! the interval between the first boundaries met stepping outward from b̂; candidates beyond
//! them are not searched.

use nalgebra::{DMatrix, DVector};

use super::super::covariance::CovSpec;
use super::super::Absorbed;
use super::assignment::AssignmentDesign;
use super::family::{randomization_family, NullFamily};
use super::randomization::{randomization_statistics, RiStatistic};
use super::{summarise, Draws, ResampleError};

/// Outward doublings of the step before a side is called unbounded (b̂ ± 4096 s).
pub const MAX_DOUBLINGS: i32 = 12;

/// Bisection stops when the bracket is at most this times the scale s.
pub const RELATIVE_TOLERANCE: f64 = 1e-7;

/// The set of constant effects a randomization test does not reject.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RandomizationInterval {
    /// Lower end (None: not rejected as far as the search went).
    pub lower: Option<f64>,
    /// Upper end (None: as `lower`).
    pub upper: Option<f64>,
    /// Endpoints are within this of a candidate rejected at α.
    pub tolerance: f64,
    /// Candidate effects tested.
    pub evaluations: usize,
}

/// The problem the interval search is given.
pub struct IntervalProblem<'a> {
    /// Outcome.
    pub y: &'a DVector<f64>,
    /// Regressors (the treatment among them).
    pub x: &'a DMatrix<f64>,
    /// Probability weights (`None` unweighted; `y` and `x` then in the data's units, as
    /// [`OlsColumns::weights`](super::OlsColumns)).
    pub weights: Option<&'a DVector<f64>>,
    /// Column of `x` that is re-drawn.
    pub treatment: usize,
    /// Covariance of the studentized statistic.
    pub cov: &'a CovSpec,
    /// Absorbed fixed effects.
    pub absorbed: &'a Absorbed,
    /// How the assignment is re-drawn.
    pub design: &'a AssignmentDesign,
    /// Statistic.
    pub statistic: RiStatistic,
    /// Draws (common to every candidate).
    pub plan: &'a Draws,
}

impl IntervalProblem<'_> {
    fn columns(&self) -> crate::estimate::OlsColumns<'_> {
        let cols = crate::estimate::OlsColumns::new(self.y, self.x);
        match self.weights {
            Some(w) => cols.weighted(w),
            None => cols,
        }
    }

    /// Every draw fitted once for all candidates (`None` under two-way or HAC errors).
    fn family(&self) -> Result<Option<NullFamily>, ResampleError> {
        randomization_family(
            self.columns(),
            self.treatment,
            self.cov,
            self.absorbed,
            self.design,
            self.statistic,
            self.plan,
        )
    }

    /// The two-sided p-value of the sharp null τ₀ = `null`, from `family` when there is one.
    fn p_value(&self, family: Option<&NullFamily>, null: f64) -> Result<f64, ResampleError> {
        if let Some(f) = family {
            return f.p_value(null);
        }
        let (observed, stats, exact) = randomization_statistics(
            self.columns(),
            crate::estimate::Tested::new(self.treatment, null),
            self.cov,
            self.absorbed,
            self.design,
            self.statistic,
            self.plan,
        )?;
        Ok(summarise(observed, &stats, exact).p_value)
    }
}

/// Inverts the two-sided randomization test at level `alpha` around `estimate` with step
/// scale `scale` (the model standard error); see the module documentation.
///
/// Returns `None` when `estimate` itself is rejected or `scale` is not positive and finite.
///
/// # Errors
/// Those of the randomization test at any candidate.
pub fn randomization_interval(
    problem: &IntervalProblem,
    estimate: f64,
    scale: f64,
    alpha: f64,
) -> Result<Option<RandomizationInterval>, ResampleError> {
    if !(scale.is_finite() && scale > 0.0 && estimate.is_finite()) {
        return Ok(None);
    }
    let family = problem.family()?;
    let p_value = |null: f64| problem.p_value(family.as_ref(), null);
    let mut evaluations = 1;
    if p_value(estimate)? <= alpha {
        return Ok(None);
    }
    let tolerance = RELATIVE_TOLERANCE * scale;
    let mut end = |dir: f64| -> Result<Option<f64>, ResampleError> {
        let mut inside = estimate;
        let mut outside = None;
        for k in 0..=MAX_DOUBLINGS {
            let candidate = estimate + dir * scale * 2f64.powi(k);
            evaluations += 1;
            if p_value(candidate)? <= alpha {
                outside = Some(candidate);
                break;
            }
            inside = candidate;
        }
        let Some(mut outside) = outside else {
            return Ok(None);
        };
        while (outside - inside).abs() > tolerance {
            let mid = 0.5 * (inside + outside);
            if mid == inside || mid == outside {
                break;
            }
            evaluations += 1;
            if p_value(mid)? <= alpha {
                outside = mid;
            } else {
                inside = mid;
            }
        }
        Ok(Some(inside))
    };
    let lower = end(-1.0)?;
    let upper = end(1.0)?;
    Ok(Some(RandomizationInterval {
        lower,
        upper,
        tolerance,
        evaluations,
    }))
}
