//! Covariance estimators for least-squares and 2SLS coefficients.
//!
//! Role: turn a factorised design and a residual vector into the coefficient covariance the
//! plan asks for. The meats are computed in the coordinates of the thin Q factor: with
//! X T = Q₁ (see `qr`), a k × k "meat" A is built from the rows qᵢ of Q₁, so X'X is never
//! formed. Every sandwich is V = c · B A Bᵀ with the bread factor of [`PivotedQr::bread`]:
//! on a factorisation that keeps X (κ₁ ≤ 10³), B = (X'X)^{-1} T^{-ᵀ} with (X'X)^{-1} refined
//! (module `refine`), so the refined inverse stands on both sides of XᵀΩX; on one that keeps
//! Householder vectors (ill-conditioned designs), B = T. (Before version 0.3.0 of sworn,
//! V = c · T A Tᵀ throughout, with the unrefined T Tᵀ, whose rounding grows with n.)
//!
//! Conventions (n observations, k coefficients, u the residuals, hᵢ = ‖qᵢ‖² the leverage):
//! * Classical: s² (X'X)^{-1}, s² = u'u / (n − k), with the refined (X'X)^{-1}.
//! * HC0 (White 1980, Econometrica 48): A = Σ uᵢ² qᵢ qᵢᵀ, c = 1.
//! * HC1: HC0 · n / (n − k) (MacKinnon and White 1985, J. Econometrics 29).
//! * HC2: A = Σ uᵢ²/(1 − hᵢ) qᵢ qᵢᵀ; HC3: A = Σ uᵢ²/(1 − hᵢ)² qᵢ qᵢᵀ (MacKinnon and White
//!   1985). They are offered for OLS only; for 2SLS they are refused with
//!   [`EstimateError::CovarianceUnavailable`] because no leverage is fixed by the literature
//!   we follow. An observation with 1 − hᵢ ≤ max(n, k)·eps is [`EstimateError::UnitLeverage`].
//! * One-way cluster CR1 (Liang and Zeger 1986, Biometrika 73): A = Σ_g s_g s_gᵀ with
//!   s_g = Σ_{i∈g} qᵢ uᵢ, c = G/(G − 1) · (n − 1)/(n − k), the small-sample factor in common
//!   use. Needs G ≥ 2.
//! * Two-way (Cameron, Gelbach and Miller 2011, JBES 29): V = V_A + V_B − V_{A∩B}, each term
//!   a CR1 matrix with its own G (clusters of A, of B, of the non-empty A×B cells). If the sum
//!   has a negative eigenvalue, the eigenvalues are clamped at zero and V is rebuilt from its
//!   eigenvectors, the fix CGM (2011, section 2.3) propose. `clusters` reports min(G_A, G_B).
//!
//! * HAC (Newey and West 1987, Econometrica 55), Bartlett kernel over the observations'
//!   time positions (module `hac`): A = Σᵢ Σⱼ k(|pᵢ − pⱼ|/b) sᵢ sⱼᵀ with sᵢ = qᵢ uᵢ, and
//!   the HC1 factor c = n/(n − k).
//!
//! For 2SLS the design is X̂ (first-stage fitted regressors) and u the structural residuals.

use std::collections::HashMap;

use nalgebra::{DMatrix, DMatrixView, DVector, SymmetricEigen};

use super::hac::hac_meat;
use super::qr::{InputKey, PivotedQr, QRows};
use super::{Absorbed, EstimateError};

/// Which coefficient covariance to compute.
#[derive(Debug, Clone, PartialEq)]
pub enum CovSpec {
    /// s² (X'X)^{-1} with s² = RSS / (n − k).
    Classical,
    /// White's heteroskedasticity-consistent sandwich.
    Hc0,
    /// HC0 scaled by n / (n − k).
    Hc1,
    /// Leverage-weighted sandwich, uᵢ² / (1 − hᵢ) (OLS only).
    Hc2,
    /// Leverage-weighted sandwich, uᵢ² / (1 − hᵢ)² (OLS only).
    Hc3,
    /// One-way clustered (CR1); `ids` gives a dense 0-based cluster index per observation.
    Cluster {
        /// Cluster index of each observation.
        ids: Vec<usize>,
    },
    /// Two-way clustered (Cameron, Gelbach and Miller 2011).
    TwoWay {
        /// First clustering dimension, one dense 0-based index per observation.
        first: Vec<usize>,
        /// Second clustering dimension, one dense 0-based index per observation.
        second: Vec<usize>,
    },
    /// Heteroskedasticity and autocorrelation consistent, Bartlett kernel (module `hac`).
    Hac {
        /// Position of each observation in time order, strictly increasing.
        positions: Vec<usize>,
        /// Bandwidth b: observations d apart get weight 1 − d/b (b ≥ 1).
        bandwidth: f64,
    },
}

