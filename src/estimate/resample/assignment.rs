//! Assignment designs: which re-assignments of the observed treatment are possible, how many
//! there are, enumerating them all, and drawing one at random.
//!
//! A design splits the units into permutation groups (single units, or clusters) and the
//! groups into strata (one stratum, or the blocks). A re-assignment permutes the observed
//! treatment values (rows, for several columns) of the groups within each stratum. Only
//! distinct assignments count: with stratum s holding m_s groups of which m_{s,v} carry value
//! v, there are ∏_s m_s! / ∏_v m_{s,v}! of them (a product of multinomial coefficients).
//!
//! Enumeration unranks multiset permutations in lexicographic order of the value labels
//! (the number of arrangements starting with v is M·m_v/m for M the multinomial of the m
//! remaining positions), so assignment i is computed directly from i with no stored list.
//! Random assignments shuffle each stratum with Fisher–Yates (Durstenfeld 1964, CACM 7).

use std::cmp::Ordering;
use std::collections::HashMap;

use nalgebra::DMatrix;

use super::{ResampleError, Stream};

/// How the treatment was randomised.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum AssignmentDesign {
    /// Complete randomisation: the observed values are permuted among all units.
    Complete,
    /// Block randomisation: values are permuted among the units of each block.
    Blocked {
        /// Block id of each unit (any integers).
        blocks: Vec<usize>,
    },
    /// Cluster randomisation: the treatment is constant within clusters, and the cluster
    /// values are permuted among the clusters.
    Clustered {
        /// Cluster id of each unit (any integers).
        clusters: Vec<usize>,
    },
    /// Cluster randomisation within blocks; each cluster must lie in one block.
    BlockedClustered {
        /// Block id of each unit.
        blocks: Vec<usize>,
        /// Cluster id of each unit.
        clusters: Vec<usize>,
    },
}

/// A design applied to observed values: groups, strata and value labels.
#[derive(Debug, Clone)]
pub(crate) struct Assigner {
    /// Group of each unit.
    unit_group: Vec<usize>,
    /// Groups of each stratum, in ascending group order.
    strata: Vec<Vec<usize>>,
    /// Observed label of each group.
    group_label: Vec<usize>,
    /// Per stratum: how many of its groups carry each label (indexed by label).
    counts: Vec<Vec<u64>>,
    /// Distinct assignments per stratum (`None` past u128).
    stratum_totals: Vec<Option<u128>>,
    /// The distinct value rows, indexed by label.
    pub(crate) rows: Vec<Vec<f64>>,
}

/// Relabels ids 0..G in order of first appearance; also returns the original id of each.
fn densify(ids: &[usize]) -> (Vec<usize>, Vec<usize>) {
    let mut map = HashMap::new();
    let mut original = Vec::new();
    let dense = ids
        .iter()
        .map(|&id| {
            *map.entry(id).or_insert_with(|| {
                original.push(id);
                original.len() - 1
            })
        })
        .collect();
    (dense, original)
}

/// Lexicographic total order on rows (−0.0 was normalised to +0.0 beforehand).
fn row_cmp(a: &[f64], b: &[f64]) -> Ordering {
    a.iter()
        .zip(b)
        .map(|(x, y)| x.total_cmp(y))
        .find(|o| *o != Ordering::Equal)
        .unwrap_or(Ordering::Equal)
}

/// Distinct rows of `values` (sorted) and the label of each row.
fn label_rows(values: &DMatrix<f64>) -> (Vec<Vec<f64>>, Vec<usize>) {
    let rows: Vec<Vec<f64>> = (0..values.nrows())
        .map(|i| values.row(i).iter().map(|v| v + 0.0).collect())
        .collect();
    let mut order: Vec<usize> = (0..rows.len()).collect();
    order.sort_by(|&a, &b| row_cmp(&rows[a], &rows[b]));
    let mut distinct: Vec<Vec<f64>> = Vec::new();
    let mut label = vec![0; rows.len()];
    for i in order {
        match distinct.last() {
            Some(last) if row_cmp(last, &rows[i]) == Ordering::Equal => {}
            _ => distinct.push(rows[i].clone()),
        }
        label[i] = distinct.len() - 1;
    }
    (distinct, label)
}

