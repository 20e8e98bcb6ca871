//! The machine-readable results (`results.json`): its model and its digest.
//!
//! Keys follow the contract in plan-format.md §5. Maps are sorted by key and numbers are
//! written in shortest round-trip form, so the same plan and data give byte-identical files.
//! `digest` is `sha256:` + the SHA-256 of the canonical serialisation of everything else.

use crate::deviation::Deviation;
use crate::distribution::Reference;
use serde::Serialize;
use std::collections::BTreeMap;

/// The whole file.
#[derive(Debug, Clone, Serialize)]
pub struct Results {
    /// Results format version (1).
    pub format: u32,
    /// The tool that wrote it.
    pub tool: Tool,
    /// The plan and its integrity.
    pub plan: PlanInfo,
    /// Data files by table id.
    pub data: BTreeMap<String, DataInfo>,
    /// Specification results by id.
    pub specifications: BTreeMap<String, SpecResult>,
    /// Hypothesis results by id.
    pub hypotheses: BTreeMap<String, HypothesisResult>,
    /// Decision rules and whether they were invoked (none in this version).
    pub contingencies: Vec<ContingencyResult>,
    /// Summary indices built for the run.
    pub indices: BTreeMap<String, IndexResult>,
    /// The balance table, when the plan declares one.
    pub balance: Option<BalanceResult>,
    /// Attrition checks, when the plan declares them.
    pub attrition: Option<AttritionResult>,
    /// Deviations and notes, most severe first.
    pub deviations: Vec<Deviation>,
    /// The registration point and every element of the executed plan classified against it
    /// (null when the plan was never sealed).
    pub registration: Option<Registration>,
    /// The registered version's own results, when the executed plan differs from it after the
    /// data were seen (null otherwise).
    pub as_registered: Option<AsRegistered>,
    /// Every `rehearsed` entry of the ledger the run was judged against, with when it came
    /// relative to the registration point (empty when the plan was never rehearsed).
    pub rehearsals: Vec<RehearsalCitation>,
    /// `sha256:` digest of everything above.
    pub digest: String,
}

/// Tool name and version.
#[derive(Debug, Clone, Serialize)]
pub struct Tool {
    /// "sworn".
    pub name: &'static str,
    /// Crate version.
    pub version: &'static str,
}

/// The plan's fingerprints and seal state.
#[derive(Debug, Clone, Serialize)]
pub struct PlanInfo {
    /// The run directory's own copy of the plan (always `plan.toml`, inside the directory).
    pub path: String,
    /// Path of the plan file the run read, relative to the run directory: where the data
    /// paths start from. Informative; `verify` reads data only after matching its SHA-256.
    pub source: String,
    /// SHA-256 of the plan file's bytes.
    pub bytes_sha256: String,
    /// SHA-256 of the plan's canonical form.
    pub content_sha256: String,
    /// Whether the ledger holds a seal.
    pub sealed: bool,
    /// SHA-256 of the ledger line of the seal or amendment this run follows.
    pub ledger_head: Option<String>,
    /// One of `sealed-unchanged`, `sealed-cosmetic-change`, `changed`, `not-sealed`, `ledger-broken`.
    pub integrity: &'static str,
}

/// The registered version of the plan (the last seal or amendment before the data were first
/// seen) and how each element of the executed plan stands against it.
#[derive(Debug, Clone, Serialize)]
pub struct Registration {
    /// SHA-256 of the registered version's canonical form.
    pub content_sha256: String,
    /// Its ledger line.
    pub ledger_line: usize,
    /// `sealed` or `amended`: how it was recorded.
    pub recorded_as: &'static str,
    /// When the data were first seen (the first `data-inspected` or `data-first-read` entry).
    pub data_inspected: Option<Moment>,
    /// When results were first computed (the first `data-first-read` entry).
    pub results_computed: Option<Moment>,
    /// Every element of the registered and executed plans, in canonical order.
    pub elements: Vec<ElementRegistration>,
}

