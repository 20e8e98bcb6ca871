//! What the ledger says about this run: seal state, plan changes, data changes, and which
//! specifications were registered before the data were first read.

use crate::deviation::{Deviation, Severity};
use crate::ledger::{Entry, Event, Ledger, PlanPrint};
use crate::plan::canonical::changed_keys;
use crate::plan::compare::{element_changes, Kind};
use std::collections::{BTreeMap, BTreeSet};

/// The integrity findings of a run.
pub struct Integrity {
    /// Whether a seal exists.
    pub sealed: bool,
    /// Hash of the ledger line of the seal or amendment this run follows.
    pub ledger_head: Option<String>,
    /// Short state name for results.json.
    pub state: &'static str,
    /// Deviations found.
    pub deviations: Vec<Deviation>,
    /// Specification ids registered before the data were first read (None: no restriction known).
    pub registered_specs: Option<BTreeSet<String>>,
    /// Hypothesis ids registered before the data were first read (None: no restriction known).
    pub registered_hypotheses: Option<BTreeSet<String>>,
}

fn plan_entries(ledger: &Ledger) -> Vec<(usize, &Entry)> {
    ledger
        .entries()
        .enumerate()
        .filter(|(_, e)| matches!(e.event, Event::Sealed | Event::Amended) && e.plan.is_some())
        .collect()
}

/// Assess the ledger (as it stood before this run) against the plan and data fingerprints.
pub fn assess(ledger: &Ledger, print: &PlanPrint, data: &BTreeMap<String, String>) -> Integrity {
    let mut devs = Vec::new();
    let problems = ledger.problems();
    for p in &problems {
        devs.push(Deviation::new(
            "ledger-broken",
            Severity::Integrity,
            "ledger",
            p.clone(),
        ));
    }
    let entries = plan_entries(ledger);
    let sealed = entries.iter().any(|(_, e)| e.event == Event::Sealed);
    let latest = entries.last().map(|(_, e)| *e);
    let matching = entries.iter().rev().find(|(_, e)| {
        e.plan
            .as_ref()
            .is_some_and(|p| p.content_sha256 == print.content_sha256)
    });
    let head_of = |e: &Entry| ledger.index_of(e.seq).and_then(|i| ledger.line_hash(i));
    let ledger_head = matching.or(entries.last()).and_then(|(_, e)| head_of(e));
    let mut state = "sealed-unchanged";
    match (latest, matching) {
        (None, _) => {
            state = "not-sealed";
            devs.push(Deviation::new("unsealed", Severity::Integrity, "plan", "the plan was never sealed: nothing shows it was fixed before the data were seen (run `sworn seal PLAN` before the data arrive)"));
        }
        (Some(last), Some((_, m))) if m.seq == last.seq => {
            if last
                .plan
                .as_ref()
                .is_some_and(|p| p.bytes_sha256 != print.bytes_sha256)
            {
                state = "sealed-cosmetic-change";
                devs.push(Deviation::new("plan-cosmetic-change", Severity::Note, "plan", "the plan file changed since its last ledger entry, but only in comments or layout; its content is unchanged"));
            }
        }
        (Some(last), m) => {
            state = "changed";
            let keys = last
                .plan
                .as_ref()
                .map(|p| changed_keys(&p.canonical, &print.canonical))
                .unwrap_or_default();
            let (code, sev, what) = match m {
                Some(_) => ("plan-not-latest", Severity::Deviation, "the plan matches an earlier ledger entry, not the latest amendment"),
                None => ("plan-changed", Severity::Integrity, "the plan's content changed since its last ledger entry and matches no entry (record changes with `sworn amend PLAN --reason ...`)"),
            };
            devs.push(Deviation::new(
                code,
                sev,
                "plan",
                format!("{what}; changed keys: {}", keys.join(", ")),
            ));
        }
    }
    if !problems.is_empty() {
        state = "ledger-broken";
    }
    data_changes(ledger, data, &mut devs);
    amended_after_data(ledger, print, &mut devs);
    Integrity {
        sealed,
        ledger_head,
        state,
        deviations: devs,
        registered_specs: registered_ids(ledger, "specification"),
        registered_hypotheses: registered_ids(ledger, "hypothesis"),
    }
}