impl CovSpec {
    /// Short lowercase name used in error messages.
    pub fn name(&self) -> &'static str {
        match self {
            CovSpec::Classical => "classical",
            CovSpec::Hc0 => "hc0",
            CovSpec::Hc1 => "hc1",
            CovSpec::Hc2 => "hc2",
            CovSpec::Hc3 => "hc3",
            CovSpec::Cluster { .. } => "cluster",
            CovSpec::TwoWay { .. } => "two-way cluster",
            CovSpec::Hac { .. } => "hac",
        }
    }

    /// `key` with everything this specification says written into it (kind, cluster ids,
    /// time positions, bandwidth), for keeping results computed under it.
    pub(crate) fn keyed(&self, key: InputKey) -> InputKey {
        let key = key.text(self.name());
        match self {
            CovSpec::Classical | CovSpec::Hc0 | CovSpec::Hc1 | CovSpec::Hc2 | CovSpec::Hc3 => key,
            CovSpec::Cluster { ids } => key.indices(ids),
            CovSpec::TwoWay { first, second } => key.indices(first).indices(second),
            CovSpec::Hac {
                positions,
                bandwidth,
            } => key.indices(positions).numbers(&[*bandwidth]),
        }
    }
}

/// A covariance matrix and, when clustered, the number of clusters used for inference.
#[derive(Debug, Clone)]
pub(crate) struct Covariance {
    pub(crate) cov: DMatrix<f64>,
    pub(crate) clusters: Option<usize>,
}

/// Whether leverage-based estimators (HC2, HC3) are allowed for this estimator.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Leverage {
    Allowed,
    Refused(&'static str),
}

/// Computes the requested covariance for the design factorised in `qr`.
///
/// # Formula
/// See the module documentation; V = c · B A Bᵀ.
///
/// # Errors
/// Cluster ids of the wrong length, fewer than two clusters, HC2/HC3 where refused or at a
/// unit-leverage observation.
pub(crate) fn covariance(
    qr: &PivotedQr,
    x: &DMatrix<f64>,
    resid: &DVector<f64>,
    spec: &CovSpec,
    leverage: Leverage,
    absorbed: &Absorbed,
) -> Result<Covariance, EstimateError> {
    let n = resid.len();
    // k counts absorbed coefficients for s² and HC1; k_cluster leaves out nested ones.
    let k = qr.ncols() + absorbed.df;
    let k_cluster = k - absorbed.nested_df;
    let sandwich = |meat: DMatrix<f64>, c: f64| qr.sandwich(x, &meat) * c;
    let plain = |cov| Covariance {
        cov,
        clusters: None,
    };
    match spec {
        CovSpec::Classical => {
            let s2 = resid.norm_squared() / (n - k) as f64;
            Ok(plain(qr.refined_inverse(x) * s2))
        }
        CovSpec::Hc0 | CovSpec::Hc1 | CovSpec::Hc2 | CovSpec::Hc3 => {
            let q1 = qr.q_rows();
            let weights = hc_weights(qr, resid, spec, leverage, absorbed)?;
            let c = if *spec == CovSpec::Hc1 {
                n as f64 / (n - k) as f64
            } else {
                1.0
            };
            let meat = q1.summed(|start, q| {
                Ok::<_, EstimateError>(weighted_gram(q, &weights[start..start + q.nrows()]))
            })?;
            Ok(plain(sandwich(meat, c)))
        }
        CovSpec::Cluster { ids } => {
            let (sums, g) = cluster_sums(&qr.q_rows(), resid, ids)?;
            let meat = sums.transpose() * &sums;
            let cov = sandwich(meat, cr1_factor(g, n, k_cluster));
            Ok(Covariance {
                cov,
                clusters: Some(g),
            })
        }
        CovSpec::Hac {
            positions,
            bandwidth,
        } => {
            let meat = hac_meat(&scores(&qr.thin_q(), resid), positions, *bandwidth)?;
            Ok(plain(sandwich(meat, n as f64 / (n - k) as f64)))
        }
        CovSpec::TwoWay { first, second } => {
            let (v, clusters) = two_way_unclamped(qr, x, resid, first, second, absorbed)?;
            Ok(Covariance {
                cov: clamp_negative_eigenvalues(v),
                clusters: Some(clusters),
            })
        }
    }
}

