//! One specification's results: its coefficients, errors, diagnostics of IV specifications
//! (first stage, endogeneity, over-identification, weak instruments, Anderson–Rubin, LM and
//! CLR) and arm summaries.

use super::kinds::{
    ArShape, ArmRole, ArmStdError, BandwidthRule, CoefDistribution, ErrorKind, EstimatorKind,
    HacKernel, LmClrErrors, SmallSampleFactor, StockYogoCriterion, TakeUpMissing,
};
use crate::distribution::Reference;
use serde::Serialize;
use std::collections::BTreeMap;

/// One specification.
#[derive(Debug, Clone, Serialize)]
pub struct SpecResult {
    /// Title.
    pub title: String,
    /// "ols" | "2sls" | "liml" | "fuller".
    pub estimator: EstimatorKind,
    /// Outcome.
    pub outcome: String,
    /// Observations used.
    pub n: usize,
    /// Residual degrees of freedom n − k − absorbed.
    pub df_resid: usize,
    /// Error kind.
    pub errors: ErrorKind,
    /// Cluster variable(s).
    pub cluster_by: Option<Vec<String>>,
    /// Number of clusters.
    pub clusters: Option<usize>,
    /// Kernel and bandwidth of HAC errors (`errors = "hac"` only).
    pub hac: Option<HacResult>,
    /// "t" | "normal".
    pub distribution: CoefDistribution,
    /// Degrees of freedom of coefficient tests (t only).
    pub df: Option<f64>,
    /// Confidence level of the intervals.
    pub confidence: f64,
    /// R-squared (centered with a constant, uncentered without; with absorbed fixed effects
    /// the overall one, as with explicit indicator columns).
    pub r_squared: f64,
    /// R² of the fixed-effect-swept model, when fixed effects are absorbed.
    pub within_r_squared: Option<f64>,
    /// sqrt(e'e / df_resid).
    pub residual_sd: f64,
    /// Coefficients by term.
    pub terms: BTreeMap<String, Term>,
    /// Absorbed fixed effects and their levels.
    pub fixed_effects: BTreeMap<String, usize>,
    /// Degrees of freedom used by absorbed fixed effects (counted in df_resid).
    pub absorbed_df: usize,
    /// The part of `absorbed_df` from fixed effects nested in a cluster variable (left out of
    /// the CR1 factor's K).
    pub absorbed_nested_df: usize,
    /// Rows dropped because they were alone in their level of a fixed effect.
    pub singletons_dropped: usize,
    /// κ of a LIML or Fuller estimate.
    pub kappa: Option<f64>,
    /// Terms dropped as collinear (`on_collinear = "drop"`).
    pub dropped_terms: Vec<String>,
    /// Row accounting.
    pub sample: SampleInfo,
    /// The probability-weight column (absent when unweighted).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub weights: Option<String>,
    /// First stages by endogenous regressor.
    pub first_stage: Option<BTreeMap<String, FirstStageResult>>,
    /// Reduced form.
    pub reduced_form: Option<Regression>,
    /// Endogeneity tests.
    pub endogeneity: Option<EndogeneityResult>,
    /// Over-identification tests (null when exactly identified or not requested).
    pub overidentification: Option<OveridResult>,
    /// Weak-instrument diagnostics.
    pub weak_instruments: Option<WeakInstrumentResult>,
    /// Anderson–Rubin test and set.
    pub anderson_rubin: Option<AndersonRubinResult>,
    /// Kleibergen LM and Moreira CLR tests (homoskedastic form; null unless the
    /// weak-instrument diagnostic was requested, there is one endogenous regressor and the
    /// specification's errors are classical).
    pub lm_clr: Option<LmClrResult>,
    /// LIML estimate computed for a contingency.
    pub liml: Option<AlternativeEstimate>,
    /// Linear probability model check (binary outcomes).
    pub linear_probability: Option<LpmInfo>,
    /// The outcome's mean in the comparison arm and, for IV specifications, take-up by arm
    /// of the instrument (the numbers of the tables' `comparison-mean` and `take-up-by-arm`
    /// rows).
    pub arms: ArmSummary,
    /// Marked exploratory in the plan.
    pub exploratory: bool,
    /// False when exploratory or added after the data were first read.
    pub pre_registered: bool,
}

