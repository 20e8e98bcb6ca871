//! Deviations: every way the executed analysis differs from the registered one.
//!
//! A deviation has a stable `code` (scripts key on it), a severity and a message that says
//! what happened in words. `note`s are shown but are not deviations; `deviation`s must be
//! disclosed; `integrity` marks seal, ledger or fingerprint failures. Every code is a
//! [`DeviationCode`] variant, which fixes its spelling, its severity and its one-line
//! description; `docs/json-output.md` lists them all (a test below keeps the two in step).

use serde::Serialize;

/// How serious a deviation is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Severity {
    /// Shown, not a deviation.
    Note,
    /// Must be disclosed.
    Deviation,
    /// Seal, ledger or data fingerprint failure.
    Integrity,
}

impl Severity {
    /// The spelling used in outputs.
    pub fn name(self) -> &'static str {
        match self {
            Severity::Note => "note",
            Severity::Deviation => "deviation",
            Severity::Integrity => "integrity",
        }
    }
}

/// Declares [`DeviationCode`] from one table: variant, stable spelling, severity, description.
///
/// One table keeps the spelling that scripts key on (and serde writes), the severity and the
/// one-line documentation together, so none can be added without the others.
macro_rules! deviation_codes {
    ($($variant:ident = $spelling:literal, $severity:ident, $description:literal;)+) => {
        /// Every kind of deviation or note a check, run or verification can record.
        ///
        /// Each code has one fixed severity; its spelling is stable (results.json and `--json`
        /// carry it) and is listed with its description in `docs/json-output.md`.
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
        pub enum DeviationCode {
            $(
                #[doc = $description]
                #[serde(rename = $spelling)]
                $variant,
            )+
        }

        impl DeviationCode {
            /// Every code, in declaration order.
            pub const ALL: &'static [DeviationCode] = &[$(DeviationCode::$variant),+];

            /// The stable spelling used in outputs, e.g. `rows-out-of-range`.
            pub fn as_str(self) -> &'static str {
                match self {
                    $(DeviationCode::$variant => $spelling,)+
                }
            }

            /// The severity every deviation of this code carries.
            pub fn severity(self) -> Severity {
                match self {
                    $(DeviationCode::$variant => Severity::$severity,)+
                }
            }

            /// One line saying what the code means.
            pub fn description(self) -> &'static str {
                match self {
                    $(DeviationCode::$variant => $description,)+
                }
            }
        }
    };
}

deviation_codes! {
    // Plan, ledger and data fingerprints (src/analysis/integrity.rs, src/analysis/mod.rs).
    LedgerBroken = "ledger-broken", Integrity,
        "The ledger's hash chain does not verify.";
    Unsealed = "unsealed", Integrity,
        "The plan was never sealed, so nothing shows it was fixed before the data were seen.";
    PlanChanged = "plan-changed", Integrity,
        "The plan's content changed since its last ledger entry and matches no entry.";
    PlanNotLatest = "plan-not-latest", Deviation,
        "The plan matches an earlier ledger entry, not the latest amendment.";
    PlanCosmeticChange = "plan-cosmetic-change", Note,
        "The plan file changed only in comments or layout; its content is unchanged.";
    DataChanged = "data-changed", Integrity,
        "A data file's fingerprint differs from the one recorded when the data were first seen.";
    DataAdded = "data-added", Deviation,
        "A data table was not among the data first seen (read or inspected).";
    AmendedAfterData = "amended-after-data", Deviation,
        "A plan element was amended after the data were first read.";
    RegisteredVersionFailed = "registered-version-failed", Integrity,
        "The registered version of an amended plan could not be run beside it.";
    AddedAfterData = "added-after-data", Deviation,
        "A specification was added by an amendment after the data were first read.";
    HypothesisAddedAfterData = "hypothesis-added-after-data", Deviation,
        "A hypothesis was added by an amendment after the data were first read.";
    Exploratory = "exploratory", Note,
        "A specification is marked exploratory in the plan: reported apart, not pre-registered.";
    // Declared schema (src/data/read.rs).
    ColumnMissing = "column-missing", Deviation,
        "A declared column is absent from its data table.";
    ColumnKind = "column-kind", Deviation,
        "A column's values do not fit its declared kind.";
    ValueOutOfRange = "value-out-of-range", Deviation,
        "Values of a column lie outside its declared min/max range.";
    RowsOutOfRange = "rows-out-of-range", Deviation,
        "A data table's row count is outside its declared rows range.";
    KeyMissing = "key-missing", Deviation,
        "The declared key column has missing values.";
    KeyDuplicate = "key-duplicate", Deviation,
        "The declared key column has duplicate values.";
    // Samples and fits (src/analysis/mod.rs, src/analysis/spec/).
    MissingShare = "missing-share", Deviation,
        "Listwise deletion dropped a larger share of a sample than max_missing_share allows.";
    OutcomeDegenerate = "outcome-degenerate", Deviation,
        "The outcome is constant or fitted exactly: estimates are kept, its tests and p-values withheld.";
    CollinearDropped = "collinear-dropped", Deviation,
        "A regressor was dropped because it is collinear with the others.";
    SingletonsDropped = "singletons-dropped", Note,
        "Observations alone in their fixed-effect group were dropped.";
    LpmClassicalErrors = "lpm-classical-errors", Note,
        "A binary outcome is fitted with classical standard errors; robust ones are recommended.";
    // Assignment design (src/analysis/assignment.rs).
    AssignmentVariesInCluster = "assignment-varies-in-cluster", Deviation,
        "The treatment varies within a cluster of a clustered design.";
    AssignmentClusterSpansBlocks = "assignment-cluster-spans-blocks", Deviation,
        "A cluster appears in more than one block of a blocked-clustered design.";
}