/// The two-way clustered covariance before its eigenvalue clamp, and the smaller of the two
/// cluster counts: V_A + V_B − V_{A∩B}, each a CR1 sandwich over the design factorised in
/// `qr` (Cameron, Gelbach and Miller 2011). Callers clamp it ([`clamp_negative_eigenvalues`])
/// after any further transformation (the k-class estimators multiply it by their bread
/// correction first).
pub(crate) fn two_way_unclamped(
    qr: &PivotedQr,
    x: &DMatrix<f64>,
    resid: &DVector<f64>,
    first: &[usize],
    second: &[usize],
    absorbed: &Absorbed,
) -> Result<(DMatrix<f64>, usize), EstimateError> {
    let n = resid.len();
    let kc = qr.ncols() + absorbed.df - absorbed.nested_df;
    let scores = scores(&qr.thin_q(), resid);
    let (meat_a, ga) = cluster_meat(&scores, first)?;
    let (meat_b, gb) = cluster_meat(&scores, second)?;
    let (meat_ab, gab) = cluster_meat(&scores, &intersect(first, second))?;
    let meat = meat_a * cr1_factor(ga, n, kc) + meat_b * cr1_factor(gb, n, kc)
        - meat_ab * cr1_factor(gab, n, kc);
    Ok((qr.sandwich(x, &meat), ga.min(gb)))
}

/// The per-observation weights ωᵢ of the HC meat Σ ωᵢ qᵢ qᵢᵀ for the design factorised in
/// `qr`.
pub(crate) fn hc_weights(
    qr: &PivotedQr,
    resid: &DVector<f64>,
    spec: &CovSpec,
    leverage: Leverage,
    absorbed: &Absorbed,
) -> Result<Vec<f64>, EstimateError> {
    let power = match spec {
        CovSpec::Hc2 => 1,
        CovSpec::Hc3 => 2,
        _ => return Ok(resid.iter().map(|u| u * u).collect()),
    };
    if let Leverage::Refused(estimator) = leverage {
        let kind = spec.name();
        return Err(EstimateError::CovarianceUnavailable { estimator, kind });
    }
    let extra = match (&absorbed.leverage, absorbed.df) {
        (Some(h), _) => Some(h),
        (None, 0) => None,
        (None, _) => {
            let kind = spec.name();
            let estimator = "absorbed fixed effects without their leverage";
            return Err(EstimateError::CovarianceUnavailable { estimator, kind });
        }
    };
    let n = resid.len();
    let tol = n.max(qr.ncols()) as f64 * f64::EPSILON;
    let leverages = qr.leverages()?;
    (0..n)
        .map(|i| {
            let h_absorbed = extra.map_or(0.0, |h| h[i]);
            let one_minus_h = 1.0 - leverages[i] - h_absorbed;
            if one_minus_h <= tol {
                return Err(EstimateError::UnitLeverage { observation: i });
            }
            Ok(resid[i] * resid[i] / one_minus_h.powi(power))
        })
        .collect()
}

/// Σ ωᵢ qᵢ qᵢᵀ for the rows qᵢ of `q1`.
fn weighted_gram(q1: &DMatrix<f64>, weights: &[f64]) -> DMatrix<f64> {
    scaled_gram(q1, weights, Scaled::Right, ROW_BLOCK)
}

/// Rows per block of [`scaled_gram`]: a multiple of matrixmultiply's depth block for f64
/// (`D_KC` = 256), so the blocks' products add up in the order of one product.
pub(crate) const ROW_BLOCK: usize = 32 * 256;

/// Which factors of [`scaled_gram`] have their rows scaled.
#[derive(Clone, Copy)]
pub(crate) enum Scaled {
    /// `m`ᵀ (F `m`): Σ fᵢ mᵢ mᵢᵀ.
    Right,
    /// (F `m`)ᵀ (F `m`): Σ fᵢ² mᵢ mᵢᵀ, the products formed as (fᵢ mᵢⱼ)(fᵢ mᵢₗ).
    Both,
}

/// `transpose_times(m, &rows_scaled(m, f))` (or with both factors scaled), the same bits,
/// without the n × k scaled copy: the rows go through in blocks of `block` rows, each
/// block's scaled rows written to a small buffer and its product added into the result.
///
/// Why the bits are the same: matrixmultiply splits the inner dimension (here the rows) into
/// depth blocks of 256 and adds each block's product into C with one fused multiply-add per
/// entry, the first block with β = 0 and every later one with β = 1. Blocks of a multiple of
/// 256 rows, the first with β = 0 and the rest with β = 1, make exactly those calls. The last
/// block takes up a remainder of five rows or fewer (nalgebra's small-shape path, which sums
/// differently, starts there). Shapes that take nalgebra's small path as a whole keep the
/// copy. A test compares the bits at block boundaries.
pub(crate) fn scaled_gram(
    m: &DMatrix<f64>,
    factors: &[f64],
    scaled: Scaled,
    block: usize,
) -> DMatrix<f64> {
    const SMALL: usize = 5;
    let (n, k) = m.shape();
    debug_assert!(block.is_multiple_of(256) && block > SMALL);
    if n <= block + SMALL || k <= SMALL {
        let right = rows_scaled(m, factors);
        return match scaled {
            Scaled::Right => transpose_times(m, &right),
            Scaled::Both => transpose_times(&right, &right),
        };
    }
    let mut out = DMatrix::zeros(k, k);
    let mut buffer = vec![0.0; (block + SMALL) * k];
    let mut start = 0;
    while start < n {
        let end = if n - start <= block + SMALL {
            n
        } else {
            start + block
        };
        let rows = end - start;
        let scaled_rows = &mut buffer[..rows * k];
        for (target, column) in scaled_rows.chunks_mut(rows).zip(m.as_slice().chunks(n)) {
            for ((t, x), f) in target
                .iter_mut()
                .zip(&column[start..end])
                .zip(&factors[start..end])
            {
                *t = x * f;
            }
        }
        let right = DMatrixView::from_slice(scaled_rows, rows, k);
        let beta = if start == 0 { 0.0 } else { 1.0 };
        match scaled {
            Scaled::Right => {
                let left =
                    DMatrixView::from_slice_with_strides(&m.as_slice()[start..], k, rows, n, 1);
                out.gemm(1.0, &left, &right, beta);
            }
            Scaled::Both => {
                let left = DMatrixView::from_slice_with_strides(scaled_rows, k, rows, rows, 1);
                out.gemm(1.0, &left, &right, beta);
            }
        }
        start = end;
    }
    out
}

