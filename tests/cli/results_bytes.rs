//! The demo's results.json, byte for byte: a restructuring of the code must not change a
//! single byte of what a run records. The values that change from run to run (entry times,
//! the ledger head that hashes them and the results digest that covers both) are replaced by
//! fixed marks; everything else must equal `tests/snapshots/PLAN.results.json` exactly
//! (re-bless with `SWORN_BLESS=1` only after a reviewed change to the numbers or keys).

use crate::common::run_in;
use std::path::Path;

const PLANS: [&str; 2] = ["cool-roofs", "grid-demand"];

/// Every string value under a key named `key`, anywhere in `v`.
fn values_under(v: &serde_json::Value, key: &str, out: &mut Vec<String>) {
    match v {
        serde_json::Value::Object(map) => {
            for (k, child) in map {
                match child {
                    serde_json::Value::String(s) if k == key => out.push(s.clone()),
                    _ => values_under(child, key, out),
                }
            }
        }
        serde_json::Value::Array(items) => items.iter().for_each(|c| values_under(c, key, out)),
        _ => {}
    }
}

/// results.json with its run-to-run values replaced by marks. Each replaced value is quoted,
/// so a mark can only stand where a whole JSON string was.
fn normalized(text: &str) -> String {
    let json: serde_json::Value = serde_json::from_str(text).expect("results.json parses");
    let mut out = text.to_string();
    for (key, mark) in [
        ("time", "TIME"),
        ("ledger_head", "LEDGER-HEAD"),
        ("digest", "RESULTS-DIGEST"),
    ] {
        let mut found = Vec::new();
        values_under(&json, key, &mut found);
        assert!(
            !found.is_empty(),
            "results.json has no `{key}` value to mark"
        );
        for value in found {
            out = out.replace(&format!("\"{value}\""), &format!("\"{mark}\""));
        }
    }
    out
}

#[test]
fn demo_results_json_is_byte_identical_to_its_snapshot() {
    let dir = tempfile::tempdir().expect("temp dir");
    let d = run_in(dir.path(), &["demo", "--out", "demo"]);
    assert_eq!(d.code, 0, "{}{}", d.stdout, d.stderr);
    let bless = std::env::var_os("SWORN_BLESS").is_some_and(|v| v == "1");
    let snapshots = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/snapshots");
    let mut stale = Vec::new();
    for plan in PLANS {
        let path = dir.path().join("demo/out").join(plan).join("results.json");
        let text = std::fs::read_to_string(&path).expect("results.json");
        let fresh = normalized(&text);
        let snapshot = snapshots.join(format!("{plan}.results.json"));
        if bless {
            std::fs::write(&snapshot, &fresh).expect("write snapshot");
            continue;
        }
        let kept = std::fs::read_to_string(&snapshot)
            .unwrap_or_else(|e| panic!("{}: {e} (bless with SWORN_BLESS=1)", snapshot.display()));
        if kept != fresh {
            let line = kept
                .lines()
                .zip(fresh.lines())
                .position(|(a, b)| a != b)
                .map_or(kept.lines().count().min(fresh.lines().count()) + 1, |i| {
                    i + 1
                });
            stale.push(format!(
                "{plan}: first difference at line {line}:\n  kept:  {}\n  fresh: {}",
                kept.lines().nth(line - 1).unwrap_or("(end)"),
                fresh.lines().nth(line - 1).unwrap_or("(end)")
            ));
        }
    }
    assert!(
        stale.is_empty(),
        "results.json differs from its snapshot (a restructuring must not change it):\n{}",
        stale.join("\n")
    );
}
