//! Field-experiment summaries: summary indices, balance tables, differential attrition and
//! Lee bounds.
//!
//! Role: the descriptive and robustness tables that accompany a randomized evaluation,
//! built on [`ols`] and [`wald`] so that every standard error follows the plan's
//! [`CovSpec`]. Statistics are returned as [`TestStatistic`] values; p-values are left to
//! `crate::inference`.
//!
//! Conventions shared by the functions here:
//! * The arm is binary: `treated[i]` is true in the treated arm, false in the comparison arm.
//! * In summary indices a NaN component is missing; an infinite one is an error. Every other
//!   input must be finite ([`SummaryError::NotFinite`] / [`EstimateError::NotFinite`]).
//! * Standard deviations use the n − 1 divisor.

use nalgebra::{DMatrix, DVector};

use super::{ols, wald, Absorbed, CovSpec, EstimateError, FixedEffects};
use crate::distribution::{Reference, TestStatistic};

/// Why a summary could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SummaryError {
    /// An estimation step failed.
    #[error(transparent)]
    Estimate(#[from] EstimateError),
    /// An input of the wrong length.
    #[error("{what} has {got} entries, expected {expected}")]
    Length {
        /// Which input.
        what: &'static str,
        /// Entries expected (the number of rows).
        expected: usize,
        /// Entries found.
        got: usize,
    },
    /// No components, covariates or rows.
    #[error("nothing to summarise: {what} is empty")]
    Empty {
        /// Which input.
        what: &'static str,
    },
    /// An infinite value (or a NaN where missing values are not allowed).
    #[error("the inputs contain an infinite value, or a NaN where none is allowed")]
    NotFinite,
    /// A component with fewer than two non-missing values in the reference group.
    #[error("component {component} has {available} non-missing value(s) in the reference group; at least 2 are needed")]
    ReferenceTooSmall {
        /// Component (column) index.
        component: usize,
        /// Non-missing reference values.
        available: usize,
    },
    /// A component (or the index, `component = None`) constant in the reference group.
    #[error("{} has zero standard deviation in the reference group", match .component { Some(c) => format!("component {c}"), None => "the summary index".to_string() })]
    ConstantInReference {
        /// Component index, or None for the index itself.
        component: Option<usize>,
    },
    /// Too few reference rows with every component observed to estimate their covariance.
    #[error("{complete} reference row(s) have every component observed; more than {components} are needed")]
    TooFewCompleteRows {
        /// Complete reference rows.
        complete: usize,
        /// Components.
        components: usize,
    },
    /// The components' covariance in the reference group is not positive definite.
    #[error("the covariance of the standardised components in the reference group is singular")]
    SingularCovariance,
    /// An arm with no observations, or with no observed outcome (Lee bounds).
    #[error("the {arm} arm has no {what}")]
    EmptyArm {
        /// "treated" or "comparison".
        arm: &'static str,
        /// "observations" or "observed outcomes".
        what: &'static str,
    },
}

fn check_len(what: &'static str, expected: usize, got: usize) -> Result<(), SummaryError> {
    if expected != got {
        return Err(SummaryError::Length {
            what,
            expected,
            got,
        });
    }
    Ok(())
}

/// Count, mean and n − 1 standard deviation (two-pass) of the values.
fn moments(values: &[f64]) -> (usize, f64, f64) {
    let n = values.len();
    if n == 0 {
        return (0, f64::NAN, f64::NAN);
    }
    let mean = values.iter().sum::<f64>() / n as f64;
    if n < 2 {
        return (n, mean, f64::NAN);
    }
    let ss: f64 = values.iter().map(|v| (v - mean) * (v - mean)).sum();
    (n, mean, (ss / (n - 1) as f64).sqrt())
}

/// z-scores of every component: (x − mean_ref)/sd_ref, sign flipped where `flip`, NaN kept.
fn standardise(
    components: &DMatrix<f64>,
    reference: &[bool],
    flip: &[bool],
) -> Result<DMatrix<f64>, SummaryError> {
    let (n, k) = components.shape();
    if n == 0 {
        return Err(SummaryError::Empty { what: "rows" });
    }
    if k == 0 {
        return Err(SummaryError::Empty { what: "components" });
    }
    check_len("reference", n, reference.len())?;
    check_len("flip", k, flip.len())?;
    if components.iter().any(|v| v.is_infinite()) {
        return Err(SummaryError::NotFinite);
    }
    let mut z = components.clone();
    for c in 0..k {
        let values: Vec<f64> = (0..n)
            .filter(|&i| reference[i] && !components[(i, c)].is_nan())
            .map(|i| components[(i, c)])
            .collect();
        let (available, mean, sd) = moments(&values);
        if available < 2 {
            return Err(SummaryError::ReferenceTooSmall {
                component: c,
                available,
            });
        }
        if sd <= 0.0 || !sd.is_finite() {
            return Err(SummaryError::ConstantInReference { component: Some(c) });
        }
        let sign = if flip[c] { -1.0 } else { 1.0 };
        for i in 0..n {
            z[(i, c)] = sign * (components[(i, c)] - mean) / sd;
        }
    }
    Ok(z)
}

