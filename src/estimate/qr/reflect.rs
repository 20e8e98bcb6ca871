//! Householder reflectors applied to one column in fewer passes over memory.
//!
//! Applying the k reflectors of a factorisation to an n-vector took two passes per reflector:
//! a dot product with the reflector, then the update `c += a v` (nalgebra's `dot` and `axpy`).
//! Here the update for one reflector and the dot product for the next are done in the same
//! pass, so the column and the reflectors are read k + 1 times instead of 2k.
//!
//! Invariant: every result is the same bits as the two-pass sequence. The update is the same
//! sum (`c[i] + a·v[i]`, with a = −2·dot; nalgebra adds the same two numbers), and the dot product is summed in the order
//! nalgebra's `dot` sums it for a dynamically sized vector ([`LaneDot`]): eight running sums
//! over the first len − len mod 8 terms (term t into sum t mod 8), combined as
//! ((((0 + (s₀ + s₄)) + (s₁ + s₅)) + (s₂ + s₆)) + (s₃ + s₇)), then the remaining terms added one
//! by one. Products and sums are plain IEEE operations (no fused multiply-add), as there. The
//! tests compare against nalgebra itself.

use nalgebra::DMatrix;

/// A dot product of a known length summed in nalgebra's order (module documentation).
struct LaneDot {
    lanes: [f64; 8],
    rest: [f64; 8],
    rest_len: usize,
    main: usize,
}

impl LaneDot {
    fn new(len: usize) -> Self {
        LaneDot {
            lanes: [0.0; 8],
            rest: [0.0; 8],
            rest_len: 0,
            main: len - len % 8,
        }
    }

    /// Adds term number `t` (terms must come in order).
    #[inline]
    fn add(&mut self, t: usize, term: f64) {
        if t < self.main {
            self.lanes[t % 8] += term;
        } else {
            self.rest[self.rest_len] = term;
            self.rest_len += 1;
        }
    }

    fn sum(&self) -> f64 {
        let mut res = combine_lanes(&self.lanes);
        for &term in &self.rest[..self.rest_len] {
            res += term;
        }
        res
    }
}

/// The eight running sums of a dot product combined as nalgebra's `dot` combines them:
/// ((((0 + (s₀ + s₄)) + (s₁ + s₅)) + (s₂ + s₆)) + (s₃ + s₇)). The terms past the last
/// multiple of eight are then added one by one by the caller.
pub(crate) fn combine_lanes(s: &[f64; 8]) -> f64 {
    let mut res = 0.0;
    res += s[0] + s[4];
    res += s[1] + s[5];
    res += s[2] + s[6];
    res += s[3] + s[7];
    res
}

/// A reflector: its unit vector, held in rows `start..` of a column (`v[0]` is row `start`).
#[derive(Clone, Copy)]
pub(super) struct Reflector<'a> {
    pub(super) v: &'a [f64],
    pub(super) start: usize,
}

/// The dot product of a reflector with rows `start..` of `c`, in nalgebra's order.
pub(super) fn dot(r: Reflector, c: &[f64]) -> f64 {
    let mut d = LaneDot::new(r.v.len());
    for (t, (v, x)) in r.v.iter().zip(&c[r.start..]).enumerate() {
        d.add(t, v * x);
    }
    d.sum()
}

/// Applies reflector `r` to `c` (c ← c − 2 (vᵀc) v on rows `r.start..`, given `dot` = vᵀc) and
/// returns the dot product of `next` with the updated `c`, both in one pass. `next` starts
/// at most one row before or after `r`.
fn reflect_then_dot(c: &mut [f64], r: Reflector, dot: f64, next: Reflector) -> f64 {
    let a = -2.0 * dot;
    let mut d = LaneDot::new(next.v.len());
    let first = r.start.min(next.start);
    let both = r.start.max(next.start);
    // The one row only one of the two reads.
    for (i, x) in c.iter_mut().enumerate().take(both).skip(first) {
        if i >= r.start {
            *x += a * r.v[i - r.start];
        } else {
            d.add(i - next.start, next.v[i - next.start] * *x);
        }
    }
    let n = c.len();
    let mut i = both;
    // Rows up to the next multiple of eight terms of `next`, one at a time.
    while i < n && !(i - next.start).is_multiple_of(8) {
        c[i] += a * r.v[i - r.start];
        d.add(i - next.start, next.v[i - next.start] * c[i]);
        i += 1;
    }
    // Whole groups of eight terms, each term into its own running sum.
    while i + 8 <= n && i - next.start + 8 <= d.main {
        let cs = &mut c[i..i + 8];
        let vs = &r.v[i - r.start..i - r.start + 8];
        let ws = &next.v[i - next.start..i - next.start + 8];
        for t in 0..8 {
            cs[t] += a * vs[t];
            d.lanes[t] += ws[t] * cs[t];
        }
        i += 8;
    }
    while i < n {
        c[i] += a * r.v[i - r.start];
        d.add(i - next.start, next.v[i - next.start] * c[i]);
        i += 1;
    }
    d.sum()
}

