//! Iterative refinement of least-squares solutions on the augmented system.
//!
//! Role: push a QR least-squares solution to full working precision on ill-conditioned
//! designs with large residuals (where the error of a plain QR solve grows like κ²·eps).
//!
//! Method: Björck (1967, BIT 7, "Iterative refinement of linear least squares solutions I")
//! and Björck and Golub (1967): the solution (r, b) satisfies r + X b = y, Xᵀ r = 0. Each step
//! computes the residuals f = y − r − X b and g = −Xᵀ r in compensated (doubled) precision
//! (Ogita, Rump and Oishi 2005, SIAM J. Sci. Comput. 26, algorithm Dot2), then solves the
//! correction system with the existing factorisation X S P = Q R:
//! h = R^{-T} g̃, (d₁; d₂) = Qᵀ f, δb̃ = R^{-1}(d₁ − h), δr = Q (h; d₂), where g̃ = P' S g and
//! δb = S P δb̃. A factorisation that kept R and X instead of its Householder vectors
//! (module `qr`, κ₁ ≤ 10³) solves the same correction system from R alone:
//! XᵀX δb = Xᵀf − g as S P R⁻¹R⁻ᵀ Pᵀ S (Xᵀf − g), δr = f − X δb (Björck 1987, the corrected
//! semi-normal equations; contraction about κ²·ε per step). Invariant: only the stored
//! factorisation is used; X is never squared in working precision.
//!
//! The refined (XᵀX)^{-1} of a factorisation with κ₁ ≤ 10³ comes instead from Newton steps on
//! XᵀX summed in Dot2 and kept as (sum, error) pairs ([`compensated_gram`],
//! [`newton_inverse`]): one pass over the rows instead of a few per column, and twice the
//! working precision is ample at that conditioning.

use nalgebra::{DMatrix, DVector};

use super::qr::{combine_lanes, PivotedQr};
use crate::exact::{two_prod, two_sum};

/// Refinement steps of a factorisation worse conditioned than `qr::REFINE_ABOVE`; each costs
/// a few O(nk) passes, and three reach working precision on the ill-conditioned NIST sets.
const STEPS: usize = 3;
/// Refinement steps of a better conditioned factorisation: one step already recovers the
/// digits a plain solve loses to cancellation (the NIST sets below the threshold, Norris,
/// Pontius, NoInt1/2, agree with their certified values to the same digits as with three).
const STEPS_WELL_CONDITIONED: usize = 1;

/// One term of Dot2 (Ogita, Rump and Oishi 2005): the running (sum, err) takes a·b, the
/// product and the sum split exactly, their rounding errors added to err. Every compensated
/// kernel below is a loop over this step.
#[inline(always)]
fn dot2_add(sum: &mut f64, err: &mut f64, a: f64, b: f64) {
    let (p, ep) = two_prod(a, b);
    let (s, es) = two_sum(*sum, p);
    *sum = s;
    *err += ep + es;
}

/// Σ aᵢ bᵢ evaluated as if in twice the working precision, then rounded (Dot2): the
/// definition the row and column kernels below reproduce bit for bit (checked in the tests).
fn dot2(terms: impl Iterator<Item = (f64, f64)>) -> f64 {
    let (mut sum, mut err) = (0.0, 0.0);
    for (a, b) in terms {
        dot2_add(&mut sum, &mut err, a, b);
    }
    sum + err
}

/// One Dot2 step for every row at once: row i adds the term (a[i], b) to its running
/// (sum[i], err[i]). The same operations in the same order as [`dot2`] per row.
#[inline(always)]
fn dot2_step_body(sum: &mut [f64], err: &mut [f64], a: &[f64], b: f64) {
    for ((s, e), &x) in sum.iter_mut().zip(err.iter_mut()).zip(a) {
        dot2_add(s, e, x, b);
    }
}