/// Re-standardises a raw index by its reference-group mean and SD (NaN rows stay NaN).
fn restandardise(raw: Vec<f64>, reference: &[bool]) -> Result<DVector<f64>, SummaryError> {
    let values: Vec<f64> = raw
        .iter()
        .zip(reference)
        .filter(|(v, &r)| r && !v.is_nan())
        .map(|(v, _)| *v)
        .collect();
    let (_, mean, sd) = moments(&values);
    if !(sd > 0.0 && sd.is_finite()) {
        return Err(SummaryError::ConstantInReference { component: None });
    }
    Ok(DVector::from_iterator(
        raw.len(),
        raw.into_iter().map(|v| (v - mean) / sd),
    ))
}

/// Weighted available-case average of each row of `z` (NaN = missing); NaN when no
/// component is available or the available weights sum to zero.
fn weighted_rows(z: &DMatrix<f64>, weights: &[f64]) -> Vec<f64> {
    (0..z.nrows())
        .map(|i| {
            let (mut num, mut den) = (0.0, 0.0);
            for (c, &w) in weights.iter().enumerate() {
                let v = z[(i, c)];
                if !v.is_nan() {
                    num += w * v;
                    den += w;
                }
            }
            if den == 0.0 {
                f64::NAN
            } else {
                num / den
            }
        })
        .collect()
}

/// Equally weighted summary index of standardised components (Kling, Liebman and Katz 2007,
/// "Experimental analysis of neighborhood effects", Econometrica 75).
///
/// # Formula
/// For component c with reference-group mean μ_c and SD σ_c (n − 1 divisor, over the
/// reference rows where c is observed), z_ic = s_c (x_ic − μ_c)/σ_c with s_c = −1 where
/// `flip[c]` (so that larger always means better) and +1 otherwise. The raw index is the mean
/// of z_ic over the components observed in row i (available-case mean; a row with no
/// observed component is NaN), and the index is the raw index minus its reference-group
/// mean, divided by its reference-group SD, so it has mean 0 and SD 1 in the reference group.
///
/// `components` is n × K with NaN for a missing value; `reference[i]` marks the reference
/// (usually comparison) group.
///
/// # Errors
/// [`SummaryError::Length`], [`SummaryError::Empty`], [`SummaryError::NotFinite`] (an
/// infinite value), [`SummaryError::ReferenceTooSmall`] and
/// [`SummaryError::ConstantInReference`].
pub fn mean_z(
    components: &DMatrix<f64>,
    reference: &[bool],
    flip: &[bool],
) -> Result<DVector<f64>, SummaryError> {
    let z = standardise(components, reference, flip)?;
    let raw = weighted_rows(&z, &vec![1.0; z.ncols()]);
    restandardise(raw, reference)
}

/// Inverse-covariance weighted summary index (Anderson 2008, "Multiple inference and gender
/// differences in the effects of early intervention", JASA 103).
///
/// # Formula
/// With z_ic the signed z-scores of [`mean_z`] and Σ̂ their sample covariance (n − 1
/// divisor) over the reference rows where every component is observed, the weights are
/// w = Σ̂⁻¹ 1 (the row sums of Σ̂⁻¹, solved through a Cholesky factor). The raw index of row
/// i is Σ_{c observed} w_c z_ic / Σ_{c observed} w_c, so a row's weights sum to one over its
/// available components (Anderson's rule for missing components); a row with no observed
/// component, or whose available weights sum to zero, is NaN. The raw index is then
/// re-standardised by its reference-group mean and SD.
///
/// # Errors
/// Those of [`mean_z`], plus [`SummaryError::TooFewCompleteRows`] (at most K complete
/// reference rows) and [`SummaryError::SingularCovariance`].
pub fn inverse_covariance(
    components: &DMatrix<f64>,
    reference: &[bool],
    flip: &[bool],
) -> Result<DVector<f64>, SummaryError> {
    let z = standardise(components, reference, flip)?;
    let k = z.ncols();
    let complete: Vec<usize> = (0..z.nrows())
        .filter(|&i| reference[i] && (0..k).all(|c| !z[(i, c)].is_nan()))
        .collect();
    if complete.len() <= k {
        return Err(SummaryError::TooFewCompleteRows {
            complete: complete.len(),
            components: k,
        });
    }
    let rows = DMatrix::from_fn(complete.len(), k, |r, c| z[(complete[r], c)]);
    let means: Vec<f64> = (0..k).map(|c| rows.column(c).mean()).collect();
    let centered = DMatrix::from_fn(rows.nrows(), k, |r, c| rows[(r, c)] - means[c]);
    let sigma = centered.transpose() * &centered / (complete.len() - 1) as f64;
    let chol = sigma.cholesky().ok_or(SummaryError::SingularCovariance)?;
    let w = chol.solve(&DVector::from_element(k, 1.0));
    if w.iter().any(|v| !v.is_finite()) {
        return Err(SummaryError::SingularCovariance);
    }
    let raw = weighted_rows(&z, w.as_slice());
    restandardise(raw, reference)
}

