//! Resampled tests of weighted specifications through a plan, against the brute-force
//! fixture of tests/reference/weights_resampling.py (every Rademacher vector of 8 clusters,
//! every one of the 924 assignments, each draw refitted by statsmodels WLS or linearmodels
//! IV2SLS with weights): the wild cluster bootstrap of weighted OLS (also with a fixed effect
//! nested in the clusters) and the wild restricted efficient bootstrap of weighted 2SLS, and
//! randomization tests of weighted OLS (t and estimate) and of weighted 2SLS (Anderson–Rubin). p-values (ratios of counts) exactly; the observed statistic at relative 1e-8.

use crate::reference::{close, fixture};
use crate::weighted_fixed_effects::csv;
use serde_json::Value;

const WILD: &str = r#"format = 1

[study]
title = "Weighted wild bootstrap reference"

[data.main]
path = "data.csv"

[data.main.columns]
g  = { kind = "integer" }
h  = { kind = "integer" }
y  = { kind = "number" }
x  = { kind = "number" }
c  = { kind = "number" }
z1 = { kind = "number" }
z2 = { kind = "number" }
w  = { kind = "number" }

[resampling]
seed = 11

[[specification]]
id = "ols"
estimator = "ols"
outcome = "y"
regressors = ["x"]
controls = ["c"]
weights = "w"
errors = { kind = "cluster", by = "g" }

[[specification]]
id = "ols_fe"
estimator = "ols"
outcome = "y"
regressors = ["x"]
controls = ["c"]
fixed_effects = ["h"]
weights = "w"
errors = { kind = "cluster", by = "g" }

[[specification]]
id = "iv"
estimator = "2sls"
outcome = "y"
endogenous = ["x"]
instruments = ["z1", "z2"]
controls = ["c"]
weights = "w"
errors = { kind = "cluster", by = "g" }

[[hypothesis]]
id = "W_ols"
specification = "ols"
term = "x"
null = 0.2
inference = "wild-bootstrap"

[[hypothesis]]
id = "W_ols_fe"
specification = "ols_fe"
term = "x"
null = 0.2
inference = "wild-bootstrap"

[[hypothesis]]
id = "W_iv"
specification = "iv"
term = "x"
null = -0.5
inference = "wild-bootstrap"
"#;

const RANDOMIZED: &str = r#"format = 1

[study]
title = "Weighted randomization reference"

[data.main]
path = "data.csv"

[data.main.columns]
y = { kind = "number" }
t = { kind = "number" }
c = { kind = "number" }
w = { kind = "number" }
x = { kind = "number" }

[assignment]
variable = "t"
design = "complete"

[resampling]
seed = 11

[[specification]]
id = "s"
estimator = "ols"
outcome = "y"
regressors = ["t"]
controls = ["c"]
weights = "w"
errors = "hc1"

[[hypothesis]]
id = "R_t"
specification = "s"
term = "t"
inference = "randomization"

[[hypothesis]]
id = "R_estimate"
specification = "s"
term = "t"
null = 0.4
inference = "randomization"
statistic = "estimate"

[[specification]]
id = "iv"
estimator = "2sls"
outcome = "y"
endogenous = ["x"]
instruments = ["t"]
controls = ["c"]
weights = "w"
errors = "hc1"

[[hypothesis]]
id = "R_ar"
specification = "iv"
term = "x"
null = 0.5
inference = "randomization"
"#;

/// The hypothesis's two-sided p-value and observed statistic against the fixture's case.
fn check(h: &Value, e: &Value, id: &str) {
    let draws = e["draws"].as_u64().expect("draws");
    assert_eq!(h["exact"], true, "{id}: {h}");
    assert_eq!(h["draws"], draws, "{id}");
    let want = e["count_two"].as_f64().expect("count") / draws as f64;
    assert_eq!(h["p_value"].as_f64(), Some(want), "{id}: {h}");
    close(
        &format!("{id} observed"),
        h["statistic"].as_f64().expect("statistic"),
        e["observed"].as_f64().expect("observed"),
    );
}

#[test]
fn weighted_wild_bootstraps_match_brute_force_through_a_plan() {
    let f = fixture("weights_resampling.json");
    let names = ["g", "h", "y", "x", "c", "z1", "z2", "w"];
    let s = crate::common::Study::with(WILD, &csv(&f["clustered"], &names));
    let v = s.seal_and_run();
    let fe = &f["expected"]["wild_ols_fe"];
    check(&v["hypotheses"]["W_ols_fe"], fe, "W_ols_fe");
    check(
        &v["hypotheses"]["W_ols"],
        &f["expected"]["wild_ols"],
        "W_ols",
    );
    check(
        &v["hypotheses"]["W_iv"],
        &f["expected"]["wild_tsls"],
        "W_iv",
    );
    let report = s.read("out/report.md");
    assert_eq!(
        report
            .matches("CR1 t recomputed by weighted least squares (weights `w`")
            .count(),
        3,
        "the report says the bootstrap refits are weighted"
    );
    let r = s.sworn(&["verify", "out"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
}

#[test]
fn weighted_randomization_matches_brute_force_through_a_plan() {
    let f = fixture("weights_resampling.json");
    let names = ["y", "t", "c", "w", "x"];
    let s = crate::common::Study::with(RANDOMIZED, &csv(&f["randomized"], &names));
    let v = s.seal_and_run();
    check(&v["hypotheses"]["R_t"], &f["expected"]["ri_t"], "R_t");
    // 2SLS: the Anderson–Rubin statistic with the instrument re-drawn, weights staying.
    check(&v["hypotheses"]["R_ar"], &f["expected"]["ri_ar"], "R_ar");
    check(
        &v["hypotheses"]["R_estimate"],
        &f["expected"]["ri_estimate"],
        "R_estimate",
    );
    let interval = &v["hypotheses"]["R_t"]["randomization_interval"];
    // The interval inverts the weighted test checked above; its ends are not checked
    // against an outside reference here, only that they enclose the weighted estimate.
    let b = v["specifications"]["s"]["terms"]["t"]["estimate"]
        .as_f64()
        .expect("estimate");
    let end = |k: &str| interval[k].as_f64().expect("a bounded end");
    assert!(end("lower") < b && b < end("upper"), "{interval}");
    // verify re-derives the weighted resampled results bit for bit.
    let r = s.sworn(&["verify", "out"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    let report = s.read("out/report.md");
    assert_eq!(
        report
            .matches(
                "each unit keeping its weight `w` and every draw fitted by weighted least squares"
            )
            .count(),
        3,
        "the report says the draws keep the weights"
    );
}
