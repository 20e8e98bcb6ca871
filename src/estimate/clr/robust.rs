//! The heteroskedasticity- and cluster-robust Kleibergen K (LM) test and the robust
//! conditional likelihood ratio test for one endogenous regressor, with their confidence
//! sets.
//!
//! # The statistics (Kleibergen 2005, Econometrica 73, "Testing parameters in GMM without
//! assuming that they are identified")
//! The moment conditions of y = x β + W γ + u at β₀ are f(β₀) = Z̃ᵀe with Z̃ = M_W Z and
//! e = M_W(y − x β₀); their Jacobian is −Z̃ᵀx. The paper's K statistic (section 3) uses the
//! covariance V_ff of the moments and the Jacobian estimate made uncorrelated with them,
//! D = q − V_qf V_ff⁻¹ f; its GMM form of the CLR statistic (section 5) replaces Moreira's
//! Q_T by a rank statistic on D. Both are invariant to a non-singular linear map of the
//! moments, so they are computed from the instruments' coefficients in the regressions on
//! D = [Z | W] (Frisch–Waugh: π_e = (Z̃ᵀZ̃)⁻¹Z̃ᵀe, π_x likewise), whose joint covariance the
//! specification's sandwich estimator gives exactly as for any regression:
//! Σ_rs = Cov(π_r, π_s), r, s ∈ {e, x}, from the residuals ê = M_[Z|W](y − xβ₀) and
//! v̂ = M_[Z|W] x (the reduced-form residuals: the moments' summands centred at their
//! fitted means; this is the variant computed). Then
//! * Q_S = π_eᵀ Σ_ee⁻¹ π_e (L times the Wald-form Anderson–Rubin statistic);
//! * d = π_x − Σ_xe Σ_ee⁻¹ π_e (the Jacobian estimate uncorrelated with the moments);
//! * K = (dᵀ Σ_ee⁻¹ π_e)² / (dᵀ Σ_ee⁻¹ d), referred to χ²(1);
//! * rk = dᵀ (Σ_xx − Σ_xe Σ_ee⁻¹ Σ_ex)⁻¹ d (the rank statistic for one regressor: d over
//!   its own covariance given the moments);
//! * CLR = ½(Q_S − rk + √((Q_S − rk)² + 4 K rk)), with the conditional p-value of the
//!   parent module given rk (Moreira's law with Q_T = rk and Q_ST² = K·rk; K ≤ Q_S by
//!   Cauchy–Schwarz in the Σ_ee⁻¹ metric, so the law's angle is defined).
//!
//! Citation note: the paper was not at hand while this was written. The section numbers above
//! (3 for K, 5 for the GMM-CLR) are from memory and no equation numbers are quoted; the
//! formulas are stated in full here instead, and checked against an independent
//! implementation of the same formulas (`tests/reference/clr_robust.py`).
//!
//! With the classical covariance (Σ_rs = ê_rᵀê_s/(n − L − |W| − a)·(DᵀD)⁻¹ restricted to Z)
//! these are exactly Q_S, Q_T, LM and CLR of the homoskedastic parent module, which a
//! unit test checks. Covariances covered: HC0–HC3 and one-way clusters (CR1), each as the
//! quadratic meat of module `quadratic_meat` built once. Two-way clusters (an eigenvalue
//! clamp makes the covariance non-quadratic in the residuals) and HAC are refused with
//! [`EstimateError::CovarianceUnavailable`]. The references are asymptotic (χ²), with
//! clusters as with any other errors; they are valid however weak the instruments
//! (Kleibergen 2005, theorems of sections 3 and 5), but only as the number of independent
//! units (observations or clusters) grows.
//!
//! # Every point of the line from the same blocks
//! The statistics depend on (e, x) only through the plane of (y, x): replacing x by
//! α x + γ e leaves d up to the factor α, and so K, rk and CLR, unchanged. With
//! e = b₁y + b₂x and a second direction c₁y + c₂x not parallel to it, every block is a
//! bilinear combination of the four blocks Σ_rs of (y, x) (r, s ∈ {y, x}), so a point costs
//! O(L³). β₀ = centre + scale·tan θ with b = (cos θ, −centre·cos θ − scale·sin θ) and
//! c = (sin θ, −centre·sin θ + scale·cos θ) (orthogonal in the centred and scaled
//! coordinates); θ = ±π/2 gives the limit β₀ → ±∞ exactly (e ∝ x).
//!
//! # The sets
//! {β₀ : K(β₀) ≤ χ²₁ quantile} and {β₀ : p_CLR(β₀) ≥ 1 − confidence}, both by the scan of
//! the Anderson–Rubin set (anderson_rubin::set::scan_boundaries over theta_grid with
//! [`CLR_GRID`](super::CLR_GRID) cells: bisection at each sign change, golden-section check of each grid-local
//! extremum), with the same guarantee: a piece or gap narrower than one cell with no
//! grid-visible extremum can be missed. A point where a covariance block is singular (an
//! exact fit, d = 0) counts as rejected. The CLR scan is screened as the homoskedastic one
//! (module `screen`: the same boundary points, fewer exact p-values).

