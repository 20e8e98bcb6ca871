//! The Anderson–Rubin test for one endogenous regressor and its exactly inverted
//! confidence set.
//!
//! Role: weak-instrument-robust inference on the coefficient β of a single endogenous
//! regressor x in y = x β + W γ + u, with L excluded instruments Z and exogenous columns W
//! (the caller includes any intercept in W).
//!
//! # The test (Anderson and Rubin 1949, Annals of Mathematical Statistics 20)
//! AR(β₀) tests that the coefficients g(β₀) of Z are zero in the regression of y − x β₀ on
//! D = [Z | W]. With e_y, e_x the residuals and π_y, π_x the Z-coefficients of y and x on D,
//! the residuals and Z-coefficients of y − x β are, exactly, u(β) = e_y − β e_x and
//! g(β) = π_y − β π_x. The statistic is AR(β) = g(β)ᵀ V(β)^{-1} g(β) / L, with V(β) the
//! Z-block of the coefficient covariance computed from u(β) under the caller's [`CovSpec`]:
//! * classical: the homoskedastic F, referred to F(L, n − L − |W| − a);
//! * HC0–HC3, one- and two-way clusters: Wald/L referred to F(L, n − L − |W| − a), or to
//!   F(L, G − 1) when clustered (G the cluster count; two-way: the smaller one), the
//!   convention used for every robust test in this codebase.
//!
//! a = `absorbed.df` (fixed effects swept out by the caller) enters every df and every
//! small-sample factor through the covariance estimators.
//!
//! # The confidence set, inverted exactly
//! CS = {β : AR(β) ≤ c}, c the `confidence` quantile of the reference F. It is a union of
//! disjoint intervals, possibly with infinite ends. As β → ±∞, AR(β) tends to the first-stage
//! Wald/L of x on D under the same covariance, so the set is unbounded iff that first-stage
//! statistic is at most c.
//! * Classical (any L): with Y = [y, x], R = M_W Z, A = Yᵀ P_R Y = [π_y π_x]ᵀRᵀR[π_y π_x]
//!   and B = [e_y e_x]ᵀ[e_y e_x], AR(β) ≤ c ⇔ bᵀ(A − κB)b ≤ 0 with b = (1, −β) and
//!   κ = c L / (n − L − |W| − a): a quadratic inequality a₂β² − 2hβ + k₀ ≤ 0.
//! * Robust with L = 1 (not two-way): AR(β) = g(β)²/v(β) with v(β) = v₀ − 2βv₁ + β²v₂
//!   exactly quadratic (every estimator is a quadratic form in the residuals); v₀, v₂ are the
//!   variances from e_y and e_x, and v₁ is recovered by polarisation,
//!   v₁ = [v(−s) − v(s)]/(4s) with s = ‖e_y‖/‖e_x‖ to balance the two scales. Then
//!   AR ≤ c ⇔ (π_x² − c v₂)β² − 2(π_xπ_y − c v₁)β + (π_y² − c v₀) ≤ 0.
//! * The quadratic a₂β² − 2hβ + k₀ ≤ 0 is solved in closed form: Δ = h² − a₂k₀ (evaluated
//!   with fused multiply-adds, Kahan's discriminant), roots q/a₂ and k₀/q with
//!   q = h + sign(h)√Δ (no cancellation). a₂ > 0: an interval, or empty if Δ < 0;
//!   a₂ < 0: two rays, or the whole line if Δ < 0; |a₂| at rounding level (below
//!   16·eps times the magnitude of the terms it is the difference of): a₂ is treated as 0 and
//!   the set is a single ray (or the line, or empty).
//! * Robust with L > 1, and two-way clustering for any L (its eigenvalue clamp makes V(β)
//!   non-polynomial): AR(β) ≤ c ⇔ det(cL·V(β) − g gᵀ) ≥ 0 while V(β) ≻ 0 (matrix
//!   determinant lemma), a polynomial of degree 2L, so there are at most 2L boundary
//!   points. They are found numerically on the whole line: β = β_c + s_c tan θ with β_c,
//!   s_c a 2SLS-type centre and scale, θ ∈ [−π/2, π/2] on a grid of [`GRID`] + 1 nodes (both
//!   ends are β = ∞, evaluated in the homogeneous form u = cos θ·ũ_y − sin θ·ũ_x, which is
//!   exact there). Every sign change of AR − c between adjacent nodes is refined by
//!   bisection in θ to the last bit; at each grid-local extremum that does not change sign
//!   the extremum is located by golden-section search and, if it crosses c, both boundary
//!   points beside it are refined. Guarantee: every boundary point separated from the others
//!   by more than a grid cell (π/[`GRID`] in θ) is found to full precision, as is every pair
//!   straddling a grid-visible extremum; a pair of boundary points within one cell with no
//!   grid-visible extremum (a sliver narrower than the cell) can be missed. Except for
//!   two-way clusters, V is evaluated at each point from its exact quadratic form in
//!   (cos θ, sin θ), built once in one pass over the rows (module `quadratic_meat`), so a
//!   point costs O(k³) whatever n; two-way V is recomputed from the residuals at each point.
//! * Evaluation points where V(β) is singular (u(β) = 0: an exact fit) count as rejected.

