//! Each deviation the contract lists shows up with its code.

use crate::common::Edit;
use crate::common::{codes, data_csv, Study, PLAN};

fn has(r: &serde_json::Value, code: &str) -> bool {
    codes(r).iter().any(|c| c == code)
}

fn severity(r: &serde_json::Value, code: &str) -> String {
    r["deviations"]
        .as_array()
        .and_then(|a| a.iter().find(|d| d["code"] == code))
        .map_or(String::new(), |d| {
            d["severity"].as_str().unwrap_or("").to_string()
        })
}

#[test]
fn unsealed_plan() {
    let s = Study::new();
    let r = s.run_ok();
    assert!(has(&r, "unsealed"));
    assert_eq!(severity(&r, "unsealed"), "integrity");
    assert_eq!(r["plan"]["integrity"], "not-sealed");
}

#[test]
fn content_change_lists_keys_and_cosmetic_change_is_a_note() {
    let s = Study::new();
    s.seal_and_run();
    s.edit(
        "plan.toml",
        "title = \"Test study\"",
        "title = \"Test study\" # a comment",
    );
    let r = s.run_ok();
    assert!(has(&r, "plan-cosmetic-change"));
    assert_eq!(severity(&r, "plan-cosmetic-change"), "note");
    s.edit(
        "plan.toml",
        "correction = \"holm\"",
        "correction = \"bonferroni\"",
    );
    let r = s.run_ok();
    assert!(has(&r, "plan-changed"));
    let msg = r["deviations"][0]["message"].as_str().unwrap_or("");
    assert!(msg.contains("family.main.correction"), "{msg}");
    assert_eq!(r["plan"]["integrity"], "changed");
}

#[test]
fn amendment_after_data_is_not_pre_registered() {
    let s = Study::new();
    s.seal_and_run();
    let extra = "\n[[specification]]\nid = \"late\"\nestimator = \"ols\"\noutcome = \"y\"\nregressors = [\"x\"]\n";
    s.write("plan.toml", &format!("{PLAN}{extra}"));
    let a = s.sworn(&["amend", "plan.toml", "--reason", "added a robustness check"]);
    assert_eq!(a.code, 0, "{}", a.stderr);
    assert!(a.stdout.contains("specification[late]"), "{}", a.stdout);
    let r = s.run_ok();
    assert!(has(&r, "added-after-data"), "{:?}", codes(&r));
    assert_eq!(r["specifications"]["late"]["pre_registered"], false);
    assert_eq!(r["plan"]["integrity"], "sealed-unchanged");
}

#[test]
fn broken_ledger_and_changed_data() {
    let s = Study::new();
    s.seal_and_run();
    let ledger = s.read("plan.ledger");
    s.write("plan.ledger", &ledger.edit_first("\"seq\":1", "\"seq\":1 "));
    let r = s.run_ok();
    assert!(has(&r, "ledger-broken"), "{:?}", codes(&r));
    let s = Study::new();
    s.seal_and_run();
    s.edit("data.csv", "r000,g00,", "r000,g01,");
    let r = s.run_ok();
    assert!(has(&r, "data-changed"));
    assert_eq!(severity(&r, "data-changed"), "integrity");
}

#[test]
fn schema_deviations() {
    let mut data = data_csv();
    data = data.edit_first("\nr001,g00,", "\nr000,g00,"); // duplicate key
    let mut lines: Vec<String> = data.lines().map(String::from).collect();
    // row 3: binary column holding 2, value outside x's range, missing key in row 4.
    let f: Vec<String> = lines[3].split(',').map(String::from).collect();
    lines[3] = format!("{},{},{},2,11.5,{},{}", f[0], f[1], f[2], f[5], f[6]);
    lines[4] = format!(",{}", lines[4].split_once(',').map_or("", |x| x.1));
    let plan = PLAN
        .edit("rows = { min = 200, max = 300 }", "rows = { min = 300 }")
        .edit(
            "yb  = { kind = \"binary\" }",
            "yb  = { kind = \"binary\" }\nextra = { kind = \"number\" }",
        );
    let s = Study::with(&plan, &(lines.join("\n") + "\n"));
    let r = s.run_ok();
    for code in [
        "key-duplicate",
        "key-missing",
        "column-kind",
        "value-out-of-range",
        "rows-out-of-range",
        "column-missing",
    ] {
        assert!(has(&r, code), "{code} missing from {:?}", codes(&r));
    }
    let c = s.sworn(&["check", "plan.toml", "--data"]);
    assert_eq!(c.code, 1, "{}", c.stdout);
}

#[test]
fn missing_share_collinear_drop_and_exploratory() {
    let mut lines: Vec<String> = data_csv().lines().map(String::from).collect();
    for line in lines.iter_mut().skip(1).take(60) {
        let (head, _) = line
            .rsplit_once(',')
            .map(|(a, b)| (a.to_string(), b.to_string()))
            .expect("comma");
        let (head2, yb) = (
            head.rsplit_once(',')
                .map(|x| x.0.to_string())
                .unwrap_or_default(),
            line.rsplit(',').next().unwrap_or("0").to_string(),
        );
        *line = format!("{head2},,{yb}");
    }
    let plan = PLAN.edit("[[hypothesis]]\nid = \"H1\"", "[derive]\nx2 = \"2 * x\"\n\n[[specification]]\nid = \"dup\"\nestimator = \"ols\"\noutcome = \"y\"\nregressors = [\"x\", \"x2\"]\non_collinear = \"drop\"\nexploratory = true\n\n[[hypothesis]]\nid = \"H1\"");
    let s = Study::with(&plan, &(lines.join("\n") + "\n"));
    let r = s.seal_and_run();
    for code in ["missing-share", "collinear-dropped", "exploratory"] {
        assert!(has(&r, code), "{code} missing from {:?}", codes(&r));
    }
    assert_eq!(r["specifications"]["dup"]["dropped_terms"][0], "x2");
    assert_eq!(r["specifications"]["ols"]["n"], 180);
}

#[test]
fn binary_outcome_with_classical_errors_gets_a_note() {
    let plan = PLAN.edit(
        "outcome = \"y\"\nregressors = [\"d\"]\ncontrols = [\"x\"]\nerrors = \"hc1\"",
        "outcome = \"yb\"\nregressors = [\"d\"]\ncontrols = [\"x\"]\nerrors = \"classical\"",
    );
    let s = Study::with(&plan, &data_csv());
    let r = s.seal_and_run();
    assert!(has(&r, "lpm-classical-errors"), "{:?}", codes(&r));
    assert!(
        r["specifications"]["ols"]["linear_probability"]["fitted_outside_unit_interval"]
            .as_u64()
            .is_some()
    );
}
