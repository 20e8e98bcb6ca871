//! Resampled inference through the whole tool: `[resampling]`, randomization inference from
//! `[assignment]`, the restricted wild cluster bootstrap, and resampling-based family
//! corrections; validation at check and exact results on small designs.

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
    PLAN.replace(
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
}

#[test]
fn resampled_inference_must_fit_the_hypothesis() {
    let r = "[resampling]\nseed = 20260501\n";
    // Randomization inference on a term that was not randomized.
    let on_x = plan_with(r, "inference = \"randomization\"")
        .replace("term = \"z\"\ninference", "term = \"x\"\ninference");
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
    let hc1 = plan_with(r, "inference = \"wild-bootstrap\"").replace(
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
        .replace("correction = \"holm\"", "correction = \"romano-wolf\"");
    check_fails(&plan, &["family.main.correction", "same inference"]);
}
