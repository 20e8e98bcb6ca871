//! Two plan versions compared element by element (canonical JSON of the plan): which
//! specifications, hypotheses, families, data tables and sections were added, removed or
//! changed, each changed key shown old → new. Used by `sworn diff` and by the run's
//! integrity assessment against the registered version.

use crate::plan::canonical::{all_have_ids, differences, id_of};
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

fn with_ids(v: &Json) -> Option<&Vec<Json>> {
    v.as_array().filter(|a| all_have_ids(a))
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

/// Each key at which `a` and `b` differ as `key: old → new` (`(absent)` for a missing side,
/// `(value)` when the values themselves differ), arrays compared whole.
fn key_changes(a: &Json, b: &Json) -> Vec<String> {
    let side = |v: Option<&Json>| v.map_or("(absent)".to_string(), show);
    differences(a, b, false)
        .into_iter()
        .map(|d| {
            let path = if d.path.is_empty() {
                "(value)"
            } else {
                &d.path
            };
            format!("{path}: {} → {}", side(d.old), side(d.new))
        })
        .collect()
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
                let keys = key_changes(va, vb);
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
