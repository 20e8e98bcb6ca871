//! The plan as written: plain serde structs mirroring the TOML, unknown keys rejected.
//!
//! Every name-bearing value is wrapped in [`Spanned`] so that validation can point at the
//! exact line and column. No logic lives here, apart from reading an `errors` value into its
//! typed form ([`errors`]); [`super::validate`] turns a [`RawPlan`] into a checked
//! [`super::Plan`].

mod errors;

pub use errors::RawErrors;

use serde::{Deserialize, Deserializer};
use std::collections::BTreeMap;
use toml::Spanned;

/// The whole plan file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawPlan {
    /// Plan format version; must be 1.
    pub format: Spanned<i64>,
    /// Study metadata.
    pub study: Spanned<RawStudy>,
    /// Plan-wide inference defaults.
    #[serde(default)]
    pub inference: RawInference,
    /// Data sources keyed by id.
    #[serde(default)]
    pub data: BTreeMap<Spanned<String>, Spanned<RawData>>,
    /// Derived variables in document order.
    #[serde(default, deserialize_with = "ordered_pairs")]
    pub derive: Vec<SpannedPair>,
    /// How the instrument was randomized.
    pub assignment: Option<Spanned<RawAssignment>>,
    /// The specifications, in document order.
    #[serde(default, rename = "specification")]
    pub specifications: Vec<Spanned<RawSpec>>,
    /// The hypotheses, in document order.
    #[serde(default, rename = "hypothesis")]
    pub hypotheses: Vec<Spanned<RawHypothesis>>,
    /// Families of hypotheses keyed by name.
    #[serde(default)]
    pub family: BTreeMap<Spanned<String>, Spanned<RawFamily>>,
    /// Decision rules fixed before the data are seen, in document order.
    #[serde(default, rename = "contingency")]
    pub contingencies: Vec<Spanned<RawContingency>>,
    /// Table shells.
    #[serde(default, rename = "table")]
    pub tables: Vec<Spanned<RawTable>>,
    /// Resampling settings (randomization inference, wild bootstrap, Romano–Wolf).
    pub resampling: Option<Spanned<RawResampling>>,
    /// Summary indices, in document order.
    #[serde(default, rename = "index")]
    pub indices: Vec<Spanned<RawIndex>>,
    /// Balance table of baseline covariates.
    pub balance: Option<Spanned<RawBalance>>,
    /// Attrition checks and bounds.
    pub attrition: Option<Spanned<RawAttrition>>,
    /// Simulated data for `sworn rehearse` (power, minimum detectable effects).
    pub rehearsal: Option<Spanned<RawRehearsal>>,
}

/// `[rehearsal]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRehearsal {
    /// Simulated data sets per effect size (default 500).
    pub replications: Option<Spanned<i64>>,
    /// Seed of every simulated data set.
    pub seed: Spanned<i64>,
    /// Power at which the minimum detectable effect is read (default 0.80).
    pub target_power: Option<Spanned<f64>>,
    /// Values of `effect` to simulate (0 is always added).
    pub effects: Spanned<Vec<Spanned<f64>>>,
    /// Draws of each resampled test in a rehearsal (default: `[resampling].draws`).
    pub resampling_draws: Option<Spanned<i64>>,
    /// Bisection steps of the search for the minimum detectable effect (default 4).
    pub mde_steps: Option<Spanned<i64>>,
    /// A data-generating process per data table, keyed by table id.
    pub data: BTreeMap<Spanned<String>, Spanned<RawGenerator>>,
}

/// `[rehearsal.data.NAME]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawGenerator {
    /// Rows of each simulated table (none when `baseline` names a file).
    #[serde(default)]
    pub rows: Option<Spanned<i64>>,
    /// A baseline file whose rows the simulated table keeps (relative to the plan file).
    #[serde(default)]
    pub baseline: Option<Spanned<String>>,
    /// Column = expression (with random draws), in document order.
    #[serde(deserialize_with = "ordered_pairs")]
    pub columns: Vec<SpannedPair>,
    /// Unobserved variables = expression: simulated and usable by columns, never in the table.
    #[serde(default, deserialize_with = "ordered_pairs")]
    pub latent: Vec<SpannedPair>,
}

/// `[[index]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawIndex {
    /// Name of the index variable.
    pub id: Spanned<String>,
    /// Data table (optional with one table).
    pub data: Option<Spanned<String>>,
    /// "anderson" | "mean-z".
    pub method: Spanned<String>,
    /// Components; a leading "-" flips the direction.
    pub components: Vec<Spanned<String>>,
    /// Expression selecting the reference group.
    pub reference: Spanned<String>,
    /// Missing components: "available" (average the observed ones, default) | "complete"
    /// (a row missing any component has no index).
    pub missing: Option<Spanned<String>>,
}

