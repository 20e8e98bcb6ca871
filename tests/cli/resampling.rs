//! Resampled inference through the whole tool: `[resampling]`, randomization inference from
//! `[assignment]`, the restricted wild cluster bootstrap, and resampling-based family
//! corrections; validation at check and exact results on small designs.

use crate::common::Edit;
use crate::common::{data_csv, Study, PLAN};

fn check_fails(plan: &str, expect: &[&str]) {
    let s = Study::with(plan, &data_csv());
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2, "expected exit 2: {}{}", r.stdout, r.stderr);
    for e in expect {
        assert!(r.stderr.contains(e), "stderr lacks `{e}`: {}", r.stderr);
    }
    assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
}

/// The base plan with an ITT spec on `z`, an assignment, and the given hypothesis lines.
fn plan_with(resampling: &str, hypothesis: &str) -> String {
    PLAN.edit(
        "[[hypothesis]]\nid = \"H1\"",
        &format!(
            "{resampling}\n[assignment]\nvariable = \"z\"\ndesign = \"complete\"\n\n[[specification]]\nid = \"itt\"\nestimator = \"ols\"\noutcome = \"y\"\nregressors = [\"z\"]\ncontrols = [\"x\"]\nerrors = {{ kind = \"cluster\", by = \"grp\" }}\n\n[[hypothesis]]\nid = \"H3\"\nspecification = \"itt\"\nterm = \"z\"\n{hypothesis}\n\n[[hypothesis]]\nid = \"H1\""
        ),
    )
}

#[test]
fn resampled_inference_needs_a_seed() {
    check_fails(
        &plan_with("", "inference = \"randomization\""),
        &["hypothesis[H3].inference", "[resampling]"],
    );
    check_fails(
        &plan_with(
            "[resampling]\ndraws = 999\n",
            "inference = \"randomization\"",
        ),
        &["missing field `seed`"],
    );
    check_fails(
        &plan_with(
            "[resampling]\nseed = 1\ndraws = 5\n",
            "inference = \"randomization\"",
        ),
        &["resampling.draws", "at least 99"],
    );
    check_fails(
        &plan_with(
            "[resampling]\nseed = 1\nexact_below = 100000000000\n",
            "inference = \"randomization\"",
        ),
        &["resampling.exact_below", "at most 10000000"],
    );
}

#[test]
fn resampled_inference_must_fit_the_hypothesis() {
    let r = "[resampling]\nseed = 20260501\n";
    // Randomization inference on a term that was not randomized.
    let on_x = plan_with(r, "inference = \"randomization\"")
        .edit("term = \"z\"\ninference", "term = \"x\"\ninference");
    check_fails(
        &on_x,
        &["hypothesis[H3].inference", "assigned variable `z`"],
    );
    // A statistic without randomization, weights without the bootstrap.
    check_fails(
        &plan_with(r, "statistic = \"t\""),
        &["hypothesis[H3].statistic"],
    );
    check_fails(
        &plan_with(r, "inference = \"randomization\"\nweights = \"webb\""),
        &["hypothesis[H3].weights"],
    );
    // The wild bootstrap needs clustered errors.
    let hc1 = plan_with(r, "inference = \"wild-bootstrap\"").edit(
        "regressors = [\"z\"]\ncontrols = [\"x\"]\nerrors = { kind = \"cluster\", by = \"grp\" }",
        "regressors = [\"z\"]\ncontrols = [\"x\"]\nerrors = \"hc1\"",
    );
    check_fails(&hc1, &["hypothesis[H3].inference", "one-way clusters"]);
    check_fails(
        &plan_with(r, "inference = \"bootstrap\""),
        &["hypothesis[H3].inference", "wild-bootstrap"],
    );
}

#[test]
fn romano_wolf_needs_resampled_members() {
    let r = "[resampling]\nseed = 20260501\n";
    let plan = plan_with(r, "inference = \"randomization\"")
        .edit("correction = \"holm\"", "correction = \"romano-wolf\"");
    check_fails(&plan, &["family.main.correction", "same inference"]);
}

fn fixture_case(file: &str, name: &str) -> serde_json::Value {
    let f = crate::reference::fixture(file);
    f["cases"]
        .as_array()
        .and_then(|a| a.iter().find(|c| c["name"] == name).cloned())
        .unwrap_or_else(|| panic!("case {name} in {file}"))
}

