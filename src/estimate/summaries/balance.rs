//! Balance tables and differential attrition: each a regression of a baseline variable
//! (or a response indicator) on the arm, with the plan's covariance and, under a blocked
//! design, the blocks absorbed; with probability weights, weighted least squares (rows
//! scaled by √w after a weighted sweep of the blocks).

use nalgebra::{DMatrix, DVector};

use super::{arm_counts, check_len, indicator, moments, SummaryError};
use crate::distribution::{Reference, TestStatistic};
use crate::estimate::{ols, wald, Absorbed, CovSpec, FixedEffects};

/// One row of a balance table: a variable compared across the two arms.
#[derive(Debug, Clone, PartialEq)]
pub struct BalanceRow {
    /// Mean in the comparison arm.
    pub mean_comparison: f64,
    /// Mean in the treated arm.
    pub mean_treated: f64,
    /// SD in the comparison arm (n − 1 divisor; NaN with one observation, and NaN with
    /// weights: no weighted SD is computed, see [`balance`]).
    pub sd_comparison: f64,
    /// SD in the treated arm (as `sd_comparison`).
    pub sd_treated: f64,
    /// Observations in the comparison arm (rows, not summed weights).
    pub n_comparison: usize,
    /// Observations in the treated arm (rows, not summed weights).
    pub n_treated: usize,
    /// Treated minus comparison mean: the OLS (weighted: WLS) slope of the variable on
    /// [1, treated].
    pub difference: f64,
    /// Standard error of the difference under the requested [`CovSpec`].
    pub std_error: f64,
    /// t = difference / std_error with the fit's reference (t(n − 2), or t(G − 1) clustered).
    pub t: TestStatistic,
}

/// A balance table: one row per covariate and a joint test of all of them.
#[derive(Debug, Clone, PartialEq)]
pub struct BalanceTable {
    /// One row per covariate, in column order.
    pub rows: Vec<BalanceRow>,
    /// Joint test: F = W/K from the regression of the treated indicator on [1, covariates],
    /// W the Wald statistic of the K slopes under the [`CovSpec`]; referred to F(K, d) with d
    /// the fit's residual df (n − K − 1), or G − 1 when clustered.
    pub joint: TestStatistic,
}

/// The absorbed degrees of freedom of `blocks` under `cov` (blocks nested in a cluster
/// dimension are not counted in the CR1 factor; see [`Absorbed`]).
fn absorbed_for(blocks: &FixedEffects, cov: &CovSpec) -> Absorbed {
    match cov {
        CovSpec::Cluster { ids } => blocks.absorbed(&[ids.as_slice()]),
        CovSpec::TwoWay { first, second } => {
            blocks.absorbed(&[first.as_slice(), second.as_slice()])
        }
        _ => blocks.absorbed(&[]),
    }
}

/// Multiply each row of `m` by `root` (√w), when weighted.
fn scale_rows(mut m: DMatrix<f64>, root: Option<&DVector<f64>>) -> DMatrix<f64> {
    if let Some(root) = root {
        for mut c in m.column_iter_mut() {
            c.component_mul_assign(root);
        }
    }
    m
}

/// OLS of `y` on `x` (which has no constant column) plus, when `blocks` are given, the block
/// dummies absorbed; without blocks a constant column is put first. With `root` (√w of each
/// row) the rows are scaled by it after the (then weighted) sweep: weighted least squares.
/// Returns the fit and the position of `x`'s first column among the fitted coefficients.
fn fit_with_blocks(
    y: &[f64],
    x: &DMatrix<f64>,
    cov: &CovSpec,
    blocks: Option<&FixedEffects>,
    root: Option<&DVector<f64>>,
) -> Result<(crate::estimate::LinearFit, usize), SummaryError> {
    let (n, k) = x.shape();
    let y = DMatrix::from_column_slice(n, 1, y);
    match blocks {
        None => {
            let mut with_one = DMatrix::from_element(n, k + 1, 1.0);
            with_one.columns_mut(1, k).copy_from(x);
            let (ys, xs) = (scale_rows(y, root), scale_rows(with_one, root));
            let ys = DVector::from_column_slice(ys.as_slice());
            Ok((ols(&ys, &xs, true, cov, &Absorbed::NONE)?, 1))
        }
        Some(fe) => {
            if fe.observations() != n {
                return Err(SummaryError::Length {
                    what: "blocks",
                    expected: n,
                    got: fe.observations(),
                });
            }
            let ys = scale_rows(fe.sweep(&y)?, root);
            let ys = DVector::from_column_slice(ys.as_slice());
            let xs = scale_rows(fe.sweep(x)?, root);
            // A column the blocks absorb entirely (zero after the sweep) is left to the QR
            // factorisation to report as collinear.
            let fit = ols(&ys, &xs, true, cov, &absorbed_for(fe, cov))?;
            Ok((fit, 0))
        }
    }
}

