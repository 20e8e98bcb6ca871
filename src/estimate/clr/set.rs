//! Confidence sets from inverting the Kleibergen LM and the CLR tests (homoskedastic, one
//! endogenous regressor): the values β₀ the test does not reject at the given level.
//!
//! # Everything is a function of two 2×2 matrices
//! Write Y = M_W[y − x β_c, x s_c] (β_c, s_c a 2SLS centre and scale, for conditioning only),
//! A = Yᵀ P Y and Ω = Yᵀ M Y (P, M as in the parent module), and b = (1, −t) for
//! β₀ = β_c + s_c t. Then e = Y b, and the part of x uncorrelated with e is Y g up to a
//! factor, with g = adj(Ω) J b, J b = (−b₂, b₁) (the Ω-orthogonal complement of b in the
//! plane; the factor cancels in every ratio). Hence, with d the residual degrees of freedom,
//! * Q_S = d bᵀAb / bᵀΩb, Q_T = d gᵀAg / gᵀΩg, Q_ST² = d² (bᵀAg)² / (bᵀΩb · gᵀΩg),
//! * LM = d (bᵀAg)² / (bᵀΩb · gᵀAg),
//!
//! each homogeneous of degree 0 in b. So the statistics at any β₀ cost O(1) once A and Ω are
//! formed, and their limits as β₀ → ±∞ (both ends alike) are their values at b = (0, 1),
//! evaluated exactly. A unit test checks these forms against [`IvProblem::lm_clr`].
//!
//! # LM set: exact
//! LM(β₀) ≤ c (c the χ²(1) quantile at the confidence level) ⇔ F(b) ≤ 0 with the quartic
//! form F(b) = d (bᵀAg)² − c (bᵀΩb)(gᵀAg) (bᵀΩb > 0, and gᵀAg ≥ 0; where gᵀAg = 0,
//! i.e. Q_T = 0, LM is 0/0 and F = 0 by Cauchy–Schwarz, so such a point counts as inside).
//! F(1, −t) is a polynomial of degree ≤ 4 in t whose coefficients come from products of the
//! three quadratic forms. Its real roots (eigenvalues of the companion matrix, those with
//! imaginary part below 1e-6 of max(modulus, 1) kept as candidates) cut the line into
//! intervals; each is classified by the sign of F at its midpoint (in θ = atan t, so the two
//! end intervals meet at β₀ = ∞, classified by F(0, 1) — the exact limit). Each change of
//! membership is then located by bisection in θ on the sign of F between the two midpoints
//! that bracket it, to adjacent floating-point numbers. A candidate whose two sides have the
//! same membership (a tangency, a double root) is dropped: the set may lose an isolated
//! point, never an interval. If the two end intervals' midpoints disagree with the limit at
//! infinity, the missing outer root is bisected for as well.
//!
//! # CLR set: scan and refine
//! The CLR critical value depends on Q_T(β₀), so there is no closed form. The set
//! {β₀ : p_CLR(β₀) ≥ α} (α = 1 − confidence) is found on the whole line as the numerical AR
//! set is: θ ∈ [−π/2, π/2] on [`CLR_GRID`] + 1 nodes, both ends evaluated at b = (0, 1)
//! (the limit at ±∞, explicit). Each sign change of α − p between nodes is refined by
//! bisection in θ until the bracket stops shrinking (p from the quadrature of the parent
//! module, accurate to about 1e-13, so endpoints are good to about 1e-13/|dp/dβ₀|); at each
//! grid-local extremum of p that does not change sign, golden-section search locates the
//! extremum and, if it crosses α, both boundary points beside it are bisected. Guarantee:
//! as for the numerical AR set, a piece (or gap) narrower than one cell (π/[`CLR_GRID`] in
//! θ) with no grid-visible extremum can be missed. A point where bᵀΩb = 0 (y − xβ₀ fitted
//! exactly) counts as rejected. The scan is screened (module `screen`): a decision that a
//! cheap approximation of p settles by more than 1e-8 is taken from it, the others from the
//! exact p, with the same boundary points as the scan of the exact p alone.

use nalgebra::DMatrix;

