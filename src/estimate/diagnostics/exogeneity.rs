//! The exogeneity diagnostics of an IV fit: the endogeneity tests (control function, Durbin,
//! Wu–Hausman) and the over-identification tests (Sargan, Basmann, Hansen's J), with the
//! first-stage residuals the control function adds. Notation and invariants as in the parent
//! module.

use std::sync::Arc;

use nalgebra::{Cholesky, DMatrix, DVector};

use super::super::covariance::{
    cluster_sums, scaled_gram, transpose_times, CovSpec, Leverage, Scaled, ROW_BLOCK,
};
use super::super::hac::hac_meat;
use super::super::linear::{
    assemble, hcat, least_squares, least_squares_shared, require_observations, IvProblem, IvSetup,
};
use super::super::qr::QRows;
use super::super::{Absorbed, EstimateError};
use super::{classical_f, inference_df, joint_f};
use crate::distribution::{Reference, TestStatistic};

/// Tests of the null that the endogenous regressors are exogenous.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Endogeneity {
    /// Control-function (regression) test with the caller's covariance.
    pub control_function: TestStatistic,
    /// Durbin's statistic, chi²(p).
    pub durbin: TestStatistic,
    /// Wu–Hausman statistic, F(p, n − k − p − a).
    pub wu_hausman: TestStatistic,
}

/// Tests of the overidentifying restrictions (homoskedastic errors assumed).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Overidentification {
    /// Sargan's n·R², chi²(q − p).
    pub sargan: TestStatistic,
    /// Basmann's statistic, chi²(q − p), with the factor n − L − a.
    pub basmann: TestStatistic,
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
///   with the caller's covariance: Wald/p, F(p, n − k − p − a), or F(p, G − 1) clustered.
/// * With e_o the OLS residuals of y on X and e_iv the 2SLS residuals, let
///   δ = e_oᵀ P_[Z, endog] e_o − e_ivᵀ P_Z e_iv (the difference of the two quadratic forms
///   compared by Durbin 1954, Rev. Int. Statist. Inst. 22, and Wu 1973, Econometrica 41).
///   Durbin = δ / (e_oᵀe_o / n), chi²(p). Wu–Hausman =
///   (δ/p) / [(e_oᵀe_o − δ)/(n − k − p − a)], F(p, n − k − p − a) (Wu 1973, T₂; Hausman
///   1978), a the absorbed coefficients.
/// * Computed from the control-function regression alone: δ equals the drop in RSS from
///   adding V̂ to the OLS regression (P_[Z, endog] = P_Z + P_V̂, and the two forms differ by
///   ‖P_{M_X V̂} y‖²), which is b_Vᵀ[(WᵀW)⁻¹_VV]⁻¹b_V for W = [X | V̂] by Frisch–Waugh
///   (the refined inverse the sandwich already holds), and e_oᵀe_o = RSS_cf + δ. So no
///   OLS fit, 2SLS residuals or projections onto Z are needed, and no large sums are
///   subtracted. Wu–Hausman is the control-function F with classical errors, and is
///   computed as one (`joint_f`), so an exact or rounding-level fit of the augmented
///   regression gives +∞ as that F does, not a ratio of rounding noise. The reference
///   fixtures check both statistics against the quadratic forms as defined (library
///   fixtures at 1e-8; the exact rational fixture).
///
/// # Errors
/// As [`IvProblem::new`] for the inputs; [`EstimateError::TooFewObservations`] unless
/// n > k + p + a; [`EstimateError::RankDeficient`] (indices into [endog | exog | V̂]) when
/// the augmented design is singular, e.g. when an endogenous column lies in the span of Z
/// (V̂ = 0); the covariance's own errors for the control-function statistic.
pub fn endogeneity(
    y: &DVector<f64>,
    exog: &DMatrix<f64>,
    endog: &DMatrix<f64>,
    instruments: &DMatrix<f64>,
    has_intercept: bool,
    cov: &CovSpec,
    absorbed: &Absorbed,
) -> Result<Endogeneity, EstimateError> {
    IvProblem::new(y, exog, endog, instruments)?.endogeneity(has_intercept, cov, absorbed)
}

