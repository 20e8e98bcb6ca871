//! Balance and attrition under a blocked (and clustered) `[assignment]`, through the plan
//! path, against tests/reference/blocked_balance.py (statsmodels OLS with one explicit dummy
//! column per block), and the refusals of designs the checks cannot follow.

use crate::common::Study;
use crate::reference::{close, fixture};
use serde_json::Value;

/// A fixture value as a CSV cell (`NA` for null).
pub(crate) fn cell(v: &Value) -> String {
    match v {
        Value::Null => "NA".to_string(),
        Value::Number(n) if n.is_i64() => n.to_string(),
        other => format!("{}", other.as_f64().unwrap_or(f64::NAN)),
    }
}

/// The fixture's data as CSV: blocks `b0`…, clusters `c0`….
fn csv(f: &Value) -> String {
    let d = &f["data"];
    let n = d["arm"].as_array().expect("arm").len();
    let mut out = String::from("x1,x2,x3,arm,seen,blk,cl\n");
    for i in 0..n {
        out.push_str(&format!(
            "{},{},{},{},{},b{},c{}\n",
            cell(&d["x1"][i]),
            cell(&d["x2"][i]),
            cell(&d["x3"][i]),
            cell(&d["arm"][i]),
            cell(&d["observed"][i]),
            d["block"][i],
            d["cluster"][i]
        ));
    }
    out
}

fn plan(design: &str, errors: &str) -> String {
    format!(
        r#"format = 1

[study]
title = "Blocked balance reference"

[data.main]
path = "data.csv"

[data.main.columns]
x1 = {{ kind = "number" }}
x2 = {{ kind = "number" }}
x3 = {{ kind = "number" }}
arm = {{ kind = "binary" }}
seen = {{ kind = "binary" }}
blk = {{ kind = "category" }}
cl = {{ kind = "category" }}

[assignment]
variable = "arm"
{design}

[balance]
by = "arm"
covariates = ["x1", "x2", "x3"]
{errors}

[attrition]
by = "arm"
observed = "seen"
{errors}

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
    close(
        &format!("{what} difference"),
        f64_of(&got["difference"]),
        f64_of(&want["difference"]),
    );
    close(
        &format!("{what} se"),
        f64_of(&got["std_error"]),
        f64_of(&want["std_error"]),
    );
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

/// Every error type: the block-absorbed regressions equal the explicit dummy regressions
/// (Frisch–Waugh–Lovell), the singleton block is left out, and the report names blocks and
/// clusters. The clustered case leaves `errors` out, so the registered clusters are used.
#[test]
fn blocked_balance_and_attrition_match_the_dummy_regressions() {
    let f = fixture("blocked_balance.json");
    let data = csv(&f);
    for case in f["cases"].as_array().expect("cases") {
        let kind = case["kind"].as_str().expect("kind");
        let (design, errors) = if kind == "cluster" {
            (
                "design = \"blocked-clustered\"\nblocks = \"blk\"\nclusters = \"cl\"",
                String::new(),
            )
        } else {
            (
                "design = \"blocked\"\nblocks = \"blk\"",
                format!("errors = \"{kind}\""),
            )
        };
        let s = Study::with(&plan(design, &errors), &data);
        let v = s.seal_and_run();
        let b = &v["balance"];
        assert_eq!(b["n"].as_u64(), case["n"].as_u64(), "{kind} n");
        assert_eq!(b["blocks"]["column"], "blk");
        assert_eq!(b["blocks"]["levels"].as_u64(), case["blocks"].as_u64());
        for (j, name) in ["x1", "x2", "x3"].iter().enumerate() {
            let got = &b["covariates"][*name];
            check_row(&format!("{kind} {name}"), got, &case["rows"][j]);
            close(
                &format!("{kind} {name} treated mean"),
                f64_of(&got["mean_treated"]),
                f64_of(&case["mean_treated"][j]),
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
        check_row(
            &format!("{kind} attrition"),
            &a["differential"],
            &case["attrition"],
        );
        let d = &a["differential"];
        assert_eq!(
            d["n_treated"].as_u64().unwrap_or(0) + d["n_comparison"].as_u64().unwrap_or(0),
            case["attrition"]["n"].as_u64().unwrap_or(u64::MAX)
        );
        assert_eq!(
            a["blocks"]["singletons_dropped"].as_u64(),
            case["singletons_dropped"].as_u64()
        );
        let report = s.read("out/report.md");
        assert!(
            report.contains("within-block differences from OLS on the arm with the 8 registered blocks of `blk` as fixed effects"),
            "{report}"
        );
        assert!(
            report.contains("(1 row alone in its block left out)"),
            "{report}"
        );
        if kind == "cluster" {
            assert_eq!(b["clusters"], serde_json::json!(["cl"]));
            assert!(report.contains("errors clustered by `cl`"), "{report}");
        } else {
            assert!(report.contains(&format!("{kind} errors")), "{report}");
        }
    }
}

/// Under a clustered assignment, errors that ignore the clusters are refused with the fix.
#[test]
fn balance_errors_must_follow_the_registered_clusters() {
    let f = fixture("blocked_balance.json");
    let s = Study::with(
        &plan(
            "design = \"blocked-clustered\"\nblocks = \"blk\"\nclusters = \"cl\"",
            "errors = \"hc1\"",
        ),
        &csv(&f),
    );
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2, "{}{}", r.stdout, r.stderr);
    assert!(
        r.stderr.contains("balance.errors")
            && r.stderr
                .contains("errors = { kind = \"cluster\", by = \"cl\" }"),
        "{}",
        r.stderr
    );
    assert!(!r.stderr.contains("panicked"));
}

/// An arm that varies within no block cannot be compared within blocks: refused by name,
/// with no output written.
#[test]
fn an_arm_constant_within_every_block_is_refused() {
    let mut data = String::from("x1,x2,x3,arm,seen,blk,cl\n");
    for i in 0..40 {
        let arm = i % 2;
        data.push_str(&format!(
            "{},{},{},{arm},1,b{arm},c{}\n",
            i as f64 * 0.5,
            (i * 7 % 11) as f64,
            (i * 3 % 5) as f64,
            i % 8
        ));
    }
    let s = Study::with(&plan("design = \"blocked\"\nblocks = \"blk\"", ""), &data);
    let r = s.sworn(&["seal", "plan.toml"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    assert_eq!(r.code, 2, "{}{}", r.stdout, r.stderr);
    assert!(
        r.stderr.contains("no block of `blk`") && r.stderr.contains("both arms of `arm`"),
        "{}",
        r.stderr
    );
    assert!(!s.path("out").exists());
}