/// `[balance]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawBalance {
    /// Data table (optional with one table).
    pub data: Option<Spanned<String>>,
    /// Binary arm indicator.
    pub by: Spanned<String>,
    /// Baseline covariates.
    pub covariates: Vec<Spanned<String>>,
    /// Standard errors.
    pub errors: Option<Spanned<RawErrors>>,
    /// Probability weights (a numeric column of the table).
    pub weights: Option<Spanned<String>>,
}

/// `[attrition]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawAttrition {
    /// Data table (optional with one table).
    pub data: Option<Spanned<String>>,
    /// Binary arm indicator.
    pub by: Spanned<String>,
    /// Expression: non-zero when the unit's outcome was observed.
    pub observed: Spanned<String>,
    /// Outcomes to bound (Lee 2009).
    #[serde(default)]
    pub bounds: Vec<Spanned<String>>,
    /// Standard errors of the differential-attrition test.
    pub errors: Option<Spanned<RawErrors>>,
    /// Probability weights of the differential-attrition test (a numeric column).
    pub weights: Option<Spanned<String>>,
}

/// `[resampling]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawResampling {
    /// Random draws when exact enumeration is too large.
    pub draws: Option<Spanned<i64>>,
    /// Seed of every resampled p-value.
    pub seed: Spanned<i64>,
    /// Enumerate all assignments / sign vectors when there are fewer than this.
    pub exact_below: Option<Spanned<i64>>,
}

/// `[study]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawStudy {
    /// Title of the study (required).
    pub title: String,
    /// Registry identifier, free text.
    pub id: Option<String>,
    /// Authors.
    #[serde(default)]
    pub authors: Vec<String>,
    /// Registration date.
    pub registered: Option<toml::value::Datetime>,
    /// One paragraph on the design.
    pub summary: Option<String>,
}

/// `[inference]` defaults.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawInference {
    /// Default significance level.
    pub alpha: Option<Spanned<f64>>,
    /// "t" or "normal".
    pub distribution: Option<Spanned<String>>,
    /// Confidence level of intervals.
    pub confidence: Option<Spanned<f64>>,
}

/// `[data.NAME]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawData {
    /// Path relative to the plan file.
    pub path: Spanned<String>,
    /// "csv" or "parquet".
    pub format: Option<Spanned<String>>,
    /// Expected row count.
    pub rows: Option<Spanned<RawRange>>,
    /// Unique, non-missing key column.
    pub key: Option<Spanned<String>>,
    /// Row order for lag/diff.
    pub order_by: Option<Spanned<String>>,
    /// Largest acceptable share of rows lost to listwise deletion.
    pub max_missing_share: Option<Spanned<f64>>,
    /// CSV field separator: `","` (default), `";"`, a tab or `"|"`.
    pub separator: Option<Spanned<String>>,
    /// CSV decimal mark: `"."` (default) or `","`.
    pub decimal: Option<Spanned<String>>,
    /// The text values that mean missing (default: `""`, `"NA"`, `"."`).
    pub missing: Option<Spanned<Vec<String>>>,
    /// Declared schema.
    #[serde(default)]
    pub columns: BTreeMap<Spanned<String>, Spanned<RawColumn>>,
}

/// `{ min = .., max = .. }` for row counts.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRange {
    /// Smallest acceptable value.
    pub min: Option<i64>,
    /// Largest acceptable value.
    pub max: Option<i64>,
}

/// A declared column.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawColumn {
    /// "id" | "category" | "binary" | "number" | "integer".
    pub kind: Spanned<String>,
    /// Smallest plausible value.
    pub min: Option<f64>,
    /// Largest plausible value.
    pub max: Option<f64>,
    /// Unit, for the report.
    pub unit: Option<String>,
}

/// `[assignment]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawAssignment {
    /// The randomized variable.
    pub variable: Spanned<String>,
    /// "complete" | "blocked" | "clustered" | "blocked-clustered".
    pub design: Spanned<String>,
    /// Block variable.
    pub blocks: Option<Spanned<String>>,
    /// Cluster variable.
    pub clusters: Option<Spanned<String>>,
}