impl IvProblem<'_> {
    /// [`endogeneity`] on this problem, sharing its setup and the control-function design.
    ///
    /// # Errors
    /// As [`endogeneity`].
    pub fn endogeneity(
        &self,
        has_intercept: bool,
        cov: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<Endogeneity, EstimateError> {
        let (y, setup, endog) = (self.y, &self.setup, self.endog);
        let (n, k, p) = (y.len(), setup.x.ncols(), endog.ncols());
        require_observations(n, (k + p).max(setup.z.ncols()) + absorbed.df)?;
        // [X | v̂] is outcome-free: built once per sample, kept with the instruments'
        // factorisation, and factorised once by the memo without a copy.
        let augmented: Arc<DMatrix<f64>> = setup.zqr.derived(
            || self.outcome_free_key("control function design").finish(),
            || Ok(Arc::new(hcat(&setup.x, &first_stage_residuals(setup, p)?))),
        )?;
        let ls = least_squares_shared(y, &augmented)?;
        let cf = assemble(
            y,
            &augmented,
            &ls,
            has_intercept,
            cov,
            Leverage::Allowed,
            absorbed,
        )?;
        let tested: Vec<usize> = (k..k + p).collect();
        let control_function = joint_f((&cf, &augmented), &cf.cov, &tested, inference_df(&cf))?;
        let delta = rss_drop(&ls.qr.refined_inverse(&augmented), &cf.coef, k)?;
        let rss_o = cf.rss + delta;
        // Wu–Hausman is the control-function F with classical errors, so it is computed as
        // one: the same rule for exact and rounding-level fits (+∞ rather than rounding
        // noise over rounding noise).
        let wu_hausman = classical_f((&cf, &augmented), &ls.qr, &tested, absorbed)?;
        Ok(Endogeneity {
            control_function,
            durbin: TestStatistic {
                statistic: delta / (rss_o / n as f64),
                reference: Reference::ChiSquare { df: p as f64 },
            },
            wu_hausman,
        })
    }
}

/// The drop in RSS when the last `p` columns of a design enter after its first `k`:
/// δ = b_Vᵀ [(WᵀW)⁻¹_VV]⁻¹ b_V from the refined inverse `inverse` of WᵀW and the
/// coefficients `coef` of the full regression (Frisch–Waugh: (WᵀW)⁻¹_VV is the inverse of
/// V̂ᵀM_X V̂ and b_V = (V̂ᵀM_X V̂)⁻¹V̂ᵀM_X y, so δ = ‖P_{M_X V̂} y‖²). A sum of squares
/// in the coefficients, with no difference of two large sums.
///
/// # Errors
/// [`EstimateError::RankDeficient`] naming the block's columns when the block of the
/// inverse has no Cholesky factor (cannot happen for a design that factorised at full rank).
fn rss_drop(inverse: &DMatrix<f64>, coef: &DVector<f64>, k: usize) -> Result<f64, EstimateError> {
    let p = coef.len() - k;
    let block = inverse.view((k, k), (p, p)).into_owned();
    let b = coef.rows(k, p).into_owned();
    let chol = Cholesky::new(block).ok_or(EstimateError::RankDeficient {
        dependent: (k..k + p).collect(),
    })?;
    Ok(b.dot(&chol.solve(&b)))
}

/// Overidentification tests; `None` when exactly identified.
///
/// # Formula
/// With e the 2SLS residuals and R² = eᵀP_Z e / eᵀe (uncentered; equal to the centered one
/// when exog holds an intercept, since then e sums to zero):
/// Sargan (1958, Econometrica 26) = n·R², chi²(q − p);
/// Basmann (1960, JASA 55) = (n − L − a)·eᵀP_Z e / eᵀM_Z e, chi²(q − p), a the absorbed
/// coefficients (with swept inputs, e and P_Z e are those of the regression with explicit
/// dummies, so Sargan needs no change).
/// Both assume homoskedastic errors and do not depend on the covariance choice.
///
/// # Errors
/// As [`tsls`](crate::estimate::tsls).
pub fn overidentification(
    y: &DVector<f64>,
    exog: &DMatrix<f64>,
    endog: &DMatrix<f64>,
    instruments: &DMatrix<f64>,
    absorbed: &Absorbed,
) -> Result<Option<Overidentification>, EstimateError> {
    IvProblem::new(y, exog, endog, instruments)?.overidentification(absorbed)
}

