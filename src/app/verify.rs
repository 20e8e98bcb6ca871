//! `sworn verify DIR`: re-derive a run directory byte for byte from its own plan copy,
//! ledger prefix and data, and say what that proves and what it cannot.
//!
//! A run directory may come from somebody else, so only regular files inside it are read
//! (no symbolic link is followed out of it, no FIFO or device is opened for reading, every
//! read is capped), plus data files: those named with `--data`, or the ones at the run's
//! recorded location. A data file is hashed (streamed) first and parsed only when its SHA-256
//! is the one the run recorded. Exit 0 only when every output re-derives exactly and the run
//! carries no integrity finding.

mod difference;
mod named;

use super::{Outcome, LEDGER_FILE, PLAN_FILE};
use crate::analysis;
use crate::deviation::DeviationCode;
use crate::error::{Error, Result};
use crate::files::{self, Links};
use crate::ledger::{Entry, Event, Ledger, TOOL_VERSION};
use difference::first_difference;
use named::NamedData;
use std::path::{Path, PathBuf};

/// Largest results.json or report read (far above any real run's).
const OUTPUT_CAP: u64 = 256 << 20;
/// Largest plan read.
const PLAN_CAP: u64 = 16 << 20;

/// Deviation codes that are integrity findings besides those of severity `integrity`: the
/// executed analysis differs from the registered one after the data were read.
const FINDING_CODES: &[DeviationCode] = &[
    DeviationCode::AmendedAfterData,
    DeviationCode::AddedAfterData,
    DeviationCode::HypothesisAddedAfterData,
    DeviationCode::PlanNotLatest,
];

/// The registration point: the plan version in force when the data were first read.
struct Registration {
    fingerprint: String,
    line: usize,
    event: &'static str,
    time: String,
}

/// What a verification found.
#[derive(Default)]
struct Verification {
    /// Ways the directory fails to re-derive (or could not be checked).
    problems: Vec<String>,
    /// Integrity findings the run itself records.
    findings: Vec<String>,
    registration: Option<Registration>,
    run: Option<Entry>,
    data: Vec<String>,
}

/// Untrusted text as printed: control and bidi characters made visible.
fn shown(s: &str) -> String {
    crate::escape::terminal(s)
}

/// `sworn verify DIR [--registered sha256:…] [--data PATH…]`.
///
/// # Errors
/// DIR holds no readable results.json (exit 2); everything else is an outcome.
pub fn verify(
    dir: &Path,
    registered: Option<&str>,
    data: &[PathBuf],
    json: bool,
) -> Result<Outcome> {
    let results_path = dir.join("results.json");
    let text =
        files::read_text_capped(&results_path, Links::Refuse, OUTPUT_CAP).map_err(|e| match e {
            Error::Io { source, .. } => Error::io(
                &results_path,
                "cannot read the run's results (is this a run directory?)",
                source,
            ),
            other => other,
        })?;
    let mut v = Verification::default();
    v.check(dir, &text, data);
    if let (Some(want), Some(reg)) = (registered, &v.registration) {
        let want = want.trim().trim_start_matches("sha256:");
        if want != reg.fingerprint {
            v.problems.push(format!(
                "the registered plan's fingerprint is sha256:{}, not the deposited sha256:{}",
                reg.fingerprint,
                shown(want)
            ));
        }
    } else if registered.is_some() {
        v.problems
            .push("the run has no registration point to compare with --registered".into());
    }
    let outcome = if v.problems.is_empty() && v.findings.is_empty() {
        Outcome::Success
    } else {
        Outcome::CheckFailed
    };
    if json {
        super::machine::emit(&v.json(dir, outcome));
    } else {
        v.print(dir);
    }
    Ok(outcome)
}

/// What verify cannot establish, printed with every verification.
const NOT_ESTABLISHED: &str = "ledger times come from the clock of the machine that ran sworn, and a ledger can be rebuilt by its author; only the fingerprint deposited with the registry (compare it with --registered) ties the plan to a date. A verified run shows the registered analysis was executed as recorded, not that the design is valid.";

