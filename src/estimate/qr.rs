//! Householder QR factorisation with column pivoting, written over nalgebra's `DMatrix`.
//!
//! Role: every least-squares solve in `crate::estimate` goes through [`PivotedQr`]; the
//! normal equations X'X are never formed or inverted.
//!
//! Invariants and conventions:
//! * Before factorising, each column of X is divided by its Euclidean norm (a zero column
//!   keeps scale 1). Write S for the diagonal matrix of the reciprocal norms, so the factorised
//!   matrix is X S, and X S P = Q R with P the pivoting permutation.
//! * Pivoting is the classical greedy rule (Businger and Golub 1965, Numer. Math. 7): at
//!   step j the remaining column of largest remaining norm is moved to position j. The remaining norms are recomputed from
//!   scratch at every step rather than downdated, which costs no more than the factorisation.
//! * Numerical rank: the number of leading j with |R_jj| > tol · |R_00|, where
//!   tol = max(n, k) · f64::EPSILON. Only full-rank factorisations are handed out; a
//!   rank-deficient X is an [`EstimateError::RankDeficient`] naming the dependent columns.
//! * (X'X)^{-1} = S P R^{-1} R^{-T} P' S = T T' with T = S P R^{-1}; `T` is built by a
//!   triangular solve, and X T = Q₁ (the thin Q), which the covariance estimators use.
//! * What is kept ([`Basis`]): a factorisation whose scaled R has κ₁ above [`REFINE_ABOVE`]
//!   keeps its n × k Householder vectors and applies Q with them. Any other keeps only R and
//!   the factorised matrix (held by reference when the caller shares it, as the memo of
//!   module `shared` does): solves start from the semi-normal equations and are refined
//!   with compensated residuals (module `refine`), a projection is X times a refined solve,
//!   and sums over the rows of Q₁ take them as X T a block of [`Q_BLOCK`] rows at a time
//!   ([`QRows`]), so that such a factorisation adds no n × k matrix of its own. Its Q₁ rows
//!   are orthonormal to about κ·ε instead of ε, and each refinement step contracts the
//!   error by about κ₂²·ε instead of κ₂·ε, with κ₂ ≤ k·κ₁ ≤ k·10³ (so at most about 2·10⁻¹⁰·k²).

use std::sync::{Arc, Mutex, OnceLock, PoisonError};

use nalgebra::{DMatrix, DVector};

use super::EstimateError;

pub(crate) mod independent;
mod reflect;

pub(crate) use reflect::combine_lanes;

/// Relative rank tolerance factor: a diagonal |R_jj| at or below `max(n, k) * eps * |R_00|`
/// (after unit-norm column scaling) counts as zero.
fn rank_tolerance(n: usize, k: usize) -> f64 {
    n.max(k) as f64 * f64::EPSILON
}

/// A full-rank Householder QR factorisation of a column-scaled, column-pivoted matrix.
#[derive(Debug, Clone)]
pub(crate) struct PivotedQr {
    /// Upper triangle holds R (k × k); the strictly lower part is unused.
    r: DMatrix<f64>,
    /// What Q is applied with: the Householder vectors of an ill-conditioned factorisation,
    /// or the factorised matrix itself for the others ([`Basis`]).
    basis: Basis,
    /// `perm[j]` is the caller's column index placed at position j.
    perm: Vec<usize>,
    /// Reciprocal column norms (the diagonal of S).
    scale: Vec<f64>,
    /// Number of rows.
    n: usize,
    /// Whether the condition number of the scaled R exceeds [`REFINE_ABOVE`] (module
    /// `refine` then takes more steps).
    ill_conditioned: bool,
    /// For a factorisation shared between fits (module `shared`): the thin Q, solutions and
    /// derived results, each computed on first use and kept. `None` for a factorisation
    /// of one fit, which computes them afresh on every call and keeps nothing.
    kept: Option<Kept>,
    /// The refined (X'X)^{-1} ([`PivotedQr::refined_inverse`]), computed on first use and
    /// kept by every factorisation (k × k): a fit asks for it once per covariance, and the
    /// Anderson–Rubin search asks again for every direction it tries.
    inverse: OnceLock<DMatrix<f64>>,
}

/// How a factorisation applies Q and Qᵀ.
#[derive(Debug, Clone)]
enum Basis {
    /// Householder vectors, n × k: reflector j is I − 2 v vᵀ acting on rows j.., with v (unit
    /// norm) in rows j.. of column j (the rows above belong to R and are not read here).
    /// Kept when κ₁ of the scaled R exceeds [`REFINE_ABOVE`]: there Qᵀ must be applied
    /// orthogonally for refinement to converge.
    Reflectors(DMatrix<f64>),
    /// The factorised matrix X itself (held, not copied, when the caller shares it), for a
    /// factorisation with κ₁ at most [`REFINE_ABOVE`]: Qᵀv is R⁻ᵀ(XS P)ᵀv, the initial
    /// solution comes from the semi-normal equations RᵀR b̃ = (XS P)ᵀy, and refinement
    /// solves its correction system the same way (module `refine`). Its error contracts by a
    /// factor of order ε·κ² per step instead of ε·κ (Björck 1987, "Stability analysis of the
    /// method of seminormal equations for linear least squares problems", Linear Algebra
    /// Appl. 88/89), at most about 2·10⁻¹⁰·k² here (κ₂ ≤ k·κ₁). The n × k Householder vectors are dropped as
    /// soon as R is formed: a kept factorisation then holds k × k numbers of its own.
    Columns(Arc<DMatrix<f64>>),
}

/// What a shared factorisation keeps once computed.
#[derive(Debug, Default)]
struct Kept {
    thin_q: OnceLock<Arc<DMatrix<f64>>>,
    /// The leverages ([`PivotedQr::leverages`]), asked only by HC2, HC3 and their relatives.
    leverages: OnceLock<Arc<Vec<f64>>>,
    /// The latest refined solutions, each under the key (BLAKE3, [`InputKey`]) of its right-hand side's bits
    /// (most recent last, at most [`KEPT_SOLVES`]): specifications that differ only in
    /// their standard errors, and diagnostics that regress the same regressor on the same
    /// columns, ask for the same solve.
    solves: Mutex<Vec<([u8; 32], DVector<f64>)>>,
    /// Outcome-free results computed from this factorisation and other inputs (first
    /// stages, Shea's R², weak-instrument diagnostics, the Durbin factorisation), each under
    /// the key of those inputs (see [`PivotedQr::derived`]), most recent last, at most
    /// [`KEPT_DERIVED`]. Each key has its own slot, locked while its result is computed,
    /// so two fits asking at once compute it once (the second waits for the first).
    derived: Mutex<Vec<([u8; 32], Slot)>>,
}

