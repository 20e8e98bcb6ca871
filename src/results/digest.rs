//! results.json as text and its digest: the canonical serialisation (sorted keys, no
//! whitespace, shortest round-trip numbers) is written by one function, [`canonical_text`],
//! and hashed by one, [`digest_of_value`]; the file itself is pretty JSON with sorted keys.

use super::Results;
use serde::Serialize;
use serde_json::Value;

/// Canonical JSON text of a JSON value (sorted keys, no whitespace).
fn canonical_text(v: &Value) -> String {
    let mut out = String::new();
    crate::plan::canonical::write_canonical(v, &mut out);
    out
}

/// `sha256:` + the SHA-256 of a value's canonical text.
fn digest_of_value(v: &Value) -> String {
    format!(
        "sha256:{}",
        crate::ledger::sha256_hex(canonical_text(v).as_bytes())
    )
}

/// Canonical JSON text of a serialisable value (sorted keys, no whitespace).
pub fn canonical_json<T: Serialize>(value: &T) -> String {
    canonical_text(&serde_json::to_value(value).unwrap_or(Value::Null))
}

impl Results {
    /// The digest of everything but the digest field.
    pub fn compute_digest(&self) -> String {
        let mut v = serde_json::to_value(self).unwrap_or(Value::Null);
        if let Some(map) = v.as_object_mut() {
            map.remove("digest");
        }
        digest_of_value(&v)
    }

    /// The file's text: pretty JSON with sorted keys and a final newline.
    pub fn to_file_text(&self) -> String {
        let v = serde_json::to_value(self).unwrap_or(Value::Null);
        let mut text = serde_json::to_string_pretty(&sorted(v)).unwrap_or_default();
        text.push('\n');
        text
    }
}

/// Digest check of a results.json text: the recorded digest, and the recomputed one.
pub fn digest_of_text(text: &str) -> Option<(String, String)> {
    let mut v: Value = serde_json::from_str(text).ok()?;
    let recorded = v.get("digest")?.as_str()?.to_string();
    v.as_object_mut()?.remove("digest");
    Some((recorded, digest_of_value(&v)))
}

/// Rebuild a JSON value with object keys in sorted order (whatever map type serde_json uses).
fn sorted(v: Value) -> Value {
    match v {
        Value::Object(map) => {
            let mut entries: Vec<(String, Value)> = map.into_iter().collect();
            entries.sort_by(|a, b| a.0.cmp(&b.0));
            Value::Object(entries.into_iter().map(|(k, v)| (k, sorted(v))).collect())
        }
        Value::Array(a) => Value::Array(a.into_iter().map(sorted).collect()),
        other => other,
    }
}