use nalgebra::{DMatrix, DVector};

use super::screen::clr_p_value_screen;
use super::{clr_p_value, ConditionalLr, LmClr, LmClrSets};
use crate::distribution::{Reference, TestStatistic};
use crate::estimate::anderson_rubin::ConfidenceSet;
use crate::estimate::covariance::{CovSpec, Leverage};
use crate::estimate::linear::{require_observations, IvProblem};
use crate::estimate::quadratic_meat::quadratic_meat;
use crate::estimate::{Absorbed, EstimateError};
use crate::inference::quantile;

/// φ(θ) for a set scan.
pub(super) type Phi<'a> = Box<dyn Fn(f64) -> f64 + 'a>;
/// An approximation of φ(θ) for the screen, or None.
pub(super) type Approx<'a> = Box<dyn Fn(f64) -> Option<f64> + 'a>;

/// Q_S, rk and K at one point.
#[derive(Debug, Clone, Copy)]
pub(super) struct RobustStats {
    pub(super) qs: f64,
    pub(super) rk: f64,
    pub(super) k: f64,
}

impl RobustStats {
    /// The CLR statistic, free of cancellation when Q_S < rk.
    pub(super) fn clr(&self) -> f64 {
        let diff = self.qs - self.rk;
        let qst2 = self.k * self.rk;
        let root = (diff * diff + 4.0 * qst2).sqrt();
        if diff >= 0.0 {
            0.5 * (diff + root)
        } else if root - diff > 0.0 {
            2.0 * qst2 / (root - diff)
        } else {
            0.0
        }
    }
}

/// The instruments' coefficients of y and x on [Z | W] and their joint covariance, computed
/// once; the robust K and CLR tests at any null and their sets come from these.
#[derive(Debug, Clone)]
pub struct RobustLmClr {
    l: usize,
    /// π_y, π_x.
    pi: [DVector<f64>; 2],
    /// Σ_rs = Cov(π_r, π_s), r, s ∈ {y, x}.
    sigma: [[DMatrix<f64>; 2]; 2],
    centre: f64,
    scale: f64,
}

/// Σ over r, s of u_r w_s H_rs.
fn bilinear(h: &[[DMatrix<f64>; 2]; 2], u: [f64; 2], w: [f64; 2]) -> DMatrix<f64> {
    let mut out = &h[0][0] * (u[0] * w[0]);
    out += &h[0][1] * (u[0] * w[1]);
    out += &h[1][0] * (u[1] * w[0]);
    out += &h[1][1] * (u[1] * w[1]);
    out
}

fn symmetric(m: DMatrix<f64>) -> DMatrix<f64> {
    (&m + m.transpose()) * 0.5
}