/// A result kept by [`PivotedQr::derived`], of whatever type its caller computes.
#[derive(Clone)]
struct Derived(Arc<dyn std::any::Any + Send + Sync>);

/// The slot of one derived result: empty until computed (and after an error, which is never
/// kept).
type Slot = Arc<Mutex<Option<Derived>>>;

impl std::fmt::Debug for Derived {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Derived(..)")
    }
}

/// Derived results handed out again, over the process's life (for tests; it never affects
/// a result).
pub(crate) static DERIVED_HITS: std::sync::atomic::AtomicUsize =
    std::sync::atomic::AtomicUsize::new(0);

/// How many derived results a shared factorisation keeps. A 2SLS sample with every
/// diagnostic under two covariances asks the instruments' factorisation for thirteen (X̂,
/// [X | V̂], Q₁ᵀX, x's fit on Z, M_W Z, the weak-instrument diagnostics' factor of M_W Z,
/// Shea's R², and per covariance the first stages, the weak-instrument results and x's
/// covariance); a limit below that evicts X̂ before its last use and recomputes it.
const KEPT_DERIVED: usize = 16;

/// A key of a derived result's inputs: the BLAKE3 hash (O'Connor, Aumasson, Neves and
/// Wilcox-O'Hearn 2020; 256 bits, collision resistant like SHA-256 and about four times as
/// fast here on n-length columns) of a tag naming the computation, then every input it reads
/// besides the factorisation itself, written with their lengths. Keys live in memory only;
/// nothing written to disk uses them.
pub(crate) struct InputKey(blake3::Hasher);

impl InputKey {
    pub(crate) fn new(tag: &str) -> Self {
        InputKey(blake3::Hasher::new()).text(tag)
    }

    pub(crate) fn text(self, text: &str) -> Self {
        self.bytes(text.as_bytes())
    }

    pub(crate) fn count(mut self, n: usize) -> Self {
        self.0.update(&(n as u64).to_le_bytes());
        self
    }

    pub(crate) fn numbers(self, values: &[f64]) -> Self {
        #[cfg(target_endian = "little")]
        {
            // SAFETY: an f64 is 8 bytes without padding; on a little-endian target they are
            // `to_bits().to_le_bytes()`, the bytes `words` would hash.
            let bytes = unsafe {
                std::slice::from_raw_parts(values.as_ptr().cast::<u8>(), size_of_val(values))
            };
            self.count(values.len()).raw(bytes)
        }
        #[cfg(not(target_endian = "little"))]
        self.words(values.len(), values.iter().map(|x| x.to_bits()))
    }

    pub(crate) fn bytes(mut self, bytes: &[u8]) -> Self {
        self = self.count(bytes.len());
        self.0.update(bytes);
        self
    }

    pub(crate) fn indices(self, values: &[usize]) -> Self {
        #[cfg(all(target_endian = "little", target_pointer_width = "64"))]
        {
            // SAFETY: a usize here is 8 bytes without padding, little-endian: the bytes of
            // `(x as u64).to_le_bytes()`, which `words` would hash.
            let bytes = unsafe {
                std::slice::from_raw_parts(values.as_ptr().cast::<u8>(), size_of_val(values))
            };
            self.count(values.len()).raw(bytes)
        }
        #[cfg(not(all(target_endian = "little", target_pointer_width = "64")))]
        self.words(values.len(), values.iter().map(|&x| x as u64))
    }

    /// Bytes hashed as they are (no length).
    fn raw(mut self, bytes: &[u8]) -> Self {
        self.0.update(bytes);
        self
    }

    /// `len`, then the words, little-endian, hashed in blocks of 512 (the portable form of
    /// what `numbers` and `indices` hash straight from memory on little-endian targets).
    #[cfg_attr(
        all(target_endian = "little", target_pointer_width = "64"),
        allow(dead_code)
    )]
    fn words(mut self, len: usize, words: impl Iterator<Item = u64>) -> Self {
        self = self.count(len);
        let mut buf = [0u8; 4096];
        let mut filled = 0;
        for w in words {
            buf[filled..filled + 8].copy_from_slice(&w.to_le_bytes());
            filled += 8;
            if filled == buf.len() {
                self.0.update(&buf);
                filled = 0;
            }
        }
        self.0.update(&buf[..filled]);
        self
    }

    pub(crate) fn finish(self) -> [u8; 32] {
        *self.0.finalize().as_bytes()
    }
}

/// Solutions and (X'X)^{-1} get three refinement steps when κ₁(R) = ‖R‖₁‖R⁻¹‖₁ of the
/// column-scaled, pivoted factor exceeds this, one step otherwise (module `refine`). The
/// convergence factor of refinement on the augmented system is of order ε·κ (Björck 1967),
/// so below 10³ the first step already brings the solution to working precision and later
/// steps only move last bits; above it the ill-conditioned NIST StRD sets (Longley, Wampler,
/// Filip) keep their three steps. The NIST sets below it (Norris, Pontius, NoInt1/2) agree
/// with their certified values to the same digits with one step as with three
/// (`nist_tests`). The threshold itself is our choice.
pub(crate) const REFINE_ABOVE: f64 = 1e3;

/// κ₁ of an upper-triangular R (k × k, nonsingular): ‖R‖₁ ‖R⁻¹‖₁ (column-sum norms).
fn condition_one(r: &DMatrix<f64>) -> f64 {
    let k = r.ncols();
    let Some(rinv) = r.solve_upper_triangular(&DMatrix::identity(k, k)) else {
        return f64::INFINITY;
    };
    let norm = |m: &DMatrix<f64>| {
        m.column_iter()
            .map(|c| c.iter().map(|v| v.abs()).sum::<f64>())
            .fold(0.0, f64::max)
    };
    let kappa = norm(r) * norm(&rinv);
    if kappa.is_finite() {
        kappa
    } else {
        f64::INFINITY
    }
}

/// How many solutions a shared factorisation keeps.
const KEPT_SOLVES: usize = 6;

impl Clone for Kept {
    /// A copy starts with nothing kept (what it keeps is recomputed on demand, to the same
    /// bits).
    fn clone(&self) -> Self {
        Kept::default()
    }
}

