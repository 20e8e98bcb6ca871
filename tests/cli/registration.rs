//! Issue 9: the registration point, the two moments after it, and the registered analysis
//! run beside a plan amended after the data were seen.

use crate::common::{codes, Study};

fn ledger_events(s: &Study) -> Vec<String> {
    s.read("plan.ledger")
        .lines()
        .filter_map(|l| serde_json::from_str::<serde_json::Value>(l).ok())
        .filter_map(|e| e["event"].as_str().map(String::from))
        .collect()
}

fn element<'a>(r: &'a serde_json::Value, name: &str) -> &'a serde_json::Value {
    r["registration"]["elements"]
        .as_array()
        .and_then(|a| a.iter().find(|e| e["element"] == name))
        .unwrap_or_else(|| panic!("no element {name} in {}", r["registration"]))
}

/// Weakening the family's correction (holm → none) after results were computed: every
/// registered hypothesis keeps its Holm-adjusted p-value as registered, the amended value is
/// reported beside it, and the banner names the moment.
#[test]
fn weakened_correction_after_results_keeps_the_registered_family() {
    let s = Study::new();
    // A TOML date in the plan: the registered version is rebuilt from its canonical form,
    // which writes dates as strings.
    s.edit(
        "plan.toml",
        "title = \"Test study\"",
        "title = \"Test study\"\nregistered = 2026-05-01",
    );
    let before = s.seal_and_run();
    s.edit(
        "plan.toml",
        "correction = \"holm\"",
        "correction = \"none\"",
    );
    let a = s.sworn(&["amend", "plan.toml", "--reason", "fewer tests"]);
    assert_eq!(a.code, 0, "{}", a.stderr);
    assert!(
        a.stdout
            .contains("this amendment is made after results were computed"),
        "{}",
        a.stdout
    );
    let r = s.run_ok();
    for id in ["H1", "H2"] {
        let h = &r["hypotheses"][id];
        assert_eq!(h["registration"], "registered");
        assert_eq!(
            h["adjusted_p_value"], before["hypotheses"][id]["adjusted_p_value"],
            "{id}"
        );
        assert_eq!(h["correction"], "holm", "{id}");
        assert_eq!(h["as_amended"]["correction"], "none", "{id}");
        assert_eq!(h["as_amended"]["adjusted_p_value"], h["p_value"], "{id}");
    }
    let fam = element(&r, "family.main");
    assert_eq!(fam["status"], "changed");
    assert_eq!(fam["after"], "results-computed");
    assert_eq!(fam["reason"], "fewer tests");
    assert_eq!(fam["amendment_line"], 4, "{fam}");
    assert_eq!(element(&r, "specification[ols]")["status"], "unchanged");
    assert_eq!(
        r["as_registered"]["content_sha256"],
        before["plan"]["content_sha256"]
    );
    assert!(r["as_registered"]["error"].is_null());
    let md = s.read("out/report.md");
    assert!(md.contains("## Registered and amended analyses"), "{md}");
    let html = s.read("out/report.html");
    assert!(
        html.contains("<h2>Registered and amended analyses</h2>"),
        "{html}"
    );
    assert!(
        md.contains("NOT AS REGISTERED: registered plan amended after results were computed: 1 change(s) (family.main)"),
        "{md}"
    );
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 1, "{}", v.stdout);
    assert!(
        v.stdout
            .contains("re-derivation: every output file matches"),
        "{}",
        v.stdout
    );
}

/// `check --data` on a sealed plan records that the data were inspected, once per set of
/// files; an amendment after it is disclosed as made after the data were inspected, before any
/// results were computed; `sworn log` shows both.
#[test]
fn inspection_fixes_the_registered_version() {
    let s = Study::new();
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let c = s.sworn(&["check", "plan.toml", "--data"]);
    assert_eq!(c.code, 0, "{}", c.stderr);
    assert!(
        c.stdout
            .contains("recorded in the ledger (line 2): the data were inspected"),
        "{}",
        c.stdout
    );
    let again = s.sworn(&["check", "plan.toml", "--data"]);
    assert!(
        !again.stdout.contains("recorded in the ledger"),
        "{}",
        again.stdout
    );
    assert_eq!(ledger_events(&s), ["sealed", "data-inspected"]);
    s.edit("plan.toml", "errors = \"hc1\"", "errors = \"hc3\"");
    assert_eq!(
        s.sworn(&["amend", "plan.toml", "--reason", "leverage"])
            .code,
        0
    );
    let r = s.run_ok();
    let ols = element(&r, "specification[ols]");
    assert_eq!(ols["after"], "data-inspected", "{ols}");
    assert_eq!(r["registration"]["ledger_line"], 1);
    assert_eq!(r["registration"]["data_inspected"]["ledger_line"], 2);
    assert_eq!(
        r["registration"]["data_inspected"]["event"],
        "data-inspected"
    );
    assert_eq!(r["registration"]["results_computed"]["ledger_line"], 4);
    let dev = r["deviations"]
        .as_array()
        .and_then(|d| d.iter().find(|d| d["code"] == "amended-after-data"))
        .cloned()
        .expect("amended-after-data");
    let msg = dev["message"].as_str().unwrap_or_default();
    assert!(
        msg.contains(
            "after the data were inspected by the amendment at ledger line 3 (reason: leverage)"
        ),
        "{msg}"
    );
    // The registered OLS specification (HC1) is reported beside the amended one (HC3).
    assert_eq!(r["as_registered"]["specifications"]["ols"]["errors"], "hc1");
    assert_eq!(r["specifications"]["ols"]["errors"], "hc3");
    assert!(r["as_registered"]["specifications"].get("iv").is_none());
    let log = s.sworn(&["log", "plan.toml"]);
    assert!(log.stdout.contains("data inspected"), "{}", log.stdout);
    assert!(
        log.stdout.contains("made after the data were inspected"),
        "{}",
        log.stdout
    );
}