/// CSV of y and the columns 1.. of the fixture's x (column 0 is the intercept), plus ids.
fn csv_from(case: &serde_json::Value, names: &[&str], ids: Option<&str>) -> String {
    let y = case["y"].as_array().expect("y");
    let x = case["x"].as_array().expect("x");
    let mut out = format!("y,{}", names.join(","));
    if let Some(ids) = ids {
        out.push_str(&format!(",{ids}"));
    }
    out.push('\n');
    for (i, yi) in y.iter().enumerate() {
        let row = x[i].as_array().expect("row");
        let cells: Vec<String> = row[1..]
            .iter()
            .map(|v| format!("{}", v.as_f64().unwrap()))
            .collect();
        out.push_str(&format!("{},{}", yi.as_f64().unwrap(), cells.join(",")));
        if ids.is_some() {
            out.push_str(&format!(",g{}", case["clusters"][i]));
        }
        out.push('\n');
    }
    out
}

fn small_plan(
    errors: &str,
    regressors: &str,
    hypothesis: &str,
    extra_columns: &str,
    assignment: &str,
) -> String {
    format!(
        r#"format = 1

[study]
title = "Exact resampling reference"

[data.main]
path = "data.csv"

[data.main.columns]
y = {{ kind = "number" }}
t = {{ kind = "number" }}
w = {{ kind = "number" }}
{extra_columns}

{assignment}

[resampling]
seed = 7
draws = 999

[[specification]]
id = "s"
estimator = "ols"
outcome = "y"
regressors = [{regressors}]
controls = ["w"]
errors = {errors}

{hypothesis}
"#
    )
}

/// All 924 assignments of 6 treated among 12 units, HC1 t statistic: the p-values are the
/// counts of tests/reference/resampling.py (statsmodels refit of every assignment) over 924.
#[test]
fn exact_randomization_inference_through_the_plan_path() {
    let case = fixture_case("resample_ri.json", "complete_hc1_t_0.0");
    let csv = csv_from(&case, &["t", "w"], None);
    for (direction, count) in [("two-sided", "count_two"), ("greater", "count_upper")] {
        let hyp = format!(
            "[[hypothesis]]\nid = \"R\"\nspecification = \"s\"\nterm = \"t\"\ndirection = \"{direction}\"\ninference = \"randomization\"\n"
        );
        let plan = small_plan(
            "\"hc1\"",
            "\"t\"",
            &hyp,
            "",
            "[assignment]\nvariable = \"t\"\ndesign = \"complete\"",
        );
        let s = Study::with(&plan, &csv);
        let v = s.seal_and_run();
        let h = &v["hypotheses"]["R"];
        assert_eq!(h["method"], "randomization", "{h}");
        assert_eq!(h["exact"], true, "{h}");
        assert_eq!(h["draws"], 924, "{h}");
        let info = &h["resampling"];
        assert_eq!(info["procedure"], "randomization", "{info}");
        assert_eq!(info["mode"], "exact", "{info}");
        assert_eq!(info["draws_used"], 924, "{info}");
        assert_eq!(info["draws_skipped"], 0, "{info}");
        assert_eq!(info["seed_used"], false, "{info}");
        assert_eq!(info["statistic"], "t", "{info}");
        assert_eq!(info["redrawn"]["design"], "complete", "{info}");
        assert_eq!(info["redrawn"]["variable"], "t", "{info}");
        let rule = if direction == "greater" {
            "T* >= T"
        } else {
            "|T*| >= |T|"
        };
        assert_eq!(info["p_value_counts"], rule, "{info}");
        let want = case[count].as_f64().unwrap() / 924.0;
        assert_eq!(h["p_value"].as_f64(), Some(want), "{direction}: {h}");
        crate::reference::close(
            "observed t",
            h["statistic"].as_f64().unwrap(),
            case["observed"].as_f64().unwrap(),
        );
        assert!(
            s.read("out/report.md").contains("sharp null"),
            "the caution on randomization p-values"
        );
        // verify re-derives the resampled p-value bit for bit.
        let r = s.sworn(&["verify", "out"]);
        assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    }
}