use std::sync::Arc;

use nalgebra::{DMatrix, DVector};

use super::covariance::{covariance, CovSpec, Covariance, Leverage};
use super::linear::{require_observations, IvColumns, IvProblem, OnInstruments};
use super::qr::PivotedQr;
use super::quadratic_meat::QuadraticMeat;
use super::refine::residual;
use super::wald::wald;
use super::{Absorbed, EstimateError};
use crate::distribution::{Reference, TestStatistic};
use crate::inference::quantile;

/// Grid cells in θ for the numerical inversion (robust, L > 1, or two-way).
pub const GRID: usize = 2048;

/// A confidence set for a scalar coefficient: a union of closed intervals.
#[derive(Debug, Clone, PartialEq)]
pub struct ConfidenceSet {
    /// Sorted, disjoint intervals (lo, hi) with lo ≤ hi; lo may be −∞ and hi +∞.
    pub pieces: Vec<(f64, f64)>,
}

/// The shape of a [`ConfidenceSet`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SetShape {
    /// No value of β is accepted.
    Empty,
    /// One finite interval.
    Bounded,
    /// (−∞, a] ∪ [b, +∞) with a < b.
    TwoRays,
    /// Every β is accepted.
    WholeLine,
    /// Anything else (a single ray, or several pieces).
    Other,
}

impl ConfidenceSet {
    /// The shape of the set.
    pub fn shape(&self) -> SetShape {
        match self.pieces.as_slice() {
            [] => SetShape::Empty,
            [(lo, hi)] if lo.is_finite() && hi.is_finite() => SetShape::Bounded,
            [(lo, hi)] if *lo == f64::NEG_INFINITY && *hi == f64::INFINITY => SetShape::WholeLine,
            [(lo, _), (_, hi)] if *lo == f64::NEG_INFINITY && *hi == f64::INFINITY => {
                SetShape::TwoRays
            }
            _ => SetShape::Other,
        }
    }

    /// Whether the set is bounded (the empty set counts as bounded).
    pub fn is_bounded(&self) -> bool {
        self.pieces
            .iter()
            .all(|(lo, hi)| lo.is_finite() && hi.is_finite())
    }

    /// Whether β belongs to the set.
    pub fn contains(&self, beta: f64) -> bool {
        self.pieces.iter().any(|&(lo, hi)| lo <= beta && beta <= hi)
    }

    /// Sorts and merges touching or overlapping pieces.
    pub(in crate::estimate) fn normalised(mut pieces: Vec<(f64, f64)>) -> Self {
        pieces.sort_by(|a, b| a.0.total_cmp(&b.0));
        let mut out: Vec<(f64, f64)> = Vec::with_capacity(pieces.len());
        for (lo, hi) in pieces {
            match out.last_mut() {
                Some(last) if lo <= last.1 => last.1 = last.1.max(hi),
                _ => out.push((lo, hi)),
            }
        }
        ConfidenceSet { pieces: out }
    }
}

/// The Anderson–Rubin test of β = β₀ and the confidence set from inverting it.
#[derive(Debug, Clone, PartialEq)]
pub struct AndersonRubin {
    /// AR(β₀) and its reference F distribution.
    pub test: TestStatistic,
    /// {β : AR(β) ≤ critical value}.
    pub set: ConfidenceSet,
    /// The critical value: the `confidence` quantile of the reference F.
    pub critical_value: f64,
}