/// `a`ᵀ `b` for tall matrices with the same rows, the same bits as `a.transpose() * b`,
/// without the transposed copy of `a` when nalgebra multiplies through matrixmultiply (more
/// than five rows and columns on every side): `a`'s transpose is then given as a view with
/// its strides swapped, and matrixmultiply copies both operands into packed panels before its
/// kernel reads them, so the strides change no arithmetic. Smaller shapes take nalgebra's
/// column-by-column path, which does not take a strided view, so `a` is transposed there as
/// before. A test compares both sides of the switch.
pub(crate) fn transpose_times(a: &DMatrix<f64>, b: &DMatrix<f64>) -> DMatrix<f64> {
    const SMALL: usize = 5;
    let (n, k) = a.shape();
    if n <= SMALL || k <= SMALL || b.ncols() <= SMALL {
        return transpose_times_small(a, b);
    }
    let at = DMatrixView::from_slice_with_strides(a.as_slice(), k, n, n, 1);
    at * b
}

/// nalgebra's product `a.transpose() * b` for shapes it does not hand to matrixmultiply,
/// without the transposed copy of `a`: nalgebra forms each column of the product as a sum
/// over the rows in row order, a₀ᵢb₀ⱼ first and then aₜᵢbₜⱼ + s for t = 1, 2, … (one rounding
/// per product and per addition, no fused multiply-add). Here eight such sums run side by
/// side in one pass over the rows; each keeps its own order, so the bits are nalgebra's.
fn transpose_times_small(a: &DMatrix<f64>, b: &DMatrix<f64>) -> DMatrix<f64> {
    const SIDE: usize = 8;
    let (n, k) = a.shape();
    let mut out = DMatrix::zeros(k, b.ncols());
    if n == 0 {
        return out;
    }
    let columns: Vec<&[f64]> = a.as_slice().chunks(n).collect();
    for (j, other) in b.as_slice().chunks(n).enumerate() {
        for (group, block) in columns.chunks(SIDE).enumerate() {
            let mut sums = [0.0; SIDE];
            for (s, column) in sums.iter_mut().zip(block) {
                *s = column[0] * other[0];
            }
            for i in 1..n {
                for (s, column) in sums.iter_mut().zip(block) {
                    *s += column[i] * other[i];
                }
            }
            for (t, s) in sums.iter().take(block.len()).enumerate() {
                out[(group * SIDE + t, j)] = *s;
            }
        }
    }
    out
}

/// The score rows qᵢ uᵢ (n × k).
fn scores(q1: &DMatrix<f64>, resid: &DVector<f64>) -> DMatrix<f64> {
    rows_scaled(q1, resid.as_slice())
}

/// `m` with row i multiplied by `factors[i]`, written column by column in one pass
/// (contiguous memory; the same products as scaling each row).
pub(crate) fn rows_scaled(m: &DMatrix<f64>, factors: &[f64]) -> DMatrix<f64> {
    let n = m.nrows();
    let mut out = Vec::with_capacity(m.len());
    for column in m.as_slice().chunks(n.max(1)) {
        out.extend(column.iter().zip(factors).map(|(x, f)| x * f));
    }
    DMatrix::from_vec(n, m.ncols(), out)
}

/// Σ_g s_g s_gᵀ with s_g the within-cluster sums of the score rows, and the cluster count.
fn cluster_meat(
    scores: &DMatrix<f64>,
    ids: &[usize],
) -> Result<(DMatrix<f64>, usize), EstimateError> {
    let (n, k) = scores.shape();
    if ids.len() != n {
        return Err(EstimateError::ClusterLength { n, ids: ids.len() });
    }
    let (dense, g) = densify(ids);
    if g < 2 {
        return Err(EstimateError::TooFewClusters { clusters: g });
    }
    let mut sums = DMatrix::zeros(g, k);
    for (i, &c) in dense.iter().enumerate() {
        let mut row = sums.row_mut(c);
        row += scores.row(i);
    }
    Ok((sums.transpose() * &sums, g))
}