/// [`dot2_step_body`] compiled with hardware fused multiply-add (the same correctly rounded
/// operation as the library call it replaces, so the same bits).
///
/// # Safety
/// The CPU must support FMA (checked by the caller).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "fma")]
unsafe fn dot2_step_fma(sum: &mut [f64], err: &mut [f64], a: &[f64], b: f64) {
    dot2_step_body(sum, err, a, b);
}

fn dot2_step(sum: &mut [f64], err: &mut [f64], a: &[f64], b: f64) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("fma") {
        // SAFETY: the feature was detected at run time.
        unsafe { dot2_step_fma(sum, err, a, b) };
        return;
    }
    dot2_step_body(sum, err, a, b);
}

/// Rows a compensated kernel works through at a time: their running sums stay in the
/// fastest cache while every column passes over them.
const ROW_BLOCK: usize = 1024;

/// Per row i, Dot2 of the terms (v[i], c) for each `(v, c)` in `leading`, then
/// (x[i, j], −b[j]) for each column j: the compensated residual family, computed column by
/// column over contiguous memory, a block of [`ROW_BLOCK`] rows at a time, with the same
/// per-row order of operations as [`dot2`].
pub(crate) fn compensated_rows(
    leading: &[(&[f64], f64)],
    x: &DMatrix<f64>,
    b: &DVector<f64>,
) -> DVector<f64> {
    let n = x.nrows();
    let mut out = Vec::with_capacity(n);
    let (mut sum, mut err) = ([0.0; ROW_BLOCK], [0.0; ROW_BLOCK]);
    for start in (0..n).step_by(ROW_BLOCK) {
        let end = (start + ROW_BLOCK).min(n);
        let (sum, err) = (&mut sum[..end - start], &mut err[..end - start]);
        sum.fill(0.0);
        err.fill(0.0);
        for (v, c) in leading {
            dot2_step(sum, err, &v[start..end], *c);
        }
        for (j, column) in x.column_iter().enumerate() {
            dot2_step(sum, err, &column.as_slice()[start..end], -b[j]);
        }
        out.extend(sum.iter().zip(err.iter()).map(|(s, e)| s + e));
    }
    DVector::from_vec(out)
}

/// One refinement step's sums over the rows, in one pass over X (each block of
/// [`ROW_BLOCK`] rows read from memory once, then from cache):
/// * r, when not given: y − X b in plain arithmetic, columns added in order (the start of the
///   refinement; the step's compensated f carries what it rounds away);
/// * f = y − r − X b per row, the bits of [`compensated_rows`];
/// * g = −Xᵀr, each column's Dot2 over the rows in order, the bits of [`dot2_columns`];
/// * Xᵀf when asked (the semi-normal correction of a factorisation that kept X), summed in
///   the order of nalgebra's `tr_mul` (eight running sums, `qr::combine_lanes`, then the last
///   n mod 8 rows one by one), the bits of `x.tr_mul(&f)`.
///
/// A test checks every part against the kernel or product it replaces.
pub(crate) struct StepSums {
    pub(crate) r: Option<DVector<f64>>,
    pub(crate) f: DVector<f64>,
    pub(crate) g: DVector<f64>,
    pub(crate) xtf: Option<DVector<f64>>,
}

/// What one refinement step sums over: the factorised `x`, the right-hand side `y`, the
/// current solution `b` and residuals `r` (`None`: computed plainly, and returned when
/// `keep_r`, else used block by block and dropped); Xᵀf when `with_xtf`.
#[derive(Clone, Copy)]
struct StepInputs<'a> {
    x: &'a DMatrix<f64>,
    y: &'a DVector<f64>,
    b: &'a DVector<f64>,
    r: Option<&'a DVector<f64>>,
    with_xtf: bool,
    keep_r: bool,
}

/// [`StepSums`] for `inputs`.
fn step_sums(inputs: &StepInputs) -> StepSums {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("fma") {
        // SAFETY: the feature was detected at run time.
        return unsafe { step_sums_fma(inputs) };
    }
    step_sums_body(inputs)
}