use super::clr_p_value;
use super::screen::{self, clr_p_value_screen};
use crate::distribution::Reference;
use crate::estimate::anderson_rubin::{bisect, theta_grid, ConfidenceSet};
use crate::estimate::linear::{require_observations, IvProblem};
use crate::estimate::refine::residual;
use crate::estimate::{Absorbed, EstimateError};
use crate::inference::quantile;
use std::convert::Infallible;

/// Grid cells in θ for the CLR scan.
pub const CLR_GRID: usize = 1024;

/// The LM and CLR confidence sets at one confidence level.
#[derive(Debug, Clone, PartialEq)]
pub struct LmClrSets {
    /// {β₀ : LM(β₀) ≤ χ²(1) quantile}.
    pub lm: ConfidenceSet,
    /// {β₀ : CLR p-value(β₀) ≥ 1 − confidence}.
    pub clr: ConfidenceSet,
}

type M2 = [[f64; 2]; 2];

/// The two 2×2 matrices and the constants the statistics are functions of.
#[derive(Debug, Clone)]
pub(super) struct Forms {
    a: M2,
    omega: M2,
    d: f64,
    l: usize,
    centre: f64,
    scale: f64,
}

/// bᵀ H b.
fn form(h: &M2, b: [f64; 2]) -> f64 {
    h[0][0] * b[0] * b[0] + (h[0][1] + h[1][0]) * b[0] * b[1] + h[1][1] * b[1] * b[1]
}

fn mul(p: &M2, q: &M2) -> M2 {
    let mut out = [[0.0; 2]; 2];
    for (i, row) in out.iter_mut().enumerate() {
        for (j, v) in row.iter_mut().enumerate() {
            *v = p[i][0] * q[0][j] + p[i][1] * q[1][j];
        }
    }
    out
}

fn transpose(p: &M2) -> M2 {
    [[p[0][0], p[1][0]], [p[0][1], p[1][1]]]
}

/// The direction b for θ: β₀ = centre + scale·tan θ; θ = ±π/2 gives the limit b = (0, ∓1).
pub(super) fn direction(theta: f64) -> [f64; 2] {
    if theta.abs() >= std::f64::consts::FRAC_PI_2 {
        [0.0, 1.0]
    } else {
        [theta.cos(), -theta.sin()]
    }
}

impl Forms {
    /// Builds A and Ω for `problem` (one endogenous column, checked by the caller).
    pub(super) fn new(problem: &IvProblem<'_>, absorbed: &Absorbed) -> Result<Self, EstimateError> {
        let z = &problem.setup.z;
        let (n, l) = (problem.y.len(), problem.instruments.ncols());
        require_observations(n, z.ncols() + absorbed.df)?;
        let d = (n - z.ncols() - absorbed.df) as f64;
        let x = problem.endog.column(0).into_owned();
        let mut m_cols = DMatrix::zeros(n, 2);
        let mut p_cols = DMatrix::zeros(n, 2);
        for (j, v) in [problem.y.clone_owned(), x].iter().enumerate() {
            let w = problem.exog_residuals(v)?;
            let m = residual(z, v, &problem.setup.zqr.solve(z, v));
            p_cols.set_column(j, &(&w - &m));
            m_cols.set_column(j, &m);
        }
        let (pa, mo) = (p_cols.tr_mul(&p_cols), m_cols.tr_mul(&m_cols));
        let raw_a = [[pa[(0, 0)], pa[(0, 1)]], [pa[(1, 0)], pa[(1, 1)]]];
        let raw_o = [[mo[(0, 0)], mo[(0, 1)]], [mo[(1, 0)], mo[(1, 1)]]];
        let det = raw_o[0][0] * raw_o[1][1] - raw_o[0][1] * raw_o[1][0];
        if !(raw_o[0][0] > 0.0 && raw_o[1][1] > 0.0 && det > 0.0 && raw_a[1][1] > 0.0) {
            return Err(EstimateError::SingularCovariance { indices: vec![0] });
        }
        let mut centre = raw_a[0][1] / raw_a[1][1];
        if !centre.is_finite() {
            centre = 0.0;
        }
        let t0 = [1.0, -centre];
        let mut scale = (form(&raw_o, t0) / d).sqrt() / raw_a[1][1].sqrt();
        if !(scale > 0.0 && scale.is_finite()) {
            scale = (raw_o[0][0] / raw_o[1][1]).sqrt();
        }
        // Y_new = Y_raw T with T = [[1, 0], [−centre, scale]].
        let t = [[1.0, 0.0], [-centre, scale]];
        let congruent = |h: &M2| mul(&transpose(&t), &mul(h, &t));
        Ok(Forms {
            a: congruent(&raw_a),
            omega: congruent(&raw_o),
            d,
            l,
            centre,
            scale,
        })
    }

