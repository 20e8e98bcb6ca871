//! The report's provenance table, its one-line integrity statement and the integrity
//! findings listed under it.

use crate::deviation::DeviationCode;
use crate::results::{ChangedAfter, Integrity, Results};

pub(super) fn provenance(r: &Results) -> Vec<(String, String)> {
    let mut v = vec![
        ("Plan".to_string(), r.plan.path.clone()),
        (
            "Plan content SHA-256".to_string(),
            r.plan.content_sha256.clone(),
        ),
        ("Plan file SHA-256".to_string(), r.plan.bytes_sha256.clone()),
        (
            "Ledger head".to_string(),
            r.plan
                .ledger_head
                .clone()
                .unwrap_or_else(|| "none (no seal)".into()),
        ),
    ];
    for (id, d) in &r.data {
        v.push((
            format!("Data `{id}` ({} rows)", d.rows),
            format!("{} sha256:{}", d.path, d.sha256),
        ));
    }
    v.push((
        "Tool".to_string(),
        format!("{} {}", r.tool.name, r.tool.version),
    ));
    v.push(("Results digest".to_string(), r.digest.clone()));
    v
}

/// The integrity banner: every integrity finding, worst first; the seal state when none.
pub fn integrity_line(r: &Results) -> String {
    let findings = integrity_findings(r);
    if findings.is_empty() {
        return seal_state_line(r);
    }
    format!(
        "NOT AS REGISTERED: {} (see deviations).",
        findings.join("; ")
    )
}

/// Short phrases for the integrity findings of a run, worst first.
/// The integrity findings a report lists, in the order it lists them, each with its phrase.
const FINDINGS: &[(DeviationCode, &str)] = &[
    (
        DeviationCode::LedgerBroken,
        "the ledger's hash chain does not verify",
    ),
    (
        DeviationCode::PlanChanged,
        "the plan changed since its last ledger entry without an amendment",
    ),
    (DeviationCode::DataChanged, "data changed since first read"),
    (DeviationCode::Unsealed, "the plan was never sealed"),
    (
        DeviationCode::RegisteredVersionFailed,
        "the registered version could not be run beside the amended plan",
    ),
    (
        DeviationCode::PlanNotLatest,
        "the plan matches an earlier ledger entry, not the latest",
    ),
    (
        DeviationCode::AmendedAfterData,
        "registered plan amended after the data were read",
    ),
    (
        DeviationCode::AddedAfterData,
        "added after the data were read",
    ),
    (
        DeviationCode::HypothesisAddedAfterData,
        "added after the data were read",
    ),
];

/// One line per kind of integrity finding the run carries, naming its subjects.
pub(super) fn integrity_findings(r: &Results) -> Vec<String> {
    let mut out = Vec::new();
    for (code, phrase) in FINDINGS {
        let subjects: Vec<&str> = r
            .deviations
            .iter()
            .filter(|d| d.code == *code)
            .map(|d| d.subject.as_str())
            .collect();
        if subjects.is_empty() {
            continue;
        }
        out.push(match *code {
            DeviationCode::DataChanged => {
                format!("{phrase} ([data.{}])", subjects.join("], [data."))
            }
            DeviationCode::AmendedAfterData => format!(
                "{}: {} change(s) ({})",
                amended_phrase(r),
                subjects.len(),
                subjects.join(", ")
            ),
            DeviationCode::AddedAfterData => format!(
                "{} specification(s) {phrase}: {}",
                subjects.len(),
                subjects.join(", ")
            ),
            _ => (*phrase).to_string(),
        });
    }
    out
}

/// "registered plan amended after …", naming the later of the two moments any change followed.
pub(super) fn amended_phrase(r: &Results) -> &'static str {
    let after_results = r.registration.as_ref().is_some_and(|p| {
        p.elements
            .iter()
            .any(|e| e.after == Some(ChangedAfter::ResultsComputed))
    });
    if after_results {
        "registered plan amended after results were computed"
    } else {
        "registered plan amended after the data were inspected"
    }
}

pub(super) fn seal_state_line(r: &Results) -> String {
    match r.plan.integrity {
        Integrity::SealedUnchanged => {
            "Sealed and unchanged: the plan matches its last ledger entry.".to_string()
        }
        Integrity::SealedCosmeticChange => {
            "Sealed; changed in comments or layout only since its last ledger entry.".to_string()
        }
        Integrity::Changed => {
            "CHANGED: the plan's content differs from its last ledger entry (see deviations)."
                .to_string()
        }
        Integrity::LedgerBroken => {
            "BROKEN: the ledger's hash chain does not verify (see deviations).".to_string()
        }
        Integrity::NotSealed => "NOT SEALED: there is no ledger seal for this plan.".to_string(),
    }
}
