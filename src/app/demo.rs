//! `sworn demo`: write the demo's plans and data (from [`crate::demo`], which is data only)
//! under a folder, then seal and run each plan through the same commands a user would.

use super::{run, seal, Outcome};
use crate::demo::{data_files, PLANS};
use crate::error::{Error, Result};
use std::path::Path;

/// Write `text` to `dir/rel`, creating the folders on the way.
fn write(dir: &Path, rel: &str, text: &str) -> Result<()> {
    let path = dir.join(rel);
    if let Some(parent) = path.parent() {
        std::fs::create_dir_all(parent)
            .map_err(|e| Error::io(parent, "cannot create the demo folder", e))?;
    }
    crate::ledger::write_atomic(&path, text.as_bytes())
}

/// `sworn demo`: write plans and data under `dir`, seal and run each plan.
pub fn run_demo(dir: &Path) -> Result<Outcome> {
    for (rel, text) in PLANS {
        write(dir, rel, text)?;
        let ledger = crate::ledger::ledger_path(&dir.join(rel));
        if ledger.exists() {
            std::fs::remove_file(&ledger)
                .map_err(|e| Error::io(&ledger, "cannot replace the demo ledger", e))?;
        }
    }
    for (rel, text) in data_files() {
        write(dir, rel, &text)?;
    }
    let mut reports = Vec::new();
    for (rel, _) in PLANS {
        let plan = dir.join(rel);
        seal(&plan)?;
        let stem = plan
            .file_stem()
            .and_then(|s| s.to_str())
            .unwrap_or("plan")
            .to_string();
        let (_, out) = run(&plan, Some(&dir.join("out").join(stem)), false, true, false)?;
        reports.push(out.join("report.md"));
        println!();
    }
    println!("demo written to {}", dir.display());
    for r in reports {
        println!("report: {}", r.display());
    }
    println!(
        "check a run with: sworn verify {}",
        dir.join("out").join("cool-roofs").display()
    );
    Ok(Outcome::Success)
}
