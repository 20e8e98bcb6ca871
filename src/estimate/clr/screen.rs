//! A screened version of the CLR set scan: the same boundaries as the scan over exact
//! conditional p-values, with most exact evaluations replaced by a cheap approximation where
//! the approximation cannot change a decision.
//!
//! # What the scan decides from φ (φ = α − p, inside ⇔ φ ≤ 0)
//! The Anderson–Rubin set's scan (`anderson_rubin::set::scan_boundaries`) reads φ at the grid
//! nodes only through (i) the side of each node (φ ≤ 0 or not), (ii) for each interior node
//! whose two neighbours lie on its side, whether it is a grid-local extremum (the comparisons
//! φ_j ≤ φ_{j±1} or ≥); then it bisects on the side of φ at the midpoints, and runs a
//! golden-section search on the values of φ at each extremum found. [`scan`] does the same
//! steps in the same order on the same exact φ, except that:
//! * a node's side, and a bisection midpoint's side, are taken from the approximation φ̃ when
//!   |φ̃| > [`SCREEN_MARGIN`];
//! * a comparison of two neighbours is taken from φ̃ when their values differ by more than the
//!   sum of their margins (an exact value has margin 0), otherwise both are evaluated exactly;
//! * the golden-section searches use the exact φ throughout.
//!
//! So every decision equals the exact scan's as long as |φ̃ − φ| < [`SCREEN_MARGIN`] wherever
//! φ̃ is used, and the boundaries are the same bits. The approximation
//! ([`clr_p_value_screen`]) integrates the same conditional law with closed-form χ² tails for
//! integer degrees of freedom at tolerance [`SCREEN_TOLERANCE`]; a unit test checks it against
//! the exact p-value at many points (largest difference about 1e-13, against a margin of 1e-8)
//! and that the screened scan returns the exact scan's boundaries bit for bit.
//!
//! Cost: the exact p-value (incomplete gamma function in log space at every quadrature node) is
//! then computed only at the nodes with p within about 1e-8 of α or of a neighbour (the far
//! tail, where p is tiny and its quadrature stops early), at the last steps of each bisection
//! and in the golden-section searches.

use super::quarter_turn_law;
use crate::estimate::anderson_rubin::{bisect, golden};
use std::convert::Infallible;

/// Absolute tolerance of the approximate conditional p-value integral.
pub const SCREEN_TOLERANCE: f64 = super::QUADRATURE_TOLERANCE;

/// Largest |φ̃ − φ| the screen assumes: decisions closer than this use the exact φ.
pub const SCREEN_MARGIN: f64 = 1e-8;

/// Largest number of instruments for which the approximation is used (the finite sums of the
/// χ² tail have L/2 terms and lose nothing to underflow below this).
const SCREEN_MAX_INSTRUMENTS: usize = 64;

/// χ²(`l`) upper tail for integer `l` ≥ 1 in closed form: S₂ = e^{−x/2}, S₁ = erfc(√(x/2)),
/// S_{k+2}(x) = S_k(x) + (x/2)^{k/2} e^{−x/2} / Γ(k/2 + 1) (erfc from the `libm` crate,
/// within about one unit in the last place).
pub(super) fn chi2_upper_integer(x: f64, l: usize) -> f64 {
    let h = 0.5 * x;
    let e = (-h).exp();
    if l.is_multiple_of(2) {
        let (mut term, mut sum) = (e, e);
        for j in 1..l / 2 {
            term *= h / j as f64;
            sum += term;
        }
        sum
    } else {
        let mut sum = libm::erfc(h.sqrt());
        let mut term = e * h.sqrt() * std::f64::consts::FRAC_2_SQRT_PI;
        for j in 0..(l - 1) / 2 {
            if j > 0 {
                term *= h / (j as f64 + 0.5);
            }
            sum += term;
        }
        sum
    }
}

