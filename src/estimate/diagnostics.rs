//! Instrumental-variable diagnostics: first stages, reduced form, endogeneity and
//! overidentification tests.
//!
//! Role: the regressions and statistics reported beside a 2SLS estimate. Notation:
//! y outcome, X = [endog | exog] (k columns, p endogenous), Z = [instruments | exog]
//! (L columns, q = L − |exog| excluded), P_A the orthogonal projection onto the columns of A,
//! M_A = I − P_A. Every projection is applied through a Householder QR (module `qr`).
//! Invariants: the same input validation as [`tsls`](super::tsls); robust statistics use the
//! caller's [`CovSpec`] and refer to F(·, G − 1) when clustered, F(·, n − k − a) otherwise
//! (n − L − a for first stages). Every function takes the [`Absorbed`] fixed effects swept
//! out of all its inputs beforehand (module `absorb`): each residual df and small-sample
//! factor counts their a coefficients; pass [`Absorbed::NONE`] without fixed effects.
//!
//! This file holds the first stages and the reduced form; `diagnostics/exogeneity.rs` the
//! endogeneity and over-identification tests.

use std::sync::Arc;

use nalgebra::{DMatrix, DVector};

use super::covariance::{covariance, CovSpec, Leverage};
use super::linear::{
    assemble, hcat, instrument_design, least_squares, require_observations, validate, IvProblem,
    IvSetup, LeastSquares,
};
use super::qr::PivotedQr;
use super::refine::residual;
use super::wald::wald;
use super::{Absorbed, EstimateError, LinearFit};
use crate::distribution::{Reference, TestStatistic};

mod exogeneity;

pub use exogeneity::{endogeneity, hansen_j, overidentification, Endogeneity, Overidentification};

/// The first-stage regression of one endogenous regressor.
#[derive(Debug, Clone, PartialEq)]
pub struct FirstStage {
    /// endog_j on [instruments | exog] with the caller's covariance.
    pub fit: LinearFit,
    /// Classical F on the excluded instruments, F(q, n − L).
    pub f: TestStatistic,
    /// Wald/q with the caller's covariance: F(q, n − L), or F(q, G − 1) when clustered.
    pub robust_f: TestStatistic,
    /// Partial R² of the excluded instruments: 1 − RSS(endog_j on Z)/RSS(endog_j on exog).
    pub partial_r_squared: f64,
    /// Shea's (1997) partial R² of endog_j (see [`first_stages`]); equals
    /// `partial_r_squared` with one endogenous regressor.
    pub shea_partial_r_squared: f64,
}

/// Whether a fit is exact: rss ≤ (max(n, k)·eps·‖y‖)², i.e. residuals at rounding level.
fn is_exact_fit(fit: &LinearFit) -> bool {
    let scale = fit.n.max(fit.k) as f64 * f64::EPSILON;
    fit.rss <= scale * scale * (fit.rss + fit.fitted.norm_squared())
}

/// Wald/|S| of the coefficients `indices` of `fit` under `cov`, referred to F(|S|, df2).
/// An exact fit whose covariance block is singular reports +∞ (the convention NIST StRD
/// uses for the F statistic of its exact fits Wampler1 and Wampler2).
fn joint_f(
    fit: &LinearFit,
    cov: &DMatrix<f64>,
    indices: &[usize],
    df2: usize,
) -> Result<TestStatistic, EstimateError> {
    let q = indices.len() as f64;
    let statistic = match wald(&fit.coef, cov, indices) {
        Ok(w) => w / q,
        Err(EstimateError::SingularCovariance { .. }) if is_exact_fit(fit) => f64::INFINITY,
        Err(e) => return Err(e),
    };
    let reference = Reference::F {
        df1: q,
        df2: df2 as f64,
    };
    Ok(TestStatistic {
        statistic,
        reference,
    })
}

/// Denominator degrees of freedom for tests with the fit's own covariance.
fn inference_df(fit: &LinearFit) -> usize {
    fit.clusters.map_or(fit.df_resid, |g| g - 1)
}