fn data_changes(ledger: &Ledger, data: &BTreeMap<String, String>, devs: &mut Vec<Deviation>) {
    let Some(first) = ledger.entries().find(|e| e.event == Event::DataFirstRead) else {
        return;
    };
    let recorded = first.data.clone().unwrap_or_default();
    for (id, sha) in data {
        match recorded.get(id) {
            Some(r) if r != sha => devs.push(Deviation::new(
                "data-changed",
                Severity::Integrity,
                id.clone(),
                format!(
                    "data file of [data.{id}] changed since it was first read ({} at {}, now {})",
                    short(r),
                    first.time,
                    short(sha)
                ),
            )),
            None => devs.push(Deviation::new(
                "data-added",
                Severity::Deviation,
                id.clone(),
                format!(
                    "[data.{id}] was not among the data first read at {}",
                    first.time
                ),
            )),
            _ => {}
        }
    }
}

/// Every element of the executed plan that differs from the registered version (the last seal
/// or amendment before the data were first read) is a deviation `amended-after-data` naming the
/// element and each changed key old → new. Added specifications and hypotheses have codes of
/// their own (`added-after-data`, `hypothesis-added-after-data`) and are not repeated here.
fn amended_after_data(ledger: &Ledger, print: &PlanPrint, devs: &mut Vec<Deviation>) {
    let Some(first_read) = ledger.entries().find(|e| e.event == Event::DataFirstRead) else {
        return;
    };
    let Some((line, registered)) = ledger
        .entries()
        .enumerate()
        .filter(|(_, e)| {
            e.seq < first_read.seq && matches!(e.event, Event::Sealed | Event::Amended)
        })
        .filter_map(|(i, e)| e.plan.as_ref().map(|p| (i + 1, p)))
        .last()
    else {
        return;
    };
    if registered.content_sha256 == print.content_sha256 {
        return;
    }
    let (Ok(old), Ok(new)) = (
        serde_json::from_str::<serde_json::Value>(&registered.canonical),
        serde_json::from_str::<serde_json::Value>(&print.canonical),
    ) else {
        return;
    };
    for change in element_changes(&old, &new) {
        let covered = change.kind == Kind::Added
            && (change.element.starts_with("specification[")
                || change.element.starts_with("hypothesis["));
        if covered {
            continue;
        }
        let keys = if change.keys.is_empty() || change.kind == Kind::Added {
            String::new()
        } else {
            format!(": {}", change.keys.join("; "))
        };
        devs.push(Deviation::new(
            "amended-after-data",
            Severity::Deviation,
            change.element.clone(),
            format!(
                "{} after the data were first read; the registered version (ledger line {line}, fingerprint {}) differs{keys}",
                change.kind.name(),
                short(&registered.content_sha256)
            ),
        ));
    }
}

fn short(sha: &str) -> String {
    sha.chars().take(12).collect()
}

/// Ids of the `[[table]]` entries named `table` (e.g. "specification", "hypothesis") in the
/// last plan recorded before the data were first read.
fn registered_ids(ledger: &Ledger, table: &str) -> Option<BTreeSet<String>> {
    let first_read = ledger
        .entries()
        .find(|e| e.event == Event::DataFirstRead)?
        .seq;
    let before = ledger
        .entries()
        .filter(|e| e.seq < first_read && matches!(e.event, Event::Sealed | Event::Amended))
        .last()?;
    let canonical: serde_json::Value =
        serde_json::from_str(&before.plan.as_ref()?.canonical).ok()?;
    let items = canonical.get(table).and_then(|v| v.as_array());
    Some(
        items
            .into_iter()
            .flatten()
            .filter_map(|s| s.get("id")?.as_str().map(String::from))
            .collect(),
    )
}