/// Anderson–Rubin test of β = `beta0` and its `confidence`-level set, for one endogenous
/// regressor (`endog`, n × 1), excluded `instruments` (n × L) and `exog` W (n × |W|).
///
/// # Formula
/// See the module documentation: AR(β) = g(β)ᵀV(β)^{-1}g(β)/L from the regression of
/// y − xβ on [Z | W], referred to F(L, n − L − |W| − a) (F(L, G − 1) when clustered),
/// a = `absorbed.df`; the set is inverted exactly.
///
/// # Errors
/// As [`tsls`](super::tsls) for the inputs (HC2/HC3 are allowed: the regressions are OLS);
/// [`EstimateError::DimensionMismatch`] (`what` = "endog columns") unless `endog` has
/// exactly one column; [`EstimateError::TooFewObservations`] unless n > L + |W| + a;
/// [`EstimateError::NotFinite`] for a non-finite `beta0` or a `confidence` outside (0, 1);
/// [`EstimateError::SingularCovariance`] when V(β₀) is singular.
pub fn anderson_rubin(
    data: IvColumns,
    cov: &CovSpec,
    absorbed: &Absorbed,
    beta0: f64,
    confidence: f64,
) -> Result<AndersonRubin, EstimateError> {
    check_inputs(data.endog, beta0, confidence)?;
    data.problem()?
        .anderson_rubin(cov, absorbed, beta0, confidence)
}

/// One endogenous regressor, a finite null and a confidence level in (0, 1).
fn check_inputs(endog: &DMatrix<f64>, beta0: f64, confidence: f64) -> Result<(), EstimateError> {
    check_one_endogenous(endog)?;
    if !(beta0.is_finite() && confidence > 0.0 && confidence < 1.0) {
        return Err(EstimateError::NotFinite);
    }
    Ok(())
}

/// The AR test and set are defined for one endogenous regressor.
fn check_one_endogenous(endog: &DMatrix<f64>) -> Result<(), EstimateError> {
    if endog.ncols() != 1 {
        return Err(EstimateError::DimensionMismatch {
            what: "endog columns",
            expected: 1,
            got: endog.ncols(),
        });
    }
    Ok(())
}

/// The regressions of y and x on [Z | W] for one covariance choice, computed once and shared
/// by the test at any null, the confidence set and the curve (each gives the same bits as the
/// free function of its name, which builds one of these per call).
pub struct ArProblem<'p> {
    problem: Problem<'p>,
    y: &'p DVector<f64>,
    endog: &'p DMatrix<f64>,
}

impl IvProblem<'_> {
    /// The shared Anderson–Rubin regressions of this problem under `cov`.
    ///
    /// # Errors
    /// As [`anderson_rubin`] for the inputs.
    pub fn anderson_rubin_problem<'p>(
        &'p self,
        cov: &'p CovSpec,
        absorbed: &'p Absorbed,
    ) -> Result<ArProblem<'p>, EstimateError> {
        check_one_endogenous(self.endog)?;
        let exog_qr = if self.exog.ncols() == 0 {
            None
        } else {
            Some(self.exog_qr()?)
        };
        let problem = Problem::new(self, exog_qr, cov, absorbed)?;
        Ok(ArProblem {
            problem,
            y: self.y,
            endog: self.endog,
        })
    }

    /// [`anderson_rubin`] on this problem, sharing its setup.
    ///
    /// # Errors
    /// As [`anderson_rubin`].
    pub fn anderson_rubin(
        &self,
        cov: &CovSpec,
        absorbed: &Absorbed,
        beta0: f64,
        confidence: f64,
    ) -> Result<AndersonRubin, EstimateError> {
        check_inputs(self.endog, beta0, confidence)?;
        self.anderson_rubin_problem(cov, absorbed)?
            .at(beta0, confidence)
    }
}

