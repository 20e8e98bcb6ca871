//! HAC errors through a plan: the `hac` fixture (tests/reference/hac.py: statsmodels OLS HAC,
//! linearmodels IV2SLS kernel covariance and IVGMM J, statsmodels Wald tests, numpy for the
//! dropped-rows convention and the Newey–West 1994 rule) written as a weekly CSV, and the
//! plan errors a user can make.

use crate::common::Edit;
use crate::common::Study;
use crate::reference::{close, fixture};
use serde_json::Value;
use std::fmt::Write;

const PLAN: &str = r#"format = 1

[study]
title = "HAC reference"

[data.main]
path = "data.csv"
order_by = "t"

[data.main.columns]
t      = { kind = "integer" }
y      = { kind = "number" }
y_gap  = { kind = "number" }
x      = { kind = "number" }
w      = { kind = "number" }
z1     = { kind = "number" }
z2     = { kind = "number" }

[[specification]]
id = "ols"
estimator = "ols"
outcome = "y"
regressors = ["x"]
controls = ["w"]
errors = { kind = "hac", kernel = "bartlett", bandwidth = 5 }

[[specification]]
id = "iv"
estimator = "2sls"
outcome = "y"
endogenous = ["x"]
instruments = ["z1", "z2"]
controls = ["w"]
errors = { kind = "hac", bandwidth = 5 }
diagnostics = ["first_stage", "overidentification", "weak_instruments"]

[[specification]]
id = "gap"
estimator = "ols"
outcome = "y_gap"
regressors = ["x"]
controls = ["w"]
errors = { kind = "hac", bandwidth = 5 }

[[specification]]
id = "auto"
estimator = "ols"
outcome = "y"
regressors = ["x"]
controls = ["w"]
errors = { kind = "hac", bandwidth = "newey-west-1994" }
"#;

/// The fixture as a CSV with a time column `t` (rows shuffled so the sort is exercised) and
/// `y_gap`, the outcome missing at the fixture's dropped rows.
fn data(f: &Value) -> String {
    let col = |c: &str| -> Vec<f64> {
        f["data"][c]
            .as_array()
            .expect("column")
            .iter()
            .map(|v| v.as_f64().expect("number"))
            .collect()
    };
    let (y, x, w, z1, z2) = (col("y"), col("x"), col("w"), col("z1"), col("z2"));
    let dropped: Vec<usize> = f["expected"]["gap_rows_dropped"]
        .as_array()
        .expect("rows")
        .iter()
        .map(|v| v.as_u64().expect("row") as usize)
        .collect();
    let mut out = String::from("t,y,y_gap,x,w,z1,z2\n");
    let n = y.len();
    for k in 0..n {
        let i = (k * 7) % n; // 7 is prime to n = 150: a permutation
        let gap = if dropped.contains(&i) {
            "NA".to_string()
        } else {
            format!("{}", y[i])
        };
        let _ = writeln!(
            out,
            "{},{},{gap},{},{},{},{}",
            i + 1,
            y[i],
            x[i],
            w[i],
            z1[i],
            z2[i]
        );
    }
    out
}

fn se_check(r: &Value, cov: &Value, what: &str) {
    for (j, name) in ["x", "w", "intercept"].iter().enumerate() {
        let want = cov[j][j].as_f64().expect("cov").sqrt();
        let got = r["terms"][*name]["std_error"].as_f64().expect("se");
        close(&format!("{what} se {name}"), got, want);
    }
}

#[test]
fn hac_errors_through_the_plan_path() {
    let f = fixture("hac.json");
    let e = &f["expected"];
    let s = Study::with(PLAN, &data(&f));
    let v = s.seal_and_run();
    let specs = &v["specifications"];
    se_check(&specs["ols"], &e["ols_cov"], "ols");
    se_check(&specs["iv"], &e["tsls_cov"], "2sls");
    se_check(&specs["gap"], &e["gap_ols_cov"], "gap");
    let iv = &specs["iv"];
    close(
        "first-stage robust F",
        iv["first_stage"]["x"]["robust_f_statistic"]
            .as_f64()
            .unwrap(),
        e["first_stage_robust_f"].as_f64().unwrap(),
    );
    close(
        "Hansen J",
        iv["overidentification"]["hansen_j"]["statistic"]
            .as_f64()
            .unwrap(),
        e["hansen_j"].as_f64().unwrap(),
    );
    close(
        "AR at 0",
        iv["anderson_rubin"]["statistic"].as_f64().unwrap(),
        e["ar_statistic_at_0"].as_f64().unwrap(),
    );
    let hac = &specs["ols"]["hac"];
    assert_eq!(hac["kernel"], "bartlett");
    assert_eq!(hac["bandwidth"], 5.0);
    assert_eq!(hac["lags"], 4);
    assert_eq!(hac["bandwidth_rule"], "stated");
    let auto = &specs["auto"]["hac"];
    assert_eq!(auto["bandwidth_rule"], "newey-west-1994");
    close(
        "NW1994 bandwidth",
        auto["bandwidth"].as_f64().unwrap(),
        e["nw1994_ols"].as_f64().unwrap(),
    );
    let report = s.read("out/report.md");
    assert!(report.contains("Bartlett kernel over the rows in `t` order with bandwidth b = 5"));
    assert!(report.contains("Newey–West (1994) rule"));
    let verify = s.sworn(&["verify", "out"]);
    assert_eq!(verify.code, 0, "{}", verify.stderr);
}

fn refused(plan: &str, data: &str, expect: &[&str]) {
    let s = Study::with(plan, data);
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    assert_eq!(r.code, 2, "{}{}", r.stdout, r.stderr);
    for e in expect {
        assert!(r.stderr.contains(e), "stderr lacks `{e}`: {}", r.stderr);
    }
    assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
    assert!(!s.path("out").exists(), "no output on bad input");
}

#[test]
fn hac_plan_errors_name_the_fix() {
    let f = fixture("hac.json");
    let csv = data(&f);
    refused(
        &PLAN.edit("order_by = \"t\"\n", ""),
        &csv,
        &["specification[ols].errors", "add order_by = \"COLUMN\""],
    );
    refused(
        &PLAN.edit("kernel = \"bartlett\"", "kernel = \"parzen\""),
        &csv,
        &["kernel \"parzen\" is not available"],
    );
    refused(
        &PLAN.edit(
            "bandwidth = 5 }\n\n[[specification]]\nid = \"iv\"",
            "bandwidth = 0 }\n\n[[specification]]\nid = \"iv\"",
        ),
        &csv,
        &["bandwidth 0 is not valid", "newey-west-1994"],
    );
    refused(
        &PLAN.edit(
            "{ kind = \"hac\", kernel = \"bartlett\", bandwidth = 5 }",
            "\"hac\"",
        ),
        &csv,
        &["hac errors need a bandwidth"],
    );
    // Two rows at the same time position: HAC lags would be meaningless.
    let repeated = csv.edit_first("\n1,", "\n2,");
    refused(
        PLAN,
        &repeated,
        &["order_by column `t`", "more than one row"],
    );
}
