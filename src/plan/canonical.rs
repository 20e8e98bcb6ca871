//! The canonical form of a plan, which its content fingerprint hashes.
//!
//! The TOML document is turned into JSON with object keys sorted, no whitespace, numbers in
//! shortest round-trip form and dates as strings. Comments, key order, quoting style and
//! layout therefore do not change the fingerprint; any changed value does. [`changed_keys`]
//! lists the dotted key paths at which two canonical forms differ.

use crate::error::{Error, Result};
use serde_json::Value as Json;
use std::path::Path;

/// Canonical JSON text of a plan's TOML source.
pub fn canonical_text(path: &Path, text: &str) -> Result<String> {
    let table: toml::Table = toml::from_str(text).map_err(|e| {
        let (line, column) = e
            .span()
            .map_or((1, 1), |s| super::SourceMap::new(text).position(s.start));
        Error::Plan {
            path: path.to_path_buf(),
            line,
            column,
            key: String::new(),
            message: format!("malformed TOML: {}", e.message()),
        }
    })?;
    let json = to_json(&toml::Value::Table(table));
    let mut out = String::new();
    write_canonical(&json, &mut out);
    Ok(out)
}

fn to_json(v: &toml::Value) -> Json {
    match v {
        toml::Value::String(s) => Json::String(s.clone()),
        toml::Value::Integer(i) => Json::from(*i),
        toml::Value::Float(f) => serde_json::Number::from_f64(*f).map_or(Json::Null, Json::Number),
        toml::Value::Boolean(b) => Json::Bool(*b),
        toml::Value::Datetime(d) => Json::String(d.to_string()),
        toml::Value::Array(a) => Json::Array(a.iter().map(to_json).collect()),
        toml::Value::Table(t) => {
            Json::Object(t.iter().map(|(k, v)| (k.clone(), to_json(v))).collect())
        }
    }
}

/// Write `v` with sorted object keys and no whitespace.
pub fn write_canonical(v: &Json, out: &mut String) {
    match v {
        Json::Object(map) => {
            let mut keys: Vec<&String> = map.keys().collect();
            keys.sort();
            out.push('{');
            for (i, k) in keys.iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                out.push_str(&Json::String((*k).clone()).to_string());
                out.push(':');
                write_canonical(&map[k.as_str()], out);
            }
            out.push('}');
        }
        Json::Array(items) => {
            out.push('[');
            for (i, item) in items.iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                write_canonical(item, out);
            }
            out.push(']');
        }
        other => out.push_str(&other.to_string()),
    }
}

/// Dotted key paths at which two canonical plans differ, sorted. Entries of arrays of
/// tables are named by their `id` when they have one (`specification[temp_iv].outcome`).
pub fn changed_keys(old: &str, new: &str) -> Vec<String> {
    let (Ok(a), Ok(b)) = (
        serde_json::from_str::<Json>(old),
        serde_json::from_str::<Json>(new),
    ) else {
        return vec!["(whole plan)".to_string()];
    };
    let mut out: Vec<String> = differences(&a, &b, true)
        .into_iter()
        .map(|d| {
            if d.path.is_empty() {
                "(root)".to_string()
            } else {
                d.path
            }
        })
        .collect();
    out.sort();
    out.dedup();
    out
}

/// One place two canonical values differ: its dotted path (empty for the values
/// themselves) and the value on each side (`None`: absent on that side).
#[derive(Debug)]
pub struct Difference<'a> {
    /// Dotted path, `key.sub`, `array[id]` or `array (order)`.
    pub path: String,
    /// The old side.
    pub old: Option<&'a Json>,
    /// The new side.
    pub new: Option<&'a Json>,
}

/// Every place `a` and `b` differ, objects walked key by key in sorted order. With `by_id`,
/// arrays whose entries all carry an `id` are matched entry by entry (`path[id]`; an entry
/// on one side only is a difference of its own) and a change in the order of the common
/// entries is reported as `path (order)`; otherwise arrays are compared whole.
pub fn differences<'a>(a: &'a Json, b: &'a Json, by_id: bool) -> Vec<Difference<'a>> {
    let mut out = Vec::new();
    walk(a, b, String::new(), by_id, &mut out);
    out
}