impl Kept {
    /// The kept solution for `y`, or `solve()` kept under `y`'s digest.
    fn solution(&self, y: &DVector<f64>, solve: impl FnOnce() -> DVector<f64>) -> DVector<f64> {
        let key = InputKey::new("right-hand side")
            .numbers(y.as_slice())
            .finish();
        let lock = || self.solves.lock().unwrap_or_else(PoisonError::into_inner);
        if let Some((_, b)) = lock().iter().find(|(k, _)| *k == key) {
            return b.clone();
        }
        let b = solve();
        let mut kept = lock();
        if !kept.iter().any(|(k, _)| *k == key) {
            if kept.len() >= KEPT_SOLVES {
                kept.remove(0);
            }
            kept.push((key, b.clone()));
        }
        b
    }
}

/// Divides every column by its Euclidean norm, returning the scaled copy (written in one
/// pass) and the factors.
fn scale_columns(x: &DMatrix<f64>) -> (DMatrix<f64>, Vec<f64>) {
    let scale = column_scales(x);
    let mut xs = Vec::with_capacity(x.len());
    for (column, s) in x.column_iter().zip(&scale) {
        xs.extend(column.iter().map(|v| v * s));
    }
    (DMatrix::from_vec(x.nrows(), x.ncols(), xs), scale)
}

/// Rows per block of [`blockwise`]: each block, with the k rows of the R so far on top, is
/// factorised in the processor's cache.
const TSQR_BLOCK: usize = 8192;

/// R, the pivoting and the scale factors of X S P = Q R computed over blocks of rows without
/// an n × k copy (a tall-skinny QR: Demmel, Grigori, Hoemmen and Langou 2012, SIAM J. Sci.
/// Comput. 34): each block of [`TSQR_BLOCK`] scaled rows is stacked under the R of the rows
/// before it and factorised (unpivoted Householder), which gives the R of all the rows so
/// far, since Q's of blocks and of stacks compose to an orthogonal transformation of the rows.
/// The greedy column pivoting is then applied to that k × k R, whose column norms are those
/// of X S. `None` when the result is rank-deficient or κ₁ of R exceeds [`REFINE_ABOVE`]:
/// those designs are factorised whole, keeping their Householder vectors.
fn blockwise(x: &DMatrix<f64>) -> Option<(DMatrix<f64>, Vec<usize>, Vec<f64>)> {
    let (n, k) = x.shape();
    if k == 0 || n < k || k > TSQR_BLOCK / 2 {
        return None;
    }
    let scale = column_scales(x);
    let mut r: Option<DMatrix<f64>> = None;
    for start in (0..n).step_by(TSQR_BLOCK) {
        let rows = TSQR_BLOCK.min(n - start);
        let top = if r.is_some() { k } else { 0 };
        let mut m = DMatrix::zeros(top + rows, k);
        if let Some(r) = &r {
            m.rows_mut(0, k).copy_from(r);
        }
        for (j, s) in scale.iter().enumerate() {
            let column = &x.as_slice()[j * n + start..j * n + start + rows];
            for (target, v) in m.view_mut((top, j), (rows, 1)).iter_mut().zip(column) {
                *target = v * s;
            }
        }
        // At least k rows: the first block has min(TSQR_BLOCK, n) ≥ k (checked above), the
        // others k more.
        r = Some(unpivoted_r(m, k));
    }
    let mut a = r?;
    let (perm, diagonal) = pivoted_in_place(&mut a).ok()?;
    let mut r = a.upper_triangle();
    r.set_diagonal(&DVector::from_vec(diagonal));
    let full_rank = numerical_rank(&r, n) == k;
    (full_rank && condition_one(&r) <= REFINE_ABOVE).then_some((r, perm, scale))
}

/// The numerical rank of a factorisation of n rows with pivoted factor `r` (k × k): the
/// number of leading j with |R_jj| above the module's tolerance times |R_00|.
fn numerical_rank(r: &DMatrix<f64>, n: usize) -> usize {
    let k = r.ncols();
    let Some(&r00) = r.get((0, 0)) else {
        return 0;
    };
    let threshold = rank_tolerance(n, k) * r00.abs();
    (0..k).take_while(|&j| r[(j, j)].abs() > threshold).count()
}

/// Householder QR with greedy column pivoting of `a` in place (the reflectors below the
/// diagonal, R's strict upper part above it): the pivoting permutation and R's diagonal, or,
/// when a remaining column is zero, the caller's columns not yet placed.
fn pivoted_in_place(a: &mut DMatrix<f64>) -> Result<(Vec<usize>, Vec<f64>), Vec<usize>> {
    let k = a.ncols();
    let mut perm: Vec<usize> = (0..k).collect();
    let mut diagonal = Vec::with_capacity(k);
    for j in 0..k {
        // Each remaining column's norm once (the comparisons computed two per
        // comparison); the same values, so the same pivot.
        let norms: Vec<f64> = (j..k).map(|p| tail_norm(a, p, j)).collect();
        let pivot = (j..k)
            .max_by(|&p, &q| norms[p - j].total_cmp(&norms[q - j]))
            .unwrap_or(j);
        a.swap_columns(j, pivot);
        perm.swap(j, pivot);
        let Some(alpha) = householder(a, j, j) else {
            return Err(perm[j..].to_vec());
        };
        reflect_later_columns(a, j, j);
        diagonal.push(alpha);
    }
    Ok((perm, diagonal))
}

/// The k × k R of an unpivoted Householder QR of `m` (at least k rows); a column whose
/// remaining part is zero gets a zero diagonal (a later block stacked under it supplies it).
fn unpivoted_r(mut m: DMatrix<f64>, k: usize) -> DMatrix<f64> {
    let mut diagonal = Vec::with_capacity(k);
    for j in 0..k {
        match householder(&mut m, j, j) {
            Some(alpha) => {
                reflect_later_columns(&mut m, j, j);
                diagonal.push(alpha);
            }
            None => diagonal.push(0.0),
        }
    }
    let mut r = m.rows(0, k).upper_triangle();
    r.set_diagonal(&DVector::from_vec(diagonal));
    r
}

/// The reciprocal Euclidean norm of every column (1 for a zero column).
fn column_scales(x: &DMatrix<f64>) -> Vec<f64> {
    x.column_iter()
        .map(|column| {
            let norm = column.norm();
            if norm > 0.0 {
                1.0 / norm
            } else {
                1.0
            }
        })
        .collect()
}

