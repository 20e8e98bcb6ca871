//! The Kleibergen LM test and Moreira's conditional likelihood ratio (CLR) test for one
//! endogenous regressor, homoskedastic variant.
//!
//! Role: two more tests of β = β₀ in y = x β + W γ + u (excluded instruments Z, L of them;
//! exogenous columns W, the caller's intercept among them) whose size does not depend on the
//! strength of the instruments. This module is the homoskedastic variant: the error
//! covariance Ω of (u, v) is estimated from residuals of the regression on [Z | W] with no
//! allowance for heteroskedasticity or clustering. The heteroskedasticity- and
//! cluster-robust forms (Kleibergen 2005) are in submodule `robust`, which shares the
//! conditional p-value below.
//!
//! # The statistics (Kleibergen 2002, Econometrica 70; Moreira 2003, Econometrica 71)
//! With e = M_W(y − x β₀), x_w = M_W x, P the projection on M_W Z, M = I − P_[Z|W] and
//! d = n − L − |W| − a (a = `absorbed.df`):
//! * ρ = eᵀMx / eᵀMe and x̃ = x_w − ρ e (the part of x uncorrelated with e under Ω̂);
//! * Q_S = d · eᵀPe / eᵀMe (L times the Anderson–Rubin statistic in chi-square form);
//! * Q_T = d · x̃ᵀPx̃ / x̃ᵀMx̃ (the conditioning statistic: first-stage strength under the
//!   null, independent of Q_S under the null with normal errors);
//! * Q_ST² = d² (eᵀPx̃)² / (eᵀMe · x̃ᵀMx̃).
//!
//! LM = Q_ST² / Q_T, referred to χ²(1). CLR = ½(Q_S − Q_T + √((Q_S − Q_T)² + 4 Q_ST²)),
//! which equals L·AR(β₀) − min_β L·AR(β) (the LIML value); when Q_S < Q_T the sum is
//! evaluated as 2Q_ST² / (√(…) − (Q_S − Q_T)), free of cancellation.
//!
//! # The conditional p-value
//! Given Q_T = q, under the null Q_S ~ χ²(L) and Q_ST²/(Q_T Q_S) ~ Beta(½, (L−1)/2)
//! independently (the squared cosine of the angle between S and T, S ~ N(0, I_L) being
//! spherical). Squaring √(…) ≤ 2m − Q_S + q and using Q_ST² = q Q_S s² gives
//! CLR ≤ m ⇔ Q_S (m + q s²) ≤ m (m + q), i.e. Q_S ≤ (m + q)/(1 + q s²/m). The density of
//! s = √(s²) on [0, 1] is 2(1 − s²)^{(L−3)/2}/B(½, (L−1)/2); writing s = sin φ:
//!
//!   P(CLR > m | Q_T = q) = 2/B(½, (L−1)/2) · ∫₀^{π/2} S_L((m + q)/(1 + q sin²φ / m)) cos^{L−2}φ dφ,
//!
//! S_L the χ²(L) upper tail. The integrand is smooth on the closed interval for every
//! L ≥ 2 (the substitution removes the (1 − s²)^{−1/2} endpoint singularity of the s form),
//! and it is integrated by adaptive Simpson quadrature ([`QUADRATURE_TOLERANCE`] absolute on
//! the integral, at most [`QUADRATURE_DEPTH`] bisections). L = 1: CLR = Q_S and the p-value
//! is S_1(m). The normalising beta function comes from statrs (`ln_beta`).
//!
//! The p-values are exact only under normal errors with known Ω; with Ω̂ they are asymptotic
//! (valid however weak the instruments, Moreira 2003 section 4). Errors that are not
//! homoskedastic invalidate them.

use nalgebra::DVector;

use super::linear::{require_observations, IvProblem};
use super::refine::residual;
use super::{Absorbed, EstimateError};
use crate::distribution::{Reference, TestStatistic};
use crate::inference::{p_value, Direction};

/// Absolute tolerance on the conditional p-value integral.
pub const QUADRATURE_TOLERANCE: f64 = 1e-13;