/// One row of a balance table: a variable compared across the two arms.
#[derive(Debug, Clone, PartialEq)]
pub struct BalanceRow {
    /// Mean in the comparison arm.
    pub mean_comparison: f64,
    /// Mean in the treated arm.
    pub mean_treated: f64,
    /// SD in the comparison arm (n − 1 divisor; NaN with one observation).
    pub sd_comparison: f64,
    /// SD in the treated arm (n − 1 divisor; NaN with one observation).
    pub sd_treated: f64,
    /// Observations in the comparison arm.
    pub n_comparison: usize,
    /// Observations in the treated arm.
    pub n_treated: usize,
    /// Treated minus comparison mean: the OLS slope of the variable on [1, treated].
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

fn indicator(flags: &[bool]) -> DVector<f64> {
    DVector::from_iterator(
        flags.len(),
        flags.iter().map(|&t| if t { 1.0 } else { 0.0 }),
    )
}

fn arm_counts(treated: &[bool]) -> Result<(usize, usize), SummaryError> {
    let nt = treated.iter().filter(|&&t| t).count();
    let nc = treated.len() - nt;
    if nt == 0 {
        return Err(SummaryError::EmptyArm {
            arm: "treated",
            what: "observations",
        });
    }
    if nc == 0 {
        return Err(SummaryError::EmptyArm {
            arm: "comparison",
            what: "observations",
        });
    }
    Ok((nt, nc))
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

/// OLS of `y` on `x` (which has no constant column) plus, when `blocks` are given, the block
/// dummies absorbed; without blocks a constant column is put first. Returns the fit and the
/// position of `x`'s first column among the fitted coefficients.
fn fit_with_blocks(
    y: &[f64],
    x: &DMatrix<f64>,
    cov: &CovSpec,
    blocks: Option<&FixedEffects>,
) -> Result<(super::LinearFit, usize), SummaryError> {
    let (n, k) = x.shape();
    let y = DVector::from_column_slice(y);
    match blocks {
        None => {
            let mut with_one = DMatrix::from_element(n, k + 1, 1.0);
            with_one.columns_mut(1, k).copy_from(x);
            Ok((ols(&y, &with_one, true, cov, &Absorbed::NONE)?, 1))
        }
        Some(fe) => {
            if fe.observations() != n {
                return Err(SummaryError::Length {
                    what: "blocks",
                    expected: n,
                    got: fe.observations(),
                });
            }
            let ys = fe.sweep_vector(&y)?;
            let xs = fe.sweep(x)?;
            // A column the blocks absorb entirely (zero after the sweep) is left to the QR
            // factorisation to report as collinear.
            let fit = ols(&ys, &xs, true, cov, &absorbed_for(fe, cov))?;
            Ok((fit, 0))
        }
    }
}

/// Compares one variable across the arms (inputs checked by the caller).
fn compare(
    y: &[f64],
    treated: &[bool],
    cov: &CovSpec,
    blocks: Option<&FixedEffects>,
) -> Result<BalanceRow, SummaryError> {
    let n = y.len();
    let arm = DMatrix::from_fn(n, 1, |i, _| if treated[i] { 1.0 } else { 0.0 });
    let (fit, at) = fit_with_blocks(y, &arm, cov, blocks)?;
    let split = |arm: bool| -> Vec<f64> {
        y.iter()
            .zip(treated)
            .filter(|(_, &t)| t == arm)
            .map(|(v, _)| *v)
            .collect()
    };
    let (n_treated, mean_treated, sd_treated) = moments(&split(true));
    let (n_comparison, mean_comparison, sd_comparison) = moments(&split(false));
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
) -> Result<BalanceTable, SummaryError> {
    let (n, k) = covariates.shape();
    if k == 0 {
        return Err(SummaryError::Empty { what: "covariates" });
    }
    check_len("treated", n, treated.len())?;
    arm_counts(treated)?;
    if covariates.iter().any(|v| !v.is_finite()) {
        return Err(SummaryError::NotFinite);
    }
    let rows = (0..k)
        .map(|j| compare(covariates.column(j).as_slice(), treated, cov, blocks))
        .collect::<Result<Vec<_>, _>>()?;
    let (fit, at) = fit_with_blocks(indicator(treated).as_slice(), covariates, cov, blocks)?;
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
/// absorbed block dummies as in [`balance`], so d is the within-block difference.
///
/// # Errors
/// [`SummaryError::Length`], [`SummaryError::EmptyArm`], and the [`EstimateError`]s of
/// [`ols`] (e.g. too few clusters).
pub fn differential_attrition(
    observed: &[bool],
    treated: &[bool],
    cov: &CovSpec,
    blocks: Option<&FixedEffects>,
) -> Result<BalanceRow, SummaryError> {
    check_len("treated", observed.len(), treated.len())?;
    arm_counts(treated)?;
    compare(indicator(observed).as_slice(), treated, cov, blocks)
}

/// Which arm Lee bounds trim.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TrimmedArm {
    /// The treated arm had the higher observed share.
    Treated,
    /// The comparison arm had the higher observed share.
    Comparison,
}

/// Lee (2009) bounds on the treatment effect among units observed whatever their arm.
#[derive(Debug, Clone, PartialEq)]
pub struct LeeBounds {
    /// Lower bound on the effect.
    pub lower: f64,
    /// Upper bound on the effect.
    pub upper: f64,
    /// Trimming share p = (q_high − q_low)/q_high (0 when the shares are equal).
    pub trim_share: f64,
    /// The arm that was trimmed (treated when the shares are equal; p = 0 then).
    pub trimmed_arm: TrimmedArm,
    /// Observed share in the treated arm.
    pub observed_share_treated: f64,
    /// Observed share in the comparison arm.
    pub observed_share_comparison: f64,
    /// Observed outcomes in the treated arm.
    pub n_observed_treated: usize,
    /// Observed outcomes in the comparison arm.
    pub n_observed_comparison: usize,
    /// Standard error of `lower` (Lee 2009, Proposition 3; see [`lee_bounds`]).
    pub se_lower: f64,
    /// Standard error of `upper`.
    pub se_upper: f64,
}

/// Mean, variance (divisor = the kept mass) and the value at the cut of the lowest `kept`
/// mass of the ascending `sorted` values, the boundary observation weighted fractionally as
/// in [`lower_trimmed_mean`].
fn lower_trimmed_moments(sorted: &[f64], kept: f64) -> (f64, f64, f64) {
    let mean = lower_trimmed_mean(sorted, kept);
    let (mut remaining, mut ss, mut cut) = (kept, 0.0, f64::NAN);
    for &v in sorted {
        if remaining <= 0.0 {
            break;
        }
        let w = remaining.min(1.0);
        ss += w * (v - mean) * (v - mean);
        cut = v;
        remaining -= w;
    }
    (mean, ss / kept, cut)
}

/// Sampling variance of a trimmed mean of the trimmed arm (Lee 2009, Proposition 3): the
/// truncated-mean term [σ² + p (y_cut − μ)²] / K and the term of the estimated trimming
/// share ((y_cut − μ)/(1 − p))² Var(p̂).
fn trimmed_mean_variance(moments: (f64, f64, f64), p: f64, kept: f64, var_p: f64) -> f64 {
    let (mean, var, cut) = moments;
    let gap = cut - mean;
    (var + p * gap * gap) / kept + (gap / (1.0 - p)).powi(2) * var_p
}

/// Mean of the lowest share `keep` (in (0, 1]) of the ascending `sorted` values, with the
/// boundary observation weighted fractionally: (1/(keep·n)) ∫₀^{keep·n} y_(⌈u⌉) du.
fn lower_trimmed_mean(sorted: &[f64], kept: f64) -> f64 {
    let mut remaining = kept;
    let mut total = 0.0;
    for &v in sorted {
        if remaining <= 0.0 {
            break;
        }
        let w = remaining.min(1.0);
        total += w * v;
        remaining -= w;
    }
    total / kept
}

/// Lee (2009, "Training, wages, and sample selection: estimating sharp bounds on treatment
/// effects", Review of Economic Studies 76) bounds for a binary arm under monotone selection.
///
/// # Formula
/// With q_t, q_c the observed shares by arm, the arm with the higher share (h) is trimmed by
/// p = (q_h − q_l)/q_h. Its observed outcomes y_(1) ≤ … ≤ y_(n) keep mass K = n(1 − p)
/// (= N_h q_l): the mean of the lowest K is (1/K) ∫₀^K y_(⌈u⌉) du, i.e. the lowest ⌊K⌋ values
/// in full and the next with weight K − ⌊K⌋, the empirical version of Lee's
/// E[Y | Y ≤ y_{1−p}] (equal to it when K is an integer and there is no tie at the cut); the
/// mean of the highest K is the mirror image. With the treated arm trimmed, lower = (mean of
/// its lowest K) − ȳ_c and upper = (mean of its highest K) − ȳ_c; with the comparison arm
/// trimmed, lower = ȳ_t − (mean of its highest K) and upper = ȳ_t − (mean of its lowest K).
///
/// Standard errors (Lee 2009, Proposition 3, typed from memory and re-derived here by the
/// delta method from the influence functions of a truncated mean and of p̂; the two are
/// uncorrelated because p̂ depends only on who is observed): with m_t, m_c the observed
/// counts, Var(p̂) = (1 − p)² [(1 − q_l)/m_l + (1 − q_h)/m_h]; for a trimmed mean μ̂ of the
/// trimmed arm with kept mass K, kept values' variance σ̂² (fractional weights, divisor K) and
/// the value at the cut y_cut (the last kept value), Var(μ̂) = [σ̂² + p (y_cut − μ̂)²]/K +
/// ((y_cut − μ̂)/(1 − p))² Var(p̂); the untrimmed arm's mean adds s²/m (divisor m). A bound's
/// variance is the sum for the trimmed mean it uses and the untrimmed mean. Units are taken
/// as sampled independently (no clusters), and at p = 0 the estimator sits at a kink of the
/// trimming, where the normal approximation is poorest.
///
/// `outcome` is read only where `observed` is true (it may be NaN elsewhere).
///
/// # Errors
/// [`SummaryError::Length`], [`SummaryError::EmptyArm`] (an arm without observations or
/// without observed outcomes) and [`SummaryError::NotFinite`] (a non-finite observed
/// outcome).
pub fn lee_bounds(
    outcome: &[f64],
    observed: &[bool],
    treated: &[bool],
) -> Result<LeeBounds, SummaryError> {
    let n = outcome.len();
    check_len("observed", n, observed.len())?;
    check_len("treated", n, treated.len())?;
    let (nt, nc) = arm_counts(treated)?;
    let sorted_arm = |arm: bool| -> Result<Vec<f64>, SummaryError> {
        let mut v: Vec<f64> = (0..n)
            .filter(|&i| treated[i] == arm && observed[i])
            .map(|i| outcome[i])
            .collect();
        if v.iter().any(|x| !x.is_finite()) {
            return Err(SummaryError::NotFinite);
        }
        if v.is_empty() {
            return Err(SummaryError::EmptyArm {
                arm: if arm { "treated" } else { "comparison" },
                what: "observed outcomes",
            });
        }
        v.sort_by(f64::total_cmp);
        Ok(v)
    };
    let yt = sorted_arm(true)?;
    let yc = sorted_arm(false)?;
    let qt = yt.len() as f64 / nt as f64;
    let qc = yc.len() as f64 / nc as f64;
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let (trimmed_arm, high, n_high, q_low, q_high) = if qt >= qc {
        (TrimmedArm::Treated, &yt, nt, qc, qt)
    } else {
        (TrimmedArm::Comparison, &yc, nc, qt, qc)
    };
    let trim_share = (q_high - q_low) / q_high;
    // Kept mass N_h q_l, never above the n observed (guards the rounding of equal shares).
    let kept = (n_high as f64 * q_low).min(high.len() as f64);
    let low = lower_trimmed_moments(high, kept);
    let reversed: Vec<f64> = high.iter().rev().copied().collect();
    let top = lower_trimmed_moments(&reversed, kept);
    let (low_mean, high_mean) = (low.0, top.0);
    let (lower, upper) = match trimmed_arm {
        TrimmedArm::Treated => (low_mean - mean(&yc), high_mean - mean(&yc)),
        TrimmedArm::Comparison => (mean(&yt) - high_mean, mean(&yt) - low_mean),
    };
    // Var(p̂) for p̂ = 1 − q_l/q_h by the delta method: (1 − p)² Σ_arms (1 − q)/m, m the
    // arm's observed count.
    let (m_low, m_high) = match trimmed_arm {
        TrimmedArm::Treated => (yc.len(), yt.len()),
        TrimmedArm::Comparison => (yt.len(), yc.len()),
    };
    let var_p = (1.0 - trim_share).powi(2)
        * ((1.0 - q_low) / m_low as f64 + (1.0 - q_high) / m_high as f64);
    let untrimmed = if trimmed_arm == TrimmedArm::Treated {
        &yc
    } else {
        &yt
    };
    let u_mean = mean(untrimmed);
    let var_untrimmed = untrimmed
        .iter()
        .map(|v| (v - u_mean) * (v - u_mean))
        .sum::<f64>()
        / (untrimmed.len() as f64).powi(2);
    let var_low = trimmed_mean_variance(low, trim_share, kept, var_p) + var_untrimmed;
    let var_high = trimmed_mean_variance(top, trim_share, kept, var_p) + var_untrimmed;
    // The lower bound uses the lower trimmed mean when the treated arm is trimmed and the
    // upper one when the comparison arm is.
    let (se_lower, se_upper) = match trimmed_arm {
        TrimmedArm::Treated => (var_low.sqrt(), var_high.sqrt()),
        TrimmedArm::Comparison => (var_high.sqrt(), var_low.sqrt()),
    };
    Ok(LeeBounds {
        lower,
        upper,
        trim_share,
        trimmed_arm,
        observed_share_treated: qt,
        observed_share_comparison: qc,
        n_observed_treated: yt.len(),
        n_observed_comparison: yc.len(),
        se_lower,
        se_upper,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::inference::test_p_value;
    use serde_json::Value;

    const NAN: f64 = f64::NAN;

    fn close(a: f64, b: f64, rel: f64) -> bool {
        (a - b).abs() <= rel * b.abs().max(1.0)
    }

    /// Hand example (6 rows, reference rows 0–2). Component A: reference 1, 2, 3 → mean 2,
    /// SD 1. Component B (flipped): reference 10, 14, 12 → mean 12, SD 2, z_B = −(B − 12)/2.
    /// Raw index = mean of available z: rows (0: −1, +1) → 0, (1: 0, −1) → −½, (2: 1, 0) → ½,
    /// (3: A = 4, B = 8: 2, 2) → 2, (4: A = 2, B missing: 0) → 0, (5: none) → NaN. Reference
    /// mean 0, SD ½, so the index is 0, −1, 1, 4, 0, NaN (formula of Kling, Liebman and Katz
    /// 2007 as documented on [`mean_z`]).
    #[test]
    fn mean_z_six_rows_by_hand() {
        let x = DMatrix::from_row_slice(
            6,
            2,
            &[
                1.0, 10.0, 2.0, 14.0, 3.0, 12.0, 4.0, 8.0, 2.0, NAN, NAN, NAN,
            ],
        );
        let reference = [true, true, true, false, false, false];
        let idx = mean_z(&x, &reference, &[false, true]).unwrap();
        let expected = [0.0, -1.0, 1.0, 4.0, 0.0];
        for (g, e) in idx.iter().zip(&expected) {
            assert!((g - e).abs() < 1e-14, "{idx}");
        }
        assert!(idx[5].is_nan());
    }

    /// Hand example for inverse-covariance weights. Reference rows 0–3 have centred
    /// components a = (1, 1, −1, −1), b = (1, −1, 1, −1), c = (1, 0, −1, 0) (means 0), so
    /// the covariance of their z-scores is the correlation matrix with corr(a, b) = 0,
    /// corr(b, c) = 0 and corr(a, c) = a·c/(|a||c|) = 2/√8 = r = 1/√2. Its inverse has the
    /// (a, c) block [[1, −r], [−r, 1]]/(1 − r²) = 2[[1, −r], [−r, 1]] and 1 for b, so the
    /// row sums are w = (2 − √2, 1, 2 − √2) (Anderson 2008, weights Σ⁻¹1). Row 4 has every
    /// component, row 5 lacks c (its weights renormalise over a, b), row 6 has none.
    #[test]
    fn inverse_covariance_by_hand() {
        let x = DMatrix::from_row_slice(
            7,
            3,
            &[
                1.0, 1.0, 1.0, 1.0, -1.0, 0.0, -1.0, 1.0, -1.0, -1.0, -1.0, 0.0, 2.0, 0.5, -1.0,
                1.0, 3.0, NAN, NAN, NAN, NAN,
            ],
        );
        let reference = [true, true, true, true, false, false, false];
        let idx = inverse_covariance(&x, &reference, &[false, false, false]).unwrap();
        // z-scores: SD of a and b is √(4/3), of c √(2/3).
        let (sa, sc) = ((4.0_f64 / 3.0).sqrt(), (2.0_f64 / 3.0).sqrt());
        let w = [2.0 - 2.0_f64.sqrt(), 1.0, 2.0 - 2.0_f64.sqrt()];
        let raw = |z: &[f64], avail: &[usize]| -> f64 {
            let num: f64 = avail.iter().map(|&c| w[c] * z[c]).sum();
            let den: f64 = avail.iter().map(|&c| w[c]).sum();
            num / den
        };
        let all = [0, 1, 2];
        let mut raws: Vec<f64> = (0..5)
            .map(|i| raw(&[x[(i, 0)] / sa, x[(i, 1)] / sa, x[(i, 2)] / sc], &all))
            .collect();
        raws.push(raw(&[1.0 / sa, 3.0 / sa, 0.0], &[0, 1]));
        let r = &raws[..4];
        let m = r.iter().sum::<f64>() / 4.0;
        let sd = (r.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / 3.0).sqrt();
        for i in 0..6 {
            let e = (raws[i] - m) / sd;
            assert!((idx[i] - e).abs() < 1e-13, "{i}: {} vs {e}", idx[i]);
        }
        assert!(idx[6].is_nan());
        // Unequal weights matter: the equally weighted index differs on row 4.
        let plain = mean_z(&x, &reference, &[false, false, false]).unwrap();
        assert!((plain[4] - idx[4]).abs() > 1e-3);
    }

    #[test]
    fn index_errors() {
        let x = DMatrix::from_row_slice(3, 2, &[1.0, 2.0, 1.0, 3.0, 2.0, NAN]);
        assert!(matches!(
            mean_z(&x, &[true, true, false], &[false, false]),
            Err(SummaryError::ConstantInReference { component: Some(0) })
        ));
        assert!(matches!(
            mean_z(&x, &[true, false, true], &[false, false]),
            Err(SummaryError::ReferenceTooSmall {
                component: 1,
                available: 1
            })
        ));
        assert!(matches!(
            mean_z(&x, &[true, true], &[false, false]),
            Err(SummaryError::Length { .. })
        ));
        let inf = DMatrix::from_row_slice(2, 1, &[1.0, f64::INFINITY]);
        assert_eq!(
            mean_z(&inf, &[true, true], &[false]),
            Err(SummaryError::NotFinite)
        );
        let y = DMatrix::from_row_slice(3, 2, &[1.0, 2.0, 2.0, 3.0, 3.0, 5.0]);
        assert!(matches!(
            inverse_covariance(&y, &[true, true, false], &[false, false]),
            Err(SummaryError::TooFewCompleteRows { .. })
        ));
    }

    /// Lee (2009) bounds by hand. Treated: 10 units, 8 observed (q_t = 0.8), outcomes
    /// 1..8; comparison: 10 units, 6 observed (q_c = 0.6), outcomes 2, 2, 3, 3, 4, 4 (mean 3).
    /// p = (0.8 − 0.6)/0.8 = ¼, K = 8·¾ = 6: lower = mean(1..6) − 3 = 0.5, upper =
    /// mean(3..8) − 3 = 2.5 (Lee 2009, section 3: trim the arm with the higher observed
    /// share by p from the top for the lower bound, from the bottom for the upper bound).
    #[test]
    fn lee_bounds_by_hand() {
        let mut y = vec![NAN; 20];
        let mut obs = vec![false; 20];
        let treated: Vec<bool> = (0..20).map(|i| i < 10).collect();
        for i in 0..8 {
            y[i] = (i + 1) as f64;
            obs[i] = true;
        }
        for (j, v) in [2.0, 2.0, 3.0, 3.0, 4.0, 4.0].iter().enumerate() {
            y[10 + j] = *v;
            obs[10 + j] = true;
        }
        let b = lee_bounds(&y, &obs, &treated).unwrap();
        assert_eq!(b.trimmed_arm, TrimmedArm::Treated);
        assert!((b.trim_share - 0.25).abs() < 1e-15);
        assert!((b.lower - 0.5).abs() < 1e-14, "{b:?}");
        assert!((b.upper - 2.5).abs() < 1e-14, "{b:?}");

        // Drop treated outcome 8 and one comparison 4: q_t = 0.7, q_c = 0.5 (outcomes
        // 2, 2, 3, 3, 4, mean 2.8), p = 2/7, K = 10·0.5 = 5 of 7: lower = mean(1..5) − 2.8 =
        // 0.2, upper = mean(3..7) − 2.8 = 2.2.
        obs[7] = false;
        obs[15] = false;
        let b = lee_bounds(&y, &obs, &treated).unwrap();
        assert!((b.lower - 0.2).abs() < 1e-14, "{b:?}");
        assert!((b.upper - 2.2).abs() < 1e-14, "{b:?}");

        // Fractional: treated 3 units all observed (1, 2, 4), comparison 2 units, 1 observed
        // (outcome 0): q_t = 1, q_c = ½, K = 3·½ = 1.5: lower = (1 + ½·2)/1.5 = 4/3,
        // upper = (4 + ½·2)/1.5 = 10/3.
        let b = lee_bounds(
            &[1.0, 2.0, 4.0, 0.0, NAN],
            &[true, true, true, true, false],
            &[true, true, true, false, false],
        )
        .unwrap();
        assert!((b.lower - 4.0 / 3.0).abs() < 1e-14, "{b:?}");
        assert!((b.upper - 10.0 / 3.0).abs() < 1e-14, "{b:?}");

        // Comparison trimmed: swap the arms of the first example, bounds become −2.5, −0.5.
        let swapped: Vec<bool> = treated.iter().map(|t| !t).collect();
        let mut obs = vec![false; 20];
        for o in obs.iter_mut().take(8) {
            *o = true;
        }
        for o in obs.iter_mut().skip(10).take(6) {
            *o = true;
        }
        let b = lee_bounds(&y, &obs, &swapped).unwrap();
        assert_eq!(b.trimmed_arm, TrimmedArm::Comparison);
        assert!((b.lower + 2.5).abs() < 1e-14, "{b:?}");
        assert!((b.upper + 0.5).abs() < 1e-14, "{b:?}");

        assert!(matches!(
            lee_bounds(&[1.0, 2.0], &[true, false], &[true, false]),
            Err(SummaryError::EmptyArm {
                arm: "comparison",
                ..
            })
        ));
        assert_eq!(
            lee_bounds(&[1.0, NAN], &[true, true], &[true, false]),
            Err(SummaryError::NotFinite)
        );
    }

    fn fixture(name: &str) -> Value {
        let path = format!(
            "{}/tests/reference/fixtures/{name}",
            env!("CARGO_MANIFEST_DIR")
        );
        let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
        serde_json::from_str(&text).unwrap()
    }

    fn floats(v: &Value) -> Vec<f64> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap_or(f64::NAN))
            .collect()
    }

    fn bools(v: &Value) -> Vec<bool> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_bool().unwrap())
            .collect()
    }