impl Verification {
    fn check(&mut self, dir: &Path, text: &str, data: &[PathBuf]) {
        let Some((recorded, recomputed)) = crate::results::digest_of_text(text) else {
            self.problems.push("results.json is not a valid sworn results file (it does not parse or has no digest): it was changed after the run".into());
            return;
        };
        if recorded != recomputed {
            self.problems.push(
                "results.json does not match its own digest: it was edited after the run".into(),
            );
        }
        let json: serde_json::Value = serde_json::from_str(text).unwrap_or_default();
        self.findings_of(&json);
        if json["plan"]["path"].as_str() != Some(PLAN_FILE) {
            self.problems.push(format!(
                "results.json does not name the run directory's own plan copy `{PLAN_FILE}` (written by an older sworn, or edited); nothing outside the directory is read in its place"
            ));
            return;
        }
        let Some(ledger) = self.ledger(dir) else {
            return;
        };
        let Some(run) = self.run_entry(&ledger, &recorded) else {
            return;
        };
        self.outputs(dir, &run);
        let at = ledger.index_of(run.seq).unwrap_or(0);
        let prefix = ledger.prefix(run.basis.map_or(at, |b| (b as usize).min(at)));
        self.registration = registration(&prefix);
        let source = json["plan"]["source"].as_str().unwrap_or("").to_string();
        self.run = Some(run.clone());
        let Some(plan) = self.plan(dir, &run, &source, data) else {
            return;
        };
        let made_by = (self.problems.is_empty() && run.tool_version != TOOL_VERSION)
            .then(|| run.tool_version.clone());
        self.rederive(dir, &plan, &prefix, &source, made_by.as_deref());
    }

    fn findings_of(&mut self, json: &serde_json::Value) {
        for d in json["deviations"].as_array().into_iter().flatten() {
            let code = d["code"].as_str().unwrap_or("");
            if d["severity"] == "integrity" || FINDING_CODES.iter().any(|c| c.as_str() == code) {
                self.findings.push(format!(
                    "{} ({}): {}",
                    shown(code),
                    shown(d["subject"].as_str().unwrap_or("")),
                    shown(d["message"].as_str().unwrap_or(""))
                ));
            }
        }
    }

    fn ledger(&mut self, dir: &Path) -> Option<Ledger> {
        let path = dir.join(LEDGER_FILE);
        match Ledger::read_with(&path, Links::Refuse) {
            Ok(Some(l)) => {
                let problems = l.problems();
                self.problems
                    .extend(problems.iter().map(|p| format!("{LEDGER_FILE}: {p}")));
                Some(l)
            }
            Ok(None) => {
                self.problems.push(format!("{LEDGER_FILE} is missing: the run directory must hold the ledger up to its own run entry"));
                None
            }
            Err(e) => {
                self.problems.push(shown(&e.to_string()));
                None
            }
        }
    }

    fn run_entry(&mut self, ledger: &Ledger, recorded: &str) -> Option<Entry> {
        let last = ledger.entries().last().cloned();
        match last {
            Some(e) if e.event == Event::Run && e.results_digest.as_deref() == Some(recorded) => {
                Some(e)
            }
            _ => {
                self.problems.push(format!("{LEDGER_FILE} does not end with a run entry recording these results (digest {})", shown(recorded)));
                None
            }
        }
    }

    fn outputs(&mut self, dir: &Path, run: &Entry) {
        for (name, sha) in run.outputs.iter().flatten() {
            if name.contains(['/', '\\']) || name.starts_with('.') {
                self.problems.push(format!(
                    "the run entry names an output `{}` outside the directory",
                    shown(name)
                ));
                continue;
            }
            match files::read_capped(&dir.join(name), Links::Refuse, OUTPUT_CAP) {
                Ok(b) if crate::ledger::sha256_hex(&b) == *sha => {}
                Ok(_) => self
                    .problems
                    .push(format!("{name} differs from the file the run wrote")),
                Err(e) => self
                    .problems
                    .push(format!("{name}: {}", shown(&e.to_string()))),
            }
        }
    }

