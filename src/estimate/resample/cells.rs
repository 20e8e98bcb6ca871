//! Re-drawn columns that are constant within groups (cluster-randomised designs): each draw
//! fitted from cell-level statistics, in O(H·|W|·L + C·|W|²·L) rather than O(n).
//!
//! # Formula
//! A cell h is a non-empty intersection of an assignment group and a covariance cluster (for
//! the classical covariance, of an assignment group and the whole sample). Within a cell the
//! re-drawn row aₕ (1 × L) is constant. With Q the thin Q of the controls W, p = Q'Z (|W| × L),
//! q̄ₕ and ȳₕ the cell means of qᵢ and ỹᵢ = (M_W y)ᵢ, and dᵢ = qᵢ − q̄ₕ, eᵢ = ỹᵢ − ȳₕ the
//! within-cell deviations,
//!
//!   z̃ᵢ = rₕ − dᵢ'p with rₕ = aₕ − q̄ₕ'p,   ỹᵢ − z̃ᵢγ = (ȳₕ − rₕγ) + (eᵢ + dᵢ'pγ).
//!
//! Because Σ_{i∈h} dᵢ = 0 and Σ_{i∈h} eᵢ = 0, the cross terms between the between-cell and
//! within-cell parts vanish. Let R_c = [[R_D, ρ], [0, σ]] be the R factor of the within-cell
//! deviations [D | e] of cluster c (one Householder QR per cluster, once). Then the compressed
//! rows, for each cell √nₕ·rₕ with outcome √nₕ·ȳₕ and for each cluster the |W| rows −R_D p
//! with outcome ρ, tagged with their cluster, give exactly (in real arithmetic) the units'
//! Z̃'Z̃, Z̃'ỹ, every cluster's score sum Σ_{i∈c} z̃ᵢ(ỹᵢ − z̃ᵢγ), and the residual sum of
//! squares less Σ_c σ_c². Working in terms of deviations keeps every term a sum of squares
//! or a product of residual-sized factors (no subtraction of large cross-products), so the
//! rounding is of the same order as partialling each unit. HC covariances weight each unit
//! by its own residual and leverage and keep the per-unit path (module `partial`).

use std::collections::HashMap;

use nalgebra::{DMatrix, DVector};

use super::family::Pencil;
use super::partial::{CellParts, Partialled, Rows, ZFit};

/// Cell-level statistics of a partialled regression under a grouped design.
#[derive(Debug, Clone)]
pub(crate) struct Cells {
    /// Assignment group of each cell.
    cell_group: Vec<usize>,
    /// Units in each cell.
    count: Vec<f64>,
    /// Σ qᵢ over each cell's units (|W| × H).
    q_sum: DMatrix<f64>,
    /// q̄ₕ (|W| × H).
    q_mean: DMatrix<f64>,
    /// R_D of each cluster, stacked (C·|W| × |W|).
    r_within: DMatrix<f64>,
    /// The compressed outcome: √nₕ·ȳₕ for each cell, then ρ of each cluster.
    y: DVector<f64>,
    /// Cluster of each compressed row (`None` for the classical covariance).
    ids: Option<Vec<usize>>,
    /// Σ_c σ_c², the residual sum of squares no draw changes.
    rss_extra: f64,
    /// The second outcome t̃ of a family ỹ − τ₀t̃ (`None` unless asked).
    second: Option<Second>,
}

/// The compressed rows of a second outcome t̃ (module `partial`, [`Pencil`]): the within-
/// cluster factor is then that of [D | e_y | e_t].
#[derive(Debug, Clone)]
struct Second {
    /// √nₕ·t̄ₕ for each cell, then the ρ_t of each cluster.
    t: DVector<f64>,
    /// For each cluster the rows [σ_y, σ_yt] and [0, σ_t] of the factor's trailing 2 × 2
    /// block: the within-cell residual sum of squares of ỹ − τ₀t̃ is Σ of their squared
    /// norms at (1, −τ₀)'.
    extra: Vec<[f64; 2]>,
}

