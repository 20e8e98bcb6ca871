//! The registered analysis, run beside a plan amended after the data were seen.
//!
//! The ledger keeps the canonical content of the registered version, so the version can be
//! rebuilt as a plan, run on the same data and reported beside the executed one: every
//! registered hypothesis keeps its result as registered (its family's correction computed
//! as registered), with the executed plan's result beside it when that differs.

use super::{analyse, load_tables, Analysed};
use crate::data::Table;
use crate::error::Error;
use crate::plan::Plan;
use crate::results::{canonical_json, AsRegistered, HypothesisResult, SpecResult};
use serde_json::Value as Json;
use std::collections::{BTreeMap, BTreeSet};

/// The registered version rebuilt from its canonical content and run on the same data.
pub struct Rerun {
    /// What results.json reports as `as_registered`.
    pub report: AsRegistered,
    /// The registered version's hypotheses (None when it could not run).
    pub hypotheses: Option<BTreeMap<String, HypothesisResult>>,
}

/// Rebuild and run the registered version whose canonical content is `canonical`, with
/// content fingerprint `sha`. Its data tables are read from the executed plan's files when
/// they are declared with the same id and path (so a verification with relocated data reads
/// the same files).
pub fn rerun(plan: &Plan, canonical: &str, sha: &str) -> Rerun {
    let mut report = AsRegistered {
        content_sha256: sha.to_string(),
        error: None,
        specifications: BTreeMap::new(),
        contingencies: Vec::new(),
    };
    match run(plan, canonical) {
        Ok(a) => {
            report.contingencies = a.contingencies;
            report.specifications = a.fitted.into_iter().map(|(id, f)| (id, f.result)).collect();
            Rerun {
                report,
                hypotheses: Some(a.hypotheses),
            }
        }
        Err(why) => {
            report.error = Some(why);
            Rerun {
                report,
                hypotheses: None,
            }
        }
    }
}

impl Rerun {
    /// Keep only the registered specifications whose results differ from the executed
    /// plan's (changed, removed, or moved by a change elsewhere such as a derived variable).
    pub fn keep_differing(&mut self, executed: &BTreeMap<String, SpecResult>) {
        self.report.specifications.retain(|id, r| {
            executed
                .get(id)
                .is_none_or(|e| canonical_json(e) != canonical_json(r))
        });
    }
}

fn run(plan: &Plan, canonical: &str) -> Result<Analysed, String> {
    let json: Json = serde_json::from_str(canonical)
        .map_err(|e| format!("its recorded content does not parse: {e}"))?;
    let toml::Value::Table(mut table) = to_toml(&json)? else {
        return Err("its recorded content is not a table".into());
    };
    restore_datetimes(&mut table);
    let text = toml::to_string(&table)
        .map_err(|e| format!("its recorded content cannot be written as TOML: {e}"))?;
    // Messages here end up in results.json: they name keys and plan-relative paths only, never
    // this machine's absolute paths, so a verification elsewhere re-derives the same bytes.
    let mut registered = crate::plan::from_text(&plan.path, text)
        .map_err(|e| format!("it no longer loads: {}", portable(&e)))?;
    for src in registered.data.values_mut() {
        if let Some(same) = plan
            .data
            .get(&src.id)
            .filter(|d| d.path_text == src.path_text)
        {
            src.path = same.path.clone();
        }
    }
    let (tables, _): (BTreeMap<String, Table>, _) = load_tables(&registered).map_err(|_| {
        let declared: Vec<String> = registered
            .data
            .values()
            .map(|d| format!("[data.{}] at `{}`", d.id, d.path_text))
            .collect();
        format!(
            "its data cannot be read as it declares them ({})",
            declared.join(", ")
        )
    })?;
    analyse(&registered, &tables, None, None, true)
        .map_err(|e| format!("it stops with an error: {}", portable(&e)))
}

/// The canonical form writes TOML dates as strings; put back the one key the plan format
/// declares as a date (`study.registered`).
fn restore_datetimes(table: &mut toml::Table) {
    let Some(toml::Value::Table(study)) = table.get_mut("study") else {
        return;
    };
    if let Some(v) = study.get_mut("registered") {
        if let Some(d) = v
            .as_str()
            .and_then(|s| s.parse::<toml::value::Datetime>().ok())
        {
            *v = toml::Value::Datetime(d);
        }
    }
}

/// An error's message without this machine's paths.
fn portable(e: &Error) -> String {
    match e {
        Error::Plan { key, message, .. } if key.is_empty() => message.clone(),
        Error::Plan { key, message, .. } => format!("{message} (at `{key}`)"),
        Error::Data { message, .. } => message.clone(),
        Error::Estimation { .. } => e.to_string(),
        _ => "an input could not be read".to_string(),
    }
}

fn to_toml(v: &Json) -> Result<toml::Value, String> {
    Ok(match v {
        Json::Null => return Err("its recorded content holds a value TOML cannot carry".into()),
        Json::Bool(b) => toml::Value::Boolean(*b),
        Json::Number(n) => match n.as_i64() {
            Some(i) => toml::Value::Integer(i),
            None => toml::Value::Float(n.as_f64().unwrap_or(f64::NAN)),
        },
        Json::String(s) => toml::Value::String(s.clone()),
        Json::Array(a) => toml::Value::Array(a.iter().map(to_toml).collect::<Result<_, _>>()?),
        Json::Object(m) => toml::Value::Table(
            m.iter()
                .map(|(k, v)| Ok((k.clone(), to_toml(v)?)))
                .collect::<Result<_, String>>()?,
        ),
    })
}

/// The hypotheses as reported: each registered hypothesis with its result as registered and,
/// when it differs, the executed plan's result beside it (`as_amended`); hypotheses added after
/// the data with their executed result; registered ones removed since with their registered
/// result.
pub fn merge(
    registered: BTreeMap<String, HypothesisResult>,
    mut executed: BTreeMap<String, HypothesisResult>,
) -> BTreeMap<String, HypothesisResult> {
    let mut out = BTreeMap::new();
    for (id, mut r) in registered {
        r.registration = crate::results::HypothesisRegistration::Registered;
        match executed.remove(&id) {
            Some(mut e) => {
                e.registration = crate::results::HypothesisRegistration::Registered;
                if canonical_json(&e) != canonical_json(&r) {
                    r.as_amended = Some(Box::new(e));
                }
            }
            None => r.registration = crate::results::HypothesisRegistration::RemovedAfterData,
        }
        out.insert(id, r);
    }
    for (id, mut e) in executed {
        e.registration = crate::results::HypothesisRegistration::AddedAfterData;
        e.pre_registered = false;
        out.insert(id, e);
    }
    out
}

/// Mark each hypothesis's registration when the registered version was not re-run.
pub fn mark(
    hypotheses: &mut BTreeMap<String, HypothesisResult>,
    has_point: bool,
    registered: Option<&BTreeSet<String>>,
) {
    for (id, h) in hypotheses.iter_mut() {
        h.registration = match (has_point, registered) {
            (false, _) => crate::results::HypothesisRegistration::NotRegistered,
            (true, Some(r)) if !r.contains(id) => {
                crate::results::HypothesisRegistration::AddedAfterData
            }
            _ => crate::results::HypothesisRegistration::Registered,
        };
    }
}