/// [`step_sums_body`] with hardware fused multiply-add.
///
/// # Safety
/// The CPU must support FMA (checked by the caller).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "fma")]
unsafe fn step_sums_fma(inputs: &StepInputs) -> StepSums {
    step_sums_body(inputs)
}

#[inline(always)]
fn step_sums_body(inputs: &StepInputs) -> StepSums {
    let StepInputs {
        x,
        y,
        b,
        r: given,
        with_xtf,
        keep_r,
    } = *inputs;
    let (n, k) = x.shape();
    let main = n - n % 8;
    let mut lanes = vec![[0.0; 8]; if with_xtf { k } else { 0 }];
    let columns: Vec<&[f64]> = (0..k).map(|j| &x.as_slice()[j * n..(j + 1) * n]).collect();
    // r₀ block by block; kept whole only when a later step needs it.
    let mut plain = Vec::with_capacity(if given.is_none() && keep_r { n } else { 0 });
    let mut block_r = [0.0; ROW_BLOCK];
    let mut f = Vec::with_capacity(n);
    let mut states = vec![(0.0, 0.0); k];
    let (mut sum, mut err) = ([0.0; ROW_BLOCK], [0.0; ROW_BLOCK]);
    for start in (0..n).step_by(ROW_BLOCK) {
        let end = (start + ROW_BLOCK).min(n);
        let ys = &y.as_slice()[start..end];
        if given.is_none() {
            let out = &mut block_r[..end - start];
            out.fill(0.0);
            for (j, column) in columns.iter().enumerate() {
                let c = &column[start..end];
                if j == 0 {
                    out.iter_mut().zip(c).for_each(|(o, v)| *o = v * b[0]);
                } else {
                    out.iter_mut().zip(c).for_each(|(o, v)| *o += v * b[j]);
                }
            }
            out.iter_mut().zip(ys).for_each(|(o, v)| *o = v - *o);
            if keep_r {
                plain.extend_from_slice(out);
            }
        }
        let rs = match given {
            Some(given) => &given.as_slice()[start..end],
            None => &block_r[..end - start],
        };
        let (sum, err) = (&mut sum[..end - start], &mut err[..end - start]);
        sum.fill(0.0);
        err.fill(0.0);
        dot2_step(sum, err, ys, 1.0);
        dot2_step(sum, err, rs, -1.0);
        for (j, column) in columns.iter().enumerate() {
            dot2_step(sum, err, &column[start..end], -b[j]);
        }
        f.extend(sum.iter().zip(err.iter()).map(|(s, e)| s + e));
        // Row blocks start at multiples of eight, so row i goes to lane i mod 8.
        let lane_end = end.min(main).max(start);
        for (lane, column) in lanes.iter_mut().zip(&columns) {
            let (c, fs) = (&column[start..lane_end], &f[start..lane_end]);
            for (c8, f8) in c.chunks_exact(8).zip(fs.chunks_exact(8)) {
                for l in 0..8 {
                    lane[l] += c8[l] * f8[l];
                }
            }
        }
        for (offset, &ri) in rs.iter().enumerate() {
            for ((sum, err), column) in states.iter_mut().zip(&columns) {
                dot2_add(sum, err, column[start + offset], ri);
            }
        }
    }
    let xtf = with_xtf.then(|| {
        DVector::from_iterator(
            k,
            lanes.iter().zip(&columns).map(|(lane, column)| {
                let mut sum = combine_lanes(lane);
                for i in main..n {
                    sum += column[i] * f[i];
                }
                sum
            }),
        )
    });
    StepSums {
        r: (given.is_none() && keep_r).then(|| DVector::from_vec(plain)),
        f: DVector::from_vec(f),
        g: DVector::from_iterator(k, states.iter().map(|(s, e)| -(s + e))),
        xtf,
    }
}