impl IvProblem<'_> {
    /// The robust Kleibergen K and CLR tests' shared blocks under `cov` (HC0–HC3, one-way
    /// clusters; classical gives the homoskedastic statistics).
    ///
    /// # Errors
    /// [`EstimateError::DimensionMismatch`] unless there is exactly one endogenous column;
    /// [`EstimateError::CovarianceUnavailable`] for two-way clusters and HAC;
    /// [`EstimateError::TooFewObservations`] unless n > L + |W| + a; the covariance's own
    /// errors (too few clusters, unit leverage).
    pub fn lm_clr_robust(
        &self,
        cov: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<RobustLmClr, EstimateError> {
        if self.endog.ncols() != 1 {
            return Err(EstimateError::DimensionMismatch {
                what: "endog columns",
                expected: 1,
                got: self.endog.ncols(),
            });
        }
        let (z, zqr) = (&self.setup.z, &self.setup.zqr);
        let (n, l) = (self.y.len(), self.instruments.ncols());
        require_observations(n, z.ncols() + absorbed.df)?;
        // The fits of y and x on Z that the reduced form and the first stage use.
        let (on_y, on_x) = (self.outcome_on_instruments(), self.endog_on_instruments()?);
        let (coef_y, e_y) = (&on_y.coef, &on_y.resid);
        let (coef_x, e_x) = (&on_x.coef, &on_x.resid);
        let full = match cov {
            CovSpec::Classical => {
                let tt = zqr.refined_inverse(z);
                let d = (n - z.ncols() - absorbed.df) as f64;
                let s = |a: &DVector<f64>, b: &DVector<f64>| &tt * (a.dot(b) / d);
                let cross = s(e_y, e_x);
                [[s(e_y, e_y), cross.clone()], [cross, s(e_x, e_x)]]
            }
            _ => quadratic_meat(zqr, z, e_y, e_x, cov, Leverage::Allowed, absorbed)?
                .ok_or(EstimateError::CovarianceUnavailable {
                    estimator: "the robust LM and CLR tests",
                    kind: cov.name(),
                })?
                .blocks(),
        };
        let z_block = |m: &DMatrix<f64>| m.view((0, 0), (l, l)).into_owned();
        let sigma = [
            [z_block(&full[0][0]), z_block(&full[0][1])],
            [z_block(&full[1][0]), z_block(&full[1][1])],
        ];
        let pi = [
            coef_y.rows(0, l).into_owned(),
            coef_x.rows(0, l).into_owned(),
        ];
        let mut out = RobustLmClr {
            l,
            pi,
            sigma,
            centre: 0.0,
            scale: 1.0,
        };
        out.place();
        Ok(out)
    }
}

impl RobustLmClr {
    /// The centre (a GMM-type estimate π_xᵀΣ_xx⁻¹π_y / π_xᵀΣ_xx⁻¹π_x) and the scale (its
    /// rough standard error) of the θ parametrisation; fallbacks 0 and 1.
    fn place(&mut self) {
        let Some(chol) = self.sigma[1][1].clone().cholesky() else {
            return;
        };
        let w = chol.solve(&self.pi[1]);
        let (xx, xy) = (self.pi[1].dot(&w), self.pi[0].dot(&w));
        let centre = xy / xx;
        if !centre.is_finite() {
            return;
        }
        self.centre = centre;
        let b = [1.0, -centre];
        let ratio = bilinear(&self.sigma, b, b).trace() / self.sigma[1][1].trace();
        let scale = (ratio / xx).sqrt();
        if scale > 0.0 && scale.is_finite() {
            self.scale = scale;
        }
    }

    /// Q_S, rk and K for e = b₁y + b₂x, second direction c (not parallel to b); None where
    /// a covariance is singular or d = 0.
    pub(super) fn stats(&self, b: [f64; 2], c: [f64; 2]) -> Option<RobustStats> {
        let combine = |w: [f64; 2]| &self.pi[0] * w[0] + &self.pi[1] * w[1];
        let (pb, pc) = (combine(b), combine(c));
        let chol_b = symmetric(bilinear(&self.sigma, b, b)).cholesky()?;
        let s = chol_b.solve(&pb);
        let scb = bilinear(&self.sigma, c, b);
        let d = &pc - &scb * &s;
        let scc = bilinear(&self.sigma, c, c) - &scb * chol_b.solve(&scb.transpose());
        let chol_c = symmetric(scc).cholesky()?;
        let den = d.dot(&chol_b.solve(&d));
        if den.is_nan() || den <= 0.0 {
            return None;
        }
        let out = RobustStats {
            qs: pb.dot(&s),
            rk: d.dot(&chol_c.solve(&d)),
            k: d.dot(&s).powi(2) / den,
        };
        (out.qs.is_finite() && out.rk.is_finite() && out.k.is_finite()).then_some(out)
    }