    fn beta(&self, theta: f64) -> f64 {
        if theta.abs() >= std::f64::consts::FRAC_PI_2 {
            return theta.signum() * f64::INFINITY;
        }
        self.centre + self.scale * theta.tan()
    }

    /// θ for β₀ (finite).
    #[cfg(test)]
    pub(super) fn theta(&self, beta: f64) -> f64 {
        ((beta - self.centre) / self.scale).atan()
    }

    /// G = adj(Ω) J: g = G b.
    fn g_matrix(&self) -> M2 {
        let o = &self.omega;
        let adj = [[o[1][1], -o[0][1]], [-o[1][0], o[0][0]]];
        mul(&adj, &[[0.0, -1.0], [1.0, 0.0]])
    }

    /// (Q_S, Q_T, Q_ST²) at direction `b`; None where bᵀΩb = 0.
    pub(super) fn statistics(&self, b: [f64; 2]) -> Option<(f64, f64, f64)> {
        let g = self.g_matrix();
        let gb = [
            g[0][0] * b[0] + g[0][1] * b[1],
            g[1][0] * b[0] + g[1][1] * b[1],
        ];
        let sbb = form(&self.omega, b);
        let sgg = form(&self.omega, gb);
        if !(sbb > 0.0 && sgg > 0.0) {
            return None;
        }
        let ab = [
            self.a[0][0] * b[0] + self.a[0][1] * b[1],
            self.a[1][0] * b[0] + self.a[1][1] * b[1],
        ];
        let bag = ab[0] * gb[0] + ab[1] * gb[1];
        let qs = self.d * form(&self.a, b) / sbb;
        let qt = self.d * form(&self.a, gb) / sgg;
        let qst2 = self.d * self.d * bag * bag / (sbb * sgg);
        Some((qs, qt, qst2))
    }

    /// The CLR statistic and Q_T at direction `b`; None where bᵀΩb = 0.
    pub(super) fn clr_stat(&self, b: [f64; 2]) -> Option<(f64, f64)> {
        let (qs, qt, qst2) = self.statistics(b)?;
        let diff = qs - qt;
        let root = (diff * diff + 4.0 * qst2).sqrt();
        let clr = if diff >= 0.0 {
            0.5 * (diff + root)
        } else if root - diff > 0.0 {
            2.0 * qst2 / (root - diff)
        } else {
            0.0
        };
        Some((clr, qt.max(0.0)))
    }

    /// The CLR statistic and its conditional p-value at direction `b` (p = 0 where undefined).
    pub(super) fn clr_at(&self, b: [f64; 2]) -> (f64, f64) {
        let Some((clr, qt)) = self.clr_stat(b) else {
            return (f64::NAN, 0.0);
        };
        let p = clr_p_value(clr, qt, self.l);
        (clr, if p.is_nan() { 0.0 } else { p })
    }

    /// F(b) = d (bᵀAg)² − c (bᵀΩb)(gᵀAg): LM ≤ c ⇔ F ≤ 0.
    fn lm_excess(&self, b: [f64; 2], c: f64) -> f64 {
        if self.l == 1 {
            // One instrument: F = gᵀAg · (d bᵀAb − c bᵀΩb); see `lm_polynomial`.
            return self.d * form(&self.a, b) - c * form(&self.omega, b);
        }
        let (p, q, r) = self.lm_forms();
        let v = form(&p, b);
        self.d * v * v - c * form(&q, b) * form(&r, b)
    }

