//! `sworn log` (the ledger's history) and `sworn diff` (what changed between two plan
//! versions, element by element).

use super::Outcome;
use crate::error::{Error, Result};
use crate::ledger::{is_version, ledger_path, Entry, Event, Ledger};
use crate::plan::canonical::{canonical_text, changed_keys};
use crate::plan::compare::{element_changes, Kind};
use serde_json::Value as Json;
use std::path::Path;

fn read_ledger(plan: &Path) -> Result<Ledger> {
    let lpath = ledger_path(plan);
    Ledger::read(&lpath)?.ok_or_else(|| Error::Ledger {
        path: lpath,
        message: "there is no ledger: seal the plan first with `sworn seal PLAN`".into(),
    })
}

/// The line number of the registered version: the plan version in force when the data were
/// first seen (see [`crate::ledger::Moment`]); before that, the seal.
pub fn registered_line(ledger: &Ledger) -> Option<usize> {
    ledger
        .registered()
        .or_else(|| ledger.versions().find(|l| l.entry.event == Event::Sealed))
        .map(|l| l.number)
}

/// How an event is named in the history.
fn event_name(e: Event) -> &'static str {
    match e {
        Event::Sealed => "sealed",
        Event::Amended => "amended",
        Event::DataFirstRead => "data first read",
        Event::DataInspected => "data inspected",
        Event::Run => "run",
        Event::Rehearsed => "rehearsed",
    }
}

fn short(sha: &str) -> String {
    format!("sha256:{sha}")
}

/// `sworn log PLAN`.
pub fn log(plan: &Path) -> Result<Outcome> {
    let ledger = read_ledger(plan)?;
    let plan_dir = plan
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let registered = registered_line(&ledger);
    println!(
        "history of {} ({} ledger line(s))",
        plan.display(),
        ledger.len()
    );
    let mut previous: Option<String> = None;
    for (n, entry) in ledger.numbered() {
        let Some(e) = entry else {
            println!("line {n}: not a readable entry (see the problems below)");
            continue;
        };
        let what = event_name(e.event);
        let mark = if registered == Some(n) {
            "  [registered version]"
        } else {
            ""
        };
        println!("line {n}  {}  {what}{mark}", e.time);
        if let Some(p) = &e.plan {
            println!("    plan content {}", short(&p.content_sha256));
        }
        if is_version(e) {
            print_version(&ledger, e, &mut previous);
        }
        print_files(e);
        if e.event == Event::Run {
            print_run(&ledger, e, plan_dir);
        }
    }
    for p in ledger.problems() {
        println!("ledger problem: {p}");
    }
    println!("line times are written by the machine that appended them; the fingerprint deposited with the registry is the outside anchor");
    Ok(Outcome::Success)
}

/// The lines of a seal or amendment: its reason, the moment it followed, and the keys it
/// changed against the `previous` version's content (which it then replaces).
fn print_version(ledger: &Ledger, e: &Entry, previous: &mut Option<String>) {
    if let Some(r) = &e.reason {
        println!("    reason: {r}");
    }
    if let Some(m) = ledger.moment_of(e) {
        println!("    made {}: not part of the registered plan", m.phrase());
    }
    let canonical = e.plan.as_ref().map(|p| p.canonical.as_str()).unwrap_or("");
    if canonical.is_empty() {
        println!("    this version's content is not recorded in the ledger; diff cannot show it");
    } else if let Some(old) = previous.as_deref() {
        let keys = changed_keys(old, canonical);
        println!("    changed: {}", keys.join(", "));
    }
    *previous = (!canonical.is_empty()).then(|| canonical.to_string());
}

/// The files an entry records: baseline files of a rehearsal, then the study data.
fn print_files(e: &Entry) {
    if let Some(files) = &e.baselines {
        for (table, b) in files {
            println!(
                "    baseline of {} {} {} (not study data)",
                crate::escape::terminal(table),
                crate::escape::terminal(&b.path),
                crate::escape::terminal(&short(&b.sha256))
            );
        }
    }
    if let Some(data) = &e.data {
        for (table, sha) in data {
            println!("    data.{table} {}", short(sha));
        }
    }
}

/// The lines of a run: whether its plan content was recorded before it, its results digest
/// and whether its directory (relative to `plan_dir`) is still there.
fn print_run(ledger: &Ledger, e: &Entry, plan_dir: &Path) {
    let recorded = ledger.entries().take_while(|x| x.seq < e.seq).any(|x| {
        is_version(x)
            && x.plan.as_ref().map(|p| &p.content_sha256)
                == e.plan.as_ref().map(|p| &p.content_sha256)
    });
    if !recorded {
        println!("    this run's plan content matches no earlier seal or amendment");
    }
    if let Some(d) = &e.results_digest {
        println!("    results {d}");
    }
    match &e.out {
        Some(out) => {
            let dir = plan_dir.join(out);
            if dir.join("results.json").is_file() {
                println!("    directory {out}");
            } else {
                println!("    directory {out} (not there now: never published, e.g. the run was interrupted, or moved or replaced since)");
            }
        }
        None => println!("    directory not recorded"),
    }
}

