//! `sworn check`: validate a plan and, with `--data`, its data against the declared schema;
//! on a sealed plan, record that the data were inspected.

use super::{machine, shown, Outcome};
use crate::analysis;
use crate::data::Table;
use crate::deviation::{Deviation, Severity};
use crate::error::Result;
use crate::escape::terminal;
use crate::ledger::{ledger_path, Entry, Event, Ledger};
use crate::plan::{self, Plan};
use std::collections::BTreeMap;
use std::path::Path;

/// The tables read by `check --data` and the deviations found reading them.
type Loaded = (BTreeMap<String, Table>, Vec<Deviation>);

/// The plan's counts: specifications, hypotheses, data tables.
type Counts = (usize, usize, usize);

/// `sworn check PLAN [--data] [--json]`.
pub fn check(path: &Path, data: bool, json: bool) -> Result<Outcome> {
    let plan = plan::load(path)?;
    let counts = (
        plan.specifications.len(),
        plan.hypotheses.len(),
        plan.data.len(),
    );
    if !json {
        println!(
            "{}: plan is valid ({} specification(s), {} hypothesis(es), {} data table(s))",
            shown(path),
            counts.0,
            counts.1,
            counts.2
        );
    }
    let loaded = if data {
        Some(analysis::load_tables(&plan)?)
    } else {
        None
    };
    let inspected = match &loaded {
        Some((tables, _)) => record_inspection(&plan, tables)?,
        None => None,
    };
    let mismatch = loaded
        .as_ref()
        .is_some_and(|(_, devs)| devs.iter().any(|d| d.severity >= Severity::Deviation));
    let outcome = if mismatch {
        Outcome::CheckFailed
    } else {
        Outcome::Success
    };
    if json {
        let body = check_json(path, counts, loaded.as_ref(), mismatch, inspected);
        machine::emit(&machine::envelope("check", outcome.code(), body));
    } else if let Some(loaded) = &loaded {
        print_data_check(loaded, inspected, mismatch);
    }
    Ok(outcome)
}

/// The body of `check --json`: the plan's counts and, with `--data`, each table and deviation.
fn check_json(
    path: &Path,
    counts: Counts,
    loaded: Option<&Loaded>,
    mismatch: bool,
    inspected: Option<Recorded>,
) -> serde_json::Value {
    let (tables, deviations) = match loaded {
        Some((tables, devs)) => (
            serde_json::Value::Array(
                tables
                    .iter()
                    .map(|(id, t)| {
                        serde_json::json!({ "table": id, "rows": t.rows, "sha256": t.sha256 })
                    })
                    .collect(),
            ),
            serde_json::Value::Array(devs.iter().map(deviation_json).collect()),
        ),
        None => (serde_json::Value::Null, serde_json::Value::Null),
    };
    serde_json::json!({
        "plan": path.display().to_string(),
        "plan_valid": true,
        "specifications": counts.0,
        "hypotheses": counts.1,
        "data_tables": counts.2,
        "data": tables,
        "deviations": deviations,
        "data_match_schema": loaded.map(|_| !mismatch),
        "data_inspected_line": inspected.map(|l| l.number),
    })
}

/// The terminal lines of `check --data`: the inspection record, each table, each deviation
/// and the verdict on the schema.
fn print_data_check((tables, devs): &Loaded, inspected: Option<Recorded>, mismatch: bool) {
    if let Some(line) = inspected {
        println!("{}", inspection_line(line));
    }
    for (id, t) in tables {
        println!(
            "[data.{}] {} rows, sha256 {}",
            terminal(id),
            t.rows,
            t.sha256
        );
    }
    for d in devs {
        println!(
            "{}: {} ({}): {}",
            d.severity.name(),
            d.code,
            terminal(&d.subject),
            terminal(&d.message)
        );
    }
    if mismatch {
        println!("the data do not match the declared schema");
    } else {
        println!("the data match the declared schema");
    }
}

/// A ledger line written by [`record_inspection`].
#[derive(Clone, Copy)]
pub(crate) struct Recorded {
    pub(crate) number: usize,
    pub(crate) first: bool,
}

/// The terminal line announcing a recorded inspection.
pub(crate) fn inspection_line(r: Recorded) -> String {
    if r.first {
        format!("recorded in the ledger (line {}): the data were inspected; the plan version in force now is the registered version, and any later amendment is disclosed as made after the data were seen", r.number)
    } else {
        format!(
            "recorded in the ledger (line {}): data inspected that differ from every earlier inspection or read",
            r.number
        )
    }
}

/// `check --data` on a sealed plan records that the data were inspected (`data-inspected`),
/// unless an earlier inspection or read recorded exactly these files. An unsealed plan has no
/// ledger to record in; nothing is written then.
pub(crate) fn record_inspection(
    plan: &Plan,
    tables: &BTreeMap<String, Table>,
) -> Result<Option<Recorded>> {
    let lpath = ledger_path(&plan.path);
    let Some(mut locked) = Ledger::lock(&lpath, false)? else {
        return Ok(None);
    };
    let hashes: BTreeMap<String, String> = tables
        .iter()
        .map(|(k, t)| (k.clone(), t.sha256.clone()))
        .collect();
    let ledger = locked.ledger();
    if !ledger.entries().any(|e| e.event == Event::Sealed) {
        return Ok(None);
    }
    let seen = ledger.entries().any(|e| {
        matches!(e.event, Event::DataInspected | Event::DataFirstRead)
            && e.data.as_ref() == Some(&hashes)
    });
    if seen {
        return Ok(None);
    }
    let first = ledger.first_data().is_none();
    let mut entry = Entry::new(Event::DataInspected);
    entry.data = Some(hashes);
    locked.append(entry)?;
    Ok(Some(Recorded {
        number: locked.ledger().len(),
        first,
    }))
}

/// One deviation as a JSON object for `check --json`.
fn deviation_json(d: &Deviation) -> serde_json::Value {
    serde_json::json!({
        "severity": d.severity.name(),
        "code": d.code.as_str(),
        "subject": d.subject,
        "message": d.message,
    })
}
