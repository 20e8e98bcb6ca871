//! A cheap check that the collinearity scan would find nothing: the smallest singular value
//! of the column-scaled matrix bounded from below through its Gram matrix.
//!
//! # Why this gives the scan's answer
//! The scan ([`collinear_columns`](super::collinear_columns)) runs an unpivoted Householder
//! QR on X_s (the columns scaled to unit norm) and calls column j dependent when its
//! computed remaining norm |r̂ⱼⱼ| is at most tol = max(n, k)·ε. Householder QR is backward
//! stable (Higham 2002, Accuracy and Stability of Numerical Algorithms, 2nd ed., Theorem
//! 19.4): R̂ is the exact R factor of X_s + ΔX with ‖Δxⱼ‖ ≤ γ̃_{nk}‖xⱼ‖, γ̃_{nk} = c·n·k·u for
//! a modest constant c that the theorem does not fix (u = ε/2). The exact |rⱼⱼ| of X_s + ΔX is the distance of its column j
//! from the span of the earlier ones, at least σ_min(X_s + ΔX) ≥ σ_min(X_s) − √k·γ̃_{nk}; the
//! computed norm of the remaining column adds a relative error of γ_n. So when
//!
//!   σ_min(X_s) > 2·tol + 10³·n·k·u·√k   (10³ standing in for c: our choice, a wide margin
//!                                        over the small constants of the analysis),
//!
//! no column is dependent and the scan returns nothing. X_s here is the scan's own matrix,
//! each column multiplied by the computed 1/‖xⱼ‖, so its columns have norm 1 within a few u;
//! the bound below is for that matrix. σ_min(X_s)² is the smallest
//! eigenvalue of G = X_sᵀX_s. The computed Ĝ (the product XᵀX, then scaled by the column
//! norms) differs from G by at most γ_{n+3} in each entry (|xᵢ|ᵀ|xⱼ| ≤ 1 for unit columns;
//! Higham §3.1 for the sums, three more roundings for the scaling), and the computed
//! Cholesky factor R̃ is exact for Ĝ + ΔG with |ΔG| ≤ γ_{k+1}|R̃ᵀ||R̃| (Higham Theorem 10.3),
//! whose entries are at most γ_{k+1}·max ‖r̃ⱼ‖² ≈ γ_{k+1}. Hence
//!
//!   σ_min(X_s)² ≥ σ_min(R̃)² − k·(γ_{n+3} + 1.1·γ_{k+1}) ≥ 1 / ‖R̃⁻¹‖_F² − (that),
//!
//! with ‖R̃⁻¹‖_F taken from the computed inverse, enlarged by 1% and trusted only when
//! ‖R̃‖_F‖R̃⁻¹‖_F ≤ 10⁴ (its rounding is then far below 1%). Anything else (a zero or
//! non-finite column, n < k, a failed or poorly conditioned factor) answers "not proved" and
//! the scan runs as before. Column norms outside [2⁻⁴⁰⁰, 2⁴⁰⁰] are declined too: products of
//! such entries can underflow into subnormal numbers, whose absolute error the relative
//! bounds above do not cover (inside that range an underflowed product errs by at most
//! 2⁻¹⁰⁷⁴, at most 2⁻²⁷⁴ relative to the product of two column norms, far inside γ_{n+3}),
//! or overflow.
//!
//! How much this proves: the step from Higham's theorems to the inequality above rests on
//! the constant 10³ for c, which is a judgement, not a derived value; in practice the cap
//! κ ≤ 10⁴ on R̃ decides most declines, and the error terms matter only once n·k nears 10⁸.
//! The tests check, over random designs from well conditioned to exactly dependent and at
//! extreme scales, that the check never holds where the scan finds a dependent column.
//!
//! Cost: one k × k product over the rows (XᵀX, no copy of X) instead of an n × k scaled copy
//! and k reflections of the remaining columns.

use nalgebra::DMatrix;

/// Whether the scan of `x` provably finds no dependent column (see the module
/// documentation). `false` means only "not proved".
pub(super) fn clearly_independent(x: &DMatrix<f64>) -> bool {
    clearly_independent_parts(&[x])
}

