//! Probability weights through a plan (`weights = "w"`): weighted OLS with HC0, HC1 and CR1
//! errors, weighted 2SLS (HC1, CR1) with its first stage and Anderson–Rubin statistic, and
//! weighted LIML, against tests/reference/fixtures/weights.json (statsmodels WLS and
//! linearmodels IV2SLS / IVLIML with weights; see tests/reference/weights.py), at a relative
//! 1e-8; a missing weight leaves its row out, a zero weight is counted, a negative weight is
//! an error naming the column and the line.

use crate::common::{Edit, Study};
use crate::reference::{close, fixture};
use serde_json::Value;
use std::fmt::Write;

const PLAN: &str = r#"format = 1

[study]
title = "Weighted reference"

[data.main]
path = "data.csv"

[data.main.columns]
g  = { kind = "integer" }
y  = { kind = "number" }
x  = { kind = "number" }
c  = { kind = "number" }
z1 = { kind = "number" }
z2 = { kind = "number" }
w  = { kind = "number" }

[[specification]]
id = "ols_hc0"
estimator = "ols"
outcome = "y"
regressors = ["x"]
controls = ["c"]
weights = "w"
errors = "hc0"

[[specification]]
id = "ols_hc1"
estimator = "ols"
outcome = "y"
regressors = ["x"]
controls = ["c"]
weights = "w"
errors = "hc1"

[[specification]]
id = "ols_cluster"
estimator = "ols"
outcome = "y"
regressors = ["x"]
controls = ["c"]
weights = "w"
errors = { kind = "cluster", by = "g" }

[[specification]]
id = "iv_hc1"
estimator = "2sls"
outcome = "y"
endogenous = ["x"]
instruments = ["z1", "z2"]
controls = ["c"]
weights = "w"
errors = "hc1"
diagnostics = ["first_stage", "reduced_form", "weak_instruments"]

[[specification]]
id = "iv_cluster"
estimator = "2sls"
outcome = "y"
endogenous = ["x"]
instruments = ["z1", "z2"]
controls = ["c"]
weights = "w"
errors = { kind = "cluster", by = "g" }

[[specification]]
id = "liml_hc1"
estimator = "liml"
outcome = "y"
endogenous = ["x"]
instruments = ["z1", "z2"]
controls = ["c"]
weights = "w"
errors = "hc1"

[[specification]]
id = "unweighted"
estimator = "ols"
outcome = "y"
regressors = ["x"]
controls = ["c"]
errors = "hc1"
"#;

/// The fixture's data as CSV (a missing weight written as NA).
fn csv(f: &Value) -> String {
    let names = ["g", "y", "x", "c", "z1", "z2", "w"];
    let cols: Vec<&Vec<Value>> = names
        .iter()
        .map(|c| f["data"][*c].as_array().expect("column"))
        .collect();
    let mut out = names.join(",");
    out.push('\n');
    for i in 0..cols[0].len() {
        let row: Vec<String> = cols
            .iter()
            .map(|c| match &c[i] {
                Value::Null => "NA".to_string(),
                Value::Number(n) if n.is_i64() => n.to_string(),
                v => format!("{}", v.as_f64().expect("number")),
            })
            .collect();
        let _ = writeln!(out, "{}", row.join(","));
    }
    out
}

fn num(v: &Value, what: &str) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("{what}: not a number: {v}"))
}

/// Each term's estimate and standard error against `coef` and `se` (maps by term name).
fn terms(r: &Value, coef: &Value, se: &Value, what: &str) {
    for (name, want) in coef.as_object().expect("coef map") {
        let t = &r["terms"][name.as_str()];
        close(
            &format!("{what} coef {name}"),
            num(&t["estimate"], name),
            num(want, name),
        );
        close(
            &format!("{what} se {name}"),
            num(&t["std_error"], name),
            num(&se[name.as_str()], name),
        );
    }
}

