//! Absorbing category fixed effects by the method of alternating projections.
//!
//! Role: sweep one or more sets of category dummies D = [D₁ | … | D_m] out of every column
//! the caller hands in (outcome, regressors, instruments), so that the estimators only see
//! M_D-transformed columns, and report how many coefficients were absorbed ([`Absorbed`]).
//! By the Frisch–Waugh–Lovell theorem the coefficients, residuals and sandwich covariances of
//! the remaining columns are those of the regression with explicit dummy columns, once the
//! degrees of freedom count the absorbed levels.
//!
//! Method: M_D v is the limit of alternating projections (von Neumann 1950; Halperin 1962,
//! Acta Sci. Math. 23): one sweep subtracts, dimension after dimension (Gauss–Seidel order),
//! the current group means. One dimension is exact after one sweep. With two or more, every
//! second pair of sweeps is extrapolated by the Irons–Tuck (1969, Int. J. Numer. Methods
//! Eng. 1) variant of Aitken's δ² acceleration, an affine combination of three successive
//! sweeps (coefficients summing to one), so the iterate stays in v + span(D) and the
//! result is a deterministic function of the input.
//!
//! Probability weights ([`FixedEffects::weighted`]): the sweep subtracts weighted group means
//! Σ_g w v / Σ_g w, and the acceleration and the absorbed-column test use the weighted inner
//! product Σ w a b. The result is M v in the data's units, where √w ⊙ (M v) is the projection
//! of the √w-scaled column √w ⊙ v off the √w-scaled dummies: sweeping with weighted means and
//! then scaling rows by √w is the within transformation of weighted least squares, and the
//! leverage of the absorbed projection is w_i / Σ_g w.
//!
//! Convergence: a column is finished when a plain sweep changes no element by more than
//! [`SWEEP_TOLERANCE`] × (its largest absolute input value); the result returned is always the
//! output of such a plain sweep. After [`MAX_SWEEPS`] sweeps without meeting the tolerance the
//! sweep fails with [`EstimateError::NoConvergence`]. A swept column whose norm falls to
//! √n · [`ABSORBED_COLUMN_TOLERANCE`] × its input norm or below lies in the span of the dummies up to
//! the iteration error and is set to exactly zero, so that the QR factorisation reports it as
//! a collinear regressor instead of fitting rounding noise.

use nalgebra::{DMatrix, DVector};

use super::covariance::densify;
use super::{Absorbed, EstimateError};

/// Stop when the largest change in a sweep is at most this times the column's scale.
pub const SWEEP_TOLERANCE: f64 = 1e-14;

/// Most sweeps per column before [`EstimateError::NoConvergence`].
pub const MAX_SWEEPS: usize = 10_000;

/// A swept column with ‖M_D v‖ ≤ √n · this · ‖v‖ is treated as absorbed (set to zero).
pub const ABSORBED_COLUMN_TOLERANCE: f64 = 1e-12;

/// Checks that every dimension has one id per observation; returns n.
fn common_length(groups: &[Vec<usize>]) -> Result<usize, EstimateError> {
    let n = groups.first().map_or(0, Vec::len);
    for g in groups {
        if g.len() != n {
            return Err(EstimateError::DimensionMismatch {
                what: "fixed effect",
                expected: n,
                got: g.len(),
            });
        }
    }
    Ok(n)
}

/// Rows to keep: drops observations that are alone in their level of any dimension,
/// repeatedly, until none remains (dropping one can create another singleton).
///
/// A singleton's dummy fits it exactly (leverage 1), so it carries no information about the
/// other coefficients but would still count as an observation and a level.
///
/// The result has one flag per row of the longest dimension; should the dimensions differ
/// in length, a row missing from any of them is not kept ([`FixedEffects::new`] rejects
/// such input).
pub fn drop_singletons(groups: &[Vec<usize>]) -> Vec<bool> {
    let n = groups.iter().map(Vec::len).max().unwrap_or(0);
    let dense: Vec<(Vec<usize>, usize)> = groups.iter().map(|g| densify(g)).collect();
    let mut keep: Vec<bool> = (0..n).map(|i| groups.iter().all(|g| i < g.len())).collect();
    loop {
        let mut changed = false;
        for (ids, levels) in &dense {
            let mut counts = vec![0usize; *levels];
            for (i, &l) in ids.iter().enumerate() {
                if keep[i] {
                    counts[l] += 1;
                }
            }
            for (i, &l) in ids.iter().enumerate() {
                if keep[i] && counts[l] == 1 {
                    keep[i] = false;
                    changed = true;
                }
            }
        }
        if !changed {
            return keep;
        }
    }
}

