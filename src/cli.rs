//! Command-line arguments (clap derive structs only).

use clap::{Parser, Subcommand};
use std::path::PathBuf;

/// Execute pre-registered analysis plans and produce locked, verifiable reports.
#[derive(Debug, Parser)]
#[command(
    name = "sworn",
    version,
    about,
    disable_help_subcommand = true,
    after_help = "A first session:\n  sworn init baseline.csv --out plan.toml   # a starter plan from your data\n  sworn check plan.toml --data              # fill the marks, then check\n  sworn seal plan.toml                      # deposit the printed fingerprint\n  sworn run plan.toml                       # once the outcome data are in\n  sworn verify out/plan                     # what a replicator runs\n\nMore: sworn help plan (the plan's sections), sworn help COMMAND."
)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

impl Command {
    /// The command's name and whether it was asked for JSON output.
    pub fn json_output(&self) -> Option<&'static str> {
        match self {
            Command::Check { json: true, .. } => Some("check"),
            Command::Run { json: true, .. } => Some("run"),
            Command::Verify { json: true, .. } => Some("verify"),
            Command::Rehearse { json: true, .. } => Some("rehearse"),
            _ => None,
        }
    }
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Start a plan from data files: the declared schema inferred, the team's places marked.
    #[command(after_help = "Example:\n  sworn init endline.csv baseline.parquet --out plan.toml")]
    Init {
        /// The data files (CSV or Parquet), one data table each.
        #[arg(required = true)]
        data: Vec<PathBuf>,
        /// The plan file to write (default plan.toml); never overwritten.
        #[arg(long, default_value = "plan.toml")]
        out: PathBuf,
    },
    /// Validate a plan; with --data also check its data files against the declared schema.
    #[command(
        after_help = "Examples:\n  sworn check plan.toml          # the plan alone\n  sworn check plan.toml --data   # also the data against the declared schema"
    )]
    Check {
        /// The plan file (TOML).
        plan: PathBuf,
        /// Also read the data files and check them, without estimating anything.
        #[arg(long)]
        data: bool,
        /// Print one JSON object instead of text (shape: docs/json-output.md).
        #[arg(long)]
        json: bool,
    },
    /// Seal a plan: write its fingerprint as the first entry of its ledger.
    #[command(
        after_help = "Example:\n  sworn seal plan.toml   # prints the fingerprint to deposit with the registry"
    )]
    Seal {
        /// The plan file.
        plan: PathBuf,
    },
    /// Record a changed plan in its ledger, with the reason for the change.
    #[command(
        after_help = "Example:\n  sworn amend plan.toml --reason \"the survey firm renamed column hh to hh_id\""
    )]
    Amend {
        /// The plan file.
        plan: PathBuf,
        /// Why the plan changed.
        #[arg(long)]
        reason: String,
    },
    /// Run a plan: estimate everything and write report.md, report.tex and results.json.
    #[command(
        after_help = "Examples:\n  sworn run plan.toml                      # writes out/plan/\n  sworn run plan.toml --out results/main --strict"
    )]
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
        /// Print one JSON object instead of text (shape: docs/json-output.md).
        #[arg(long)]
        json: bool,
    },
    /// Simulate the study from the plan's [rehearsal] section and run the registered analysis
    /// on every simulated data set: power, minimum detectable effects, size, rule firing rates.
    #[command(
        after_help = "Examples:\n  sworn rehearse plan.toml                       # writes plan-rehearsal/ beside the plan\n  sworn rehearse plan.toml --replications 2000 --out power --replace\n  sworn rehearse plan.toml --blind                # the real data, assignment re-drawn, estimates masked"
    )]
    Rehearse {
        /// The plan file.
        plan: PathBuf,
        /// Simulated data sets per effect size (default: the plan's `replications`).
        #[arg(long)]
        replications: Option<usize>,
        /// Output directory (default PLAN-stem-rehearsal/ beside the plan).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Replace an existing output directory (otherwise a non-empty one is refused).
        #[arg(long)]
        replace: bool,
        /// Run the registered plan on the real data with the assignment re-drawn by the
        /// registered design: prints only what ran, estimates masked, writes no output file;
        /// the ledger records the data as inspected (the plan must be sealed).
        #[arg(long, conflicts_with_all = ["replications", "out", "replace"])]
        blind: bool,
        /// Print one JSON object instead of text (shape: docs/json-output.md).
        #[arg(long)]
        json: bool,
    },
    /// Re-derive a run directory's outputs from its plan and data and check them.
    #[command(
        after_help = "Example:\n  sworn verify out/plan   # exit 0: re-derived byte for byte"
    )]
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
        /// Print one JSON object instead of text (shape: docs/json-output.md).
        #[arg(long)]
        json: bool,
    },
    /// Print a plan's ledger history: seal, amendments, first data read, runs.
    #[command(
        after_help = "Example:\n  sworn log plan.toml   # each line: number, time, event, fingerprint"
    )]
    Log {
        /// The plan file (its ledger lies beside it).
        plan: PathBuf,
    },
    /// Show what changed between two plan versions, element by element.
    #[command(
        after_help = "Examples:\n  sworn diff plan.toml         # the registered version against the current file\n  sworn diff plan.toml 1 4     # ledger line 1 against ledger line 4"
    )]
    Diff {
        /// The plan file (its ledger lies beside it).
        plan: PathBuf,
        /// Ledger line of the older version (default: the registered version, in force when
        /// the data were first read, else the seal).
        from: Option<usize>,
        /// Ledger line of the newer version (default: the current plan file).
        to: Option<usize>,
    },
    /// Write the built-in demo plans and data, seal and run them.
    #[command(after_help = "Example:\n  sworn demo --out /tmp/sworn-demo")]
    Demo {
        /// Where to write the demo (default sworn-demo/).
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Explain a command, or a topic: `plan` (the plan's sections and where each is documented).
    #[command(after_help = "Examples:\n  sworn help plan\n  sworn help run")]
    Help {
        /// A command name or `plan`; without it, the list of commands.
        topic: Option<String>,
    },
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell).
    #[command(
        after_help = "Example (bash):\n  sworn completions bash > ~/.local/share/bash-completion/completions/sworn"
    )]
    Completions {
        /// The shell.
        shell: clap_complete::Shell,
    },
}
