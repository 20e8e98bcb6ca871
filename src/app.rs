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
        Command::Check { plan, data } => check(&plan, data),
        Command::Seal { plan } => seal(&plan),
        Command::Amend { plan, reason } => amend(&plan, &reason),
        Command::Run { plan, out, strict } => run(&plan, out.as_deref(), strict).map(|(o, _)| o),
        Command::Verify { dir } => verify(&dir),
        Command::Demo { out } => {
            crate::demo::run_demo(out.as_deref().unwrap_or(Path::new("sworn-demo")))
        }
    }
}

/// `sworn check PLAN [--data]`.
pub fn check(path: &Path, data: bool) -> Result<Outcome> {
    let plan = plan::load(path)?;
    println!(
        "{}: plan is valid ({} specification(s), {} hypothesis(es), {} data table(s))",
        shown(path),
        plan.specifications.len(),
        plan.hypotheses.len(),
        plan.data.len()
    );
    if !data {
        return Ok(Outcome::Success);
    }
    let (tables, devs) = analysis::load_tables(&plan)?;
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
    if devs.iter().any(|d| d.severity >= Severity::Deviation) {
        println!("the data do not match the declared schema");
        return Ok(Outcome::CheckFailed);
    }
    println!("the data match the declared schema");
    Ok(Outcome::Success)
}

/// A path for a terminal line (see [`crate::escape`]).
fn shown(path: &Path) -> String {
    terminal(&path.display().to_string())
}

