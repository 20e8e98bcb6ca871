//! The report's "registered and amended" section: shown when the plan was amended after the
//! data were seen, so the registered analysis is reported beside the executed one.

use super::format::pval;
use super::labels::correction_name;
use crate::results::{
    ChangedAfter, ElementRegistration, ElementStatus, HypothesisRegistration, HypothesisResult,
    Results,
};
use serde::Serialize;

/// The section's content, formatted.
#[derive(Debug, Serialize)]
pub struct RegistrationModel {
    /// The registration point and the two moments, in a sentence.
    point: String,
    /// One row per hypothesis.
    rows: Vec<RegRow>,
    /// Each element changed, added or removed after the data were seen.
    changes: Vec<String>,
    /// Why the registered version could not be run, when it could not.
    error: Option<String>,
}

#[derive(Debug, Serialize)]
struct RegRow {
    id: String,
    registered: String,
    amended: String,
}

fn verdict(h: &HypothesisResult) -> String {
    format!(
        "{} (adjusted p {}, {})",
        h.verdict,
        h.adjusted_p_value.map_or("n/a".to_string(), pval),
        correction_name(h.correction)
    )
}

/// The section, when the run carries the registered version's results.
pub fn build(r: &Results) -> Option<RegistrationModel> {
    let as_registered = r.as_registered.as_ref()?;
    let point = r.registration.as_ref()?;
    let moment = |m: &Option<crate::results::Moment>| {
        m.as_ref().map_or("not recorded".to_string(), |m| {
            format!("ledger line {} ({})", m.ledger_line, m.time)
        })
    };
    Some(RegistrationModel {
        point: format!(
            "The registered version is the plan {} at ledger line {} (content sha256:{}). The data were first seen at {}; results were first computed at {}. Each registered hypothesis is reported as registered (its family corrected as registered), with the amended plan's result beside it; hypotheses added after the data are not pre-registered and never enter a registered family's correction.",
            point.recorded_as,
            point.ledger_line,
            point.content_sha256,
            moment(&point.data_inspected),
            moment(&point.results_computed)
        ),
        rows: r.hypotheses.iter().map(|(id, h)| reg_row(id, h)).collect(),
        changes: point
            .elements
            .iter()
            .filter(|e| e.status != ElementStatus::Unchanged)
            .map(change_line)
            .collect(),
        error: as_registered.error.clone(),
    })
}

/// A hypothesis's result as registered beside its result in the executed plan.
fn reg_row(id: &str, h: &HypothesisResult) -> RegRow {
    let (registered, amended) = match h.registration {
        HypothesisRegistration::AddedAfterData => (
            "none: added after the data were seen".to_string(),
            verdict(h),
        ),
        HypothesisRegistration::RemovedAfterData => (
            verdict(h),
            "none: removed after the data were seen".to_string(),
        ),
        _ => (
            verdict(h),
            h.as_amended
                .as_deref()
                .map_or("the same".to_string(), verdict),
        ),
    };
    RegRow {
        id: id.to_string(),
        registered,
        amended,
    }
}

/// One changed, added or removed element: when, by which amendment, and its keys.
fn change_line(e: &ElementRegistration) -> String {
    let when = match e.after {
        Some(ChangedAfter::ResultsComputed) => "after results were computed",
        Some(_) => "after the data were inspected",
        None => "after the data were seen",
    };
    let by = match (e.amendment_line, &e.reason) {
        (Some(n), Some(why)) => format!("amendment at ledger line {n}, reason: {why}"),
        (Some(n), None) => format!("amendment at ledger line {n}"),
        (None, _) => "no amendment records it".to_string(),
    };
    let keys = if e.keys.is_empty() || e.status == ElementStatus::Added {
        String::new()
    } else {
        format!(": {}", e.keys.join("; "))
    };
    format!("{} {} {when} ({by}){keys}", e.element, e.status)
}