/// Category fixed effects to absorb: dense 0-based level ids per dimension.
#[derive(Debug, Clone, PartialEq)]
pub struct FixedEffects {
    /// Per dimension, the level of each observation (0..levels).
    ids: Vec<Vec<usize>>,
    /// Per dimension, the number of observations in each level.
    counts: Vec<Vec<usize>>,
    /// Per dimension, the total weight of each level (`None` unweighted).
    totals: Option<Vec<Vec<f64>>>,
    /// Probability weights of the observations (`None` unweighted).
    weights: Option<Vec<f64>>,
    /// Observations.
    n: usize,
}

impl FixedEffects {
    /// Builds the fixed effects from one id vector per dimension (arbitrary ids, relabelled
    /// densely in order of first appearance).
    ///
    /// # Errors
    /// [`EstimateError::DimensionMismatch`] when the dimensions differ in length.
    pub fn new(groups: Vec<Vec<usize>>) -> Result<Self, EstimateError> {
        let n = common_length(&groups)?;
        let mut ids = Vec::with_capacity(groups.len());
        let mut counts = Vec::with_capacity(groups.len());
        for g in &groups {
            let (dense, levels) = densify(g);
            let mut c = vec![0usize; levels];
            for &l in &dense {
                c[l] += 1;
            }
            ids.push(dense);
            counts.push(c);
        }
        Ok(FixedEffects {
            ids,
            counts,
            totals: None,
            weights: None,
            n,
        })
    }

    /// [`new`](Self::new) with probability weights, one per observation, each finite and
    /// positive: the sweep then subtracts weighted group means (see the module documentation).
    ///
    /// # Errors
    /// [`EstimateError::DimensionMismatch`] when the dimensions or the weights differ in
    /// length; [`EstimateError::NotFinite`] for a weight that is not finite and positive.
    pub fn weighted(groups: Vec<Vec<usize>>, weights: &[f64]) -> Result<Self, EstimateError> {
        let mut fe = Self::new(groups)?;
        if weights.len() != fe.n {
            return Err(EstimateError::DimensionMismatch {
                what: "fixed-effect weights",
                expected: fe.n,
                got: weights.len(),
            });
        }
        if weights.iter().any(|w| !(w.is_finite() && *w > 0.0)) {
            return Err(EstimateError::NotFinite);
        }
        let totals = fe
            .ids
            .iter()
            .zip(&fe.counts)
            .map(|(ids, counts)| {
                let mut t = vec![0.0; counts.len()];
                for (&l, w) in ids.iter().zip(weights) {
                    t[l] += w;
                }
                t
            })
            .collect();
        fe.totals = Some(totals);
        fe.weights = Some(weights.to_vec());
        Ok(fe)
    }

    /// Σ w a b: the inner product the projections are orthogonal in.
    fn inner(&self, a: &[f64], b: &[f64]) -> f64 {
        match &self.weights {
            Some(w) => a.iter().zip(b).zip(w).map(|((a, b), w)| w * a * b).sum(),
            None => a.iter().zip(b).map(|(a, b)| a * b).sum(),
        }
    }

    /// Number of levels of each dimension.
    pub fn levels(&self) -> Vec<usize> {
        self.counts.iter().map(Vec::len).collect()
    }

    /// Observations.
    pub fn observations(&self) -> usize {
        self.n
    }

    /// One Gauss–Seidel sweep in place: subtract the (weighted) group means of each
    /// dimension in turn.
    fn sweep_once(&self, v: &mut [f64], sums: &mut Vec<f64>) {
        for (d, (ids, counts)) in self.ids.iter().zip(&self.counts).enumerate() {
            sums.clear();
            sums.resize(counts.len(), 0.0);
            match (&self.weights, &self.totals) {
                (Some(w), Some(totals)) => {
                    for ((x, &l), w) in v.iter().zip(ids).zip(w) {
                        sums[l] += w * x;
                    }
                    for (s, t) in sums.iter_mut().zip(&totals[d]) {
                        *s /= t;
                    }
                }
                _ => {
                    for (x, &l) in v.iter().zip(ids) {
                        sums[l] += x;
                    }
                    for (s, &c) in sums.iter_mut().zip(counts) {
                        *s /= c as f64;
                    }
                }
            }
            for (x, &l) in v.iter_mut().zip(ids) {
                *x -= sums[l];
            }
        }
    }

