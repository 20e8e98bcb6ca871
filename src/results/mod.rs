//! The machine-readable results (`results.json`): its model and its digest.
//!
//! Keys are described by the `///` of each field (several objects also in
//! `docs/json-output.md`). Maps are sorted by key and numbers are
//! written in shortest round-trip form, so the same plan and data give byte-identical files.
//! `digest` is `sha256:` + the SHA-256 of the canonical serialisation of everything else.

use crate::deviation::Deviation;
use serde::Serialize;
use std::collections::BTreeMap;

mod digest;
mod hypothesis;
mod kinds;
mod registration;
mod spec;
mod summaries;

pub use digest::{canonical_json, digest_of_text};
pub use hypothesis::*;
pub use kinds::*;
pub use registration::*;
pub use spec::*;
pub use summaries::*;

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
    pub integrity: Integrity,
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
                integrity: Integrity::SealedUnchanged,
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
