//! Command-line arguments (clap derive structs only).

use clap::{Parser, Subcommand};
use std::path::PathBuf;

/// Execute pre-registered analysis plans and produce locked, verifiable reports.
#[derive(Debug, Parser)]
#[command(name = "sworn", version, about)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Validate a plan; with --data also check its data files against the declared schema.
    Check {
        /// The plan file (TOML).
        plan: PathBuf,
        /// Also read the data files and check them, without estimating anything.
        #[arg(long)]
        data: bool,
    },
    /// Seal a plan: write its fingerprint as the first entry of its ledger.
    Seal {
        /// The plan file.
        plan: PathBuf,
    },
    /// Record a changed plan in its ledger, with the reason for the change.
    Amend {
        /// The plan file.
        plan: PathBuf,
        /// Why the plan changed.
        #[arg(long)]
        reason: String,
    },
    /// Run a plan: estimate everything and write report.md, report.tex and results.json.
    Run {
        /// The plan file.
        plan: PathBuf,
        /// Output directory (default out/PLAN-stem/).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Exit with code 1 when the run has any deviation.
        #[arg(long)]
        strict: bool,
        /// Replace an existing run directory (otherwise a non-empty one is refused).
        #[arg(long)]
        replace: bool,
    },
    /// Re-derive a run directory's outputs from its plan and data and check them.
    Verify {
        /// The run directory (holding results.json).
        dir: PathBuf,
        /// The fingerprint deposited with the registry (sha256:...): fail unless the run's
        /// registered plan has exactly this content fingerprint.
        #[arg(long, value_name = "FINGERPRINT")]
        registered: Option<String>,
        /// Data files to use, wherever they now live; matched to the run's tables by SHA-256.
        #[arg(long, value_name = "PATH", num_args = 1..)]
        data: Vec<PathBuf>,
    },
    /// Write the built-in demo plans and data, seal and run them.
    Demo {
        /// Where to write the demo (default sworn-demo/).
        #[arg(long)]
        out: Option<PathBuf>,
    },
}
