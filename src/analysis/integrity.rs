//! What the ledger says about this run: seal state, plan changes, data changes, the
//! registered version (the plan in force when the data were first seen; see
//! [`crate::ledger::Moment`]) and every element of the executed plan classified against it.

use crate::deviation::{Deviation, DeviationCode};
use crate::ledger::{Entry, Event, Ledger, Line, PlanPrint};
use crate::plan::canonical::changed_keys;
use crate::plan::compare::{element_changes, element_names, Change, Kind};
use crate::results::{ElementRegistration, Moment, MomentEvent, RecordedAs, Registration};
use serde_json::Value as Json;
use std::collections::{BTreeMap, BTreeSet};

/// The integrity findings of a run.
pub struct Integrity {
    /// Whether a seal exists.
    pub sealed: bool,
    /// Hash of the ledger line of the seal or amendment this run follows.
    pub ledger_head: Option<String>,
    /// Short state name for results.json.
    pub state: crate::results::Integrity,
    /// Deviations found.
    pub deviations: Vec<Deviation>,
    /// Specification ids registered before the data were first read (None: no restriction known).
    pub registered_specs: Option<BTreeSet<String>>,
    /// Hypothesis ids registered before the data were first read (None: no restriction known).
    pub registered_hypotheses: Option<BTreeSet<String>>,
    /// The registration point and each element against it (None: no registered version).
    pub registration: Option<Registration>,
    /// The registered version's canonical text, when the executed plan's content differs
    /// from it (the registered analysis is then run beside the executed one).
    pub registered_text: Option<String>,
}

/// The ledger's plan versions (seals and amendments carrying a plan), with their indices.
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
            DeviationCode::LedgerBroken,
            "ledger",
            p.clone(),
        ));
    }
    let entries = plan_entries(ledger);
    let sealed = entries.iter().any(|(_, e)| e.event == Event::Sealed);
    let matching = entries.iter().rev().find(|(_, e)| {
        e.plan
            .as_ref()
            .is_some_and(|p| p.content_sha256 == print.content_sha256)
    });
    let head_of = |e: &Entry| ledger.index_of(e.seq).and_then(|i| ledger.line_hash(i));
    let ledger_head = matching.or(entries.last()).and_then(|(_, e)| head_of(e));
    let latest = entries.last().map(|(_, e)| *e);
    let mut state = plan_state(latest, matching.map(|(_, e)| *e), print, &mut devs);
    if !problems.is_empty() {
        state = crate::results::Integrity::LedgerBroken;
    }
    data_changes(ledger, data, &mut devs);
    let registration = registration(ledger, print, &mut devs);
    let registered_text = ledger
        .registered()
        .and_then(|l| l.entry.plan.as_ref())
        .filter(|p| p.content_sha256 != print.content_sha256 && !p.canonical.is_empty())
        .map(|p| p.canonical.clone());
    Integrity {
        sealed,
        ledger_head,
        state,
        deviations: devs,
        registered_specs: registered_ids(ledger, "specification"),
        registered_hypotheses: registered_ids(ledger, "hypothesis"),
        registration,
        registered_text,
    }
}

/// The plan's state against its last ledger version (`latest`) and the last version with
/// the same content (`matching`): not sealed, unchanged, changed only in layout, or
/// changed; every state but unchanged adds its deviation to `devs`.
fn plan_state(
    latest: Option<&Entry>,
    matching: Option<&Entry>,
    print: &PlanPrint,
    devs: &mut Vec<Deviation>,
) -> crate::results::Integrity {
    use crate::results::Integrity as State;
    match (latest, matching) {
        (None, _) => {
            devs.push(Deviation::new(DeviationCode::Unsealed, "plan", "the plan was never sealed: nothing shows it was fixed before the data were seen (run `sworn seal PLAN` before the data arrive)"));
            State::NotSealed
        }
        (Some(last), Some(m)) if m.seq == last.seq => {
            if last
                .plan
                .as_ref()
                .is_some_and(|p| p.bytes_sha256 != print.bytes_sha256)
            {
                devs.push(Deviation::new(DeviationCode::PlanCosmeticChange, "plan", "the plan file changed since its last ledger entry, but only in comments or layout; its content is unchanged"));
                State::SealedCosmeticChange
            } else {
                State::SealedUnchanged
            }
        }
        (Some(last), m) => {
            let keys = last
                .plan
                .as_ref()
                .map(|p| changed_keys(&p.canonical, &print.canonical))
                .unwrap_or_default();
            let (code, what) = match m {
                Some(_) => (DeviationCode::PlanNotLatest, "the plan matches an earlier ledger entry, not the latest amendment"),
                None => (DeviationCode::PlanChanged, "the plan's content changed since its last ledger entry and matches no entry (record changes with `sworn amend PLAN --reason ...`)"),
            };
            devs.push(Deviation::new(
                code,
                "plan",
                format!("{what}; changed keys: {}", keys.join(", ")),
            ));
            State::Changed
        }
    }
}

/// Each declared table whose data changed since the data were first inspected or read, or
/// that was not among them, as a deviation.
fn data_changes(ledger: &Ledger, data: &BTreeMap<String, String>, devs: &mut Vec<Deviation>) {
    let Some(Line { entry: first, .. }) = ledger.first_data() else {
        return;
    };
    let seen = match first.event {
        Event::DataInspected => "first inspected",
        _ => "first read",
    };
    let recorded = first.data.clone().unwrap_or_default();
    for (id, sha) in data {
        match recorded.get(id) {
            Some(r) if r != sha => devs.push(Deviation::new(
                DeviationCode::DataChanged,
                id.clone(),
                format!(
                    "data file of [data.{id}] changed since it was {seen} ({} at {}, now {})",
                    short(r),
                    first.time,
                    short(sha)
                ),
            )),
            None => devs.push(Deviation::new(
                DeviationCode::DataAdded,
                id.clone(),
                format!(
                    "[data.{id}] was not among the data {seen} at {}",
                    first.time
                ),
            )),
            _ => {}
        }
    }
}