/// `[[specification]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSpec {
    /// Unique id.
    pub id: Spanned<String>,
    /// Human title.
    pub title: Option<String>,
    /// Data table id.
    pub data: Option<Spanned<String>>,
    /// "ols" | "2sls" | "liml" | "fuller".
    pub estimator: Spanned<String>,
    /// Fuller's constant (estimator = "fuller"; default 1).
    pub fuller_k: Option<Spanned<f64>>,
    /// Worst-case bias for the effective-F critical value (default 0.10).
    pub worst_case_bias: Option<Spanned<f64>>,
    /// Dependent variable.
    pub outcome: Spanned<String>,
    /// Endogenous regressors (2SLS).
    #[serde(default)]
    pub endogenous: Vec<Spanned<String>>,
    /// Excluded instruments (2SLS).
    #[serde(default)]
    pub instruments: Vec<Spanned<String>>,
    /// Regressors of interest (OLS).
    #[serde(default)]
    pub regressors: Vec<Spanned<String>>,
    /// Included exogenous controls.
    #[serde(default)]
    pub controls: Vec<Spanned<String>>,
    /// Absorbed category effects.
    #[serde(default)]
    pub fixed_effects: Vec<Spanned<String>>,
    /// Include an intercept.
    pub intercept: Option<bool>,
    /// Sample restriction.
    pub sample: Option<Spanned<String>>,
    /// Standard-error choice: `"hc1"` or `{ kind = "cluster", by = "block" }`.
    pub errors: Option<Spanned<RawErrors>>,
    /// Diagnostics to compute.
    #[serde(default)]
    pub diagnostics: Vec<Spanned<String>>,
    /// "error" | "drop".
    pub on_collinear: Option<Spanned<String>>,
    /// Reported apart as not pre-registered.
    #[serde(default)]
    pub exploratory: bool,
    /// Per-specification override of the plan-wide distribution.
    pub distribution: Option<Spanned<String>>,
    /// Per-specification override of the confidence level.
    pub confidence: Option<Spanned<f64>>,
    /// Probability weights: a numeric column declared in the table's schema.
    pub weights: Option<Spanned<String>>,
    /// A used row without a weight: "leave-out" (default) | "stop".
    pub on_missing_weight: Option<Spanned<String>>,
}

/// `[[contingency]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawContingency {
    /// Unique id.
    pub id: Spanned<String>,
    /// The rule in words, for the report.
    pub description: Option<String>,
    /// Specification the rule watches.
    pub specification: Spanned<String>,
    /// Trigger: a table with exactly one of `weak_instruments`, `endogeneity`, `clusters`.
    pub when: Spanned<toml::Value>,
    /// Action: an inference method or a specification id.
    pub then: Spanned<String>,
}

/// `[[hypothesis]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawHypothesis {
    /// Unique id.
    pub id: Spanned<String>,
    /// The claim in words.
    pub claim: Option<String>,
    /// Specification id.
    pub specification: Spanned<String>,
    /// Term tested.
    pub term: Spanned<String>,
    /// "two-sided" | "greater" | "less".
    pub direction: Option<Spanned<String>>,
    /// Value under the null.
    pub null: Option<f64>,
    /// Family name.
    pub family: Option<Spanned<String>>,
    /// Significance level when the hypothesis has no family.
    pub alpha: Option<Spanned<f64>>,
    /// "model" | "randomization" | "wild-bootstrap".
    pub inference: Option<Spanned<String>>,
    /// Randomization statistic: "t" | "estimate".
    pub statistic: Option<Spanned<String>>,
    /// Wild-bootstrap weights: "rademacher" | "webb".
    pub weights: Option<Spanned<String>>,
}

/// `[family.NAME]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawFamily {
    /// Family-wise level.
    pub alpha: Option<Spanned<f64>>,
    /// Correction method.
    pub correction: Option<Spanned<String>>,
}

/// `[[table]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTable {
    /// Unique id.
    pub id: Spanned<String>,
    /// Caption.
    pub title: Option<String>,
    /// Specification ids, left to right.
    pub columns: Vec<Spanned<String>>,
    /// Terms, top to bottom.
    pub rows: Vec<Spanned<String>>,
    /// Significance marks: the p-value thresholds, one mark per threshold a coefficient's
    /// p-value falls below (default: no marks). `false` means none; `true` is refused because
    /// it states no thresholds.
    pub stars: Option<Spanned<toml::Value>>,
    /// Rows added beneath the coefficients: `first-stage-strength` (default none).
    #[serde(default)]
    pub summary_rows: Vec<Spanned<String>>,
}

/// A `name = "text"` entry with both spans kept.
pub type SpannedPair = (Spanned<String>, Spanned<String>);

/// Deserialize a TOML table into its entries in document order.
fn ordered_pairs<'de, D>(d: D) -> Result<Vec<SpannedPair>, D::Error>
where
    D: Deserializer<'de>,
{
    struct Pairs;
    impl<'de> serde::de::Visitor<'de> for Pairs {
        type Value = Vec<SpannedPair>;
        fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
            f.write_str("a table of name = \"expression\" entries")
        }
        fn visit_map<A: serde::de::MapAccess<'de>>(
            self,
            mut map: A,
        ) -> Result<Self::Value, A::Error> {
            let mut out = Vec::new();
            while let Some(entry) = map.next_entry()? {
                out.push(entry);
            }
            Ok(out)
        }
    }
    d.deserialize_map(Pairs)
}