/// A rehearsal the ledger records, as a run cites it.
#[derive(Debug, Clone, Serialize)]
pub struct RehearsalCitation {
    /// Its ledger line.
    pub ledger_line: usize,
    /// Its time as recorded (the recording machine's clock).
    pub time: String,
    /// `before-registration` (before the registered version's seal or amendment: evidence of
    /// power stated before registration), `after-registration` (after it, before the data
    /// were seen), `after-data-inspected`, `after-results-computed`, or `no-registration`
    /// (the run has no registered version).
    pub timing: &'static str,
    /// SHA-256 of its assumptions (the canonical `[rehearsal]` section and replication count).
    pub assumptions_sha256: Option<String>,
    /// Content SHA-256 of the plan it rehearsed.
    pub plan_content_sha256: Option<String>,
    /// Whether that plan is the registered version (same content fingerprint).
    pub rehearsed_registered_version: bool,
    /// The power it recorded (null for an entry written before sworn recorded it).
    pub power: Option<crate::ledger::PowerRecord>,
}

/// A ledger moment.
#[derive(Debug, Clone, Serialize)]
pub struct Moment {
    /// Ledger line.
    pub ledger_line: usize,
    /// The event recorded there (`data-inspected`, `data-first-read`).
    pub event: &'static str,
    /// Its time as recorded (the recording machine's clock).
    pub time: String,
}

/// One element of the plan against the registered version.
#[derive(Debug, Clone, Serialize)]
pub struct ElementRegistration {
    /// `specification[id]`, `hypothesis[id]`, `family.NAME`, `data.ID` or a section.
    pub element: String,
    /// `unchanged`, `changed`, `added` or `removed`.
    pub status: &'static str,
    /// Each changed key as `key: old → new` (every key for an added element).
    pub keys: Vec<String>,
    /// `data-inspected` or `results-computed`: the moment the change followed.
    pub after: Option<&'static str>,
    /// Ledger line of the amendment that first made the change (null: no amendment records it).
    pub amendment_line: Option<usize>,
    /// That amendment's reason.
    pub reason: Option<String>,
}

/// The registered version run on the same data, reported beside the executed plan.
#[derive(Debug, Clone, Serialize)]
pub struct AsRegistered {
    /// SHA-256 of the registered version's canonical form.
    pub content_sha256: String,
    /// Why the registered version could not be run (null when it ran).
    pub error: Option<String>,
    /// The registered version of each specification that was changed or removed afterwards.
    pub specifications: BTreeMap<String, SpecResult>,
    /// The registered version's decision rules as evaluated.
    pub contingencies: Vec<ContingencyResult>,
}

/// One data table.
#[derive(Debug, Clone, Serialize)]
pub struct DataInfo {
    /// Path as written in the plan.
    pub path: String,
    /// SHA-256 of the file's bytes.
    pub sha256: String,
    /// Number of rows.
    pub rows: usize,
}

