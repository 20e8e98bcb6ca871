//! Inverting the Anderson–Rubin test: the confidence set {β : AR(β) ≤ c}, in closed form
//! where AR(β) is a ratio of quadratics in β (classical; robust with one instrument) and on a
//! grid in θ with bisection and golden-section refinement otherwise (the method and its
//! guarantee are in the parent module's documentation).

use nalgebra::DVector;

use super::{Basis, ConfidenceSet, Problem, GRID};
use crate::estimate::covariance::{CovSpec, Leverage};
use crate::estimate::quadratic_meat::quadratic_meat;
use crate::estimate::EstimateError;

impl Problem<'_> {
    pub(super) fn confidence_set(&self, c: f64) -> Result<ConfidenceSet, EstimateError> {
        match (self.spec, self.l) {
            (CovSpec::Classical, _) => Ok(self.classical_set(c)),
            (CovSpec::TwoWay { .. }, _) => self.numerical_set(c),
            (_, 1) => self.robust_scalar_set(c),
            _ => self.numerical_set(c),
        }
    }

    /// Homoskedastic: bᵀ(A − κB)b ≤ 0, b = (1, −β).
    fn classical_set(&self, c: f64) -> ConfidenceSet {
        let df2 = (self.n - self.z.ncols() - self.absorbed.df) as f64;
        let kappa = c * self.l as f64 / df2;
        let (a_yy, a_yx, a_xx) = (
            self.r_y.norm_squared(),
            self.r_y.dot(&self.r_x),
            self.r_x.norm_squared(),
        );
        let (b_yy, b_yx, b_xx) = (
            self.e_y.norm_squared(),
            self.e_y.dot(self.e_x()),
            self.e_x().norm_squared(),
        );
        let a2 = a_xx - kappa * b_xx;
        let scale = a_xx + kappa * b_xx;
        quadratic_set(a2, a_yx - kappa * b_yx, a_yy - kappa * b_yy, scale)
    }

    /// Robust, L = 1: g² − c v ≤ 0 with v quadratic, v₁ by polarisation.
    fn robust_scalar_set(&self, c: f64) -> Result<ConfidenceSet, EstimateError> {
        let var = |r: &DVector<f64>| -> Result<f64, EstimateError> {
            Ok(self.covariance(r)?.cov[(0, 0)])
        };
        let (ny, nx) = (self.e_y.norm(), self.e_x().norm());
        let s = if nx > 0.0 && ny > 0.0 { ny / nx } else { 1.0 };
        let v0 = var(self.e_y)?;
        let v2 = var(self.e_x())?;
        let plus = var(&(self.e_y + self.e_x() * s))?;
        let minus = var(&(self.e_y - self.e_x() * s))?;
        let v1 = (plus - minus) / (4.0 * s);
        let (py, px) = (self.coef_y[0], self.coef_x[0]);
        let scale = px * px + c * v2;
        Ok(quadratic_set(
            px * px - c * v2,
            px * py - c * v1,
            py * py - c * v0,
            scale,
        ))
    }

    /// The 2SLS-type centre and scale for the numerical search, computed once per problem.
    pub(super) fn basis(&self) -> Result<&Basis, EstimateError> {
        if let Some(basis) = self.basis.get() {
            return Ok(basis);
        }
        let basis = self.new_basis()?;
        Ok(self.basis.get_or_init(|| basis))
    }

    fn new_basis(&self) -> Result<Basis, EstimateError> {
        let rxx = self.r_x.norm_squared();
        let centre = self.r_x.dot(&self.r_y) / rxx;
        let (centre, scale) = if rxx > 0.0 && centre.is_finite() {
            let u = self.e_y - self.e_x() * centre;
            let df = (self.n - self.z.ncols() - self.absorbed.df).max(1) as f64;
            (centre, u.norm() / (df.sqrt() * rxx.sqrt()))
        } else {
            (0.0, 0.0)
        };
        let scale = if scale > 0.0 && scale.is_finite() {
            scale
        } else {
            let (ny, nx) = (self.e_y.norm(), self.e_x().norm());
            if nx > 0.0 && ny > 0.0 {
                ny / nx
            } else {
                1.0
            }
        };
        let e_y = self.e_y - self.e_x() * centre;
        let e_x = self.e_x() * scale;
        let meat = quadratic_meat(
            self.zqr,
            self.z,
            &e_y,
            &e_x,
            self.spec,
            Leverage::Allowed,
            self.absorbed,
        )?;
        Ok(Basis {
            centre,
            scale,
            e_y,
            e_x,
            coef_y: self.coef_y - &self.coef_x * centre,
            coef_x: &self.coef_x * scale,
            meat,
        })
    }

    /// Grid in θ, bisection of sign changes, golden-section checks of extrema.
    fn numerical_set(&self, c: f64) -> Result<ConfidenceSet, EstimateError> {
        let basis = self.basis()?;
        let half_pi = std::f64::consts::FRAC_PI_2;
        let phi = |theta: f64| -> Result<f64, EstimateError> {
            let (cy, cx) = if theta.abs() >= half_pi {
                (0.0, 1.0)
            } else {
                (theta.cos(), theta.sin())
            };
            Ok(self.ar_direction(basis, cy, cx)? - c)
        };
        let thetas = theta_grid(GRID);
        let values = thetas
            .iter()
            .map(|&t| phi(t))
            .collect::<Result<Vec<f64>, _>>()?;
        let roots = scan_boundaries(&phi, &thetas, &values)?;
        let to_beta = |t: f64| basis.centre + basis.scale * t.tan();
        let inside_at_infinity = values[0] <= 0.0;
        let mut pieces = Vec::new();
        let mut start = if inside_at_infinity {
            Some(f64::NEG_INFINITY)
        } else {
            None
        };
        for &t in &roots {
            match start {
                Some(lo) => {
                    pieces.push((lo, to_beta(t)));
                    start = None;
                }
                None => start = Some(to_beta(t)),
            }
        }
        if let Some(lo) = start {
            pieces.push((lo, f64::INFINITY));
        }
        Ok(ConfidenceSet::normalised(pieces))
    }
}

