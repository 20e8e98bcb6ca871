//! One function per command; the only place that sequences I/O.

use crate::analysis::{self, RunOutput};
use crate::cli::Command;
use crate::deviation::Severity;
use crate::error::{Error, Result};
use crate::escape::terminal;
use crate::ledger::{self, ledger_path, Entry, Event, Ledger, PlanPrint};
use crate::plan::{self, Plan};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

mod history;
mod machine;
mod rehearse;
mod rundir;
mod verify;

pub use rundir::{LEDGER_FILE, PLAN_FILE};
pub use verify::verify;

/// How a command ended when it did not fail with an error.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything fine (exit 0).
    Success,
    /// A check failed: verify mismatch, or deviations under --strict (exit 1).
    CheckFailed,
}

impl Outcome {
    /// The process exit code.
    pub fn code(self) -> i32 {
        match self {
            Outcome::Success => 0,
            Outcome::CheckFailed => 1,
        }
    }
}

/// Run one command.
pub fn dispatch(command: Command) -> Result<Outcome> {
    match command {
        Command::Init { data, out } => init(&data, &out),
        Command::Help { topic } => crate::guide::help(topic.as_deref()).map(|()| Outcome::Success),
        Command::Completions { shell } => {
            crate::guide::completions(shell);
            Ok(Outcome::Success)
        }
        Command::Check { plan, data, json } => check(&plan, data, json),
        Command::Seal { plan } => seal(&plan),
        Command::Amend { plan, reason } => amend(&plan, &reason),
        Command::Run {
            plan,
            out,
            strict,
            replace,
            json,
        } => run(&plan, out.as_deref(), strict, replace, json).map(|(o, _)| o),
        Command::Verify {
            dir,
            registered,
            data,
            json,
        } => verify(&dir, registered.as_deref(), &data, json),
        Command::Rehearse {
            plan,
            replications,
            out,
            replace,
            blind,
            json,
        } => {
            if blind {
                rehearse::blind(&plan, json)
            } else {
                rehearse::rehearse(&plan, replications, out.as_deref(), replace, json)
            }
        }
        Command::Log { plan } => history::log(&plan),
        Command::Diff { plan, from, to } => history::diff(&plan, from, to),
        Command::Demo { out } => {
            crate::demo::run_demo(out.as_deref().unwrap_or(Path::new("sworn-demo")))
        }
    }
}

/// `sworn init DATA… [--out PLAN]`.
pub fn init(data: &[PathBuf], out: &Path) -> Result<Outcome> {
    crate::starter::init(data, out)?;
    println!(
        "wrote {}: a starter plan for {} data file(s)",
        out.display(),
        data.len()
    );
    println!("next: fill each place marked \"<fill: …>\", review the declared kinds, then `sworn check {}`", out.display());
    Ok(Outcome::Success)
}

/// The JSON object printed for an error under `--json` (the message also goes to stderr).
pub fn emit_error_json(command: &str, message: &str) {
    machine::emit(&machine::error(command, message));
}

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
        let (tables, deviations) = match &loaded {
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
        machine::emit(&machine::envelope(
            "check",
            outcome.code(),
            serde_json::json!({
                "plan": path.display().to_string(),
                "plan_valid": true,
                "specifications": counts.0,
                "hypotheses": counts.1,
                "data_tables": counts.2,
                "data": tables,
                "deviations": deviations,
                "data_match_schema": loaded.as_ref().map(|_| !mismatch),
                "data_inspected_line": inspected.map(|l| l.number),
            }),
        ));
        return Ok(outcome);
    }
    let Some((tables, devs)) = loaded else {
        return Ok(outcome);
    };
    if let Some(line) = inspected {
        println!("{}", inspection_line(line));
    }
    for (id, t) in &tables {
        println!(
            "[data.{}] {} rows, sha256 {}",
            terminal(id),
            t.rows,
            t.sha256
        );
    }
    for d in &devs {
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
    Ok(outcome)
}

/// A ledger line written by [`record_inspection`].
#[derive(Clone, Copy)]
pub(crate) struct Recorded {
    pub(crate) number: usize,
    pub(crate) first: bool,
}

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
    tables: &BTreeMap<String, crate::data::Table>,
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

fn deviation_json(d: &crate::deviation::Deviation) -> serde_json::Value {
    serde_json::json!({
        "severity": d.severity.name(),
        "code": d.code.as_str(),
        "subject": d.subject,
        "message": d.message,
    })
}

/// A path for a terminal line (see [`crate::escape`]).
fn shown(path: &Path) -> String {
    terminal(&path.display().to_string())
}

