//! Intervals where only point values or p-values existed: Lee bounds with their Imbens and
//! Manski (2004) interval, through the plan path, against tests/reference/lee_interval.py
//! (an implementation of its own in numpy/scipy of Lee 2009, Proposition 3, whose variance
//! formula it also checks by simulation).

use crate::common::Study;
use crate::reference::{close, fixture};
use serde_json::Value;

fn f64_of(v: &Value) -> f64 {
    v.as_f64().unwrap_or(f64::NAN)
}

fn lee_plan(errors: &str) -> String {
    format!(
        r#"format = 1

[study]
title = "Lee interval reference"

[data.main]
path = "data.csv"

[data.main.columns]
y = {{ kind = "number" }}
arm = {{ kind = "binary" }}
cl = {{ kind = "category" }}

[attrition]
by = "arm"
observed = "not is_missing(y)"
bounds = ["y"]
{errors}

[[specification]]
id = "s"
estimator = "ols"
outcome = "y"
regressors = ["arm"]
"#
    )
}

fn lee_csv(case: &Value) -> String {
    let n = case["treated"].as_array().expect("treated").len();
    let mut csv = String::from("y,arm,cl\n");
    for i in 0..n {
        let y = match &case["outcome"][i] {
            Value::Null => "NA".to_string(),
            v => format!("{}", f64_of(v)),
        };
        csv.push_str(&format!("{y},{},g{}\n", case["treated"][i], i % 10));
    }
    csv
}

/// Bounds, their standard errors, the critical value and the interval for each case
/// (treated arm trimmed, comparison arm trimmed, tied integer outcomes, 40 units).
#[test]
fn lee_intervals_match_the_reference() {
    let f = fixture("lee_interval.json");
    for case in f["cases"].as_array().expect("cases") {
        let name = case["name"].as_str().expect("name");
        let s = Study::with(&lee_plan(""), &lee_csv(case));
        let v = s.seal_and_run();
        let b = &v["attrition"]["bounds"]["y"];
        for (got, want) in [
            ("lower", "lower"),
            ("upper", "upper"),
            ("trim_share", "trim_share"),
            ("std_error_lower", "se_lower"),
            ("std_error_upper", "se_upper"),
            ("interval_critical_value", "critical_value"),
        ] {
            close(
                &format!("{name} {got}"),
                f64_of(&b[got]),
                f64_of(&case[want]),
            );
        }
        for k in 0..2 {
            close(
                &format!("{name} interval[{k}]"),
                f64_of(&b["interval"][k]),
                f64_of(&case["interval"][k]),
            );
        }
        assert_eq!(b["trimmed_arm"], case["trimmed_arm"], "{name}");
        assert_eq!(b["interval_level"].as_f64(), Some(0.95));
        let report = s.read("out/report.md");
        assert!(
            report.contains("95% interval for the effect (Imbens and Manski 2004"),
            "{report}"
        );
    }
}

/// With clustered errors the bounds' standard errors (independent units) do not apply: the
/// interval is withheld and the report says why.
#[test]
fn lee_interval_is_withheld_under_clustered_errors() {
    let f = fixture("lee_interval.json");
    let s = Study::with(
        &lee_plan("errors = { kind = \"cluster\", by = \"cl\" }"),
        &lee_csv(&f["cases"][0]),
    );
    let v = s.seal_and_run();
    let b = &v["attrition"]["bounds"]["y"];
    assert!(b["interval"].is_null() && b["std_error_lower"].is_null());
    assert!(b["no_interval"]
        .as_str()
        .is_some_and(|w| w.contains("clustered by `cl`")));
    assert!(s.read("out/report.md").contains(
        "no interval: the standard errors of Lee bounds assume independently sampled units"
    ));
}
