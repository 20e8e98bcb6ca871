//! The tables' optional rows `comparison-mean` and `take-up-by-arm`: the numbers in
//! results.json against an outside reference, and what the rows say when a value cannot be
//! shown.

use crate::common::{run_in, Edit, Study};
use crate::reference::close;
use serde_json::Value;

fn fixture() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/fixtures/arms_demo.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).expect("fixture")).expect("json")
}

fn check_mean(what: &str, got: &Value, want: &Value) {
    assert_eq!(got["n"], want["n"], "{what}: {got}");
    assert_eq!(got["arm"], want["arm"], "{what}: {got}");
    assert_eq!(got["variable"], want["variable"], "{what}: {got}");
    assert_eq!(got["clusters"], want["clusters"], "{what}: {got}");
    for (key, reference) in [
        ("mean", "mean"),
        ("sd", "sd"),
        ("std_error", "std_error_cluster"),
    ] {
        close(
            &format!("{what} {key}"),
            got[key].as_f64().unwrap_or(f64::NAN),
            want[reference].as_f64().unwrap_or(f64::NAN),
        );
    }
    for k in 0..2 {
        close(
            &format!("{what} interval end {k}"),
            got["ci"][k].as_f64().unwrap_or(f64::NAN),
            want["ci95"][k].as_f64().unwrap_or(f64::NAN),
        );
    }
}

/// The demo's arm summaries (clustered by block) match pandas means and statsmodels' CR1
/// standard error of a constant (tests/reference/arms.py, fixture arms_demo.json).
#[test]
fn demo_arm_summaries_match_the_pandas_reference() {
    let fx = fixture();
    let dir = tempfile::tempdir().expect("temp dir");
    let d = run_in(dir.path(), &["demo", "--out", "demo"]);
    assert_eq!(d.code, 0, "{}{}", d.stdout, d.stderr);
    let text = std::fs::read_to_string(dir.path().join("demo/out/cool-roofs/results.json"))
        .expect("results.json");
    let v: Value = serde_json::from_str(&text).expect("json");
    let cases = fx["cases"].as_object().expect("cases");
    assert_eq!(cases.len(), 4);
    for (spec, want) in cases {
        let s = &v["specifications"][spec];
        let arms = &s["arms"];
        assert_eq!(s["n"], want["rows"], "{spec}");
        assert_eq!(arms["by"], want["by"], "{spec}: {arms}");
        assert_eq!(arms["std_error_kind"], "cluster", "{spec}");
        assert_eq!(arms["cluster_by"], "block", "{spec}");
        check_mean(
            &format!("{spec} comparison mean"),
            &arms["comparison_mean"],
            &want["comparison_mean"],
        );
        match want.get("take_up") {
            Some(t) => {
                for k in 0..2 {
                    check_mean(
                        &format!("{spec} take-up arm {k}"),
                        &arms["take_up"][k],
                        &t[k],
                    );
                }
                assert!(arms["take_up_missing"].is_null(), "{spec}: {arms}");
            }
            None => {
                assert!(arms["take_up"].is_null(), "{spec}: {arms}");
                assert_eq!(arms["take_up_missing"], "ols", "{spec}: {arms}");
            }
        }
    }
    let md = std::fs::read_to_string(dir.path().join("demo/out/cool-roofs/report.md"))
        .expect("report.md");
    let t = &v["specifications"]["temp_iv"]["arms"]["take_up"][1];
    let cell = format!(
        "{} ({})",
        sworn::report::num(t["mean"].as_f64().unwrap_or_default()),
        sworn::report::num(t["std_error"].as_f64().unwrap_or_default())
    );
    assert!(
        md.contains("| take-up where the instrument is 1 (s.e.) |  | ") && md.contains(&cell),
        "{md}"
    );
}

/// Unclustered errors give s/√n, checked by plain arithmetic on the test data; an instrument
/// that is not 0/1 leaves take-up out, and the row and the note say why.
#[test]
fn arm_rows_without_clusters_and_with_a_continuous_instrument() {
    let plan = crate::common::PLAN.edit(
        "rows = [\"d\", \"x\"]",
        "rows = [\"d\", \"x\"]\nsummary_rows = [\"comparison-mean\", \"take-up-by-arm\"]",
    );
    let s = Study::with(&plan, &crate::common::data_csv());
    let v = s.seal_and_run();
    let arms = &v["specifications"]["ols"]["arms"];
    assert_eq!(arms["by"], "d", "{arms}");
    assert_eq!(arms["by_role"], "regressor", "{arms}");
    assert_eq!(arms["std_error_kind"], "unclustered", "{arms}");
    // Plain arithmetic over the generated rows with d = 0.
    let data = crate::common::data_csv();
    let ys: Vec<f64> = data
        .lines()
        .skip(1)
        .filter_map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (f[3] == "0").then(|| f[5].parse::<f64>().expect("y"))
        })
        .collect();
    let n = ys.len() as f64;
    let mean = ys.iter().sum::<f64>() / n;
    let sd = (ys.iter().map(|y| (y - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    let m = &arms["comparison_mean"];
    assert_eq!(m["n"].as_u64(), Some(ys.len() as u64));
    close("mean", m["mean"].as_f64().unwrap_or(f64::NAN), mean);
    close(
        "s/√n",
        m["std_error"].as_f64().unwrap_or(f64::NAN),
        sd / n.sqrt(),
    );

    let plan = plan
        .edit("instruments = [\"z\"]", "instruments = [\"x\"]\n")
        .edit(
            "controls = [\"x\"]\nerrors = { kind = \"cluster\"",
            "controls = [\"z\"]\nerrors = { kind = \"cluster\"",
        );
    let s = Study::with(&plan, &crate::common::data_csv());
    let v = s.seal_and_run();
    let arms = &v["specifications"]["iv"]["arms"];
    assert!(arms["take_up"].is_null(), "{arms}");
    assert_eq!(arms["take_up_missing"], "not-binary", "{arms}");
    let md = s.read("out/report.md");
    assert!(md.contains("| take-up by arm |  | n/a: not 0/1 |"), "{md}");
    assert!(
        md.contains("Take-up by arm not shown for iv: `x` takes values other than 0 and 1"),
        "{md}"
    );
}

/// A misspelt row name is refused with every valid one listed.
#[test]
fn unknown_summary_row_lists_the_valid_ones() {
    let plan = crate::common::PLAN.edit(
        "rows = [\"d\", \"x\"]",
        "rows = [\"d\", \"x\"]\nsummary_rows = [\"take-up\"]",
    );
    let s = Study::with(&plan, &crate::common::data_csv());
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    for name in [
        "`first-stage-strength`",
        "`comparison-mean`",
        "`take-up-by-arm`",
    ] {
        assert!(r.stderr.contains(name), "{}", r.stderr);
    }
    assert!(r.stderr.contains("table[t1].summary_rows"), "{}", r.stderr);
}