impl IvProblem<'_> {
    /// [`overidentification`] on this problem, sharing its setup and 2SLS residuals.
    ///
    /// # Errors
    /// As [`overidentification`].
    pub fn overidentification(
        &self,
        absorbed: &Absorbed,
    ) -> Result<Option<Overidentification>, EstimateError> {
        let (y, setup, endog, instruments) = (self.y, &self.setup, self.endog, self.instruments);
        require_observations(y.len(), setup.z.ncols().max(setup.x.ncols()) + absorbed.df)?;
        let over = instruments.ncols() - endog.ncols();
        if over == 0 {
            return Ok(None);
        }
        let e = self.tsls_residuals()?;
        let projected = setup.zqr.project(&e);
        let explained = projected.norm_squared();
        let unexplained = (&e - &projected).norm_squared();
        let (n, l) = (y.len() as f64, (setup.z.ncols() + absorbed.df) as f64);
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
}

/// Ω = Σ_c s_c s_cᵀ with s_c the sums of the moment rows qᵢ uᵢ over the groups `ids`
/// (one group per observation when `ids` is `None`).
fn moment_meat(
    q: &QRows,
    u: &DVector<f64>,
    ids: Option<&[usize]>,
) -> Result<DMatrix<f64>, EstimateError> {
    let Some(ids) = ids else {
        return q.summed(|start, q| {
            let u = &u.as_slice()[start..start + q.nrows()];
            Ok(scaled_gram(q, u, Scaled::Both, ROW_BLOCK))
        });
    };
    // The per-group sums of the moment rows, summed in row order as adding the rows would.
    let (sums, g) = cluster_sums(q, u, ids)?;
    Ok((0..g).fold(DMatrix::zeros(q.ncols(), q.ncols()), |acc, c| {
        let s = sums.row(c).transpose();
        acc + &s * s.transpose()
    }))
}

/// Q₁ᵀ B for a matrix B with Q₁'s rows, summed over Q₁'s row blocks.
fn rows_times(q: &QRows, b: &DMatrix<f64>) -> Result<DMatrix<f64>, EstimateError> {
    q.summed(|start, block| {
        let rows = block.nrows();
        if rows == b.nrows() {
            return Ok(transpose_times(block, b));
        }
        let part = b.rows(start, rows).into_owned();
        Ok(transpose_times(block, &part))
    })
}

/// Hansen's (1982, Econometrica 50) J test of the overidentifying restrictions from
/// two-step efficient GMM; `None` when exactly identified.
///
/// # Formula
/// Step 1 is 2SLS, with residuals u. With Z = [instruments | exog] (L columns) and
/// Ω = Σᵢ uᵢ² zᵢ zᵢᵀ (heteroskedasticity-robust), or Ω = Σ_g (Σ_{i∈g} zᵢ uᵢ)(Σ_{i∈g} zᵢ uᵢ)ᵀ
/// for `CovSpec::Cluster`, or the Bartlett-weighted Σᵢ Σⱼ k(|pᵢ − pⱼ|/b) zᵢ uᵢ uⱼ zⱼᵀ for
/// `CovSpec::Hac` (module `hac`), step 2 is b = argmin_β (Z'(y − Xβ))ᵀ Ω^{-1} Z'(y − Xβ) and
/// J = (Z'e)ᵀ Ω^{-1} Z'e at e = y − X b, i.e. n·ḡᵀ S^{-1} ḡ with ḡ = Z'e/n, S = Ω/n; chi²(q − p).
///
/// Conventions: Ω is evaluated at the step-1 (2SLS) residuals, is not centered (the mean of
/// the moment rows is not subtracted) and has no small-sample factor, so J is the same
/// whatever degrees of freedom are absorbed; these are the conventions of linearmodels'
/// IVGMM with its default two steps, `center=False` and `debiased=False`, the oracle of the
/// reference tests. `CovSpec::Classical`, HC0, HC1, HC2 and HC3 all use the HC0 meat above
/// (the homoskedastic counterpart is Sargan's statistic in [`overidentification`]).
/// Fixed effects swept out beforehand need no further adjustment: the moments of the
/// dummies are exactly identified by their coefficients, and concentrating them out leaves
/// the J of the swept moments (a partitioned-GMM identity). `absorbed` only enters the check
/// that n exceeds L + a. Computed in the orthonormal basis Q of span(Z) (J and b are invariant
/// to a nonsingular change of instruments) through the Cholesky factor of Ω, so step 2 is an
/// L × k least-squares problem whose residual sum of squares is J.
///
/// # Errors
/// As [`tsls`](crate::estimate::tsls); [`EstimateError::CovarianceUnavailable`] for two-way clusters;
/// cluster errors as for the covariance; [`EstimateError::SingularMomentCovariance`] when Ω
/// is numerically singular (for example fewer clusters than instruments).
pub fn hansen_j(
    y: &DVector<f64>,
    exog: &DMatrix<f64>,
    endog: &DMatrix<f64>,
    instruments: &DMatrix<f64>,
    cov: &CovSpec,
    absorbed: &Absorbed,
) -> Result<Option<TestStatistic>, EstimateError> {
    IvProblem::new(y, exog, endog, instruments)?.hansen_j(cov, absorbed)
}