/// How HAC errors were computed.
#[derive(Debug, Clone, Serialize)]
pub struct HacResult {
    /// "bartlett".
    pub kernel: &'static str,
    /// Bandwidth b: rows d apart get weight 1 − d/b.
    pub bandwidth: f64,
    /// "stated" (in the plan) | "newey-west-1994" (chosen from the data).
    pub bandwidth_rule: &'static str,
    /// Lags with a positive weight (the largest d below b).
    pub lags: usize,
    /// The column whose order the lags follow.
    pub order_by: String,
    /// The small-sample factor applied to the sandwich.
    pub small_sample_factor: &'static str,
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
    pub criterion: &'static str,
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
    pub shape: &'static str,
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

/// Kleibergen's (2002) LM test and Moreira's (2003) conditional likelihood ratio test of the
/// endogenous coefficient = `null`, both valid however weak the instruments are, in their
/// homoskedastic form (`estimate::LmClr`).
#[derive(Debug, Clone, Serialize)]
pub struct LmClrResult {
    /// Value tested (0).
    pub null: f64,
    /// Always "homoskedastic": the only form sworn computes.
    pub errors: &'static str,
    /// Kleibergen's LM statistic, its χ²(1) p-value and distribution.
    pub lm: TestResult,
    /// Moreira's CLR statistic.
    pub clr_statistic: f64,
    /// The statistic the CLR p-value conditions on (Q_T, first-stage strength under the
    /// null).
    pub clr_conditioning: f64,
    /// P(CLR > clr_statistic | Q_T = clr_conditioning) under the null, by numerical
    /// integration of the conditional law (`estimate::clr_p_value`).
    pub clr_p_value: f64,
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
    pub estimator: &'static str,
    /// κ used.
    pub kappa: f64,
    /// Coefficients.
    pub terms: BTreeMap<String, Term>,
}

/// A summary index as built.
#[derive(Debug, Clone, Serialize)]
pub struct IndexResult {
    /// "anderson" | "mean-z".
    pub method: &'static str,
    /// Components as written (a leading "-" marks a flipped one).
    pub components: Vec<String>,
    /// Reference-group expression.
    pub reference: String,
    /// "available" (observed components averaged) | "complete" (complete rows only).
    pub missing: &'static str,
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
    pub errors: &'static str,
    /// Cluster columns of the errors (empty unless clustered).
    pub clusters: Vec<String>,
    /// The registered blocks absorbed as fixed effects, when the design is blocked.
    pub blocks: Option<BlocksUsed>,
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
    pub trimmed_arm: &'static str,
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
    pub errors: &'static str,
    /// Cluster columns of the differential test's errors (empty unless clustered).
    pub clusters: Vec<String>,
    /// The registered blocks absorbed in the differential test, when the design is blocked
    /// (Lee bounds pool the blocks).
    pub blocks: Option<BlocksUsed>,
    /// Share observed in each arm and their difference, tested.
    pub differential: ArmComparison,
    /// Lee bounds by outcome.
    pub bounds: BTreeMap<String, LeeResult>,
}

/// The outcome of one `[[contingency]]` rule.
#[derive(Debug, Clone, Serialize)]
pub struct ContingencyResult {
    /// Rule id.
    pub id: String,
    /// Specification watched.
    pub specification: String,
    /// "weak_instruments" | "endogeneity" | "clusters".
    pub trigger: &'static str,
    /// The threshold written in the plan.
    pub threshold: f64,
    /// The value that decided it (effective F, p-value, cluster count).
    pub value: Option<f64>,
    /// Whether the trigger held.
    pub invoked: bool,
    /// The action as written in the plan.
    pub action: String,
    /// Hypotheses whose inference the action changed.
    pub hypotheses: Vec<String>,
    /// Why, in words.
    pub reason: String,
}

/// Row accounting of a specification.
#[derive(Debug, Clone, Serialize)]
pub struct SampleInfo {
    /// Rows in the data table.
    pub table_rows: usize,
    /// Rows passing the sample restriction.
    pub in_sample: usize,
    /// Rows dropped for missing values (listwise deletion).
    pub dropped_missing: usize,
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
    pub by_role: Option<&'static str>,
    /// "cluster" (CR1 by `cluster_by`) | "unclustered" (s/√n).
    pub std_error_kind: &'static str,
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
    pub take_up_missing: Option<&'static str>,
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

/// One specification.
#[derive(Debug, Clone, Serialize)]
pub struct SpecResult {
    /// Title.
    pub title: String,
    /// "ols" | "2sls" | "liml" | "fuller".
    pub estimator: &'static str,
    /// Outcome.
    pub outcome: String,
    /// Observations used.
    pub n: usize,
    /// Residual degrees of freedom n − k − absorbed.
    pub df_resid: usize,
    /// Error kind.
    pub errors: &'static str,
    /// Cluster variable(s).
    pub cluster_by: Option<Vec<String>>,
    /// Number of clusters.
    pub clusters: Option<usize>,
    /// Kernel and bandwidth of HAC errors (`errors = "hac"` only).
    pub hac: Option<HacResult>,
    /// "t" | "normal".
    pub distribution: &'static str,
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

/// One hypothesis.
#[derive(Debug, Clone, Serialize)]
pub struct HypothesisResult {
    /// The claim in words.
    pub claim: String,
    /// Specification id.
    pub specification: String,
    /// Term.
    pub term: String,
    /// Direction.
    pub direction: crate::inference::Direction,
    /// Null value.
    pub null: f64,
    /// Estimate (null when undetermined).
    pub estimate: Option<f64>,
    /// Standard error.
    pub std_error: Option<f64>,
    /// (estimate − null) / std_error.
    pub statistic: Option<f64>,
    /// p-value in the stated direction.
    pub p_value: Option<f64>,
    /// p-value after the family's correction.
    pub adjusted_p_value: Option<f64>,
    /// Level.
    pub alpha: f64,
    /// Family.
    pub family: Option<String>,
    /// Correction used.
    pub correction: crate::inference::Correction,
    /// "t" | "normal" | "anderson-rubin" | "tf".
    pub method: &'static str,
    /// Estimator of the tested estimate ("ols", "2sls", "liml", "fuller").
    pub estimator: &'static str,
    /// Specification whose estimate was tested (differs from `specification` when an
    /// endogeneity contingency substituted an OLS specification).
    pub tested_specification: String,
    /// The contingency that changed this hypothesis's inference, if any.
    pub contingency: Option<String>,
    /// Degrees of freedom of the t reference.
    pub df: Option<f64>,
    /// Confidence set for the term at the specification's confidence level (one piece for an
    /// ordinary interval; the Anderson–Rubin set may have unbounded or several pieces).
    pub ci: Option<Vec<SetPiece>>,
    /// One-sided hypotheses tested with a t or normal reference: the (1 − alpha) one-sided
    /// bound the test implies, before any family correction (a lower bound for `greater`, an
    /// upper bound for `less`; the null lies beyond it exactly when the unadjusted test
    /// rejects). Null for two-sided hypotheses and for tests that imply no such bound
    /// (resampled, Anderson–Rubin, tF).
    pub one_sided_bound: Option<f64>,
    /// Randomization tests of an OLS coefficient: the constant effects the two-sided test
    /// does not reject at the plan's alpha, found by test inversion on common draws.
    pub randomization_interval: Option<RandomizationIntervalResult>,
    /// Resampled tests: the number of draws used (the observed one included).
    pub draws: Option<usize>,
    /// Resampled tests: whether every possible draw was enumerated.
    pub exact: Option<bool>,
    /// Resampled tests: how the p-value was obtained (procedure, design re-drawn, draws,
    /// seed, counting rule); null for every other test. The reports' Resampling section is
    /// written from this object.
    pub resampling: Option<ResamplingInfo>,
    /// supported | not-supported | undetermined.
    pub verdict: &'static str,
    /// Why a verdict is undetermined.
    pub reason: Option<String>,
    /// False when the specification is not pre-registered.
    pub pre_registered: bool,
    /// `registered` (in the registered version: the fields above are its result as
    /// registered), `added-after-data`, `removed-after-data` (the registered result of a
    /// hypothesis the executed plan no longer has) or `not-registered` (no registration point).
    pub registration: &'static str,
    /// The executed plan's result, when it differs from the registered one.
    pub as_amended: Option<Box<HypothesisResult>>,
}

/// How a resampled p-value was obtained: everything needed to repeat it.
#[derive(Debug, Clone, Serialize)]
pub struct ResamplingInfo {
    /// "randomization" (the assignment re-drawn) | "wild-bootstrap" (cluster weights drawn).
    pub procedure: &'static str,
    /// The bootstrap's variant: "restricted-wild-cluster" (OLS; Cameron, Gelbach and Miller
    /// 2008) | "wild-restricted-efficient" (2SLS; Davidson and MacKinnon 2010); null for
    /// randomization.
    pub bootstrap: Option<&'static str>,
    /// Bootstrap weights per cluster: "rademacher" | "webb"; null for randomization.
    pub weights: Option<&'static str>,
    /// What each draw recomputes: "t" (the coefficient over its standard error with the
    /// specification's errors), "estimate" (the coefficient), "anderson-rubin" (the AR
    /// statistic of a 2SLS specification at the null) or "cr1-t" (the bootstrap's
    /// CR1-studentized coefficient).
    pub statistic: &'static str,
    /// The coefficient value imposed on every draw (the sharp null, or the bootstrap's
    /// restricted null).
    pub null_imposed: f64,
    /// What is re-drawn.
    pub redrawn: Redrawn,
    /// "exact": every possible draw enumerated, the seed not used | "sampled": random draws.
    pub mode: &'static str,
    /// Random draws the plan asks for (`[resampling].draws`), besides the observed one.
    pub draws_requested: usize,
    /// Enumerate instead when the possible draws number at most this (`exact_below`).
    pub exact_below: u64,
    /// Draws in the p-value's denominator: sampled mode, the requested draws plus the observed
    /// one minus `draws_skipped`; exact mode, every possible draw minus `draws_skipped`.
    pub draws_used: usize,
    /// Whether the observed assignment (the bootstrap's original sample, all weights 1) is
    /// one of `draws_used`: always true (sampled mode adds it as draw 0; exact mode
    /// enumerates it among all draws).
    pub observed_counted: bool,
    /// Draws whose statistic could not be computed (a degenerate re-draw), left out.
    pub draws_skipped: usize,
    /// `[resampling].seed`.
    pub seed: u64,
    /// Whether the seed drew anything (false in exact mode).
    pub seed_used: bool,
    /// Which draws count towards the p-value, as a formula over the draw statistic T* and the
    /// observed T: "|T*| >= |T|" (two-sided), "T* >= T" (greater), "T* <= T" (less), or
    /// "AR* >= AR, 1 if the estimate is on the other side" (a one-sided hypothesis tested by
    /// randomizing the Anderson–Rubin statistic). p = counted draws / `draws_used`.
    pub p_value_counts: &'static str,
    /// Relative tolerance within which a draw ties with the observed statistic (ties count).
    pub tie_tolerance: f64,
}

/// What a resampled test re-draws.
#[derive(Debug, Clone, Serialize)]
pub struct Redrawn {
    /// Randomization: "complete" | "blocked" | "clustered" | "blocked-clustered" (the
    /// registered `[assignment].design`); bootstrap: "cluster-weights".
    pub design: String,
    /// Randomization: the assigned variable re-drawn; null for the bootstrap.
    pub variable: Option<String>,
    /// Randomization: the block variable within which it is re-drawn (null: none).
    pub blocks: Option<String>,
    /// The cluster variable whose clusters are re-assigned whole (randomization) or get one
    /// weight each (bootstrap); null: units are re-drawn one by one.
    pub clusters: Option<String>,
    /// Bootstrap: the number of clusters weighted; null for randomization.
    pub cluster_count: Option<usize>,
}

/// A randomization-inference interval by test inversion.
#[derive(Debug, Clone, Serialize)]
pub struct RandomizationIntervalResult {
    /// Lower end (null: no rejection found below the estimate out to 4096 standard errors).
    pub lower: Option<f64>,
    /// Upper end (null: likewise above).
    pub upper: Option<f64>,
    /// 1 − alpha, alpha the plan's `[inference]` level.
    pub level: f64,
    /// Each end lies within this of an effect the test rejects.
    pub tolerance: f64,
    /// Candidate effects tested (each on the same draws).
    pub evaluations: usize,
}

/// Canonical JSON text of a serialisable value (sorted keys, no whitespace).
pub fn canonical_json<T: Serialize>(value: &T) -> String {
    let v = serde_json::to_value(value).unwrap_or(serde_json::Value::Null);
    let mut out = String::new();
    crate::plan::canonical::write_canonical(&v, &mut out);
    out
}

impl Results {
    /// The digest of everything but the digest field.
    pub fn compute_digest(&self) -> String {
        let mut v = serde_json::to_value(self).unwrap_or(serde_json::Value::Null);
        if let Some(map) = v.as_object_mut() {
            map.remove("digest");
        }
        let mut out = String::new();
        crate::plan::canonical::write_canonical(&v, &mut out);
        format!("sha256:{}", crate::ledger::sha256_hex(out.as_bytes()))
    }