    fn matrix(v: &Value) -> DMatrix<f64> {
        let rows: Vec<Vec<f64>> = v.as_array().unwrap().iter().map(floats).collect();
        DMatrix::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
    }

    /// Against numpy (`tests/reference/summaries.py`, fixture `summary_indices.json`):
    /// seeded components with 8% missing, flips, both indices; relative 1e-12.
    #[test]
    fn indices_agree_with_numpy() {
        let doc = fixture("summary_indices.json");
        let x = matrix(&doc["components"]);
        let reference = bools(&doc["reference"]);
        let flip = bools(&doc["flip"]);
        for (name, got) in [
            ("mean_z", mean_z(&x, &reference, &flip).unwrap()),
            (
                "inverse_covariance",
                inverse_covariance(&x, &reference, &flip).unwrap(),
            ),
        ] {
            let expected = floats(&doc[name]);
            assert_eq!(got.len(), expected.len());
            let mut nans = 0;
            for (g, e) in got.iter().zip(&expected) {
                if e.is_nan() {
                    assert!(g.is_nan(), "{name}");
                    nans += 1;
                } else {
                    assert!(close(*g, *e, 1e-12), "{name}: {g} vs {e}");
                }
            }
            assert!(nans > 0, "the fixture must contain an all-missing row");
        }
    }

