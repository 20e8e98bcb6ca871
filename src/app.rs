//! One function per command; the only place that sequences I/O (one stated exception: the
//! resampling progress line is drawn on stderr from a thread of its own,
//! `analysis/progress.rs`).
//!
//! Each command lives in its own file: `check.rs`, `seal.rs` (seal and amend), `run.rs`,
//! `verify.rs`, `history.rs` (log and diff), `rehearse.rs`, `demo.rs`; `rundir.rs` publishes
//! a run directory whole and `machine.rs` writes the `--json` envelopes.

use crate::cli::Command;
use crate::error::{Error, Result};
use crate::escape::terminal;
use crate::ledger::{self, Ledger};
use std::path::{Path, PathBuf};

mod check;
mod demo;
mod history;
mod machine;
mod rehearse;
mod run;
mod rundir;
mod seal;
mod verify;

pub use check::check;
pub(crate) use check::{inspection_line, record_inspection, Recorded};
pub use demo::run_demo;
pub use run::{execute, run, RunOutput};
pub use rundir::{LEDGER_FILE, PLAN_FILE};
pub use seal::{amend, seal};
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
        Command::Demo { out } => run_demo(out.as_deref().unwrap_or(Path::new("sworn-demo"))),
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

/// A path for a terminal line (see [`crate::escape`]).
fn shown(path: &Path) -> String {
    terminal(&path.display().to_string())
}

/// The plan's ledger under its lock; with `create`, a missing ledger is started.
pub(crate) fn locked(path: &Path, create: bool) -> Result<ledger::Locked> {
    Ledger::lock(path, create)?.ok_or_else(|| Error::Ledger {
        path: path.to_path_buf(),
        message: "there is no ledger: seal the plan first with `sworn seal PLAN`".into(),
    })
}

/// A path with forward slashes, as recorded in the ledger and results.json.
pub(crate) fn slashed(p: &Path) -> String {
    p.to_string_lossy().replace('\\', "/")
}
