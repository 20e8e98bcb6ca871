// Over 500 lines because it holds the validated plan's plain data types, one per plan section
// with every field documented, read together as the shape of a plan; no logic hangs off them
// beyond small naming helpers. The logic lives in `raw.rs` and `validate/`.
//! The analysis plan: TOML text → raw structs ([`raw`]) → a validated [`Plan`].
//!
//! Invariants of a [`Plan`]: every name it uses (columns, derived variables, data tables,
//! specifications, families, table shells) has been resolved; every data path is absolute;
//! every expression has been parsed. Nothing here reads data. The structs are plain data.

pub mod canonical;
mod columns;
pub mod compare;
pub mod raw;
mod source;
pub mod unfilled;
mod validate;

use crate::expr::Expr;
use crate::inference::{Correction, Direction};
use std::collections::BTreeMap;
use std::path::PathBuf;

pub use crate::suggest::{closest, hint as suggest_hint};
pub use columns::needed_columns;
pub use source::SourceMap;
pub use validate::rehearsal::EFFECT;
pub use validate::scope::spec_terms;
pub use validate::{from_text, load};

/// A validated plan.
#[derive(Debug, Clone)]
pub struct Plan {
    /// Absolute path of the plan file.
    pub path: PathBuf,
    /// The file's bytes as read (fingerprinted by the ledger).
    pub text: String,
    /// Study metadata.
    pub study: Study,
    /// Plan-wide inference defaults.
    pub inference: InferenceDefaults,
    /// Data sources keyed by id.
    pub data: BTreeMap<String, DataSource>,
    /// Derived variables in evaluation order.
    pub derive: Vec<Derived>,
    /// How the instrument was randomized, when declared.
    pub assignment: Option<Assignment>,
    /// The specifications in plan order.
    pub specifications: Vec<Spec>,
    /// The hypotheses in plan order.
    pub hypotheses: Vec<Hypothesis>,
    /// Families keyed by name (families used by hypotheses but not declared get defaults).
    pub families: BTreeMap<String, Family>,
    /// Table shells in plan order.
    pub tables: Vec<Table>,
    /// Decision rules in plan order.
    pub contingencies: Vec<Contingency>,
    /// Resampling settings, when declared.
    pub resampling: Option<Resampling>,
    /// Summary indices in plan order.
    pub indices: Vec<Index>,
    /// Balance table, when declared.
    pub balance: Option<Balance>,
    /// Attrition checks, when declared.
    pub attrition: Option<Attrition>,
    /// Simulated data for `sworn rehearse`, when declared.
    pub rehearsal: Option<Rehearsal>,
}

/// `[rehearsal]`: how to simulate the study's data before they exist.
#[derive(Debug, Clone)]
pub struct Rehearsal {
    /// Simulated data sets per effect size.
    pub replications: usize,
    /// Seed; replication r at effect e uses the stream of (seed, r) whatever e.
    pub seed: u64,
    /// Power at which the minimum detectable effect is read.
    pub target_power: f64,
    /// Values of `effect` simulated, ascending, starting at 0.
    pub effects: Vec<f64>,
    /// Draws of each resampled test in a rehearsal (None: as `[resampling]` registers).
    pub resampling_draws: Option<usize>,
    /// Bisection steps of the MDE search between the simulated effects that bracket the
    /// target power (0: linear interpolation only).
    pub mde_steps: usize,
    /// A data-generating process per data table id.
    pub generators: BTreeMap<String, Generator>,
}

/// A data-generating process for one table.
#[derive(Debug, Clone)]
pub struct Generator {
    /// Rows simulated (0 when `baseline` is given: its rows are the file's).
    pub rows: usize,
    /// The baseline file whose rows and columns the simulated table starts from, if any.
    pub baseline: Option<BaselineFile>,
    /// Columns in evaluation order (each after the columns it uses; ties by name).
    pub columns: Vec<GeneratedColumn>,
}

/// `[rehearsal.data.NAME] baseline`: a file read as the table's fixed rows, to which a
/// rehearsal adds the columns it simulates.
#[derive(Debug, Clone)]
pub struct BaselineFile {
    /// The path as written in the plan.
    pub text: String,
    /// The path resolved against the plan file's folder.
    pub path: std::path::PathBuf,
    /// Line and column of the `baseline` value in the plan.
    pub place: (usize, usize),
}