/// The within-cluster sums s_g = Σ_{i∈g} qᵢ uᵢ (G × k, clusters in order of first
/// appearance) and the cluster count, in one pass over the rows without an n × k score matrix
/// (the same products and the same order of summation as summing the score rows).
pub(crate) fn cluster_sums(
    q1: &QRows,
    resid: &DVector<f64>,
    ids: &[usize],
) -> Result<(DMatrix<f64>, usize), EstimateError> {
    let (n, k) = (q1.nrows(), q1.ncols());
    if ids.len() != n {
        return Err(EstimateError::ClusterLength { n, ids: ids.len() });
    }
    let (dense, g) = densify(ids);
    if g < 2 {
        return Err(EstimateError::TooFewClusters { clusters: g });
    }
    // One pass over the rows, each cluster's k sums side by side (row-major); every sum
    // still adds its terms in row order, as a pass per column did.
    let mut sums = vec![0.0; g * k];
    q1.blocks::<EstimateError>(|start, q| {
        let rows = q.nrows();
        let columns: Vec<&[f64]> = q.as_slice().chunks(rows.max(1)).collect();
        let block = dense[start..start + rows]
            .iter()
            .zip(&resid.as_slice()[start..]);
        for (i, (&c, u)) in block.enumerate() {
            let target = &mut sums[c * k..(c + 1) * k];
            for (t, column) in target.iter_mut().zip(&columns) {
                *t += column[i] * u;
            }
        }
        Ok(())
    })?;
    Ok((DMatrix::from_row_slice(g, k, &sums), g))
}

/// Relabels arbitrary ids as 0..G in order of first appearance.
pub(crate) fn densify<T: std::hash::Hash + Eq + Copy>(ids: &[T]) -> (Vec<usize>, usize) {
    let mut map = HashMap::new();
    let dense = ids
        .iter()
        .map(|id| {
            let next = map.len();
            *map.entry(*id).or_insert(next)
        })
        .collect();
    (dense, map.len())
}

/// Cluster index of the intersection cells A × B (only non-empty cells are counted).
pub(crate) fn intersect(first: &[usize], second: &[usize]) -> Vec<usize> {
    let pairs: Vec<(usize, usize)> = first.iter().copied().zip(second.iter().copied()).collect();
    densify(&pairs).0
}

/// The CR1 small-sample factor G/(G − 1) · (n − 1)/(n − k).
pub(crate) fn cr1_factor(g: usize, n: usize, k: usize) -> f64 {
    (g as f64 / (g - 1) as f64) * ((n - 1) as f64 / (n - k) as f64)
}

