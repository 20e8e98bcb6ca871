//! `--json` on check, run and verify: one parseable object with the documented keys, the same
//! exit codes as the text output.

use crate::common::Study;
use serde_json::Value;

fn object(stdout: &str) -> Value {
    assert_eq!(stdout.lines().count(), 1, "one line: {stdout}");
    serde_json::from_str(stdout).expect("stdout is one JSON object")
}

#[test]
fn check_run_and_verify_print_one_object_each() {
    let s = Study::new();
    let r = s.sworn(&["check", "plan.toml", "--data", "--json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let c = object(&r.stdout);
    assert_eq!(c["json_format"], 1);
    assert_eq!(c["command"], "check");
    assert_eq!(c["data_match_schema"], true);
    assert_eq!(c["data"][0]["table"], "main");
    assert_eq!(c["data"][0]["rows"], 240);

    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["run", "plan.toml", "--out", "out", "--json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let run = object(&r.stdout);
    assert_eq!(run["command"], "run");
    let results: Value = serde_json::from_str(&s.read("out/results.json")).expect("results");
    assert_eq!(run["results_digest"], results["digest"]);
    let hypotheses = run["hypotheses"].as_array().expect("hypotheses");
    assert_eq!(
        hypotheses.len(),
        results["hypotheses"].as_object().map_or(0, |h| h.len())
    );

    let r = s.sworn(&["verify", "out", "--json"]);
    assert_eq!(r.code, 0, "{}", r.stdout);
    let v = object(&r.stdout);
    assert_eq!(v["verified"], true);
    assert_eq!(v["exit_code"], 0);
    assert!(v["registered_plan"]["fingerprint"]
        .as_str()
        .is_some_and(|f| f.starts_with("sha256:")));
    assert!(v["not_established"]
        .as_str()
        .is_some_and(|t| t.contains("registry")));

    // A tampered report: the same exit code as the text output, and the problem listed.
    let report = s.read("out/report.md");
    s.write("out/report.md", &format!("{report}\nextra line\n"));
    let r = s.sworn(&["verify", "out", "--json"]);
    assert_eq!(r.code, 1);
    let v = object(&r.stdout);
    assert_eq!(v["verified"], false);
    assert_eq!(v["rederives"], false);
    assert!(v["rederivation_problems"]
        .as_array()
        .is_some_and(|p| !p.is_empty()));
}

#[test]
fn an_error_is_an_object_too_and_hostile_text_cannot_break_it() {
    let s = Study::new();
    let r = s.sworn(&["check", "absent.toml", "--json"]);
    assert_eq!(r.code, 2);
    let e = object(&r.stdout);
    assert_eq!(e["exit_code"], 2);
    assert!(e["error"]
        .as_str()
        .is_some_and(|m| m.contains("absent.toml")));
    assert!(
        r.stderr.contains("absent.toml"),
        "the text error stays on stderr"
    );

    s.edit(
        "plan.toml",
        "title = \"Test study\"",
        "title = \"x\\\"}\\n{\\\"verified\\\": true\\u001b[2J\"",
    );
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["run", "plan.toml", "--out", "out", "--json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let run = object(&r.stdout);
    assert_eq!(run["command"], "run");
}