    fn plan(
        &mut self,
        dir: &Path,
        run: &Entry,
        source: &str,
        data: &[PathBuf],
    ) -> Option<crate::plan::Plan> {
        let path = dir.join(PLAN_FILE);
        let text = match files::read_text_capped(&path, Links::Refuse, PLAN_CAP) {
            Ok(t) => t,
            Err(e) => {
                self.problems.push(shown(&e.to_string()));
                return None;
            }
        };
        let abs = std::path::absolute(&path).unwrap_or(path);
        let print = crate::ledger::PlanPrint::of(&abs, &text).ok();
        if print.is_none() || run.plan != print {
            self.problems.push(format!(
                "{PLAN_FILE} is not the plan the run entry records (its fingerprints differ)"
            ));
            return None;
        }
        let mut plan = match crate::plan::from_text(&abs, text) {
            Ok(p) => p,
            Err(e) => {
                self.problems.push(format!(
                    "the plan cannot be loaded: {}",
                    shown(&e.to_string())
                ));
                return None;
            }
        };
        let base = dir.join(Path::new(source).parent().unwrap_or(Path::new("")));
        let recorded = run.data.clone().unwrap_or_default();
        let mut named = NamedData::new(data);
        let mut all_found = true;
        for src in plan.data.values_mut() {
            let want = recorded.get(&src.id).cloned().unwrap_or_default();
            let default = base.join(&src.path_text);
            match named.find(&want, &default, &mut self.problems, &src.id) {
                Some(p) => {
                    self.data.push(format!(
                        "[data.{}] sha256:{want} {}",
                        src.id,
                        shown(&p.display().to_string())
                    ));
                    src.path = p;
                }
                None => all_found = false,
            }
        }
        self.problems.append(&mut named.problems);
        all_found.then_some(plan)
    }

    /// Runs the plan again and compares each output byte for byte. `made_by`: the version of
    /// sworn the ledger's run entry records, when it is not this one and nothing else was
    /// found wrong; a difference is then explained as possibly the version's.
    fn rederive(
        &mut self,
        dir: &Path,
        plan: &crate::plan::Plan,
        prefix: &Ledger,
        source: &str,
        made_by: Option<&str>,
    ) {
        let out = analysis::load_tables(plan)
            .and_then(|(t, d)| super::execute(plan, prefix, source, &t, d));
        let out = match out {
            Ok(o) => o,
            Err(e) => {
                self.problems.push(format!(
                    "the run cannot be re-derived: {}",
                    shown(&e.to_string())
                ));
                return;
            }
        };
        for (name, fresh) in &out.files {
            let Ok(on_disk) = files::read_capped(&dir.join(name), Links::Refuse, OUTPUT_CAP) else {
                continue; // already reported by `outputs`
            };
            if on_disk != fresh.as_bytes() {
                if let Some(version) = made_by.filter(|_| name == "results.json") {
                    self.problems.push(version_note(version));
                }
                self.problems.push(first_difference(name, &on_disk, fresh));
            }
        }
    }

    fn json(&self, dir: &Path, outcome: Outcome) -> serde_json::Value {
        use serde_json::json;
        let registered = self.registration.as_ref().map(|r| {
            json!({
                "fingerprint": format!("sha256:{}", r.fingerprint),
                "event": r.event,
                "ledger_line": r.line,
                "recorded": r.time,
            })
        });
        let run = self.run.as_ref().map(|run| {
            json!({
                "ledger_line": run.seq,
                "recorded": run.time,
                "plan_content_sha256": run.plan.as_ref().map(|p| p.content_sha256.clone()),
            })
        });
        super::machine::envelope(
            "verify",
            outcome.code(),
            json!({
                "dir": dir.display().to_string(),
                "verified": outcome == Outcome::Success,
                "rederives": self.problems.is_empty(),
                "registered_plan": registered,
                "run": run,
                "data": self.data,
                "rederivation_problems": self.problems,
                "integrity_findings": self.findings,
                "not_established": NOT_ESTABLISHED,
            }),
        )
    }