/// For every column j of `x`, Dot2 of the term `first(j)` followed by the terms
/// (x[i, j], sign·r[i]) (`sign` ±1, so the products are those of the terms as written), with
/// the columns' sums carried side by side in one pass over the rows (independent chains of
/// operations the processor can overlap), each in the order of [`dot2`].
#[inline(always)]
fn dot2_columns_body(
    first: &dyn Fn(usize) -> (f64, f64),
    x: &DMatrix<f64>,
    r: &[f64],
    sign: f64,
) -> Vec<f64> {
    let n = x.nrows();
    let columns: Vec<&[f64]> = (0..x.ncols())
        .map(|j| &x.as_slice()[j * n..(j + 1) * n])
        .collect();
    let mut states: Vec<(f64, f64)> = (0..x.ncols())
        .map(|j| {
            let (a, c) = first(j);
            let (mut sum, mut err) = (0.0, 0.0);
            dot2_add(&mut sum, &mut err, a, c);
            (sum, err)
        })
        .collect();
    for (i, y) in r.iter().enumerate() {
        let factor = sign * y;
        for ((sum, err), column) in states.iter_mut().zip(&columns) {
            dot2_add(sum, err, column[i], factor);
        }
    }
    states.iter().map(|(sum, err)| sum + err).collect()
}

/// [`dot2_columns_body`] with hardware fused multiply-add.
///
/// # Safety
/// The CPU must support FMA (checked by the caller).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "fma")]
unsafe fn dot2_columns_fma(
    first: &dyn Fn(usize) -> (f64, f64),
    x: &DMatrix<f64>,
    r: &[f64],
    sign: f64,
) -> Vec<f64> {
    dot2_columns_body(first, x, r, sign)
}

/// Dot2 of `first(j)` then column j of `x` against `sign`·`r`, for every column at once
/// ([`dot2_columns_body`]).
fn dot2_columns(
    first: &dyn Fn(usize) -> (f64, f64),
    x: &DMatrix<f64>,
    r: &[f64],
    sign: f64,
) -> Vec<f64> {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("fma") {
        // SAFETY: the feature was detected at run time.
        return unsafe { dot2_columns_fma(first, x, r, sign) };
    }
    dot2_columns_body(first, x, r, sign)
}

/// y − X b per row, in compensated precision.
pub(crate) fn residual(x: &DMatrix<f64>, y: &DVector<f64>, b: &DVector<f64>) -> DVector<f64> {
    compensated_rows(&[(y.as_slice(), 1.0)], x, b)
}

impl PivotedQr {
    /// Refinement steps for this factorisation.
    fn steps(&self) -> usize {
        if self.ill_conditioned() {
            STEPS
        } else {
            STEPS_WELL_CONDITIONED
        }
    }

    /// Refines (r, b) by [`STEPS`] steps of augmented-system refinement
    /// ([`STEPS_WELL_CONDITIONED`] below `qr::REFINE_ABOVE`).
    pub(crate) fn refine(&self, x: &DMatrix<f64>, y: &DVector<f64>, b: &mut DVector<f64>) {
        // The first step's compensated f = y − r − X b carries what a plain r₀ rounds away,
        // so r₀ needs no compensation of its own (the same bits as a compensated r₀ on the
        // demo and the benchmark).
        let mut r: Option<DVector<f64>> = None;
        let steps = self.steps();
        for step in 0..steps {
            let last = step + 1 == steps;
            let sums = step_sums(&StepInputs {
                x,
                y,
                b,
                r: r.as_ref(),
                with_xtf: self.keeps_columns(),
                keep_r: !last,
            });
            let StepSums {
                r: start,
                f,
                g,
                xtf,
            } = sums;
            let (db, dr) = self.augmented_correction(&f, &g, xtf, !last);
            *b += db;
            r = match (start.or(r), dr) {
                (Some(r), Some(dr)) => Some(r + dr),
                _ => None,
            };
        }
    }
}