/// `sworn seal PLAN`.
pub fn seal(path: &Path) -> Result<Outcome> {
    let plan = plan::load(path)?;
    let lpath = ledger_path(&plan.path);
    let mut ledger = locked(&lpath, true)?;
    if ledger.ledger().entries().any(|e| e.event == Event::Sealed) {
        return Err(Error::Ledger {
            path: lpath,
            message:
                "the plan is already sealed; record changes with `sworn amend PLAN --reason TEXT`"
                    .into(),
        });
    }
    let print = PlanPrint::of(&plan.path, &plan.text)?;
    let mut entry = Entry::new(Event::Sealed);
    entry.plan = Some(print.clone());
    ledger.append(entry)?;
    println!("sealed {}", shown(path));
    println!(
        "content fingerprint (deposit this with the registry): sha256:{}",
        print.content_sha256
    );
    println!("ledger: {}", shown(&lpath));
    Ok(Outcome::Success)
}

/// `sworn amend PLAN --reason TEXT`.
pub fn amend(path: &Path, reason: &str) -> Result<Outcome> {
    let plan = plan::load(path)?;
    let lpath = ledger_path(&plan.path);
    if reason.trim().is_empty() {
        return Err(Error::Ledger {
            path: lpath,
            message: "an amendment needs a reason: --reason \"what changed and why\"".into(),
        });
    }
    let Some(mut ledger) = Ledger::lock(&lpath, false)? else {
        return Err(Error::Ledger {
            path: lpath,
            message: "there is no ledger: seal the plan first with `sworn seal PLAN`".into(),
        });
    };
    if let Some(p) = ledger.ledger().problems().first() {
        return Err(Error::Ledger {
            path: lpath,
            message: format!("the ledger does not verify ({p}); it cannot be amended"),
        });
    }
    let print = PlanPrint::of(&plan.path, &plan.text)?;
    let last = ledger
        .ledger()
        .entries()
        .filter(|e| e.plan.is_some() && matches!(e.event, Event::Sealed | Event::Amended))
        .last()
        .and_then(|e| e.plan.clone());
    let Some(last) = last else {
        return Err(Error::Ledger {
            path: lpath,
            message: "the ledger holds no seal: seal the plan first with `sworn seal PLAN`".into(),
        });
    };
    if last.content_sha256 == print.content_sha256 {
        return Err(Error::Ledger {
            path: lpath,
            message:
                "the plan's content is unchanged since its last ledger entry; nothing to amend"
                    .into(),
        });
    }
    let keys = plan::canonical::changed_keys(&last.canonical, &print.canonical);
    let mut entry = Entry::new(Event::Amended);
    entry.plan = Some(print.clone());
    entry.reason = Some(reason.to_string());
    ledger.append(entry)?;
    println!(
        "amended {}: changed keys {}",
        shown(path),
        terminal(&keys.join(", "))
    );
    println!("new content fingerprint: sha256:{}", print.content_sha256);
    if let Some(m) = ledger.ledger().current_moment() {
        println!(
            "this amendment is made {}: it is not part of the registered plan; runs disclose it and also report the registered version's results beside it",
            m.phrase()
        );
    }
    Ok(Outcome::Success)
}

pub(crate) fn locked(path: &Path, create: bool) -> Result<ledger::Locked> {
    Ledger::lock(path, create)?.ok_or_else(|| Error::Ledger {
        path: path.to_path_buf(),
        message: "there is no ledger: seal the plan first with `sworn seal PLAN`".into(),
    })
}

fn default_out(plan: &Path) -> PathBuf {
    let stem = plan.file_stem().and_then(|s| s.to_str()).unwrap_or("plan");
    PathBuf::from("out").join(stem)
}

/// `sworn run PLAN [--out DIR] [--strict] [--replace]`. Returns the outcome and the output
/// directory.
pub fn run(
    path: &Path,
    out: Option<&Path>,
    strict: bool,
    replace: bool,
    json: bool,
) -> Result<(Outcome, PathBuf)> {
    let plan = plan::load(path)?;
    let out_dir = out.map_or_else(|| default_out(path), Path::to_path_buf);
    let abs_out = std::path::absolute(&out_dir)
        .map_err(|e| Error::io(&out_dir, "cannot resolve the output folder", e))?;
    rundir::check_target(&abs_out, replace)?;
    let (tables, schema_devs) = analysis::load_tables(&plan)?;
    let hashes: BTreeMap<String, String> = tables
        .iter()
        .map(|(k, t)| (k.clone(), t.sha256.clone()))
        .collect();
    let lpath = ledger_path(&plan.path);
    let ledger = {
        let mut locked = locked(&lpath, true)?;
        if !locked
            .ledger()
            .entries()
            .any(|e| e.event == Event::DataFirstRead)
        {
            let mut entry = Entry::new(Event::DataFirstRead);
            entry.data = Some(hashes.clone());
            locked.append(entry)?;
        }
        locked.ledger().clone()
    };
    let source = slashed(&analysis::relative_path(&abs_out, &plan.path));
    let output = analysis::execute(&plan, &ledger, &source, &tables, schema_devs)?;
    let mut entry = Entry::new(Event::Run);
    entry.plan = Some(output.print.clone());
    entry.data = Some(hashes);
    entry.results_digest = Some(output.results.digest.clone());
    entry.outputs = Some(
        output
            .files
            .iter()
            .map(|(n, t)| (n.clone(), ledger::sha256_hex(t.as_bytes())))
            .collect(),
    );
    entry.basis = Some(ledger.len() as u64);
    let plan_dir = plan.path.parent().unwrap_or(Path::new("/"));
    entry.out = Some(slashed(&analysis::relative_path(plan_dir, &abs_out)));
    rundir::clean_stale(&abs_out);
    let staged = rundir::Staged::new(&abs_out, replace)?;
    match stage_run(&staged, &plan, &output, entry, &lpath) {
        Ok(()) => staged.publish()?,
        Err(e) => {
            staged.discard();
            return Err(e);
        }
    }
    let deviating = output
        .results
        .deviations
        .iter()
        .any(|d| d.severity >= Severity::Deviation);
    let outcome = if strict && deviating {
        Outcome::CheckFailed
    } else {
        Outcome::Success
    };
    if json {
        machine::emit(&run_json(&output, &out_dir, outcome));
    } else {
        print_summary(&plan, &output, &out_dir);
    }
    Ok((outcome, out_dir))
}