    /// The quadratic forms (sym(AG), Ω, GᵀAG) whose combination is F.
    fn lm_forms(&self) -> (M2, M2, M2) {
        let g = self.g_matrix();
        let ag = mul(&self.a, &g);
        let r = mul(&transpose(&g), &ag);
        (ag, self.omega, r)
    }

    /// Coefficients (ascending) of F(1, −t). With one instrument A has rank one, so
    /// (bᵀAg)² = (bᵀAb)(gᵀAg) and F = gᵀAg · (d bᵀAb − c bᵀΩb): LM is the AR statistic
    /// (Kleibergen 2002) and the set is the AR set's. The factor gᵀAg ≥ 0 is dropped there:
    /// it only vanishes where Q_T = 0 (inside by convention), and near its double zero the
    /// quartic's sign would be decided by rounding, cutting a spurious gap into the set.
    fn lm_polynomial(&self, c: f64) -> [f64; 5] {
        let coef = |h: &M2| [h[0][0], -(h[0][1] + h[1][0]), h[1][1]];
        if self.l == 1 {
            let (a, w) = (coef(&self.a), coef(&self.omega));
            return [
                self.d * a[0] - c * w[0],
                self.d * a[1] - c * w[1],
                self.d * a[2] - c * w[2],
                0.0,
                0.0,
            ];
        }
        let (p, q, r) = self.lm_forms();
        let (p, q, r) = (coef(&p), coef(&q), coef(&r));
        let mut out = [0.0; 5];
        for i in 0..3 {
            for j in 0..3 {
                out[i + j] += self.d * p[i] * p[j] - c * q[i] * r[j];
            }
        }
        out
    }

    /// The LM set at critical value `c`.
    pub(super) fn lm_set(&self, c: f64) -> ConfidenceSet {
        let half_pi = std::f64::consts::FRAC_PI_2;
        let inside = |theta: f64| self.lm_excess(direction(theta), c) <= 0.0;
        let mut cuts: Vec<f64> = real_roots(&self.lm_polynomial(c))
            .into_iter()
            .map(f64::atan)
            .collect();
        cuts.sort_by(f64::total_cmp);
        cuts.dedup();
        // Interval midpoints in θ; the ends wrap through θ = ±π/2 (β₀ = ∞).
        let mut probes = vec![-half_pi];
        let mut prev = -half_pi;
        for &t in &cuts {
            probes.push(0.5 * (prev + t));
            prev = t;
        }
        probes.push(0.5 * (prev + half_pi));
        probes.push(half_pi);
        // The statistics cannot fail here, so neither can the searches.
        let f = |theta: f64| Ok::<f64, Infallible>(self.lm_excess(direction(theta), c));
        let mut boundaries = Vec::new();
        for w in probes.windows(2) {
            let (lo_in, hi_in) = (inside(w[0]), inside(w[1]));
            if lo_in != hi_in {
                let Ok(t) = bisect(&f, w[0], w[1], lo_in);
                boundaries.push(t);
            }
        }
        assemble(&boundaries, inside(half_pi), |t| self.beta(t))
    }

    /// The CLR set at level `alpha`.
    pub(super) fn clr_set(&self, alpha: f64) -> ConfidenceSet {
        let approx = |theta: f64| {
            let (clr, qt) = self.clr_stat(direction(theta))?;
            clr_p_value_screen(clr, qt, self.l).map(|p| alpha - p)
        };
        scan_set(
            &|theta| alpha - self.clr_at(direction(theta)).1,
            &approx,
            |t| self.beta(t),
        )
    }
}

/// {θ : φ(θ) ≤ 0} as a set in β₀ = `beta`(θ), by the Anderson–Rubin set's scan over
/// [`CLR_GRID`] cells (φ cannot fail here), screened by `approx` (an approximation of φ
/// within `screen::SCREEN_MARGIN`, or None): the same boundaries as the scan of `phi` alone
/// (module `screen`).
pub(super) fn scan_set(
    phi: &dyn Fn(f64) -> f64,
    approx: &dyn Fn(f64) -> Option<f64>,
    beta: impl Fn(f64) -> f64,
) -> ConfidenceSet {
    let thetas = theta_grid(CLR_GRID);
    let (boundaries, inside_at_infinity) = screen::scan(phi, approx, &thetas);
    assemble(&boundaries, inside_at_infinity, beta)
}

