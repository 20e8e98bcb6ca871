//! `sworn rehearse PLAN`: simulate, run the registered analysis on every simulated data set,
//! write rehearsal.json and rehearsal.md into an output folder whole (staged and renamed, as
//! a run directory is), then record a `rehearsed` ledger entry. No data file is opened, so
//! the ledger never counts a rehearsal as reading the data.

use super::{locked, machine, rundir, slashed, Outcome};
use crate::error::{Error, Result};
use crate::escape::terminal;
use crate::ledger::{self, ledger_path, Entry, Event, PlanPrint};
use crate::plan::{self, Plan};
use crate::rehearse::Rehearsed;
use std::io::IsTerminal;
use std::path::{Path, PathBuf};

/// The rehearsal's results file.
pub const REHEARSAL_JSON: &str = "rehearsal.json";
/// The rehearsal's report.
pub const REHEARSAL_MD: &str = "rehearsal.md";

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
    let result = crate::analysis::quietly(|| crate::rehearse::rehearse(&plan, replications, &tick));
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let r = result?;
    let json_text = format!(
        "{}\n",
        serde_json::to_string_pretty(&r).map_err(|e| Error::io(
            &abs_out,
            "cannot encode rehearsal.json",
            std::io::Error::other(e)
        ))?
    );
    let md = crate::rehearse::markdown(&r, &plan.study.title);
    rundir::clean_stale(&abs_out);
    let staged = rundir::Staged::new(&abs_out, replace)?;
    let written = staged
        .write(REHEARSAL_JSON, json_text.as_bytes())
        .and_then(|()| staged.write(REHEARSAL_MD, md.as_bytes()));
    match written {
        Ok(()) => staged.publish()?,
        Err(e) => {
            staged.discard();
            return Err(e);
        }
    }
    let mut entry = Entry::new(Event::Rehearsed);
    entry.plan = Some(PlanPrint::of(&plan.path, &plan.text)?);
    entry.assumptions = Some(r.assumptions_sha256.clone());
    entry.power = Some(r.power_record());
    entry.outputs = Some(
        [(REHEARSAL_JSON, &json_text), (REHEARSAL_MD, &md)]
            .into_iter()
            .map(|(n, t)| (n.to_string(), ledger::sha256_hex(t.as_bytes())))
            .collect(),
    );
    let plan_dir = plan.path.parent().unwrap_or(Path::new("/"));
    entry.out = Some(slashed(&crate::analysis::relative_path(plan_dir, &abs_out)));
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
    println!(
        "  report: {}",
        terminal(&out_dir.join(REHEARSAL_MD).to_string_lossy())
    );
}
