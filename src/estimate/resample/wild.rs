//! The restricted wild cluster bootstrap of a single OLS coefficient (Cameron, Gelbach and
//! Miller 2008, REStat 90), with Rademacher or Webb (2014, Queen's Economics Department WP
//! 1315) six-point weights.
//!
//! # Algorithm
//! Null H₀: β_j = null. The restricted fit regresses y − null·x_j on the other columns:
//! coefficients b̃ (b̃_j = null) and residuals ũ. A draw multiplies the residuals of cluster g
//! by a weight w_g: y* = X b̃ + ũ ⊙ w, refits OLS and studentizes with the CR1 variance,
//! t* = (b*_j − null)/se*_j. The observed statistic is the usual CR1 t statistic of
//! b_j = null; the all-ones draw reproduces it.
//!
//! # Fast algebra (cluster-level sums)
//! With c_g = (X'X)^{-1} X_g'ũ_g and a = (X'X)^{-1} e_j, r_g = X_g'X_g a, both computed once:
//! b* − b̃ = Σ_g w_g c_g =: v, and the j-th element of (X'X)^{-1} X_g' u*_g (u* the bootstrap
//! residuals ũ ⊙ w − X v) is d_g = w_g c_{g,j} − r_g'v. So t* = v_j / sqrt(f Σ_g d_g²) with
//! the CR1 factor f = G/(G − 1) · (n − 1)/(n − k − (a − a_nested)); a draw costs O(G·k)
//! and never touches the n observations (compare Roodman, MacKinnon, Nielsen and Webb
//! 2019, Stata Journal 19, for the same idea in matrix form).
//!
//! # Enumeration
//! Rademacher weights have 2^G distinct vectors and Webb weights 6^G; when that count is at
//! most `exact_below` all of them are used (vector number i has the base-2 or base-6 digits
//! of i, cluster 0 the least significant), otherwise the all-ones vector and `draws` random
//! ones (one uniform integer per cluster from the draw's stream).
//!
//! With probability weights (`OlsColumns::weights`, columns in the data's units) the
//! bootstrap is that of the √w-scaled model: restricted weighted least squares, the scaled
//! residuals √w·ũ multiplied by the cluster weights, weighted refits.
//!
//! With absorbed fixed effects (`x`, `y` swept by the caller) the algebra is exact when the
//! fixed effects are nested in the bootstrap clusters (then ũ ⊙ w stays swept); otherwise
//! the bootstrap outcome is not re-swept, which the caller must accept or avoid.

use nalgebra::{DMatrix, DVector};

use super::super::covariance::{densify, CovSpec};
use super::super::linear::{ols, validate};
use super::super::qr::PivotedQr;
use super::super::refine::residual;
use super::super::Absorbed;
use super::{run_draws, summarise, DrawStats, Draws, ResampleError, ResampleResult, Stream};
use super::{OlsColumns, Tested};

/// The distribution of the cluster weights.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Weights {
    /// ±1 with probability 1/2 each.
    Rademacher,
    /// ±sqrt(1/2), ±1, ±sqrt(3/2), each with probability 1/6 (Webb 2014).
    Webb,
}

impl Weights {
    /// The support points, in the order used for enumeration digits.
    fn points(self) -> Vec<f64> {
        match self {
            Weights::Rademacher => vec![1.0, -1.0],
            Weights::Webb => {
                let (a, c) = (0.5f64.sqrt(), 1.5f64.sqrt());
                vec![1.0, -1.0, a, -a, c, -c]
            }
        }
    }
}

/// Runs `stat` over cluster weight vectors of length `g`: every vector (digit d of the
/// enumeration index ↦ the d-th support point) when there are at most `plan.exact_below`,
/// else the observed all-ones vector and `plan.draws` random ones. Shared by the OLS and the
/// 2SLS (`wre`) bootstraps so both enumerate and draw the same vectors.
pub(super) fn weight_draws(
    g: usize,
    weights: Weights,
    plan: &Draws,
    observed: f64,
    stat: impl Fn(&DVector<f64>) -> Option<f64> + Sync + Send,
) -> Result<(Vec<Option<f64>>, bool), ResampleError> {
    let points = weights.points();
    let base = points.len() as u64;
    let count = u32::try_from(g)
        .ok()
        .and_then(|g| u128::from(base).checked_pow(g));
    run_draws(
        count,
        plan,
        observed,
        |i| {
            let mut rest = i;
            let wv = DVector::from_fn(g, |_, _| {
                let digit = rest % base;
                rest /= base;
                points[digit as usize]
            });
            stat(&wv)
        },
        |b| {
            let mut stream = Stream::for_draw(plan.seed, b);
            let wv = DVector::from_fn(g, |_, _| points[stream.below(base) as usize]);
            stat(&wv)
        },
    )
}