/// Replaces negative eigenvalues of a symmetric matrix by zero (CGM 2011, section 2.3);
/// returns the matrix unchanged when it is already positive semi-definite.
pub(crate) fn clamp_negative_eigenvalues(v: DMatrix<f64>) -> DMatrix<f64> {
    let sym = (&v + v.transpose()) * 0.5;
    let eigen = SymmetricEigen::new(sym);
    if eigen.eigenvalues.iter().all(|&l| l >= 0.0) {
        return v;
    }
    let clamped = eigen.eigenvalues.map(|l| l.max(0.0));
    &eigen.eigenvectors * DMatrix::from_diagonal(&clamped) * eigen.eigenvectors.transpose()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: [[1, 2], [2, 1]] has eigenvalues 3 and −1 with eigenvectors
    /// (1, 1)/√2 and (1, −1)/√2; clamping −1 to 0 leaves 3 · vvᵀ = [[1.5, 1.5], [1.5, 1.5]].
    #[test]
    fn clamp_removes_negative_eigenvalue() {
        let v = DMatrix::from_row_slice(2, 2, &[1.0, 2.0, 2.0, 1.0]);
        let fixed = clamp_negative_eigenvalues(v);
        for x in fixed.iter() {
            assert!((x - 1.5).abs() < 1e-14, "{fixed}");
        }
    }

    /// A positive definite matrix is returned bit for bit.
    #[test]
    fn clamp_keeps_positive_definite() {
        let v = DMatrix::from_row_slice(2, 2, &[2.0, 0.5, 0.5, 1.0]);
        assert_eq!(clamp_negative_eigenvalues(v.clone()), v);
    }

    /// The product without the transposed copy is nalgebra's bits, on both sides of the
    /// size where nalgebra switches to matrixmultiply.
    #[test]
    fn transpose_times_is_nalgebras_product() {
        let value = |i: usize, j: usize| ((i * 13 + j * 7) as f64 * 0.61).sin() * (1.0 + j as f64);
        for n in [0, 1, 4, 6, 9, 40, 301] {
            for (k, m) in [
                (1, 1),
                (3, 3),
                (5, 6),
                (6, 6),
                (8, 1),
                (9, 9),
                (12, 4),
                (17, 2),
                (9, 1),
                (16, 5),
            ] {
                let a = DMatrix::from_fn(n, k, value);
                let b = DMatrix::from_fn(n, m, |i, j| value(i + 3, j + 2));
                let expected = a.transpose() * &b;
                let got = transpose_times(&a, &b);
                let same = got
                    .iter()
                    .zip(expected.iter())
                    .all(|(x, y)| x.to_bits() == y.to_bits());
                assert!(
                    same && got.shape() == expected.shape(),
                    "n = {n}, k = {k}, m = {m}"
                );
            }
        }
    }

    /// The blocked Gram matrices are the bits of the product of the whole scaled copy: at
    /// a small block (two depth blocks) across many lengths, including remainders of five
    /// rows or fewer, and at the production block just past one and two blocks.
    #[test]
    fn scaled_gram_is_the_product_of_the_scaled_copy() {
        let value = |i: usize, j: usize| ((i * 31 + j * 17) as f64 * 0.37).sin() * (1.0 + j as f64);
        let check = |n: usize, k: usize, block: usize| {
            let m = DMatrix::from_fn(n, k, value);
            let f: Vec<f64> = (0..n)
                .map(|i| ((i * 7) as f64 * 0.11).cos() * 2.5)
                .collect();
            let scaled = rows_scaled(&m, &f);
            for (kind, expected) in [
                (Scaled::Right, transpose_times(&m, &scaled)),
                (Scaled::Both, transpose_times(&scaled, &scaled)),
            ] {
                let got = scaled_gram(&m, &f, kind, block);
                let same = got
                    .iter()
                    .zip(expected.iter())
                    .all(|(x, y)| x.to_bits() == y.to_bits());
                assert!(same && got.shape() == expected.shape(), "n = {n}, k = {k}");
            }
        };
        for n in [
            1, 6, 300, 512, 513, 517, 518, 1023, 1024, 1029, 1030, 1500, 2565,
        ] {
            for k in [1, 5, 6, 9, 17] {
                check(n, k, 512);
            }
        }
        for n in [ROW_BLOCK + 6, 2 * ROW_BLOCK + 3, 2 * ROW_BLOCK + 700] {
            check(n, 8, ROW_BLOCK);
        }
    }

    /// The one-pass cluster sums are the bits of summing the score rows per cluster.
    #[test]
    fn cluster_sums_are_the_summed_score_rows() {
        let (n, k) = (503, 4);
        let q1 = DMatrix::from_fn(n, k, |i, j| {
            ((i * 29 + j * 11) as f64 * 0.41).sin() / (1.0 + j as f64)
        });
        let u = DVector::from_fn(n, |i, _| ((i * 7) as f64 * 0.13).cos() * 3.0);
        let ids: Vec<usize> = (0..n).map(|i| (i * 37) % 23 + 100).collect();
        let rows = QRows::Thin(std::sync::Arc::new(q1.clone()));
        let (sums, g) = cluster_sums(&rows, &u, &ids).expect("valid");
        let (dense, g_expected) = densify(&ids);
        assert_eq!(g, g_expected);
        let mut expected = DMatrix::zeros(g, k);
        for (i, &c) in dense.iter().enumerate() {
            let mut row = expected.row_mut(c);
            row += q1.row(i) * u[i];
        }
        let same = sums
            .iter()
            .zip(expected.iter())
            .all(|(a, b)| a.to_bits() == b.to_bits());
        assert!(same);
    }

    /// Dense relabelling and cell counting, checked by hand.
    #[test]
    fn intersection_cells() {
        let cells = intersect(&[0, 0, 1, 1, 0], &[0, 1, 0, 1, 0]);
        assert_eq!(cells, vec![0, 1, 2, 3, 0]);
    }
}

#[cfg(test)]
mod product_tests {
    use super::*;