/// Count, mean and SD of `y` in one arm: unweighted, the n − 1 moments; weighted, the
/// weighted mean Σ w x / Σ w and no SD (NaN).
fn arm_moments(
    y: &[f64],
    treated: &[bool],
    arm: bool,
    weights: Option<&[f64]>,
) -> (usize, f64, f64) {
    let rows = || (0..y.len()).filter(move |&i| treated[i] == arm);
    match weights {
        None => moments(&rows().map(|i| y[i]).collect::<Vec<_>>()),
        Some(w) => {
            let total: f64 = rows().map(|i| w[i]).sum();
            let sum: f64 = rows().map(|i| w[i] * y[i]).sum();
            (rows().count(), sum / total, f64::NAN)
        }
    }
}

/// Compares one variable across the arms (inputs checked by the caller).
fn compare(
    y: &[f64],
    treated: &[bool],
    cov: &CovSpec,
    blocks: Option<&FixedEffects>,
    weights: Option<&[f64]>,
) -> Result<BalanceRow, SummaryError> {
    let n = y.len();
    let arm = DMatrix::from_fn(n, 1, |i, _| if treated[i] { 1.0 } else { 0.0 });
    let root = weights.map(|w| DVector::from_iterator(n, w.iter().map(|v| v.sqrt())));
    let (fit, at) = fit_with_blocks(y, &arm, cov, blocks, root.as_ref())?;
    let (n_treated, mean_treated, sd_treated) = arm_moments(y, treated, true, weights);
    let (n_comparison, mean_comparison, sd_comparison) = arm_moments(y, treated, false, weights);
    let difference = fit.coef[at];
    let std_error = fit.cov[(at, at)].sqrt();
    Ok(BalanceRow {
        mean_comparison,
        mean_treated,
        sd_comparison,
        sd_treated,
        n_comparison,
        n_treated,
        difference,
        std_error,
        t: TestStatistic {
            statistic: difference / std_error,
            reference: fit.coef_reference,
        },
    })
}

/// Probability weights given to [`balance`] or [`differential_attrition`]: one per row,
/// each finite and positive (zero weights are the caller's to drop).
fn check_weights(n: usize, weights: Option<&[f64]>) -> Result<(), SummaryError> {
    let Some(w) = weights else {
        return Ok(());
    };
    check_len("weights", n, w.len())?;
    if w.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
        return Err(SummaryError::NotFinite);
    }
    Ok(())
}

