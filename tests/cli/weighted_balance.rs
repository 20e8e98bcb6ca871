//! Weighted balance and differential-attrition checks (`weights = "w"` in `[balance]` and
//! `[attrition]`), through the plan path, against tests/reference/weighted_balance.py
//! (statsmodels WLS with one explicit dummy column per block, HC1, classical, HC3 and cluster
//! errors; numpy
//! weighted averages for the arm means), at the relative tolerance of `reference::close`
//! (1e-8); and the refusals at `check`.

use crate::blocked_summaries::cell;
use crate::common::Study;
use crate::reference::{close, fixture};
use serde_json::Value;

/// The fixture's data as CSV: blocks `b0`…, clusters `c0`….
fn csv(f: &Value) -> String {
    let d = &f["data"];
    let n = d["arm"].as_array().expect("arm").len();
    let mut out = String::from("x1,x2,arm,seen,w,blk,cl\n");
    for i in 0..n {
        out.push_str(&format!(
            "{},{},{},{},{},b{},c{}\n",
            cell(&d["x1"][i]),
            cell(&d["x2"][i]),
            cell(&d["arm"][i]),
            cell(&d["observed"][i]),
            cell(&d["w"][i]),
            d["block"][i],
            d["cluster"][i]
        ));
    }
    out
}

fn plan(design: &str, errors: &str, extra: &str) -> String {
    format!(
        r#"format = 1

[study]
title = "Weighted balance reference"

[data.main]
path = "data.csv"

[data.main.columns]
x1 = {{ kind = "number" }}
x2 = {{ kind = "number" }}
arm = {{ kind = "binary" }}
seen = {{ kind = "binary" }}
w = {{ kind = "number" }}
blk = {{ kind = "category" }}
cl = {{ kind = "category" }}
{design}
[balance]
by = "arm"
covariates = ["x1", "x2"]
weights = "w"
{errors}

[attrition]
by = "arm"
observed = "seen"
weights = "w"
{errors}
{extra}
[[specification]]
id = "s"
estimator = "ols"
outcome = "x1"
regressors = ["arm"]
"#
    )
}

fn f64_of(v: &Value) -> f64 {
    v.as_f64().unwrap_or(f64::NAN)
}

fn check_row(what: &str, got: &Value, want: &Value) {
    for (g, w) in [
        ("difference", "difference"),
        ("std_error", "std_error"),
        ("mean_treated", "mean_treated"),
        ("mean_comparison", "mean_comparison"),
    ] {
        close(&format!("{what} {g}"), f64_of(&got[g]), f64_of(&want[w]));
    }
    close(
        &format!("{what} p"),
        f64_of(&got["test"]["p_value"]),
        f64_of(&want["p_value"]),
    );
    assert_eq!(
        got["test"]["distribution"]["df"].as_f64(),
        want["df"].as_f64(),
        "{what} df"
    );
}

/// The design and errors lines of a fixture case.
fn design_of(case: &Value) -> (&'static str, String) {
    let kind = case["kind"].as_str().unwrap_or("?");
    match (kind, case["blocked"].as_bool()) {
        ("cluster", _) => (
            "\n[assignment]\nvariable = \"arm\"\ndesign = \"blocked-clustered\"\nblocks = \"blk\"\nclusters = \"cl\"\n",
            String::new(),
        ),
        (_, Some(true)) => (
            "\n[assignment]\nvariable = \"arm\"\ndesign = \"blocked\"\nblocks = \"blk\"\n",
            format!("errors = \"{kind}\""),
        ),
        _ => ("", format!("errors = \"{kind}\"")),
    }
}

