//! Heteroskedasticity and autocorrelation consistent (HAC) covariance: the kernel-weighted
//! meat and the automatic bandwidth.
//!
//! Role: the time-series counterpart of the HC sandwich in `covariance`. Observations carry
//! a position (their row in the table's `order_by` order); two observations d positions
//! apart contribute with the Bartlett weight k(d/b) = 1 − d/b for d < b, 0 beyond, where b is
//! the bandwidth (Newey and West 1987, Econometrica 55; the parametrisation k(x/b) is that of
//! Newey and West 1994, Review of Economic Studies 61). A bandwidth b = L + 1 gives lags
//! 1..L the weights 1 − j/(L + 1) of the 1987 paper.
//!
//! Invariants: positions are strictly increasing (the caller checks, and [`hac_meat`]
//! refuses otherwise). Rows missing from the estimation sample keep their distance: a gap of
//! one row makes the neighbours two positions apart, as if the missing row's score were zero.
//!
//! Literature references here are cited from memory; the numbers are checked against
//! statsmodels and linearmodels kernel covariances and a direct implementation of the
//! Newey–West (1994) rule (`tests/reference/hac.py`).

use nalgebra::{DMatrix, DVector};

use super::covariance::transpose_times;
use super::EstimateError;

/// Weight of the Newey–West (1994) automatic rule for the Bartlett kernel, γ = c·(ŝ₁/ŝ₀)^{2/3}.
pub const NEWEY_WEST_1994_BARTLETT_C: f64 = 1.1447;

/// The Bartlett weight of two observations `d` positions apart under bandwidth `b`.
pub(crate) fn bartlett(d: usize, b: f64) -> f64 {
    (1.0 - d as f64 / b).max(0.0)
}

/// Σᵢ Σⱼ k(|pᵢ − pⱼ|/b) sᵢ sⱼᵀ for the score rows sᵢ of `scores` (n × k) at `positions`.
///
/// # Formula
/// Bartlett kernel, Newey and West (1987); see the module documentation.
///
/// # Errors
/// [`EstimateError::DimensionMismatch`] when positions and scores differ in length;
/// [`EstimateError::HacPositions`] when positions are not strictly increasing or the
/// bandwidth is not at least 1.
pub(crate) fn hac_meat(
    scores: &DMatrix<f64>,
    positions: &[usize],
    bandwidth: f64,
) -> Result<DMatrix<f64>, EstimateError> {
    let (n, k) = scores.shape();
    check(n, positions, bandwidth)?;
    // Row i of `ahead` is Σ_{j > i} k(dᵢⱼ/b) sⱼ, so the lagged terms are Sᵀ·ahead.
    let mut ahead = DMatrix::zeros(n, k);
    for i in 0..n {
        for j in (i + 1)..n {
            let w = bartlett(positions[j] - positions[i], bandwidth);
            if w == 0.0 {
                break;
            }
            for c in 0..k {
                ahead[(i, c)] += w * scores[(j, c)];
            }
        }
    }
    let cross = transpose_times(scores, &ahead);
    Ok(transpose_times(scores, scores) + &cross + cross.transpose())
}

fn check(n: usize, positions: &[usize], bandwidth: f64) -> Result<(), EstimateError> {
    if positions.len() != n {
        return Err(EstimateError::DimensionMismatch {
            what: "HAC positions",
            expected: n,
            got: positions.len(),
        });
    }
    if positions.windows(2).any(|w| w[1] <= w[0]) || !(bandwidth >= 1.0 && bandwidth.is_finite()) {
        return Err(EstimateError::HacPositions);
    }
    Ok(())
}