    /// The file's text: pretty JSON with sorted keys and a final newline.
    pub fn to_file_text(&self) -> String {
        let v = serde_json::to_value(self).unwrap_or(serde_json::Value::Null);
        let mut text = serde_json::to_string_pretty(&sorted(v)).unwrap_or_default();
        text.push('\n');
        text
    }
}

/// Digest check of a results.json text: the recorded digest, and the recomputed one.
pub fn digest_of_text(text: &str) -> Option<(String, String)> {
    let mut v: serde_json::Value = serde_json::from_str(text).ok()?;
    let recorded = v.get("digest")?.as_str()?.to_string();
    v.as_object_mut()?.remove("digest");
    let mut out = String::new();
    crate::plan::canonical::write_canonical(&v, &mut out);
    Some((
        recorded,
        format!("sha256:{}", crate::ledger::sha256_hex(out.as_bytes())),
    ))
}

/// Rebuild a JSON value with object keys in sorted order (whatever map type serde_json uses).
fn sorted(v: serde_json::Value) -> serde_json::Value {
    match v {
        serde_json::Value::Object(map) => {
            let mut entries: Vec<(String, serde_json::Value)> = map.into_iter().collect();
            entries.sort_by(|a, b| a.0.cmp(&b.0));
            serde_json::Value::Object(entries.into_iter().map(|(k, v)| (k, sorted(v))).collect())
        }
        serde_json::Value::Array(a) => {
            serde_json::Value::Array(a.into_iter().map(sorted).collect())
        }
        other => other,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample() -> Results {
        Results {
            format: 1,
            tool: Tool {
                name: "sworn",
                version: "0.0.0",
            },
            plan: PlanInfo {
                path: "plan.toml".into(),
                source: "../p.toml".into(),
                bytes_sha256: "b".into(),
                content_sha256: "c".into(),
                sealed: true,
                ledger_head: None,
                integrity: "sealed-unchanged",
            },
            data: BTreeMap::new(),
            specifications: BTreeMap::new(),
            hypotheses: BTreeMap::new(),
            contingencies: Vec::new(),
            indices: BTreeMap::new(),
            balance: None,
            attrition: None,
            deviations: vec![Deviation::new(
                crate::deviation::DeviationCode::Exploratory,
                "s",
                "m",
            )],
            registration: None,
            as_registered: None,
            rehearsals: Vec::new(),
            digest: String::new(),
        }
    }

    #[test]
    fn digest_survives_the_file_round_trip() {
        let mut r = sample();
        r.plan.path = "0.1 + 0.2 = 0.30000000000000004".into();
        r.digest = r.compute_digest();
        let (recorded, recomputed) = digest_of_text(&r.to_file_text()).expect("digest");
        assert_eq!(recorded, recomputed);
        assert_eq!(recorded, r.digest);
        let edited = r.to_file_text().replace("sealed-unchanged", "changed");
        let (recorded, recomputed) = digest_of_text(&edited).expect("digest");
        assert_ne!(recorded, recomputed);
    }

    #[test]
    fn file_text_has_sorted_keys() {
        let text = sample().to_file_text();
        let contingencies = text.find("\"contingencies\"").expect("key");
        let tool = text.find("\"tool\"").expect("key");
        assert!(contingencies < tool);
        assert!(text.ends_with("}\n"));
    }
}
