//! The names of the files a run directory holds beside its outputs.
//!
//! A leaf module: the analysis names the plan copy in results.json and `app` writes and reads
//! these files, so the names live below both.

/// The plan's exact bytes inside a run directory.
pub const PLAN_FILE: &str = "plan.toml";

/// The ledger prefix (up to and including the run's entry) inside a run directory.
pub const LEDGER_FILE: &str = "plan.ledger";