    /// The sandwich (XᵀX)⁻¹ M (XᵀX)⁻¹ written out, for a well-conditioned design whose
    /// factorisation forms the rows of Q₁ as X T in blocks (more rows than one block).
    #[test]
    fn sandwiches_from_row_blocks_are_the_textbook_formula() {
        let n = 2 * crate::estimate::qr::Q_BLOCK + 123;
        let k = 4;
        let x = DMatrix::from_fn(n, k, |i, j| {
            if j == 0 {
                1.0
            } else {
                ((i * (7 + j * 3)) as f64 * 0.37).sin() * (1.0 + j as f64)
            }
        });
        let u = DVector::from_fn(n, |i, _| {
            ((i * 13) as f64 * 0.21).cos() * (1.0 + (i % 5) as f64)
        });
        let qr = PivotedQr::new(&x).expect("full rank");
        assert!(!qr.ill_conditioned());
        let xtx_inv = (x.transpose() * &x).try_inverse().expect("invertible");
        let ids: Vec<usize> = (0..n).map(|i| (i * 31) % 97).collect();
        for spec in [CovSpec::Hc1, CovSpec::Cluster { ids: ids.clone() }] {
            let got = covariance(&qr, &x, &u, &spec, Leverage::Allowed, &Absorbed::NONE)
                .expect("covariance")
                .cov;
            let (meat, c) = match &spec {
                CovSpec::Cluster { .. } => {
                    let mut sums = DMatrix::zeros(97, k);
                    for i in 0..n {
                        let mut row = sums.row_mut(ids[i]);
                        row += x.row(i) * u[i];
                    }
                    (sums.transpose() * &sums, cr1_factor(97, n, k))
                }
                _ => {
                    let mut m = DMatrix::zeros(k, k);
                    for i in 0..n {
                        m += x.row(i).transpose() * x.row(i) * (u[i] * u[i]);
                    }
                    (m, n as f64 / (n - k) as f64)
                }
            };
            let want = &xtx_inv * meat * &xtx_inv * c;
            let rel = (&got - &want).amax() / want.amax();
            assert!(rel < 1e-12, "{spec:?}: {rel}");
        }
    }

    /// The HC0 sandwich against its exact value on a long design of small integers
    /// (generated), where XᵀX and XᵀΩX are sums of integers (exact in i128) and
    /// V = adj(G) S adj(G) / det(G)² is exact until the last division. The bread from the
    /// factorisation's own T Tᵀ is off by the rounding of its long sums (about 1e-13 relative
    /// here: 5.0e-12 when this test was written); the refined bread gave 2.5e-15.
    #[test]
    fn sandwich_bread_is_refined() {
        let n = 400_000;
        let xi = |i: usize| 50 + ((i * 7919) % 13) as i64 - 6;
        let ui = |i: usize| ((i * 104_729) % 11) as i64 - 5;
        let x = DMatrix::from_fn(n, 2, |i, j| if j == 0 { 1.0 } else { xi(i) as f64 });
        let u = DVector::from_fn(n, |i, _| ui(i) as f64);
        let (mut g, mut s) = ([[0i128; 2]; 2], [[0i128; 2]; 2]);
        for i in 0..n {
            let row = [1i128, i128::from(xi(i))];
            let w = i128::from(ui(i) * ui(i));
            for a in 0..2 {
                for b in 0..2 {
                    g[a][b] += row[a] * row[b];
                    s[a][b] += w * row[a] * row[b];
                }
            }
        }
        let det = g[0][0] * g[1][1] - g[0][1] * g[1][0];
        let adj = [[g[1][1], -g[0][1]], [-g[1][0], g[0][0]]];
        let product = |p: [[i128; 2]; 2], q: [[i128; 2]; 2]| {
            let mut m = [[0i128; 2]; 2];
            for a in 0..2 {
                for b in 0..2 {
                    m[a][b] = (0..2).map(|c| p[a][c] * q[c][b]).sum();
                }
            }
            m
        };
        let numerator = product(product(adj, s), adj);
        let det2 = det as f64 * det as f64;
        let qr = PivotedQr::new(&x).expect("full rank");
        assert!(!qr.ill_conditioned());
        let got = covariance(
            &qr,
            &x,
            &u,
            &CovSpec::Hc0,
            Leverage::Allowed,
            &Absorbed::NONE,
        )
        .expect("covariance")
        .cov;
        let t = qr.t_matrix();
        let q1 = &x * &t;
        let mut weighted = q1.clone();
        for (i, mut row) in weighted.row_iter_mut().enumerate() {
            row *= u[i] * u[i];
        }
        let meat = q1.transpose() * weighted;
        let unrefined = &t * meat * t.transpose();
        let (mut worst, mut worst_unrefined) = (0.0f64, 0.0f64);
        for a in 0..2 {
            for b in 0..2 {
                let exact = numerator[a][b] as f64 / det2;
                worst = worst.max(((got[(a, b)] - exact) / exact).abs());
                worst_unrefined = worst_unrefined.max(((unrefined[(a, b)] - exact) / exact).abs());
            }
        }
        println!("refined bread {worst:.1e}, unrefined {worst_unrefined:.1e}");
        assert!(worst < 1e-14, "refined bread off by {worst:.1e}");
    }

