//! k-class IV estimators: LIML (Anderson and Rubin 1949, Ann. Math. Statist. 20) and
//! Fuller's modification (Fuller 1977, Econometrica 45), for any number of endogenous
//! regressors.
//!
//! Role: the estimators reported beside 2SLS when instruments may be weak or many.
//! Notation as in `diagnostics`: y outcome, X = [endog | exog] (k columns, p endogenous),
//! Z = [instruments | exog] (L columns, q = L − |exog| excluded), P_A / M_A the projection
//! onto / off the columns of A, a = `absorbed.df`.
//!
//! # The estimator
//! b(κ) solves X'(I − κ M_Z) X b = X'(I − κ M_Z) y (Theil 1961; Nagar 1959), i.e. it is the
//! IV estimator with instruments X_κ = (I − κ M_Z) X = [P_Z endog + (1 − κ) M_Z endog | exog].
//! κ = 0 is OLS, κ = 1 is 2SLS, κ = κ_LIML is LIML, κ = κ_LIML − α/(n − L − a) is
//! Fuller(α) (α = 1 is the usual choice, [`DEFAULT_FULLER_ALPHA`]). The degrees of freedom
//! n − L − a count every column of Z and the absorbed coefficients (fixed effects swept
//! out of every column are instruments too).
//!
//! Solve: with X_κ = Q₁ R (pivoted Householder QR), the normal equations X_κ'X b = X_κ'y are
//! equivalent to the square system (Q₁'X) b = Q₁'y, solved by LU with partial pivoting and
//! two steps of iterative refinement on the residual y − X b (computed in compensated
//! precision). X_κ'X is never formed. With κ = 1, X_κ = P_Z X and the result is 2SLS.
//!
//! # κ_LIML
//! With W = [y | endog] and A = M_exog W (A = W without exog), κ_LIML is the smallest root of
//! det(W'M_exog W − κ W'M_Z W) = 0. Factorise A = Q_A R_A (pivoted QR) and set
//! G = (P_Z Q_A)'(P_Z Q_A), a (p + 1) × (p + 1) symmetric matrix with eigenvalues in [0, 1].
//! Since W'M_Z W = A'M_Z A = R_A'(I − G)R_A and W'M_exog W = R_A'R_A, the roots are
//! κ = 1/(1 − ν) for the eigenvalues ν of G, so κ_LIML = 1 + ν_min/(1 − ν_min) with ν_min
//! the smallest eigenvalue of G (symmetric eigensolver). No inverse of W'M_Z W is formed;
//! ν_min carries an absolute error of a few eps, hence so does κ_LIML − 1. When exactly
//! identified (q = p) G has rank ≤ p < p + 1 and κ_LIML = 1 exactly (set so).
//!
//! # Covariances
//! Write H = X'(I − κ M_Z) X (the k-class "bread"), X̂ = P_Z X (the 2SLS regressors) and u
//! the k-class residuals y − X b. The meat uses the scores X̂ᵢ uᵢ, the rows of the 2SLS
//! regressors — not those of X_κ. Both are consistent (X_κ − X̂ = (1 − κ) M_Z X with
//! κ − 1 = O_p(1/n)); X̂ is the choice linearmodels makes (checked by the fixtures), and it
//! makes every k-class covariance at κ = 1 the 2SLS one.
//! * Classical: s² H^{-1}, s² = u'u/(n − k − a).
//! * HC0: H^{-1} (Σ uᵢ² x̂ᵢ x̂ᵢ') H^{-1}; HC1: HC0 · n/(n − k − a).
//! * Cluster (CR1): H^{-1} (Σ_g s_g s_g') H^{-1} · G/(G − 1) · (n − 1)/(n − k − (a − a_n)),
//!   s_g = Σ_{i∈g} x̂ᵢ uᵢ (a_n = `absorbed.nested_df`).
//! * Two-way (Cameron, Gelbach and Miller 2011, JBES 29): the sum V_A + V_B − V_{A∩B} of
//!   three such CR1 matrices, each with its own G; negative eigenvalues of the sum are
//!   clamped at zero (CGM 2011, section 2.3), as for 2SLS. `clusters` is min(G_A, G_B).
//! * HC2/HC3: refused ([`EstimateError::CovarianceUnavailable`]), as for 2SLS.
//!
//! Computation: with V_2 the 2SLS-form matrix (X̂'X̂)^{-1}[meat](X̂'X̂)^{-1} evaluated at the
//! k-class residuals (module `covariance`) and J = H^{-1}X̂'X̂
//! = (I + (1 − κ)(X̂'X̂)^{-1} X'M_Z X)^{-1} (a k × k solve), the sandwiches are J V_2 J' and
//! the classical matrix is J · s²(X̂'X̂)^{-1}, symmetrised. At κ = 1, J = I exactly.
//!
//! Coefficient order `[endog | exog]`; t statistics refer to t(n − k − a), or t(G − 1)
//! when clustered, as for 2SLS.