pub(crate) fn slashed(p: &Path) -> String {
    p.to_string_lossy().replace('\\', "/")
}

/// Write the outputs, the plan and (after appending the run entry) the ledger prefix into
/// the staged directory.
fn stage_run(
    staged: &rundir::Staged,
    plan: &Plan,
    output: &RunOutput,
    entry: Entry,
    lpath: &Path,
) -> Result<()> {
    for (name, text) in &output.files {
        staged.write(name, text.as_bytes())?;
    }
    staged.write(PLAN_FILE, plan.text.as_bytes())?;
    let mut locked = locked(lpath, true)?;
    let n = locked.ledger().len();
    if locked.ledger().prefix_bytes(n).is_none() {
        return Err(Error::Ledger {
            path: lpath.to_path_buf(),
            message: format!("more than {} lines of the ledger are not valid entries, so it cannot be copied into the run folder; restore the ledger from a backup", ledger::MAX_BAD),
        });
    }
    locked.append(entry)?;
    let bytes = locked.ledger().prefix_bytes(n + 1).unwrap_or_default();
    drop(locked);
    staged.write(LEDGER_FILE, &bytes)
}

fn run_json(output: &RunOutput, out_dir: &Path, outcome: Outcome) -> serde_json::Value {
    let r = &output.results;
    let hypotheses: Vec<serde_json::Value> = r
        .hypotheses
        .iter()
        .map(|(id, h)| {
            serde_json::json!({
                "id": id,
                "specification": h.specification,
                "term": h.term,
                "verdict": h.verdict.to_string(),
                "adjusted_p_value": h.adjusted_p_value,
            })
        })
        .collect();
    let (deviations, notes): (Vec<_>, Vec<_>) = r
        .deviations
        .iter()
        .partition(|d| d.severity >= Severity::Deviation);
    machine::envelope(
        "run",
        outcome.code(),
        serde_json::json!({
            "out": out_dir.display().to_string(),
            "results": out_dir.join("results.json").display().to_string(),
            "report": out_dir.join("report.md").display().to_string(),
            "results_digest": r.digest,
            "integrity": crate::report::integrity_line(r),
            "hypotheses": hypotheses,
            "deviations": deviations.len(),
            "notes": notes.len(),
        }),
    )
}

fn print_summary(plan: &Plan, output: &RunOutput, out_dir: &Path) {
    let r = &output.results;
    println!(
        "{}: integrity: {}",
        crate::escape::line(&plan.study.title),
        crate::report::integrity_line(r)
    );
    for (id, h) in &r.hypotheses {
        let p = h
            .adjusted_p_value
            .map_or("n/a".to_string(), crate::report::pval);
        let note = match (h.registration, h.as_amended.as_deref()) {
            ("added-after-data", _) => " [added after the data: not pre-registered]".to_string(),
            ("removed-after-data", _) => {
                " [as registered; removed from the plan after the data]".to_string()
            }
            (_, Some(a)) => format!(
                " [as registered; as amended: {}, adjusted p {}]",
                a.verdict,
                a.adjusted_p_value
                    .map_or("n/a".to_string(), crate::report::pval)
            ),
            _ => String::new(),
        };
        println!(
            "  {} ({} in {}): {} (adjusted p {p}){note}",
            terminal(id),
            terminal(&h.term),
            terminal(&h.specification),
            h.verdict
        );
    }
    let n_dev = r
        .deviations
        .iter()
        .filter(|d| d.severity >= Severity::Deviation)
        .count();
    println!(
        "  {} deviation(s), {} note(s)",
        n_dev,
        r.deviations.len() - n_dev
    );
    println!("  report: {}", shown(&out_dir.join("report.md")));
}