/// The registration point and every element of the executed plan against it. Each element
/// that differs is a deviation `amended-after-data` naming the element, each changed key
/// old → new, the moment the change followed and the amendment (with its reason) that made
/// it. Added specifications and hypotheses have codes of their own (`added-after-data`,
/// `hypothesis-added-after-data`) and are not repeated here.
fn registration(
    ledger: &Ledger,
    print: &PlanPrint,
    devs: &mut Vec<Deviation>,
) -> Option<Registration> {
    let registered = ledger.registered()?;
    let reg_print = registered.entry.plan.as_ref()?;
    let parse = |c: &str| serde_json::from_str::<Json>(c).ok();
    let mut out = registration_point(ledger, registered, reg_print);
    let (Some(old), Some(new)) = (parse(&reg_print.canonical), parse(&print.canonical)) else {
        // A version written before the ledger kept content: nothing to compare element-wise.
        return Some(out);
    };
    let later: Vec<(Line, Json)> = ledger
        .versions()
        .filter(|l| l.entry.seq > registered.entry.seq)
        .filter_map(|l| Some((l, parse(&l.entry.plan.as_ref()?.canonical)?)))
        .collect();
    let changes = element_changes(&old, &new);
    let mut names = element_names(&old);
    for n in element_names(&new) {
        if !names.contains(&n) {
            names.push(n);
        }
    }
    for name in names {
        let Some(change) = changes.iter().find(|c| c.element == name) else {
            out.elements.push(ElementRegistration {
                element: name,
                status: crate::results::ElementStatus::Unchanged,
                keys: Vec::new(),
                after: None,
                amendment_line: None,
                reason: None,
            });
            continue;
        };
        let made_by = first_amendment(&old, &later, &name);
        let after = made_by
            .and_then(|l| ledger.moment_of(l.entry))
            .or(ledger.current_moment());
        let element = ElementRegistration {
            element: name,
            status: change.kind.into(),
            keys: change.keys.clone(),
            after: after.map(Into::into),
            amendment_line: made_by.map(|l| l.number),
            reason: made_by.and_then(|l| l.entry.reason.clone()),
        };
        if let Some(d) = amended_deviation(change, &element, after, registered, reg_print) {
            devs.push(d);
        }
        out.elements.push(element);
    }
    Some(out)
}

/// The registration point: the registered version's fingerprint, its ledger line, how it
/// was recorded, and the two moments (data inspected, results computed); no elements yet.
fn registration_point(ledger: &Ledger, registered: Line, reg_print: &PlanPrint) -> Registration {
    let moment = |l: Option<Line>| {
        l.map(|l| Moment {
            ledger_line: l.number,
            event: if l.entry.event == Event::DataInspected {
                MomentEvent::DataInspected
            } else {
                MomentEvent::DataFirstRead
            },
            time: l.entry.time.clone(),
        })
    };
    Registration {
        content_sha256: reg_print.content_sha256.clone(),
        ledger_line: registered.number,
        recorded_as: if registered.entry.event == Event::Sealed {
            RecordedAs::Sealed
        } else {
            RecordedAs::Amended
        },
        data_inspected: moment(ledger.first_data()),
        results_computed: moment(ledger.first_results()),
        elements: Vec::new(),
    }
}

/// The first amendment after the registered version that touched `element`.
fn first_amendment<'a>(
    registered: &Json,
    later: &[(Line<'a>, Json)],
    element: &str,
) -> Option<Line<'a>> {
    let mut previous = registered;
    for (line, version) in later {
        if element_changes(previous, version)
            .iter()
            .any(|c| c.element == element)
        {
            return Some(*line);
        }
        previous = version;
    }
    None
}

/// The `amended-after-data` deviation of a changed element (none for an added
/// specification or hypothesis, which have codes of their own).
fn amended_deviation(
    change: &Change,
    element: &ElementRegistration,
    after: Option<crate::ledger::Moment>,
    registered: Line,
    reg_print: &PlanPrint,
) -> Option<Deviation> {
    let covered = change.kind == Kind::Added
        && (change.element.starts_with("specification[")
            || change.element.starts_with("hypothesis["));
    if covered {
        return None;
    }
    let keys = if change.keys.is_empty() || change.kind == Kind::Added {
        String::new()
    } else {
        format!(": {}", change.keys.join("; "))
    };
    let when = after.map_or("after the data were seen", |m| m.phrase());
    let by = match (element.amendment_line, &element.reason) {
        (Some(n), Some(r)) => format!(" by the amendment at ledger line {n} (reason: {r})"),
        (Some(n), None) => format!(" by the amendment at ledger line {n}"),
        (None, _) => " and no amendment records it".to_string(),
    };
    Some(Deviation::new(
        DeviationCode::AmendedAfterData,
        change.element.clone(),
        format!(
            "{} {when}{by}; the registered version (ledger line {}, fingerprint {}) differs{keys}",
            change.kind.name(),
            registered.number,
            short(&reg_print.content_sha256)
        ),
    ))
}

/// The first 12 hex digits of a fingerprint.
fn short(sha: &str) -> String {
    sha.chars().take(12).collect()
}

/// Ids of the `[[table]]` entries named `table` (e.g. "specification", "hypothesis") in the
/// last plan recorded before the data were first read.
fn registered_ids(ledger: &Ledger, table: &str) -> Option<BTreeSet<String>> {
    let before = ledger.registered()?.entry;
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