    /// The directions (b, c) for θ; θ = ±π/2 is β₀ = ±∞.
    fn directions(&self, theta: f64) -> ([f64; 2], [f64; 2]) {
        let (s, co) = if theta.abs() >= std::f64::consts::FRAC_PI_2 {
            (1.0, 0.0)
        } else {
            theta.sin_cos()
        };
        let (m, k) = (self.centre, self.scale);
        ([co, -m * co - k * s], [s, -m * s + k * co])
    }

    fn beta(&self, theta: f64) -> f64 {
        if theta.abs() >= std::f64::consts::FRAC_PI_2 {
            return theta.signum() * f64::INFINITY;
        }
        self.centre + self.scale * theta.tan()
    }

    /// The robust K and CLR tests of β = `beta0`.
    ///
    /// # Errors
    /// [`EstimateError::NotFinite`] for a non-finite `beta0`;
    /// [`EstimateError::SingularCovariance`] where the statistics are undefined (a singular
    /// covariance of the moments or of the Jacobian given them, d = 0).
    pub fn test(&self, beta0: f64) -> Result<LmClr, EstimateError> {
        if !beta0.is_finite() {
            return Err(EstimateError::NotFinite);
        }
        let st = self
            .stats([1.0, -beta0], [0.0, 1.0])
            .ok_or(EstimateError::SingularCovariance { indices: vec![0] })?;
        let clr = st.clr();
        Ok(LmClr {
            beta0,
            lm: TestStatistic {
                statistic: st.k,
                reference: Reference::ChiSquare { df: 1.0 },
            },
            clr: ConditionalLr {
                statistic: clr,
                conditioning: st.rk,
                p_value: clr_p_value(clr, st.rk.max(0.0), self.l),
            },
        })
    }

    /// The K and CLR confidence sets at `confidence` (method: module documentation).
    ///
    /// # Errors
    /// [`EstimateError::NotFinite`] unless 0 < `confidence` < 1.
    pub fn sets(&self, confidence: f64) -> Result<LmClrSets, EstimateError> {
        if !(confidence > 0.0 && confidence < 1.0) {
            return Err(EstimateError::NotFinite);
        }
        let c = quantile(&Reference::ChiSquare { df: 1.0 }, confidence);
        let alpha = 1.0 - confidence;
        let at = |theta: f64| {
            let (b, d) = self.directions(theta);
            self.stats(b, d)
        };
        let lm = self.scan(&|t| at(t).map_or(1.0, |s| s.k - c), &|_| None);
        let (clr_phi, approx) = self.clr_phi(alpha);
        let clr = self.scan(&clr_phi, &approx);
        Ok(LmClrSets { lm, clr })
    }

    /// The CLR set's φ(θ) = α − p_CLR (1 where the statistics are undefined) and its
    /// approximation for the screen (module `screen`).
    pub(super) fn clr_phi(&self, alpha: f64) -> (Phi<'_>, Approx<'_>) {
        let at = move |theta: f64| {
            let (b, d) = self.directions(theta);
            self.stats(b, d)
        };
        let phi = move |t: f64| {
            at(t).map_or(1.0, |s| {
                let m = s.clr();
                let p = clr_p_value(m, s.rk.max(0.0), self.l);
                if p.is_nan() {
                    1.0
                } else {
                    alpha - p
                }
            })
        };
        let approx = move |t: f64| {
            let s = at(t)?;
            clr_p_value_screen(s.clr(), s.rk.max(0.0), self.l).map(|p| alpha - p)
        };
        (Box::new(phi), Box::new(approx))
    }

    /// {θ : φ(θ) ≤ 0} as a set in β₀, by the Anderson–Rubin set's scan (screened by
    /// `approx`, module `screen`).
    fn scan(&self, phi: &dyn Fn(f64) -> f64, approx: &dyn Fn(f64) -> Option<f64>) -> ConfidenceSet {
        super::set::scan_set(phi, approx, |t| self.beta(t))
    }
}
