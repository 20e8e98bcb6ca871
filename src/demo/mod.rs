//! The built-in demo: two invented scenarios, generated deterministically, with their plans.
//!
//! 1. `cool-roofs`: a municipal programme offers a subsidy to paint roofs white, randomized
//!    by street block within districts. Households that take it up tend to have hotter homes
//!    (unobserved), so OLS of indoor temperature on painting understates the cooling effect,
//!    while 2SLS with the offer as instrument recovers it. A binary outcome (a heat-related
//!    clinic visit) makes one specification a linear probability model.
//! 2. `grid-demand`: weekly electricity demand of a district grid and its spot price, which
//!    responds to the same demand shocks; last week's price instruments this week's.
//!
//! The data are invented. The generator uses its own seeded SplitMix64 stream and fixed
//! number formatting, so its bytes never depend on a crate version. The committed files in
//! `demo-data/` are its output; a test checks that they match.

mod generate;

pub use generate::{cool_roofs_csv, grid_demand_csv};

use crate::app;
use crate::error::{Error, Result};
use std::path::Path;

/// The demo plans, as committed in `plans/`.
pub const PLANS: [(&str, &str); 2] = [
    (
        "plans/cool-roofs.toml",
        include_str!("../../plans/cool-roofs.toml"),
    ),
    (
        "plans/grid-demand.toml",
        include_str!("../../plans/grid-demand.toml"),
    ),
];

/// The demo data files: path and generated content.
pub fn data_files() -> Vec<(&'static str, String)> {
    vec![
        ("demo-data/cool-roofs/households.csv", cool_roofs_csv()),
        ("demo-data/grid-demand/weekly.csv", grid_demand_csv()),
    ]
}

fn write(dir: &Path, rel: &str, text: &str) -> Result<()> {
    let path = dir.join(rel);
    if let Some(parent) = path.parent() {
        std::fs::create_dir_all(parent)
            .map_err(|e| Error::io(parent, "cannot create the demo folder", e))?;
    }
    crate::ledger::write_atomic(&path, text.as_bytes())
}

/// `sworn demo`: write plans and data under `dir`, seal and run each plan.
pub fn run_demo(dir: &Path) -> Result<app::Outcome> {
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
        app::seal(&plan)?;
        let stem = plan
            .file_stem()
            .and_then(|s| s.to_str())
            .unwrap_or("plan")
            .to_string();
        let (_, out) = app::run(&plan, Some(&dir.join("out").join(stem)), false, true, false)?;
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
    Ok(app::Outcome::Success)
}
