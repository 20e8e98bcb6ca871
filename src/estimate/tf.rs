//! The tF critical value for the 2SLS t-ratio with one instrument and one endogenous
//! regressor (Lee, McCrary, Moreira and Porter 2022, American Economic Review 112, "Valid
//! t-ratio inference for IV"; the paper is cited from memory).
//!
//! # Model
//! In the just-identified model the large-sample law of the first-stage t-statistic f̂ and
//! of the 2SLS t-ratio t̂ for H₀: β = β₀ is that of
//! f̂ = f₀ + Z_v and t̂² = f̂² Z_u² / (f̂² − 2ρ f̂ Z_u + Z_u²), where (Z_u, Z_v) are standard
//! normal with correlation ρ and f₀ is the first-stage strength. (Derivation: with
//! d = (β̂ − β₀)σ_x/σ_u = Z_u/f̂ the estimated variance of π̂_y − β̂π̂_x is
//! σ_u²(1 − 2ρd + d²), and t̂ = d·f̂/√(1 − 2ρd + d²).) The first-stage F is F = f̂².
//!
//! # Worst case
//! At ρ = ±1, Z_u = ±Z_v = ±Z and t̂ is a function of Z alone: |t̂| = |Z (f₀ + Z)| / f₀.
//! Following the paper's characterisation (from memory) this is the worst case over ρ, so
//! rejection probabilities are computed there; `tests/reference/anderson_rubin.py` checks at
//! sampled points, by numerical integration of the bivariate normal, that ρ < 1 rejects less.
//!
//! # Definition used here
//! For a threshold F and a critical value c, the "screened" test rejects when f̂² > F and
//! t̂² > c². Its rejection probability at ρ = 1 is, in closed form,
//! R(f₀; F, c) = P(|f₀ + Z| > √F and |Z(f₀ + Z)| > c f₀), Z ~ N(0, 1),
//! a sum of normal probabilities over the intervals cut out by the roots of
//! Z² + f₀Z ∓ c f₀ = 0 and by −f₀ ± √F. R → 2Φ̄(√F) as f₀ → 0 and → 2Φ̄(c) as f₀ → ∞. Let
//! S(F, c) = sup over f₀ ∈ [0, ∞] of R(f₀; F, c), which decreases in c. Then
//! c_α(F) = inf {c ≥ 0 : S(F, c) ≤ α}:
//! the smallest critical value whose screened test at threshold F has size α, the pairing of
//! F thresholds with critical values that the paper builds on Stock and Yogo (2005).
//! * No finite value exists when 2Φ̄(√F) ≥ α, i.e. F ≤ z²_{1−α/2} (3.8415 at 5%): S ≥ α for
//!   every c because of the f₀ → 0 limit.
//! * c_α(F) ≥ z_{1−α/2} always (the f₀ → ∞ limit), with equality for F at or above the
//!   threshold where the standard critical value becomes valid: F ≈ 104.67 at 5% here (the
//!   scipy reference finds 104.6707), the paper's 104.7 (from memory).
//!
//! # p-value
//! The tF p-value of (t, F) is the smallest α with |t| > c_α(F). By the monotonicity of S in
//! c it equals S(F, |t|) exactly; [`tf_p_value`] evaluates that, and the tests confirm it
//! against a bisection on α of the rejection indicator (the monotone search).
//!
//! # Numerics
//! The sup over f₀ is taken on a grid (geometric on [1e-4, 1], step 0.25 on [1, 60],
//! geometric on [60, 1e5], plus both limits), each grid-local maximum refined by
//! golden-section search in log f₀ to 1e-12; c_α(F) is found by a safeguarded Illinois
//! regula falsi in c (`bracket_root`) to a bracket of 1e-13 relative. The grid step bounds
//! how narrow a peak of R in f₀ could be missed; R varies on the scale of the N(0, 1) noise,
//! which the grid resolves.

use crate::distribution::Reference;
use crate::inference::{lower_tail, quantile, upper_tail};