impl ArProblem<'_> {
    /// The AR test of β = β₀ alone, without the confidence set.
    ///
    /// # Errors
    /// [`EstimateError::NotFinite`] for a non-finite `beta0`;
    /// [`EstimateError::SingularCovariance`] when V(β₀) is singular.
    pub fn test(&self, beta0: f64) -> Result<TestStatistic, EstimateError> {
        if !beta0.is_finite() {
            return Err(EstimateError::NotFinite);
        }
        self.problem.test(self.y, self.endog, beta0)
    }

    /// The test of β = β₀ with the confidence set at `confidence` (as [`anderson_rubin`]).
    ///
    /// # Errors
    /// As [`anderson_rubin`].
    pub fn at(&self, beta0: f64, confidence: f64) -> Result<AndersonRubin, EstimateError> {
        check_inputs(self.endog, beta0, confidence)?;
        let test = self.test(beta0)?;
        let critical_value = quantile(&test.reference, confidence);
        if !critical_value.is_finite() {
            return Err(EstimateError::NotFinite);
        }
        let set = self.problem.confidence_set(critical_value)?;
        Ok(AndersonRubin {
            test,
            set,
            critical_value,
        })
    }

    /// The statistic at each value of `grid` (as [`anderson_rubin_curve`]).
    ///
    /// # Errors
    /// As [`anderson_rubin_curve`].
    pub fn curve(&self, grid: &[f64]) -> Result<Vec<Option<f64>>, EstimateError> {
        if grid.iter().any(|b| !b.is_finite()) {
            return Err(EstimateError::NotFinite);
        }
        let basis = self.problem.basis()?;
        grid.iter()
            .map(|&beta| {
                let ar =
                    self.problem
                        .ar_direction(basis, 1.0, (beta - basis.centre) / basis.scale)?;
                Ok(ar.is_finite().then_some(ar))
            })
            .collect()
    }
}

/// The Anderson–Rubin statistic AR(β) at each value of `grid`, for drawing the statistic
/// against the hypothesised coefficient; `None` where V(β) is singular (an exact fit).
///
/// # Formula
/// As [`anderson_rubin`] at each β, evaluated from the residuals e_y − β e_x and coefficients
/// π_y − β π_x of the regressions of y and x on [Z | W], which are computed once; the
/// covariance is the same quadratic form in the two residual weights that the set inversion
/// uses (recomputed from the residuals for two-way clusters), so one point costs O(k³).
///
/// # Errors
/// As [`anderson_rubin`]; [`EstimateError::NotFinite`] for a non-finite grid value.
pub fn anderson_rubin_curve(
    data: IvColumns,
    cov: &CovSpec,
    absorbed: &Absorbed,
    grid: &[f64],
) -> Result<Vec<Option<f64>>, EstimateError> {
    check_one_endogenous(data.endog)?;
    if grid.iter().any(|b| !b.is_finite()) {
        return Err(EstimateError::NotFinite);
    }
    data.problem()?
        .anderson_rubin_problem(cov, absorbed)?
        .curve(grid)
}

/// The regressions shared by the test and the set.
struct Problem<'a> {
    z: &'a DMatrix<f64>,
    zqr: &'a PivotedQr,
    spec: &'a CovSpec,
    absorbed: &'a Absorbed,
    n: usize,
    l: usize,
    /// Coefficients of y and x on D = [Z | W].
    coef_y: &'a DVector<f64>,
    coef_x: DVector<f64>,
    /// Residuals e_y, e_x (y's kept by the IV problem, x's with the factorisation of Z).
    e_y: &'a DVector<f64>,
    x_fit: Arc<OnInstruments>,
    /// The covariance of y's coefficients on D, for the test at β₀ = 0.
    at_zero: Covariance,
    /// R π_y and R π_x with R = M_W Z (the Z-parts of the fitted values).
    r_y: DVector<f64>,
    r_x: DVector<f64>,
    clusters: Option<usize>,
    /// The search basis, computed on first use (the curve and the confidence set share it).
    basis: std::sync::OnceLock<Basis>,
}

impl<'a> Problem<'a> {
    /// The regressions of `iv`'s outcome and endogenous column on its [Z | W] (factorised
    /// once in `iv`), with the exogenous columns' QR when there are any.
    fn new(
        iv: &'a IvProblem<'_>,
        exog_qr: Option<&PivotedQr>,
        spec: &'a CovSpec,
        absorbed: &'a Absorbed,
    ) -> Result<Self, EstimateError> {
        let (y, exog, instruments) = (iv.y, iv.exog, iv.instruments);
        let (z, zqr) = (&iv.setup.z, &iv.setup.zqr);
        let (n, l) = (y.len(), instruments.ncols());
        require_observations(n, z.ncols() + absorbed.df)?;
        // The fits of y and x on Z and y's covariance are those the reduced form and the
        // first stage use (the same solves, residuals and sandwich), kept where they are.
        let on_y = iv.outcome_on_instruments();
        let (coef_y, e_y) = (&on_y.coef, &on_y.resid);
        let x_fit = iv.endog_on_instruments()?;
        let coef_x = x_fit.coef.clone();
        // R = M_W Z is outcome-free: computed once per sample, kept with Z's factorisation.
        let r: Arc<DMatrix<f64>> = zqr.derived(
            || {
                iv.outcome_free_key("instruments net of the controls")
                    .finish()
            },
            || Ok(Arc::new(partial_out(instruments, exog, exog_qr))),
        )?;
        let r_y = &*r * coef_y.rows(0, l);
        let r_x = &*r * coef_x.rows(0, l);
        let at_zero = iv.outcome_on_instruments_covariance(spec, absorbed)?;
        let clusters = at_zero.clusters;
        Ok(Problem {
            z,
            zqr,
            spec,
            absorbed,
            n,
            l,
            coef_y,
            coef_x,
            e_y,
            x_fit,
            r_y,
            r_x,
            at_zero,
            clusters,
            basis: std::sync::OnceLock::new(),
        })
    }