/// An unsealed plan has no ledger to record an inspection in: `check --data` writes nothing.
#[test]
fn inspection_of_an_unsealed_plan_writes_nothing() {
    let s = Study::new();
    let c = s.sworn(&["check", "plan.toml", "--data"]);
    assert_eq!(c.code, 0, "{}", c.stderr);
    assert!(!s.path("plan.ledger").exists());
}

/// A registered hypothesis removed after the data still appears, with its registered result.
#[test]
fn hypothesis_removed_after_data_keeps_its_registered_result() {
    let s = Study::new();
    let before = s.seal_and_run();
    s.edit(
        "plan.toml",
        "[[hypothesis]]\nid = \"H2\"\nspecification = \"ols\"\nterm = \"x\"\nfamily = \"main\"\n",
        "",
    );
    assert_eq!(
        s.sworn(&["amend", "plan.toml", "--reason", "drop H2"]).code,
        0
    );
    let r = s.run_ok();
    let h2 = &r["hypotheses"]["H2"];
    assert_eq!(h2["registration"], "removed-after-data");
    assert_eq!(h2["verdict"], before["hypotheses"]["H2"]["verdict"]);
    assert_eq!(
        h2["adjusted_p_value"],
        before["hypotheses"]["H2"]["adjusted_p_value"]
    );
    assert_eq!(
        r["hypotheses"]["H1"]["adjusted_p_value"],
        before["hypotheses"]["H1"]["adjusted_p_value"]
    );
    assert_eq!(element(&r, "hypothesis[H2]")["status"], "removed");
    let md = s.read("out/report.md");
    assert!(
        md.contains("none: removed after the data were seen"),
        "{md}"
    );
}

/// When the registered version cannot run (its data file is gone), that is an integrity
/// finding and the banner says so; the amended analysis is still reported.
#[test]
fn registered_version_that_cannot_run_is_a_finding() {
    let s = Study::new();
    s.seal_and_run();
    std::fs::rename(s.path("data.csv"), s.path("moved.csv")).expect("move");
    s.edit("plan.toml", "path = \"data.csv\"", "path = \"moved.csv\"");
    assert_eq!(
        s.sworn(&["amend", "plan.toml", "--reason", "file moved"])
            .code,
        0
    );
    let r = s.run_ok();
    assert!(
        codes(&r).contains(&"registered-version-failed".to_string()),
        "{:?}",
        codes(&r)
    );
    let error = r["as_registered"]["error"].as_str().unwrap_or_default();
    assert!(
        error.contains("cannot be read as it declares them ([data.main] at `data.csv`)"),
        "{error}"
    );
    // No absolute path of this machine in results.json (a verification elsewhere must
    // re-derive the same bytes).
    let here = s.path("").display().to_string();
    assert!(!s
        .read("out/results.json")
        .contains(here.trim_end_matches('/')));
    assert_eq!(r["hypotheses"]["H1"]["registration"], "registered");
    let md = s.read("out/report.md");
    assert!(
        md.contains("the registered version could not be run beside the amended plan"),
        "{md}"
    );
}

/// Issue 9: switching a hypothesis from randomization to model inference after the data were
/// read passed without a deviation. Now the switch is an `amended-after-data` finding naming
/// the key, the hypothesis keeps its registered (randomization) p-value at the top level and
/// the model-based one is reported beside it as amended.
#[test]
fn inference_switched_after_results_keeps_the_registered_test() {
    let s = Study::new();
    s.edit(
        "plan.toml",
        "[[specification]]\nid = \"ols\"",
        "[assignment]\nvariable = \"d\"\ndesign = \"complete\"\n\n[resampling]\nseed = 7\ndraws = 199\n\n[[specification]]\nid = \"ols\"",
    );
    s.edit(
        "plan.toml",
        "specification = \"ols\"\nterm = \"x\"",
        "specification = \"ols\"\nterm = \"d\"\ninference = \"randomization\"",
    );
    let before = s.seal_and_run();
    let registered_p = before["hypotheses"]["H2"]["p_value"].clone();
    assert!(registered_p.is_number(), "{before}");
    s.edit(
        "plan.toml",
        "inference = \"randomization\"",
        "inference = \"model\"",
    );
    let a = s.sworn(&["amend", "plan.toml", "--reason", "faster"]);
    assert_eq!(a.code, 0, "{}", a.stderr);
    let r = s.run_ok();
    let h = &r["hypotheses"]["H2"];
    assert_eq!(h["registration"], "registered", "{h}");
    assert_eq!(h["p_value"], registered_p, "{h}");
    assert!(h["as_amended"]["p_value"].is_number(), "{h}");
    assert_ne!(h["as_amended"]["p_value"], registered_p, "{h}");
    let el = element(&r, "hypothesis[H2]");
    assert_eq!(el["status"], "changed", "{el}");
    assert_eq!(el["after"], "results-computed", "{el}");
    assert_eq!(el["reason"], "faster", "{el}");
    let dev = r["deviations"]
        .as_array()
        .and_then(|d| {
            d.iter()
                .find(|d| d["code"] == "amended-after-data" && d["subject"] == "hypothesis[H2]")
        })
        .cloned()
        .expect("an amended-after-data deviation for H2");
    assert!(
        dev["message"]
            .as_str()
            .is_some_and(|m| m.contains("inference") && m.contains("randomization")),
        "{dev}"
    );
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 1, "{}", v.stdout);
}