/// An approximation of [`super::clr_p_value`]: the same integral with closed-form χ² tails,
/// adaptive Simpson at [`SCREEN_TOLERANCE`] (the exact value's tolerance, so that both take
/// the same subdivisions but where an acceptance test is decided by rounding); S_L(m) in
/// closed form where the exact value is S_L(m) (`l` = 1 or `q` = 0). None where the exact
/// value is trivial (`m` ≤ 0), for non-finite or negative input, and for no or more than
/// [`SCREEN_MAX_INSTRUMENTS`] instruments.
pub fn clr_p_value_screen(m: f64, q: f64, l: usize) -> Option<f64> {
    let usable = m.is_finite() && m > 0.0 && q.is_finite() && q >= 0.0;
    if !usable || l == 0 || l > SCREEN_MAX_INSTRUMENTS {
        return None;
    }
    if l == 1 || q == 0.0 {
        return Some(chi2_upper_integer(m, l));
    }
    let power = (l - 2) as i32;
    let (top, ratio) = (m + q, q / m);
    let f = |phi: f64| {
        if power == 0 {
            let s = phi.sin();
            return chi2_upper_integer(top / (1.0 + ratio * s * s), l);
        }
        let (s, c) = phi.sin_cos();
        chi2_upper_integer(top / (1.0 + ratio * s * s), l) * c.powi(power)
    };
    let p = quarter_turn_law(&f, l, SCREEN_TOLERANCE);
    p.is_finite().then_some(p)
}

/// What the scan knows of φ at one node: a value and its margin (0 when exact).
#[derive(Clone, Copy)]
struct Known {
    value: f64,
    margin: f64,
}

/// The boundary points in θ, sorted, and the side of the first node, of {θ : φ(θ) ≤ 0} on the
/// grid `thetas`: the exact scan's result (module documentation), with `exact` the exact φ
/// and `approx` an approximation within [`SCREEN_MARGIN`] of it, or None where it has none.
pub(super) fn scan(
    exact: &dyn Fn(f64) -> f64,
    approx: &dyn Fn(f64) -> Option<f64>,
    thetas: &[f64],
) -> (Vec<f64>, bool) {
    let exact_at = |t: f64| Known {
        value: exact(t),
        margin: 0.0,
    };
    let mut known: Vec<Known> = thetas
        .iter()
        .map(|&t| match approx(t) {
            Some(v) if v.abs() > SCREEN_MARGIN => Known {
                value: v,
                margin: SCREEN_MARGIN,
            },
            _ => exact_at(t),
        })
        .collect();
    // Every node's side is now decided: an approximate value lies beyond its margin.
    let screened = |t: f64| {
        Ok::<f64, Infallible>(match approx(t) {
            Some(v) if v.abs() > SCREEN_MARGIN => v,
            _ => exact(t),
        })
    };
    let exact_ok = |t: f64| Ok::<f64, Infallible>(exact(t));
    let inside = |k: &Known| k.value <= 0.0;
    let mut roots = Vec::new();
    for j in 0..thetas.len() - 1 {
        let (a, b) = (inside(&known[j]), inside(&known[j + 1]));
        if a != b {
            let Ok(t) = bisect(&screened, thetas[j], thetas[j + 1], a);
            roots.push(t);
        }
    }
    for j in 1..thetas.len() - 1 {
        let side = inside(&known[j]);
        if inside(&known[j - 1]) != side || inside(&known[j + 1]) != side {
            continue;
        }
        // Outside only a minimum of φ counts, inside only a maximum.
        let sign = if side { -1.0 } else { 1.0 };
        let mut extremum = true;
        for i in [j - 1, j + 1] {
            let (m, n) = (known[j], known[i]);
            // Is sign·φ_j ≤ sign·φ_i?
            let gap = sign * (n.value - m.value);
            if gap.abs() <= m.margin + n.margin {
                for k in [j, i] {
                    if known[k].margin > 0.0 {
                        known[k] = exact_at(thetas[k]);
                    }
                }
            }
            if sign * known[j].value > sign * known[i].value {
                extremum = false;
                break;
            }
        }
        if !extremum {
            continue;
        }
        let Ok((t_star, v_star)) = golden(
            &|t| Ok::<f64, Infallible>(sign * exact_ok(t)?),
            thetas[j - 1],
            thetas[j + 1],
        );
        if v_star < 0.0 {
            let Ok(lo) = bisect(&screened, thetas[j - 1], t_star, side);
            let Ok(hi) = bisect(&screened, t_star, thetas[j + 1], !side);
            roots.push(lo);
            roots.push(hi);
        }
    }
    roots.sort_by(f64::total_cmp);
    (roots, inside(&known[0]))
}
