//! Factorisations shared by the fits of one run.
//!
//! Role: most factorisations of an IV specification and its diagnostics are of matrices that
//! do not involve the outcome (the regressors X, the instruments Z, the projected regressors
//! X̂, the controls, X with the first-stage residuals), and specifications that differ only in
//! their outcome or their standard errors factorise the same matrices again. While a
//! [`Sharing`] guard is alive, the factorisations asked for through [`design_qr`],
//! [`shared_design_qr`], [`shared_qr`], [`collinear_kept`] and [`collinear_of`] are kept in a
//! small memo and handed out again to any fit that asks for a matrix equal to one already
//! factorised, with its thin Q and refined inverse computed at most once (module `qr`). A
//! caller that owns or shares its matrix hands it to the memo, which keeps it without a
//! copy; the memo recognises a matrix it holds by address, and keeps its key (BLAKE3)
//! ([`digest`]) for the keys below. A shared factorisation of the instruments
//! also keeps the outcome-free results computed with it (the first stages, Shea's partial
//! R², the weak-instrument diagnostics, the projected regressors X̂, the control-function
//! design [X | v̂], the first endogenous column's fit on Z and its covariances, M_W Z, and
//! Hansen's Q₁ᵀX; `PivotedQr::derived`), under the key of everything else
//! they read (the regressors' bits, the errors with their cluster ids, the absorbed
//! degrees of freedom), so specifications that differ only in their outcome compute them
//! once.
//!
//! Invariants:
//! * A hit needs the same shape and the same bits in every entry (the very matrix the memo
//!   holds, or compared in full after a cheap fingerprint that only chooses the candidates), so a shared factorisation is the one
//!   a fresh call would have computed: results are the same bits with or without sharing,
//!   and do not depend on which specification asked first. A test checks this.
//! * The memo is process-wide (the fits run on rayon's threads), holds at most
//!   [`CAPACITY`] matrices, least recently used first out, and is emptied when the last guard
//!   is dropped. Without a guard every call factorises afresh, as before.
//! * Only outcome-free matrices of at least [`MIN_ENTRIES`] entries are worth keeping; small
//!   ones (k × k systems, per-draw designs) are factorised directly by their callers.

use std::sync::{Arc, Mutex, MutexGuard, OnceLock, PoisonError};

use nalgebra::DMatrix;

use super::qr::{collinear_columns, PivotedQr};
use super::EstimateError;

/// How many distinct matrices the memo keeps. One IV specification with every diagnostic
/// factorises about eight distinct outcome-free matrices; the plan's specifications are
/// fitted two or so at a time, in plan order, so specifications sharing a sample are near
/// each other.
pub const CAPACITY: usize = 10;

/// Matrices with fewer entries than this are not kept (cheap to factorise again).
pub const MIN_ENTRIES: usize = 1 << 14;

/// A factorised matrix: the matrix itself (kept for the equality check, and handed to
/// callers that hold the design), its QR and, computed on first use, its collinear columns.
struct Entry {
    fingerprint: u64,
    x: Arc<DMatrix<f64>>,
    qr: OnceLock<Result<Arc<PivotedQr>, EstimateError>>,
    dependent: OnceLock<Vec<usize>>,
    /// The key (BLAKE3) of the matrix's shape and bits, computed on first use ([`digest`]).
    digest: OnceLock<[u8; 32]>,
}

#[derive(Default)]
struct Memo {
    /// Live guards.
    scopes: usize,
    /// Entries, least recently used first.
    entries: Vec<Arc<Entry>>,
    /// Entries made so far: a lookup that compared outside the lock and found nothing makes
    /// a new entry only if no other entry was made meanwhile (else it looks again), so two
    /// fits asking for the same matrix at once share one entry.
    made: u64,
}

/// Factorisations handed out again, over the process's life (for tests and measurements; it
/// never affects a result).
static HITS: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);

static MEMO: Mutex<Memo> = Mutex::new(Memo {
    scopes: 0,
    entries: Vec::new(),
    made: 0,
});

fn memo() -> MutexGuard<'static, Memo> {
    // A panic while the lock was held cannot leave an entry half-made (entries are pushed
    // whole), so a poisoned lock is still usable.
    MEMO.lock().unwrap_or_else(PoisonError::into_inner)
}

