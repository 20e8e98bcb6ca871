//! Summary indices, the balance table and attrition with Lee bounds through the plan path,
//! against the fixtures of tests/reference/summaries.py (numpy formulas and statsmodels OLS).

use crate::common::Study;
use crate::reference::{close, fixture};
use serde_json::Value;

fn num(v: &Value) -> String {
    match v {
        Value::Null => "NA".to_string(),
        Value::Bool(b) => u8::from(*b).to_string(),
        other => format!("{}", other.as_f64().unwrap_or(f64::NAN)),
    }
}

/// The index as the outcome of an intercept-only OLS: the intercept is the mean of the index
/// over the rows that have one, compared with the mean of the fixture's numpy index values.
#[test]
fn summary_indices_through_the_plan_path() {
    let f = fixture("summary_indices.json");
    let comps = f["components"].as_array().expect("rows");
    let refs = f["reference"].as_array().expect("reference");
    let mut csv = String::from("c1,c2,c3,c4,ref\n");
    for (row, r) in comps.iter().zip(refs) {
        let cells: Vec<String> = row.as_array().expect("row").iter().map(num).collect();
        csv.push_str(&format!("{},{}\n", cells.join(","), num(r)));
    }
    let flips: Vec<bool> = f["flip"]
        .as_array()
        .expect("flip")
        .iter()
        .map(|x| x == true)
        .collect();
    let components: Vec<String> = (1..=4)
        .map(|j| format!("\"{}c{j}\"", if flips[j - 1] { "-" } else { "" }))
        .collect();
    let components = components.join(", ");
    for (method, key) in [("mean-z", "mean_z"), ("anderson", "inverse_covariance")] {
        let plan = format!(
            r#"format = 1

[study]
title = "Index reference"

[data.main]
path = "data.csv"

[data.main.columns]
c1 = {{ kind = "number" }}
c2 = {{ kind = "number" }}
c3 = {{ kind = "number" }}
c4 = {{ kind = "number" }}
ref = {{ kind = "binary" }}

[[index]]
id = "idx"
method = "{method}"
components = [{components}]
reference = "ref == 1"

[[specification]]
id = "mean"
estimator = "ols"
outcome = "idx"
regressors = []
errors = "classical"
"#
        );
        let s = Study::with(&plan, &csv);
        let v = s.seal_and_run();
        let values: Vec<f64> = f[key]
            .as_array()
            .expect("values")
            .iter()
            .filter_map(Value::as_f64)
            .collect();
        let mean = values.iter().sum::<f64>() / values.len() as f64;
        let r = &v["specifications"]["mean"];
        assert_eq!(r["n"].as_u64(), Some(values.len() as u64), "{method}");
        close(
            &format!("{method} mean"),
            r["terms"]["intercept"]["estimate"].as_f64().unwrap(),
            mean,
        );
        assert_eq!(
            v["indices"]["idx"]["rows_with_value"].as_u64(),
            Some(values.len() as u64)
        );
        assert!(s.read("out/report.md").contains("## Summary indices"));
    }
}