/// [`clearly_independent`] of the blocks `parts` side by side (equal heights), without
/// joining them: the Gram matrix is assembled from the blocks' cross-products, each entry
/// still one dot product of two columns over the rows (the same error bound).
pub fn clearly_independent_parts(parts: &[&DMatrix<f64>]) -> bool {
    let n = parts.iter().map(|p| p.nrows()).max().unwrap_or(0);
    if parts.iter().any(|p| p.nrows() != n) {
        return false;
    }
    let k: usize = parts.iter().map(|p| p.ncols()).sum();
    if k == 0 {
        return true;
    }
    if n < k {
        return false;
    }
    let norms: Vec<f64> = parts
        .iter()
        .flat_map(|p| p.column_iter().map(|c| c.norm()))
        .collect();
    let (low, high) = (2f64.powi(-400), 2f64.powi(400));
    if norms
        .iter()
        .any(|v| !(v.is_finite() && *v >= low && *v <= high))
    {
        return false;
    }
    let mut gram = DMatrix::<f64>::zeros(k, k);
    let mut starts = Vec::with_capacity(parts.len());
    let mut at = 0;
    for p in parts {
        starts.push(at);
        at += p.ncols();
    }
    for (a, pa) in parts.iter().enumerate() {
        for (b, pb) in parts.iter().enumerate().skip(a) {
            if pa.ncols() == 0 || pb.ncols() == 0 {
                continue;
            }
            let block = pa.tr_mul(pb);
            gram.view_mut((starts[a], starts[b]), block.shape())
                .copy_from(&block);
            gram.view_mut((starts[b], starts[a]), (pb.ncols(), pa.ncols()))
                .copy_from(&block.transpose());
        }
    }
    let g = |i: usize, j: usize| gram[(i, j)] / norms[i] / norms[j];
    // Cholesky G = RᵀR, R upper triangular, row by row.
    let mut r = DMatrix::<f64>::zeros(k, k);
    for j in 0..k {
        let d = g(j, j) - (0..j).map(|i| r[(i, j)] * r[(i, j)]).sum::<f64>();
        if !(d.is_finite() && d > 0.0) {
            return false;
        }
        let rjj = d.sqrt();
        r[(j, j)] = rjj;
        for l in j + 1..k {
            let s = g(j, l) - (0..j).map(|i| r[(i, j)] * r[(i, l)]).sum::<f64>();
            r[(j, l)] = s / rjj;
        }
    }
    // R⁻¹ by back substitution, column by column.
    let mut inv = DMatrix::<f64>::zeros(k, k);
    for c in 0..k {
        for i in (0..=c).rev() {
            let rhs = if i == c { 1.0 } else { 0.0 };
            let s: f64 = (i + 1..=c).map(|l| r[(i, l)] * inv[(l, c)]).sum();
            inv[(i, c)] = (rhs - s) / r[(i, i)];
        }
    }
    let (inv_f, r_f) = (inv.norm(), r.norm());
    if !(inv_f.is_finite() && r_f * inv_f <= 1e4) {
        return false;
    }
    let u = f64::EPSILON / 2.0;
    let gamma = |m: usize| {
        let mu = m as f64 * u;
        mu / (1.0 - mu)
    };
    let gram_error = k as f64 * (gamma(n + 3) + 1.1 * gamma(k + 1));
    let sigma_squared = 1.0 / (1.01 * inv_f * 1.01 * inv_f) - gram_error;
    if sigma_squared.is_nan() || sigma_squared <= 0.0 {
        return false;
    }
    let needed = 2.0 * super::rank_tolerance(n, k) + 1e3 * (n * k) as f64 * u * (k as f64).sqrt();
    sigma_squared.sqrt() > needed
}

#[cfg(test)]
mod tests {
    use super::super::collinear_columns;
    use super::*;

    /// Invented columns: an intercept, a binary, smooth and rough numbers on very different
    /// scales, with `mix` of the first numeric column added to the last.
    fn design(n: usize, mix: f64) -> DMatrix<f64> {
        DMatrix::from_fn(n, 6, |i, j| {
            let t = i as f64;
            let a = (t * 0.37).sin() * 1e4;
            match j {
                0 => 1.0,
                1 => f64::from(u8::from(i % 3 == 0)),
                2 => a,
                3 => (t * 1.93).cos() * 1e-3,
                4 => ((t * 7.1).sin() * 91.0).fract(),
                _ => (t * 2.9).sin() * 1e-6 * (1.0 - mix) + mix * a * 1e-10,
            }
        })
    }