impl Cells {
    /// The statistics of `parts` for the assignment group of each unit (`unit_group`).
    pub(super) fn new(parts: &CellParts<'_>, unit_group: &[usize]) -> Self {
        Self::build(parts, unit_group, None)
    }

    /// [`Cells::new`] with a second outcome `t_tilde` (= M_W t, one per unit), for
    /// [`Cells::pencil`].
    pub(super) fn with_second(
        parts: &CellParts<'_>,
        unit_group: &[usize],
        t_tilde: &DVector<f64>,
    ) -> Self {
        Self::build(parts, unit_group, Some(t_tilde))
    }

    fn build(parts: &CellParts<'_>, unit_group: &[usize], second: Option<&DVector<f64>>) -> Self {
        let n = unit_group.len();
        let kw = parts.q.map_or(0, |q| q.ncols());
        let (unit_cluster, clusters): (Vec<usize>, usize) = match parts.clusters {
            Some((ids, g)) => (ids.to_vec(), g),
            None => (vec![0; n], 1),
        };
        let mut map: HashMap<(usize, usize), usize> = HashMap::new();
        let mut cell_group = Vec::new();
        let mut cell_cluster = Vec::new();
        let unit_cell: Vec<usize> = (0..n)
            .map(|i| {
                let key = (unit_group[i], unit_cluster[i]);
                *map.entry(key).or_insert_with(|| {
                    cell_group.push(key.0);
                    cell_cluster.push(key.1);
                    cell_group.len() - 1
                })
            })
            .collect();
        let cells = cell_group.len();
        let mut count = vec![0.0; cells];
        let mut q_sum = DMatrix::zeros(kw, cells);
        let mut y_sum = vec![0.0; cells];
        let mut t_sum = vec![0.0; cells];
        for (i, &h) in unit_cell.iter().enumerate() {
            count[h] += 1.0;
            y_sum[h] += parts.y_tilde[i];
            if let Some(t) = second {
                t_sum[h] += t[i];
            }
            if let Some(q) = parts.q {
                for r in 0..kw {
                    q_sum[(r, h)] += q[(i, r)];
                }
            }
        }
        let mut q_mean = q_sum.clone();
        for (h, mut col) in q_mean.column_iter_mut().enumerate() {
            col /= count[h];
        }
        let y_mean: Vec<f64> = y_sum.iter().zip(&count).map(|(s, c)| s / c).collect();
        let t_mean: Vec<f64> = t_sum.iter().zip(&count).map(|(s, c)| s / c).collect();
        let width = kw + 1 + usize::from(second.is_some());
        let mut t_rows = DVector::zeros(if second.is_some() {
            cells + clusters * kw
        } else {
            0
        });
        let mut extra = Vec::new();
        let mut members = vec![Vec::new(); clusters];
        for (i, &c) in unit_cluster.iter().enumerate() {
            members[c].push(i);
        }
        let mut r_within = DMatrix::zeros(clusters * kw, kw);
        let mut y = DVector::zeros(cells + clusters * kw);
        for h in 0..cells {
            y[h] = count[h].sqrt() * y_mean[h];
        }
        if second.is_some() {
            for h in 0..cells {
                t_rows[h] = count[h].sqrt() * t_mean[h];
            }
        }
        let mut rss_extra = 0.0;
        for (c, units) in members.iter().enumerate() {
            let dev = DMatrix::from_fn(units.len(), width, |row, col| {
                let (i, h) = (units[row], unit_cell[units[row]]);
                match (parts.q, second) {
                    (Some(q), _) if col < kw => q[(i, col)] - q_mean[(col, h)],
                    (_, Some(t)) if col == kw + 1 => t[i] - t_mean[h],
                    _ => parts.y_tilde[i] - y_mean[h],
                }
            });
            let r = dev.qr().r();
            let at = |a: usize, b: usize| if a < r.nrows() { r[(a, b)] } else { 0.0 };
            for a in 0..kw {
                for b in 0..kw {
                    r_within[(c * kw + a, b)] = at(a, b);
                }
                y[cells + c * kw + a] = at(a, kw);
                if second.is_some() {
                    t_rows[cells + c * kw + a] = at(a, kw + 1);
                }
            }
            rss_extra += at(kw, kw) * at(kw, kw);
            if second.is_some() {
                extra.push([at(kw, kw), at(kw, kw + 1)]);
                extra.push([0.0, at(kw + 1, kw + 1)]);
            }
        }
        let ids = parts.clusters.map(|_| {
            let mut ids = cell_cluster.clone();
            ids.extend((0..clusters).flat_map(|c| std::iter::repeat_n(c, kw)));
            ids
        });
        Cells {
            cell_group,
            count,
            q_sum,
            q_mean,
            r_within,
            y,
            ids,
            rss_extra,
            second: second.map(|_| Second { t: t_rows, extra }),
        }
    }