    /// An ill-conditioned design keeps its Householder vectors, and its meat's rows come from
    /// their Q₁: the bread stays T, the factor that belongs with that Q₁.
    #[test]
    fn householder_factorisations_keep_t_as_their_bread() {
        let n = 301;
        let x = DMatrix::from_fn(n, 6, |i, j| (1.0 + i as f64 / n as f64).powi(j as i32));
        let qr = PivotedQr::new(&x).expect("full rank");
        assert!(qr.ill_conditioned());
        let (bread, t) = (qr.bread(&x), qr.t_matrix());
        assert!(bread
            .iter()
            .zip(t.iter())
            .all(|(a, b)| a.to_bits() == b.to_bits()));
    }

    /// A row that alone carries a direction of the column space (leverage 1, though no
    /// column is a dummy for it) is refused by HC2 and HC3 on a factorisation that keeps R
    /// and X: the leverages come from an orthonormal Q₁, not from the rows of X T.
    #[test]
    fn unit_leverage_through_a_combination_is_refused() {
        let mut checked = 0;
        for n in [8, 9, 10, 12, 40] {
            for seed in 0..40 {
                let f = |i: usize, j: usize| ((i * (3 + j) + seed * 7) as f64 * 0.61).sin();
                let mut x = DMatrix::from_fn(n, 4, |i, j| if j == 0 { 1.0 } else { f(i, j) });
                // Columns 1 and 2 nearly collinear, so that κ is in the hundreds.
                let delta = [0.2, 0.05, 0.02][seed % 3];
                for i in 0..n {
                    x[(i, 2)] = x[(i, 1)] + delta * f(i, 5);
                }
                for i in 0..n {
                    let extra = if i == 4 { 2.0 + seed as f64 * 0.1 } else { 0.0 };
                    x[(i, 3)] = x[(i, 1)] + 0.5 * x[(i, 2)] + extra;
                }
                let qr = PivotedQr::new(&x).expect("full rank");
                if qr.ill_conditioned() {
                    continue;
                }
                // The leverages are those of the Householder Q₁, bit for bit (the rows of X T
                // differ from them in the last bits, by up to about κ·ε).
                let householder = PivotedQr::with_householder_vectors(&x).expect("rank");
                let want: Vec<u64> = householder
                    .thin_q()
                    .row_iter()
                    .map(|q| q.norm_squared().to_bits())
                    .collect();
                let got: Vec<u64> = qr
                    .leverages()
                    .expect("leverages")
                    .iter()
                    .map(|h| h.to_bits())
                    .collect();
                assert_eq!(got, want, "n = {n}, seed {seed}");
                let u = DVector::from_fn(n, |i, _| f(i, 7) + 0.1);
                for spec in [CovSpec::Hc2, CovSpec::Hc3] {
                    let got = covariance(&qr, &x, &u, &spec, Leverage::Allowed, &Absorbed::NONE);
                    assert_eq!(
                        got.map(|c| c.cov),
                        Err(EstimateError::UnitLeverage { observation: 4 }),
                        "n = {n}, seed {seed}, {spec:?}"
                    );
                }
                checked += 1;
            }
        }
        assert!(checked >= 100, "only {checked} well-conditioned designs");
    }

    /// The quadratic form of two residual vectors, built over the same row blocks, gives
    /// the covariance of each combination of them (HC1, HC3 and clusters).
    #[test]
    fn quadratic_meats_from_row_blocks_match_the_covariance() {
        let n = 2 * crate::estimate::qr::Q_BLOCK + 57;
        let k = 3;
        let x = DMatrix::from_fn(n, k, |i, j| {
            if j == 0 {
                1.0
            } else {
                ((i * (5 + j * 4)) as f64 * 0.29).cos() * (2.0 + j as f64)
            }
        });
        let e1 = DVector::from_fn(n, |i, _| ((i * 17) as f64 * 0.11).sin());
        let e2 = DVector::from_fn(n, |i, _| ((i * 23) as f64 * 0.07).cos() * 0.5);
        let qr = PivotedQr::new(&x).expect("full rank");
        let ids: Vec<usize> = (0..n).map(|i| i / 101).collect();
        for spec in [CovSpec::Hc1, CovSpec::Hc3, CovSpec::Cluster { ids }] {
            let meat = crate::estimate::quadratic_meat::quadratic_meat(
                &qr,
                &x,
                &e1,
                &e2,
                &spec,
                Leverage::Allowed,
                &Absorbed::NONE,
            )
            .expect("meat")
            .expect("a quadratic form for this covariance");
            for (a, b) in [(1.0, 0.0), (0.0, 1.0), (0.7, -1.3)] {
                let e = &e1 * a - &e2 * b;
                let want = covariance(&qr, &x, &e, &spec, Leverage::Allowed, &Absorbed::NONE)
                    .expect("covariance")
                    .cov;
                let rel = (meat.covariance(a, b) - &want).amax() / want.amax();
                assert!(rel < 1e-12, "{spec:?} ({a}, {b}): {rel}");
            }
        }
    }
}
