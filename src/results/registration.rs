//! The registration part of results.json: the registered version, how each plan element
//! stands against it, the ledger moments, the registered version's own results and the
//! rehearsals a run cites.

use super::hypothesis::ContingencyResult;
use super::kinds::{ChangedAfter, ElementStatus, MomentEvent, RecordedAs, RehearsalTiming};
use super::spec::SpecResult;
use serde::Serialize;
use std::collections::BTreeMap;

/// The registered version of the plan (the last seal or amendment before the data were first
/// seen) and how each element of the executed plan stands against it.
#[derive(Debug, Clone, Serialize)]
pub struct Registration {
    /// SHA-256 of the registered version's canonical form.
    pub content_sha256: String,
    /// Its ledger line.
    pub ledger_line: usize,
    /// `sealed` or `amended`: how it was recorded.
    pub recorded_as: RecordedAs,
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
    pub timing: RehearsalTiming,
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
    pub event: MomentEvent,
    /// Its time as recorded (the recording machine's clock).
    pub time: String,
}

/// One element of the plan against the registered version.
#[derive(Debug, Clone, Serialize)]
pub struct ElementRegistration {
    /// `specification[id]`, `hypothesis[id]`, `family.NAME`, `data.ID` or a section.
    pub element: String,
    /// `unchanged`, `changed`, `added` or `removed`.
    pub status: ElementStatus,
    /// Each changed key as `key: old → new` (every key for an added element).
    pub keys: Vec<String>,
    /// `data-inspected` or `results-computed`: the moment the change followed.
    pub after: Option<ChangedAfter>,
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
