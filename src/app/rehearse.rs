//! `sworn rehearse PLAN`: simulate, run the registered analysis on every simulated data set,
//! write rehearsal.json, rehearsal.md, rehearsal.tex and rehearsal.html into an output folder whole (staged and renamed, as
//! a run directory is), then record a `rehearsed` ledger entry. No study data file is opened
//! (a baseline file is recorded by its path and hash under `baselines`, never under `data`),
//! so the ledger never counts a rehearsal as reading the data.

mod render;

use super::{locked, machine, rundir, slashed, Outcome};
use crate::error::{Error, Result};
use crate::escape::terminal;
use crate::ledger::{self, ledger_path, Entry, Event, PlanPrint};
use crate::plan::{self, Plan};
use crate::rehearse::{BlindTest, Rehearsed};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};

/// The rehearsal's results file.
pub const REHEARSAL_JSON: &str = "rehearsal.json";
/// The rehearsal's report.
pub const REHEARSAL_MD: &str = "rehearsal.md";
/// The rehearsal's report in LaTeX.
pub const REHEARSAL_TEX: &str = "rehearsal.tex";
/// The rehearsal's page with the power curve.
pub const REHEARSAL_HTML: &str = "rehearsal.html";

fn default_out(plan: &Plan) -> PathBuf {
    let stem = plan
        .path
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or("plan");
    plan.path.with_file_name(format!("{stem}-rehearsal"))
}

/// `sworn rehearse PLAN [--replications N] [--out DIR] [--replace] [--json]`.
pub fn rehearse(
    path: &Path,
    replications: Option<usize>,
    out: Option<&Path>,
    replace: bool,
    json: bool,
) -> Result<Outcome> {
    let plan = plan::load(path)?;
    if replications == Some(0) {
        return Err(Error::Usage {
            message: "--replications must be at least 1".into(),
        });
    }
    let out_dir = out.map_or_else(|| default_out(&plan), Path::to_path_buf);
    let abs_out = std::path::absolute(&out_dir)
        .map_err(|e| Error::io(&out_dir, "cannot resolve the output folder", e))?;
    rundir::check_target(&abs_out, replace)?;
    let r = simulate_with_progress(&plan, replications, json)?;
    let files = outputs(&r, &plan.study.title, &abs_out)?;
    write_outputs(&abs_out, replace, &files)?;
    let entry = ledger_entry(&plan, &r, &files, &abs_out)?;
    locked(&ledger_path(&plan.path), true)?.append(entry)?;
    if json {
        let body = serde_json::json!({
            "out": slashed(&out_dir),
            "rehearsal": r,
        });
        machine::emit(&machine::envelope("rehearse", 0, body));
    } else {
        print_summary(&plan, &r, &out_dir);
    }
    Ok(Outcome::Success)
}

/// Run the rehearsal, with a progress bar on stderr when it is a terminal and the output is
/// not JSON.
fn simulate_with_progress(
    plan: &Plan,
    replications: Option<usize>,
    json: bool,
) -> Result<Rehearsed> {
    let bar = (!json && std::io::stderr().is_terminal()).then(|| {
        let b = indicatif::ProgressBar::new(0);
        if let Ok(style) = indicatif::ProgressStyle::with_template(
            "{bar:30} {pos}/{len} simulated data sets ({elapsed}, about {eta} left)",
        ) {
            b.set_style(style);
        }
        b
    });
    let tick = |done: usize, total: usize| {
        if let Some(b) = &bar {
            b.set_length(total as u64);
            b.set_position(done as u64);
        }
    };
    let result = crate::analysis::quietly(|| crate::rehearse::rehearse(plan, replications, &tick));
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    result
}