/// Restricted wild cluster bootstrap test of β_`coef_index` = `null` in the OLS of `y` on
/// `x`, clustered by `clusters`.
///
/// # Formula
/// See the module documentation: t* = (b*_j − null)/se_CR1(b*_j) for y* = X b̃ + ũ ⊙ w,
/// computed from cluster-level sums; p-values as in the documentation of `resample`
/// (share of draws with |t*| ≥ |t|, the observed all-ones draw included).
///
/// # Errors
/// As [`ols`](super::super::ols) with clustered errors (finiteness, dimensions, rank,
/// cluster ids, G ≥ 2); [`EstimateError::IndexOutOfRange`]; a non-finite `null`
/// ([`EstimateError::NotFinite`]); [`ResampleError::ObservedNotFinite`];
/// [`ResampleError::NoDraws`].
pub fn wild_cluster_bootstrap(
    cols: OlsColumns,
    tested: Tested,
    clusters: &[usize],
    weights: Weights,
    plan: &Draws,
    absorbed: &Absorbed,
) -> Result<ResampleResult, ResampleError> {
    let (observed, stats, exact) =
        wild_statistics(cols, tested, clusters, weights, plan, absorbed)?;
    Ok(summarise(observed, &stats, exact))
}

/// [`wild_cluster_bootstrap`] before summarising: the observed t, every draw's t* in draw
/// order, and whether the weight vectors were enumerated.
pub(crate) fn wild_statistics(
    cols: OlsColumns,
    tested: Tested,
    clusters: &[usize],
    weights: Weights,
    plan: &Draws,
    absorbed: &Absorbed,
) -> Result<DrawStats, ResampleError> {
    // Weighted: the bootstrap of the √w-scaled model (its residuals are those of the scaled
    // rows, so a cluster's weight multiplies √w·u).
    let scaled = cols.scaled()?;
    let (y, x) = scaled.as_ref().map_or((cols.y, cols.x), |(y, x)| (y, x));
    let Tested {
        index: coef_index,
        null,
    } = tested;
    validate(y, &[("x", x)])?;
    let (n, k) = x.shape();
    tested.check(k)?;
    let spec = CovSpec::Cluster {
        ids: clusters.to_vec(),
    };
    let fit = ols(y, x, false, &spec, absorbed)?;
    let observed = (fit.coef[coef_index] - null) / fit.cov[(coef_index, coef_index)].sqrt();
    if !observed.is_finite() {
        return Err(ResampleError::ObservedNotFinite);
    }
    let (ids, g) = densify(clusters);

    // Restricted fit: y − null·x_j on the other columns.
    let xj = x.column(coef_index).into_owned();
    let yr = y - &xj * null;
    let w = x.clone().remove_column(coef_index);
    let u_tilde = if w.ncols() == 0 {
        yr
    } else {
        let coef = PivotedQr::new(&w)?.solve(&w, &yr);
        residual(&w, &yr, &coef)
    };

    // Cluster-level pieces: C (G × k) rows c_g, R (G × k) rows r_g.
    let xtx_inv = PivotedQr::new(x)?.refined_inverse(x);
    let mut scores = DMatrix::zeros(g, k);
    for (i, &c) in ids.iter().enumerate() {
        let mut row = scores.row_mut(c);
        row += x.row(i) * u_tilde[i];
    }
    let c_mat = scores * &xtx_inv;
    let a = xtx_inv.column(coef_index).into_owned();
    let xa = x * &a;
    let mut r_mat = DMatrix::zeros(g, k);
    for (i, &c) in ids.iter().enumerate() {
        let mut row = r_mat.row_mut(c);
        row += x.row(i) * xa[i];
    }
    let kc = k + absorbed.df - absorbed.nested_df;
    let gf = g as f64;
    let factor = gf / (gf - 1.0) * ((n - 1) as f64 / (n - kc) as f64);
    let cj = c_mat.column(coef_index).into_owned();

    let stat = |wv: &DVector<f64>| -> Option<f64> {
        let v = c_mat.tr_mul(wv);
        let d = wv.component_mul(&cj) - &r_mat * &v;
        let s = v[coef_index] / (factor * d.norm_squared()).sqrt();
        s.is_finite().then_some(s)
    };
    let (stats, exact) = weight_draws(g, weights, plan, observed, stat)?;
    Ok((observed, stats, exact))
}