use std::sync::Arc;

use nalgebra::{DMatrix, DVector, SymmetricEigen};

use super::covariance::{clamp_negative_eigenvalues, two_way_unclamped, CovSpec, Leverage};
use super::linear::{assemble, require_observations, IvColumns, IvProblem, LeastSquares};
use super::qr::PivotedQr;
use super::refine::residual;
use super::{Absorbed, EstimateError, LinearFit};

/// Fuller's α when none is specified: α = 1, the choice Fuller (1977) shows makes the
/// estimator approximately unbiased to second order.
pub const DEFAULT_FULLER_ALPHA: f64 = 1.0;

/// Estimator name used in [`EstimateError::CovarianceUnavailable`].
const ESTIMATOR: &str = "k-class (LIML/Fuller)";

/// Steps of iterative refinement of the k-class solve.
const REFINE_STEPS: usize = 2;

#[cfg(test)]
#[path = "kclass_tests.rs"]
pub(super) mod tests;

/// Which member of the k-class family to compute.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum KClass {
    /// Limited-information maximum likelihood: κ = κ_LIML.
    Liml,
    /// Fuller's modification: κ = κ_LIML − α/(n − L − a).
    Fuller {
        /// Fuller's constant α ([`DEFAULT_FULLER_ALPHA`] = 1 is the usual choice).
        alpha: f64,
    },
    /// A caller-chosen κ (κ = 1 is 2SLS, κ = 0 is OLS).
    Kappa {
        /// The value of κ.
        kappa: f64,
    },
}

/// A fitted k-class model.
#[derive(Debug, Clone, PartialEq)]
pub struct KClassFit {
    /// Coefficients (`[endog | exog]`), covariance, residuals and fit statistics; `r_squared`
    /// is 1 − u'u/tss and may be negative.
    pub fit: LinearFit,
    /// The κ used.
    pub kappa: f64,
    /// κ_LIML for these data (computed whatever `which` is).
    pub kappa_liml: f64,
}

/// LIML, Fuller(α) or a fixed-κ k-class estimate with the requested covariance.
///
/// # Formula
/// See the module documentation: b(κ) solves X'(I − κM_Z)X b = X'(I − κM_Z)y;
/// κ_LIML = smallest root of det(W'M_exog W − κ W'M_Z W) = 0, W = [y | endog];
/// Fuller: κ = κ_LIML − α/(n − L − a). Covariance H^{-1}[meat]H^{-1} with H = X'(I − κM_Z)X
/// and 2SLS scores x̂ᵢuᵢ (classical: s²H^{-1}).
///
/// # Errors
/// As [`tsls`](super::tsls) (including [`EstimateError::CovarianceUnavailable`] for
/// HC2/HC3); [`EstimateError::NotFinite`] for a non-finite α or κ;
/// [`EstimateError::TooFewObservations`] unless n > L + a and n > k + a;
/// [`EstimateError::RankDeficient`] naming endog_j (index j) when it is orthogonal to the
/// instruments or lies in their span, and naming index k (one past the regressors, standing
/// for the outcome) when y lies in the span of [Z | endog] or of X, where κ_LIML is 0/0;
/// [`EstimateError::SingularCovariance`] (all indices) when H is singular, which happens
/// only for κ far above κ_LIML.
pub fn kclass(
    data: IvColumns,
    has_intercept: bool,
    cov: &CovSpec,
    which: KClass,
    absorbed: &Absorbed,
) -> Result<KClassFit, EstimateError> {
    refuse_leverage(cov)?;
    data.problem()?.kclass(has_intercept, cov, which, absorbed)
}

/// HC2/HC3 need leverages, which a k-class fit does not define.
fn refuse_leverage(cov: &CovSpec) -> Result<(), EstimateError> {
    if matches!(cov, CovSpec::Hc2 | CovSpec::Hc3) {
        let kind = cov.name();
        return Err(EstimateError::CovarianceUnavailable {
            estimator: ESTIMATOR,
            kind,
        });
    }
    Ok(())
}