/// The Newey–West (1994) automatic bandwidth for the Bartlett kernel.
///
/// `regressors` are the columns whose scores xᵢⱼ uᵢ enter the covariance (for 2SLS the
/// first-stage fitted regressors X̂), `constant` the index of an intercept column (left out
/// of the weighting vector, as Newey and West recommend), `resid` the residuals.
///
/// # Formula
/// Newey and West (1994), Bartlett kernel: hₜ = Σ_{j ≠ constant} xₜⱼ uₜ; with
/// m = ⌊4 (n/100)^{2/9}⌋ and σ̂ⱼ = n⁻¹ Σ hₜ hₜ₋ⱼ over pairs j positions apart (j = 0..m),
/// ŝ₀ = σ̂₀ + 2 Σ σ̂ⱼ, ŝ₁ = 2 Σ j σ̂ⱼ, γ̂ = 1.1447 (ŝ₁/ŝ₀)^{2/3} and b = γ̂ n^{1/3}. The
/// result is kept at least 1 and at most the span of the positions plus one.
///
/// # Errors
/// [`EstimateError::HacPositions`] for positions that are not strictly increasing;
/// [`EstimateError::HacBandwidthUndefined`] when ŝ₀ ≤ 0 or the result is not finite (no
/// variation left in the weighted scores).
pub fn newey_west_1994_bandwidth(
    regressors: &DMatrix<f64>,
    constant: Option<usize>,
    resid: &DVector<f64>,
    positions: &[usize],
) -> Result<f64, EstimateError> {
    let n = resid.len();
    check(n, positions, 1.0)?;
    let h: Vec<f64> = (0..n)
        .map(|t| {
            let row: f64 = (0..regressors.ncols())
                .filter(|&j| Some(j) != constant)
                .map(|j| regressors[(t, j)])
                .sum();
            row * resid[t]
        })
        .collect();
    let m = (4.0 * (n as f64 / 100.0).powf(2.0 / 9.0)).floor() as usize;
    let mut sigma = vec![0.0; m + 1];
    for t in 0..n {
        for s in t..n {
            let d = positions[s] - positions[t];
            if d > m {
                break;
            }
            sigma[d] += h[t] * h[s];
        }
    }
    let sigma: Vec<f64> = sigma.iter().map(|v| v / n as f64).collect();
    let s0 = sigma[0] + 2.0 * sigma[1..].iter().sum::<f64>();
    let s1 = 2.0
        * sigma[1..]
            .iter()
            .enumerate()
            .map(|(j, v)| (j + 1) as f64 * v)
            .sum::<f64>();
    if s0 <= 0.0 || !s0.is_finite() {
        return Err(EstimateError::HacBandwidthUndefined);
    }
    let gamma = NEWEY_WEST_1994_BARTLETT_C * ((s1 / s0).powi(2)).cbrt();
    let b = gamma * (n as f64).cbrt();
    if !b.is_finite() {
        return Err(EstimateError::HacBandwidthUndefined);
    }
    let span = (positions[n - 1] - positions[0]) as f64 + 1.0;
    Ok(b.clamp(1.0, span.max(1.0)))
}

/// Number of lags with a positive weight under bandwidth `b` (the largest d with d < b).
pub fn bartlett_lags(b: f64) -> usize {
    (b.ceil() as usize).saturating_sub(1)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: scores 1, 2, 3 at positions 0, 1, 3 with b = 3: pairs at distance
    /// 1 (1·2, weight 2/3), 2 (2·3, weight 1/3), 3 (1·3, weight 0): 1 + 4 + 9 + 2(4/3 + 2).
    #[test]
    fn meat_by_hand() {
        let s = DMatrix::from_column_slice(3, 1, &[1.0, 2.0, 3.0]);
        let m = hac_meat(&s, &[0, 1, 3], 3.0).unwrap();
        let want = 14.0 + 2.0 * (4.0 / 3.0 + 2.0);
        assert!((m[(0, 0)] - want).abs() < 1e-12, "{m}");
    }

    /// Bandwidth 1 leaves only the diagonal (White's meat).
    #[test]
    fn bandwidth_one_is_white() {
        let s = DMatrix::from_row_slice(3, 2, &[1.0, 0.5, -2.0, 1.0, 0.3, 0.7]);
        let m = hac_meat(&s, &[0, 1, 2], 1.0).unwrap();
        assert_eq!(m, s.transpose() * &s);
    }

    /// Repeated positions and bandwidths below 1 are refused.
    #[test]
    fn refuses_bad_positions() {
        let s = DMatrix::from_column_slice(2, 1, &[1.0, 2.0]);
        assert_eq!(hac_meat(&s, &[1, 1], 2.0), Err(EstimateError::HacPositions));
        assert_eq!(hac_meat(&s, &[0, 1], 0.5), Err(EstimateError::HacPositions));
    }

    /// Lags with positive weight: b = 4 weights lags 1..3; b = 3.2 lags 1..3; b = 1 none.
    #[test]
    fn lag_counts() {
        assert_eq!(bartlett_lags(4.0), 3);
        assert_eq!(bartlett_lags(3.2), 3);
        assert_eq!(bartlett_lags(1.0), 0);
    }
}