/// Least squares of `y` on `x` reusing an existing factorisation of `x`.
fn solve_with(qr: &Arc<PivotedQr>, x: &Arc<DMatrix<f64>>, y: &DVector<f64>) -> LeastSquares {
    let coef = qr.solve(x, y);
    let resid = residual(x, y, &coef);
    LeastSquares {
        qr: Arc::clone(qr),
        design: Arc::clone(x),
        coef,
        resid,
    }
}

/// Residual sum of squares of `y` on `x` (‖y‖² when `x` has no columns).
fn restricted_rss(y: &DVector<f64>, x: &DMatrix<f64>) -> Result<f64, EstimateError> {
    if x.ncols() == 0 {
        return Ok(y.norm_squared());
    }
    Ok(least_squares(y, x)?.resid.norm_squared())
}

/// First-stage regressions, one per endogenous column, in the caller's order.
///
/// # Formula
/// fit: endog_j on Z. f = [(RSS_r − RSS_u)/q] / [RSS_u/(n − L)], computed as the Wald form
/// with the classical covariance (identical); robust_f = b_Eᵀ V_E^{-1} b_E / q with V the
/// caller's covariance (E the excluded instruments). Partial R² = 1 − RSS_u/RSS_r with
/// RSS_r from endog_j on exog (Frisch–Waugh–Lovell; Bound, Jaeger and Baker 1995, JASA 90).
/// With absorbed fixed effects the classical F has denominator df n − L − a and every
/// covariance counts a (see [`Absorbed`]).
///
/// Shea's partial R² (Shea 1997, Economics Letters 57): with X̂ = P_Z X, x̃_j the residual
/// of endog_j on the other columns of X and x̂̃_j the residual of x̂_j on the other columns of
/// X̂, it is the squared correlation of x̃_j and x̂̃_j, which equals ‖x̂̃_j‖² / ‖x̃_j‖² =
/// [(X'X)^{-1}]_jj / [(X̂'X̂)^{-1}]_jj (Godfrey 1999, Rev. Econ. Stat. 81). Both residuals
/// are computed by least squares. It is 0 when the other columns of X̂ are collinear (the
/// instruments then leave no variation of their own to x̂_j).
///
/// An exact first stage (e.g. full compliance, endog_j = instrument) has F = +∞.
///
/// # Errors
/// As [`tsls`](super::tsls); HC2/HC3 are available here (the first stage is OLS).
pub fn first_stages(
    exog: &DMatrix<f64>,
    endog: &DMatrix<f64>,
    instruments: &DMatrix<f64>,
    has_intercept: bool,
    cov: &CovSpec,
    absorbed: &Absorbed,
) -> Result<Vec<FirstStage>, EstimateError> {
    let y = DVector::zeros(endog.nrows());
    IvProblem::new(&y, exog, endog, instruments)?.first_stages(has_intercept, cov, absorbed)
}