impl IvProblem<'_> {
    /// [`hansen_j`] on this problem, sharing its setup and 2SLS residuals.
    ///
    /// # Errors
    /// As [`hansen_j`].
    pub fn hansen_j(
        &self,
        cov: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<Option<TestStatistic>, EstimateError> {
        let (y, setup, endog, instruments) = (self.y, &self.setup, self.endog, self.instruments);
        let (n, l, k) = (y.len(), setup.z.ncols(), setup.x.ncols());
        require_observations(n, l.max(k) + absorbed.df)?;
        let ids = match cov {
            CovSpec::TwoWay { .. } => {
                let kind = cov.name();
                return Err(EstimateError::CovarianceUnavailable {
                    estimator: "hansen j",
                    kind,
                });
            }
            CovSpec::Cluster { ids } => Some(ids.as_slice()),
            _ => None,
        };
        let over = instruments.ncols() - endog.ncols();
        if over == 0 {
            return Ok(None);
        }
        let u = self.tsls_residuals()?;
        let q = setup.zqr.q_rows();
        let omega = match cov {
            CovSpec::Hac {
                positions,
                bandwidth,
            } => {
                let mut scores = Arc::unwrap_or_clone(setup.zqr.thin_q());
                for (i, ui) in u.iter().enumerate() {
                    scores.row_mut(i).scale_mut(*ui);
                }
                hac_meat(&scores, positions, *bandwidth)?
            }
            _ => moment_meat(&q, &u, ids)?,
        };
        let singular = EstimateError::SingularMomentCovariance { moments: l };
        let max_diag = omega.diagonal().max();
        let chol = Cholesky::new(omega).ok_or(singular.clone())?;
        let factor = chol.l();
        let tol = n.max(l) as f64 * f64::EPSILON * max_diag;
        if factor.diagonal().iter().any(|d| d * d <= tol) {
            return Err(singular);
        }
        let whiten = |m: DMatrix<f64>| {
            factor
                .solve_lower_triangular(&m)
                .ok_or(EstimateError::SingularMomentCovariance { moments: l })
        };
        // Q₁ᵀX is outcome-free: computed once per sample and kept with the instruments'
        // factorisation (the same bits for every outcome and covariance).
        let qx: Arc<DMatrix<f64>> = setup.zqr.derived(
            || {
                self.outcome_free_key("instrument basis times regressors")
                    .finish()
            },
            || Ok(Arc::new(rows_times(&q, &setup.x)?)),
        )?;
        let xt = whiten(DMatrix::clone(&qx))?;
        let yt = whiten(rows_times(
            &q,
            &DMatrix::from_column_slice(n, 1, y.as_slice()),
        )?)?;
        let yt = yt.column(0).into_owned();
        let statistic = least_squares(&yt, &xt)?.resid(&yt).norm_squared();
        Ok(Some(TestStatistic {
            statistic,
            reference: Reference::ChiSquare { df: over as f64 },
        }))
    }
}

#[cfg(test)]
mod block_tests {
    use super::*;

