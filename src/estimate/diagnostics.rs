//! Instrumental-variable diagnostics: first stages, reduced form, endogeneity and
//! overidentification tests.
//!
//! Role: the regressions and statistics reported beside a 2SLS estimate. Notation:
//! y outcome, X = [endog | exog] (k columns, p endogenous), Z = [instruments | exog]
//! (L columns, q = L − |exog| excluded), P_A the orthogonal projection onto the columns of A,
//! M_A = I − P_A. Every projection is applied through a Householder QR (module `qr`).
//! Invariants: the same input validation as [`tsls`](super::tsls); robust statistics use the
//! caller's [`CovSpec`] and refer to F(·, G − 1) when clustered, F(·, n − k) otherwise.

use nalgebra::{DMatrix, DVector};

use super::covariance::{covariance, CovSpec, Leverage};
use super::linear::{
    assemble, hcat, instrument_qr, iv_setup, least_squares, require_observations, tsls_from,
    validate, IvSetup, LeastSquares,
};
use super::qr::PivotedQr;
use super::refine::residual;
use super::wald::wald;
use super::{EstimateError, LinearFit};
use crate::distribution::{Reference, TestStatistic};

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
}

/// Tests of the null that the endogenous regressors are exogenous.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Endogeneity {
    /// Control-function (regression) test with the caller's covariance.
    pub control_function: TestStatistic,
    /// Durbin's statistic, chi²(p).
    pub durbin: TestStatistic,
    /// Wu–Hausman statistic, F(p, n − k − p).
    pub wu_hausman: TestStatistic,
}

/// Tests of the overidentifying restrictions (homoskedastic errors assumed).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Overidentification {
    /// Sargan's n·R², chi²(q − p).
    pub sargan: TestStatistic,
    /// Basmann's statistic, chi²(q − p).
    pub basmann: TestStatistic,
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
fn solve_with(qr: &PivotedQr, x: &DMatrix<f64>, y: &DVector<f64>) -> LeastSquares {
    let coef = qr.solve(x, y);
    let resid = residual(x, y, &coef);
    LeastSquares {
        qr: qr.clone(),
        design: x.clone(),
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
) -> Result<Vec<FirstStage>, EstimateError> {
    let setup = iv_setup(&DVector::zeros(endog.nrows()), exog, endog, instruments)?;
    let excluded: Vec<usize> = (0..instruments.ncols()).collect();
    (0..endog.ncols())
        .map(|j| {
            let yj = endog.column(j).into_owned();
            let ls = solve_with(&setup.zqr, &setup.z, &yj);
            let fit = assemble(&yj, &setup.z, &ls, has_intercept, cov, Leverage::Allowed)?;
            let classical = covariance(
                &ls.qr,
                &ls.design,
                &fit.resid,
                &CovSpec::Classical,
                Leverage::Allowed,
            )?;
            let f = joint_f(&fit, &classical.cov, &excluded, fit.df_resid)?;
            let robust_f = joint_f(&fit, &fit.cov, &excluded, inference_df(&fit))?;
            let partial_r_squared = 1.0 - fit.rss / restricted_rss(&yj, exog)?;
            Ok(FirstStage {
                fit,
                f,
                robust_f,
                partial_r_squared,
            })
        })
        .collect()
}

/// The reduced form: y on [instruments | exog].
///
/// # Formula
/// OLS of y on Z (as [`ols`](super::ols)); coefficients in `[instruments | exog]` order.
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
) -> Result<LinearFit, EstimateError> {
    validate(y, &[("exog", exog), ("instruments", instruments)])?;
    let z = hcat(instruments, exog);
    require_observations(z.nrows(), z.ncols())?;
    let ls = solve_with(&instrument_qr(&z)?, &z, y);
    assemble(y, &z, &ls, has_intercept, cov, Leverage::Allowed)
}

/// First-stage residuals V̂ = M_Z endog (n × p).
///
/// # Errors
/// [`EstimateError::RankDeficient`] naming column k + j of [endog | exog | V̂] when
/// ‖V̂_j‖ ≤ max(n, L)·eps·‖endog_j‖: endog_j then lies in the span of Z and V̂_j is rounding
/// noise, which unit-norm column scaling would otherwise blow up into a spurious regressor.
fn first_stage_residuals(
    setup: &IvSetup,
    endogenous: usize,
) -> Result<DMatrix<f64>, EstimateError> {
    let (n, l) = setup.z.shape();
    let tol = n.max(l) as f64 * f64::EPSILON;
    let mut v = setup.x.columns(0, endogenous).into_owned();
    let dependent: Vec<usize> = (0..endogenous)
        .filter(|&j| {
            let col = v.column(j).into_owned();
            let resid = &col - setup.zqr.project(&col);
            v.set_column(j, &resid);
            resid.norm() <= tol * col.norm()
        })
        .map(|j| setup.x.ncols() + j)
        .collect();
    if dependent.is_empty() {
        Ok(v)
    } else {
        Err(EstimateError::RankDeficient { dependent })
    }
}