    /// M_D v for one column (see the module documentation for the stopping rule).
    fn sweep_column(&self, column: usize, input: &[f64]) -> Result<Vec<f64>, EstimateError> {
        let scale = input.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let mut sums = Vec::new();
        let mut x0 = input.to_vec();
        if scale == 0.0 || self.ids.is_empty() {
            return Ok(x0);
        }
        if self.ids.len() == 1 {
            self.sweep_once(&mut x0, &mut sums);
            return Ok(self.zero_if_absorbed(input, x0));
        }
        let tol = SWEEP_TOLERANCE * scale;
        let max_change = |a: &[f64], b: &[f64]| {
            a.iter()
                .zip(b)
                .fold(0.0f64, |m, (p, q)| m.max((p - q).abs()))
        };
        let mut sweeps = 0;
        while sweeps < MAX_SWEEPS {
            let mut x1 = x0.clone();
            self.sweep_once(&mut x1, &mut sums);
            sweeps += 1;
            if max_change(&x0, &x1) <= tol {
                return Ok(self.zero_if_absorbed(input, x1));
            }
            let mut x2 = x1.clone();
            self.sweep_once(&mut x2, &mut sums);
            sweeps += 1;
            if max_change(&x1, &x2) <= tol {
                return Ok(self.zero_if_absorbed(input, x2));
            }
            // Irons–Tuck: x₃ = x₂ − (Δ²ᵀΔx₂ / Δ²ᵀΔ²) Δx₂ with Δx₂ = x₂ − x₁ and
            // Δ² = x₂ − 2x₁ + x₀ (inner products weighted for a weighted sweep).
            let d2: Vec<f64> = x0
                .iter()
                .zip(&x1)
                .zip(&x2)
                .map(|((a, b), c)| c - 2.0 * b + a)
                .collect();
            let step: Vec<f64> = x2.iter().zip(&x1).map(|(c, b)| c - b).collect();
            let (num, den) = (self.inner(&d2, &step), self.inner(&d2, &d2));
            if den > 0.0 && (num / den).is_finite() {
                let step = num / den;
                for (c, b) in x2.iter_mut().zip(&x1) {
                    *c -= step * (*c - b);
                }
            }
            x0 = x2;
        }
        Err(EstimateError::NoConvergence { column, sweeps })
    }

    /// Sets a swept column to zero when it is absorbed up to the iteration error (norms
    /// weighted for a weighted sweep).
    fn zero_if_absorbed(&self, input: &[f64], mut swept: Vec<f64>) -> Vec<f64> {
        let norm = |v: &[f64]| self.inner(v, v).sqrt();
        let threshold = (self.n as f64).sqrt() * ABSORBED_COLUMN_TOLERANCE * norm(input);
        if norm(&swept) <= threshold {
            swept.iter_mut().for_each(|x| *x = 0.0);
        }
        swept
    }

    /// M_D m: every column of `m` with the fixed effects swept out.
    ///
    /// # Errors
    /// [`EstimateError::DimensionMismatch`] unless `m` has one row per observation,
    /// [`EstimateError::NotFinite`] for NaN or infinite entries, and
    /// [`EstimateError::NoConvergence`] naming the first column that did not converge.
    pub fn sweep(&self, m: &DMatrix<f64>) -> Result<DMatrix<f64>, EstimateError> {
        if m.nrows() != self.n {
            return Err(EstimateError::DimensionMismatch {
                what: "swept matrix",
                expected: self.n,
                got: m.nrows(),
            });
        }
        if m.iter().any(|v| !v.is_finite()) {
            return Err(EstimateError::NotFinite);
        }
        let mut out = DMatrix::zeros(m.nrows(), m.ncols());
        for j in 0..m.ncols() {
            let swept = self.sweep_column(j, m.column(j).as_slice())?;
            out.set_column(j, &DVector::from_vec(swept));
        }
        Ok(out)
    }