    fn spec(kind: &str, clusters: &[usize]) -> CovSpec {
        match kind {
            "classical" => CovSpec::Classical,
            "hc1" => CovSpec::Hc1,
            "hc3" => CovSpec::Hc3,
            "cluster" => CovSpec::Cluster {
                ids: clusters.to_vec(),
            },
            other => panic!("unknown kind {other}"),
        }
    }

    /// Against statsmodels OLS (`tests/reference/summaries.py`, fixture
    /// `summary_balance.json`): per-covariate differences, SEs, t and p-values, and the
    /// joint F test (`f_test`) with its p-value, for classical, HC1, HC3 and CR1 errors, and
    /// the differential attrition regression; relative 1e-9.
    #[test]
    fn balance_and_attrition_agree_with_statsmodels() {
        let doc = fixture("summary_balance.json");
        let x = matrix(&doc["covariates"]);
        let treated = bools(&doc["treated"]);
        let observed = bools(&doc["observed"]);
        let clusters: Vec<usize> = doc["clusters"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_u64().unwrap() as usize)
            .collect();
        let means_t = floats(&doc["mean_treated"]);
        let means_c = floats(&doc["mean_comparison"]);
        for case in doc["cases"].as_array().unwrap() {
            let kind = case["kind"].as_str().unwrap();
            let s = spec(kind, &clusters);
            let table = balance(&x, &treated, &s, None).unwrap();
            let diff = floats(&case["difference"]);
            let se = floats(&case["std_error"]);
            let p = floats(&case["p_value"]);
            for (j, row) in table.rows.iter().enumerate() {
                assert!(close(row.mean_treated, means_t[j], 1e-12), "{kind} {j}");
                assert!(close(row.mean_comparison, means_c[j], 1e-12), "{kind} {j}");
                assert!(close(row.difference, diff[j], 1e-9), "{kind} {j}");
                assert!(close(row.std_error, se[j], 1e-9), "{kind} {j}");
                assert!(close(test_p_value(&row.t), p[j], 1e-9), "{kind} {j}");
            }
            let f = case["joint_f"].as_f64().unwrap();
            let fp = case["joint_p"].as_f64().unwrap();
            let df2 = case["joint_df_denom"].as_f64().unwrap();
            assert!(close(table.joint.statistic, f, 1e-9), "{kind}");
            assert!(close(test_p_value(&table.joint), fp, 1e-9), "{kind}");
            assert_eq!(
                table.joint.reference,
                Reference::F {
                    df1: x.ncols() as f64,
                    df2
                }
            );
            let a = differential_attrition(&observed, &treated, &s, None).unwrap();
            let att = &case["attrition"];
            assert!(close(
                a.difference,
                att["difference"].as_f64().unwrap(),
                1e-9
            ));
            assert!(close(a.std_error, att["std_error"].as_f64().unwrap(), 1e-9));
            assert!(close(
                test_p_value(&a.t),
                att["p_value"].as_f64().unwrap(),
                1e-9
            ));
        }
    }

    /// Against an independent numpy implementation of the trimming (cumulative weights on the
    /// sorted outcomes; fixture `summary_lee.json`) on seeded data, with the treated or the
    /// comparison arm trimmed and fractional kept mass; relative 1e-12.
    #[test]
    fn lee_bounds_agree_with_numpy() {
        let doc = fixture("summary_lee.json");
        for case in doc["cases"].as_array().unwrap() {
            let y = floats(&case["outcome"]);
            let obs = bools(&case["observed"]);
            let treated = bools(&case["treated"]);
            let b = lee_bounds(&y, &obs, &treated).unwrap();
            let arm = case["trimmed_arm"].as_str().unwrap();
            assert_eq!(
                b.trimmed_arm,
                if arm == "treated" {
                    TrimmedArm::Treated
                } else {
                    TrimmedArm::Comparison
                }
            );
            assert!(close(
                b.trim_share,
                case["trim_share"].as_f64().unwrap(),
                1e-12
            ));
            assert!(
                close(b.lower, case["lower"].as_f64().unwrap(), 1e-12),
                "{b:?}"
            );
            assert!(
                close(b.upper, case["upper"].as_f64().unwrap(), 1e-12),
                "{b:?}"
            );
        }
    }
}
