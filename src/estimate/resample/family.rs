//! The randomization tests of every sharp null "the effect is τ₀ for every unit" from one
//! fit of each draw, for the interval that inverts them (module `interval`).
//!
//! # Formula
//! The outcome net of the effect, y − τ₀t, is linear in τ₀, and so are, for a draw t*, its
//! partialled outcome ỹ − τ₀t̃, the coefficient g_y − τ₀g_t of t*, and every residual and
//! score sum. The meat of the variance (per-cluster score sums, per-unit scores for HC0–HC3,
//! the residuals for the classical variance) is then ‖s_y − τ₀s_t‖² for the score columns
//! s_y, s_t of the two outcomes ỹ and t̃. A draw keeps g_y, g_t and the 2 × 2 factor of
//! [s_t | s_y] ([`Pencil`]), so its statistic at any τ₀ costs O(1). Under a cluster-randomised
//! design the draws are fitted from cell-level statistics of both outcomes (module `cells`).
//! Two-way and HAC errors refit every draw in full and have no pencil.

use super::super::covariance::CovSpec;
use super::super::{Absorbed, EstimateError};
use super::assignment::{Assigner, AssignmentDesign};
use super::randomization::{permutation_draws, DrawFitter, Fixed, RiStatistic};
use super::{scale_rows, Draws, OlsColumns, ResampleError, Tested};

/// One draw's regression of every outcome ỹ − τ₀t̃ on one re-drawn column, kept as the
/// pieces that are linear in τ₀: the coefficient is g_y − τ₀g_t, and the meat of its variance
/// is ‖s_y − τ₀s_t‖² for the score columns s_y, s_t of the two outcomes (per cluster, per
/// unit, or the residuals themselves for the classical variance). The statistic at any τ₀
/// then costs O(1) instead of a pass over the draw's rows.
/// 48 bytes; a family keeps one per draw (with its `Option`, 56 bytes: 560 MB at the plan
/// limit of 10 million draws, about what the reported test's own statistics and one
/// separate test per candidate held before).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Pencil {
    pub(super) gy: f64,
    pub(super) gt: f64,
    /// The variance's meat and factor (all zero, and unused, when only the coefficient is
    /// asked: the family knows which).
    pub(super) spread: Spread,
}

/// ‖s_y − τ₀s_t‖² kept as (ρ − τ₀·r)² + π², from the QR factor of the two columns
/// [s_t | s_y]: r = ‖s_t‖, ρ = s_t's_y / r, π = ‖s_y − (ρ/r)s_t‖. The orthogonal part π is
/// computed from the explicit residual, not from ‖s_y‖² − ρ², so a meat that is small at
/// some τ₀ keeps its relative accuracy (as when the residuals are formed directly).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Spread {
    r: f64,
    rho: f64,
    pi: f64,
    /// V = factor · meat.
    factor: f64,
}

impl Spread {
    /// No variance kept (the statistic is the coefficient itself).
    pub(super) const NONE: Spread = Spread {
        r: 0.0,
        rho: 0.0,
        pi: 0.0,
        factor: 0.0,
    };

    pub(super) fn new(sy: &[f64], st: &[f64], factor: f64) -> Self {
        let r = st.iter().map(|v| v * v).sum::<f64>().sqrt();
        if r == 0.0 {
            let pi = sy.iter().map(|v| v * v).sum::<f64>().sqrt();
            return Spread {
                r,
                rho: 0.0,
                pi,
                factor,
            };
        }
        let rho = st.iter().zip(sy).map(|(t, y)| t * y).sum::<f64>() / r;
        let ratio = rho / r;
        let pi = st
            .iter()
            .zip(sy)
            .map(|(t, y)| {
                let d = y - ratio * t;
                d * d
            })
            .sum::<f64>()
            .sqrt();
        Spread { r, rho, pi, factor }
    }
}

impl Pencil {
    /// The statistic under the sharp null τ₀ = `null`: the coefficient b − τ₀ of the
    /// observed column (g_y − τ₀g_t), divided by its standard error when `studentized`.
    /// Not necessarily finite (a zero variance).
    pub(crate) fn statistic(&self, null: f64, studentized: bool) -> f64 {
        let b = self.gy - null * self.gt;
        if !studentized {
            return b;
        }
        let s = &self.spread;
        let d = s.rho - null * s.r;
        b / (s.factor * (d * d + s.pi * s.pi)).sqrt()
    }
}