    /// [`sweep`](Self::sweep) for a single vector.
    ///
    /// # Errors
    /// As [`sweep`](Self::sweep).
    pub fn sweep_vector(&self, v: &DVector<f64>) -> Result<DVector<f64>, EstimateError> {
        let m = DMatrix::from_column_slice(v.len(), 1, v.as_slice());
        Ok(self.sweep(&m)?.column(0).into_owned())
    }

    /// Connected components of the bipartite graph linking the levels of dimensions `a`
    /// and `b` that share an observation.
    fn components(&self, a: usize, b: usize) -> usize {
        let la = self.counts[a].len();
        let mut parent: Vec<usize> = (0..la + self.counts[b].len()).collect();
        fn root(parent: &mut [usize], mut i: usize) -> usize {
            while parent[i] != i {
                parent[i] = parent[parent[i]];
                i = parent[i];
            }
            i
        }
        for (&ia, &ib) in self.ids[a].iter().zip(&self.ids[b]) {
            let (ra, rb) = (root(&mut parent, ia), root(&mut parent, la + ib));
            if ra != rb {
                parent[ra.max(rb)] = ra.min(rb);
            }
        }
        (0..parent.len())
            .filter(|&i| root(&mut parent, i) == i)
            .count()
    }

    /// Absorbed degrees of freedom of the dimensions listed in `dims` (see [`absorbed`]).
    ///
    /// [`absorbed`]: Self::absorbed
    fn df_of(&self, dims: &[usize]) -> usize {
        let Some((&first, rest)) = dims.split_first() else {
            return 0;
        };
        rest.iter().fold(self.counts[first].len(), |df, &d| {
            df + self.counts[d].len() - self.components(first, d)
        })
    }

    /// Whether every level of dimension `d` lies within a single cluster of `cluster`.
    fn nested_in(&self, d: usize, cluster: &[usize]) -> bool {
        if cluster.len() != self.n {
            return false;
        }
        let mut owner: Vec<Option<usize>> = vec![None; self.counts[d].len()];
        self.ids[d]
            .iter()
            .zip(cluster)
            .all(|(&l, &c)| match owner[l] {
                None => {
                    owner[l] = Some(c);
                    true
                }
                Some(o) => o == c,
            })
    }