#[test]
fn weighted_fits_match_the_references() {
    let f = fixture("weights.json");
    let e = &f["expected"];
    let s = Study::with(PLAN, &csv(&f));
    let v = s.seal_and_run();
    let specs = &v["specifications"];
    for (id, kind) in [
        ("ols_hc0", "hc0"),
        ("ols_hc1", "hc1"),
        ("ols_cluster", "cluster"),
    ] {
        let r = &specs[id];
        terms(r, &e["ols"]["coef"], &e["ols"]["se"][kind], id);
        assert_eq!(r["n"], e["n"], "{id}");
        assert_eq!(r["weights"], "w", "{id}");
        assert_eq!(r["sample"]["dropped_missing"], e["dropped_missing"], "{id}");
        assert_eq!(
            r["sample"]["dropped_zero_weight"], e["dropped_zero_weight"],
            "{id}"
        );
        close(
            "R²",
            num(&r["r_squared"], "r2"),
            num(&e["ols"]["r_squared"], "r2"),
        );
        close(
            "residual SD",
            num(&r["residual_sd"], "sd"),
            num(&e["ols"]["residual_sd"], "sd"),
        );
    }
    terms(
        &specs["iv_hc1"],
        &e["tsls"]["coef"],
        &e["tsls"]["se"]["hc1"],
        "2sls hc1",
    );
    terms(
        &specs["iv_cluster"],
        &e["tsls"]["coef"],
        &e["tsls"]["se"]["cluster"],
        "2sls cluster",
    );
    terms(
        &specs["liml_hc1"],
        &e["liml"]["coef"],
        &e["liml"]["se"],
        "liml",
    );
    close(
        "κ",
        num(&specs["liml_hc1"]["kappa"], "kappa"),
        num(&e["liml"]["kappa"], "kappa"),
    );
    let iv = &specs["iv_hc1"];
    let fs = &iv["first_stage"]["x"];
    let efs = &e["first_stage"];
    close(
        "first-stage robust F",
        num(&fs["robust_f_statistic"], "F"),
        num(&efs["robust_f_hc1"], "F"),
    );
    close(
        "partial R²",
        num(&fs["partial_r_squared"], "pr2"),
        num(&efs["partial_r_squared"], "pr2"),
    );
    close(
        "first-stage R²",
        num(&fs["r_squared"], "r2"),
        num(&efs["r_squared"], "r2"),
    );
    close(
        "reduced-form R²",
        num(&iv["reduced_form"]["r_squared"], "r2"),
        num(&e["reduced_form_r_squared"], "r2"),
    );
    close(
        "AR at 0",
        num(&iv["anderson_rubin"]["statistic"], "AR"),
        num(&e["ar_statistic_at_0_hc1"], "AR"),
    );
    assert_eq!(iv["arms"]["take_up_missing"], "weighted");
    let unweighted = &specs["unweighted"];
    assert!(
        unweighted.get("weights").is_none(),
        "no key when unweighted"
    );
    assert!(unweighted["sample"].get("dropped_zero_weight").is_none());
    assert_eq!(
        unweighted["n"], 160,
        "an unweighted specification keeps every row"
    );
    let report = s.read("out/report.md");
    assert!(
        report.contains("weighted by `w`"),
        "report names the weights"
    );
    assert_eq!(
        report.matches("weighted by `w`").count(),
        6,
        "one line per weighted block"
    );
}

#[test]
fn a_negative_weight_is_an_error_naming_its_line() {
    let f = fixture("weights.json");
    let text = csv(&f);
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    // Row index 3 is CSV line 5 (the header is line 1); its weight is the last field.
    let cut = lines[4].rfind(',').expect("fields");
    lines[4] = format!("{},-1.5", &lines[4][..cut]);
    let s = Study::with(PLAN, &(lines.join("\n") + "\n"));
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    assert_ne!(r.code, 0, "a negative weight must fail the run");
    assert!(
        r.stderr.contains("`w`")
            && r.stderr.contains("line 5")
            && r.stderr.contains("zero or positive"),
        "{}",
        r.stderr
    );
    assert!(
        !s.path("out/results.json").exists(),
        "no half-written output"
    );
}

#[test]
fn a_missing_weight_leaves_its_row_out_or_stops_the_run_as_the_plan_says() {
    let f = fixture("weights.json");
    let text = csv(&f);
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    // Row index 5 is CSV line 7; its weight (the last field) is left empty.
    let cut = lines[6].rfind(',').expect("fields");
    lines[6] = format!("{},", &lines[6][..cut]);
    let data = lines.join("\n") + "\n";
    // Default: the row leaves the sample like any missing value, and is counted.
    let s = Study::with(PLAN, &data);
    let r = s.seal_and_run();
    let full = Study::with(
        PLAN,
        &(text.clone() + if text.ends_with('\n') { "" } else { "\n" }),
    )
    .seal_and_run();
    let (first, missing) = (&full["specifications"], &r["specifications"]);
    let id = first
        .as_object()
        .and_then(|m| m.keys().next().cloned())
        .expect("a specification");
    assert_eq!(
        missing[&id]["n"].as_u64(),
        first[&id]["n"].as_u64().map(|n| n - 1)
    );
    let dropped = |r: &Value| r[&id]["sample"]["dropped_missing"].as_u64();
    assert_eq!(dropped(missing), dropped(first).map(|d| d + 1));
    // on_missing_weight = "stop": the run fails naming the column and the line.
    let plan = PLAN.edit_first(
        "weights = \"w\"",
        "weights = \"w\"\non_missing_weight = \"stop\"",
    );
    let s = Study::with(&plan, &data);
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    assert_ne!(r.code, 0, "a missing weight must stop the run");
    assert!(
        r.stderr.contains("`w`")
            && r.stderr.contains("line 7")
            && r.stderr.contains("on_missing_weight"),
        "{}",
        r.stderr
    );
    assert!(
        !s.path("out/results.json").exists(),
        "no half-written output"
    );
}