/// Largest number of interval halvings in the adaptive quadrature.
pub const QUADRATURE_DEPTH: u32 = 40;

/// The conditional likelihood ratio test of β = β₀.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ConditionalLr {
    /// CLR(β₀).
    pub statistic: f64,
    /// The conditioning statistic Q_T.
    pub conditioning: f64,
    /// P(CLR > statistic | Q_T = conditioning) under the null.
    pub p_value: f64,
}

/// Kleibergen's LM test and Moreira's CLR test of the same null.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LmClr {
    /// The null value β₀.
    pub beta0: f64,
    /// Kleibergen's LM statistic, referred to χ²(1).
    pub lm: TestStatistic,
    /// Moreira's conditional likelihood ratio test.
    pub clr: ConditionalLr,
}

impl IvProblem<'_> {
    /// Kleibergen's LM and Moreira's CLR tests of β = `beta0` for one endogenous regressor,
    /// homoskedastic variant.
    ///
    /// # Formula
    /// See the module documentation.
    ///
    /// # Errors
    /// [`EstimateError::DimensionMismatch`] (`what` = "endog columns") unless there is
    /// exactly one endogenous column; [`EstimateError::NotFinite`] for a non-finite `beta0`;
    /// [`EstimateError::TooFewObservations`] unless n > L + |W| + a;
    /// [`EstimateError::SingularCovariance`] when y − xβ₀ or the part of x uncorrelated with
    /// it is fitted exactly by [Z | W], or when x̃ has no component along the instruments
    /// (Q_T = 0 leaves LM undefined).
    pub fn lm_clr(&self, absorbed: &Absorbed, beta0: f64) -> Result<LmClr, EstimateError> {
        if self.endog.ncols() != 1 {
            return Err(EstimateError::DimensionMismatch {
                what: "endog columns",
                expected: 1,
                got: self.endog.ncols(),
            });
        }
        if !beta0.is_finite() {
            return Err(EstimateError::NotFinite);
        }
        let z = &self.setup.z;
        let (n, l) = (self.y.len(), self.instruments.ncols());
        require_observations(n, z.ncols() + absorbed.df)?;
        let d = (n - z.ncols() - absorbed.df) as f64;
        let x = self.endog.column(0).into_owned();
        let e_raw = self.y - &x * beta0;
        let on_d = |v: &DVector<f64>| residual(z, v, &self.setup.zqr.solve(z, v));
        let (e_w, x_w) = (self.exog_residuals(&e_raw)?, self.exog_residuals(&x)?);
        let (m_e, m_x) = (on_d(&e_raw), on_d(&x));
        // P v = M_W v − M_[Z|W] v, as M_[Z|W] M_W = M_[Z|W].
        let (p_e, p_x) = (&e_w - &m_e, &x_w - &m_x);
        let see = m_e.norm_squared();
        let rho = m_e.dot(&m_x) / see;
        let (p_xt, m_xt) = (&p_x - &p_e * rho, &m_x - &m_e * rho);
        let (stt, ptt) = (m_xt.norm_squared(), p_xt.norm_squared());
        if !(see > 0.0 && stt > 0.0 && ptt > 0.0) {
            return Err(EstimateError::SingularCovariance { indices: vec![0] });
        }
        let qs = d * p_e.norm_squared() / see;
        let qt = d * ptt / stt;
        let qst2 = d * d * p_e.dot(&p_xt).powi(2) / (see * stt);
        let lm = qst2 / qt;
        let diff = qs - qt;
        let root = (diff * diff + 4.0 * qst2).sqrt();
        let clr = if diff >= 0.0 {
            0.5 * (diff + root)
        } else {
            2.0 * qst2 / (root - diff)
        };
        if !(lm.is_finite() && clr.is_finite()) {
            return Err(EstimateError::NotFinite);
        }
        Ok(LmClr {
            beta0,
            lm: TestStatistic {
                statistic: lm,
                reference: Reference::ChiSquare { df: 1.0 },
            },
            clr: ConditionalLr {
                statistic: clr,
                conditioning: qt,
                p_value: clr_p_value(clr, qt, l),
            },
        })
    }
}