/// Rows `row..` of column `col` of `a` become the unit Householder vector v that maps them
/// onto a multiple of e₁ (computed in place); returns the diagonal value (−sign(x₀)·‖x‖),
/// `None` for a zero vector.
fn householder(a: &mut DMatrix<f64>, row: usize, col: usize) -> Option<f64> {
    let n = a.nrows();
    let mut v = a.view_mut((row, col), (n - row, 1));
    let norm = v.norm();
    if norm == 0.0 {
        return None;
    }
    let alpha = if v[0] >= 0.0 { -norm } else { norm };
    v[0] -= alpha;
    let vnorm = v.norm();
    if vnorm == 0.0 {
        return None;
    }
    v /= vnorm;
    Some(alpha)
}

/// Applies the reflector held in rows `row..` of column `col` of `a` (see [`householder`]) to
/// the same rows of every later column.
fn reflect_later_columns(a: &mut DMatrix<f64>, row: usize, col: usize) {
    let n = a.nrows();
    let (v, mut rest) = a.columns_range_pair_mut(col, col + 1..);
    let v = v.rows(row, n - row);
    for c in 0..rest.ncols() {
        let mut block = rest.view_mut((row, c), (n - row, 1));
        let dot = v.dot(&block.column(0));
        block.column_mut(0).axpy(-2.0 * dot, &v, 1.0);
    }
}

impl PivotedQr {
    /// Factorises `x` (n × k, n ≥ k assumed by callers).
    ///
    /// # Errors
    /// [`EstimateError::RankDeficient`] when the numerical rank is below k; the dependent
    /// columns are named by [`collinear_columns`] (scan in the caller's order), falling back
    /// to the columns pivoted past the rank when that scan finds none.
    pub(crate) fn new(x: &DMatrix<f64>) -> Result<Self, EstimateError> {
        Self::factorise(x, || Arc::new(x.clone()))
    }

    /// [`PivotedQr::new`] for a matrix the caller shares: a well-conditioned factorisation
    /// holds `x` itself instead of a copy.
    ///
    /// # Errors
    /// As [`PivotedQr::new`].
    pub(crate) fn new_held(x: &Arc<DMatrix<f64>>) -> Result<Self, EstimateError> {
        Self::factorise(x, || Arc::clone(x))
    }

    fn factorise(
        x: &DMatrix<f64>,
        held: impl FnOnce() -> Arc<DMatrix<f64>>,
    ) -> Result<Self, EstimateError> {
        if let Some((r, perm, scale)) = blockwise(x) {
            return Ok(PivotedQr {
                r,
                basis: Basis::Columns(held()),
                perm,
                scale,
                n: x.nrows(),
                ill_conditioned: false,
                kept: None,
                inverse: OnceLock::new(),
            });
        }
        Self::whole(x, Some(held))
    }

    /// [`PivotedQr::new`] keeping the Householder vectors whatever the conditioning, for
    /// callers that need Q₁ orthonormal to working precision (unit-leverage checks, a
    /// projection subtracted as Q₁(Q₁ᵀv)).
    ///
    /// # Errors
    /// As [`PivotedQr::new`].
    pub(crate) fn with_householder_vectors(x: &DMatrix<f64>) -> Result<Self, EstimateError> {
        Self::whole(x, None::<fn() -> Arc<DMatrix<f64>>>)
    }

    /// The factorisation of the whole scaled copy, for the designs [`blockwise`] declines
    /// (ill-conditioned or rank-deficient: their results and errors as before) and for
    /// callers that need the Householder vectors; `held` gives the matrix a well-conditioned
    /// result holds instead of its vectors (`None`: keep the vectors).
    fn whole(
        x: &DMatrix<f64>,
        held: Option<impl FnOnce() -> Arc<DMatrix<f64>>>,
    ) -> Result<Self, EstimateError> {
        let (n, k) = x.shape();
        let (mut a, scale) = scale_columns(x);
        let (perm, diagonal) =
            pivoted_in_place(&mut a).map_err(|remaining| rank_error(x, &remaining))?;
        let mut r = a.rows(0, k).upper_triangle();
        r.set_diagonal(&DVector::from_vec(diagonal));
        let ill_conditioned = condition_one(&r) > REFINE_ABOVE;
        let basis = match held {
            Some(held) if !ill_conditioned => {
                drop(a);
                Basis::Columns(held())
            }
            _ => Basis::Reflectors(a),
        };
        let qr = PivotedQr {
            r,
            basis,
            perm,
            scale,
            n,
            ill_conditioned,
            kept: None,
            inverse: OnceLock::new(),
        };
        match qr.rank() {
            rank if rank < k => Err(rank_error(x, &qr.perm[rank..])),
            _ => Ok(qr),
        }
    }

    /// The numerical rank under the module's tolerance.
    fn rank(&self) -> usize {
        numerical_rank(&self.r, self.n)
    }

    /// Applies Qᵀ to a vector of length n with the Householder vectors (in order; module
    /// `reflect`).
    fn apply_qt(reflectors: &DMatrix<f64>, k: usize, y: &DVector<f64>) -> DVector<f64> {
        let mut c = y.clone();
        let order = reflect::reflectors(reflectors, 0..k);
        reflect::apply_all(c.as_mut_slice(), &order);
        c
    }

    /// Applies Q to an n × m matrix with the Householder vectors (in reverse order), column
    /// by column.
    fn apply_q(reflectors: &DMatrix<f64>, k: usize, mut c: DMatrix<f64>) -> DMatrix<f64> {
        let n = reflectors.nrows();
        let order = reflect::reflectors(reflectors, (0..k).rev());
        for column in c.as_mut_slice().chunks_mut(n) {
            reflect::apply_all(column, &order);
        }
        c
    }

    /// (XᵀX)⁻¹ u from R alone, in the caller's coordinates: S P R⁻¹ R⁻ᵀ Pᵀ S u.
    fn normal_solve(&self, u: &DVector<f64>) -> DVector<f64> {
        let k = self.perm.len();
        let z = self
            .r
            .tr_solve_upper_triangular(&self.scaled(u))
            .and_then(|w| self.r.solve_upper_triangular(&w))
            .unwrap_or_else(|| DVector::zeros(k));
        self.unscaled(&z)
    }

    /// Pᵀ S u: a vector of the caller's coordinates in the scaled, pivoted ones.
    fn scaled(&self, u: &DVector<f64>) -> DVector<f64> {
        DVector::from_fn(self.perm.len(), |j, _| {
            self.scale[self.perm[j]] * u[self.perm[j]]
        })
    }