/// P(a < Z < b) for Z ~ N(0, 1), each tail computed directly.
fn normal_prob(a: f64, b: f64) -> f64 {
    if b <= a {
        return 0.0;
    }
    let n = Reference::Normal;
    if a >= 0.0 {
        upper_tail(&n, a) - upper_tail(&n, b)
    } else if b <= 0.0 {
        lower_tail(&n, b) - lower_tail(&n, a)
    } else {
        1.0 - lower_tail(&n, a) - upper_tail(&n, b)
    }
}

/// R(f₀; F, c): the ρ = 1 rejection probability of "f̂² > F and t̂² > c²".
fn rejection(f0: f64, f: f64, c: f64) -> f64 {
    let s = f.sqrt();
    if f0 <= 0.0 {
        return 2.0 * upper_tail(&Reference::Normal, s);
    }
    if !f0.is_finite() {
        return 2.0 * upper_tail(&Reference::Normal, c);
    }
    let (inf, ninf) = (f64::INFINITY, f64::NEG_INFINITY);
    // |Z(f0 + Z)| > c f0: outside the roots of Z² + f0 Z − c f0, or between those of
    // Z² + f0 Z + c f0 (real when f0 > 4c). Stable root formulas.
    let root = (f0 * f0 + 4.0 * c * f0).sqrt();
    let r_plus = 2.0 * c * f0 / (f0 + root);
    let r_minus = -f0 - r_plus;
    let mut t_set = vec![(ninf, r_minus), (r_plus, inf)];
    let disc = f0 * f0 - 4.0 * c * f0;
    if disc > 0.0 {
        let l_minus = -0.5 * (f0 + disc.sqrt());
        t_set.push((l_minus, c * f0 / l_minus));
    }
    let screen = [(ninf, -f0 - s), (-f0 + s, inf)];
    let mut p = 0.0;
    for &(a, b) in &t_set {
        for &(sa, sb) in &screen {
            p += normal_prob(a.max(sa), b.min(sb));
        }
    }
    p
}

/// The f₀ grid for the supremum.
fn f0_grid() -> Vec<f64> {
    let mut g = Vec::new();
    for i in 0..40 {
        g.push(1e-4 * 1e4f64.powf(i as f64 / 40.0));
    }
    for i in 0..236 {
        g.push(1.0 + 0.25 * i as f64);
    }
    for i in 0..=60 {
        g.push(60.0 * (1e5f64 / 60.0).powf(i as f64 / 60.0));
    }
    g
}

/// S(F, c) = sup over f₀ ∈ [0, ∞] of R(f₀; F, c).
fn worst_rejection(f: f64, c: f64) -> f64 {
    let grid = f0_grid();
    let values: Vec<f64> = grid.iter().map(|&f0| rejection(f0, f, c)).collect();
    let mut best = rejection(0.0, f, c).max(rejection(f64::INFINITY, f, c));
    for j in 0..grid.len() {
        best = best.max(values[j]);
        let left = if j == 0 {
            f64::NEG_INFINITY
        } else {
            values[j - 1]
        };
        let right = values.get(j + 1).copied().unwrap_or(f64::NEG_INFINITY);
        if values[j] >= left && values[j] >= right {
            let lo = grid[j.saturating_sub(1)].ln();
            let hi = grid[(j + 1).min(grid.len() - 1)].ln();
            best = best.max(golden_max(|u| rejection(u.exp(), f, c), lo, hi));
        }
    }
    best
}

/// Golden-section search for the maximum of `g` on [a, b] (to 1e-12 in the argument).
fn golden_max<G: Fn(f64) -> f64>(g: G, mut a: f64, mut b: f64) -> f64 {
    let ratio = 0.5 * (5f64.sqrt() - 1.0);
    let mut x1 = b - ratio * (b - a);
    let mut x2 = a + ratio * (b - a);
    let (mut g1, mut g2) = (g(x1), g(x2));
    while b - a > 1e-12 {
        if g1 >= g2 {
            b = x2;
            x2 = x1;
            g2 = g1;
            x1 = b - ratio * (b - a);
            g1 = g(x1);
        } else {
            a = x1;
            x1 = x2;
            g1 = g2;
            x2 = a + ratio * (b - a);
            g2 = g(x2);
        }
    }
    g1.max(g2)
}

