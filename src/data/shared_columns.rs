//! Column blocks read from a table once and handed to every design that uses them.
//!
//! Role: specifications that differ only in their outcome or their standard errors read the
//! same controls, regressors and instruments at the same rows, and each used to copy them
//! out of the table again (and then join them side by side again, for the collinearity scan
//! and the fit), so an n × k block was written several times per specification. A table's
//! [`SharedColumns`] keeps the blocks read from it and the blocks joined from those, and hands the
//! same matrix (an `Arc`) to every design asking for the same columns at the same rows. The
//! estimation layer's memo then recognises that matrix by its address (module
//! `estimate::shared`) instead of comparing its entries.
//!
//! Invariants:
//! * A block handed out has exactly the bits a fresh read would have: it is the same columns
//!   of the same table at rows equal entry by entry (compared in full), read by the same
//!   code. A joined block is recognised by the addresses of its parts, which the entry keeps
//!   alive, so an address cannot be reused for other bits while the entry lives.
//! * Only unmodified blocks are kept: designs with fixed effects (swept) or weights (scaled)
//!   read their own. A design that changes a block it was handed gets its own copy first
//!   (`Arc::make_mut`).
//! * The table's columns must not change while blocks are kept. They change only while the
//!   table is being built (reading, deriving, sorting), before any design is read; a clone
//!   of the table (to replace a column) starts with no blocks. Each kept block also records
//!   the addresses of the column buffers it was read from and is not handed out if any
//!   differs.
//! * At most [`ROW_SETS`] row sets, [`READ`] read blocks and [`JOINED`] joined blocks are
//!   kept, least recently used first out; they are freed with the table.

use std::sync::{Arc, Mutex, MutexGuard, PoisonError};

use nalgebra::DMatrix;

/// Row sets kept.
pub const ROW_SETS: usize = 4;
/// Read blocks kept.
pub const READ: usize = 12;
/// Joined blocks kept.
pub const JOINED: usize = 8;

/// A block read from the table: which columns, at which rows, and from which buffers.
struct Read {
    rows: Arc<Vec<usize>>,
    names: Vec<String>,
    ones: bool,
    sources: Vec<usize>,
    m: Arc<DMatrix<f64>>,
}

/// A block joined side by side from kept blocks.
struct Joined {
    parts: Vec<Arc<DMatrix<f64>>>,
    m: Arc<DMatrix<f64>>,
}

/// A yes-or-no answer about blocks side by side (see [`SharedColumns::settled`]).
struct Settled {
    parts: Vec<Arc<DMatrix<f64>>>,
    value: bool,
}

#[derive(Default)]
struct Kept {
    rows: Vec<Arc<Vec<usize>>>,
    read: Vec<Read>,
    joined: Vec<Joined>,
    settled: Vec<Settled>,
}

/// The blocks kept for one table (module documentation).
#[derive(Default)]
pub struct SharedColumns {
    kept: Mutex<Kept>,
}

impl Clone for SharedColumns {
    /// A clone of a table starts with no blocks (its columns may be about to change).
    fn clone(&self) -> Self {
        SharedColumns::default()
    }
}

impl std::fmt::Debug for SharedColumns {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let k = self.lock();
        write!(
            f,
            "SharedColumns {{ rows: {}, read: {}, joined: {} }}",
            k.rows.len(),
            k.read.len(),
            k.joined.len()
        )
    }
}

/// Moves entry `i` of `v` to the end (most recently used) and returns it.
fn touch<T>(v: &mut Vec<T>, i: usize) -> &T {
    let e = v.remove(i);
    v.push(e);
    &v[v.len() - 1]
}

/// Pushes `e` as the most recently used entry, dropping the least recently used beyond `cap`.
fn push_capped<T>(v: &mut Vec<T>, e: T, cap: usize) {
    if v.len() >= cap {
        v.remove(0);
    }
    v.push(e);
}