    /// S P z: a vector in the scaled, pivoted coordinates back in the caller's.
    fn unscaled(&self, z: &DVector<f64>) -> DVector<f64> {
        let mut b = DVector::zeros(z.len());
        for (j, &col) in self.perm.iter().enumerate() {
            b[col] = z[j] * self.scale[col];
        }
        b
    }

    /// Least-squares coefficients b minimising ‖y − X b‖, in the caller's column order:
    /// R b̃ = (Qᵀy)₁ with the Householder vectors, the semi-normal equations
    /// RᵀR b̃ = (XS P)ᵀy with the held matrix.
    fn solve_once(&self, y: &DVector<f64>) -> DVector<f64> {
        let k = self.perm.len();
        match &self.basis {
            Basis::Reflectors(v) => {
                let c = Self::apply_qt(v, k, y).rows(0, k).into_owned();
                let z = self
                    .r
                    .solve_upper_triangular(&c)
                    .unwrap_or_else(|| DVector::zeros(k));
                self.unscaled(&z)
            }
            Basis::Columns(x) => self.normal_solve(&x.tr_mul(y)),
        }
    }

    /// Least-squares coefficients, refined on the augmented system (module `refine`).
    /// A shared factorisation (module `shared`) keeps its latest solutions: `x` must be
    /// the factorised matrix.
    pub(crate) fn solve(&self, x: &DMatrix<f64>, y: &DVector<f64>) -> DVector<f64> {
        match &self.kept {
            Some(kept) => kept.solution(y, || self.solve_fresh(x, y)),
            None => self.solve_fresh(x, y),
        }
    }

    /// [`PivotedQr::solve`], never kept.
    fn solve_fresh(&self, x: &DMatrix<f64>, y: &DVector<f64>) -> DVector<f64> {
        let mut b = self.solve_once(y);
        self.refine(x, y, &mut b);
        b
    }

    /// Solves the augmented correction system [I X; Xᵀ 0](δr; δb) = (f; g) with the stored
    /// factorisation (Björck and Golub 1967); returns (δb, δr) in the caller's coordinates,
    /// δr only when `with_dr` (a last refinement step does not need it, and it costs a pass
    /// over the rows). `xtf`: Xᵀf when the caller summed it already (the bits of
    /// `x.tr_mul(f)`), used by a factorisation that keeps X.
    pub(crate) fn augmented_correction(
        &self,
        f: &DVector<f64>,
        g: &DVector<f64>,
        xtf: Option<DVector<f64>>,
        with_dr: bool,
    ) -> (DVector<f64>, Option<DVector<f64>>) {
        let k = self.perm.len();
        let v = match &self.basis {
            Basis::Reflectors(v) => v,
            Basis::Columns(x) => {
                // δr + X δb = f and Xᵀ δr = g give XᵀX δb = Xᵀf − g.
                let xtf = xtf.unwrap_or_else(|| x.tr_mul(f));
                let db = self.normal_solve(&(xtf - g));
                let dr = with_dr.then(|| f - &**x * &db);
                return (db, dr);
            }
        };
        let h = self
            .r
            .tr_solve_upper_triangular(&self.scaled(g))
            .unwrap_or_else(|| DVector::zeros(k));
        let mut d = Self::apply_qt(v, k, f);
        let db_scaled = self
            .r
            .solve_upper_triangular(&(d.rows(0, k) - &h))
            .unwrap_or_else(|| DVector::zeros(k));
        let dr = with_dr.then(|| {
            d.rows_mut(0, k).copy_from(&h);
            let dr = Self::apply_q(v, k, DMatrix::from_column_slice(self.n, 1, d.as_slice()));
            dr.column(0).into_owned()
        });
        (self.unscaled(&db_scaled), dr)
    }

    /// The k × k matrix T = S P R^{-1}, so that (X'X)^{-1} = T Tᵀ and X T = Q₁.
    pub(crate) fn t_matrix(&self) -> DMatrix<f64> {
        let k = self.perm.len();
        let rinv = self
            .r
            .solve_upper_triangular(&DMatrix::identity(k, k))
            .unwrap_or_else(|| DMatrix::zeros(k, k));
        let mut t = DMatrix::zeros(k, k);
        for (j, &col) in self.perm.iter().enumerate() {
            t.row_mut(col).copy_from(&(rinv.row(j) * self.scale[col]));
        }
        t
    }

    /// The bread factor B of a sandwich covariance B M Bᵀ whose meat M is formed from the
    /// rows of [`PivotedQr::q_rows`] (`x` must be the factorised matrix).
    ///
    /// * A factorisation that keeps X (κ₁ ≤ 10³): B = A T^{-ᵀ} with A the refined (X'X)^{-1}
    ///   ([`PivotedQr::refined_inverse`]). Its meat's rows are X T, so M = Tᵀ (XᵀΩX) T and
    ///   B M Bᵀ = A XᵀΩX A with the refined inverse on both sides, where T M Tᵀ would carry
    ///   the rounding of (X'X)^{-1} = T Tᵀ from the factorisation's long sums (about 1.7e-13
    ///   relative at 100,000 rows, growing with n). T^{-1} = R Pᵀ S^{-1} is R with its
    ///   columns moved and scaled back, so nothing is inverted: B = A S^{-1} P Rᵀ.
    /// * A factorisation that keeps Householder vectors: B = T. Its meat's rows come from
    ///   the Householder Q₁, which equals X T only to the factorisation's rounding, so M and
    ///   T belong together; on ill-conditioned designs A T^{-ᵀ} with that meat was measured
    ///   less accurate than T M Tᵀ more often than not (a review, against exact rational
    ///   sandwiches: up to 35× worse in 9 of 16 designs, better in 5).
    pub(crate) fn bread(&self, x: &DMatrix<f64>) -> DMatrix<f64> {
        if !self.keeps_columns() {
            return self.t_matrix();
        }
        let a = self.refined_inverse(x);
        let k = self.perm.len();
        let moved = DMatrix::from_fn(k, k, |i, j| {
            let col = self.perm[j];
            a[(i, col)] / self.scale[col]
        });
        moved * self.r.view((0, 0), (k, k)).upper_triangle().transpose()
    }

    /// The sandwich B M Bᵀ of a meat M formed from the rows of [`PivotedQr::q_rows`], with
    /// B the bread factor of [`PivotedQr::bread`].
    pub(crate) fn sandwich(&self, x: &DMatrix<f64>, meat: &DMatrix<f64>) -> DMatrix<f64> {
        let bread = self.bread(x);
        &bread * meat * bread.transpose()
    }