/// With `exact_below` under the 924 possible assignments the test samples: results.json
/// records the requested and used draws, the seed and the counting rule, and the report's
/// Resampling line states those same values.
#[test]
fn sampled_randomization_is_described_in_results_and_report() {
    let case = fixture_case("resample_ri.json", "complete_hc1_t_0.0");
    let csv = csv_from(&case, &["t", "w"], None);
    let hyp = "[[hypothesis]]\nid = \"R\"\nspecification = \"s\"\nterm = \"t\"\ndirection = \"less\"\ninference = \"randomization\"\nstatistic = \"estimate\"\n";
    let plan = small_plan(
        "\"hc1\"",
        "\"t\"",
        hyp,
        "",
        "[assignment]\nvariable = \"t\"\ndesign = \"complete\"",
    )
    .edit("draws = 999", "draws = 199\nexact_below = 100");
    let s = Study::with(&plan, &csv);
    let v = s.seal_and_run();
    let info = &v["hypotheses"]["R"]["resampling"];
    assert_eq!(info["mode"], "sampled", "{info}");
    assert_eq!(info["draws_requested"], 199, "{info}");
    assert_eq!(info["exact_below"], 100, "{info}");
    assert_eq!(info["draws_used"], 200, "{info}");
    assert_eq!(info["draws_skipped"], 0, "{info}");
    assert_eq!(info["seed"], 7, "{info}");
    assert_eq!(info["seed_used"], true, "{info}");
    assert_eq!(info["statistic"], "estimate", "{info}");
    assert_eq!(info["p_value_counts"], "T* <= T", "{info}");
    assert_eq!(info["null_imposed"], 0.0, "{info}");
    assert_eq!(v["hypotheses"]["R"]["draws"], 200);
    let md = s.read("out/report.md");
    assert!(
        md.contains("the coefficient estimate recomputed under the sharp null (coefficient 0); sampled: 199 random draws with seed 7 plus the observed assignment, 200 used (the observed one counted); p-value: the share of the 200 draws with T* ≤ T"),
        "{md}"
    );
}

/// Ten clusters, all 1,024 Rademacher sign vectors of the restricted wild bootstrap: the
/// p-value is the numpy brute-force count over 1,024 (tests/reference/resampling.py).
#[test]
fn exact_wild_bootstrap_through_the_plan_path() {
    let case = fixture_case("resample_wild.json", "wild_rademacher_g10");
    let csv = csv_from(&case, &["t", "w"], Some("g"));
    let hyp = "[[hypothesis]]\nid = \"W\"\nspecification = \"s\"\nterm = \"t\"\ninference = \"wild-bootstrap\"\n";
    let plan = small_plan(
        "{ kind = \"cluster\", by = \"g\" }",
        "\"t\"",
        hyp,
        "g = { kind = \"category\" }",
        "",
    );
    let s = Study::with(&plan, &csv);
    let v = s.seal_and_run();
    let h = &v["hypotheses"]["W"];
    assert_eq!(h["method"], "wild-bootstrap", "{h}");
    assert_eq!(h["exact"], true, "{h}");
    assert_eq!(h["draws"], 1024, "{h}");
    let info = &h["resampling"];
    assert_eq!(info["procedure"], "wild-bootstrap", "{info}");
    assert_eq!(info["bootstrap"], "restricted-wild-cluster", "{info}");
    assert_eq!(info["weights"], "rademacher", "{info}");
    assert_eq!(info["mode"], "exact", "{info}");
    assert_eq!(info["redrawn"]["clusters"], "g", "{info}");
    assert_eq!(info["redrawn"]["cluster_count"], 10, "{info}");
    assert_eq!(info["observed_counted"], true, "{info}");
    assert_eq!(
        h["p_value"].as_f64(),
        Some(case["count_two"].as_f64().unwrap() / 1024.0),
        "{h}"
    );
    crate::reference::close(
        "observed t",
        h["statistic"].as_f64().unwrap(),
        case["observed"].as_f64().unwrap(),
    );
    assert!(s
        .read("out/report.md")
        .contains("restricted wild cluster bootstrap (exact: all 1024 draws)"));
}