fn join(prefix: &str, key: &str) -> String {
    if prefix.is_empty() {
        key.to_string()
    } else {
        format!("{prefix}.{key}")
    }
}

fn walk<'a>(a: &'a Json, b: &'a Json, path: String, by_id: bool, out: &mut Vec<Difference<'a>>) {
    match (a, b) {
        (Json::Object(x), Json::Object(y)) => {
            let mut keys: Vec<&String> = x.keys().chain(y.keys()).collect();
            keys.sort();
            keys.dedup();
            for k in keys {
                match (x.get(k), y.get(k)) {
                    (Some(va), Some(vb)) => walk(va, vb, join(&path, k), by_id, out),
                    (old, new) => out.push(Difference {
                        path: join(&path, k),
                        old,
                        new,
                    }),
                }
            }
        }
        (Json::Array(x), Json::Array(y)) if by_id && all_have_ids(x) && all_have_ids(y) => {
            walk_by_id(x, y, &path, out)
        }
        _ if a != b => out.push(Difference {
            path,
            old: Some(a),
            new: Some(b),
        }),
        _ => {}
    }
}

/// The entry of an array of tables with the given `id`.
pub(crate) fn id_of(v: &Json) -> Option<&str> {
    v.get("id").and_then(Json::as_str)
}

/// Whether `items` is a non-empty array of tables each with an `id`.
pub(crate) fn all_have_ids(items: &[Json]) -> bool {
    !items.is_empty() && items.iter().all(|v| id_of(v).is_some())
}

fn walk_by_id<'a>(x: &'a [Json], y: &'a [Json], path: &str, out: &mut Vec<Difference<'a>>) {
    let ids_x: Vec<&str> = x.iter().filter_map(id_of).collect();
    let ids_y: Vec<&str> = y.iter().filter_map(id_of).collect();
    for item in x {
        let id = id_of(item).unwrap_or_default();
        let here = format!("{path}[{id}]");
        match y.iter().find(|v| id_of(v) == Some(id)) {
            Some(other) => walk(item, other, here, true, out),
            None => out.push(Difference {
                path: here,
                old: Some(item),
                new: None,
            }),
        }
    }
    for item in y
        .iter()
        .filter(|v| id_of(v).is_some_and(|id| !ids_x.contains(&id)))
    {
        out.push(Difference {
            path: format!("{path}[{}]", id_of(item).unwrap_or_default()),
            old: None,
            new: Some(item),
        });
    }
    if ids_x
        .iter()
        .filter(|id| ids_y.contains(id))
        .ne(ids_y.iter().filter(|id| ids_x.contains(id)))
    {
        out.push(Difference {
            path: format!("{path} (order)"),
            old: None,
            new: None,
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn canon(text: &str) -> String {
        canonical_text(Path::new("p.toml"), text).expect("valid TOML")
    }

    #[test]
    fn comments_and_layout_do_not_matter() {
        let a = canon("b = 1\na = \"x\" # note\n[t]\nk = [1, 2]\n");
        let b = canon("# header\na='x'\nb=1\n\n[t]\nk=[1,2]");
        assert_eq!(a, b);
        assert_eq!(a, r#"{"a":"x","b":1,"t":{"k":[1,2]}}"#);
    }

    #[test]
    fn changed_values_are_listed_by_id() {
        let a = canon("[[specification]]\nid = \"s1\"\noutcome = \"y\"\n[[specification]]\nid = \"s2\"\noutcome = \"z\"\n");
        let b = canon("[[specification]]\nid = \"s1\"\noutcome = \"w\"\n[[specification]]\nid = \"s3\"\noutcome = \"z\"\n");
        assert_eq!(
            changed_keys(&a, &b),
            vec![
                "specification[s1].outcome",
                "specification[s2]",
                "specification[s3]"
            ]
        );
    }

    #[test]
    fn malformed_toml_names_the_line() {
        let err = canonical_text(Path::new("p.toml"), "a = 1\nb = [\n").unwrap_err();
        let msg = err.to_string();
        assert!(msg.starts_with("p.toml:"), "{msg}");
        assert!(msg.contains("malformed TOML"), "{msg}");
    }
}