    /// The residuals e_x of x on D.
    fn e_x(&self) -> &DVector<f64> {
        &self.x_fit.resid
    }

    /// F(L, n − L − |W| − a), or F(L, G − 1) when clustered.
    fn reference(&self) -> Reference {
        let df2 = self
            .clusters
            .map_or(self.n - self.z.ncols() - self.absorbed.df, |g| g - 1);
        Reference::F {
            df1: self.l as f64,
            df2: df2 as f64,
        }
    }

    /// The AR test of β = β₀: the Wald F of the instruments' coefficients in the
    /// regression of y − x β₀ on [Z | W].
    fn test(
        &self,
        y: &DVector<f64>,
        endog: &DMatrix<f64>,
        beta0: f64,
    ) -> Result<TestStatistic, EstimateError> {
        let reference = self.reference();
        let indices: Vec<usize> = (0..self.l).collect();
        // At β₀ = 0, y − x β₀ is y: its regression is the one already solved, with the
        // covariance already computed.
        let statistic = if beta0 == 0.0 {
            wald(self.coef_y, &self.at_zero.cov, &indices)?
        } else {
            let x = endog.column(0).into_owned();
            let shifted = y - &x * beta0;
            let coef = self.zqr.solve(self.z, &shifted);
            let resid = residual(self.z, &shifted, &coef);
            wald(&coef, &self.covariance(&resid)?.cov, &indices)?
        } / self.l as f64;
        Ok(TestStatistic {
            statistic,
            reference,
        })
    }

    fn covariance(&self, resid: &DVector<f64>) -> Result<Covariance, EstimateError> {
        covariance(
            self.zqr,
            self.z,
            resid,
            self.spec,
            Leverage::Allowed,
            self.absorbed,
        )
    }

    /// AR in the homogeneous form: residuals cy·ũ_y − cx·ũ_x and coefficients likewise,
    /// for the (centred, scaled) basis `basis`; +∞ where V is singular.
    fn ar_direction(&self, basis: &Basis, cy: f64, cx: f64) -> Result<f64, EstimateError> {
        let coef = &basis.coef_y * cy - &basis.coef_x * cx;
        let v = match &basis.meat {
            Some(meat) => meat.covariance(cy, cx),
            None => self.covariance(&(&basis.e_y * cy - &basis.e_x * cx))?.cov,
        };
        let indices: Vec<usize> = (0..self.l).collect();
        match wald(&coef, &v, &indices) {
            Ok(w) => Ok(w / self.l as f64),
            Err(EstimateError::SingularCovariance { .. }) => Ok(f64::INFINITY),
            Err(e) => Err(e),
        }
    }
}

/// The centred and scaled residuals and coefficients: β = centre + scale·tan θ.
struct Basis {
    centre: f64,
    scale: f64,
    e_y: DVector<f64>,
    e_x: DVector<f64>,
    coef_y: DVector<f64>,
    coef_x: DVector<f64>,
    /// The covariance as a quadratic form in the two residual weights, when it is one.
    meat: Option<QuadraticMeat>,
}

/// R = M_W Z (Z itself when W has no columns), column by column by least squares.
fn partial_out(z: &DMatrix<f64>, w: &DMatrix<f64>, qr: Option<&PivotedQr>) -> DMatrix<f64> {
    let Some(qr) = qr else {
        return z.clone();
    };
    let mut r = z.clone();
    for j in 0..z.ncols() {
        let col = z.column(j).into_owned();
        let b = qr.solve(w, &col);
        r.set_column(j, &residual(w, &col, &b));
    }
    r
}

#[cfg(test)]
mod curve_tests;
mod set;
#[cfg(test)]
pub(in crate::estimate) use set::scan_boundaries;
pub(in crate::estimate) use set::{bisect, golden, theta_grid};
#[cfg(test)]
mod tests;