/// The scan of `phi` alone, without the screen: the reference the screened scan must equal.
#[cfg(test)]
pub(super) fn scan_exact(phi: &dyn Fn(f64) -> f64) -> (Vec<f64>, bool) {
    let thetas = theta_grid(CLR_GRID);
    let values: Vec<f64> = thetas.iter().map(|&t| phi(t)).collect();
    let f = |t: f64| Ok::<f64, Infallible>(phi(t));
    let Ok(boundaries) = crate::estimate::anderson_rubin::scan_boundaries(&f, &thetas, &values);
    (boundaries, values[0] <= 0.0)
}

/// Pieces in β₀ = `beta`(θ) from sorted boundary points in θ and membership at β₀ = ±∞.
fn assemble(
    boundaries: &[f64],
    inside_at_infinity: bool,
    beta: impl Fn(f64) -> f64,
) -> ConfidenceSet {
    let mut pieces = Vec::new();
    let mut start = inside_at_infinity.then_some(f64::NEG_INFINITY);
    for &t in boundaries {
        match start.take() {
            Some(lo) => pieces.push((lo, beta(t))),
            None => start = Some(beta(t)),
        }
    }
    if let Some(lo) = start {
        pieces.push((lo, f64::INFINITY));
    }
    ConfidenceSet::normalised(pieces)
}

/// Real roots of the polynomial with ascending coefficients `c` (trailing coefficients below
/// 1e-14 of the largest are dropped first): eigenvalues of the companion matrix whose
/// imaginary part is below 1e-6 of max(modulus, 1) (candidates only; the caller classifies).
fn real_roots(c: &[f64]) -> Vec<f64> {
    let big = c.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    if !(big > 0.0 && big.is_finite()) {
        return Vec::new();
    }
    let Some(deg) = (0..c.len()).rev().find(|&k| c[k].abs() > 1e-14 * big) else {
        return Vec::new();
    };
    if deg == 0 {
        return Vec::new();
    }
    let mut companion = DMatrix::zeros(deg, deg);
    for i in 1..deg {
        companion[(i, i - 1)] = 1.0;
    }
    for i in 0..deg {
        companion[(i, deg - 1)] = -c[i] / c[deg];
    }
    companion
        .complex_eigenvalues()
        .iter()
        .filter(|z| z.im.abs() <= 1e-6 * z.norm().max(1.0) && z.re.is_finite())
        .map(|z| z.re)
        .collect()
}

impl IvProblem<'_> {
    /// The Kleibergen LM and CLR confidence sets at `confidence` (homoskedastic; one
    /// endogenous regressor). Method: the module documentation of `clr::set`.
    ///
    /// # Errors
    /// [`EstimateError::DimensionMismatch`] unless there is exactly one endogenous column;
    /// [`EstimateError::NotFinite`] unless 0 < `confidence` < 1;
    /// [`EstimateError::TooFewObservations`] unless n > L + |W| + a;
    /// [`EstimateError::SingularCovariance`] when the residual covariance of (y, x) on
    /// [Z | W] is singular or x has no component along the instruments.
    pub fn lm_clr_sets(
        &self,
        absorbed: &Absorbed,
        confidence: f64,
    ) -> Result<LmClrSets, EstimateError> {
        if self.endog.ncols() != 1 {
            return Err(EstimateError::DimensionMismatch {
                what: "endog columns",
                expected: 1,
                got: self.endog.ncols(),
            });
        }
        if !(confidence > 0.0 && confidence < 1.0) {
            return Err(EstimateError::NotFinite);
        }
        let forms = Forms::new(self, absorbed)?;
        let c = quantile(&Reference::ChiSquare { df: 1.0 }, confidence);
        Ok(LmClrSets {
            lm: forms.lm_set(c),
            clr: forms.clr_set(1.0 - confidence),
        })
    }
}