    /// Well-conditioned designs are proved, and the scan agrees; designs the proof declines
    /// still get the scan's answer from `collinear_columns`.
    #[test]
    fn proved_only_where_the_scan_finds_nothing() {
        for n in [8, 50, 2_000] {
            let x = design(n, 0.0);
            assert!(clearly_independent(&x), "n = {n}");
            assert!(collinear_columns(&x).is_empty());
        }
        // The last column nearly the third (up to 1e-13 of it): the scan keeps it at these
        // sizes, but the proof cannot tell it from dependence and declines.
        let mut close = design(2_000, 1.0);
        for i in 0..2_000 {
            close[(i, 5)] += 1e-13 * ((i as f64) * 3.3).sin();
        }
        assert!(!clearly_independent(&close));
        // An exact copy: declined, and the scan names it.
        let mut copy = design(500, 0.0);
        let third = copy.column(2).into_owned();
        copy.set_column(5, &third);
        assert!(!clearly_independent(&copy));
        assert_eq!(collinear_columns(&copy), vec![5]);
        // A zero column, fewer rows than columns, no columns.
        let mut zero = design(40, 0.0);
        zero.column_mut(3).fill(0.0);
        assert!(!clearly_independent(&zero));
        assert_eq!(collinear_columns(&zero), vec![3]);
        assert!(!clearly_independent(&design(5, 0.0)));
        assert!(clearly_independent(&DMatrix::zeros(10, 0)));
    }

    /// Blocks side by side give the answer of the joined matrix.
    #[test]
    fn blocks_answer_as_their_join() {
        for (x, expected) in [(design(200, 0.0), true), (design(5, 0.0), false)] {
            let (a, b) = (x.columns(0, 2).into_owned(), x.columns(2, 4).into_owned());
            assert_eq!(clearly_independent_parts(&[&a, &b]), expected);
            assert_eq!(clearly_independent(&x), expected);
        }
        let mut copy = design(200, 0.0);
        let third = copy.column(2).into_owned();
        copy.set_column(5, &third);
        let (a, b) = (
            copy.columns(0, 3).into_owned(),
            copy.columns(3, 3).into_owned(),
        );
        assert!(!clearly_independent_parts(&[&a, &b]));
        let empty = DMatrix::zeros(200, 0);
        assert!(clearly_independent_parts(&[&empty, &design(200, 0.0)]));
        assert!(!clearly_independent_parts(&[
            &design(200, 0.0),
            &design(100, 0.0)
        ]));
    }

    /// Entries so small or large that products underflow or overflow: declined, and the
    /// scan's answer stands (a multiple of a column of size 1e-160 is dependent; before the
    /// scale guard the check passed this one).
    #[test]
    fn extreme_scales_are_declined() {
        for scale in [1e-160, 1e-200, 1e160, 1e-300] {
            let x = DMatrix::from_fn(10, 2, |i, j| {
                let v = scale * (0.7 * i as f64 + 0.3).sin();
                if j == 1 {
                    3.0 * v
                } else {
                    v
                }
            });
            assert!(!clearly_independent(&x), "{scale}");
            // At 1e-300 the column norms underflow and the scan calls both columns zero.
            assert!(collinear_columns(&x).contains(&1), "{scale}");
        }
        // Within range, at both ends of it: still checked, and agreeing with the scan.
        for scale in [1e-100, 1e100] {
            let x = design(50, 0.0) * scale;
            assert!(clearly_independent(&x), "{scale}");
            assert!(super::super::scan(&x).is_empty());
        }
    }

    /// Where the proof holds, the scan (run directly) finds nothing, over random designs
    /// from well conditioned to nearly dependent: the proof is never wrong, and it covers
    /// the well-conditioned ones.
    #[test]
    fn the_proof_never_contradicts_the_scan() {
        let mut state = 0x9E37_79B9_7F4A_7C15_u64;
        let mut uniform = move || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        let (mut proved, mut declined, mut found) = (0, 0, 0);
        for case in 0..300 {
            let n = 20 + case * 7;
            let k = 2 + case % 7;
            // From well conditioned (1) to dependent for the scan (below its tolerance, about
            // 1e-13 here) and exactly dependent (0).
            let closeness = match case % 12 {
                11 => 0.0,
                e => 10f64.powi(-(e as i32) * 3 / 2),
            };
            let mut x = DMatrix::from_fn(n, k, |_, _| uniform());
            let first = x.column(0).into_owned();
            let noise = DMatrix::from_fn(n, 1, |_, _| uniform());
            x.set_column(k - 1, &(&first + noise.column(0) * closeness));
            if clearly_independent(&x) {
                proved += 1;
                assert!(super::super::scan(&x).is_empty(), "case {case}");
            } else {
                declined += 1;
                found += usize::from(!collinear_columns(&x).is_empty());
            }
        }
        assert!(
            proved > 60 && declined > 100 && found > 40,
            "{proved} proved, {declined} declined, {found} with dependent columns"
        );
    }
}
