//! Where a re-derived output first differs from the file on disk: the differing keys of
//! results.json, or the first differing line of a report.

use super::shown;

/// Where a re-derived output first differs from the file: a results key or a report line.
pub(super) fn first_difference(name: &str, on_disk: &[u8], fresh: &str) -> String {
    let disk = String::from_utf8_lossy(on_disk);
    if name == "results.json" {
        let a: serde_json::Value = serde_json::from_str(&disk).unwrap_or_default();
        let b: serde_json::Value = serde_json::from_str(fresh).unwrap_or_default();
        let mut keys = Vec::new();
        json_diff("", &a, &b, &mut keys);
        if !keys.is_empty() {
            let more = keys.len().saturating_sub(5);
            keys.truncate(5);
            let list: Vec<String> = keys.iter().map(|k| shown(k)).collect();
            return format!(
                "results.json is not what the plan and data give now; differing keys: {}{}",
                list.join(", "),
                if more > 0 {
                    format!(" and {more} more")
                } else {
                    String::new()
                }
            );
        }
    }
    let line = disk
        .lines()
        .zip(fresh.lines())
        .position(|(a, b)| a != b)
        .unwrap_or_else(|| disk.lines().count().min(fresh.lines().count()));
    let cut = |s: Option<&str>| {
        shown(
            &s.unwrap_or("(no line)")
                .chars()
                .take(80)
                .collect::<String>(),
        )
    };
    format!(
        "{name} is not what the plan and data give now; line {} is \"{}\" in the file, \"{}\" re-derived",
        line + 1,
        cut(disk.lines().nth(line)),
        cut(fresh.lines().nth(line))
    )
}

/// The paths of the keys where `a` and `b` differ, depth first.
fn json_diff(path: &str, a: &serde_json::Value, b: &serde_json::Value, out: &mut Vec<String>) {
    use serde_json::Value;
    match (a, b) {
        (Value::Object(x), Value::Object(y)) => {
            let keys: std::collections::BTreeSet<&String> = x.keys().chain(y.keys()).collect();
            for k in keys {
                let p = if path.is_empty() {
                    k.clone()
                } else {
                    format!("{path}.{k}")
                };
                match (x.get(k), y.get(k)) {
                    (Some(u), Some(w)) => json_diff(&p, u, w, out),
                    _ => out.push(p),
                }
            }
        }
        (Value::Array(x), Value::Array(y)) if x.len() == y.len() => {
            for (i, (u, w)) in x.iter().zip(y).enumerate() {
                json_diff(&format!("{path}[{i}]"), u, w, out);
            }
        }
        _ if a != b => out.push(path.to_string()),
        _ => {}
    }
}