/// Balance of pre-treatment covariates across a binary arm.
///
/// # Formula
/// For covariate x_j: the arm means, and the OLS regression x_j = a + d·treated + e, whose
/// slope d is the difference in means and whose SE follows `cov`. Joint test: OLS of the
/// treated indicator on [1, x_1 … x_K] and F = W/K with W = b_Sᵀ V_S⁻¹ b_S over the K slopes
/// (Wald 1943) and V under `cov`, referred to F(K, n − K − 1), or F(K, G − 1) when clustered.
///
/// With `blocks` (the randomization blocks, singletons already dropped by the caller) the
/// constant is replaced by one dummy per block, absorbed (module `absorb`; by
/// Frisch–Waugh–Lovell the slopes and sandwich covariances are those of the explicit dummy
/// regression): d is then the within-block difference, a weighted average of the block
/// differences, and the residual df is n − 1 − L (L blocks) for a row, n − K − L for the
/// joint test. Blocks nested in a cluster dimension are left out of the CR1 factor, as for
/// every absorbed fixed effect ([`Absorbed`]).
///
/// With probability `weights` (one per row, positive): the arm means are Σ w x / Σ w, and
/// every regression above is weighted least squares, computed as OLS on rows scaled by √w
/// (with blocks, after a sweep that subtracts weighted block means, [`FixedEffects::weighted`],
/// which the caller builds with the same weights); the sandwich covariances of the scaled
/// rows are those of probability weights (a scaled row's score is w·x·u). No SD is computed
/// for a weighted arm (NaN): the divisor of a weighted variance depends on what the weights
/// are taken to mean, which sampling weights do not settle, and none is reported. Counts
/// are rows.
///
/// `covariates` is n × K and must be finite (complete cases are the caller's business).
///
/// # Errors
/// [`SummaryError::Length`], [`SummaryError::Empty`], [`SummaryError::EmptyArm`], and the
/// [`EstimateError`]s of [`ols`] and [`wald`] (non-finite input, collinear covariates, an arm
/// constant within every block, too few clusters, a singular covariance block).
pub fn balance(
    covariates: &DMatrix<f64>,
    treated: &[bool],
    cov: &CovSpec,
    blocks: Option<&FixedEffects>,
    weights: Option<&[f64]>,
) -> Result<BalanceTable, SummaryError> {
    let (n, k) = covariates.shape();
    if k == 0 {
        return Err(SummaryError::Empty { what: "covariates" });
    }
    check_len("treated", n, treated.len())?;
    check_weights(n, weights)?;
    arm_counts(treated)?;
    if covariates.iter().any(|v| !v.is_finite()) {
        return Err(SummaryError::NotFinite);
    }
    let rows = (0..k)
        .map(|j| {
            compare(
                covariates.column(j).as_slice(),
                treated,
                cov,
                blocks,
                weights,
            )
        })
        .collect::<Result<Vec<_>, _>>()?;
    let root = weights.map(|w| DVector::from_iterator(n, w.iter().map(|v| v.sqrt())));
    let arm = indicator(treated);
    let (fit, at) = fit_with_blocks(arm.as_slice(), covariates, cov, blocks, root.as_ref())?;
    let indices: Vec<usize> = (at..at + k).collect();
    let w = wald(&fit.coef, &fit.cov, &indices)?;
    let df2 = match fit.coef_reference {
        Reference::StudentT { df } => df,
        _ => fit.df_resid as f64,
    };
    Ok(BalanceTable {
        rows,
        joint: TestStatistic {
            statistic: w / k as f64,
            reference: Reference::F { df1: k as f64, df2 },
        },
    })
}

/// Differential attrition: does the share of units with an observed outcome differ by arm?
///
/// # Formula
/// The linear probability model observed = a + d·treated + e by OLS; the row reports the
/// observed shares by arm (as means), d = q_treated − q_comparison and its SE under `cov`
/// (a [`BalanceRow`] for the observed indicator). With `blocks`, the constant is replaced by
/// absorbed block dummies as in [`balance`], so d is the within-block difference. With
/// probability `weights`, weighted least squares as in [`balance`]: the shares are weighted
/// (Σ w · observed / Σ w per arm).
///
/// # Errors
/// [`SummaryError::Length`], [`SummaryError::EmptyArm`], and the [`EstimateError`]s of
/// [`ols`] (e.g. too few clusters).
pub fn differential_attrition(
    observed: &[bool],
    treated: &[bool],
    cov: &CovSpec,
    blocks: Option<&FixedEffects>,
    weights: Option<&[f64]>,
) -> Result<BalanceRow, SummaryError> {
    check_len("treated", observed.len(), treated.len())?;
    check_weights(observed.len(), weights)?;
    arm_counts(treated)?;
    compare(
        indicator(observed).as_slice(),
        treated,
        cov,
        blocks,
        weights,
    )
}