    fn print(&self, dir: &Path) {
        println!("verify {}", shown(&dir.display().to_string()));
        match &self.registration {
            Some(r) => println!(
                "  registered plan: sha256:{} ({} at ledger line {}, recorded {})",
                r.fingerprint, r.event, r.line, r.time
            ),
            None => println!("  registered plan: none (the ledger holds no seal before the data were first read)"),
        }
        if let Some(run) = &self.run {
            println!(
                "  this run: ledger line {}, recorded {}, plan content sha256:{}",
                run.seq,
                shown(&run.time),
                run.plan
                    .as_ref()
                    .map_or(String::new(), |p| shown(&p.content_sha256))
            );
        }
        for d in &self.data {
            println!("  data: {d}");
        }
        if self.problems.is_empty() {
            println!("  re-derivation: every output file matches, byte for byte");
        } else {
            println!("  re-derivation FAILED:");
            for p in &self.problems {
                println!("    - {p}");
            }
        }
        if self.findings.is_empty() {
            println!("  integrity findings: none");
        } else {
            println!("  integrity findings ({}):", self.findings.len());
            for f in &self.findings {
                println!("    - {f}");
            }
        }
        println!("  not established: {NOT_ESTABLISHED}");
        let verdict = match (self.problems.is_empty(), self.findings.is_empty()) {
            (true, true) => "verified: the outputs re-derive exactly and the run carries no integrity finding".to_string(),
            (false, true) => "NOT verified: the outputs do not re-derive (see above)".to_string(),
            (true, false) => format!("NOT verified: the outputs re-derive, but the run carries {} integrity finding(s)", self.findings.len()),
            (false, false) => format!("NOT verified: the outputs do not re-derive, and the run carries {} integrity finding(s)", self.findings.len()),
        };
        println!("{verdict}");
    }
}

/// What verify says when the ledger's run entry names another version of sworn and the
/// results do not re-derive.
fn version_note(made_by: &str) -> String {
    format!(
        "the ledger records that sworn {} made this run, and this is sworn {TOOL_VERSION}: versions can compute the same plan on the same data differently (rounding, and rules that changed between versions), so a byte-for-byte check needs sworn {}; this check does not show whether the differences below come from the version or from the plan and data",
        shown(made_by),
        shown(made_by)
    )
}

/// The registration point (see [`crate::ledger::Moment`]): the last seal or amendment before
/// the data were first seen; before the run, when the prefix records no data being seen.
fn registration(ledger: &Ledger) -> Option<Registration> {
    let line = ledger.registered().or_else(|| ledger.versions().last())?;
    let e = line.entry;
    Some(Registration {
        fingerprint: e.plan.as_ref()?.content_sha256.clone(),
        line: line.number,
        event: if e.event == Event::Sealed {
            "sealed"
        } else {
            "amended"
        },
        time: shown(&e.time),
    })
}

#[cfg(test)]
mod version_tests {
    use super::*;

    /// The note names the version the ledger records and the one needed, and claims no more
    /// than that the version may explain the differences.
    #[test]
    fn the_version_note_names_both_versions_and_claims_no_cause() {
        let note = version_note("0.0.9");
        assert!(note.contains("sworn 0.0.9 made this run"), "{note}");
        assert!(
            note.contains(&format!("this is sworn {TOOL_VERSION}")),
            "{note}"
        );
        assert!(note.contains("needs sworn 0.0.9"), "{note}");
        assert!(note.contains("does not show whether"), "{note}");
        assert!(!note.contains("last digits"), "{note}");
    }
}