/// Balance (cluster CR1) and differential attrition against statsmodels, through a plan.
#[test]
fn balance_and_attrition_through_the_plan_path() {
    let f = fixture("summary_balance.json");
    let covs = f["covariates"].as_array().expect("rows");
    let mut csv = String::from("x1,x2,x3,x4,arm,seen,cl\n");
    for i in 0..covs.len() {
        let cells: Vec<String> = covs[i].as_array().expect("row").iter().map(num).collect();
        csv.push_str(&format!(
            "{},{},{},g{}\n",
            cells.join(","),
            num(&f["treated"][i]),
            num(&f["observed"][i]),
            f["clusters"][i]
        ));
    }
    let plan = r#"format = 1

[study]
title = "Balance reference"

[data.main]
path = "data.csv"

[data.main.columns]
x1 = { kind = "number" }
x2 = { kind = "number" }
x3 = { kind = "number" }
x4 = { kind = "number" }
arm = { kind = "binary" }
seen = { kind = "binary" }
cl = { kind = "category" }

[balance]
by = "arm"
covariates = ["x1", "x2", "x3", "x4"]
errors = { kind = "cluster", by = "cl" }

[attrition]
by = "arm"
observed = "seen"
errors = { kind = "cluster", by = "cl" }

[[specification]]
id = "s"
estimator = "ols"
outcome = "x1"
regressors = ["arm"]
"#;
    let s = Study::with(plan, &csv);
    let v = s.seal_and_run();
    let case = f["cases"]
        .as_array()
        .and_then(|c| c.iter().find(|c| c["kind"] == "cluster"))
        .expect("cluster case");
    let b = &v["balance"];
    for (j, name) in ["x1", "x2", "x3", "x4"].iter().enumerate() {
        let r = &b["covariates"][*name];
        close(
            &format!("{name} difference"),
            r["difference"].as_f64().unwrap(),
            case["difference"][j].as_f64().unwrap(),
        );
        close(
            &format!("{name} se"),
            r["std_error"].as_f64().unwrap(),
            case["std_error"][j].as_f64().unwrap(),
        );
        close(
            &format!("{name} p"),
            r["test"]["p_value"].as_f64().unwrap(),
            case["p_value"][j].as_f64().unwrap(),
        );
        close(
            &format!("{name} treated mean"),
            r["mean_treated"].as_f64().unwrap(),
            f["mean_treated"][j].as_f64().unwrap(),
        );
    }
    close(
        "joint F",
        b["joint"]["statistic"].as_f64().unwrap(),
        case["joint_f"].as_f64().unwrap(),
    );
    close(
        "joint p",
        b["joint"]["p_value"].as_f64().unwrap(),
        case["joint_p"].as_f64().unwrap(),
    );
    assert_eq!(
        b["joint"]["distribution"]["df2"].as_f64(),
        case["joint_df_denom"].as_f64()
    );
    let a = &v["attrition"]["differential"];
    close(
        "attrition difference",
        a["difference"].as_f64().unwrap(),
        case["attrition"]["difference"].as_f64().unwrap(),
    );
    close(
        "attrition se",
        a["std_error"].as_f64().unwrap(),
        case["attrition"]["std_error"].as_f64().unwrap(),
    );
    let report = s.read("out/report.md");
    assert!(
        report.contains("## Balance of baseline covariates") && report.contains("## Attrition")
    );
}

/// Lee bounds through `[attrition]`: fixture summary_lee (numpy trimming with fractional
/// weights at the cut).
#[test]
fn lee_bounds_through_the_plan_path() {
    let f = fixture("summary_lee.json");
    let case = &f["cases"][0];
    let n = case["outcome"].as_array().expect("outcome").len();
    let mut csv = String::from("y,arm\n");
    for i in 0..n {
        let y = if case["observed"][i] == true {
            num(&case["outcome"][i])
        } else {
            "NA".into()
        };
        csv.push_str(&format!("{y},{}\n", num(&case["treated"][i])));
    }
    let plan = r#"format = 1

[study]
title = "Lee bounds reference"

[data.main]
path = "data.csv"

[data.main.columns]
y = { kind = "number" }
arm = { kind = "binary" }

[attrition]
by = "arm"
observed = "not is_missing(y)"
bounds = ["y"]

[[specification]]
id = "s"
estimator = "ols"
outcome = "y"
regressors = ["arm"]
"#;
    let v = Study::with(plan, &csv).seal_and_run();
    let b = &v["attrition"]["bounds"]["y"];
    close(
        "Lee lower",
        b["lower"].as_f64().unwrap(),
        case["lower"].as_f64().unwrap(),
    );
    close(
        "Lee upper",
        b["upper"].as_f64().unwrap(),
        case["upper"].as_f64().unwrap(),
    );
    close(
        "trim share",
        b["trim_share"].as_f64().unwrap(),
        case["trim_share"].as_f64().unwrap(),
    );
    assert_eq!(b["trimmed_arm"], case["trimmed_arm"]);
}

