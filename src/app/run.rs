//! `sworn run`: read the data (recording the first read in the ledger), execute the plan in
//! memory, render the reports and publish the run directory whole.

use super::{locked, machine, rundir, shown, slashed, Outcome, LEDGER_FILE, PLAN_FILE};
use crate::analysis;
use crate::data::Table;
use crate::deviation::{Deviation, Severity};
use crate::error::{Error, Result};
use crate::escape::terminal;
use crate::ledger::{self, ledger_path, Entry, Event, Ledger, PlanPrint};
use crate::plan::{self, Plan};
use crate::results::{HypothesisRegistration, Results};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// The outputs of a run, rendered and not yet written.
pub struct RunOutput {
    /// The results model.
    pub results: Results,
    /// Output files by name (results.json, report.md, report.tex, report.html), in writing
    /// order.
    pub files: Vec<(String, String)>,
    /// The plan's fingerprints as used for this run.
    pub print: PlanPrint,
}

/// Execute `plan` in memory ([`analysis::execute`]) and render its outputs; nothing is
/// written. A run and its verification both call this, so they compare the same bytes.
pub fn execute(
    plan: &Plan,
    ledger: &Ledger,
    source: &str,
    tables: &BTreeMap<String, Table>,
    schema_devs: Vec<Deviation>,
) -> Result<RunOutput> {
    let executed = analysis::execute(plan, ledger, source, tables, schema_devs)?;
    let results = executed.results;
    let reports = crate::report::render(plan, &results)?;
    let files = vec![
        ("results.json".to_string(), results.to_file_text()),
        ("report.md".to_string(), reports.md),
        ("report.tex".to_string(), reports.tex),
        ("report.html".to_string(), reports.html),
    ];
    Ok(RunOutput {
        results,
        files,
        print: executed.print,
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
    let ledger = record_first_read(&lpath, &hashes)?;
    let source = slashed(&analysis::relative_path(&abs_out, &plan.path));
    let output = execute(&plan, &ledger, &source, &tables, schema_devs)?;
    let entry = run_entry(&plan, &output, hashes, ledger.len(), &abs_out);
    publish(&abs_out, replace, &plan, &output, entry, &lpath)?;
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

/// Append `data-first-read` under the ledger lock unless a first read is already recorded;
/// returns the ledger as the run executes against it.
fn record_first_read(lpath: &Path, hashes: &BTreeMap<String, String>) -> Result<Ledger> {
    let mut locked = locked(lpath, true)?;
    if !locked
        .ledger()
        .entries()
        .any(|e| e.event == Event::DataFirstRead)
    {
        let mut entry = Entry::new(Event::DataFirstRead);
        entry.data = Some(hashes.clone());
        locked.append(entry)?;
    }
    Ok(locked.ledger().clone())
}

/// The `run` ledger entry: the plan and data fingerprints, the results digest, each output's
/// SHA-256, the ledger length the run was judged against (`basis`) and the run directory
/// relative to the plan's folder.
fn run_entry(
    plan: &Plan,
    output: &RunOutput,
    hashes: BTreeMap<String, String>,
    basis: usize,
    abs_out: &Path,
) -> Entry {
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
    entry.basis = Some(basis as u64);
    let plan_dir = plan.path.parent().unwrap_or(Path::new("/"));
    entry.out = Some(slashed(&analysis::relative_path(plan_dir, abs_out)));
    entry
}

/// Stage the run directory in a temporary sibling and rename it into place; on any error the
/// temporary is removed and nothing is published.
fn publish(
    abs_out: &Path,
    replace: bool,
    plan: &Plan,
    output: &RunOutput,
    entry: Entry,
    lpath: &Path,
) -> Result<()> {
    rundir::clean_stale(abs_out);
    let staged = rundir::Staged::new(abs_out, replace)?;
    match stage_run(&staged, plan, output, entry, lpath) {
        Ok(()) => staged.publish(),
        Err(e) => {
            staged.discard();
            Err(e)
        }
    }
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

/// The body of `run --json`: where the outputs are, the integrity line, each hypothesis'
/// verdict and the number of deviations and notes.
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

/// The terminal summary of a run: integrity, each hypothesis' verdict, the counts of
/// deviations and notes, and where the report is.
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
            (HypothesisRegistration::AddedAfterData, _) => {
                " [added after the data: not pre-registered]".to_string()
            }
            (HypothesisRegistration::RemovedAfterData, _) => {
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