/// A cluster-count rule switches a model-based hypothesis to the wild bootstrap.
#[test]
fn few_clusters_rule_switches_to_the_wild_bootstrap() {
    let case = fixture_case("resample_wild.json", "wild_rademacher_g10");
    let csv = csv_from(&case, &["t", "w"], Some("g"));
    let hyp = "[[hypothesis]]\nid = \"W\"\nspecification = \"s\"\nterm = \"t\"\n\n[[contingency]]\nid = \"few\"\nspecification = \"s\"\nwhen = { clusters = { fewer_than = 30 } }\nthen = \"wild-bootstrap\"\n";
    let plan = small_plan(
        "{ kind = \"cluster\", by = \"g\" }",
        "\"t\"",
        hyp,
        "g = { kind = \"category\" }",
        "",
    );
    let v = Study::with(&plan, &csv).seal_and_run();
    let c = &v["contingencies"][0];
    assert_eq!(c["invoked"], true, "{c}");
    assert_eq!(c["value"], 10.0, "{c}");
    let h = &v["hypotheses"]["W"];
    assert_eq!(h["method"], "wild-bootstrap", "{h}");
    assert_eq!(h["contingency"], "few", "{h}");
    assert_eq!(
        h["p_value"].as_f64(),
        Some(case["count_two"].as_f64().unwrap() / 1024.0)
    );
    // With more clusters than the threshold the rule stays idle, and its bootstrap is not run
    // (so a fixed effect not nested in the clusters, which would stop it, does no harm).
    let idle = plan.edit("fewer_than = 30", "fewer_than = 5");
    let v = Study::with(&idle, &csv).seal_and_run();
    assert_eq!(v["contingencies"][0]["invoked"], false);
    assert_eq!(v["hypotheses"]["W"]["method"], "t");
    let with_fe = idle
        .edit(
            "g = { kind = \"category\" }",
            "g = { kind = \"category\" }\nband = { kind = \"category\" }",
        )
        .edit(
            "controls = [\"w\"]",
            "controls = [\"w\"]\nfixed_effects = [\"band\"]",
        );
    let banded: String = csv
        .lines()
        .enumerate()
        .map(|(i, l)| {
            if i == 0 {
                format!("{l},band\n")
            } else {
                format!("{l},b{}\n", i % 3)
            }
        })
        .collect();
    let v = Study::with(&with_fe, &banded).seal_and_run();
    assert_eq!(v["contingencies"][0]["invoked"], false);
    // Fired, the same plan stops with a clear message instead of an inexact bootstrap.
    let fired = with_fe.edit("fewer_than = 5", "fewer_than = 30");
    let s = Study::with(&fired, &banded);
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    assert_eq!(r.code, 2, "{}", r.stdout);
    assert!(
        r.stderr.contains("nested in the cluster variable"),
        "{}",
        r.stderr
    );
}

/// Romano–Wolf over the joint draws of two randomization tests on the same units. With two
/// identical outcomes the maximum over the family equals each statistic, so the step-down
/// must return the raw exact p-values (84/924, from the statsmodels refits); with an unrelated
/// second outcome the adjusted values lie between the raw ones and Bonferroni's.
#[test]
fn romano_wolf_on_joint_randomization_draws() {
    let case = fixture_case("resample_ri.json", "complete_hc1_t_0.0");
    let base = csv_from(&case, &["t", "w"], None);
    let with_y2 = |reverse: bool| {
        let lines: Vec<&str> = base.lines().collect();
        let ys: Vec<&str> = lines[1..]
            .iter()
            .map(|l| l.split(',').next().unwrap_or(""))
            .collect();
        let mut out = format!("{},y2\n", lines[0]);
        for (i, l) in lines[1..].iter().enumerate() {
            let y2 = if reverse { ys[ys.len() - 1 - i] } else { ys[i] };
            out.push_str(&format!("{l},{y2}\n"));
        }
        out
    };
    let hyps = "[[specification]]\nid = \"s2\"\nestimator = \"ols\"\noutcome = \"y2\"\nregressors = [\"t\"]\ncontrols = [\"w\"]\nerrors = \"hc1\"\n\n[[hypothesis]]\nid = \"A\"\nspecification = \"s\"\nterm = \"t\"\ninference = \"randomization\"\nfamily = \"f\"\n\n[[hypothesis]]\nid = \"B\"\nspecification = \"s2\"\nterm = \"t\"\ninference = \"randomization\"\nfamily = \"f\"\n\n[family.f]\ncorrection = \"romano-wolf\"\n";
    let plan = small_plan(
        "\"hc1\"",
        "\"t\"",
        hyps,
        "y2 = { kind = \"number\" }",
        "[assignment]\nvariable = \"t\"\ndesign = \"complete\"",
    );
    let v = Study::with(&plan, &with_y2(false)).seal_and_run();
    let want = case["count_two"].as_f64().unwrap() / 924.0;
    for id in ["A", "B"] {
        let h = &v["hypotheses"][id];
        assert_eq!(h["correction"], "romano-wolf", "{h}");
        assert_eq!(h["p_value"].as_f64(), Some(want), "{h}");
        assert_eq!(h["adjusted_p_value"].as_f64(), Some(want), "{h}");
    }
    let v = Study::with(&plan, &with_y2(true)).seal_and_run();
    for id in ["A", "B"] {
        let h = &v["hypotheses"][id];
        let (p, adj) = (
            h["p_value"].as_f64().unwrap(),
            h["adjusted_p_value"].as_f64().unwrap(),
        );
        assert!(p <= adj && adj <= (2.0 * p).min(1.0) + 1e-15, "{h}");
    }
}