impl IvProblem<'_> {
    /// [`kclass`] on this problem, sharing its setup.
    ///
    /// # Errors
    /// As [`kclass`].
    pub fn kclass(
        &self,
        has_intercept: bool,
        cov: &CovSpec,
        which: KClass,
        absorbed: &Absorbed,
    ) -> Result<KClassFit, EstimateError> {
        refuse_leverage(cov)?;
        let (y, setup, exog, endog, instruments) =
            (self.y, &self.setup, self.exog, self.endog, self.instruments);
        let (n, k, l, p) = (y.len(), setup.x.ncols(), setup.z.ncols(), endog.ncols());
        require_observations(n, l.max(k) + absorbed.df)?;
        let kappa_liml = liml_kappa(y, exog, endog, &setup.zqr, instruments.ncols())?;
        let kappa = match which {
            KClass::Liml => kappa_liml,
            KClass::Fuller { alpha } => kappa_liml - alpha / (n - l - absorbed.df) as f64,
            KClass::Kappa { kappa } => kappa,
        };
        if !kappa.is_finite() {
            return Err(EstimateError::NotFinite);
        }
        // X̂ = P_Z X and V̂ = M_Z X (exog columns: themselves and exactly zero).
        let xhat = super::linear::projected_regressors(setup, p)?;
        let vhat = &*setup.x - &xhat;
        let xk = if kappa == 1.0 {
            xhat.clone()
        } else {
            &xhat + &vhat * (1.0 - kappa)
        };
        let coef = kclass_solve(y, &setup.x, &xk)?;
        let (design, qr_hat) = super::shared::design_qr(&xhat)?;
        let ls = LeastSquares {
            qr: Arc::clone(&qr_hat),
            design,
            coef,
        };
        let leverage = Leverage::Refused(ESTIMATOR);
        let mut fit = assemble(y, &setup.x, &ls, has_intercept, cov, leverage, absorbed)?;
        let j = bread_ratio(&qr_hat, &ls.design, &vhat, kappa, k)?;
        fit.cov = match cov {
            CovSpec::Classical => symmetric(&j * &fit.cov),
            CovSpec::TwoWay { first, second } => {
                let (v, _) =
                    two_way_unclamped(&qr_hat, &ls.design, &fit.resid, first, second, absorbed)?;
                clamp_negative_eigenvalues(symmetric(&j * v * j.transpose()))
            }
            _ => symmetric(&j * &fit.cov * j.transpose()),
        };
        Ok(KClassFit {
            fit,
            kappa,
            kappa_liml,
        })
    }
}

/// (V + V')/2.
fn symmetric(v: DMatrix<f64>) -> DMatrix<f64> {
    (&v + v.transpose()) * 0.5
}

/// κ_LIML from the eigenvalues of G = (P_Z Q_A)'(P_Z Q_A) (module documentation).
fn liml_kappa(
    y: &DVector<f64>,
    exog: &DMatrix<f64>,
    endog: &DMatrix<f64>,
    zqr: &PivotedQr,
    excluded: usize,
) -> Result<f64, EstimateError> {
    let (n, p) = endog.shape();
    let k = p + exog.ncols();
    let mut w = DMatrix::zeros(n, p + 1);
    w.set_column(0, y);
    w.columns_mut(1, p).copy_from(endog);
    let mut a = w.clone();
    if exog.ncols() > 0 {
        let exog_qr = super::shared::shared_qr(exog)?;
        for j in 0..=p {
            let col = a.column(j).into_owned();
            a.set_column(j, &(&col - exog_qr.project(&col)));
        }
    }
    // y in the span of the exogenous columns (a constant outcome, say): the y rows and
    // columns of both W'M_exog W and W'M_Z W vanish (span exog ⊆ span Z), the pencil's root
    // along y is 0/0, and the others are those of the endogenous columns alone, so the
    // smallest is taken over them (the ratio is the same for every β ≠ 0 along them).
    // The partialled outcome carries rounding of about ε·‖y‖ (a refined projection); a
    // margin of 16√k over that, not the max(n, p + 1)·ε used below for ν, which would take
    // an outcome far from the exogenous columns' span but with a large mean for one in it.
    let tol = n.max(p + 1) as f64 * f64::EPSILON;
    let span_tol = 16.0 * (exog.ncols() as f64).sqrt() * f64::EPSILON;
    if exog.ncols() > 0 && a.column(0).norm() <= span_tol * y.norm() {
        a = a.columns(1, p).into_owned();
    }
    // y in the span of X otherwise: A is singular and the variance ratio is 0/0.
    // Q_A orthonormal to working precision: ν_max is compared with 1 within max(n, p + 1)·ε.
    let qa = PivotedQr::with_householder_vectors(&a)
        .map_err(|_| EstimateError::RankDeficient { dependent: vec![k] })?;
    let q1 = qa.thin_q();
    let mut pq = DMatrix::zeros(n, a.ncols());
    for j in 0..a.ncols() {
        pq.set_column(j, &zqr.project(&q1.column(j).into_owned()));
    }
    let g = pq.transpose() * &pq;
    let eigen = SymmetricEigen::new(symmetric(g));
    let nu_max = eigen.eigenvalues.max();
    if 1.0 - nu_max <= tol {
        // W'M_Z W is singular: some combination of [y | endog] lies in the span of Z.
        return Err(EstimateError::RankDeficient {
            dependent: span_columns(&w, zqr, k, tol),
        });
    }
    if excluded == p {
        return Ok(1.0);
    }
    let nu = eigen.eigenvalues.min().clamp(0.0, nu_max);
    Ok(1.0 + nu / (1.0 - nu))
}