    /// This factorisation, made to keep its thin Q, solutions and derived results once
    /// computed (for a factorisation shared between fits).
    pub(crate) fn kept(mut self) -> Self {
        self.kept = Some(Kept::default());
        self
    }

    /// A result computed from this factorisation and the inputs hashed in `key`: for a shared
    /// factorisation, kept and handed out again to a caller with the same key (the same
    /// factorised matrix is implied by the factorisation being shared); otherwise computed.
    /// Errors are never kept.
    pub(crate) fn derived<T, E>(
        &self,
        key: impl FnOnce() -> [u8; 32],
        compute: impl FnOnce() -> Result<T, E>,
    ) -> Result<T, E>
    where
        T: Clone + Send + Sync + 'static,
    {
        let Some(kept) = &self.kept else {
            return compute();
        };
        let key = key();
        let slot: Slot = {
            let mut derived = kept.derived.lock().unwrap_or_else(PoisonError::into_inner);
            match derived.iter().find(|(k, _)| *k == key) {
                Some((_, slot)) => Arc::clone(slot),
                None => {
                    if derived.len() >= KEPT_DERIVED {
                        derived.remove(0);
                    }
                    let slot = Slot::default();
                    derived.push((key, Arc::clone(&slot)));
                    slot
                }
            }
        };
        // Held while computing: another fit asking for the same key waits here instead of
        // computing it again. (A computation never asks for its own key, and asks only for
        // results of other inputs, so no two threads wait for each other.)
        let mut held = slot.lock().unwrap_or_else(PoisonError::into_inner);
        if let Some(value) = held.as_ref().and_then(|d| d.0.downcast_ref::<T>().cloned()) {
            DERIVED_HITS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
            return Ok(value);
        }
        let value = compute()?;
        *held = Some(Derived(Arc::new(value.clone())));
        Ok(value)
    }

    /// Whether this factorisation kept the factorised matrix rather than Householder vectors
    /// ([`Basis::Columns`]).
    pub(crate) fn keeps_columns(&self) -> bool {
        matches!(self.basis, Basis::Columns(_))
    }

    /// Whether the scaled factor is worse conditioned than [`REFINE_ABOVE`].
    pub(crate) fn ill_conditioned(&self) -> bool {
        self.ill_conditioned
    }

    /// Where this factorisation keeps its refined inverse (module `refine`).
    pub(crate) fn kept_inverse(&self) -> &OnceLock<DMatrix<f64>> {
        &self.inverse
    }

    /// The thin Q factor Q₁ (n × k), whose rows give leverages and scores: from the
    /// Householder vectors (kept by a shared factorisation), or X T from the held matrix
    /// (computed per call: a shared factorisation then keeps no n × k matrix of its own).
    pub(crate) fn thin_q(&self) -> Arc<DMatrix<f64>> {
        let v = match &self.basis {
            Basis::Reflectors(v) => v,
            Basis::Columns(x) => return Arc::new(&**x * self.t_matrix()),
        };
        // Column j of Q₁ is Q eⱼ. Reflectors numbered above j act on rows below j, where eⱼ
        // is zero: their dot product with it is +0 and their update adds (−0)·v + 0 = +0 to
        // each zero, so skipping them gives the same bits (reflectors are finite).
        let compute = || {
            let k = self.perm.len();
            let mut q1 = DMatrix::identity(self.n, k);
            for (j, column) in q1.as_mut_slice().chunks_mut(self.n).enumerate() {
                let order = reflect::reflectors(v, (0..=j).rev());
                reflect::apply_all(column, &order);
            }
            Arc::new(q1)
        };
        match &self.kept {
            Some(kept) => Arc::clone(kept.thin_q.get_or_init(compute)),
            None => compute(),
        }
    }

    /// The number of columns k.
    pub(crate) fn ncols(&self) -> usize {
        self.perm.len()
    }

    /// The leverages ‖qᵢ‖², from a Q₁ orthonormal to working precision: the rows of X T
    /// are orthonormal only to about κ·ε, which would hide a unit leverage (1 − hᵢ compared
    /// with max(n, k)·ε), so a factorisation that kept R and X factorises X again with its
    /// Householder vectors, whose Q₁ gives the leverages the thin Q did (they do not depend
    /// on the basis of the column space). A shared factorisation keeps them: only HC2, HC3
    /// and their relatives ask, but each covariance and quadratic meat of a design does.
    pub(crate) fn leverages(&self) -> Result<Arc<Vec<f64>>, EstimateError> {
        let compute = || -> Result<Arc<Vec<f64>>, EstimateError> {
            let q = match &self.basis {
                Basis::Reflectors(_) => self.thin_q(),
                Basis::Columns(x) => PivotedQr::with_householder_vectors(x)?.thin_q(),
            };
            Ok(Arc::new(q.row_iter().map(|q| q.norm_squared()).collect()))
        };
        let Some(kept) = &self.kept else {
            return compute();
        };
        if let Some(h) = kept.leverages.get() {
            return Ok(Arc::clone(h));
        }
        let h = compute()?;
        Ok(Arc::clone(kept.leverages.get_or_init(|| h)))
    }

    /// The rows of Q₁ for sums over rows (score sums, weighted Gram matrices): the kept thin
    /// Q from the Householder vectors, or the held X with T, whose row blocks X T are formed
    /// as they are summed, so that no n × k matrix is made ([`QRows`]).
    pub(crate) fn q_rows(&self) -> QRows {
        match &self.basis {
            Basis::Reflectors(_) => QRows::Thin(self.thin_q()),
            Basis::Columns(x) => QRows::Product {
                x: Arc::clone(x),
                t: self.t_matrix(),
            },
        }
    }

    /// The orthogonal projection of `v` onto the column space of X: Q(Qᵀv)₁ with the
    /// Householder vectors, X b with b the refined least-squares solution of X b ≈ v with
    /// the held matrix.
    pub(crate) fn project(&self, v: &DVector<f64>) -> DVector<f64> {
        let k = self.perm.len();
        let reflectors = match &self.basis {
            Basis::Reflectors(reflectors) => reflectors,
            // Not kept: projected vectors are seldom asked for again, and keeping them would
            // push out the solutions that are.
            Basis::Columns(x) => return &**x * self.solve_fresh(x, v),
        };
        let mut c = Self::apply_qt(reflectors, k, v);
        c.rows_mut(k, self.n - k).fill(0.0);
        Self::apply_q(
            reflectors,
            k,
            DMatrix::from_column_slice(self.n, 1, c.as_slice()),
        )
        .column(0)
        .into_owned()
    }
}