/// The wild restricted efficient bootstrap for a 2SLS coefficient through a plan: eight
/// clusters, all 256 Rademacher vectors, two instruments; p-value = the numpy brute-force
/// count over 256 (tests/reference/wre.py, fixture resample_wre).
#[test]
fn exact_wre_bootstrap_through_the_plan_path() {
    let case = fixture_case("resample_wre.json", "rademacher_g8_over_null0");
    let n = case["y"].as_array().expect("y").len();
    let mut csv = String::from("y,w,d,z1,z2,g\n");
    for i in 0..n {
        let f = |v: &serde_json::Value| format!("{}", v.as_f64().unwrap());
        csv.push_str(&format!(
            "{},{},{},{},{},g{}\n",
            f(&case["y"][i]),
            f(&case["exog"][i][1]),
            f(&case["endog"][i]),
            f(&case["instruments"][i][0]),
            f(&case["instruments"][i][1]),
            case["clusters"][i]
        ));
    }
    let plan = r#"format = 1

[study]
title = "WRE reference"

[data.main]
path = "data.csv"

[data.main.columns]
y = { kind = "number" }
w = { kind = "number" }
d = { kind = "number" }
z1 = { kind = "number" }
z2 = { kind = "number" }
g = { kind = "category" }

[resampling]
seed = 3

[[specification]]
id = "iv"
estimator = "2sls"
outcome = "y"
endogenous = ["d"]
instruments = ["z1", "z2"]
controls = ["w"]
errors = { kind = "cluster", by = "g" }

[[hypothesis]]
id = "E"
specification = "iv"
term = "d"
inference = "wild-bootstrap"
"#;
    let v = Study::with(plan, &csv).seal_and_run();
    let h = &v["hypotheses"]["E"];
    assert_eq!(h["method"], "wild-bootstrap", "{h}");
    assert_eq!(h["exact"], true, "{h}");
    assert_eq!(h["draws"], 256, "{h}");
    assert_eq!(
        h["resampling"]["bootstrap"], "wild-restricted-efficient",
        "{h}"
    );
    assert_eq!(
        h["p_value"].as_f64(),
        Some(case["count_two"].as_f64().unwrap() / 256.0),
        "{h}"
    );
    crate::reference::close(
        "observed t",
        h["statistic"].as_f64().unwrap(),
        case["observed"].as_f64().unwrap(),
    );
    // One-sided: the upper count of the same enumeration (a signed t, not the AR statistic).
    let greater = plan.edit(
        "inference = \"wild-bootstrap\"",
        "direction = \"greater\"\ninference = \"wild-bootstrap\"",
    );
    let v = Study::with(&greater, &csv).seal_and_run();
    assert_eq!(
        v["hypotheses"]["E"]["p_value"].as_f64(),
        Some(case["count_upper"].as_f64().unwrap() / 256.0)
    );
    // A hypothesis on a control of a 2SLS specification cannot use it.
    let on_w = plan.edit("term = \"d\"", "term = \"w\"");
    let s = Study::with(&on_w, &csv);
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stderr.contains("endogenous coefficient"), "{}", r.stderr);
}