/// One simulated column.
#[derive(Debug, Clone)]
pub struct GeneratedColumn {
    /// Declared column name.
    pub name: String,
    /// The expression as written.
    pub text: String,
    /// Parsed (random draws allowed).
    pub expr: Expr,
    /// Declared kind (latent variables: number).
    pub kind: ColumnKind,
    /// An unobserved variable: simulated for later columns, never part of the table.
    pub latent: bool,
    /// Line and column of the expression in the plan (for errors found while simulating).
    pub place: (usize, usize),
}

/// How a summary index weights its standardized components.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IndexMethod {
    /// Equal weights (Kling, Liebman and Katz 2007).
    MeanZ,
    /// Inverse-covariance weights (Anderson 2008).
    InverseCovariance,
}

/// A summary index.
#[derive(Debug, Clone)]
pub struct Index {
    /// Name (usable as a variable).
    pub id: String,
    /// Data table.
    pub data: String,
    /// Weighting.
    pub method: IndexMethod,
    /// Components and whether each is flipped.
    pub components: Vec<(String, bool)>,
    /// Reference-group expression as written, and parsed.
    pub reference: (String, Expr),
    /// A row missing any component has no index (else the observed components are averaged).
    pub complete_cases: bool,
}

/// A balance table.
#[derive(Debug, Clone)]
pub struct Balance {
    /// Data table.
    pub data: String,
    /// Binary arm indicator.
    pub by: String,
    /// Covariates.
    pub covariates: Vec<String>,
    /// Standard errors (the registered clusters when `[assignment]` is clustered).
    pub errors: Errors,
    /// The registered blocks, absorbed as fixed effects (when `by` is the `[assignment]`
    /// variable of a blocked design).
    pub blocks: Option<String>,
    /// Probability-weight column: weighted arm means and weighted least squares.
    pub weights: Option<String>,
}

/// Attrition checks.
#[derive(Debug, Clone)]
pub struct Attrition {
    /// Data table.
    pub data: String,
    /// Binary arm indicator.
    pub by: String,
    /// Observed-outcome expression as written, and parsed.
    pub observed: (String, Expr),
    /// Outcomes to bound.
    pub bounds: Vec<String>,
    /// Standard errors of the differential-attrition test (the registered clusters when
    /// `[assignment]` is clustered).
    pub errors: Errors,
    /// The registered blocks, absorbed as fixed effects in the differential-attrition test
    /// (when `by` is the `[assignment]` variable of a blocked design).
    pub blocks: Option<String>,
    /// Probability-weight column of the differential-attrition test (Lee bounds are then
    /// refused at `check`).
    pub weights: Option<String>,
}

/// `[resampling]`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Resampling {
    /// Random draws (the observed one not counted) when enumeration is too large.
    pub draws: usize,
    /// Seed.
    pub seed: u64,
    /// Enumerate exactly when the number of possible draws is below this.
    pub exact_below: u64,
}

/// How a hypothesis is tested.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// The specification's own model-based test.
    Model,
    /// Randomization inference from `[assignment]`.
    Randomization {
        /// Studentized t (true) or the raw estimate (false).
        studentized: bool,
    },
    /// Restricted wild cluster bootstrap.
    WildBootstrap {
        /// Webb's six-point weights (true) or Rademacher (false).
        webb: bool,
    },
}

/// `[study]`.
#[derive(Debug, Clone)]
pub struct Study {
    /// Title.
    pub title: String,
    /// Registry identifier.
    pub id: Option<String>,
    /// Authors.
    pub authors: Vec<String>,
    /// Registration date as written (YYYY-MM-DD).
    pub registered: Option<String>,
    /// One paragraph on the design.
    pub summary: Option<String>,
}

/// Which distribution single-coefficient tests use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Distribution {
    /// Student's t with n − k degrees of freedom (G − 1 when clustered).
    T,
    /// Standard normal.
    Normal,
}