/// How HAC errors were computed.
#[derive(Debug, Clone, Serialize)]
pub struct HacResult {
    /// "bartlett".
    pub kernel: HacKernel,
    /// Bandwidth b: rows d apart get weight 1 − d/b.
    pub bandwidth: f64,
    /// "stated" (in the plan) | "newey-west-1994" (chosen from the data).
    pub bandwidth_rule: BandwidthRule,
    /// Lags with a positive weight (the largest d below b).
    pub lags: usize,
    /// The column whose order the lags follow.
    pub order_by: String,
    /// The small-sample factor applied to the sandwich.
    pub small_sample_factor: SmallSampleFactor,
}

/// One coefficient.
#[derive(Debug, Clone, Serialize)]
pub struct Term {
    /// Point estimate.
    pub estimate: f64,
    /// Standard error.
    pub std_error: f64,
    /// estimate / std_error (null 0).
    pub statistic: f64,
    /// Two-sided p-value.
    pub p_value: f64,
    /// Confidence interval at the specification's level.
    pub ci: [f64; 2],
}

/// A test statistic with its p-value and the distribution that gave it.
#[derive(Debug, Clone, Serialize)]
pub struct TestResult {
    /// The statistic.
    pub statistic: f64,
    /// Upper-tail p-value.
    pub p_value: f64,
    /// Reference distribution and degrees of freedom.
    pub distribution: Reference,
}

/// A regression's coefficients and fit, as reported for first stages and reduced forms.
#[derive(Debug, Clone, Serialize)]
pub struct Regression {
    /// Dependent variable.
    pub outcome: String,
    /// Coefficients (fixed-effect indicators not shown).
    pub terms: BTreeMap<String, Term>,
    /// R-squared.
    pub r_squared: f64,
    /// Observations.
    pub n: usize,
}

/// One first-stage regression.
#[derive(Debug, Clone, Serialize)]
pub struct FirstStageResult {
    /// Coefficients (excluded instruments and controls).
    pub terms: BTreeMap<String, Term>,
    /// Classical F on the excluded instruments.
    pub f_statistic: f64,
    /// Its p-value.
    pub f_p_value: f64,
    /// Its distribution.
    pub f_distribution: Reference,
    /// Wald F on the excluded instruments with the specification's error type.
    pub robust_f_statistic: f64,
    /// Its p-value.
    pub robust_f_p_value: f64,
    /// Its distribution.
    pub robust_f_distribution: Reference,
    /// Partial R-squared of the excluded instruments.
    pub partial_r_squared: f64,
    /// Shea's (1997) partial R-squared (equals the partial R-squared with one endogenous
    /// regressor).
    pub shea_partial_r_squared: f64,
    /// R-squared of the first stage.
    pub r_squared: f64,
}

/// Endogeneity tests.
#[derive(Debug, Clone, Serialize)]
pub struct EndogeneityResult {
    /// Control-function (regression-based) test with the specification's error type.
    pub control_function: TestResult,
    /// Durbin's test.
    pub durbin: TestResult,
    /// Wu–Hausman test.
    pub wu_hausman: TestResult,
}

/// Over-identification tests.
#[derive(Debug, Clone, Serialize)]
pub struct OveridResult {
    /// Sargan's test.
    pub sargan: TestResult,
    /// Basmann's test.
    pub basmann: TestResult,
    /// Hansen's J from two-step efficient GMM (robust weight); null with two-way clustering,
    /// for which no positive definite GMM weight is guaranteed.
    pub hansen_j: Option<TestResult>,
}

/// Weak-instrument diagnostics of a specification with one endogenous regressor.
#[derive(Debug, Clone, Serialize)]
pub struct WeakInstrumentResult {
    /// Effective first-stage F (Montiel Olea and Pflueger 2013) with the spec's error type.
    pub effective_f: f64,
    /// Its critical value (Patnaik approximation) for `worst_case_bias` at 5% size.
    pub critical_value: f64,
    /// Worst-case bias τ relative to the OLS benchmark.
    pub worst_case_bias: f64,
    /// Effective degrees of freedom of the Patnaik approximation.
    pub effective_df: f64,
    /// effective_f < critical_value.
    pub weak: bool,
    /// Cragg–Donald minimum-eigenvalue statistic (homoskedastic).
    pub cragg_donald: f64,
    /// Stock–Yogo critical values of the specification's own estimator for this number of
    /// instruments, where carried: 2SLS specifications get the 2SLS tables ("relative-bias",
    /// "wald-size"), LIML ones the LIML table ("liml-wald-size"), Fuller ones none.
    pub stock_yogo: Vec<StockYogoValue>,
    /// What `stock_yogo` lacks for this specification and why (a Fuller estimator, or a
    /// number of instruments outside a carried table's rows); null when nothing is lacking.
    pub stock_yogo_note: Option<String>,
    /// tF critical value for the 2SLS t-ratio at 5% given the first-stage F (just-identified
    /// specifications; null when no finite value exists).
    pub tf_critical_value: Option<f64>,
}