    /// The coefficients absorbed, for the degrees of freedom of the estimators.
    ///
    /// # Formula
    /// * `df`: with one dimension, its number of levels L₁ (the constant included). With two,
    ///   L₁ + L₂ − C, where C is the number of connected components of the bipartite graph
    ///   whose nodes are the levels and whose edges are the observations; this is the exact
    ///   rank of [D₁ | D₂] (Abowd, Creecy and Kramarz 2002, the connectedness argument). With
    ///   three or more dimensions the convention is L₁ + Σ_{d≥2} (L_d − C(1, d)), counting only
    ///   the redundancies each dimension has with the first: an upper bound on the rank, so
    ///   the degrees of freedom err towards larger standard errors.
    /// * `nested_df`: the same count over the dimensions nested in one of `clusters` (every
    ///   level within one cluster), as if they were absorbed first, so they take the constant
    ///   and the redundancies with the others go to the non-nested ones; capped at `df`.
    ///   A cluster vector of the wrong length nests nothing.
    /// * `leverage`: with one dimension the absorbed projection has leverage 1/n_g for an
    ///   observation in a level with n_g observations (weighted: w_i / Σ_g w, the leverage of
    ///   the √w-scaled dummies); with more dimensions there is no cheap
    ///   exact value, so `None` (and HC2/HC3 are refused by the estimators).
    pub fn absorbed(&self, clusters: &[&[usize]]) -> Absorbed {
        let all: Vec<usize> = (0..self.ids.len()).collect();
        let df = self.df_of(&all);
        let nested: Vec<usize> = all
            .iter()
            .copied()
            .filter(|&d| clusters.iter().any(|c| self.nested_in(d, c)))
            .collect();
        let nested_df = self.df_of(&nested).min(df);
        let leverage = match self.ids.as_slice() {
            [ids] => Some(
                ids.iter()
                    .enumerate()
                    .map(|(i, &l)| match (&self.totals, &self.weights) {
                        (Some(t), Some(w)) => w[i] / t[0][l],
                        _ => 1.0 / self.counts[0][l] as f64,
                    })
                    .collect(),
            ),
            _ => None,
        };
        Absorbed {
            df,
            nested_df,
            leverage,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: rows (a, x) (a, y) (b, y) (c, z) (c, z) (d, w): d is a singleton in
    /// the first dimension and w in the second (row 5 goes); b is a singleton in the first
    /// (row 2 goes), which leaves y with one row (row 1 goes), which leaves a with one row
    /// (row 0 goes). Rows 3 and 4 remain.
    #[test]
    fn singletons_cascade() {
        let first = vec![0, 0, 1, 2, 2, 3];
        let second = vec![10, 11, 11, 12, 12, 13];
        let keep = drop_singletons(&[first, second]);
        assert_eq!(keep, vec![false, false, false, true, true, false]);
        assert_eq!(
            drop_singletons(&[vec![0, 0, 0], vec![1, 1]]),
            [true, true, false]
        );
    }

    /// Hand-counted ranks: two dimensions linked into two components lose two columns.
    #[test]
    fn degrees_of_freedom_by_components() {
        // Levels of the first: {0, 1} meet {5, 6} of the second; {2} meets {7}.
        let fe = FixedEffects::new(vec![vec![0, 0, 1, 1, 2, 2], vec![5, 6, 5, 6, 7, 7]]).unwrap();
        assert_eq!(fe.levels(), vec![3, 3]);
        let a = fe.absorbed(&[]);
        assert_eq!((a.df, a.nested_df, a.leverage), (3 + 3 - 2, 0, None));
        // The first dimension is nested in the clusters (0, 0, 1, 1, 2, 2), the second not.
        let clusters = [0, 0, 1, 1, 2, 2];
        let a = fe.absorbed(&[&clusters]);
        assert_eq!((a.df, a.nested_df), (4, 3));
        let one = FixedEffects::new(vec![vec![4, 4, 9]]).unwrap();
        let a = one.absorbed(&[&[1, 1, 1]]);
        assert_eq!((a.df, a.nested_df), (2, 2));
        assert_eq!(a.leverage, Some(vec![0.5, 0.5, 1.0]));
    }

    /// One dimension: the sweep is exact demeaning (hand-computed group means).
    #[test]
    fn one_dimension_demeans() {
        let fe = FixedEffects::new(vec![vec![0, 1, 0, 1]]).unwrap();
        let m = DMatrix::from_column_slice(4, 1, &[1.0, 10.0, 3.0, 20.0]);
        let s = fe.sweep(&m).unwrap();
        assert_eq!(s.as_slice(), &[-1.0, -5.0, 1.0, 5.0]);
    }

    /// Weighted: hand-computed weighted means (1·1 + 2·3)/3 and (3·10 + 2·20)/5, leverage w/Σ_g w.
    #[test]
    fn one_dimension_weighted_demeans() {
        let fe = FixedEffects::weighted(vec![vec![0, 1, 0, 1]], &[1.0, 3.0, 2.0, 2.0]).unwrap();
        let s = fe
            .sweep(&DMatrix::from_column_slice(4, 1, &[1.0, 10.0, 3.0, 20.0]))
            .unwrap();
        let want = [1.0 - 7.0 / 3.0, -4.0, 3.0 - 7.0 / 3.0, 6.0];
        assert!(
            s.iter().zip(want).all(|(a, b)| (a - b).abs() < 1e-14),
            "{s}"
        );
        assert_eq!(
            fe.absorbed(&[]).leverage,
            Some(vec![1.0 / 3.0, 0.6, 2.0 / 3.0, 0.4])
        );
        assert!(FixedEffects::weighted(vec![vec![0, 1]], &[1.0, 0.0]).is_err());
    }

    /// A column constant within the levels of a dimension is absorbed exactly (zero).
    #[test]
    fn absorbed_column_is_zero() {
        let fe = FixedEffects::new(vec![vec![0, 0, 1, 1, 2, 2], vec![0, 1, 0, 1, 0, 1]]).unwrap();
        let m = DMatrix::from_column_slice(6, 1, &[1.0, 3.0, 2.0, 4.0, 5.0, 7.0]);
        let s = fe.sweep(&m).unwrap();
        assert!(s.iter().all(|&x| x == 0.0), "{s}");
        let bad = DMatrix::from_element(5, 1, 1.0);
        assert!(matches!(
            fe.sweep(&bad),
            Err(EstimateError::DimensionMismatch { .. })
        ));
    }
}
