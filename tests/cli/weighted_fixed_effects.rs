//! Probability weights with absorbed fixed effects through a plan: weighted OLS (classical,
//! HC0, HC1, CR1; HC2 and HC3 with one fixed effect and without) and weighted 2SLS
//! (classical, HC1, CR1) with one and with two fixed effects, against
//! tests/reference/fixtures/weights_fe.json (statsmodels WLS with explicit indicator columns,
//! cross-checked there with linearmodels AbsorbingLS; linearmodels IV2SLS with weights and
//! indicator columns; see tests/reference/weights_fe.py), at a relative 1e-8: coefficients,
//! standard errors, R² in levels and within, residual SD, rows used, levels, and the order in
//! which rows leave (a zero weight first, then the singletons it leaves behind).

use crate::common::Study;
use crate::reference::{close, fixture};
use serde_json::Value;
use std::fmt::Write;

/// A plan's head over the fixture's columns (read from `data.csv`), titled `title`.
pub(crate) fn head(title: &str) -> String {
    format!(
        r#"format = 1

[study]
title = "{title}"

[data.main]
path = "data.csv"

[data.main.columns]
g  = {{ kind = "integer" }}
r  = {{ kind = "integer" }}
s  = {{ kind = "integer" }}
y  = {{ kind = "number" }}
x  = {{ kind = "number" }}
c  = {{ kind = "number" }}
z1 = {{ kind = "number" }}
z2 = {{ kind = "number" }}
w  = {{ kind = "number" }}
"#
    )
}

/// The error kinds checked for weighted OLS with one fixed effect (`ols_one` in the
/// fixture); with two, HC2 and HC3 are refused (no absorbed leverage), so the first four.
const OLS_ERRORS: [&str; 6] = ["classical", "hc0", "hc1", "cluster", "hc2", "hc3"];

/// The error kinds checked for weighted 2SLS.
const IV_ERRORS: [&str; 3] = ["classical", "hc1", "cluster"];

/// The error kinds of weighted OLS with each number of fixed effects.
fn ols_errors(fe_id: &str) -> &'static [&'static str] {
    match fe_id {
        "one" => &OLS_ERRORS,
        _ => &OLS_ERRORS[..4],
    }
}

/// The plan's `errors` value for a kind.
fn errors(kind: &str) -> String {
    match kind {
        "cluster" => "{ kind = \"cluster\", by = \"g\" }".to_string(),
        k => format!("\"{k}\""),
    }
}

/// One weighted specification per (estimator, fixed effects, errors) case.
fn plan() -> String {
    let mut out = head("Weighted fixed effects reference");
    for kind in ["classical", "hc2", "hc3"] {
        let _ = write!(
            out,
            "\n[[specification]]\nid = \"ols_no_fe_{kind}\"\nestimator = \"ols\"\noutcome = \"y\"\nregressors = [\"x\"]\ncontrols = [\"c\"]\nweights = \"w\"\nerrors = \"{kind}\"\n"
        );
    }
    for (fe_id, fes) in [("one", "[\"r\"]"), ("two", "[\"r\", \"s\"]")] {
        for kind in ols_errors(fe_id) {
            let _ = write!(
                out,
                "\n[[specification]]\nid = \"ols_{fe_id}_{kind}\"\nestimator = \"ols\"\noutcome = \"y\"\nregressors = [\"x\"]\ncontrols = [\"c\"]\nfixed_effects = {fes}\nweights = \"w\"\nerrors = {}\n",
                errors(kind)
            );
        }
        for kind in IV_ERRORS {
            let _ = write!(
                out,
                "\n[[specification]]\nid = \"tsls_{fe_id}_{kind}\"\nestimator = \"2sls\"\noutcome = \"y\"\nendogenous = [\"x\"]\ninstruments = [\"z1\", \"z2\"]\ncontrols = [\"c\"]\nfixed_effects = {fes}\nweights = \"w\"\nerrors = {}\n",
                errors(kind)
            );
        }
    }
    out
}

/// A fixture's columns (`data`, one array per name) as CSV (a missing value written as NA).
pub fn csv(data: &Value, names: &[&str]) -> String {
    let cols: Vec<&Vec<Value>> = names
        .iter()
        .map(|c| data[*c].as_array().expect("column"))
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

/// The estimates and standard errors of the terms the fixture lists.
fn terms(r: &Value, e: &Value, kind: &str, id: &str) {
    for name in e["coef"].as_object().expect("coef map").keys() {
        let name = name.as_str();
        let t = &r["terms"][name];
        close(
            &format!("{id} coef {name}"),
            num(&t["estimate"], name),
            num(&e["coef"][name], name),
        );
        close(
            &format!("{id} se {name}"),
            num(&t["std_error"], name),
            num(&e["se"][kind][name], name),
        );
    }
}

/// Rows, dropped rows and levels of a weighted specification with fixed effects.
fn sample(r: &Value, e: &Value, f: &Value, id: &str) {
    assert_eq!(r["n"], e["n"], "{id}");
    assert_eq!(r["weights"], "w", "{id}");
    let x = &f["expected"];
    assert_eq!(r["sample"]["dropped_missing"], x["dropped_missing"], "{id}");
    assert_eq!(
        r["sample"]["dropped_zero_weight"], x["dropped_zero_weight"],
        "{id}"
    );
}

#[test]
fn weighted_fixed_effects_match_the_references() {
    let f = fixture("weights_fe.json");
    let names = ["g", "r", "s", "y", "x", "c", "z1", "z2", "w"];
    let s = Study::with(&plan(), &csv(&f["data"], &names));
    let v = s.seal_and_run();
    let specs = &v["specifications"];
    let e = &f["expected"]["ols_no_fe"];
    for kind in ["classical", "hc2", "hc3"] {
        let id = format!("ols_no_fe_{kind}");
        terms(&specs[&id], e, kind, &id);
        sample(&specs[&id], e, &f, &id);
    }
    for fe_id in ["one", "two"] {
        let e = &f["expected"][format!("ols_{fe_id}")];
        for kind in ols_errors(fe_id) {
            let id = format!("ols_{fe_id}_{kind}");
            let r = &specs[&id];
            terms(r, e, kind, &id);
            sample(r, e, &f, &id);
            assert_eq!(r["singletons_dropped"], e["singletons_dropped"], "{id}");
            for (key, want) in e["levels"].as_object().expect("levels") {
                assert_eq!(&r["fixed_effects"][key], want, "{id} levels of {key}");
            }
            close("R²", num(&r["r_squared"], "r2"), num(&e["r_squared"], "r2"));
            close(
                "within R²",
                num(&r["within_r_squared"], "wr2"),
                num(&e["within_r_squared"], "wr2"),
            );
            close(
                "residual SD",
                num(&r["residual_sd"], "sd"),
                num(&e["residual_sd"], "sd"),
            );
        }
        let e = &f["expected"][format!("tsls_{fe_id}")];
        for kind in IV_ERRORS {
            let id = format!("tsls_{fe_id}_{kind}");
            terms(&specs[&id], e, kind, &id);
            sample(&specs[&id], e, &f, &id);
        }
    }
    let report = s.read("out/report.md");
    assert_eq!(
        report
            .matches(
                "classical errors, which hold if each row's error variance is proportional to 1/w"
            )
            .count(),
        5,
        "one caution per weighted specification with classical errors"
    );
}