/// b² − a·c evaluated with fused multiply-adds (Kahan's discriminant).
fn discriminant(b: f64, a: f64, c: f64) -> f64 {
    let p = a * c;
    let dp = a.mul_add(c, -p);
    b.mul_add(b, -p) - dp
}

/// {β : a β² − 2 h β + k ≤ 0}; `scale` is the magnitude of the terms `a` is the difference
/// of, so |a| ≤ 16·eps·scale counts as a = 0.
pub(super) fn quadratic_set(a: f64, h: f64, k: f64, scale: f64) -> ConfidenceSet {
    let (inf, ninf) = (f64::INFINITY, f64::NEG_INFINITY);
    let pieces = if a.abs() <= 16.0 * f64::EPSILON * scale {
        // Linear: −2hβ + k ≤ 0.
        if h > 0.0 {
            vec![(k / (2.0 * h), inf)]
        } else if h < 0.0 {
            vec![(ninf, k / (2.0 * h))]
        } else if k <= 0.0 {
            vec![(ninf, inf)]
        } else {
            vec![]
        }
    } else {
        let delta = discriminant(h, a, k);
        if delta < 0.0 {
            if a > 0.0 {
                vec![]
            } else {
                vec![(ninf, inf)]
            }
        } else {
            let q = h + h.signum() * delta.sqrt();
            let (r1, r2) = if q == 0.0 { (0.0, 0.0) } else { (q / a, k / q) };
            let (lo, hi) = (r1.min(r2), r1.max(r2));
            if a > 0.0 {
                vec![(lo, hi)]
            } else {
                vec![(ninf, lo), (hi, inf)]
            }
        }
    };
    ConfidenceSet::normalised(pieces)
}