impl SharedColumns {
    fn lock(&self) -> MutexGuard<'_, Kept> {
        // Entries are pushed whole, so a lock poisoned by a panic elsewhere is still usable.
        self.kept.lock().unwrap_or_else(PoisonError::into_inner)
    }

    /// `rows` as a shared row set: a kept one equal to it entry by entry, else `rows` itself,
    /// now kept.
    pub fn rows(&self, rows: Vec<usize>) -> Arc<Vec<usize>> {
        let mut k = self.lock();
        if let Some(i) = k.rows.iter().position(|r| **r == rows) {
            return Arc::clone(touch(&mut k.rows, i));
        }
        let rows = Arc::new(rows);
        push_capped(&mut k.rows, Arc::clone(&rows), ROW_SETS);
        rows
    }

    /// The block of columns `names` (after a column of ones when `ones`) at `rows`, read
    /// from buffers at `sources`: a kept one, else the one `read` makes, now kept.
    ///
    /// # Errors
    /// As `read`.
    pub fn read<E>(
        &self,
        rows: &Arc<Vec<usize>>,
        (names, ones, sources): (&[String], bool, Vec<usize>),
        read: impl FnOnce() -> Result<DMatrix<f64>, E>,
    ) -> Result<Arc<DMatrix<f64>>, E> {
        let find = |k: &mut Kept| {
            let i = k.read.iter().position(|b| {
                Arc::ptr_eq(&b.rows, rows)
                    && b.ones == ones
                    && b.names == names
                    && b.sources == sources
            })?;
            Some(Arc::clone(&touch(&mut k.read, i).m))
        };
        if let Some(m) = find(&mut self.lock()) {
            return Ok(m);
        }
        // Read outside the lock; a block another design kept meanwhile is taken instead.
        let m = Arc::new(read()?);
        let mut k = self.lock();
        if let Some(kept) = find(&mut k) {
            return Ok(kept);
        }
        let entry = Read {
            rows: Arc::clone(rows),
            names: names.to_vec(),
            ones,
            sources,
            m: Arc::clone(&m),
        };
        push_capped(&mut k.read, entry, READ);
        Ok(m)
    }

    /// `check` of the blocks `parts` (a yes-or-no question about them side by side, such as
    /// whether a collinearity scan would find nothing), asked once: kept, like a join, when
    /// every part is a block kept here, and found again by the blocks' addresses.
    pub fn settled(&self, parts: &[&Arc<DMatrix<f64>>], check: impl FnOnce() -> bool) -> bool {
        let find = |k: &mut Kept| {
            let i = k.settled.iter().position(|s| {
                s.parts.len() == parts.len()
                    && s.parts.iter().zip(parts).all(|(a, b)| Arc::ptr_eq(a, b))
            })?;
            Some(touch(&mut k.settled, i).value)
        };
        if let Some(v) = find(&mut self.lock()) {
            return v;
        }
        let value = check();
        let mut k = self.lock();
        if parts
            .iter()
            .all(|p| k.read.iter().any(|b| Arc::ptr_eq(&b.m, p)))
        {
            let entry = Settled {
                parts: parts.iter().map(|p| Arc::clone(p)).collect(),
                value,
            };
            push_capped(&mut k.settled, entry, JOINED);
        }
        value
    }

    /// The blocks `parts` side by side (equal heights): the one part with columns itself
    /// when the others have none, else a kept join of the same blocks, else a fresh one, kept
    /// when every part is a block kept here.
    pub fn joined(&self, parts: &[&Arc<DMatrix<f64>>]) -> Arc<DMatrix<f64>> {
        let mut wide = parts.iter().filter(|p| p.ncols() > 0);
        if let (Some(only), None) = (wide.next(), wide.next()) {
            let n = parts.iter().map(|p| p.nrows()).max().unwrap_or(0);
            if only.nrows() == n {
                return Arc::clone(only);
            }
        }
        let find = |k: &mut Kept| {
            let i = k.joined.iter().position(|j| {
                j.parts.len() == parts.len()
                    && j.parts.iter().zip(parts).all(|(a, b)| Arc::ptr_eq(a, b))
            })?;
            Some(Arc::clone(&touch(&mut k.joined, i).m))
        };
        if let Some(m) = find(&mut self.lock()) {
            return m;
        }
        let m = Arc::new(side_by_side(parts));
        let mut k = self.lock();
        if let Some(kept) = find(&mut k) {
            return kept;
        }
        let is_kept = |p: &Arc<DMatrix<f64>>| {
            k.read.iter().any(|b| Arc::ptr_eq(&b.m, p))
                || k.joined.iter().any(|j| Arc::ptr_eq(&j.m, p))
        };
        if parts.iter().all(|p| is_kept(p)) {
            let entry = Joined {
                parts: parts.iter().map(|p| Arc::clone(p)).collect(),
                m: Arc::clone(&m),
            };
            push_capped(&mut k.joined, entry, JOINED);
        }
        m
    }
}