/// `[inference]`.
#[derive(Debug, Clone)]
pub struct InferenceDefaults {
    /// Default significance level (0.05).
    pub alpha: f64,
    /// Default distribution (t).
    pub distribution: Distribution,
    /// Confidence level of intervals (0.95).
    pub confidence: f64,
}

/// File format of a data source.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DataFormat {
    /// Comma-separated text with a header row.
    Csv,
    /// Apache Parquet.
    Parquet,
}

/// The text values read as missing when a table declares no `missing` list.
pub const DEFAULT_MISSING: [&str; 3] = ["", "NA", "."];

/// Separators a table may declare: (value in the plan, byte, how messages show it).
pub const SEPARATORS: [(&str, u8, &str); 4] = [
    (",", b',', "\",\""),
    (";", b';', "\";\""),
    ("\t", b'\t', "\"\\t\" (a tab)"),
    ("|", b'|', "\"|\""),
];

/// The rows a report table's `summary_rows` may add (the report formats each).
pub const SUMMARY_ROWS: [&str; 3] = ["first-stage-strength", "comparison-mean", "take-up-by-arm"];

/// A declared data table.
#[derive(Debug, Clone)]
pub struct DataSource {
    /// Table id.
    pub id: String,
    /// Absolute path.
    pub path: PathBuf,
    /// Path as written in the plan (relative to the plan file).
    pub path_text: String,
    /// Format.
    pub format: DataFormat,
    /// Expected row count bounds.
    pub rows_min: Option<i64>,
    /// Expected row count bounds.
    pub rows_max: Option<i64>,
    /// Unique, non-missing key column.
    pub key: Option<String>,
    /// Row order for lag/diff.
    pub order_by: Option<String>,
    /// Largest acceptable share of rows lost to listwise deletion in any specification.
    pub max_missing_share: Option<f64>,
    /// CSV field separator byte (`,` by default).
    pub separator: u8,
    /// Whether CSV numbers use a decimal comma.
    pub decimal_comma: bool,
    /// Text values read as missing (trimmed, exact match; an empty field is always missing).
    pub missing: Vec<String>,
    /// Declared columns.
    pub columns: BTreeMap<String, Column>,
}

/// Declared kind of a column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColumnKind {
    /// An identifier (unique labels; text or integers).
    Id,
    /// Unordered categories (text or integers).
    Category,
    /// 0/1.
    Binary,
    /// Any real number.
    Number,
    /// Whole numbers.
    Integer,
}

impl ColumnKind {
    /// The plan spelling.
    pub fn name(self) -> &'static str {
        match self {
            ColumnKind::Id => "id",
            ColumnKind::Category => "category",
            ColumnKind::Binary => "binary",
            ColumnKind::Number => "number",
            ColumnKind::Integer => "integer",
        }
    }

    /// Whether values of this kind can enter a regression as numbers.
    pub fn is_numeric(self) -> bool {
        matches!(
            self,
            ColumnKind::Binary | ColumnKind::Number | ColumnKind::Integer
        )
    }

    /// Whether values of this kind can label groups (fixed effects, clusters).
    pub fn is_grouping(self) -> bool {
        matches!(
            self,
            ColumnKind::Id | ColumnKind::Category | ColumnKind::Binary | ColumnKind::Integer
        )
    }
}

/// A declared column.
#[derive(Debug, Clone)]
pub struct Column {
    /// Kind.
    pub kind: ColumnKind,
    /// Smallest plausible value.
    pub min: Option<f64>,
    /// Largest plausible value.
    pub max: Option<f64>,
    /// Unit.
    pub unit: Option<String>,
}

/// A derived variable.
#[derive(Debug, Clone)]
pub struct Derived {
    /// Name.
    pub name: String,
    /// Expression as written.
    pub text: String,
    /// Parsed expression.
    pub expr: Expr,
}

/// `[assignment]`.
#[derive(Debug, Clone)]
pub struct Assignment {
    /// Randomized variable.
    pub variable: String,
    /// Design name as written.
    pub design: String,
    /// Block variable.
    pub blocks: Option<String>,
    /// Cluster variable.
    pub clusters: Option<String>,
}

