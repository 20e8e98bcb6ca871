//! The `clr` decision-rule action through the whole tool: refused at check for two-way
//! clustered and HAC errors; at run (homoskedastic with classical errors, robust with HC or
//! one-way clustered errors), a rule that fires tests the hypothesis with
//! the conditional LR test at its null and reports the CLR set as its interval (no verdict
//! when that set is unbounded), in results.json and in the report.

use crate::contingency::{check_fails, plan, run, spec, weak_rule, Gen};

/// Two instruments, weak enough for the F < 10 rule to fire.
fn weak_two(strength: f64, seed: u64) -> String {
    Gen {
        strength,
        strength2: strength,
        seed,
        ..Gen::default()
    }
    .csv()
}

#[test]
fn a_clr_rule_is_refused_with_two_way_clusters() {
    check_fails(
        &plan(
            "[\"z\", \"z2\"]",
            "{ kind = \"cluster\", by = [\"grp\", \"id\"] }",
            &weak_rule("clr"),
        ),
        &[
            "contingency[weak].then",
            "has no two-way clustered form",
            "then = \"anderson-rubin\"",
        ],
    );
}

/// With HC1 errors the rule tests with the robust CLR (Kleibergen 2005), and the report says
/// which form.
#[test]
fn a_clr_rule_with_hc1_errors_tests_with_the_robust_form() {
    let (s, v) = run(
        &plan("[\"z\", \"z2\"]", "\"hc1\"", &weak_rule("clr")),
        &weak_two(0.12, 7),
    );
    assert_eq!(v["contingencies"][0]["invoked"], true);
    let lc = &spec(&v, "iv")["lm_clr"];
    assert_eq!(lc["errors"], "heteroskedasticity-robust", "{lc}");
    let h = &v["hypotheses"]["H1"];
    assert_eq!(h["method"], "clr", "{h}");
    assert_eq!(h["statistic"], lc["clr_statistic"], "{h} {lc}");
    assert_eq!(h["p_value"], lc["clr_p_value"], "{h} {lc}");
    assert_eq!(h["ci"], lc["clr_set"], "{h} {lc}");
    let report = s.read("out/report.md");
    assert!(
        report.contains("conditional LR, robust form (Kleibergen 2005)"),
        "{report}"
    );
    assert!(
        report.contains("95% confidence set, robust to heteroskedasticity (Kleibergen 2005)"),
        "{report}"
    );
}

#[test]
fn a_clr_rule_that_fires_tests_with_the_clr_test_and_set() {
    let (s, v) = run(
        &plan("[\"z\", \"z2\"]", "\"classical\"", &weak_rule("clr")),
        &weak_two(0.12, 7),
    );
    let c = &v["contingencies"][0];
    assert_eq!(c["invoked"], true, "{c}");
    assert_eq!(c["action"], "clr", "{c}");
    let lc = &spec(&v, "iv")["lm_clr"];
    assert_eq!(lc["clr_shape"], "bounded", "{lc}");
    let h = &v["hypotheses"]["H1"];
    assert_eq!(h["method"], "clr", "{h}");
    assert_eq!(h["contingency"], "weak", "{h}");
    // The null is 0, so the hypothesis' test is the one lm_clr reports at 0; the estimate
    // lies on the claimed side, so the one-sided p-value is the two-sided one.
    assert_eq!(h["statistic"], lc["clr_statistic"], "{h} {lc}");
    assert_eq!(h["p_value"], lc["clr_p_value"], "{h} {lc}");
    assert_eq!(h["ci"], lc["clr_set"], "{h} {lc}");
    assert!(
        h["verdict"].as_str().is_some_and(|v| v != "undetermined"),
        "{h}"
    );
    let report = s.read("out/report.md");
    assert!(
        report.contains("conditional LR (Moreira), homoskedastic errors"),
        "{report}"
    );
    assert!(
        report.contains(
            "use conditional LR inference (homoskedastic, or robust to the specification's errors)"
        ),
        "{report}"
    );
    assert!(
        report.contains("Moreira conditional LR 95% confidence set"),
        "{report}"
    );
}

#[test]
fn an_unbounded_clr_set_leaves_the_hypothesis_undetermined() {
    let (_, v) = run(
        &plan("[\"z\", \"z2\"]", "\"classical\"", &weak_rule("clr")),
        &weak_two(0.01, 3),
    );
    let lc = &spec(&v, "iv")["lm_clr"];
    let shape = lc["clr_shape"].as_str().expect("shape");
    assert!(["whole-line", "two-rays", "union"].contains(&shape), "{lc}");
    let h = &v["hypotheses"]["H1"];
    assert_eq!(h["method"], "clr", "{h}");
    assert_eq!(h["verdict"], "undetermined", "{h}");
    assert!(h["adjusted_p_value"].is_null(), "{h}");
    let reason = h["reason"].as_str().unwrap_or("");
    assert!(reason.contains("conditional LR set is unbounded"), "{h}");
}
