//! Deviations: every way the executed analysis differs from the registered one.
//!
//! A deviation has a stable `code` (scripts key on it), a severity and a message that says
//! what happened in words. `note`s are shown but are not deviations; `deviation`s must be
//! disclosed; `integrity` marks seal, ledger or fingerprint failures.

use serde::Serialize;

/// How serious a deviation is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Severity {
    /// Shown, not a deviation.
    Note,
    /// Must be disclosed.
    Deviation,
    /// Seal, ledger or data fingerprint failure.
    Integrity,
}

impl Severity {
    /// The spelling used in outputs.
    pub fn name(self) -> &'static str {
        match self {
            Severity::Note => "note",
            Severity::Deviation => "deviation",
            Severity::Integrity => "integrity",
        }
    }
}

/// One departure from the plan, or a note about the run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Deviation {
    /// Stable machine-readable code, e.g. `rows-out-of-range`.
    pub code: &'static str,
    /// Severity.
    pub severity: Severity,
    /// What it concerns: a data table, column, specification or the plan.
    pub subject: String,
    /// What happened, in words.
    pub message: String,
}

impl Deviation {
    /// A deviation of the given code and severity.
    pub fn new(
        code: &'static str,
        severity: Severity,
        subject: impl Into<String>,
        message: impl Into<String>,
    ) -> Self {
        Deviation {
            code,
            severity,
            subject: subject.into(),
            message: message.into(),
        }
    }
}

/// Sort deviations for output: integrity first, then deviations, then notes; stable within.
pub fn sort(devs: &mut [Deviation]) {
    devs.sort_by_key(|d| std::cmp::Reverse(d.severity));
}