/// C(a, b) in u128, exact, `None` on overflow (each step multiplies after cancelling the
/// divisor, so no intermediate exceeds the result by more than a factor a).
fn binomial(a: u64, b: u64) -> Option<u128> {
    let b = b.min(a - b);
    let mut c: u128 = 1;
    for i in 0..b {
        let (num, den) = (u128::from(a - i), u128::from(i + 1));
        let g = gcd(c, den);
        let (c_red, den_red) = (c / g, den / g);
        // den_red divides num because c·num/den is an integer and gcd(c_red, den_red) = 1.
        c = c_red.checked_mul(num / den_red)?;
    }
    Some(c)
}

fn gcd(mut a: u128, mut b: u128) -> u128 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

/// The multinomial coefficient (Σ counts)! / ∏ counts!, `None` on overflow.
fn multinomial(counts: &[u64]) -> Option<u128> {
    let mut total = 0u64;
    let mut m: u128 = 1;
    for &c in counts {
        total += c;
        m = m.checked_mul(binomial(total, c)?)?;
    }
    Some(m)
}

impl Assigner {
    /// Applies `design` to the observed `values` (one row per unit).
    ///
    /// # Errors
    /// Ids of the wrong length, a treatment row varying inside a cluster, a cluster in
    /// several blocks.
    pub(crate) fn new(
        design: &AssignmentDesign,
        values: &DMatrix<f64>,
    ) -> Result<Self, ResampleError> {
        let n = values.nrows();
        let check = |what, ids: &Vec<usize>| {
            if ids.len() == n {
                Ok(())
            } else {
                Err(ResampleError::IdLength {
                    what,
                    n,
                    got: ids.len(),
                })
            }
        };
        let (rows, unit_label) = label_rows(values);
        let units: Vec<usize> = (0..n).collect();
        let zeros = vec![0; n];
        let (unit_group, group_original, unit_block) = match design {
            AssignmentDesign::Complete => (units.clone(), units, zeros),
            AssignmentDesign::Blocked { blocks } => {
                check("blocks", blocks)?;
                (units.clone(), units, densify(blocks).0)
            }
            AssignmentDesign::Clustered { clusters } => {
                check("clusters", clusters)?;
                let (g, orig) = densify(clusters);
                (g, orig, zeros)
            }
            AssignmentDesign::BlockedClustered { blocks, clusters } => {
                check("blocks", blocks)?;
                check("clusters", clusters)?;
                let (g, orig) = densify(clusters);
                (g, orig, densify(blocks).0)
            }
        };
        let groups = group_original.len();
        let mut group_label = vec![usize::MAX; groups];
        let mut group_block = vec![usize::MAX; groups];
        for i in 0..n {
            let g = unit_group[i];
            let cluster = group_original[g];
            if group_label[g] == usize::MAX {
                group_label[g] = unit_label[i];
                group_block[g] = unit_block[i];
            } else if group_label[g] != unit_label[i] {
                return Err(ResampleError::VariesWithinCluster { cluster });
            } else if group_block[g] != unit_block[i] {
                return Err(ResampleError::ClusterSpansBlocks { cluster });
            }
        }
        let blocks = group_block.iter().max().map_or(0, |b| b + 1);
        let mut strata = vec![Vec::new(); blocks];
        let mut counts = vec![vec![0u64; rows.len()]; blocks];
        for g in 0..groups {
            strata[group_block[g]].push(g);
            counts[group_block[g]][group_label[g]] += 1;
        }
        let stratum_totals = counts.iter().map(|c| multinomial(c)).collect();
        Ok(Assigner {
            unit_group,
            strata,
            group_label,
            counts,
            stratum_totals,
            rows,
        })
    }

    /// The number of distinct assignments, `None` when it exceeds u128.
    pub(crate) fn total(&self) -> Option<u128> {
        self.stratum_totals
            .iter()
            .try_fold(1u128, |acc, t| acc.checked_mul((*t)?))
    }

    /// Unit labels from group labels.
    pub(crate) fn expand(&self, group_label: &[usize]) -> Vec<usize> {
        self.unit_group.iter().map(|&g| group_label[g]).collect()
    }