    /// Fits the draw whose assignment group g carries the row `a[g]` (G × L), as
    /// [`Partialled::fit`] would fit the units' columns.
    pub(super) fn fit(&self, part: &Partialled, a: &DMatrix<f64>, with_cov: bool) -> Option<ZFit> {
        let (zt, norms) = self.compressed(a);
        part.fit_rows(&self.rows(&zt, &norms), with_cov)
    }

    /// As [`Cells::fit`], the family of outcomes ỹ − τ₀t̃ of a [`Pencil`] (`None` also when
    /// the cells were built without the second outcome).
    pub(super) fn pencil(
        &self,
        part: &Partialled,
        a: &DMatrix<f64>,
        with_cov: bool,
    ) -> Option<Pencil> {
        let second = self.second.as_ref()?;
        let (zt, norms) = self.compressed(a);
        part.pencil_rows(&self.rows(&zt, &norms), &second.t, &second.extra, with_cov)
    }

    /// The compressed rows of a draw (`zt`, `norms` from [`Cells::compressed`]) with the
    /// compressed outcome and their clusters.
    fn rows<'a>(&'a self, zt: &'a DMatrix<f64>, norms: &'a [f64]) -> Rows<'a> {
        Rows {
            zt,
            z_norms: norms,
            y: &self.y,
            ids: self.ids.as_deref(),
            rss_extra: self.rss_extra,
        }
    }

    /// The compressed rows of the re-drawn columns (cells, then each cluster's within
    /// rows) and the norms of the units' columns before partialling.
    fn compressed(&self, a: &DMatrix<f64>) -> (DMatrix<f64>, Vec<f64>) {
        let (kw, cells) = self.q_sum.shape();
        let l = a.ncols();
        let mut p = DMatrix::zeros(kw, l);
        for (h, &g) in self.cell_group.iter().enumerate() {
            for j in 0..l {
                for r in 0..kw {
                    p[(r, j)] += self.q_sum[(r, h)] * a[(g, j)];
                }
            }
        }
        let within_rows = self.r_within.nrows();
        let mut zt = DMatrix::zeros(cells + within_rows, l);
        let mut norms = vec![0.0; l];
        for (h, &g) in self.cell_group.iter().enumerate() {
            let root = self.count[h].sqrt();
            for j in 0..l {
                let fitted: f64 = (0..kw).map(|r| self.q_mean[(r, h)] * p[(r, j)]).sum();
                zt[(h, j)] = root * (a[(g, j)] - fitted);
                norms[j] += self.count[h] * a[(g, j)] * a[(g, j)];
            }
        }
        if within_rows > 0 {
            let within = -(&self.r_within * &p);
            zt.rows_mut(cells, within_rows).copy_from(&within);
        }
        for v in &mut norms {
            *v = v.sqrt();
        }
        (zt, norms)
    }
}

#[cfg(test)]
mod tests {
    //! The cell path against the per-unit path of module `partial` (the brute-force
    //! fixtures of `tests/reference/resampling.py` check both against statsmodels through
    //! `randomization_test`).

    use super::super::super::covariance::CovSpec;
    use super::super::super::Absorbed;
    use super::super::Stream;
    use super::*;

