//! The regression of a fixed outcome on re-drawn columns Z with fixed controls W, the
//! controls partialled out once.
//!
//! By Frisch–Waugh–Lovell (Frisch and Waugh 1933, Econometrica 1; Lovell 1963, JASA 58),
//! the Z-coefficients of y on [Z | W] are g = (Z̃'Z̃)^{-1} Z̃'ỹ with Z̃ = M_W Z, ỹ = M_W y, the
//! residuals are ỹ − Z̃ g, and the Z-rows of (D'D)^{-1}D' (D = [Z | W]) are (Z̃'Z̃)^{-1}Z̃'. So
//! the Z-block of every sandwich is (Z̃'Z̃)^{-1} A (Z̃'Z̃)^{-1} with the meat A built from z̃ᵢ
//! and the full residuals, and the leverage of D is h_W,i + z̃ᵢ'(Z̃'Z̃)^{-1}z̃ᵢ. M_W and ỹ are
//! computed once (thin Q of W); a draw costs O(n·(|W|·L + L²)). The conventions (df,
//! small-sample factors, absorbed coefficients) are those of `covariance`: k = |W| + L + a.
//! Two-way clustering clamps eigenvalues of the whole covariance matrix, which the Z-block
//! alone does not determine, so there (and for HAC errors, whose meat lives in module `hac`)
//! each draw refits [Z | W] in full with `ols`.

use nalgebra::{DMatrix, DVector};

use super::super::covariance::CovSpec;
use super::super::covariance::{cr1_factor, densify};
use super::super::linear::ols;
use super::super::qr::PivotedQr;
use super::super::refine::residual;
use super::super::{Absorbed, EstimateError};
use super::family::{Pencil, Spread};

/// The covariance kinds, with cluster ids made dense.
#[derive(Debug, Clone)]
enum Kind {
    Classical,
    Hc { power: i32, scaled: bool },
    Cluster { ids: Vec<usize>, g: usize },
    TwoWay(CovSpec),
}

/// Fixed parts of the partialled regression.
#[derive(Debug, Clone)]
pub(crate) struct Partialled {
    /// Thin Q of the controls (n × |W|); `None` without controls.
    q: Option<DMatrix<f64>>,
    /// The controls (for the two-way fallback).
    w: DMatrix<f64>,
    /// The outcome (for the two-way fallback).
    y: DVector<f64>,
    /// M_W y.
    y_tilde: DVector<f64>,
    /// Leverage of W plus the absorbed leverage (HC2/HC3 only).
    h_fixed: Vec<f64>,
    kind: Kind,
    absorbed: Absorbed,
    /// n − k − a with k = |W| + L.
    df_resid: usize,
    /// n − k − (a − a_nested), for CR1.
    df_cluster: usize,
}

/// The coefficients of Z and, when asked, their covariance.
pub(crate) type ZFit = (DVector<f64>, Option<DMatrix<f64>>);

/// The rows a fit works on (see [`Partialled::fit_rows`]).
pub(super) struct Rows<'a> {
    /// The partialled re-drawn columns (m × L).
    pub(super) zt: &'a DMatrix<f64>,
    /// ‖zⱼ‖ of the columns before partialling (for the rounding-noise test).
    pub(super) z_norms: &'a [f64],
    /// The partialled outcome (m).
    pub(super) y: &'a DVector<f64>,
    /// The cluster of each row (one-way clustered covariance only).
    pub(super) ids: Option<&'a [usize]>,
    /// The residual sum of squares the rows leave out (fixed across draws).
    pub(super) rss_extra: f64,
}

/// What module `cells` needs from the fixed parts: Q of the controls, M_W y, and the
/// covariance clusters (dense ids and their number; `None` for the classical covariance).
pub(super) struct CellParts<'a> {
    /// Thin Q of the controls.
    pub(super) q: Option<&'a DMatrix<f64>>,
    /// M_W y.
    pub(super) y_tilde: &'a DVector<f64>,
    /// Dense cluster ids and their number.
    pub(super) clusters: Option<(&'a [usize], usize)>,
}