/// One side of a diff: a description and canonical content.
struct Version {
    label: String,
    sha: String,
    canonical: String,
}

fn version_at(ledger: &Ledger, plan: &Path, line: usize) -> Result<Version> {
    let lpath = ledger_path(plan);
    let versions: Vec<String> = ledger
        .numbered()
        .filter(|(_, e)| e.is_some_and(|e| e.plan.is_some()))
        .map(|(n, _)| n.to_string())
        .collect();
    let err = |why: &str| Error::Ledger {
        path: lpath.clone(),
        message: format!(
            "line {line} {why}; lines recording a plan version: {} (see `sworn log {}`)",
            if versions.is_empty() {
                "none".to_string()
            } else {
                versions.join(", ")
            },
            plan.display()
        ),
    };
    let entry = ledger
        .numbered()
        .find(|(n, _)| *n == line)
        .map(|(_, e)| e)
        .ok_or_else(|| err("is not in the ledger"))?
        .ok_or_else(|| err("is not a readable entry"))?;
    let print = entry
        .plan
        .as_ref()
        .ok_or_else(|| err("records no plan version"))?;
    if print.canonical.is_empty() {
        return Err(err("does not record the plan's content"));
    }
    let what = event_name(entry.event);
    Ok(Version {
        label: format!("line {line} ({what}, {})", entry.time),
        sha: print.content_sha256.clone(),
        canonical: print.canonical.clone(),
    })
}

fn current_version(plan: &Path) -> Result<Version> {
    let text =
        std::fs::read_to_string(plan).map_err(|e| Error::io(plan, "cannot read the plan", e))?;
    let canonical = canonical_text(plan, &text)?;
    Ok(Version {
        label: format!("the current {}", plan.display()),
        sha: crate::ledger::sha256_hex(canonical.as_bytes()),
        canonical,
    })
}

/// `sworn diff PLAN [FROM] [TO]`.
pub fn diff(plan: &Path, from: Option<usize>, to: Option<usize>) -> Result<Outcome> {
    let ledger = read_ledger(plan)?;
    let from_line = match from {
        Some(n) => n,
        None => registered_line(&ledger).ok_or_else(|| Error::Ledger {
            path: ledger_path(plan),
            message: "the ledger holds no seal: seal the plan first with `sworn seal PLAN`".into(),
        })?,
    };
    let old = version_at(&ledger, plan, from_line)?;
    let new = match to {
        Some(n) => version_at(&ledger, plan, n)?,
        None => current_version(plan)?,
    };
    let registered = if from.is_none() {
        ", the registered version"
    } else {
        ""
    };
    println!("from {}{registered}: {}", old.label, short(&old.sha));
    println!("to   {}: {}", new.label, short(&new.sha));
    let (Ok(a), Ok(b)) = (
        serde_json::from_str::<Json>(&old.canonical),
        serde_json::from_str::<Json>(&new.canonical),
    ) else {
        println!(
            "a version's recorded content cannot be read; only the fingerprints can be compared"
        );
        return Ok(Outcome::Success);
    };
    let changes = element_changes(&a, &b);
    if changes.is_empty() {
        println!("no change: the two versions have the same content");
        return Ok(Outcome::Success);
    }
    let (mut added, mut removed, mut changed) = (0, 0, 0);
    for c in &changes {
        match c.kind {
            Kind::Added => added += 1,
            Kind::Removed => removed += 1,
            Kind::Changed => changed += 1,
        }
        println!("{:<8} {}", c.kind.name(), c.element);
        for line in &c.keys {
            println!("           {line}");
        }
    }
    println!("{changed} element(s) changed, {added} added, {removed} removed");
    Ok(Outcome::Success)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn canon(text: &str) -> Json {
        let c = canonical_text(Path::new("p.toml"), text).expect("valid TOML");
        serde_json::from_str(&c).expect("JSON")
    }

    #[test]
    fn changes_are_grouped_by_element() {
        let a = canon("[[hypothesis]]\nid = \"H1\"\ntest = \"two-sided\"\n[family.primary]\ncorrection = \"holm\"\n[data.main]\npath = \"a.csv\"\n");
        let b = canon("[[hypothesis]]\nid = \"H1\"\ntest = \"greater\"\n[[hypothesis]]\nid = \"H2\"\ntest = \"less\"\n[family.primary]\ncorrection = \"none\"\n");
        let c = element_changes(&a, &b);
        let lines: Vec<String> = c
            .iter()
            .map(|c| format!("{} {} {}", c.kind.name(), c.element, c.keys.join("; ")))
            .collect();
        assert_eq!(
            lines,
            vec![
                "removed data.main ",
                "changed family.primary correction: \"holm\" → \"none\"",
                "changed hypothesis[H1] test: \"two-sided\" → \"greater\"",
                "added hypothesis[H2] id: \"H2\"; test: \"less\"",
            ]
        );
        assert!(element_changes(&a, &a).is_empty());
    }
}