/// Tests that the endogenous regressors are in fact exogenous.
///
/// # Formula
/// * Control function (Hausman 1978, Econometrica 46, section 2; the regression form):
///   regress y on [endog | exog | V̂], V̂ = M_Z endog, and test the V̂ coefficients jointly
///   with the caller's covariance: Wald/p, F(p, n − k − p), or F(p, G − 1) clustered.
/// * With e_o the OLS residuals of y on X and e_iv the 2SLS residuals, let
///   δ = e_oᵀ P_[Z, endog] e_o − e_ivᵀ P_Z e_iv (the difference of the two quadratic forms
///   compared by Durbin 1954, Rev. Int. Statist. Inst. 22, and Wu 1973, Econometrica 41).
///   Durbin = δ / (e_oᵀe_o / n), chi²(p). Wu–Hausman = (δ/p) / [(e_oᵀe_o − δ)/(n − k − p)],
///   F(p, n − k − p) (Wu 1973, T₂; Hausman 1978). δ equals the drop in RSS from adding V̂ to
///   the OLS regression, so Wu–Hausman equals the control-function F with classical errors
///   (an identity the reference fixtures confirm to 1e-14, exactly and over-identified).
///
/// # Errors
/// As [`tsls`](super::tsls); [`EstimateError::TooFewObservations`] unless n > k + p;
/// [`EstimateError::RankDeficient`] (indices into [endog | exog | V̂]) when the augmented
/// design is singular, e.g. when an endogenous column lies in the span of Z (V̂ = 0).
pub fn endogeneity(
    y: &DVector<f64>,
    exog: &DMatrix<f64>,
    endog: &DMatrix<f64>,
    instruments: &DMatrix<f64>,
    has_intercept: bool,
    cov: &CovSpec,
) -> Result<Endogeneity, EstimateError> {
    let setup = iv_setup(y, exog, endog, instruments)?;
    let (n, k, p) = (y.len(), setup.x.ncols(), endog.ncols());
    require_observations(n, k + p)?;
    let augmented = hcat(&setup.x, &first_stage_residuals(&setup, p)?);
    let ls = least_squares(y, &augmented)?;
    let cf = assemble(y, &augmented, &ls, has_intercept, cov, Leverage::Allowed)?;
    let tested: Vec<usize> = (k..k + p).collect();
    let control_function = joint_f(&cf, &cf.cov, &tested, inference_df(&cf))?;
    let e_o = least_squares(y, &setup.x)?.resid;
    let e_iv = tsls_from(y, &setup, p, has_intercept, &CovSpec::Classical)?.resid;
    let wide = instrument_qr(&hcat(&setup.z, &endog.clone_owned()))?;
    let delta = wide.project(&e_o).norm_squared() - setup.zqr.project(&e_iv).norm_squared();
    let rss_o = e_o.norm_squared();
    let (pf, df2) = (p as f64, (n - k - p) as f64);
    Ok(Endogeneity {
        control_function,
        durbin: TestStatistic {
            statistic: delta / (rss_o / n as f64),
            reference: Reference::ChiSquare { df: pf },
        },
        wu_hausman: TestStatistic {
            statistic: (delta / pf) / ((rss_o - delta) / df2),
            reference: Reference::F { df1: pf, df2 },
        },
    })
}

/// Overidentification tests; `None` when exactly identified.
///
/// # Formula
/// With e the 2SLS residuals and R² = eᵀP_Z e / eᵀe (uncentered; equal to the centered one
/// when exog holds an intercept, since then e sums to zero):
/// Sargan (1958, Econometrica 26) = n·R², chi²(q − p);
/// Basmann (1960, JASA 55) = (n − L)·eᵀP_Z e / eᵀM_Z e, chi²(q − p).
/// Both assume homoskedastic errors and do not depend on the covariance choice.
///
/// # Errors
/// As [`tsls`](super::tsls).
pub fn overidentification(
    y: &DVector<f64>,
    exog: &DMatrix<f64>,
    endog: &DMatrix<f64>,
    instruments: &DMatrix<f64>,
) -> Result<Option<Overidentification>, EstimateError> {
    let setup = iv_setup(y, exog, endog, instruments)?;
    let over = instruments.ncols() - endog.ncols();
    if over == 0 {
        return Ok(None);
    }
    let e = tsls_from(y, &setup, endog.ncols(), false, &CovSpec::Classical)?.resid;
    let projected = setup.zqr.project(&e);
    let explained = projected.norm_squared();
    let unexplained = (&e - &projected).norm_squared();
    let (n, l) = (y.len() as f64, setup.z.ncols() as f64);
    let reference = Reference::ChiSquare { df: over as f64 };
    Ok(Some(Overidentification {
        sargan: TestStatistic {
            statistic: n * explained / e.norm_squared(),
            reference,
        },
        basmann: TestStatistic {
            statistic: (n - l) * explained / unexplained,
            reference,
        },
    }))
}