    /// Hansen's J over more rows than one block of Q₁ = Z T (the instruments' factorisation
    /// keeps R and Z): the two-step criterion written out with the moment covariance in Z's
    /// own coordinates (J does not depend on the basis of the moments), heteroskedastic and
    /// clustered.
    #[test]
    fn hansen_j_over_row_blocks_is_the_written_out_criterion() {
        let n = 2 * crate::estimate::qr::Q_BLOCK + 301;
        let f = |i: usize, j: usize| ((i * (5 + 2 * j) + j * 3) as f64 * 0.37).sin();
        let exog = DMatrix::from_fn(n, 2, |i, j| if j == 0 { 1.0 } else { f(i, 1) });
        let instruments = DMatrix::from_fn(n, 3, |i, j| f(i, 4 + j) + 0.3 * f(i, 1));
        let endog = DMatrix::from_fn(n, 1, |i, _| {
            instruments[(i, 0)] + 0.5 * instruments[(i, 1)] - 0.2 * instruments[(i, 2)]
                + 0.7 * f(i, 9)
        });
        // The third instrument enters the outcome directly, so J is far from 0.
        let y = DVector::from_fn(n, |i, _| {
            1.5 * endog[(i, 0)]
                + 0.05 * instruments[(i, 2)]
                + f(i, 1)
                + f(i, 9) * (1.0 + f(i, 11).abs())
        });
        let z = hcat(&instruments, &exog);
        let x = hcat(&endog, &exog);
        let ids: Vec<usize> = (0..n).map(|i| (i * 7) % 211).collect();
        for cov in [CovSpec::Hc0, CovSpec::Cluster { ids: ids.clone() }] {
            let got = hansen_j(&y, &exog, &endog, &instruments, &cov, &Absorbed::NONE)
                .expect("hansen j")
                .expect("over-identified")
                .statistic;
            // Step 1: 2SLS residuals; Ω in Z's coordinates; step 2 and J.
            let xhat = &z * (z.transpose() * &z).try_inverse().expect("Z'Z") * z.transpose() * &x;
            let b1 = (xhat.transpose() * &x).try_inverse().expect("bread") * xhat.transpose() * &y;
            let u = &y - &x * b1;
            let mut omega = DMatrix::zeros(5, 5);
            match &cov {
                CovSpec::Cluster { ids } => {
                    let mut sums = DMatrix::zeros(211, 5);
                    for i in 0..n {
                        let mut row = sums.row_mut(ids[i]);
                        row += z.row(i) * u[i];
                    }
                    omega = sums.transpose() * &sums;
                }
                _ => {
                    for i in 0..n {
                        omega += z.row(i).transpose() * z.row(i) * (u[i] * u[i]);
                    }
                }
            }
            let w = omega.try_inverse().expect("Ω");
            let zx = z.transpose() * &x;
            let zy = z.transpose() * &y;
            let b2 =
                (zx.transpose() * &w * &zx).try_inverse().expect("GMM") * zx.transpose() * &w * &zy;
            let g = &zy - &zx * b2;
            let want = (g.transpose() * &w * &g)[(0, 0)];
            assert!(want > 0.1, "{cov:?}: {want}");
            assert!(
                (got - want).abs() <= 1e-9 * want,
                "{cov:?}: {got} vs {want}"
            );
        }
    }
}

#[cfg(test)]
mod endogeneity_tests {
    use super::*;

    /// An outcome that the control-function regression fits to rounding (y = X b + V̂ c with
    /// no other noise; generated data) while 2SLS does not: Wu–Hausman, the classical
    /// control-function F, follows that F's rule for rounding-level fits and is +∞, not a
    /// ratio of rounding noise; a noisy outcome gives a finite value equal to the F.
    #[test]
    fn wu_hausman_follows_the_control_function_rule_on_a_rounding_level_fit() {
        let n = 400;
        let f = |i: usize, j: usize| ((i * (3 + 2 * j) + j) as f64 * 0.61).sin();
        let exog = DMatrix::from_fn(n, 2, |i, j| if j == 0 { 1.0 } else { f(i, 1) });
        let instruments = DMatrix::from_fn(n, 2, |i, j| f(i, 4 + j));
        let endog = DMatrix::from_fn(n, 1, |i, _| {
            instruments[(i, 0)] - 0.5 * instruments[(i, 1)] + 0.8 * f(i, 9)
        });
        let zeros = DVector::zeros(n);
        let iv = IvProblem::new(&zeros, &exog, &endog, &instruments).expect("iv");
        let vhat = first_stage_residuals(&iv.setup, 1).expect("v-hat");
        let exact = DVector::from_fn(n, |i, _| {
            2.0 * endog[(i, 0)] + 1.0 + 0.3 * exog[(i, 1)] + 1.7 * vhat[(i, 0)]
        });
        let noisy = DVector::from_fn(n, |i, _| exact[i] + 0.4 * f(i, 13));
        let test = |y: &DVector<f64>| {
            endogeneity(
                y,
                &exog,
                &endog,
                &instruments,
                true,
                &CovSpec::Classical,
                &Absorbed::NONE,
            )
            .expect("endogeneity")
        };
        let at_rounding = test(&exact);
        assert_eq!(at_rounding.control_function.statistic, f64::INFINITY);
        assert_eq!(at_rounding.wu_hausman.statistic, f64::INFINITY);
        let noisy = test(&noisy);
        let (wh, cf) = (noisy.wu_hausman.statistic, noisy.control_function.statistic);
        assert!(
            wh.is_finite() && (wh - cf).abs() <= 1e-12 * cf,
            "{wh} against {cf}"
        );
    }
}
