//! The report's "registered and amended" section: shown when the plan was amended after the
//! data were seen, so the registered analysis is reported beside the executed one. Typed
//! values; the sentences are the `reg_point`, `reg_cell` and `reg_change` macros of
//! `templates/words.j2`.

use super::format::pval;
use super::labels::correction_name;
use crate::results::{
    ChangedAfter, ElementRegistration, ElementStatus, HypothesisRegistration, HypothesisResult,
    Results,
};
use serde::Serialize;

/// The section's content.
#[derive(Debug, Serialize)]
pub struct RegistrationModel {
    /// The registration point and the two moments.
    point: Point,
    /// One row per hypothesis.
    rows: Vec<RegRow>,
    /// Each element changed, added or removed after the data were seen.
    changes: Vec<Change>,
    /// Why the registered version could not be run, when it could not.
    error: Option<String>,
}

/// The registered version and the moments the data were seen and results computed.
#[derive(Debug, Serialize)]
struct Point {
    recorded_as: String,
    ledger_line: usize,
    content_sha256: String,
    /// (ledger line, time); `None` when not recorded.
    data_inspected: Option<(usize, String)>,
    results_computed: Option<(usize, String)>,
}

#[derive(Debug, Serialize)]
struct RegRow {
    id: String,
    registered: Cell,
    amended: Cell,
}

/// One side of a row: a verdict, or why there is none.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
enum Cell {
    Verdict {
        verdict: String,
        adjusted_p: String,
        correction: &'static str,
    },
    AddedAfterData,
    RemovedAfterData,
    TheSame,
}

/// One changed, added or removed element.
#[derive(Debug, Serialize)]
struct Change {
    element: String,
    status: String,
    /// `results_computed`, `data_inspected` or `data_seen`.
    after: &'static str,
    amendment_line: Option<usize>,
    reason: Option<String>,
    /// The changed keys, `None` for an added element.
    keys: Option<Vec<String>>,
}

fn verdict(h: &HypothesisResult) -> Cell {
    Cell::Verdict {
        verdict: h.verdict.to_string(),
        adjusted_p: h.adjusted_p_value.map_or("n/a".to_string(), pval),
        correction: correction_name(h.correction),
    }
}

/// The section, when the run carries the registered version's results.
pub fn build(r: &Results) -> Option<RegistrationModel> {
    let as_registered = r.as_registered.as_ref()?;
    let point = r.registration.as_ref()?;
    let moment =
        |m: &Option<crate::results::Moment>| m.as_ref().map(|m| (m.ledger_line, m.time.clone()));
    Some(RegistrationModel {
        point: Point {
            recorded_as: point.recorded_as.to_string(),
            ledger_line: point.ledger_line,
            content_sha256: point.content_sha256.clone(),
            data_inspected: moment(&point.data_inspected),
            results_computed: moment(&point.results_computed),
        },
        rows: r.hypotheses.iter().map(|(id, h)| reg_row(id, h)).collect(),
        changes: point
            .elements
            .iter()
            .filter(|e| e.status != ElementStatus::Unchanged)
            .map(change)
            .collect(),
        error: as_registered.error.clone(),
    })
}

/// A hypothesis's result as registered beside its result in the executed plan.
fn reg_row(id: &str, h: &HypothesisResult) -> RegRow {
    let (registered, amended) = match h.registration {
        HypothesisRegistration::AddedAfterData => (Cell::AddedAfterData, verdict(h)),
        HypothesisRegistration::RemovedAfterData => (verdict(h), Cell::RemovedAfterData),
        _ => (
            verdict(h),
            h.as_amended.as_deref().map_or(Cell::TheSame, verdict),
        ),
    };
    RegRow {
        id: id.to_string(),
        registered,
        amended,
    }
}

/// One changed, added or removed element: when, by which amendment, and its keys.
fn change(e: &ElementRegistration) -> Change {
    Change {
        element: e.element.clone(),
        status: e.status.to_string(),
        after: match e.after {
            Some(ChangedAfter::ResultsComputed) => "results_computed",
            Some(_) => "data_inspected",
            None => "data_seen",
        },
        amendment_line: e.amendment_line,
        reason: e.reason.clone(),
        keys: (!e.keys.is_empty() && e.status != ElementStatus::Added).then(|| e.keys.clone()),
    }
}