/// The rows of a thin Q factor Q₁ (n × k).
pub(crate) enum QRows {
    /// Q₁ itself.
    Thin(Arc<DMatrix<f64>>),
    /// Q₁ = X T, formed a block of [`Q_BLOCK`] rows at a time. Its columns are orthonormal
    /// to within about κ·ε (T comes from the Householder R; κ ≤ 10³ for this form), against ε
    /// for the thin Q.
    Product {
        x: Arc<DMatrix<f64>>,
        t: DMatrix<f64>,
    },
}

/// Rows per block of [`QRows::blocks`] (a multiple of 256, see `covariance::ROW_BLOCK`).
pub(crate) const Q_BLOCK: usize = 32 * 256;

impl QRows {
    /// The number of rows n.
    pub(crate) fn nrows(&self) -> usize {
        match self {
            QRows::Thin(q) => q.nrows(),
            QRows::Product { x, .. } => x.nrows(),
        }
    }

    /// The number of columns k.
    pub(crate) fn ncols(&self) -> usize {
        match self {
            QRows::Thin(q) => q.ncols(),
            QRows::Product { t, .. } => t.ncols(),
        }
    }

    /// Calls `f(start, block)` for consecutive blocks of rows of Q₁, in order: the whole of
    /// a thin Q as one block (the sums then take exactly the bits of a pass over it), blocks
    /// of [`Q_BLOCK`] rows of X T otherwise.
    pub(crate) fn blocks<E>(
        &self,
        mut f: impl FnMut(usize, &DMatrix<f64>) -> Result<(), E>,
    ) -> Result<(), E> {
        match self {
            QRows::Thin(q) => f(0, q),
            QRows::Product { x, t } => {
                let (n, k) = x.shape();
                for start in (0..n).step_by(Q_BLOCK) {
                    let rows = Q_BLOCK.min(n - start);
                    f(start, &(x.view((start, 0), (rows, k)) * t))?;
                }
                Ok(())
            }
        }
    }

    /// `per_block(start, block)` of each row block, added up in row order with `add` (`None`
    /// without rows).
    pub(crate) fn folded<T, E>(
        &self,
        mut per_block: impl FnMut(usize, &DMatrix<f64>) -> Result<T, E>,
        add: impl Fn(T, T) -> T,
    ) -> Result<Option<T>, E> {
        let mut total: Option<T> = None;
        self.blocks(|start, q| {
            let part = per_block(start, q)?;
            total = Some(match total.take() {
                Some(t) => add(t, part),
                None => part,
            });
            Ok(())
        })?;
        Ok(total)
    }

    /// Σ over row blocks of `per_block(start, block)`, a k × k matrix (zeros without rows).
    pub(crate) fn summed<E>(
        &self,
        per_block: impl FnMut(usize, &DMatrix<f64>) -> Result<DMatrix<f64>, E>,
    ) -> Result<DMatrix<f64>, E> {
        let k = self.ncols();
        let total = self.folded(per_block, |a, b| a + b)?;
        Ok(total.unwrap_or_else(|| DMatrix::zeros(k, k)))
    }
}

/// Euclidean norm of rows `from..` of column `col`.
fn tail_norm(a: &DMatrix<f64>, col: usize, from: usize) -> f64 {
    a.view((from, col), (a.nrows() - from, 1)).norm()
}

/// The rank-deficiency error: the left-to-right scan if it finds anything, else `tail`.
fn rank_error(x: &DMatrix<f64>, tail: &[usize]) -> EstimateError {
    let mut dependent = collinear_columns(x);
    if dependent.is_empty() {
        dependent = tail.to_vec();
        dependent.sort_unstable();
    }
    EstimateError::RankDeficient { dependent }
}

/// Columns of `x` that are (numerically) linear combinations of EARLIER columns.
///
/// Scans left to right in the caller's order without pivoting: column j is kept when the
/// norm of its part orthogonal to the kept columns before it exceeds
/// `max(n, k) · eps` times its own norm (columns are scaled to unit norm first, the same
/// tolerance as the pivoted factorisation's rank rule). A zero column is always dependent.
/// The caller therefore decides which member of a dependent set is named or dropped.
///
/// When the column-scaled matrix is well enough conditioned that the scan provably finds
/// nothing (module `independent`: one k × k product over the rows), the scan is skipped;
/// the answer is the same either way.
pub fn collinear_columns(x: &DMatrix<f64>) -> Vec<usize> {
    if independent::clearly_independent(x) {
        return Vec::new();
    }
    scan(x)
}

/// The left-to-right scan of [`collinear_columns`] itself.
fn scan(x: &DMatrix<f64>) -> Vec<usize> {
    let (n, k) = x.shape();
    let (mut a, _) = scale_columns(x);
    let tol = rank_tolerance(n, k);
    let mut dependent = Vec::new();
    let mut row = 0;
    for j in 0..k {
        let norm = tail_norm(&a, j, row);
        if row >= n || norm <= tol {
            dependent.push(j);
            continue;
        }
        // Column j is not read after this step: it keeps the reflector.
        if householder(&mut a, row, j).is_some() {
            reflect_later_columns(&mut a, row, j);
        }
        row += 1;
    }
    dependent
}

#[cfg(test)]
mod tests {
    use super::{InputKey, PivotedQr};
    use nalgebra::DMatrix;
    use std::sync::atomic::{AtomicUsize, Ordering};
    use std::sync::{Arc, Barrier};

    /// Two fits asking a shared factorisation for the same derived result at once compute it
    /// once; an error is not kept, so the next caller computes again.
    #[test]
    fn a_derived_result_is_computed_once_and_errors_are_not_kept() {
        let x = DMatrix::from_fn(200, 3, |i, j| {
            ((i * 7 + j * 3) as f64 * 0.37).sin() + j as f64
        });
        let qr = Arc::new(PivotedQr::new(&x).expect("full rank").kept());
        let computed = Arc::new(AtomicUsize::new(0));
        let start = Arc::new(Barrier::new(2));
        let ask = |qr: Arc<PivotedQr>, computed: Arc<AtomicUsize>, start: Arc<Barrier>| {
            std::thread::spawn(move || {
                start.wait();
                qr.derived(
                    || InputKey::new("test").count(1).finish(),
                    || {
                        computed.fetch_add(1, Ordering::SeqCst);
                        std::thread::sleep(std::time::Duration::from_millis(50));
                        Ok::<_, ()>(vec![1.5, 2.5])
                    },
                )
            })
        };
        let a = ask(Arc::clone(&qr), Arc::clone(&computed), Arc::clone(&start));
        let b = ask(Arc::clone(&qr), Arc::clone(&computed), Arc::clone(&start));
        let (a, b) = (a.join().expect("a"), b.join().expect("b"));
        assert_eq!((a, b), (Ok(vec![1.5, 2.5]), Ok(vec![1.5, 2.5])));
        assert_eq!(computed.load(Ordering::SeqCst), 1);
        let key = || InputKey::new("test").count(2).finish();
        let failed: Result<f64, &str> = qr.derived(key, || Err("not now"));
        assert_eq!(failed, Err("not now"));
        assert_eq!(qr.derived(key, || Ok::<_, &str>(4.0)), Ok(4.0));
        assert_eq!(qr.derived(key, || Ok::<_, &str>(5.0)), Ok(4.0));
    }

