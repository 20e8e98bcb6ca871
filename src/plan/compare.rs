//! Two plan versions compared element by element (canonical JSON of the plan): which
//! specifications, hypotheses, families, data tables and sections were added, removed or
//! changed, each changed key shown old → new. Used by `sworn diff` and by the run's
//! integrity assessment against the registered version.

use serde_json::Value as Json;

/// How an element differs between two versions.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// Only in the later version.
    Added,
    /// Only in the earlier version.
    Removed,
    /// In both, with different content.
    Changed,
}

impl Kind {
    /// The word used in output.
    pub fn name(self) -> &'static str {
        match self {
            Kind::Added => "added",
            Kind::Removed => "removed",
            Kind::Changed => "changed",
        }
    }
}

/// One element's change, with its keys shown old → new.
#[derive(Debug)]
pub struct Change {
    /// Added, removed or changed.
    pub kind: Kind,
    /// `section[id]`, `section.name` or a section.
    pub element: String,
    /// Each changed key as `key: old → new` (all keys for an added element).
    pub keys: Vec<String>,
}

fn id_of(v: &Json) -> Option<&str> {
    v.get("id").and_then(Json::as_str)
}

fn with_ids(v: &Json) -> Option<&Vec<Json>> {
    v.as_array()
        .filter(|a| !a.is_empty() && a.iter().all(|x| id_of(x).is_some()))
}

fn tables_only(v: &Json) -> Option<&serde_json::Map<String, Json>> {
    v.as_object()
        .filter(|m| !m.is_empty() && m.values().all(Json::is_object))
}

/// The plan's elements: `section[id]` for arrays of tables with ids, `section.name` for
/// tables of tables (data tables, families), the section itself otherwise.
fn elements(v: &Json) -> Vec<(String, &Json)> {
    let mut out = Vec::new();
    let Some(map) = v.as_object() else {
        return vec![("(plan)".into(), v)];
    };
    for (k, val) in map {
        if let Some(items) = with_ids(val) {
            for item in items {
                out.push((format!("{k}[{}]", id_of(item).unwrap_or_default()), item));
            }
        } else if let Some(sub) = tables_only(val) {
            for (name, t) in sub {
                out.push((format!("{k}.{name}"), t));
            }
        } else {
            out.push((k.clone(), val));
        }
    }
    out
}

fn show(v: &Json) -> String {
    let mut s = String::new();
    crate::plan::canonical::write_canonical(v, &mut s);
    s
}

fn key_changes(a: &Json, b: &Json, path: &str, out: &mut Vec<String>) {
    let name = |k: &str| {
        if path.is_empty() {
            k.to_string()
        } else {
            format!("{path}.{k}")
        }
    };
    match (a, b) {
        (Json::Object(x), Json::Object(y)) => {
            let mut keys: Vec<&String> = x.keys().chain(y.keys()).collect();
            keys.sort();
            keys.dedup();
            for k in keys {
                match (x.get(k), y.get(k)) {
                    (Some(va), Some(vb)) => key_changes(va, vb, &name(k), out),
                    (Some(va), None) => out.push(format!("{}: {} → (absent)", name(k), show(va))),
                    (None, Some(vb)) => out.push(format!("{}: (absent) → {}", name(k), show(vb))),
                    (None, None) => {}
                }
            }
        }
        _ if a != b => out.push(format!(
            "{}: {} → {}",
            if path.is_empty() { "(value)" } else { path },
            show(a),
            show(b)
        )),
        _ => {}
    }
}

/// The names of a plan's elements (see [`element_changes`]), in canonical order.
pub fn element_names(v: &Json) -> Vec<String> {
    elements(v).into_iter().map(|(name, _)| name).collect()
}

/// Every element added, removed or changed between two canonical plans, with its keys.
pub fn element_changes(a: &Json, b: &Json) -> Vec<Change> {
    let old = elements(a);
    let new = elements(b);
    let mut out = Vec::new();
    for (name, va) in &old {
        match new.iter().find(|(n, _)| n == name) {
            Some((_, vb)) if va != vb => {
                let mut keys = Vec::new();
                key_changes(va, vb, "", &mut keys);
                out.push(Change {
                    kind: Kind::Changed,
                    element: name.clone(),
                    keys,
                });
            }
            Some(_) => {}
            None => out.push(Change {
                kind: Kind::Removed,
                element: name.clone(),
                keys: vec![],
            }),
        }
    }
    for (name, vb) in &new {
        if !old.iter().any(|(n, _)| n == name) {
            let mut keys = Vec::new();
            if let Json::Object(m) = vb {
                for (k, v) in m {
                    keys.push(format!("{k}: {}", show(v)));
                }
            }
            out.push(Change {
                kind: Kind::Added,
                element: name.clone(),
                keys,
            });
        }
    }
    out
}