/// One Stock–Yogo critical value.
#[derive(Debug, Clone, Serialize)]
pub struct StockYogoValue {
    /// "relative-bias" or "wald-size" (2SLS), "liml-wald-size" (LIML).
    pub criterion: StockYogoCriterion,
    /// Bias share or size level.
    pub level: f64,
    /// Critical value for the Cragg–Donald statistic.
    pub critical_value: f64,
}

/// One piece of a confidence set; `null` ends are unbounded.
#[derive(Debug, Clone, Serialize)]
pub struct SetPiece {
    /// Lower end (null: −∞).
    pub lower: Option<f64>,
    /// Upper end (null: +∞).
    pub upper: Option<f64>,
}

/// The Anderson–Rubin test of the endogenous coefficient and its confidence set.
#[derive(Debug, Clone, Serialize)]
pub struct AndersonRubinResult {
    /// Value tested (0).
    pub null: f64,
    /// AR statistic at `null`.
    pub statistic: f64,
    /// Its p-value.
    pub p_value: f64,
    /// Its distribution.
    pub distribution: Reference,
    /// "bounded" | "two-rays" | "whole-line" | "empty" | "union".
    pub shape: ArShape,
    /// The set as disjoint pieces in increasing order.
    pub set: Vec<SetPiece>,
    /// [lower, upper] when the set is one bounded interval, else null.
    pub ci: Option<[f64; 2]>,
    /// Confidence level of the set.
    pub confidence: f64,
    /// The critical value the set inverts: the `confidence` quantile of `distribution`
    /// (the set is every coefficient whose AR statistic is at most this).
    pub critical_value: f64,
    /// The AR statistic against the hypothesised coefficient on a fixed grid, for the HTML
    /// report's curve; null when it could not be computed.
    pub curve: Option<ArCurve>,
}

/// Kleibergen's LM test and the conditional likelihood ratio test of the endogenous
/// coefficient = `null`, both valid however weak the instruments are: with classical errors
/// the homoskedastic forms (Kleibergen 2002; Moreira 2003), with HC0–HC3 or one-way
/// clustered errors the robust forms (Kleibergen 2005: the K statistic and the GMM form of
/// the CLR, with the specification's sandwich; `estimate::RobustLmClr`).
#[derive(Debug, Clone, Serialize)]
pub struct LmClrResult {
    /// Value tested (0).
    pub null: f64,
    /// Which form: "homoskedastic", "heteroskedasticity-robust" or "cluster-robust".
    pub errors: LmClrErrors,
    /// Kleibergen's LM statistic, its χ²(1) p-value and distribution.
    pub lm: TestResult,
    /// The CLR statistic.
    pub clr_statistic: f64,
    /// The statistic the CLR p-value conditions on (first-stage strength under the null:
    /// Moreira's Q_T, or Kleibergen's rank statistic in the robust forms).
    pub clr_conditioning: f64,
    /// P(CLR > clr_statistic | conditioning = clr_conditioning) under the null, by numerical
    /// integration of the conditional law (`estimate::clr_p_value`).
    pub clr_p_value: f64,
    /// Confidence level of the two sets (the specification's).
    pub confidence: f64,
    /// Shape of `lm_set`.
    pub lm_shape: ArShape,
    /// {β₀ : LM(β₀) ≤ χ²(1) quantile}, disjoint pieces in increasing order (homoskedastic:
    /// exact roots of a quartic, `estimate/clr/set.rs`; robust: scan in θ with bisection,
    /// `estimate/clr/robust.rs`).
    pub lm_set: Vec<SetPiece>,
    /// Shape of `clr_set`.
    pub clr_shape: ArShape,
    /// {β₀ : CLR p-value(β₀) ≥ 1 − confidence}, disjoint pieces in increasing order (scan in
    /// θ with bisection, `estimate/clr/set.rs`).
    pub clr_set: Vec<SetPiece>,
}