/// Estimator.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Estimator {
    /// Ordinary least squares.
    Ols,
    /// Two-stage least squares.
    Tsls,
    /// Limited-information maximum likelihood.
    Liml,
    /// Fuller's modified LIML with constant `Spec::fuller_k`.
    Fuller,
}

impl Estimator {
    /// Plan spelling.
    pub fn name(self) -> &'static str {
        match self {
            Estimator::Ols => "ols",
            Estimator::Tsls => "2sls",
            Estimator::Liml => "liml",
            Estimator::Fuller => "fuller",
        }
    }

    /// Whether the estimator uses excluded instruments (2SLS, LIML, Fuller).
    pub fn is_iv(self) -> bool {
        self != Estimator::Ols
    }
}

/// Standard-error choice.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Errors {
    /// Homoskedastic.
    Classical,
    /// White.
    Hc0,
    /// White with n/(n−k).
    Hc1,
    /// Leverage-adjusted.
    Hc2,
    /// Jackknife-like.
    Hc3,
    /// Cluster-robust (CR1) by one variable, or two-way by two.
    Cluster(Vec<String>),
    /// Heteroskedasticity-and-autocorrelation-consistent (Bartlett kernel) over the rows in
    /// the table's `order_by` order.
    Hac {
        /// The table's `order_by` column (its values must not repeat in the rows used).
        order_by: String,
        /// How the bandwidth is set.
        bandwidth: HacBandwidth,
    },
}

/// The bandwidth of HAC errors: lag d gets the Bartlett weight 1 − d/b.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum HacBandwidth {
    /// b stated in the plan (an integer, at least 1).
    Stated(u32),
    /// b chosen from the data by the Newey–West (1994) rule for the Bartlett kernel.
    NeweyWest1994,
}

impl Errors {
    /// Plan spelling of the kind.
    pub fn name(&self) -> &'static str {
        match self {
            Errors::Classical => "classical",
            Errors::Hc0 => "hc0",
            Errors::Hc1 => "hc1",
            Errors::Hc2 => "hc2",
            Errors::Hc3 => "hc3",
            Errors::Cluster(_) => "cluster",
            Errors::Hac { .. } => "hac",
        }
    }

    /// The columns these errors cluster by, in plan order (none unless clustered).
    pub fn cluster_columns(&self) -> &[String] {
        match self {
            Errors::Cluster(by) => by,
            Errors::Classical
            | Errors::Hc0
            | Errors::Hc1
            | Errors::Hc2
            | Errors::Hc3
            | Errors::Hac { .. } => &[],
        }
    }
}

/// A diagnostic a specification asks for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Diagnostic {
    /// First-stage regressions.
    FirstStage,
    /// Reduced-form regression.
    ReducedForm,
    /// Endogeneity tests.
    Endogeneity,
    /// Over-identification tests.
    Overidentification,
    /// Weak-instrument diagnostics (effective F, Cragg–Donald) and Anderson–Rubin inference.
    WeakInstruments,
}

/// A specification.
#[derive(Debug, Clone)]
pub struct Spec {
    /// Id.
    pub id: String,
    /// Title.
    pub title: String,
    /// Data table id.
    pub data: String,
    /// Estimator.
    pub estimator: Estimator,
    /// Outcome.
    pub outcome: String,
    /// Endogenous regressors (2SLS).
    pub endogenous: Vec<String>,
    /// Excluded instruments (2SLS).
    pub instruments: Vec<String>,
    /// Regressors of interest (OLS).
    pub regressors: Vec<String>,
    /// Controls.
    pub controls: Vec<String>,
    /// Absorbed category effects.
    pub fixed_effects: Vec<String>,
    /// Intercept included (absorbed when fixed effects are present).
    pub intercept: bool,
    /// Sample restriction (text, parsed).
    pub sample: Option<(String, Expr)>,
    /// Standard errors.
    pub errors: Errors,
    /// Diagnostics.
    pub diagnostics: Vec<Diagnostic>,
    /// Drop collinear terms (recorded as a deviation) instead of failing.
    pub drop_collinear: bool,
    /// Not pre-registered.
    pub exploratory: bool,
    /// Distribution for single-coefficient tests.
    pub distribution: Distribution,
    /// Confidence level.
    pub confidence: f64,
    /// Fuller's constant (used when the estimator is Fuller).
    pub fuller_k: f64,
    /// Worst-case bias τ for the effective-F critical value.
    pub worst_case_bias: f64,
    /// Probability-weight column (rows scaled by √w; sandwich errors only).
    pub weights: Option<String>,
    /// A row the specification would use but whose weight is missing stops the run (true)
    /// or leaves the sample like any missing value (false, the default).
    pub stop_on_missing_weight: bool,
}

