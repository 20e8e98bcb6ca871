//! Fingerprints (SHA-256) and the hash-chained, append-only ledger beside each plan.
//!
//! The ledger is a JSON-lines file. Every entry records `prev`, the SHA-256 of the previous
//! line's bytes (64 zeros for the first), so editing, removing or reordering any line breaks
//! the chain at the next one. Reading and appending live in [`store`]: an append takes an
//! exclusive lock, re-reads the file under it and writes one line at the end (never a
//! rewrite), so simultaneous commands cannot lose each other's entries.

mod registration;
mod store;

pub use registration::{is_version, Line, Moment};
pub use store::{Ledger, Locked, MAX_BAD};

use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};

/// The version of this tool, recorded in every entry and output.
pub const TOOL_VERSION: &str = env!("CARGO_PKG_VERSION");

pub use crate::files::{hex, sha256_hex};

/// The plan's two fingerprints and its canonical form.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanPrint {
    /// SHA-256 of the canonical form (comment-only edits leave it unchanged).
    pub content_sha256: String,
    /// SHA-256 of the file's bytes.
    pub bytes_sha256: String,
    /// The canonical form itself, so later entries can list which keys changed.
    pub canonical: String,
}

impl PlanPrint {
    /// Fingerprint a plan's text.
    pub fn of(path: &Path, text: &str) -> Result<Self> {
        let canonical = crate::plan::canonical::canonical_text(path, text)?;
        Ok(PlanPrint {
            content_sha256: sha256_hex(canonical.as_bytes()),
            bytes_sha256: sha256_hex(text.as_bytes()),
            canonical,
        })
    }
}

/// What an entry records.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Event {
    /// The plan was sealed.
    Sealed,
    /// The plan was changed, with a reason.
    Amended,
    /// The data files were read for the first time by a run (results are about to be
    /// computed).
    DataFirstRead,
    /// `sworn check --data` read the data files of a sealed plan (the data were seen).
    DataInspected,
    /// A run wrote outputs.
    Run,
    /// `sworn rehearse` simulated the study (no data read; never counts as a data read).
    Rehearsed,
}

/// A rehearsal's power as its `rehearsed` entry records it: what a run's report cites as
/// "power as rehearsed", read from the ledger (which `verify` re-reads) rather than from the
/// rehearsal's folder, which may have moved.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PowerRecord {
    /// Simulated data sets per effect size.
    pub replications: usize,
    /// Power at which the minimum detectable effect was read.
    pub target_power: f64,
    /// Effect sizes simulated (0 first).
    pub effects: Vec<f64>,
    /// Per hypothesis id.
    pub hypotheses: BTreeMap<String, HypothesisPowerRecord>,
}

/// One hypothesis in a [`PowerRecord`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HypothesisPowerRecord {
    /// Share of simulated data sets supporting the claim, per effect size (same order).
    pub power: Vec<f64>,
    /// The minimum detectable effect at the target power (null: none within the sizes).
    pub mde: Option<f64>,
}

/// A baseline file a rehearsal read: the path as the plan writes it and the file's SHA-256.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BaselineFileRecord {
    /// The path as written in the plan (relative to the plan file).
    pub path: String,
    /// SHA-256 of the file's bytes.
    pub sha256: String,
}

/// One ledger line.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Entry {
    /// 1-based position in the ledger.
    pub seq: u64,
    /// UTC time, RFC 3339.
    pub time: String,
    /// What happened.
    pub event: Event,
    /// Plan fingerprints (sealed, amended, run).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub plan: Option<PlanPrint>,
    /// Reason for an amendment.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reason: Option<String>,
    /// Data file fingerprints by table id (data-inspected, data-first-read, run).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub data: Option<BTreeMap<String, String>>,
    /// Digest of results.json (run).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub results_digest: Option<String>,
    /// SHA-256 of each output file by name (run).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub outputs: Option<BTreeMap<String, String>>,
    /// Number of ledger lines the run's integrity was judged against (run); later lines were
    /// appended by other commands while it ran.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub basis: Option<u64>,
    /// The run directory, relative to the plan's folder (run).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub out: Option<String>,
    /// SHA-256 of a rehearsal's assumptions: its canonical `[rehearsal]` section and
    /// replication count (rehearsed).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub assumptions: Option<String>,
    /// What a rehearsal found (rehearsed), so a later run can cite it from the ledger alone.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub power: Option<PowerRecord>,
    /// Baseline files a rehearsal started from, by table id (rehearsed). Never study data:
    /// they are kept apart from `data`, so they never count as reading the data.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub baselines: Option<BTreeMap<String, BaselineFileRecord>>,
    /// Version of sworn that wrote the entry.
    pub tool_version: String,
    /// SHA-256 of the previous line's bytes.
    pub prev: String,
}

impl Entry {
    /// A new entry of `event` with no fields set yet (seq, time and prev are set on append).
    pub fn new(event: Event) -> Self {
        Entry {
            seq: 0,
            time: String::new(),
            event,
            plan: None,
            reason: None,
            data: None,
            results_digest: None,
            outputs: None,
            basis: None,
            out: None,
            assumptions: None,
            power: None,
            baselines: None,
            tool_version: TOOL_VERSION.to_string(),
            prev: String::new(),
        }
    }
}

/// The ledger path for a plan: `PLAN-stem.ledger` beside the plan.
pub fn ledger_path(plan: &Path) -> PathBuf {
    let stem = plan.file_stem().and_then(|s| s.to_str()).unwrap_or("plan");
    plan.with_file_name(format!("{stem}.ledger"))
}

/// Write a file through a temporary sibling and a rename, so readers never see half of it.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("out");
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    result.map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        Error::io(path, "cannot write the file", e)
    })
}

/// The current UTC time as RFC 3339 with seconds, e.g. `2026-12-01T18:06:19Z`.
pub fn now_rfc3339() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    format_utc(secs)
}

/// Format seconds since the Unix epoch as RFC 3339 UTC.
///
/// # Formula
/// Civil-from-days conversion of the proleptic Gregorian calendar (H. Hinnant,
/// "chrono-Compatible Low-Level Date Algorithms", the `civil_from_days` algorithm).
pub fn format_utc(secs: u64) -> String {
    let days = (secs / 86_400) as i64;
    let rem = secs % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_of_known_strings() {
        // FIPS 180-2, Appendix B.1: SHA-256("abc").
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        // SHA-256 of the empty string (FIPS 180-4 test vectors; from memory).
        assert_eq!(
            sha256_hex(b""),
            "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
        );
    }

    #[test]
    fn utc_formatting() {
        // Unix epoch and well-known instants (date(1) -u -d @N; from memory).
        assert_eq!(format_utc(0), "1970-01-01T00:00:00Z");
        assert_eq!(format_utc(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(format_utc(1_709_210_096), "2024-02-29T12:34:56Z");
    }
}