/// Columns of W = [y | endog] lying in the span of Z, as indices into [endog | exog] with
/// y named k; all of them when no single column does (a combination does).
fn span_columns(w: &DMatrix<f64>, zqr: &PivotedQr, k: usize, tol: f64) -> Vec<usize> {
    let index = |j: usize| if j == 0 { k } else { j - 1 };
    let mut named: Vec<usize> = (0..w.ncols())
        .filter(|&j| {
            let col = w.column(j).into_owned();
            (&col - zqr.project(&col)).norm() <= tol * col.norm()
        })
        .map(index)
        .collect();
    if named.is_empty() {
        named = (0..w.ncols()).map(index).collect();
    }
    named.sort_unstable();
    named
}

/// Solves X_κ'X b = X_κ'y as (Q₁'X) b = Q₁'y with X_κ = Q₁R, refined on y − X b.
fn kclass_solve(
    y: &DVector<f64>,
    x: &DMatrix<f64>,
    xk: &DMatrix<f64>,
) -> Result<DVector<f64>, EstimateError> {
    let q1 = PivotedQr::new(xk)?.thin_q();
    let lu = (q1.transpose() * x).lu();
    let singular = || EstimateError::RankDeficient {
        dependent: (0..x.ncols()).collect(),
    };
    let mut b = lu.solve(&(q1.transpose() * y)).ok_or_else(singular)?;
    for _ in 0..REFINE_STEPS {
        let r = residual(x, y, &b);
        b += lu.solve(&(q1.transpose() * r)).ok_or_else(singular)?;
    }
    if b.iter().all(|v| v.is_finite()) {
        Ok(b)
    } else {
        Err(singular())
    }
}

/// J = H^{-1} X̂'X̂ = (I + (1 − κ)(X̂'X̂)^{-1} V̂'V̂)^{-1} with the refined (X̂'X̂)^{-1}
/// ([`PivotedQr::refined_inverse`] of `xhat`, factorised in `qr_hat`).
fn bread_ratio(
    qr_hat: &PivotedQr,
    xhat: &DMatrix<f64>,
    vhat: &DMatrix<f64>,
    kappa: f64,
    k: usize,
) -> Result<DMatrix<f64>, EstimateError> {
    let identity = DMatrix::identity(k, k);
    if kappa == 1.0 {
        return Ok(identity);
    }
    let inverse = qr_hat.refined_inverse(xhat);
    let m = &identity + &inverse * vhat.tr_mul(vhat) * (1.0 - kappa);
    let singular = || EstimateError::SingularCovariance {
        indices: (0..k).collect(),
    };
    let j = m.lu().solve(&identity).ok_or_else(singular)?;
    // H must be positive definite: J = H^{-1}X̂'X̂ then has positive real eigenvalues, and
    // the symmetric H^{-1} = J (X̂'X̂)^{-1} has a Cholesky factor.
    let h_inv = symmetric(&j * &inverse);
    if !j.iter().all(|v| v.is_finite()) || h_inv.cholesky().is_none() {
        return Err(singular());
    }
    Ok(j)
}