/// The blocks' columns side by side (blocks of equal height), copied once.
///
/// # Panics
/// When the blocks differ in height (a caller's error).
pub fn side_by_side(blocks: &[&Arc<DMatrix<f64>>]) -> DMatrix<f64> {
    let n = blocks.iter().map(|b| b.nrows()).max().unwrap_or(0);
    let k = blocks.iter().map(|b| b.ncols()).sum();
    let mut out = Vec::with_capacity(n * k);
    for b in blocks {
        assert_eq!(b.nrows(), n, "side_by_side: blocks of different heights");
        out.extend_from_slice(b.as_slice());
    }
    DMatrix::from_vec(n, k, out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn block(seed: usize) -> DMatrix<f64> {
        DMatrix::from_fn(50, 3, |i, j| (i * 7 + j * 13 + seed) as f64 * 0.5)
    }

    #[test]
    fn equal_rows_are_one_row_set() {
        let b = SharedColumns::default();
        let a = b.rows(vec![0, 2, 5]);
        let again = b.rows(vec![0, 2, 5]);
        let other = b.rows(vec![0, 2, 6]);
        assert!(Arc::ptr_eq(&a, &again));
        assert!(!Arc::ptr_eq(&a, &other));
    }

    #[test]
    fn a_block_is_read_once_per_columns_rows_and_buffers() {
        let b = SharedColumns::default();
        let rows = b.rows((0..50).collect());
        let names = vec!["x".to_string(), "w".to_string()];
        let mut reads = 0;
        let mut get = |ones: bool, sources: Vec<usize>| {
            b.read::<()>(&rows, (&names, ones, sources), || {
                reads += 1;
                Ok(block(reads))
            })
            .unwrap()
        };
        let first = get(true, vec![1, 2]);
        let again = get(true, vec![1, 2]);
        assert!(Arc::ptr_eq(&first, &again));
        // Another intercept choice or another buffer is another block.
        let no_ones = get(false, vec![1, 2]);
        let moved = get(true, vec![1, 3]);
        assert!(!Arc::ptr_eq(&first, &no_ones) && !Arc::ptr_eq(&first, &moved));
        assert_eq!(reads, 3);
    }

    /// Blocks `p` and `q` (one column each, all 50 rows), read and kept by `b`.
    fn two_kept_blocks(b: &SharedColumns) -> (Arc<DMatrix<f64>>, Arc<DMatrix<f64>>) {
        let rows = b.rows((0..50).collect());
        let names = |s: &str| vec![s.to_string()];
        let p = b.read::<()>(&rows, (&names("p"), false, vec![1]), || Ok(block(1)));
        let q = b.read::<()>(&rows, (&names("q"), false, vec![2]), || Ok(block(2)));
        (p.unwrap(), q.unwrap())
    }

    /// A question about kept blocks is asked once (in their order); about blocks not kept
    /// here, every time.
    #[test]
    fn answers_about_kept_blocks_are_kept() {
        let b = SharedColumns::default();
        let (p, q) = two_kept_blocks(&b);
        let mut asked = 0;
        let mut ask = |parts: &[&Arc<DMatrix<f64>>], answer: bool| {
            b.settled(parts, || {
                asked += 1;
                answer
            })
        };
        assert!(ask(&[&p, &q], true));
        assert!(ask(&[&p, &q], false), "the kept answer");
        assert!(!ask(&[&q, &p], false), "another order is another question");
        let loose = Arc::new(block(3));
        assert!(ask(&[&p, &loose], true));
        assert!(!ask(&[&p, &loose], false), "not kept: asked again");
        assert_eq!(asked, 4);
    }

    #[test]
    fn joins_of_kept_blocks_are_kept_and_equal_a_fresh_join() {
        let b = SharedColumns::default();
        let (p, q) = two_kept_blocks(&b);
        let pq = b.joined(&[&p, &q]);
        assert!(Arc::ptr_eq(&pq, &b.joined(&[&p, &q])));
        // Order matters, and a block not kept here is joined afresh each time.
        let qp = b.joined(&[&q, &p]);
        assert!(!Arc::ptr_eq(&pq, &qp));
        // A join with a block of no columns is the other block itself.
        let none = Arc::new(DMatrix::<f64>::zeros(50, 0));
        assert!(Arc::ptr_eq(&b.joined(&[&p, &none]), &p));
        let loose = Arc::new(block(3));
        assert!(!Arc::ptr_eq(
            &b.joined(&[&p, &loose]),
            &b.joined(&[&p, &loose])
        ));
        let mut fresh = block(1).as_slice().to_vec();
        fresh.extend_from_slice(block(2).as_slice());
        assert_eq!(pq.as_slice(), fresh.as_slice());
        assert_eq!(pq.shape(), (50, 6));
    }

    #[test]
    fn a_clone_keeps_nothing() {
        let b = SharedColumns::default();
        let rows = b.rows(vec![1, 2]);
        assert!(!Arc::ptr_eq(&rows, &b.clone().rows(vec![1, 2])));
    }
}