#[test]
fn summaries_are_checked_at_check() {
    let bad = |extra: &str, expect: &[&str]| {
        let plan = format!(
            "format = 1\n[study]\ntitle = \"t\"\n[data.main]\npath = \"data.csv\"\n[data.main.columns]\ny = {{ kind = \"number\" }}\nx = {{ kind = \"number\" }}\narm = {{ kind = \"binary\" }}\n\n{extra}\n[[specification]]\nid = \"s\"\nestimator = \"ols\"\noutcome = \"y\"\nregressors = [\"arm\"]\n"
        );
        let s = Study::with(&plan, "y,x,arm\n1,2,0\n2,3,1\n3,1,0\n");
        let r = s.sworn(&["check", "plan.toml"]);
        assert_eq!(r.code, 2, "{}{}", r.stdout, r.stderr);
        for e in expect {
            assert!(r.stderr.contains(e), "stderr lacks `{e}`: {}", r.stderr);
        }
    };
    bad(
        "[balance]\nby = \"x\"\ncovariates = [\"y\"]\n",
        &["balance.by", "binary"],
    );
    bad(
        "[balance]\nby = \"arm\"\ncovariates = [\"yy\"]\n",
        &["balance.covariates", "`yy`", "`y`"],
    );
    bad("[[index]]\nid = \"i\"\nmethod = \"pca\"\ncomponents = [\"x\", \"y\"]\nreference = \"arm == 0\"\n", &["index[i].method", "anderson"]);
    bad("[[index]]\nid = \"i\"\nmethod = \"mean-z\"\ncomponents = [\"x\"]\nreference = \"arm == 0\"\n", &["index[i].components", "at least two"]);
    bad("[[index]]\nid = \"y\"\nmethod = \"mean-z\"\ncomponents = [\"x\", \"arm\"]\nreference = \"arm == 0\"\n", &["index[y].id", "already"]);
    bad(
        "[attrition]\nby = \"arm\"\nobserved = \"not is_missing(q)\"\n",
        &["attrition.observed", "`q`"],
    );
}

/// Issue 9 item 8: differential attrition significant at the plan's alpha adds a caution
/// naming the hypotheses on the table; equal observation rates add none.
#[test]
fn significant_differential_attrition_names_the_hypotheses() {
    let plan = r#"format = 1

[study]
title = "Attrition caution"

[data.main]
path = "data.csv"

[data.main.columns]
y = { kind = "number" }
arm = { kind = "binary" }

[attrition]
by = "arm"
observed = "not is_missing(y)"

[[specification]]
id = "s"
estimator = "ols"
outcome = "y"
regressors = ["arm"]

[[hypothesis]]
id = "H_arm"
specification = "s"
term = "arm"
"#;
    for differential in [true, false] {
        let mut csv = String::from("y,arm\n");
        for i in 0..200 {
            let arm = i % 2;
            // Treated 95% observed against 75% (differential), or 75% in both arms.
            let seen = if differential && arm == 1 {
                (i / 2) % 20 != 0
            } else {
                (i / 2) % 4 != 0
            };
            let y = if seen {
                format!(
                    "{}",
                    0.01 * f64::from(i) + f64::from(arm) + f64::from(i % 7)
                )
            } else {
                "NA".into()
            };
            csv.push_str(&format!("{y},{arm}\n"));
        }
        let s = Study::with(plan, &csv);
        let v = s.seal_and_run();
        let a = &v["attrition"];
        assert_eq!(a["data"], "main", "{a}");
        assert_eq!(a["alpha"].as_f64(), Some(0.05), "{a}");
        assert_eq!(
            a["hypotheses_on_table"],
            serde_json::json!(["H_arm"]),
            "{a}"
        );
        let p = a["differential"]["test"]["p_value"].as_f64().expect("p");
        assert_eq!(a["significant"].as_bool(), Some(differential), "{a}");
        assert_eq!(p <= 0.05, differential, "{a}");
        let report = s.read("out/report.md");
        let caution = report
            .contains("Outcomes are observed at different rates in the two arms of table `main`")
            && report.contains("this affects H_arm");
        assert_eq!(caution, differential, "{report}");
    }
}