/// χ²(`df`) upper tail.
fn chi2_upper(x: f64, df: usize) -> f64 {
    p_value(
        x,
        &Reference::ChiSquare { df: df as f64 },
        Direction::TwoSided,
    )
}

/// P(CLR > `m` | Q_T = `q`) under the null with `l` instruments.
///
/// # Formula
/// The integral in the module documentation, by adaptive Simpson quadrature; S_1(m) when
/// `l` = 1; 1 when `m` ≤ 0; NaN for a non-finite or negative input or `l` = 0.
pub fn clr_p_value(m: f64, q: f64, l: usize) -> f64 {
    if !(m.is_finite() && q.is_finite() && q >= 0.0) || m.is_nan() || l == 0 {
        return f64::NAN;
    }
    if m <= 0.0 {
        return 1.0;
    }
    if l == 1 || q == 0.0 {
        // L = 1: CLR = Q_S; q = 0: the bound equals m for every φ (CLR = Q_S again).
        return chi2_upper(m, l);
    }
    let power = (l - 2) as i32;
    let f = |phi: f64| {
        let s = phi.sin();
        chi2_upper((m + q) / (1.0 + q * s * s / m), l) * phi.cos().powi(power)
    };
    quarter_turn_law(&f, l, QUADRATURE_TOLERANCE)
}

/// 2/B(1/2, (L − 1)/2) · ∫₀^{π/2} f(φ) dφ by adaptive Simpson at `tolerance`, clamped to
/// [0, 1]: the conditional law's p-value for the integrand `f` of [`clr_p_value`] (and of the
/// screen's approximation of it).
pub(super) fn quarter_turn_law(f: &dyn Fn(f64) -> f64, l: usize, tolerance: f64) -> f64 {
    let (a, b) = (0.0, std::f64::consts::FRAC_PI_2);
    let panel = Panel {
        a,
        b,
        fa: f(a),
        fm: f(0.5 * (a + b)),
        fb: f(b),
    };
    let integral = simpson(f, panel, panel.estimate(), tolerance, 0);
    let norm = statrs::function::beta::ln_beta(0.5, 0.5 * (l - 1) as f64).exp();
    (2.0 * integral / norm).clamp(0.0, 1.0)
}

/// One Simpson panel: [a, b] with the integrand at its ends and midpoint.
#[derive(Clone, Copy)]
struct Panel {
    a: f64,
    b: f64,
    fa: f64,
    fm: f64,
    fb: f64,
}

impl Panel {
    /// Simpson's rule on the panel.
    fn estimate(&self) -> f64 {
        (self.b - self.a) / 6.0 * (self.fa + 4.0 * self.fm + self.fb)
    }
}

/// Adaptive Simpson on a panel given its one-panel estimate `whole`; accepts when the
/// two-panel estimate differs by at most 15·tol (Richardson-corrected).
fn simpson(f: &dyn Fn(f64) -> f64, p: Panel, whole: f64, tol: f64, depth: u32) -> f64 {
    let mid = 0.5 * (p.a + p.b);
    let (lm, rm) = (0.5 * (p.a + mid), 0.5 * (mid + p.b));
    let left = Panel {
        b: mid,
        fm: f(lm),
        fb: p.fm,
        ..p
    };
    let right = Panel {
        a: mid,
        fa: p.fm,
        fm: f(rm),
        ..p
    };
    let (l, r) = (left.estimate(), right.estimate());
    let delta = l + r - whole;
    if depth >= QUADRATURE_DEPTH || delta.abs() <= 15.0 * tol {
        return l + r + delta / 15.0;
    }
    simpson(f, left, l, 0.5 * tol, depth + 1) + simpson(f, right, r, 0.5 * tol, depth + 1)
}

mod robust;
mod screen;
mod set;
pub use robust::RobustLmClr;
pub use set::{LmClrSets, CLR_GRID};

#[cfg(test)]
mod robust_tests;
#[cfg(test)]
mod screen_tests;
#[cfg(test)]
mod set_tests;
#[cfg(test)]
mod tests;