/// The Anderson–Rubin statistic on a grid of hypothesised coefficient values.
///
/// The grid has [`AR_CURVE_POINTS`] equally spaced values over the span of the set's finite
/// endpoints, the estimate and its Wald interval, widened by a fifth of that span on each
/// side.
#[derive(Debug, Clone, Serialize)]
pub struct ArCurve {
    /// The hypothesised coefficient values, increasing.
    pub coefficient: Vec<f64>,
    /// AR at each value (null where its covariance is singular: an exact fit).
    pub statistic: Vec<Option<f64>>,
}

/// Points of the Anderson–Rubin curve's grid.
pub const AR_CURVE_POINTS: usize = 101;

/// An alternative k-class estimate computed for a contingency.
#[derive(Debug, Clone, Serialize)]
pub struct AlternativeEstimate {
    /// "liml".
    pub estimator: EstimatorKind,
    /// κ used.
    pub kappa: f64,
    /// Coefficients.
    pub terms: BTreeMap<String, Term>,
}

/// Row accounting of a specification.
#[derive(Debug, Clone, Serialize)]
pub struct SampleInfo {
    /// Rows in the data table.
    pub table_rows: usize,
    /// Rows passing the sample restriction.
    pub in_sample: usize,
    /// Rows dropped for missing values (listwise deletion; a missing weight counts here).
    pub dropped_missing: usize,
    /// Rows of a weighted specification dropped for a weight of zero (absent when unweighted).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub dropped_zero_weight: Option<usize>,
}

/// A linear probability model's check of its fitted values.
#[derive(Debug, Clone, Serialize)]
pub struct LpmInfo {
    /// Fitted values below 0 or above 1.
    pub fitted_outside_unit_interval: usize,
}

/// Arm summaries of a specification's estimation sample (the rows it was fitted on).
///
/// The arms are the values 0 (comparison) and 1 of one binary column: the single excluded
/// instrument of an IV specification; for OLS the `[assignment]` variable when it is a
/// regressor of interest, else the single regressor of interest. Standard errors are those of
/// a mean: cluster-robust (CR1, factor G/(G − 1) with G the arm's clusters) by the
/// specification's first cluster variable when it clusters, else s/√n (n − 1 divisor, which
/// HC1 equals for a mean).
#[derive(Debug, Clone, Serialize)]
pub struct ArmSummary {
    /// The binary column defining the arms; null when none qualifies (see `comparison_note`).
    pub by: Option<String>,
    /// "instrument" | "assignment" | "regressor": why `by` was chosen.
    pub by_role: Option<ArmRole>,
    /// "cluster" (CR1 by `cluster_by`) | "unclustered" (s/√n).
    pub std_error_kind: ArmStdError,
    /// The cluster variable of cluster-robust standard errors.
    pub cluster_by: Option<String>,
    /// The outcome in the comparison arm (`by` = 0).
    pub comparison_mean: Option<ArmMean>,
    /// Why `comparison_mean` is null.
    pub comparison_note: Option<String>,
    /// The endogenous regressor's mean in arm 0 and in arm 1 of the instrument (IV only).
    pub take_up: Option<[ArmMean; 2]>,
    /// Why `take_up` is null (an OLS specification, several endogenous regressors or
    /// instruments, or an instrument that is not 0/1).
    pub take_up_note: Option<String>,
    /// The short reason `take_up` is null, for a table cell: "ols", "instruments" (not exactly
    /// one), "endogenous" (not exactly one), "not-binary", "one-arm", "small-arm" (an arm
    /// with fewer than two rows or in one cluster), "not-a-column"; null when shown.
    pub take_up_missing: Option<TakeUpMissing>,
}

/// A variable's mean in one arm.
#[derive(Debug, Clone, Serialize)]
pub struct ArmMean {
    /// The variable averaged.
    pub variable: String,
    /// The arm (0 or 1 of `by`).
    pub arm: u8,
    /// Rows in the arm.
    pub n: usize,
    /// Clusters with rows in the arm (cluster-robust errors only).
    pub clusters: Option<usize>,
    /// Mean.
    pub mean: f64,
    /// Standard deviation (n − 1 divisor).
    pub sd: f64,
    /// Standard error of the mean (kind in `ArmSummary::std_error_kind`).
    pub std_error: f64,
    /// Normal-approximation interval at the specification's confidence level,
    /// mean ± z·std_error (it may reach past the variable's range, below 0 for a share).
    pub ci: [f64; 2],
}