/// The tF critical value c_α(F) for the 2SLS t-ratio given the first-stage F.
///
/// # Formula
/// c_α(F) = inf {c : sup_{f₀} P_{ρ=1}(f̂² > F, t̂² > c²) ≤ α} (module documentation).
/// `None` when no finite value exists (F ≤ z²_{1−α/2}, or F, α not finite, α outside (0, 1)).
pub fn tf_critical_value(f: f64, alpha: f64) -> Option<f64> {
    if !(f.is_finite() && alpha > 0.0 && alpha < 1.0) {
        return None;
    }
    let z = -quantile(&Reference::Normal, 0.5 * alpha);
    if 2.0 * upper_tail(&Reference::Normal, f.max(0.0).sqrt()) >= alpha {
        return None;
    }
    let too_low = |c: f64| worst_rejection(f, c) > alpha;
    let (mut lo, mut hi) = (z, 2.0 * z);
    if !too_low(lo) {
        return Some(z);
    }
    while too_low(hi) {
        lo = hi;
        hi *= 2.0;
        if hi > 1e12 {
            return None;
        }
    }
    Some(bracket_root(|c| worst_rejection(f, c) - alpha, lo, hi))
}

/// The upper end of a bracket [lo, hi] of the sign change of `g` (g(lo) > 0 ≥ g(hi)) narrowed
/// to a relative width of 1e-13, as the bisection it replaces: the root lies in the final
/// bracket either way, so the two differ by less than 1e-13 relative.
///
/// # Formula
/// The Illinois variant of regula falsi (Dowell and Jarratt 1971, BIT 11): the secant point
/// of the bracket, halving the retained end's value when the same end is kept twice, so both
/// ends converge; a step that does not halve the bracket is followed by a bisection step, so
/// it never takes more than about twice bisection's steps. Each `g` here is a supremum over a
/// grid with golden-section refinement, so the 8–12 evaluations this takes instead of about
/// 45 are where the time goes.
fn bracket_root(g: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    let (mut glo, mut ghi) = (g(lo), g(hi));
    let mut kept = 0i8;
    let mut bisect = false;
    while hi - lo > 1e-13 * hi {
        let width = hi - lo;
        let secant = hi - ghi * (hi - lo) / (ghi - glo);
        let x = if bisect || !(secant > lo && secant < hi) {
            0.5 * (lo + hi)
        } else {
            secant
        };
        let gx = g(x);
        if gx > 0.0 {
            lo = x;
            glo = gx;
            if kept == 1 {
                ghi *= 0.5;
            }
            kept = 1;
        } else {
            hi = x;
            ghi = gx;
            if kept == -1 {
                glo *= 0.5;
            }
            kept = -1;
        }
        bisect = hi - lo > 0.5 * width;
    }
    hi
}

/// The tF p-value: the smallest α at which |t| > c_α(F).
///
/// # Formula
/// S(F, |t|) = sup_{f₀} P_{ρ=1}(f̂² > F, t̂² > t²) (module documentation), capped at 1; NaN
/// for a NaN input.
pub fn tf_p_value(t: f64, f: f64) -> f64 {
    if t.is_nan() || f.is_nan() {
        return f64::NAN;
    }
    if t.is_infinite() {
        // c = ∞: only the f₀ → 0 limit rejects.
        return 2.0 * upper_tail(&Reference::Normal, f.max(0.0).sqrt());
    }
    worst_rejection(f.max(0.0), t.abs()).min(1.0)
}

#[cfg(test)]
mod tests;