    /// Numbers and indices hashed straight from memory give the digest of the portable
    /// word-by-word form, so keys are the same on every target.
    #[test]
    fn keys_hashed_from_memory_are_the_portable_keys() {
        let numbers: Vec<f64> = (0..1500)
            .map(|i| (i as f64 * 0.37).sin() * 1e3 - 0.0)
            .collect();
        let indices: Vec<usize> = (0..1500).map(|i| i * 7919 % 1013).collect();
        let fast = InputKey::new("t")
            .numbers(&numbers)
            .indices(&indices)
            .finish();
        let portable = InputKey::new("t")
            .words(numbers.len(), numbers.iter().map(|x| x.to_bits()))
            .words(indices.len(), indices.iter().map(|&x| x as u64))
            .finish();
        assert_eq!(fast, portable);
        let other = InputKey::new("t")
            .numbers(&numbers[1..])
            .indices(&indices)
            .finish();
        assert_ne!(fast, other);
    }
}

#[cfg(test)]
mod blockwise_tests {
    use super::*;

    /// A design over several row blocks with a column that is zero in the whole first block
    /// (a late-starting indicator).
    fn design(n: usize) -> DMatrix<f64> {
        DMatrix::from_fn(n, 5, |i, j| match j {
            0 => 1.0,
            1 => ((i * 7) as f64 * 0.013).sin() * 40.0 + 3.0,
            2 => f64::from(i > TSQR_BLOCK + 100 && i % 3 == 0),
            3 => ((i * 13) as f64 * 0.7).cos() * 1e-3,
            _ => (i % 11) as f64 - 5.0,
        })
    }

    /// R from row blocks is the R of the whole scaled matrix: RᵀR in the caller's column
    /// order (which does not depend on the pivoting, chosen among unit-norm columns by
    /// rounding) is (XS)ᵀ(XS) for both, checked against the factorisation with its
    /// Householder vectors and against the Gram matrix summed directly.
    #[test]
    fn row_blocks_give_the_whole_matrix_r() {
        let gram = |r: &DMatrix<f64>, perm: &[usize]| {
            let k = perm.len();
            let mut unpermuted = DMatrix::zeros(k, k);
            for (j, &col) in perm.iter().enumerate() {
                unpermuted.set_column(col, &r.column(j));
            }
            unpermuted.transpose() * unpermuted
        };
        for n in [TSQR_BLOCK - 1, TSQR_BLOCK + 1, 3 * TSQR_BLOCK + 77] {
            let mut x = design(n);
            if n < TSQR_BLOCK + 100 {
                x.set_column(2, &DVector::from_fn(n, |i, _| f64::from(i % 4 == 0)));
            }
            let (r, perm, scale) = blockwise(&x).expect("well conditioned");
            let whole = PivotedQr::with_householder_vectors(&x).expect("rank");
            assert_eq!(scale, whole.scale);
            let (a, b) = (gram(&r, &perm), gram(&whole.r, &whole.perm));
            let xs = DMatrix::from_fn(n, 5, |i, j| x[(i, j)] * scale[j]);
            let direct = xs.transpose() * &xs;
            assert!((&a - &b).amax() <= 1e-13, "n = {n}: {}", (&a - &b).amax());
            // The direct sum rounds n terms in a row: a looser check.
            assert!((&a - &direct).amax() <= 1e-11, "n = {n}");
        }
    }

    /// Designs the blocks decline are factorised whole: ill-conditioned ones keep their
    /// Householder vectors, rank-deficient ones are the same error as before.
    #[test]
    fn ill_conditioned_and_dependent_designs_keep_the_whole_factorisation() {
        let n = 2 * TSQR_BLOCK + 5;
        let mut x = design(n);
        let near: Vec<f64> = (0..n).map(|i| x[(i, 1)] + 1e-7 * x[(i, 4)]).collect();
        x.set_column(4, &DVector::from_vec(near));
        assert!(blockwise(&x).is_none());
        let qr = PivotedQr::new(&x).expect("full rank, ill-conditioned");
        assert!(qr.ill_conditioned() && matches!(qr.basis, Basis::Reflectors(_)));
        let dependent: Vec<f64> = (0..n).map(|i| 2.0 * x[(i, 1)] - x[(i, 0)]).collect();
        x.set_column(4, &DVector::from_vec(dependent));
        assert!(blockwise(&x).is_none());
        assert_eq!(
            PivotedQr::new(&x).map(|_| ()),
            Err(EstimateError::RankDeficient { dependent: vec![4] })
        );
        let well = PivotedQr::new(&design(n)).expect("full rank");
        assert!(matches!(well.basis, Basis::Columns(_)));
    }
}

#[cfg(test)]
mod leverage_tests {
    use super::*;

    /// A shared factorisation computes its leverages once and hands the same ones out again
    /// (bit-equal to a factorisation that keeps nothing).
    #[test]
    fn a_shared_factorisation_keeps_its_leverages() {
        let x = DMatrix::from_fn(300, 3, |i, j| {
            if j == 0 {
                1.0
            } else {
                ((i * (j + 2)) as f64 * 0.3).sin()
            }
        });
        let shared = PivotedQr::new(&x).expect("rank").kept();
        let first = shared.leverages().expect("leverages");
        let again = shared.leverages().expect("leverages");
        assert!(Arc::ptr_eq(&first, &again));
        let alone = PivotedQr::new(&x)
            .expect("rank")
            .leverages()
            .expect("leverages");
        assert!(!Arc::ptr_eq(
            &alone,
            &PivotedQr::new(&x)
                .expect("rank")
                .leverages()
                .expect("again")
        ));
        let bits = |h: &[f64]| h.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&first), bits(&alone));
    }
}