impl PivotedQr {
    /// (XᵀX)^{-1} refined from T Tᵀ, made symmetric. `x` must be the factorised matrix; a
    /// shared factorisation computes this once.
    ///
    /// * κ₁ of the scaled R at most `qr::REFINE_ABOVE`: [`NEWTON_STEPS`] Newton steps on the
    ///   compensated Gram matrix ([`newton_inverse`]), one Dot2 pass over the rows in all.
    /// * Above: each column refined as the solution b of the augmented system r + X b = 0,
    ///   Xᵀ r = −e_j (whose solution is b = (XᵀX)^{-1} e_j), a few passes per column; the
    ///   Gram matrix of a design that ill-conditioned would need more than twice the working
    ///   precision.
    pub(crate) fn refined_inverse(&self, x: &DMatrix<f64>) -> DMatrix<f64> {
        self.kept_inverse()
            .get_or_init(|| self.refine_inverse(x))
            .clone()
    }

    fn refine_inverse(&self, x: &DMatrix<f64>) -> DMatrix<f64> {
        let t = self.t_matrix();
        let start = &t * t.transpose();
        if !self.ill_conditioned() {
            let inverse = newton_inverse(start.clone(), &compensated_gram(x));
            // A Gram entry beyond the range of f64 (a column of size 1e-155, say) spreads
            // NaN through every entry of the Newton steps; the augmented system keeps the
            // entries it can represent.
            if inverse.iter().all(|v| v.is_finite()) {
                return inverse;
            }
        }
        let inverse = self.augmented_inverse(x, &start);
        (&inverse + inverse.transpose()) * 0.5
    }

    /// (XᵀX)^{-1} column by column on the augmented system, from `start`.
    fn augmented_inverse(&self, x: &DMatrix<f64>, start: &DMatrix<f64>) -> DMatrix<f64> {
        let mut inverse = start.clone();
        for j in 0..x.ncols() {
            let mut b = inverse.column(j).into_owned();
            let mut r = -(x * &b);
            let steps = self.steps();
            for step in 0..steps {
                let f = compensated_rows(&[(r.as_slice(), -1.0)], x, &b);
                let unit = |m: usize| (if m == j { -1.0 } else { 0.0 }, 1.0);
                let g = DVector::from_vec(dot2_columns(&unit, x, r.as_slice(), -1.0));
                let (db, dr) = self.augmented_correction(&f, &g, None, step + 1 < steps);
                b += db;
                if let Some(dr) = dr {
                    r += dr;
                }
            }
            inverse.set_column(j, &b);
        }
        inverse
    }
}

/// Rows of the compensated Gram matrix summed side by side, one running (sum, error) pair per
/// lane; row i goes to lane i mod [`GRAM_LANES`] (independent chains the processor can
/// overlap), and the lanes are combined in order at the end.
const GRAM_LANES: usize = 4;

/// XᵀX as unevaluated pairs (sum, error) per entry: entry (a, b) is the Dot2 state of
/// Σᵢ x_ia x_ib (Ogita, Rump and Oishi 2005), whose sum + error equals the exact value to
/// about n·eps² of Σᵢ |x_ia x_ib| (while the products stay clear of the subnormal range). The
/// rows are taken [`ROW_BLOCK`] at a time, so that the block of X is read from memory once
/// and its pairs of columns from cache (8 KiB a column: the whole block fits the fastest
/// cache for a few columns, the next one for the rest).
pub(crate) fn compensated_gram(x: &DMatrix<f64>) -> [DMatrix<f64>; 2] {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("fma") {
        // SAFETY: the feature was detected at run time.
        return unsafe { compensated_gram_fma(x) };
    }
    compensated_gram_body(x)
}

/// [`compensated_gram_body`] with hardware fused multiply-add.
///
/// # Safety
/// The CPU must support FMA (checked by the caller).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "fma")]
unsafe fn compensated_gram_fma(x: &DMatrix<f64>) -> [DMatrix<f64>; 2] {
    compensated_gram_body(x)
}

