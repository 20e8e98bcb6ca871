//! Intervals where only point values or p-values existed, through the plan path: Lee bounds
//! with their Imbens and Manski (2004) interval, against tests/reference/lee_interval.py (an
//! implementation of its own in numpy/scipy of Lee 2009, Proposition 3, whose variance
//! formula it also checks by simulation), and randomization intervals by test inversion,
//! against tests/reference/ri_interval.py (brute-force numpy enumeration).

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

/// Randomization intervals by test inversion on an exact design (12 units, all 924
/// assignments), for the coefficient and the t statistic, against the brute-force numpy
/// enumeration of tests/reference/ri_interval.py. sworn's ends lie within 1e-7 standard
/// errors of the boundary (its documented tolerance), the reference's within 1e-12.
#[test]
fn randomization_intervals_match_the_brute_force_enumeration() {
    let f = fixture("ri_interval.json");
    let d = &f["data"];
    let mut csv = String::from("y,t,w\n");
    for i in 0..d["y"].as_array().expect("y").len() {
        csv.push_str(&format!(
            "{},{},{}\n",
            f64_of(&d["y"][i]),
            d["t"][i],
            f64_of(&d["w"][i])
        ));
    }
    for case in f["cases"].as_array().expect("cases") {
        let statistic = case["statistic"].as_str().expect("statistic");
        let plan = format!(
            r#"format = 1

[study]
title = "Randomization interval reference"

[data.main]
path = "data.csv"

[data.main.columns]
y = {{ kind = "number" }}
t = {{ kind = "binary" }}
w = {{ kind = "number" }}

[assignment]
variable = "t"
design = "complete"

[resampling]
seed = 7

[[specification]]
id = "itt"
estimator = "ols"
outcome = "y"
regressors = ["t"]
controls = ["w"]
errors = "classical"

[[hypothesis]]
id = "H1"
specification = "itt"
term = "t"
inference = "randomization"
statistic = "{statistic}"
"#
        );
        let s = Study::with(&plan, &csv);
        let v = s.seal_and_run();
        let h = &v["hypotheses"]["H1"];
        assert_eq!(h["exact"], true, "{statistic}");
        assert_eq!(h["draws"].as_u64(), Some(924));
        let i = &h["randomization_interval"];
        let se = f64_of(&case["std_error"]);
        for end in ["lower", "upper"] {
            let (got, want) = (f64_of(&i[end]), f64_of(&case[end]));
            assert!(
                (got - want).abs() <= 2e-7 * se,
                "{statistic} {end}: got {got}, brute force {want} (se {se})"
            );
        }
        assert_eq!(i["level"].as_f64(), Some(0.95));
        let report = s.read("out/report.md");
        assert!(report.contains("randomization 95%: ["), "{report}");
        assert!(
            report
                .contains("the 95% randomization interval is the set of constant additive effects"),
            "{report}"
        );
    }
}