/// While alive, outcome-free factorisations are shared between fits (module documentation).
/// Guards nest; the memo is emptied when the last one is dropped.
#[must_use = "sharing lasts while the guard is alive"]
pub struct Sharing(());

impl Sharing {
    /// Starts (or joins) sharing.
    pub fn begin() -> Sharing {
        memo().scopes += 1;
        Sharing(())
    }
}

impl Drop for Sharing {
    fn drop(&mut self) {
        let mut m = memo();
        m.scopes = m.scopes.saturating_sub(1);
        if m.scopes == 0 {
            m.entries.clear();
        }
    }
}

/// A cheap fingerprint of `x`: its shape and about 4,096 entries spread over it. It only
/// chooses candidates; equality is decided by comparing every entry.
fn fingerprint(x: &DMatrix<f64>) -> u64 {
    let s = x.as_slice();
    let step = (s.len() / 4096).max(1);
    let mut h = (x.nrows() as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ x.ncols() as u64;
    for v in s.iter().step_by(step) {
        h = (h.rotate_left(5) ^ v.to_bits()).wrapping_mul(0x1000_0000_01B3);
    }
    h
}

/// Bitwise equality of two matrices of the same shape (the same matrix, or compared in
/// blocks of 512 entries, each block's bit patterns at once).
fn same_bits(a: &DMatrix<f64>, b: &DMatrix<f64>) -> bool {
    a.shape() == b.shape()
        && (std::ptr::eq(a, b)
            || a.as_slice()
                .chunks(512)
                .zip(b.as_slice().chunks(512))
                .all(|(p, q)| {
                    p.iter()
                        .zip(q)
                        .fold(true, |same, (x, y)| same & (x.to_bits() == y.to_bits()))
                }))
}

/// The memo's entry for `x`, made (with a copy of `x`) if there is none; `None` when no
/// guard is alive or `x` is too small to keep.
fn entry(x: &DMatrix<f64>) -> Option<Arc<Entry>> {
    entry_for(x, None)
}

/// [`entry`], keeping `owned` itself (the caller's shared `x`) instead of a copy when the
/// entry is new.
fn entry_for(x: &DMatrix<f64>, owned: Option<&Arc<DMatrix<f64>>>) -> Option<Arc<Entry>> {
    if x.len() < MIN_ENTRIES || tests::bypassed() {
        return None;
    }
    let fingerprint = fingerprint(x);
    let mut compared: Vec<Arc<Entry>> = Vec::new();
    let (mut m, found) = loop {
        let (candidates, made): (Vec<Arc<Entry>>, u64) = {
            let m = memo();
            if m.scopes == 0 {
                return None;
            }
            let candidates = m
                .entries
                .iter()
                .filter(|e| e.fingerprint == fingerprint)
                .filter(|e| !compared.iter().any(|c| Arc::ptr_eq(c, e)))
                .cloned()
                .collect();
            (candidates, m.made)
        };
        // Compared outside the lock: a full comparison reads the whole matrix.
        let found = candidates.iter().find(|e| same_bits(&e.x, x)).cloned();
        compared.extend(candidates);
        let m = memo();
        if m.scopes == 0 {
            return None;
        }
        if found.is_some() || m.made == made {
            break (m, found);
        }
        // Another fit made an entry meanwhile: it may be this matrix's.
    };
    let e = match found {
        Some(e) => {
            HITS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
            m.entries.retain(|other| !Arc::ptr_eq(other, &e));
            e
        }
        None => {
            m.made += 1;
            Arc::new(Entry {
                fingerprint,
                x: owned.map_or_else(|| Arc::new(x.clone()), Arc::clone),
                qr: OnceLock::new(),
                dependent: OnceLock::new(),
                digest: OnceLock::new(),
            })
        }
    };
    if m.entries.len() >= CAPACITY {
        m.entries.remove(0);
    }
    m.entries.push(Arc::clone(&e));
    Some(e)
}

/// Hands `x` to the memo (when sharing is on) without factorising it, so that a later
/// request for a matrix with the same bits finds it instead of keeping a copy of its own.
pub(crate) fn hold(x: &Arc<DMatrix<f64>>) {
    let _ = entry_for(x, Some(x));
}

/// The QR of `x`, shared when sharing is on ([`PivotedQr::new`] otherwise).
///
/// # Errors
/// As [`PivotedQr::new`].
pub(crate) fn shared_qr(x: &DMatrix<f64>) -> Result<Arc<PivotedQr>, EstimateError> {
    match entry(x) {
        Some(e) => e.factorised(),
        None => PivotedQr::new(x).map(Arc::new),
    }
}

impl Entry {
    /// The entry's QR, factorised from its matrix on first use and
    /// made to keep what it computes later.
    fn factorised(&self) -> Result<Arc<PivotedQr>, EstimateError> {
        self.qr
            .get_or_init(|| PivotedQr::new_held(&self.x).map(|qr| Arc::new(qr.kept())))
            .clone()
    }
}

/// `x` itself (the memo's copy when shared, else a copy) with its QR, for fits that keep
/// their design.
///
/// # Errors
/// As [`PivotedQr::new`].
pub(crate) fn design_qr(
    x: &DMatrix<f64>,
) -> Result<(Arc<DMatrix<f64>>, Arc<PivotedQr>), EstimateError> {
    match entry(x) {
        Some(e) => Ok((Arc::clone(&e.x), e.factorised()?)),
        None => {
            let x = Arc::new(x.clone());
            let qr = PivotedQr::new_held(&x)?;
            Ok((x, Arc::new(qr)))
        }
    }
}

/// [`design_qr`] for a matrix the caller already shares: a new memo entry keeps `x` itself,
/// and a later call with the same `x` is recognised without comparing its entries.
///
/// # Errors
/// As [`PivotedQr::new`].
pub(crate) fn shared_design_qr(
    x: &Arc<DMatrix<f64>>,
) -> Result<(Arc<DMatrix<f64>>, Arc<PivotedQr>), EstimateError> {
    match entry_for(x, Some(x)) {
        Some(e) => Ok((Arc::clone(&e.x), e.factorised()?)),
        None => Ok((Arc::clone(x), Arc::new(PivotedQr::new_held(x)?))),
    }
}

/// [`collinear_columns`] of `x`, shared when sharing is on, and `x` itself: the memo's
/// matrix when it holds one with the same bits (`x` is then dropped), else `x`, which a new
/// entry keeps without a copy.
pub(crate) fn collinear_kept(x: DMatrix<f64>) -> (Arc<DMatrix<f64>>, Vec<usize>) {
    collinear_kept_shared(Arc::new(x))
}

/// [`collinear_kept`] for a matrix the caller shares: a new entry keeps `x` itself, and a
/// later call with the same `x` is recognised by its address.
pub(crate) fn collinear_kept_shared(x: Arc<DMatrix<f64>>) -> (Arc<DMatrix<f64>>, Vec<usize>) {
    match entry_for(&x, Some(&x)) {
        Some(e) => {
            let dependent = e.dependent.get_or_init(|| collinear_columns(&e.x)).clone();
            (Arc::clone(&e.x), dependent)
        }
        None => {
            let dependent = collinear_columns(&x);
            (x, dependent)
        }
    }
}

/// The key (BLAKE3) of `x`'s shape and bits: kept with the memo's entry when `x` is the matrix
/// the memo holds (computed once however many fits ask), else computed.
pub(crate) fn digest(x: &Arc<DMatrix<f64>>) -> [u8; 32] {
    let compute = || {
        super::qr::InputKey::new("matrix")
            .count(x.nrows())
            .count(x.ncols())
            .numbers(x.as_slice())
            .finish()
    };
    let held = memo()
        .entries
        .iter()
        .find(|e| Arc::ptr_eq(&e.x, x))
        .cloned();
    match held {
        Some(e) => *e.digest.get_or_init(compute),
        None => compute(),
    }
}

/// [`collinear_columns`] of `x`, shared when sharing is on (`x` handed to the memo without a
/// copy).
pub fn collinear_of(x: DMatrix<f64>) -> Vec<usize> {
    collinear_kept(x).1
}

/// [`collinear_of`] for a matrix the caller shares (kept by the memo without a copy, and
/// recognised by its address when asked again).
pub fn collinear_of_shared(x: &Arc<DMatrix<f64>>) -> Vec<usize> {
    collinear_kept_shared(Arc::clone(x)).1
}

#[cfg(not(test))]
mod tests {
    pub(super) fn bypassed() -> bool {
        false
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::estimate::{ols, tsls, Absorbed, CovSpec, IvProblem};
    use nalgebra::DVector;
    use std::cell::Cell;

    thread_local! {
        /// Set on a test's own thread to factorise afresh although another test's guard is
        /// alive (tests share the process-wide memo).
        static BYPASS: Cell<bool> = const { Cell::new(false) };
    }

    pub(super) fn bypassed() -> bool {
        BYPASS.with(Cell::get)
    }

    /// The tests of this module one at a time (each relies on what the memo holds).
    static SERIAL: Mutex<()> = Mutex::new(());

    /// Invented numbers, large enough to be kept by the memo.
    fn cell(i: usize, j: usize) -> f64 {
        let t = (i * 37 + j * 11) as f64;
        (t * 0.618).sin() + 0.1 * j as f64 + (i % 5) as f64 * 0.01
    }

    /// A matrix handed over is kept without a copy and handed back for the same bits; its
    /// digest is the one computed afresh, and another matrix's differs.
    #[test]
    fn kept_matrices_and_their_digests() {
        let _serial = SERIAL.lock().unwrap_or_else(PoisonError::into_inner);
        let _sharing = Sharing::begin();
        let x = DMatrix::from_fn(3000, 6, cell);
        let (first, dependent) = collinear_kept(x.clone());
        let (second, again) = collinear_kept(x.clone());
        assert!(Arc::ptr_eq(&first, &second));
        assert_eq!(
            (dependent.clone(), again),
            (collinear_columns(&x), dependent)
        );
        let fresh = Arc::new(x.clone());
        assert_eq!(digest(&first), digest(&fresh));
        let mut other = x;
        other[(1234, 3)] += 1e-12;
        assert_ne!(digest(&first), digest(&Arc::new(other)));
    }

    /// Every fit gives the same bits with sharing as without, whichever fit comes first and
    /// however often a factorisation is reused.
    #[test]
    fn sharing_changes_no_bit() {
        let _serial = SERIAL.lock().unwrap_or_else(PoisonError::into_inner);
        let n = 4000;
        let exog = DMatrix::from_fn(n, 5, |i, j| if j == 0 { 1.0 } else { cell(i, j) });
        let z = DMatrix::from_fn(n, 2, |i, j| cell(i, j + 7));
        let endog = DMatrix::from_fn(n, 1, |i, _| z[(i, 0)] + 0.5 * z[(i, 1)] + cell(i, 9));
        let ys: Vec<DVector<f64>> = (0..3)
            .map(|o| DVector::from_fn(n, |i, _| endog[(i, 0)] * 0.3 + cell(i, 20 + o)))
            .collect();
        let x = crate::estimate::linear::hcat(&endog, &exog);
        let covs = [CovSpec::Classical, CovSpec::Hc1];
        let fits = || {
            let mut out = Vec::new();
            for y in &ys {
                for cov in &covs {
                    let iv = tsls(y, &exog, &endog, &z, true, cov, &Absorbed::NONE).unwrap();
                    let o = ols(y, &x, true, cov, &Absorbed::NONE).unwrap();
                    out.extend(iv.coef.iter().chain(iv.cov.iter()).map(|v| v.to_bits()));
                    out.extend(o.coef.iter().chain(o.cov.iter()).map(|v| v.to_bits()));
                }
            }
            out
        };
        BYPASS.with(|b| b.set(true));
        let alone = fits();
        BYPASS.with(|b| b.set(false));
        let hits = HITS.load(std::sync::atomic::Ordering::Relaxed);
        let shared = {
            let _sharing = Sharing::begin();
            let first = fits();
            let again = fits();
            assert_eq!(first, again);
            first
        };
        // X, Z, X̂ and more were handed out again, many times.
        assert!(HITS.load(std::sync::atomic::Ordering::Relaxed) >= hits + 20);
        assert_eq!(alone, shared);
    }

    /// First stages and weak-instrument diagnostics kept with a shared factorisation are the
    /// bits each specification computes alone, are handed out again only for the same
    /// regressors and errors, and are recomputed under other cluster ids.
    #[test]
    fn kept_first_stages_change_no_bit() {
        let _serial = SERIAL.lock().unwrap_or_else(PoisonError::into_inner);
        // Invented numbers without the sinusoids' low rank (SplitMix64 of the position).
        let cell = |i: usize, j: usize| {
            let mut x = (i as u64 * 1000 + j as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15);
            x = (x ^ (x >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            x = (x ^ (x >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            (x ^ (x >> 31)) as f64 / u64::MAX as f64 - 0.5
        };
        let n = 4000;
        let exog = DMatrix::from_fn(n, 3, |i, j| if j == 0 { 1.0 } else { cell(i, j) });
        let z = DMatrix::from_fn(n, 2, |i, j| cell(i, j + 7));
        let endog = DMatrix::from_fn(n, 1, |i, _| z[(i, 0)] + 0.5 * z[(i, 1)] + cell(i, 9));
        let ys: Vec<DVector<f64>> = (0..3)
            .map(|o| DVector::from_fn(n, |i, _| endog[(i, 0)] * 0.3 + cell(i, 20 + o)))
            .collect();
        let covs = [
            CovSpec::Hc1,
            CovSpec::Cluster {
                ids: (0..n).map(|i| i / 40).collect(),
            },
            CovSpec::Cluster {
                ids: (0..n).map(|i| (i * 7) % 37).collect(),
            },
        ];
        let diagnostics = || {
            let mut out = Vec::new();
            for y in &ys {
                for cov in &covs {
                    let p = IvProblem::new(y, &exog, &endog, &z).unwrap();
                    let fs = p.first_stages(true, cov, &Absorbed::NONE).unwrap();
                    let weak = p.weak_instruments(cov, 0.1, &Absorbed::NONE).unwrap();
                    out.push(format!("{fs:?} {weak:?}"));
                }
            }
            out
        };
        BYPASS.with(|b| b.set(true));
        let alone = diagnostics();
        BYPASS.with(|b| b.set(false));
        // The two cluster layouts give different robust first-stage F statistics.
        assert_ne!(alone[1], alone[2]);
        let hits = crate::estimate::qr::DERIVED_HITS.load(std::sync::atomic::Ordering::Relaxed);
        let shared = {
            let _sharing = Sharing::begin();
            diagnostics()
        };
        // The second and third outcomes reuse the first's six results.
        let now = crate::estimate::qr::DERIVED_HITS.load(std::sync::atomic::Ordering::Relaxed);
        assert!(now >= hits + 12, "{} hits", now - hits);
        assert_eq!(alone, shared);
    }

    /// Two fits asking at once for the same matrix (equal bits, different copies) share one
    /// entry and so one factorisation.
    #[test]
    fn fits_asking_at_once_share_one_entry() {
        let _serial = SERIAL.lock().unwrap_or_else(PoisonError::into_inner);
        let _sharing = Sharing::begin();
        for round in 0..20 {
            let x = DMatrix::from_fn(20_000, 4, |i, j| cell(i + round, j));
            let start = Arc::new(std::sync::Barrier::new(2));
            let ask = |x: DMatrix<f64>| {
                let start = Arc::clone(&start);
                std::thread::spawn(move || {
                    start.wait();
                    design_qr(&x).expect("full rank")
                })
            };
            let (a, b) = (ask(x.clone()), ask(x));
            let ((xa, qa), (xb, qb)) = (a.join().expect("a"), b.join().expect("b"));
            assert!(
                Arc::ptr_eq(&xa, &xb) && Arc::ptr_eq(&qa, &qb),
                "round {round}"
            );
        }
    }

    /// A matrix that differs from a kept one in a single bit is factorised afresh.
    #[test]
    fn a_different_matrix_is_not_taken_for_a_kept_one() {
        let _serial = SERIAL.lock().unwrap_or_else(PoisonError::into_inner);
        let _sharing = Sharing::begin();
        let a = DMatrix::from_fn(5000, 4, cell);
        let mut b = a.clone();
        b[(4321, 2)] = f64::from_bits(b[(4321, 2)].to_bits() ^ 1);
        let (ka, _) = design_qr(&a).unwrap();
        let (kb, _) = design_qr(&b).unwrap();
        assert!(!Arc::ptr_eq(&ka, &kb));
        assert!(same_bits(&kb, &b) && !same_bits(&ka, &b));
        let (again, _) = design_qr(&a).unwrap();
        assert!(Arc::ptr_eq(&ka, &again));
    }
}