#[inline(always)]
fn compensated_gram_body(x: &DMatrix<f64>) -> [DMatrix<f64>; 2] {
    let (n, k) = x.shape();
    let columns: Vec<&[f64]> = (0..k).map(|j| &x.as_slice()[j * n..(j + 1) * n]).collect();
    let pairs: Vec<(usize, usize)> = (0..k).flat_map(|a| (a..k).map(move |b| (a, b))).collect();
    let mut states = vec![([0.0; GRAM_LANES], [0.0; GRAM_LANES]); pairs.len()];
    for start in (0..n).step_by(ROW_BLOCK) {
        let end = (start + ROW_BLOCK).min(n);
        for (&(a, b), (sum, err)) in pairs.iter().zip(states.iter_mut()) {
            let (ca, cb) = (&columns[a][start..end], &columns[b][start..end]);
            let mut rows = ca.chunks_exact(GRAM_LANES).zip(cb.chunks_exact(GRAM_LANES));
            for (ra, rb) in rows.by_ref() {
                for lane in 0..GRAM_LANES {
                    dot2_add(&mut sum[lane], &mut err[lane], ra[lane], rb[lane]);
                }
            }
            let tail = ca.len() - ca.len() % GRAM_LANES;
            for (lane, (&u, &v)) in ca[tail..].iter().zip(&cb[tail..]).enumerate() {
                dot2_add(&mut sum[lane], &mut err[lane], u, v);
            }
        }
    }
    let (mut hi, mut lo) = (DMatrix::zeros(k, k), DMatrix::zeros(k, k));
    for (&(a, b), (sum, err)) in pairs.iter().zip(&states) {
        let (mut s, mut e) = (0.0, 0.0);
        for lane in 0..GRAM_LANES {
            let (t, es) = two_sum(s, sum[lane]);
            s = t;
            e += es + err[lane];
        }
        for (i, j) in [(a, b), (b, a)] {
            hi[(i, j)] = s;
            lo[(i, j)] = e;
        }
    }
    [hi, lo]
}

/// Newton steps for the inverse of the Gram matrix G = hi + lo ([`compensated_gram`]) from
/// `start`: A ← A + A (I − G A), the residual I − G A in Dot2 with both parts of G, then made
/// symmetric (Schulz 1933). Each step squares the residual I − G A: on a generated
/// four-column design of 1,000,000 rows, T Tᵀ left a largest residual entry of 2.3e-6 and
/// one step reached the rounding floor (4.5e-11, unchanged by further steps); the second
/// step is the margin.
pub(crate) fn newton_inverse(start: DMatrix<f64>, gram: &[DMatrix<f64>; 2]) -> DMatrix<f64> {
    let k = start.nrows();
    let mut a = start;
    for _ in 0..NEWTON_STEPS {
        let residual = DMatrix::from_fn(k, k, |i, j| {
            let unit = std::iter::once((if i == j { 1.0 } else { 0.0 }, 1.0));
            let terms = gram
                .iter()
                .flat_map(|g| (0..k).map(move |m| (g[(i, m)], m)))
                .map(|(g, m)| (g, -a[(m, j)]));
            dot2(unit.chain(terms))
        });
        a += &a * residual;
    }
    (&a + a.transpose()) * 0.5
}

/// Newton steps of [`newton_inverse`].
const NEWTON_STEPS: usize = 2;

#[cfg(test)]
mod tests {
    use super::*;

    /// Awkwardly scaled invented numbers, so that the compensation terms are not zero.
    fn awkward(i: usize, j: usize) -> f64 {
        let t = (i * 31 + j * 17) as f64;
        (t * 0.7318).sin() * 10f64.powi((i % 7) as i32 - 3) + 1.0 / (1.0 + t)
    }