impl Partialled {
    /// Prepares the regression of `y` on [Z | `w`] for Z with `l` columns.
    ///
    /// # Errors
    /// Too few observations, collinear controls, cluster ids of the wrong length, fewer than
    /// two clusters, HC2/HC3 with absorbed effects of unknown leverage.
    pub(crate) fn new(
        y: &DVector<f64>,
        w: &DMatrix<f64>,
        l: usize,
        cov: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<Self, EstimateError> {
        let n = y.len();
        let k = w.ncols() + l + absorbed.df;
        if n <= k {
            return Err(EstimateError::TooFewObservations { n, k });
        }
        let q = if w.ncols() == 0 {
            None
        } else {
            Some(std::sync::Arc::unwrap_or_clone(
                PivotedQr::with_householder_vectors(w)?.thin_q(),
            ))
        };
        let y_tilde = match &q {
            Some(q) => y - q * (q.transpose() * y),
            None => y.clone(),
        };
        let kind = match cov {
            CovSpec::Classical => Kind::Classical,
            CovSpec::Hc0 => Kind::Hc {
                power: 0,
                scaled: false,
            },
            CovSpec::Hc1 => Kind::Hc {
                power: 0,
                scaled: true,
            },
            CovSpec::Hc2 | CovSpec::Hc3 => {
                let power = if *cov == CovSpec::Hc2 { 1 } else { 2 };
                if absorbed.df > 0 && absorbed.leverage.is_none() {
                    return Err(EstimateError::CovarianceUnavailable {
                        estimator: "absorbed fixed effects without their leverage",
                        kind: cov.name(),
                    });
                }
                Kind::Hc {
                    power,
                    scaled: false,
                }
            }
            CovSpec::Cluster { ids } => {
                if ids.len() != n {
                    return Err(EstimateError::ClusterLength { n, ids: ids.len() });
                }
                let (ids, g) = densify(ids);
                if g < 2 {
                    return Err(EstimateError::TooFewClusters { clusters: g });
                }
                Kind::Cluster { ids, g }
            }
            CovSpec::TwoWay { .. } | CovSpec::Hac { .. } => Kind::TwoWay(cov.clone()),
        };
        let h_fixed = (0..n)
            .map(|i| {
                let hw = q.as_ref().map_or(0.0, |q| q.row(i).norm_squared());
                hw + absorbed.leverage.as_ref().map_or(0.0, |h| h[i])
            })
            .collect();
        Ok(Partialled {
            q,
            w: w.clone(),
            y: y.clone(),
            y_tilde,
            h_fixed,
            kind,
            absorbed: absorbed.clone(),
            df_resid: n - k,
            df_cluster: n - (k - absorbed.nested_df),
        })
    }

    /// Fits Z (n × L): its coefficients and, if `with_cov`, their covariance.
    ///
    /// `Ok(None)` when Z̃ = M_W Z is rank deficient, or a column of Z̃ is rounding noise
    /// (‖z̃ⱼ‖ ≤ 16·max(n, k)·eps·‖zⱼ‖), or a leverage is 1 under HC2/HC3.
    pub(crate) fn fit(&self, z: &DMatrix<f64>, with_cov: bool) -> Option<ZFit> {
        if let Kind::TwoWay(spec) = &self.kind {
            return self.fit_full(z, spec);
        }
        let (zt, norms) = self.partialled(z);
        self.fit_rows(&self.unit_rows(&zt, &norms), with_cov)
    }

    /// M_W Z and the norms of Z's columns.
    fn partialled(&self, z: &DMatrix<f64>) -> (DMatrix<f64>, Vec<f64>) {
        let zt = match &self.q {
            Some(q) => z - q * (q.transpose() * z),
            None => z.clone(),
        };
        (zt, z.column_iter().map(|c| c.norm()).collect())
    }

    /// The units' rows of a fit: `zt` = M_W Z (`norms` of Z's columns) with M_W y.
    fn unit_rows<'a>(&'a self, zt: &'a DMatrix<f64>, norms: &'a [f64]) -> Rows<'a> {
        Rows {
            zt,
            z_norms: norms,
            y: &self.y_tilde,
            ids: self.cluster_ids(),
            rss_extra: 0.0,
        }
    }

    /// The statistics of Z (one column, n × 1) from which the test of every sharp null
    /// follows (see [`Pencil`]); `t_tilde` is M_W t for the column t the null moves the
    /// outcome by. `None` as [`Partialled::fit`], and always under two-way or HAC errors.
    pub(crate) fn pencil(
        &self,
        z: &DMatrix<f64>,
        t_tilde: &DVector<f64>,
        with_cov: bool,
    ) -> Option<Pencil> {
        if matches!(self.kind, Kind::TwoWay(_)) || z.ncols() != 1 {
            return None;
        }
        let (zt, norms) = self.partialled(z);
        self.pencil_rows(&self.unit_rows(&zt, &norms), t_tilde, &[], with_cov)
    }

    /// M_W v: `v` with the controls partialled out.
    pub(crate) fn partial_out(&self, v: &DVector<f64>) -> DVector<f64> {
        match &self.q {
            Some(q) => v - q * (q.transpose() * v),
            None => v.clone(),
        }
    }

    /// Whether every draw refits [Z | W] in full (two-way and HAC errors): those have no
    /// [`Pencil`].
    pub(crate) fn refits(&self) -> bool {
        matches!(self.kind, Kind::TwoWay(_))
    }

    /// The cluster of each unit under a one-way clustered covariance.
    fn cluster_ids(&self) -> Option<&[usize]> {
        match &self.kind {
            Kind::Cluster { ids, .. } => Some(ids),
            _ => None,
        }
    }

    /// Whether draws can be fitted from cell-level statistics (module `cells`): the
    /// classical and one-way clustered covariances need only sums over cells and clusters;
    /// HC weights each unit by its own squared residual and leverage, two-way and HAC refit.
    pub(super) fn cell_parts(&self) -> Option<CellParts<'_>> {
        let ids = match &self.kind {
            Kind::Classical => None,
            Kind::Cluster { ids, g } => Some((ids.as_slice(), *g)),
            _ => return None,
        };
        Some(CellParts {
            q: self.q.as_ref(),
            y_tilde: &self.y_tilde,
            clusters: ids,
        })
    }

    /// The fit from rows that represent the partialled regression: the units themselves, or
    /// the compressed rows of module `cells` (whose cross-products and cluster score sums
    /// equal the units' in exact arithmetic). Small-sample factors use the units' n.
    pub(super) fn fit_rows(&self, rows: &Rows<'_>, with_cov: bool) -> Option<ZFit> {
        let zt = rows.zt;
        let (m, l) = zt.shape();
        if !self.fittable(rows) {
            return None;
        }
        // One re-drawn column (the usual case): closed form, g = z̃'ỹ / z̃'z̃, Q₁ = z̃/‖z̃‖ and
        // T = 1/‖z̃‖, with no factorisation per draw. Several columns: pivoted QR.
        let (g, u, t, q1) = if l == 1 {
            let zc = zt.column(0);
            let zz = zc.norm_squared();
            let g = DVector::from_element(1, zc.dot(rows.y) / zz);
            if !with_cov {
                return Some((g, None));
            }
            // Clustered, one column: the score sums in one pass, V = c·Σ_g (Σ z̃ᵢuᵢ)² / (z̃'z̃)².
            if let (Kind::Cluster { g: groups, .. }, Some(ids)) = (&self.kind, rows.ids) {
                let (zs, ys) = (zc.as_slice(), rows.y.as_slice());
                let mut sums = vec![0.0_f64; *groups];
                for i in 0..m {
                    sums[ids[i]] += zs[i] * (ys[i] - zs[i] * g[0]);
                }
                let meat: f64 = sums.iter().map(|v| v * v).sum();
                let c = self.cluster_factor(*groups);
                return Some((g, Some(DMatrix::from_element(1, 1, c * meat / (zz * zz)))));
            }
            let u = rows.y - zc * g[0];
            let norm = zz.sqrt();
            let t = DMatrix::from_element(1, 1, 1.0 / norm);
            let q1 = zt / norm;
            (g, u, t, q1)
        } else {
            // Householder vectors kept: Q₁ gives the leverages checked against 1.
            let qr = PivotedQr::with_householder_vectors(zt).ok()?;
            let g = qr.solve(zt, rows.y);
            if !with_cov {
                return Some((g, None));
            }
            let u = residual(zt, rows.y, &g);
            (
                g,
                u,
                qr.t_matrix(),
                std::sync::Arc::unwrap_or_clone(qr.thin_q()),
            )
        };
        let meat = match &self.kind {
            Kind::Classical => {
                let s2 = (u.norm_squared() + rows.rss_extra) / self.df_resid as f64;
                return Some((g, Some(&t * t.transpose() * s2)));
            }
            Kind::Hc { power, scaled } => {
                // Only unit rows reach here (`cell_parts` excludes HC).
                let mut scaled_q = q1.clone();
                for i in 0..m {
                    let mut wgt = u[i] * u[i];
                    if *power > 0 {
                        wgt /= self.leverage_divisor(i, q1.row(i).norm_squared(), *power, l)?;
                    }
                    scaled_q.row_mut(i).scale_mut(wgt);
                }
                q1.transpose() * scaled_q * self.hc_factor(*scaled)
            }
            Kind::Cluster { g: groups, .. } => {
                let ids = rows.ids?;
                let mut sums = DMatrix::zeros(*groups, l);
                for (i, &c) in ids.iter().enumerate() {
                    let mut row = sums.row_mut(c);
                    row += q1.row(i) * u[i];
                }
                sums.transpose() * sums * self.cluster_factor(*groups)
            }
            Kind::TwoWay(_) => return None,
        };
        Some((g, Some(&t * meat * t.transpose())))
    }

    /// [`Partialled::fit_rows`] for one re-drawn column and the outcome family ỹ − τ₀t̃
    /// (`rows.y` = ỹ, `t` = t̃ in the same rows; `extra`: rows [σ_y, σ_yt] and [0, σ_t] of
    /// the within-cell parts that only the classical residual sum of squares sees, in
    /// place of `rows.rss_extra`). See [`Pencil`] for what is kept.
    pub(super) fn pencil_rows(
        &self,
        rows: &Rows<'_>,
        t: &DVector<f64>,
        extra: &[[f64; 2]],
        with_cov: bool,
    ) -> Option<Pencil> {
        let zt = rows.zt;
        let (m, l) = zt.shape();
        if l != 1 || t.len() != m || !self.fittable(rows) {
            return None;
        }
        let zc = zt.column(0);
        let zz = zc.norm_squared();
        let (gy, gt) = (zc.dot(rows.y) / zz, zc.dot(t) / zz);
        if !with_cov {
            return Some(Pencil {
                gy,
                gt,
                spread: Spread::NONE,
            });
        }
        let (zs, ys, ts) = (zc.as_slice(), rows.y.as_slice(), t.as_slice());
        let uy = |i: usize| ys[i] - zs[i] * gy;
        let ut = |i: usize| ts[i] - zs[i] * gt;
        // S has the rows whose squared norm, for the outcome ỹ − τ₀t̃, is the meat: column
        // one for ỹ, column two for t̃, so the meat is ‖S·(1, −τ₀)'‖².
        let (sy, st, c): (Vec<f64>, Vec<f64>, f64) = match &self.kind {
            Kind::Classical => {
                let (mut sy, mut st): (Vec<f64>, Vec<f64>) = (0..m).map(|i| (uy(i), ut(i))).unzip();
                for row in extra {
                    sy.push(row[0]);
                    st.push(row[1]);
                }
                (sy, st, 1.0 / (self.df_resid as f64 * zz))
            }
            Kind::Hc { power, scaled } => {
                let norm = zz.sqrt();
                let mut sy = Vec::with_capacity(m);
                let mut st = Vec::with_capacity(m);
                for (i, &z) in zs.iter().enumerate() {
                    let mut f = z;
                    if *power > 0 {
                        let q1 = z / norm;
                        f /= self.leverage_divisor(i, q1 * q1, *power, 1)?.sqrt();
                    }
                    sy.push(f * uy(i));
                    st.push(f * ut(i));
                }
                (sy, st, self.hc_factor(*scaled) / (zz * zz))
            }
            Kind::Cluster { g: groups, .. } => {
                let ids = rows.ids?;
                let (mut sy, mut st) = (vec![0.0_f64; *groups], vec![0.0_f64; *groups]);
                for (i, &c) in ids.iter().enumerate().take(m) {
                    sy[c] += zs[i] * uy(i);
                    st[c] += zs[i] * ut(i);
                }
                (sy, st, self.cluster_factor(*groups) / (zz * zz))
            }
            Kind::TwoWay(_) => return None,
        };
        Some(Pencil {
            gy,
            gt,
            spread: Spread::new(&sy, &st, c),
        })
    }

    /// Whether `rows` can be fitted: at least as many rows as re-drawn columns, and no
    /// partialled column that is rounding noise (‖z̃ⱼ‖ ≤ 16·max(n, k)·eps·‖zⱼ‖).
    fn fittable(&self, rows: &Rows<'_>) -> bool {
        let (m, l) = rows.zt.shape();
        let tol = 16.0 * self.y.len().max(self.w.ncols() + l) as f64 * f64::EPSILON;
        m >= l && !(0..l).any(|j| rows.zt.column(j).norm() <= tol * rows.z_norms[j])
    }

    /// The CR1 factor of `groups` clusters (module `covariance`), with the units' n.
    fn cluster_factor(&self, groups: usize) -> f64 {
        let n = self.y.len();
        cr1_factor(groups, n, n - self.df_cluster)
    }

    /// The HC1 factor n / (n − k − a) when `scaled`, else 1.
    fn hc_factor(&self, scaled: bool) -> f64 {
        if scaled {
            self.y.len() as f64 / self.df_resid as f64
        } else {
            1.0
        }
    }

    /// (1 − hᵢ)^`power` for unit i, whose leverage in Z̃ (of `l` columns) is
    /// `q1_squared`, the fixed leverage added; `None` when 1 − hᵢ is within rounding of 0.
    fn leverage_divisor(&self, i: usize, q1_squared: f64, power: i32, l: usize) -> Option<f64> {
        let tol = self.y.len().max(self.w.ncols() + l) as f64 * f64::EPSILON;
        let one_minus_h = 1.0 - self.h_fixed[i] - q1_squared;
        if one_minus_h <= tol {
            return None;
        }
        Some(one_minus_h.powi(power))
    }

    /// The two-way and HAC fallback: OLS of y on [Z | W] with the full covariance.
    fn fit_full(&self, z: &DMatrix<f64>, spec: &CovSpec) -> Option<ZFit> {
        let (n, l) = z.shape();
        let mut x = DMatrix::zeros(n, l + self.w.ncols());
        x.columns_mut(0, l).copy_from(z);
        x.columns_mut(l, self.w.ncols()).copy_from(&self.w);
        let fit = ols(&self.y, &x, false, spec, &self.absorbed).ok()?;
        let g = fit.coef.rows(0, l).into_owned();
        let v = fit.cov.view((0, 0), (l, l)).into_owned();
        Some((g, Some(v)))
    }
}