/// Applies reflector `r` to `c` given its dot product with `c` (the last of a sequence).
fn reflect(c: &mut [f64], r: Reflector, dot: f64) {
    let a = -2.0 * dot;
    for (x, v) in c[r.start..].iter_mut().zip(r.v) {
        *x += a * v;
    }
}

/// Applies the reflectors to `c` in the order given (the same bits as applying each with
/// nalgebra's `dot` and `axpy` in turn; module documentation).
pub(super) fn apply_all(c: &mut [f64], reflectors: &[Reflector]) {
    let Some(first) = reflectors.first() else {
        return;
    };
    let mut d = dot(*first, c);
    for pair in reflectors.windows(2) {
        d = reflect_then_dot(c, pair[0], d, pair[1]);
    }
    if let Some(last) = reflectors.last() {
        reflect(c, *last, d);
    }
}

/// The reflectors held in the columns of `a` (reflector j in rows j.. of column j), those
/// numbered `range`, in that order.
pub(super) fn reflectors(
    a: &DMatrix<f64>,
    range: impl Iterator<Item = usize>,
) -> Vec<Reflector<'_>> {
    let n = a.nrows();
    let s = a.as_slice();
    range
        .map(|j| Reflector {
            v: &s[j * n + j..(j + 1) * n],
            start: j,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::DVector;

    /// Invented values with varied magnitudes and signs, so that sums round.
    fn value(i: usize, seed: usize) -> f64 {
        let t = (i * 7919 + seed * 104_729) as f64;
        (t * 0.754_877_666).sin() * 10f64.powi((i % 7) as i32 - 3)
    }

    /// The two-pass sequence with nalgebra's `dot` and `axpy` (what the module replaces).
    fn two_pass(c: &mut DVector<f64>, a: &DMatrix<f64>, order: &[usize]) {
        let n = a.nrows();
        for &j in order {
            let v = a.view((j, j), (n - j, 1));
            let mut block = c.rows_mut(j, n - j);
            let dot = v.dot(&block);
            block.axpy(-2.0 * dot, &v.column(0), 1.0);
        }
    }

    /// Forward and reverse sequences over many lengths (below, at and above multiples of
    /// eight, so every boundary of the running sums is crossed) give nalgebra's bits.
    #[test]
    fn the_same_bits_as_dot_then_axpy() {
        for n in [1, 2, 7, 8, 9, 15, 16, 17, 23, 64, 65, 100, 257] {
            for k in [1, 2, 3, 5, 8] {
                if k > n {
                    continue;
                }
                let a = DMatrix::from_fn(n, k, |i, j| value(i, j + 1));
                let c0 = DVector::from_fn(n, |i, _| value(i, 99));
                let orders: [Vec<usize>; 2] = [(0..k).collect(), (0..k).rev().collect()];
                for order in &orders {
                    let mut expected = c0.clone();
                    two_pass(&mut expected, &a, order);
                    let mut got = c0.clone();
                    apply_all(got.as_mut_slice(), &reflectors(&a, order.iter().copied()));
                    let same = expected
                        .iter()
                        .zip(got.iter())
                        .all(|(x, y)| x.to_bits() == y.to_bits());
                    assert!(same, "n = {n}, k = {k}, order {order:?}");
                }
            }
        }
    }

    /// The lane sum is nalgebra's `dot` for every length up to 40.
    #[test]
    fn lane_dot_is_nalgebras_dot() {
        for len in 0..40 {
            let x = DVector::from_fn(len, |i, _| value(i, 3));
            let y = DVector::from_fn(len, |i, _| value(i, 4));
            let mut d = LaneDot::new(len);
            for t in 0..len {
                d.add(t, x[t] * y[t]);
            }
            assert_eq!(d.sum().to_bits(), x.dot(&y).to_bits(), "len {len}");
        }
    }
}