    /// The column-by-column kernels give exactly the bits of the row-by-row Dot2 definition
    /// (Ogita, Rump and Oishi 2005, algorithm Dot2), for the residual and both refinement
    /// right-hand sides.
    #[test]
    fn kernels_reproduce_dot2_bit_for_bit() {
        let (n, k) = (257, 5);
        let x = DMatrix::from_fn(n, k, awkward);
        let y = DVector::from_fn(n, |i, _| awkward(i, 11) * 1e3);
        let r = DVector::from_fn(n, |i, _| awkward(i, 23) * 1e-2);
        let b = DVector::from_fn(k, |j, _| awkward(j, 5));
        let rows = compensated_rows(&[(y.as_slice(), 1.0), (r.as_slice(), -1.0)], &x, &b);
        for i in 0..n {
            let terms = [(y[i], 1.0), (r[i], -1.0)].into_iter();
            let expected = dot2(terms.chain(x.row(i).iter().zip(b.iter()).map(|(a, c)| (*a, -c))));
            assert_eq!(rows[i].to_bits(), expected.to_bits(), "row {i}");
        }
        let plain = dot2_columns(&|_| (0.0, 0.0), &x, r.as_slice(), 1.0);
        let unit = |j: usize| (if j == 2 { -1.0 } else { 0.0 }, 1.0);
        let with_unit = dot2_columns(&unit, &x, r.as_slice(), -1.0);
        for j in 0..k {
            let col = x.column(j);
            let expected = dot2(col.iter().zip(r.iter()).map(|(a, c)| (*a, *c)));
            assert_eq!(plain[j].to_bits(), expected.to_bits(), "column {j}");
            let terms = std::iter::once(unit(j));
            let expected = dot2(terms.chain(col.iter().zip(r.iter()).map(|(a, c)| (*a, -c))));
            assert_eq!(
                with_unit[j].to_bits(),
                expected.to_bits(),
                "column {j} with a unit term"
            );
        }
        // One step's sums fused into one pass: the same bits as the kernels they replace,
        // with the residuals given and computed plainly (over more than one row block).
        let (n2, k2) = (2 * ROW_BLOCK + 37, 4);
        let x2 = DMatrix::from_fn(n2, k2, awkward);
        let y2 = DVector::from_fn(n2, |i, _| awkward(i, 11) * 1e3);
        let r2 = DVector::from_fn(n2, |i, _| awkward(i, 23) * 1e-2);
        let b2 = DVector::from_fn(k2, |j, _| awkward(j, 5));
        let same = |a: &DVector<f64>, b: &DVector<f64>| {
            a.len() == b.len()
                && a.iter()
                    .zip(b.iter())
                    .all(|(u, v)| u.to_bits() == v.to_bits())
        };
        let expected_g = |r: &DVector<f64>| {
            let sums = dot2_columns(&|_| (0.0, 0.0), &x2, r.as_slice(), 1.0);
            DVector::from_iterator(k2, sums.iter().map(|s| -s))
        };
        let sums = |r, with_xtf, keep_r| {
            step_sums(&StepInputs {
                x: &x2,
                y: &y2,
                b: &b2,
                r,
                with_xtf,
                keep_r,
            })
        };
        let given = sums(Some(&r2), true, true);
        assert!(given.r.is_none());
        let xtf = given.xtf.as_ref().expect("asked");
        assert!(same(xtf, &x2.tr_mul(&given.f)), "Xᵀf as nalgebra's tr_mul");
        assert!(sums(Some(&r2), false, true).xtf.is_none());
        let f = compensated_rows(&[(y2.as_slice(), 1.0), (r2.as_slice(), -1.0)], &x2, &b2);
        assert!(same(&given.f, &f), "f with r given");
        assert!(same(&given.g, &expected_g(&r2)), "g with r given");
        let fresh = sums(None, true, true);
        let r0 = fresh.r.expect("computed when not given");
        assert!(
            same(&r0, &(&y2 - &x2 * &b2)),
            "plain r₀ as nalgebra's product"
        );
        let f = compensated_rows(&[(y2.as_slice(), 1.0), (r0.as_slice(), -1.0)], &x2, &b2);
        assert!(same(&fresh.f, &f), "f with r₀ computed");
        assert!(same(&fresh.g, &expected_g(&r0)), "g with r₀ computed");
        let xtf = fresh.xtf.as_ref().expect("asked");
        assert!(same(xtf, &x2.tr_mul(&fresh.f)), "Xᵀf with r₀ computed");
        let dropped = sums(None, true, false);
        assert!(dropped.r.is_none(), "r₀ not kept for a last step");
        assert!(same(&dropped.f, &fresh.f) && same(&dropped.g, &fresh.g));
        // Row blocks: a residual family longer than one block, the same bits per row.
        let (n, k) = (2 * ROW_BLOCK + 37, 3);
        let x = DMatrix::from_fn(n, k, awkward);
        let y = DVector::from_fn(n, |i, _| awkward(i, 11) * 1e3);
        let b = DVector::from_fn(k, |j, _| awkward(j, 5));
        let rows = compensated_rows(&[(y.as_slice(), 1.0)], &x, &b);
        for i in (0..n).step_by(97).chain([ROW_BLOCK - 1, ROW_BLOCK, n - 1]) {
            let terms = std::iter::once((y[i], 1.0));
            let expected = dot2(terms.chain(x.row(i).iter().zip(b.iter()).map(|(a, c)| (*a, -c))));
            assert_eq!(rows[i].to_bits(), expected.to_bits(), "row {i} of {n}");
        }
    }
}