impl Spec {
    /// Terms of interest: endogenous regressors for IV estimators, regressors for OLS.
    pub fn focal(&self) -> &[String] {
        match self.estimator {
            Estimator::Ols => &self.regressors,
            _ => &self.endogenous,
        }
    }
}

/// A decision rule fixed before the data are seen.
#[derive(Debug, Clone)]
pub struct Contingency {
    /// Id.
    pub id: String,
    /// The rule in words.
    pub description: Option<String>,
    /// Specification watched.
    pub specification: String,
    /// What sets it off.
    pub trigger: Trigger,
    /// What happens then.
    pub action: Action,
}

/// A contingency's trigger.
#[derive(Debug, Clone, PartialEq)]
pub enum Trigger {
    /// Effective first-stage F below the threshold.
    WeakInstruments {
        /// Threshold.
        below: f64,
    },
    /// The control-function endogeneity test not rejected at this level.
    Endogeneity {
        /// Level.
        not_rejected_at: f64,
    },
    /// Fewer clusters than this.
    Clusters {
        /// Threshold.
        fewer_than: usize,
    },
}

/// A contingency's action on the hypotheses of its specification.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Action {
    /// Test with the Anderson–Rubin statistic; the interval is the AR set.
    AndersonRubin,
    /// Test with Moreira's conditional LR statistic (homoskedastic); the interval is the
    /// CLR set.
    Clr,
    /// Re-estimate by LIML and test its t-ratio.
    Liml,
    /// Compare the 2SLS t-ratio with the tF critical value.
    Tf,
    /// Report this (OLS) specification as primary for the hypotheses.
    UseSpecification(String),
    /// Test with the restricted wild cluster bootstrap.
    WildBootstrap,
}

impl Action {
    /// Plan spelling.
    pub fn name(&self) -> String {
        match self {
            Action::AndersonRubin => "anderson-rubin".into(),
            Action::Clr => "clr".into(),
            Action::Liml => "liml".into(),
            Action::Tf => "tf".into(),
            Action::UseSpecification(s) => s.clone(),
            Action::WildBootstrap => "wild-bootstrap".into(),
        }
    }
}

/// A hypothesis.
#[derive(Debug, Clone)]
pub struct Hypothesis {
    /// Id.
    pub id: String,
    /// Claim in words.
    pub claim: String,
    /// Specification id.
    pub specification: String,
    /// Term.
    pub term: String,
    /// Direction of the alternative.
    pub direction: Direction,
    /// Null value.
    pub null: f64,
    /// Family name; a hypothesis without one is tested alone, uncorrected.
    pub family: Option<String>,
    /// Level the hypothesis is tested at: its family's, else its own, else the plan's.
    pub alpha: f64,
    /// Inference method.
    pub method: Method,
}

/// A family of hypotheses.
#[derive(Debug, Clone)]
pub struct Family {
    /// Name.
    pub name: String,
    /// Level.
    pub alpha: f64,
    /// Correction.
    pub correction: Correction,
}

impl Family {
    /// Whether the correction needs the joint resampling draws of the family.
    pub fn needs_draws(&self) -> bool {
        self.correction == Correction::RomanoWolf
    }
}

/// A table shell.
#[derive(Debug, Clone)]
pub struct Table {
    /// Id.
    pub id: String,
    /// Caption.
    pub title: String,
    /// Specification ids.
    pub columns: Vec<String>,
    /// Terms.
    pub rows: Vec<String>,
    /// Significance-mark thresholds, largest first (empty: no marks).
    pub stars: Vec<f64>,
    /// Rows added beneath the coefficients (`first-stage-strength`).
    pub summary_rows: Vec<String>,
}
