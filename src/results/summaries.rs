//! Summary indices, the balance table and attrition checks (with Lee bounds).

use super::kinds::{ErrorKind, IndexMethod, IndexMissing, TrimmedArm};
use super::spec::TestResult;
use serde::Serialize;
use std::collections::BTreeMap;

/// A summary index as built.
#[derive(Debug, Clone, Serialize)]
pub struct IndexResult {
    /// "anderson" | "mean-z".
    pub method: IndexMethod,
    /// Components as written (a leading "-" marks a flipped one).
    pub components: Vec<String>,
    /// Reference-group expression.
    pub reference: String,
    /// "available" (observed components averaged) | "complete" (complete rows only).
    pub missing: IndexMissing,
    /// Rows in the reference group.
    pub reference_rows: usize,
    /// Rows with an index value.
    pub rows_with_value: usize,
}

/// One covariate (or the observed indicator) compared across arms.
#[derive(Debug, Clone, Serialize)]
pub struct ArmComparison {
    /// Mean in the comparison arm (by = 0).
    pub mean_comparison: f64,
    /// Mean in the treated arm (by = 1).
    pub mean_treated: f64,
    /// Rows in each arm.
    pub n_comparison: usize,
    /// Rows in the treated arm.
    pub n_treated: usize,
    /// Treated minus comparison (OLS on the arm indicator).
    pub difference: f64,
    /// Its standard error with the declared error type.
    pub std_error: f64,
    /// Its test.
    pub test: TestResult,
}

/// The balance table.
#[derive(Debug, Clone, Serialize)]
pub struct BalanceResult {
    /// Arm indicator.
    pub by: String,
    /// Error type.
    pub errors: ErrorKind,
    /// Cluster columns of the errors (empty unless clustered).
    pub clusters: Vec<String>,
    /// The registered blocks absorbed as fixed effects, when the design is blocked.
    pub blocks: Option<BlocksUsed>,
    /// The probability-weight column, when the check is weighted (absent unweighted).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub weights: Option<String>,
    /// Rows left out for a weight of zero (absent unweighted).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub dropped_zero_weight: Option<usize>,
    /// Rows used (complete in the arm and every covariate).
    pub n: usize,
    /// Per covariate.
    pub covariates: BTreeMap<String, ArmComparison>,
    /// Joint test: the arm regressed on all covariates, Wald F.
    pub joint: TestResult,
}

/// Randomization blocks absorbed as fixed effects in a balance or attrition regression.
#[derive(Debug, Clone, Serialize)]
pub struct BlocksUsed {
    /// The `[assignment]` block column.
    pub column: String,
    /// Blocks in the regression.
    pub levels: usize,
    /// Rows dropped because they were alone in their block.
    pub singletons_dropped: usize,
}

/// Lee (2009) bounds for one outcome.
#[derive(Debug, Clone, Serialize)]
pub struct LeeResult {
    /// Lower bound of the effect for always-observed units.
    pub lower: f64,
    /// Upper bound.
    pub upper: f64,
    /// Share trimmed from the arm with more observed outcomes.
    pub trim_share: f64,
    /// "treated" | "comparison".
    pub trimmed_arm: TrimmedArm,
    /// Standard error of `lower` (Lee 2009, Proposition 3; independent units, so `None`
    /// when the attrition errors are clustered).
    pub std_error_lower: Option<f64>,
    /// Standard error of `upper` (as `std_error_lower`).
    pub std_error_upper: Option<f64>,
    /// Imbens and Manski (2004) interval for the effect at `interval_level`, when one can
    /// be given.
    pub interval: Option<[f64; 2]>,
    /// Its critical value C (between the one- and two-sided normal quantiles).
    pub interval_critical_value: Option<f64>,
    /// Coverage of `interval` (the plan's `[inference]` confidence).
    pub interval_level: f64,
    /// Why there is no interval, when there is none.
    pub no_interval: Option<String>,
}

/// Attrition checks.
#[derive(Debug, Clone, Serialize)]
pub struct AttritionResult {
    /// The data table checked.
    pub data: String,
    /// The level the differential test is judged at (the plan's `[inference]` alpha).
    pub alpha: f64,
    /// Whether the differential test's p-value is at most `alpha`; the report then adds a
    /// caution naming `hypotheses_on_table`.
    pub significant: bool,
    /// Hypotheses whose specification uses this data table.
    pub hypotheses_on_table: Vec<String>,
    /// Arm indicator.
    pub by: String,
    /// Observed-outcome expression.
    pub observed: String,
    /// Error type of the differential test.
    pub errors: ErrorKind,
    /// Cluster columns of the differential test's errors (empty unless clustered).
    pub clusters: Vec<String>,
    /// The registered blocks absorbed in the differential test, when the design is blocked
    /// (Lee bounds pool the blocks).
    pub blocks: Option<BlocksUsed>,
    /// The probability-weight column, when the check is weighted (absent unweighted).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub weights: Option<String>,
    /// Rows left out for a weight of zero (absent unweighted).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub dropped_zero_weight: Option<usize>,
    /// Share observed in each arm (weighted shares when weighted) and their difference, tested.
    pub differential: ArmComparison,
    /// Lee bounds by outcome.
    pub bounds: BTreeMap<String, LeeResult>,
}