/// The randomization statistics of every sharp null "the effect is τ₀ for every unit" on
/// the same draws: each draw's [`Pencil`], from which the statistic at any τ₀ costs O(1).
///
/// Every statistic equals the one
/// [`randomization_statistics`](super::randomization::randomization_statistics) computes at
/// `null` = τ₀ in exact arithmetic. The rounding differs: the outcome's pieces are summed
/// separately, and the meat comes from the 2 × 2 factor instead of the residuals formed at
/// τ₀. The differences are of the order of rounding (the unit tests agree within 1e-9
/// relative), far inside [`TIE_TOLERANCE`](super::TIE_TOLERANCE); only a draw whose
/// statistic ties the observed one to within rounding could be counted differently.
pub(crate) struct NullFamily {
    observed: Pencil,
    draws: Vec<Option<Pencil>>,
    exact: bool,
    /// The statistic is studentized (`RiStatistic::T`).
    studentized: bool,
}

impl NullFamily {
    /// The observed statistic and every draw's (as [`randomization_statistics`](super::randomization::randomization_statistics)) under the
    /// sharp null τ₀ = `null`.
    ///
    /// # Errors
    /// [`EstimateError::NotFinite`] for a non-finite `null`.
    #[cfg(test)]
    pub(crate) fn statistics(&self, null: f64) -> Result<super::DrawStats, ResampleError> {
        let (observed, stats) = self.at(null)?;
        Ok((observed, stats.collect(), self.exact))
    }

    /// The two-sided p-value under τ₀ = `null`, as [`summarise`](super::summarise) would
    /// give it from [`NullFamily::statistics`], without keeping the statistics.
    ///
    /// # Errors
    /// As [`NullFamily::statistics`].
    pub(crate) fn p_value(&self, null: f64) -> Result<f64, ResampleError> {
        let (observed, stats) = self.at(null)?;
        Ok(super::two_sided_p(observed, stats))
    }

    /// The observed statistic and every draw's, in draw order, under τ₀ = `null`.
    ///
    /// # Errors
    /// [`EstimateError::NotFinite`] for a non-finite `null`.
    fn at(
        &self,
        null: f64,
    ) -> Result<(f64, impl Iterator<Item = Option<f64>> + '_), ResampleError> {
        if !null.is_finite() {
            return Err(EstimateError::NotFinite.into());
        }
        let observed = self.observed.statistic(null, self.studentized);
        let stats = self.draws.iter().enumerate().map(move |(b, p)| {
            let p = p.as_ref()?;
            if b == 0 && !self.exact {
                // Draw 0 is the observed draw itself (as `run_draws` records it).
                return Some(observed);
            }
            Some(p.statistic(null, self.studentized)).filter(|v| v.is_finite())
        });
        Ok((observed, stats))
    }
}

/// The [`NullFamily`] of the randomization test of column `treatment` (arguments as
/// [`randomization_statistics`](super::randomization::randomization_statistics)); `None` under two-way or HAC errors, whose draws refit in
/// full and have no pencil (test each null with [`randomization_statistics`](super::randomization::randomization_statistics) there).
///
/// # Errors
/// Those of [`randomization_statistics`](super::randomization::randomization_statistics).
pub(crate) fn randomization_family(
    cols: OlsColumns,
    treatment: usize,
    cov: &CovSpec,
    absorbed: &Absorbed,
    design: &AssignmentDesign,
    statistic: RiStatistic,
    plan: &Draws,
) -> Result<Option<NullFamily>, ResampleError> {
    let fixed = Fixed::new(cols, Tested::new(treatment, 0.0), cov, absorbed)?;
    if fixed.part.refits() {
        return Ok(None);
    }
    let t = scale_rows(fixed.observed.clone(), fixed.root.as_ref());
    let t_tilde = fixed.part.partial_out(&t.column(0).into_owned());
    let assigner = Assigner::new(design, &fixed.observed)?;
    let fitter = DrawFitter::with_second(&fixed.part, &assigner, fixed.root.as_ref(), &t_tilde);
    let with_cov = statistic == RiStatistic::T;
    let (observed, draws, exact) = permutation_draws(&assigner, plan, |labels, observed| {
        fitter.pencil(labels, observed, with_cov)
    })?;
    Ok(Some(NullFamily {
        observed,
        draws,
        exact,
        studentized: with_cov,
    }))
}