/// `n` + 1 equally spaced directions θ from −π/2 to π/2.
pub(in crate::estimate) fn theta_grid(n: usize) -> Vec<f64> {
    let half_pi = std::f64::consts::FRAC_PI_2;
    (0..=n)
        .map(|j| -half_pi + std::f64::consts::PI * j as f64 / n as f64)
        .collect()
}

/// The boundary points, sorted, of {θ : φ(θ) ≤ 0} from φ's `values` on the grid `thetas`: a
/// bisection at each sign change between neighbours, and a golden-section check of each
/// interior extremum whose neighbours share its sign (an extremum that crosses zero between
/// grid points gives one boundary point on each side).
pub(in crate::estimate) fn scan_boundaries<F, E>(
    phi: &F,
    thetas: &[f64],
    values: &[f64],
) -> Result<Vec<f64>, E>
where
    F: Fn(f64) -> Result<f64, E>,
{
    let mut roots = Vec::new();
    for j in 0..thetas.len() - 1 {
        let (a, b) = (values[j], values[j + 1]);
        if (a <= 0.0) != (b <= 0.0) {
            roots.push(bisect(phi, thetas[j], thetas[j + 1], a <= 0.0)?);
        }
    }
    for j in 1..thetas.len() - 1 {
        let (a, m, b) = (values[j - 1], values[j], values[j + 1]);
        let same = (a <= 0.0) == (m <= 0.0) && (m <= 0.0) == (b <= 0.0);
        let minimum = m <= a && m <= b && m > 0.0;
        let maximum = m >= a && m >= b && m <= 0.0;
        if !same || !(minimum || maximum) {
            continue;
        }
        let sign = if minimum { 1.0 } else { -1.0 };
        let (t_star, v_star) = golden(&|t| Ok(sign * phi(t)?), thetas[j - 1], thetas[j + 1])?;
        if sign * v_star < 0.0 && minimum || sign * v_star > 0.0 && maximum {
            roots.push(bisect(phi, thetas[j - 1], t_star, m <= 0.0)?);
            roots.push(bisect(phi, t_star, thetas[j + 1], m > 0.0)?);
        }
    }
    roots.sort_by(f64::total_cmp);
    Ok(roots)
}

/// Bisection for a sign change of `f` on [lo, hi]; `inside_lo` says whether f(lo) ≤ 0.
/// Runs until the bracket cannot shrink (adjacent floats), at most 200 steps.
pub(in crate::estimate) fn bisect<F, E>(
    f: &F,
    mut lo: f64,
    mut hi: f64,
    inside_lo: bool,
) -> Result<f64, E>
where
    F: Fn(f64) -> Result<f64, E>,
{
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if (f(mid)? <= 0.0) == inside_lo {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Ok(0.5 * (lo + hi))
}

/// Golden-section search for the minimum of `f` on [a, b]; returns (argmin, min).
pub(in crate::estimate) fn golden<F, E>(f: &F, mut a: f64, mut b: f64) -> Result<(f64, f64), E>
where
    F: Fn(f64) -> Result<f64, E>,
{
    let ratio = 0.5 * (5f64.sqrt() - 1.0);
    let mut x1 = b - ratio * (b - a);
    let mut x2 = a + ratio * (b - a);
    let (mut f1, mut f2) = (f(x1)?, f(x2)?);
    for _ in 0..120 {
        if b - a <= 4.0 * f64::EPSILON * a.abs().max(b.abs()).max(1.0) {
            break;
        }
        if f1 <= f2 {
            b = x2;
            x2 = x1;
            f2 = f1;
            x1 = b - ratio * (b - a);
            f1 = f(x1)?;
        } else {
            a = x1;
            x1 = x2;
            f1 = f2;
            x2 = a + ratio * (b - a);
            f2 = f(x2)?;
        }
    }
    Ok(if f1 <= f2 { (x1, f1) } else { (x2, f2) })
}