/// `sworn seal PLAN`.
pub fn seal(path: &Path) -> Result<Outcome> {
    let plan = plan::load(path)?;
    let lpath = ledger_path(&plan.path);
    let mut ledger = Ledger::read(&lpath)?.unwrap_or_else(|| Ledger::empty(lpath.clone()));
    if ledger.entries().any(|e| e.event == Event::Sealed) {
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
    let Some(mut ledger) = Ledger::read(&lpath)? else {
        return Err(Error::Ledger {
            path: lpath,
            message: "there is no ledger: seal the plan first with `sworn seal PLAN`".into(),
        });
    };
    if reason.trim().is_empty() {
        return Err(Error::Ledger {
            path: lpath,
            message: "an amendment needs a reason: --reason \"what changed and why\"".into(),
        });
    }
    if let Some(p) = ledger.problems().first() {
        return Err(Error::Ledger {
            path: lpath,
            message: format!("the ledger does not verify ({p}); it cannot be amended"),
        });
    }
    let print = PlanPrint::of(&plan.path, &plan.text)?;
    let last = ledger
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
    Ok(Outcome::Success)
}

/// File in a run directory holding the SHA-256 of the run's own ledger line, so that an
/// edit to that line (which no later line's hash link covers yet) is still detected.
pub const RUN_ENTRY_FILE: &str = "ledger-entry.sha256";

fn default_out(plan: &Path) -> PathBuf {
    let stem = plan.file_stem().and_then(|s| s.to_str()).unwrap_or("plan");
    PathBuf::from("out").join(stem)
}

/// `sworn run PLAN [--out DIR] [--strict]`. Returns the outcome and the output directory.
pub fn run(path: &Path, out: Option<&Path>, strict: bool) -> Result<(Outcome, PathBuf)> {
    let plan = plan::load(path)?;
    let (tables, schema_devs) = analysis::load_tables(&plan)?;
    let hashes: BTreeMap<String, String> = tables
        .iter()
        .map(|(k, t)| (k.clone(), t.sha256.clone()))
        .collect();
    let lpath = ledger_path(&plan.path);
    let mut ledger = Ledger::read(&lpath)?.unwrap_or_else(|| Ledger::empty(lpath.clone()));
    if !ledger.entries().any(|e| e.event == Event::DataFirstRead) {
        let mut entry = Entry::new(Event::DataFirstRead);
        entry.data = Some(hashes.clone());
        ledger.append(entry)?;
    }
    let out_dir = out.map_or_else(|| default_out(path), Path::to_path_buf);
    let abs_out = std::path::absolute(&out_dir)
        .map_err(|e| Error::io(&out_dir, "cannot resolve the output folder", e))?;
    let output = analysis::execute(&plan, &ledger, &abs_out, &tables, schema_devs)?;
    std::fs::create_dir_all(&abs_out)
        .map_err(|e| Error::io(&abs_out, "cannot create the output folder", e))?;
    for (name, text) in &output.files {
        ledger::write_atomic(&abs_out.join(name), text.as_bytes())?;
    }
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
    ledger.append(entry)?;
    let line_hash = ledger.line_hash(ledger.len() - 1).unwrap_or_default();
    ledger::write_atomic(
        &abs_out.join(RUN_ENTRY_FILE),
        format!("{line_hash}\n").as_bytes(),
    )?;
    print_summary(&plan, &output, &out_dir);
    let deviating = output
        .results
        .deviations
        .iter()
        .any(|d| d.severity >= Severity::Deviation);
    Ok((
        if strict && deviating {
            Outcome::CheckFailed
        } else {
            Outcome::Success
        },
        out_dir,
    ))
}

fn print_summary(plan: &Plan, output: &RunOutput, out_dir: &Path) {
    let r = &output.results;
    println!(
        "{}: integrity {}",
        crate::escape::line(&plan.study.title),
        r.plan.integrity
    );
    for (id, h) in &r.hypotheses {
        let p = h
            .adjusted_p_value
            .map_or("n/a".to_string(), crate::report::pval);
        println!(
            "  {} ({} in {}): {} (adjusted p {p})",
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

/// `sworn verify DIR`.
pub fn verify(dir: &Path) -> Result<Outcome> {
    let results_path = dir.join("results.json");
    let text = std::fs::read_to_string(&results_path).map_err(|e| {
        Error::io(
            &results_path,
            "cannot read the run's results (is this a run directory?)",
            e,
        )
    })?;
    let problems = match crate::results::digest_of_text(&text) {
        Some((recorded, recomputed)) => verify_problems(dir, &text, &recorded, &recomputed),
        None => vec!["results.json is not a valid sworn results file (it does not parse or has no digest): it was changed after the run".to_string()],
    };
    if problems.is_empty() {
        println!(
            "verified: {} re-derives exactly from its plan and data, and the ledger records it",
            shown(dir)
        );
        return Ok(Outcome::Success);
    }
    println!("verification FAILED for {}:", shown(dir));
    for p in &problems {
        println!("  - {}", terminal(p));
    }
    Ok(Outcome::CheckFailed)
}

fn verify_problems(dir: &Path, text: &str, recorded: &str, recomputed: &str) -> Vec<String> {
    let mut problems = Vec::new();
    if recorded != recomputed {
        problems.push(
            "results.json does not match its own digest: it was edited after the run".to_string(),
        );
    }
    let plan_rel = serde_json::from_str::<serde_json::Value>(text)
        .ok()
        .and_then(|v| v["plan"]["path"].as_str().map(String::from));
    let Some(plan_rel) = plan_rel else {
        problems.push("results.json names no plan".into());
        return problems;
    };
    let abs_dir = std::path::absolute(dir).unwrap_or_else(|_| dir.to_path_buf());
    let plan_path = abs_dir.join(&plan_rel);
    let plan = match plan::load(&plan_path) {
        Ok(p) => p,
        Err(e) => {
            problems.push(format!("the plan cannot be loaded: {e}"));
            return problems;
        }
    };
    let ledger = match Ledger::read(&ledger_path(&plan.path)) {
        Ok(Some(l)) => l,
        Ok(None) => {
            problems.push(format!(
                "the plan's ledger {} is missing",
                ledger_path(&plan.path).display()
            ));
            return problems;
        }
        Err(e) => {
            problems.push(e.to_string());
            return problems;
        }
    };
    problems.extend(
        ledger
            .problems()
            .into_iter()
            .map(|p| format!("ledger: {p}")),
    );
    let current: BTreeMap<String, String> = ["results.json", "report.md", "report.tex"]
        .iter()
        .map(|n| {
            (
                n.to_string(),
                std::fs::read(dir.join(n))
                    .map(|b| ledger::sha256_hex(&b))
                    .unwrap_or_default(),
            )
        })
        .collect();
    let entry_hash = std::fs::read_to_string(dir.join(RUN_ENTRY_FILE)).unwrap_or_default();
    let index =
        (0..ledger.len()).find(|&i| ledger.line_hash(i).as_deref() == Some(entry_hash.trim()));
    let run_entry = index
        .and_then(|i| ledger.entries().find(|e| ledger.index_of(e.seq) == Some(i)))
        .cloned();
    let Some(run_entry) = run_entry
        .filter(|e| e.event == Event::Run && e.results_digest.as_deref() == Some(recorded))
    else {
        problems.push(format!("the ledger holds no unedited run entry recording these results (checked against {RUN_ENTRY_FILE})"));
        return problems;
    };
    for (name, sha) in run_entry.outputs.iter().flatten() {
        if current.get(name) != Some(sha) {
            problems.push(format!("{name} differs from the file the run wrote"));
        }
    }
    let prefix = ledger.prefix(ledger.index_of(run_entry.seq).unwrap_or(0));
    match analysis::load_tables(&plan)
        .and_then(|(t, d)| analysis::execute(&plan, &prefix, &abs_dir, &t, d))
    {
        Ok(out) => {
            for (name, fresh) in &out.files {
                let on_disk = std::fs::read(dir.join(name)).unwrap_or_default();
                if on_disk != fresh.as_bytes() {
                    problems.push(format!("{name} is not what the plan and data give now (plan, data or file changed)"));
                }
            }
        }
        Err(e) => problems.push(format!("the run cannot be re-derived: {e}")),
    }
    problems.sort();
    problems.dedup();
    problems
}