/// Blocked with HC1, classical and HC3 errors, blocked-clustered (the registered clusters),
/// and without blocks (HC1): each
/// weighted difference, SE, p-value, weighted arm mean and the joint F equal statsmodels
/// WLS; the rows without a weight, of weight zero and alone in their block leave as the
/// reference says; results.json and the report say the check is weighted by `w`.
#[test]
fn weighted_checks_match_weighted_least_squares() {
    let f = fixture("weighted_balance.json");
    let data = csv(&f);
    for case in f["cases"].as_array().expect("cases") {
        let kind = format!("{} blocked={}", case["kind"], case["blocked"]);
        let (design, errors) = design_of(case);
        let s = Study::with(&plan(design, &errors, ""), &data);
        let v = s.seal_and_run();
        let b = &v["balance"];
        assert_eq!(b["n"].as_u64(), case["n"].as_u64(), "{kind} n");
        assert_eq!(b["weights"], "w", "{kind}");
        assert_eq!(
            b["dropped_zero_weight"].as_u64(),
            case["dropped_zero_weight"].as_u64(),
            "{kind}"
        );
        assert_eq!(b["blocks"]["levels"].as_u64(), case["blocks"].as_u64());
        for (j, name) in ["x1", "x2"].iter().enumerate() {
            check_row(
                &format!("{kind} {name}"),
                &b["covariates"][*name],
                &case["rows"][j],
            );
        }
        close(
            &format!("{kind} joint F"),
            f64_of(&b["joint"]["statistic"]),
            f64_of(&case["joint_f"]),
        );
        close(
            &format!("{kind} joint p"),
            f64_of(&b["joint"]["p_value"]),
            f64_of(&case["joint_p"]),
        );
        assert_eq!(
            b["joint"]["distribution"]["df2"].as_f64(),
            case["joint_df_denom"].as_f64()
        );
        let a = &v["attrition"];
        assert_eq!(a["weights"], "w", "{kind}");
        let d = &a["differential"];
        check_row(&format!("{kind} attrition"), d, &case["attrition"]);
        assert_eq!(
            d["n_treated"].as_u64().unwrap_or(0) + d["n_comparison"].as_u64().unwrap_or(0),
            case["attrition"]["n"].as_u64().unwrap_or(u64::MAX)
        );
        let report = s.read("out/report.md");
        assert!(report.matches("weighted by `w`").count() >= 2, "{report}");
    }
}

fn refused(extra_attrition: &str, errors: &str, says: &str, key: &str) {
    let f = fixture("weighted_balance.json");
    let text = plan("", errors, "").replacen(
        "observed = \"seen\"",
        &format!("observed = \"seen\"\n{extra_attrition}"),
        1,
    );
    let s = Study::with(&text, &csv(&f));
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2, "{}{}", r.stdout, r.stderr);
    assert!(
        r.stderr.contains(key) && r.stderr.contains(says),
        "{}",
        r.stderr
    );
    assert!(!r.stderr.contains("panicked"));
}

/// Lee bounds with weights, and two-way clustered weighted errors, are refused at `check`
/// with the fix.
#[test]
fn weighted_lee_bounds_and_two_way_errors_are_refused() {
    refused(
        "bounds = [\"x1\"]",
        "",
        "Lee bounds with probability weights (weights = \"w\") are not available",
        "attrition.bounds",
    );
    refused(
        "",
        "errors = { kind = \"cluster\", by = [\"cl\", \"blk\"] }",
        "two-way cluster errors with probability weights are not available",
        "balance.errors",
    );
}

/// A negative weight in a used row stops the run naming the column, the line and the fix;
/// nothing is written.
#[test]
fn a_negative_weight_is_refused_naming_its_line() {
    let f = fixture("weighted_balance.json");
    let data = csv(&f);
    let mut lines: Vec<String> = data.lines().map(str::to_string).collect();
    let mut cells: Vec<String> = lines[11].split(',').map(str::to_string).collect();
    cells[4] = "-1.5".to_string();
    lines[11] = cells.join(",");
    let s = Study::with(
        &plan("", "errors = \"hc1\"", ""),
        &(lines.join("\n") + "\n"),
    );
    let r = s.sworn(&["seal", "plan.toml"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    assert_eq!(r.code, 2, "{}{}", r.stdout, r.stderr);
    assert!(
        r.stderr
            .contains("weights column `w` holds -1.5 at line 12"),
        "{}",
        r.stderr
    );
    assert!(!s.path("out").exists());
}