/// The four output files of rehearsal `r`, by name, in the order written.
fn outputs(r: &Rehearsed, title: &str, abs_out: &Path) -> Result<[(&'static str, String); 4]> {
    let json_text = format!(
        "{}\n",
        serde_json::to_string_pretty(r).map_err(|e| Error::io(
            abs_out,
            "cannot encode rehearsal.json",
            std::io::Error::other(e)
        ))?
    );
    let render::Rendered { md, tex, html } = render::render(r, title)?;
    Ok([
        (REHEARSAL_JSON, json_text),
        (REHEARSAL_MD, md),
        (REHEARSAL_TEX, tex),
        (REHEARSAL_HTML, html),
    ])
}

/// Write `files` into the output folder whole: staged beside it, then renamed into place
/// (nothing is left behind when a write fails).
fn write_outputs(abs_out: &Path, replace: bool, files: &[(&str, String)]) -> Result<()> {
    rundir::clean_stale(abs_out);
    let staged = rundir::Staged::new(abs_out, replace)?;
    let written = files
        .iter()
        .try_for_each(|(name, text)| staged.write(name, text.as_bytes()));
    match written {
        Ok(()) => staged.publish(),
        Err(e) => {
            staged.discard();
            Err(e)
        }
    }
}

/// The `rehearsed` ledger entry: the plan's fingerprints, the assumptions' fingerprint, the
/// power for a later run to cite, the baseline files read, and the hash of each output.
fn ledger_entry(
    plan: &Plan,
    r: &Rehearsed,
    files: &[(&str, String)],
    abs_out: &Path,
) -> Result<Entry> {
    let mut entry = Entry::new(Event::Rehearsed);
    entry.plan = Some(PlanPrint::of(&plan.path, &plan.text)?);
    entry.assumptions = Some(r.assumptions_sha256.clone());
    entry.power = Some(r.power_record());
    entry.baselines = (!r.baselines.is_empty()).then(|| {
        r.baselines
            .iter()
            .map(|(id, b)| {
                (
                    id.clone(),
                    ledger::BaselineFileRecord {
                        path: b.path.clone(),
                        sha256: b.sha256.clone(),
                    },
                )
            })
            .collect()
    });
    entry.outputs = Some(
        files
            .iter()
            .map(|(n, t)| (n.to_string(), ledger::sha256_hex(t.as_bytes())))
            .collect(),
    );
    let plan_dir = plan.path.parent().unwrap_or(Path::new("/"));
    entry.out = Some(slashed(&crate::analysis::relative_path(plan_dir, abs_out)));
    Ok(entry)
}

fn print_summary(plan: &Plan, r: &Rehearsed, out_dir: &Path) {
    println!(
        "{}: rehearsed with {} simulated data sets at each of {} effect sizes",
        crate::escape::line(&plan.study.title),
        r.replications,
        r.effects.len()
    );
    for (id, h) in &r.hypotheses {
        let mde = match (h.mde, h.mde_estimate) {
            (Some(m), Some(e)) => format!("MDE {m:.3} on the effect scale (estimate {e:.4})"),
            (Some(m), None) => format!("MDE {m:.3} on the effect scale"),
            _ => format!("no MDE: {}", h.mde_note),
        };
        let last = h.curve.last().map_or(0.0, |c| c.power.share);
        println!(
            "  {} ({} in {}): size {:.1}%, power {:.1}% at the largest effect, {}",
            terminal(id),
            terminal(&h.term),
            terminal(&h.specification),
            100.0 * h.size.share,
            100.0 * last,
            terminal(&mde)
        );
    }
    for (id, rule) in &r.rules {
        let rates: Vec<String> = rule
            .fired
            .iter()
            .map(|s| format!("{:.0}%", 100.0 * s.share))
            .collect();
        println!(
            "  rule {} fires in {} of data sets (by effect size {})",
            terminal(id),
            rates.join(" / "),
            r.effects
                .iter()
                .map(|e| e.to_string())
                .collect::<Vec<_>>()
                .join(" / ")
        );
    }
    for (id, b) in &r.baselines {
        println!(
            "  [data.{}] rows from the baseline file {} ({} rows, sha256 {})",
            terminal(id),
            terminal(&b.path),
            b.rows,
            &b.sha256[..b.sha256.len().min(12)]
        );
    }
    println!(
        "  report: {}",
        terminal(&out_dir.join(REHEARSAL_MD).to_string_lossy())
    );
}

/// `sworn rehearse PLAN --blind [--json]`: the registered plan on the real data with the
/// assignment re-drawn by the registered design. The plan must be sealed and match its
/// latest ledger version (a blinded run rehearses the registered plan). The data files are
/// recorded as inspected (`data-inspected`, as `check --data` records them), never as a run's
/// read, so no results-computed moment is created and a later real run is judged as usual.
/// Nothing is written but that ledger line; what is printed holds no estimate.
pub fn blind(path: &Path, json: bool) -> Result<Outcome> {
    let plan = plan::load(path)?;
    let lpath = ledger_path(&plan.path);
    let print = PlanPrint::of(&plan.path, &plan.text)?;
    {
        let ledger = crate::ledger::Ledger::read(&lpath)?;
        let latest = ledger
            .as_ref()
            .and_then(|l| l.versions().last().map(|v| v.entry.clone()));
        let Some(latest) = latest else {
            return Err(Error::Ledger {
                path: lpath,
                message: "a blinded run reads the real data, so the ledger must first show the plan fixed: seal it with `sworn seal PLAN`".into(),
            });
        };
        if latest.plan.as_ref().map(|p| &p.content_sha256) != Some(&print.content_sha256) {
            return Err(Error::Ledger {
                path: lpath,
                message: format!(
                    "the plan's content differs from its latest ledger version (line {}): a blinded run runs the plan as recorded; record the change with `sworn amend PLAN --reason ...` or restore the plan",
                    latest.seq
                ),
            });
        }
    }
    let (tables, _schema) = crate::analysis::load_tables(&plan)?;
    let seed = crate::rehearse::blind_seed(&plan);
    // Re-draw before recording, so a plan that cannot be blinded leaves no ledger line.
    crate::rehearse::blind_redraw(&plan, &tables, seed)?;
    let recorded = super::record_inspection(&plan, &tables)?;
    let b = crate::rehearse::blinded(&plan, &tables, seed)?;
    if json {
        let body = serde_json::json!({
            "blinded": b,
            "ledger_line": recorded.map(|r| r.number),
        });
        machine::emit(&machine::envelope("rehearse", 0, body));
    } else {
        print_blinded(&plan, &b, recorded);
    }
    Ok(if b.error.is_some() {
        Outcome::CheckFailed
    } else {
        Outcome::Success
    })
}

fn print_blinded(plan: &Plan, b: &crate::rehearse::Blinded, recorded: Option<super::Recorded>) {
    println!(
        "{}: blinded run, `{}` re-drawn by the registered design (seed {}); estimates masked",
        crate::escape::line(&plan.study.title),
        terminal(&b.assignment),
        b.seed
    );
    for (id, t) in &b.tables {
        println!(
            "  data {}: {} rows, {} units re-drawn in {} block(s), {} row(s) kept their value",
            terminal(id),
            t.rows,
            t.units,
            t.blocks,
            t.kept
        );
    }
    for (id, s) in &b.specifications {
        let clusters = s
            .clusters
            .map_or(String::new(), |c| format!(", {c} clusters"));
        match s.used {
            Some(n) => println!(
                "  specification {}: ran on {n} observations{clusters}",
                terminal(id)
            ),
            None => println!("  specification {}: did not run", terminal(id)),
        }
    }
    for (id, h) in &b.hypotheses {
        let what = match h {
            BlindTest::Tested => "tested (result masked)",
            BlindTest::NotTested => "no test result",
        };
        println!("  hypothesis {}: {what}", terminal(id));
    }
    for (id, fired) in &b.rules {
        let what = if *fired { "fired" } else { "did not fire" };
        println!("  rule {}: {what} on the re-drawn data", terminal(id));
    }
    if !b.deviation_codes.is_empty() {
        println!(
            "  findings (codes only): {}",
            terminal(&b.deviation_codes.join(", "))
        );
    }
    if let Some(e) = &b.error {
        println!("  the analysis stopped: {}", terminal(e));
    }
    match recorded {
        Some(r) => println!("  {}", super::inspection_line(r)),
        None => println!("  the ledger already records these data files as seen; nothing appended"),
    }
    for c in &b.cautions {
        println!("  note: {c}");
    }
}