impl IvProblem<'_> {
    /// [`first_stages`] on this problem, sharing its setup.
    ///
    /// # Errors
    /// As [`first_stages`].
    pub fn first_stages(
        &self,
        has_intercept: bool,
        cov: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<Vec<FirstStage>, EstimateError> {
        let key = || {
            let key = self.outcome_free_key("first stages");
            absorbed
                .keyed(cov.keyed(key.count(usize::from(has_intercept))))
                .finish()
        };
        self.setup.zqr.derived(key, || {
            self.first_stages_computed(has_intercept, cov, absorbed)
        })
    }

    /// [`IvProblem::first_stages`], computed.
    fn first_stages_computed(
        &self,
        has_intercept: bool,
        cov: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<Vec<FirstStage>, EstimateError> {
        let (setup, endog, instruments) = (&self.setup, self.endog, self.instruments);
        require_observations(endog.nrows(), setup.z.ncols() + absorbed.df)?;
        let excluded: Vec<usize> = (0..instruments.ncols()).collect();
        // Shea's partial R² reads only X and Z: kept once for every error type.
        let shea = setup.zqr.derived(
            || self.outcome_free_key("shea").finish(),
            || shea_partial_r_squared(setup, endog.ncols()),
        )?;
        (0..endog.ncols())
            .map(|j| {
                let yj = endog.column(j).into_owned();
                let ls = solve_with(&setup.zqr, &setup.z, &yj);
                let fit = assemble(
                    &yj,
                    &setup.z,
                    &ls,
                    has_intercept,
                    cov,
                    Leverage::Allowed,
                    absorbed,
                )?;
                let classical = covariance(
                    &ls.qr,
                    &ls.design,
                    &fit.resid,
                    &CovSpec::Classical,
                    Leverage::Allowed,
                    absorbed,
                )?;
                let f = joint_f(&fit, &classical.cov, &excluded, fit.df_resid)?;
                let robust_f = joint_f(&fit, &fit.cov, &excluded, inference_df(&fit))?;
                let partial_r_squared = 1.0 - fit.rss / self.exog_residuals(&yj)?.norm_squared();
                Ok(FirstStage {
                    fit,
                    f,
                    robust_f,
                    partial_r_squared,
                    shea_partial_r_squared: shea[j],
                })
            })
            .collect()
    }
}

/// The columns of `m` other than `j`.
fn without_column(m: &DMatrix<f64>, j: usize) -> DMatrix<f64> {
    m.clone().remove_column(j)
}

/// Shea's partial R² for each endogenous column (formula in [`first_stages`]).
fn shea_partial_r_squared(setup: &IvSetup, endogenous: usize) -> Result<Vec<f64>, EstimateError> {
    let (xhat, _) = super::linear::projection(setup, endogenous);
    (0..endogenous)
        .map(|j| {
            let own = restricted_rss(
                &setup.x.column(j).into_owned(),
                &without_column(&setup.x, j),
            )?;
            let fitted = xhat.column(j).into_owned();
            match restricted_rss(&fitted, &without_column(&xhat, j)) {
                Ok(projected) => Ok(projected / own),
                Err(EstimateError::RankDeficient { .. }) => Ok(0.0),
                Err(e) => Err(e),
            }
        })
        .collect()
}

/// The reduced form: y on [instruments | exog].
///
/// # Formula
/// OLS of y on Z (as [`ols`](super::ols), absorbed fixed effects counted likewise);
/// coefficients in `[instruments | exog]` order.
///
/// # Errors
/// As [`ols`](super::ols); collinear instruments are
/// [`EstimateError::InstrumentsRankDeficient`].
pub fn reduced_form(
    y: &DVector<f64>,
    exog: &DMatrix<f64>,
    instruments: &DMatrix<f64>,
    has_intercept: bool,
    cov: &CovSpec,
    absorbed: &Absorbed,
) -> Result<LinearFit, EstimateError> {
    validate(y, &[("exog", exog), ("instruments", instruments)])?;
    let z = hcat(instruments, exog);
    require_observations(z.nrows(), z.ncols() + absorbed.df)?;
    let (z, zqr) = instrument_design(z)?;
    let ls = solve_with(&zqr, &z, y);
    assemble(y, &z, &ls, has_intercept, cov, Leverage::Allowed, absorbed)
}

impl IvProblem<'_> {
    /// [`reduced_form`] on this problem: the same Z and the same factorisation of it.
    ///
    /// # Errors
    /// As [`reduced_form`].
    pub fn reduced_form(
        &self,
        has_intercept: bool,
        cov: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<LinearFit, EstimateError> {
        let (y, z) = (self.y, &self.setup.z);
        require_observations(z.nrows(), z.ncols() + absorbed.df)?;
        let ls = solve_with(&self.setup.zqr, z, y);
        assemble(y, z, &ls, has_intercept, cov, Leverage::Allowed, absorbed)
    }
}