impl std::fmt::Display for DeviationCode {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// One departure from the plan, or a note about the run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Deviation {
    /// Stable machine-readable code, e.g. `rows-out-of-range`.
    pub code: DeviationCode,
    /// Severity: always `code.severity()`.
    pub severity: Severity,
    /// What it concerns: a data table, column, specification or the plan.
    pub subject: String,
    /// What happened, in words.
    pub message: String,
}

impl Deviation {
    /// A deviation of the given code, carrying that code's severity.
    pub fn new(
        code: DeviationCode,
        subject: impl Into<String>,
        message: impl Into<String>,
    ) -> Self {
        Deviation {
            code,
            severity: code.severity(),
            subject: subject.into(),
            message: message.into(),
        }
    }
}

/// Sort deviations for output: integrity first, then deviations, then notes; stable within.
pub fn sort(devs: &mut [Deviation]) {
    devs.sort_by_key(|d| std::cmp::Reverse(d.severity));
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeSet;

    /// The documentation that lists every code, read at compile time so it cannot drift.
    const DOC: &str = include_str!("../docs/json-output.md");
    /// The heading of the table of codes in [`DOC`].
    const HEADING: &str = "## Deviation codes";

    /// Rows `(code, severity, description)` of the table under [`HEADING`].
    fn documented() -> Vec<(String, String, String)> {
        let start = DOC
            .find(HEADING)
            .expect("docs/json-output.md has a `## Deviation codes` section");
        let section = &DOC[start + HEADING.len()..];
        let section = &section[..section.find("\n## ").unwrap_or(section.len())];
        let unquote = |c: &str| c.trim().trim_matches('`').to_string();
        section
            .lines()
            .filter(|l| l.starts_with("| `"))
            .map(|l| {
                let cells: Vec<&str> = l.trim_matches('|').split(" | ").collect();
                assert_eq!(cells.len(), 3, "a row of three cells: {l}");
                (
                    unquote(cells[0]),
                    unquote(cells[1]),
                    cells[2].trim().to_string(),
                )
            })
            .collect()
    }

    #[test]
    fn docs_list_every_code_and_nothing_else() {
        let rows = documented();
        let in_docs: BTreeSet<&str> = rows.iter().map(|r| r.0.as_str()).collect();
        assert_eq!(in_docs.len(), rows.len(), "a code is listed twice");
        let in_code: BTreeSet<&str> = DeviationCode::ALL.iter().map(|c| c.as_str()).collect();
        let undocumented: Vec<_> = in_code.difference(&in_docs).collect();
        let unknown: Vec<_> = in_docs.difference(&in_code).collect();
        assert!(
            undocumented.is_empty(),
            "codes missing from docs/json-output.md: {undocumented:?}"
        );
        assert!(
            unknown.is_empty(),
            "docs/json-output.md lists codes that do not exist: {unknown:?}"
        );
    }

    #[test]
    fn docs_give_each_code_its_severity_and_description() {
        for (code, severity, description) in documented() {
            let c = DeviationCode::ALL
                .iter()
                .find(|c| c.as_str() == code)
                .expect("checked by docs_list_every_code_and_nothing_else");
            assert_eq!(severity, c.severity().name(), "severity of `{code}`");
            assert_eq!(description, c.description(), "description of `{code}`");
        }
    }

    #[test]
    fn serde_writes_the_stable_spelling() {
        for c in DeviationCode::ALL {
            let written = serde_json::to_value(c).expect("a code serializes");
            assert_eq!(written, serde_json::Value::from(c.as_str()));
            assert_eq!(c.to_string(), c.as_str());
        }
    }

    #[test]
    fn spellings_are_unique_kebab_case() {
        let mut seen = BTreeSet::new();
        for c in DeviationCode::ALL {
            let s = c.as_str();
            assert!(seen.insert(s), "`{s}` spelled twice");
            assert!(
                !s.is_empty()
                    && !s.starts_with('-')
                    && !s.ends_with('-')
                    && !s.contains("--")
                    && s.chars().all(|ch| ch.is_ascii_lowercase() || ch == '-'),
                "`{s}` is not kebab-case"
            );
        }
    }

    #[test]
    fn a_deviation_carries_its_codes_severity() {
        let d = Deviation::new(DeviationCode::PlanChanged, "plan", "m");
        assert_eq!(d.severity, Severity::Integrity);
        let d = Deviation::new(DeviationCode::SingletonsDropped, "s", "m");
        assert_eq!(d.severity, Severity::Note);
    }
}