    /// 60 units in 12 assignment clusters of sizes 1–9, controls [1, w, cluster-level c].
    fn design(controls: bool, seed: u64) -> (DVector<f64>, DMatrix<f64>, Vec<usize>) {
        let mut s = Stream::for_draw(seed, 0);
        let mut u = || (s.next_u64() >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
        let group = super::super::tests::twelve_clusters();
        let n = group.len();
        let level: Vec<f64> = (0..12).map(|_| u()).collect();
        let w = if controls {
            DMatrix::from_fn(n, 3, |i, j| match j {
                0 => 1.0,
                1 => u() * 3.0 + 10.0,
                _ => level[group[i]],
            })
        } else {
            DMatrix::zeros(n, 0)
        };
        let y = DVector::from_fn(n, |i, _| 2.0 + level[group[i]] + u());
        (y, w, group)
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-10 * a.abs().max(b.abs()).max(1e-300)
    }

    #[test]
    fn cells_reproduce_the_units() {
        for controls in [true, false] {
            let (y, w, group) = design(controls, 7);
            let n = y.len();
            let covs = [
                CovSpec::Classical,
                CovSpec::Cluster { ids: group.clone() },
                CovSpec::Cluster {
                    ids: group.iter().map(|g| g / 3).collect(),
                },
                CovSpec::Cluster {
                    ids: (0..n).map(|i| i % 5).collect(),
                },
            ];
            for cov in &covs {
                for l in [1, 2] {
                    let part = Partialled::new(&y, &w, l, cov, &Absorbed::NONE).unwrap();
                    let cells = Cells::new(&part.cell_parts().unwrap(), &group);
                    let mut s = Stream::for_draw(11, l as u64);
                    let mut compared = 0;
                    for draw in 0..20 {
                        let a = DMatrix::from_fn(12, l, |_, _| (s.below(3) as f64) - 0.5);
                        let z = DMatrix::from_fn(n, l, |i, j| a[(group[i], j)]);
                        let by_unit = part.fit(&z, true);
                        let by_cell = cells.fit(&part, &a, true);
                        match (by_unit, by_cell) {
                            (Some((g1, Some(v1))), Some((g2, Some(v2)))) => {
                                for j in 0..l {
                                    assert!(close(g1[j], g2[j]), "{draw}: {g1} {g2}");
                                }
                                for (x1, x2) in v1.iter().zip(v2.iter()) {
                                    assert!(close(*x1, *x2), "{cov:?} {draw}: {v1} {v2}");
                                }
                                compared += 1;
                            }
                            (None, None) => {}
                            other => panic!("{cov:?} draw {draw}: {other:?}"),
                        }
                    }
                    assert!(compared >= 15, "{cov:?}: only {compared} draws fitted");
                }
            }
        }
    }

    #[test]
    fn a_draw_in_the_span_of_the_controls_is_degenerate() {
        let (y, w, group) = design(true, 3);
        let cov = CovSpec::Cluster { ids: group.clone() };
        let part = Partialled::new(&y, &w, 1, &cov, &Absorbed::NONE).unwrap();
        let cells = Cells::new(&part.cell_parts().unwrap(), &group);
        // Every cluster treated: the re-drawn column is the intercept.
        let a = DMatrix::from_element(12, 1, 1.0);
        assert!(cells.fit(&part, &a, true).is_none());
        let z = DMatrix::from_element(y.len(), 1, 1.0);
        assert!(part.fit(&z, true).is_none());
    }

    #[test]
    fn hc_and_two_way_keep_the_unit_path() {
        let (y, w, group) = design(true, 5);
        for cov in [
            CovSpec::Hc1,
            CovSpec::Hc3,
            CovSpec::TwoWay {
                first: group.clone(),
                second: (0..y.len()).map(|i| i % 4).collect(),
            },
        ] {
            let part = Partialled::new(&y, &w, 1, &cov, &Absorbed::NONE).unwrap();
            assert!(part.cell_parts().is_none(), "{cov:?}");
        }
    }
}