#[cfg(test)]
mod newton_tests {
    use super::*;

    /// Integer columns around 1e8, so that products exceed 2⁵³ and their sums need about 70
    /// bits: the (sum, error) pairs hold the exact Gram matrix (compared in i128).
    #[test]
    fn compensated_gram_is_exact_on_large_integers() {
        let n = 3 * ROW_BLOCK + 7;
        let value = |i: usize, j: usize| 1e8 as i64 + ((i * (31 + 7 * j)) % 1_000) as i64 - 500;
        let x = DMatrix::from_fn(n, 3, |i, j| value(i, j) as f64);
        let [hi, lo] = compensated_gram(&x);
        for a in 0..3 {
            for b in 0..3 {
                let exact: i128 = (0..n)
                    .map(|i| i128::from(value(i, a)) * i128::from(value(i, b)))
                    .sum();
                assert_eq!(hi[(a, b)] as i128 + lo[(a, b)] as i128, exact, "({a}, {b})");
            }
        }
    }

    /// The refined inverse of a long two-column design of small integers (generated) against
    /// its exact value adj(G)/det(G) (G summed in i128), and the same through the augmented
    /// refinement, which the Newton steps replace on well-conditioned designs.
    #[test]
    fn refined_inverse_is_exact_on_integers() {
        let n = 400_000;
        let xi = |i: usize| 50 + ((i * 7919) % 13) as i64 - 6;
        let x = DMatrix::from_fn(n, 2, |i, j| if j == 0 { 1.0 } else { xi(i) as f64 });
        let (mut s1, mut s2) = (0i128, 0i128);
        for i in 0..n {
            s1 += i128::from(xi(i));
            s2 += i128::from(xi(i) * xi(i));
        }
        let det = (n as i128 * s2 - s1 * s1) as f64;
        let exact =
            DMatrix::from_row_slice(2, 2, &[s2 as f64, -s1 as f64, -s1 as f64, n as f64]) / det;
        let qr = PivotedQr::new(&x).expect("full rank");
        assert!(!qr.ill_conditioned());
        let off = |a: &DMatrix<f64>| {
            a.iter()
                .zip(exact.iter())
                .map(|(u, v)| ((u - v) / v).abs())
                .fold(0.0, f64::max)
        };
        let t = qr.t_matrix();
        let newton = qr.refined_inverse(&x);
        let augmented = qr.augmented_inverse(&x, &(&t * t.transpose()));
        println!(
            "unrefined {:.1e}, Newton {:.1e}, augmented {:.1e}",
            off(&(&t * t.transpose())),
            off(&newton),
            off(&augmented)
        );
        assert!(
            off(&newton) < 1e-15,
            "Newton steps off by {:.1e}",
            off(&newton)
        );
    }
}