    /// The permutation group of each unit.
    pub(crate) fn unit_group(&self) -> &[usize] {
        &self.unit_group
    }

    /// Whether some group holds more than one unit (a cluster-randomised design).
    pub(crate) fn grouped(&self) -> bool {
        self.group_label.len() < self.unit_group.len()
    }

    /// The observed label of every unit.
    #[cfg(test)]
    pub(crate) fn observed(&self) -> Vec<usize> {
        self.expand(&self.group_label)
    }

    /// The observed label of every group.
    pub(crate) fn observed_groups(&self) -> Vec<usize> {
        self.group_label.clone()
    }

    /// Assignment number `index` (0 ≤ index < total ≤ 2^64) in the enumeration order, as
    /// unit labels (see [`Assigner::unrank_groups`]).
    #[cfg(test)]
    pub(crate) fn unrank(&self, index: u64) -> Vec<usize> {
        self.expand(&self.unrank_groups(index))
    }

    /// Assignment number `index` (0 ≤ index < total ≤ 2^64) in the enumeration order, as
    /// group labels: mixed radix over strata (stratum 0 varies fastest), lexicographic within
    /// strata.
    pub(crate) fn unrank_groups(&self, index: u64) -> Vec<usize> {
        let mut rest = u128::from(index);
        let mut labels = vec![0; self.group_label.len()];
        for (s, groups) in self.strata.iter().enumerate() {
            let total = self.stratum_totals[s].unwrap_or(u128::MAX);
            let mut r = rest % total;
            rest /= total;
            let mut counts = self.counts[s].clone();
            let mut m = total;
            let mut left = groups.len() as u128;
            for &g in groups {
                for (v, c) in counts.iter_mut().enumerate() {
                    if *c == 0 {
                        continue;
                    }
                    // m ≤ total ≤ 2^64 and c ≤ 2^64, so the product fits in u128.
                    let block = m * u128::from(*c) / left;
                    if r < block {
                        labels[g] = v;
                        m = block;
                        *c -= 1;
                        break;
                    }
                    r -= block;
                }
                left -= 1;
            }
        }
        labels
    }

    /// A uniformly random assignment as unit labels (see [`Assigner::shuffle_groups`]).
    #[cfg(test)]
    pub(crate) fn shuffle(&self, stream: &mut Stream) -> Vec<usize> {
        self.expand(&self.shuffle_groups(stream))
    }

    /// A uniformly random assignment as group labels: each stratum shuffled by Fisher–Yates.
    pub(crate) fn shuffle_groups(&self, stream: &mut Stream) -> Vec<usize> {
        let mut labels = self.group_label.clone();
        for groups in &self.strata {
            let mut vals: Vec<usize> = groups.iter().map(|&g| labels[g]).collect();
            for i in (1..vals.len()).rev() {
                let j = stream.below(i as u64 + 1) as usize;
                vals.swap(i, j);
            }
            for (&g, v) in groups.iter().zip(vals) {
                labels[g] = v;
            }
        }
        labels
    }

    /// The value matrix (G × m) of an assignment given as group labels.
    pub(crate) fn group_values(&self, labels: &[usize]) -> DMatrix<f64> {
        let m = self.rows.first().map_or(0, Vec::len);
        DMatrix::from_fn(labels.len(), m, |g, j| self.rows[labels[g]][j])
    }

    /// The value matrix (n × m) of an assignment given as unit labels.
    pub(crate) fn values(&self, labels: &[usize]) -> DMatrix<f64> {
        let m = self.rows.first().map_or(0, Vec::len);
        DMatrix::from_fn(labels.len(), m, |i, j| self.rows[labels[i]][j])
    }
}

/// The number of distinct assignments of the observed treatment `values` (one row per unit)
/// under `design`: ∏ over strata of multinomial coefficients (module documentation);
/// `Ok(None)` when it exceeds 2^128 − 1.
///
/// # Errors
/// As the design checks: id lengths, treatment varying within a cluster, a cluster spanning
/// blocks.
pub fn count_assignments(
    design: &AssignmentDesign,
    values: &DMatrix<f64>,
) -> Result<Option<u128>, ResampleError> {
    Ok(Assigner::new(design, values)?.total())
}
