//! Bad input: exit 2, a message naming the problem, and no output files.

use crate::common::Edit;
use crate::common::{data_csv, Study, PLAN};

fn fails(s: &Study, expect: &[&str]) {
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    assert_eq!(
        r.code, 2,
        "expected exit 2, got {}: {}{}",
        r.code, r.stdout, r.stderr
    );
    for e in expect {
        assert!(r.stderr.contains(e), "stderr lacks `{e}`: {}", r.stderr);
    }
    assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
    assert!(
        !s.path("out").exists(),
        "no output may be written on bad input"
    );
}

#[test]
fn malformed_toml() {
    let s = Study::with("format = 1\n[study\ntitle = \"x\"\n", &data_csv());
    fails(&s, &["plan.toml:2:", "malformed"]);
}

#[test]
fn unknown_key() {
    let s = Study::with(
        &PLAN.edit("errors = \"hc1\"", "errors = \"hc1\"\nweight = \"w\""),
        &data_csv(),
    );
    fails(&s, &["unknown field `weight`"]);
}

#[test]
fn unknown_column_suggests_the_closest() {
    let s = Study::with(
        &PLAN.edit(
            "controls = [\"x\"]\nerrors = \"hc1\"",
            "controls = [\"xx\"]\nerrors = \"hc1\"",
        ),
        &data_csv(),
    );
    fails(
        &s,
        &[
            "unknown column `xx`",
            "did you mean `x`?",
            "specification[ols].controls",
            "plan.toml:26:",
        ],
    );
}

#[test]
fn wrong_column_kind() {
    let s = Study::with(
        &PLAN.edit(
            "controls = [\"x\"]\nerrors = \"hc1\"",
            "controls = [\"grp\"]\nerrors = \"hc1\"",
        ),
        &data_csv(),
    );
    fails(&s, &["`grp` is of kind category", "fixed_effects"]);
}

#[test]
fn missing_data_file() {
    let s = Study::with(
        &PLAN.edit("path = \"data.csv\"", "path = \"nothere.csv\""),
        &data_csv(),
    );
    fails(&s, &["does not exist", "nothere.csv"]);
}

#[test]
fn empty_data() {
    let s = Study::with(PLAN, "id,grp,z,d,x,y,yb\n");
    fails(&s, &["has no rows"]);
}

#[test]
fn non_numeric_value() {
    let data = data_csv().edit_first(",g00,1,", ",g00,yes,");
    let s = Study::with(PLAN, &data);
    fails(&s, &["column `z`", "`yes`"]);
}

#[test]
fn rank_deficient_design() {
    let plan = PLAN.edit("[[hypothesis]]\nid = \"H1\"", "[derive]\nx2 = \"2 * x\"\n\n[[specification]]\nid = \"dup\"\nestimator = \"ols\"\noutcome = \"y\"\nregressors = [\"x\", \"x2\"]\n\n[[hypothesis]]\nid = \"H1\"");
    let s = Study::with(&plan, &data_csv());
    fails(
        &s,
        &[
            "specification `dup`",
            "rank-deficient",
            "`x2`",
            "on_collinear",
        ],
    );
}

#[test]
fn unknown_hypothesis_term_and_family() {
    let s = Study::with(&PLAN.edit("term = \"x\"", "term = \"z\""), &data_csv());
    fails(&s, &["unknown term `z`"]);
    let s = Study::with(
        &PLAN.edit(
            "family = \"main\"\n\n[[hypothesis]]",
            "family = \"mian\"\n\n[[hypothesis]]",
        ),
        &data_csv(),
    );
    fails(&s, &["unknown family `mian`", "did you mean `main`?"]);
}

#[test]
fn bad_expression_points_into_it() {
    let plan = PLAN.edit(
        "[[specification]]\nid = \"ols\"",
        "[derive]\nlx = \"ln(x +)\"\n\n[[specification]]\nid = \"ols\"",
    );
    let s = Study::with(&plan, &data_csv());
    fails(&s, &["derive.lx", "ln(x +)"]);
}

/// Issue 11: HC2/HC3 with an instrumental-variable estimator, or with more than one absorbed
/// fixed effect, passed `check` and failed only when the run reached the specification.
#[test]
fn leverage_errors_are_refused_at_check() {
    let s = Study::new();
    s.edit(
        "plan.toml",
        "errors = { kind = \"cluster\", by = \"grp\" }",
        "errors = \"hc3\"",
    );
    let c = s.sworn(&["check", "plan.toml"]);
    assert_eq!(c.code, 2, "{}{}", c.stdout, c.stderr);
    assert!(
        c.stderr.contains("hc3 errors are not available for 2sls")
            && c.stderr.contains("specification[iv].errors"),
        "{}",
        c.stderr
    );
    let s = Study::new();
    s.edit(
        "plan.toml",
        "errors = \"hc1\"",
        "errors = \"hc2\"\nfixed_effects = [\"grp\", \"z\"]",
    );
    let c = s.sworn(&["check", "plan.toml"]);
    assert_eq!(c.code, 2, "{}{}", c.stdout, c.stderr);
    assert!(
        c.stderr.contains("single fixed effect only")
            && c.stderr.contains("specification[ols].errors"),
        "{}",
        c.stderr
    );
}

/// A control constant within the absorbed fixed effect is named in the error (the sweep
/// sets it to zero, and that one decision is what the design reports), while one with real
/// variation within the groups, however small beside its between-group variation, is kept.
#[test]
fn control_constant_within_fixed_effects() {
    let mut data = String::new();
    for (i, line) in data_csv().lines().enumerate() {
        if i == 0 {
            data.push_str(&format!("{line},gc,gv\n"));
            continue;
        }
        let cells: Vec<&str> = line.split(',').collect();
        let g: f64 = cells[1][1..].parse().expect("group number");
        let x: f64 = cells[4].parse().expect("x");
        data.push_str(&format!(
            "{line},{},{}\n",
            1000.0 * g,
            1000.0 * g + 1e-3 * x
        ));
    }
    let plan = PLAN
        .edit(
            "yb  = { kind = \"binary\" }",
            "yb  = { kind = \"binary\" }\ngc  = { kind = \"number\" }\ngv  = { kind = \"number\" }",
        )
        .edit(
            "controls = [\"x\"]\nerrors = \"hc1\"",
            "controls = [\"x\", \"gv\", \"gc\"]\nfixed_effects = [\"grp\"]\nerrors = \"hc1\"",
        );
    let s = Study::with(&plan, &data);
    fails(
        &s,
        &[
            "specification `ols`",
            "`gc` is constant within the fixed effects `grp`",
            "on_collinear = \"drop\"",
        ],
    );
    assert!(!s
        .sworn(&["run", "plan.toml", "--out", "out"])
        .stderr
        .contains("`gv`"));
}
