//! One test per user-facing plan validation message: each case edits a valid base plan at an
//! anchor (the test fails if the anchor is missing, so a drifting base plan cannot make a case
//! pass silently) and expects the error to name the key and say the fix.

use crate::error::Error;
use crate::plan::from_text;
use std::path::Path;

const BASE: &str = r#"format = 1

[study]
title = "Validation cases"

[data.main]
path = "data.csv"
rows = { min = 10, max = 300 }
key = "id"
max_missing_share = 0.2

[data.main.columns]
id  = { kind = "id" }
grp = { kind = "category" }
z   = { kind = "binary" }
d   = { kind = "binary" }
x   = { kind = "number", min = 0, max = 10 }
y   = { kind = "number" }

[[specification]]
id = "ols"
estimator = "ols"
outcome = "y"
regressors = ["d"]
controls = ["x"]
errors = "hc1"

[[specification]]
id = "iv"
estimator = "2sls"
outcome = "y"
endogenous = ["d"]
instruments = ["z"]
controls = ["x"]
errors = { kind = "cluster", by = "grp" }

[[hypothesis]]
id = "H1"
specification = "iv"
term = "d"
family = "main"

[family.main]
correction = "holm"
"#;

/// The validation error of the base plan with `anchor` replaced by `with`.
fn error_of(anchor: &str, with: &str) -> String {
    assert!(
        BASE.contains(anchor),
        "anchor `{anchor}` is not in the base plan"
    );
    let text = BASE.replacen(anchor, with, 1);
    match from_text(Path::new("/plans/p.toml"), text) {
        Ok(_) => panic!("`{with}` was accepted"),
        Err(e @ Error::Plan { .. }) => e.to_string(),
        Err(other) => panic!("not a plan error: {other}"),
    }
}

fn case(anchor: &str, with: &str, key: &str, says: &str) {
    let e = error_of(anchor, with);
    assert!(
        e.contains(&format!("`{key}`")),
        "key `{key}` not named: {e}"
    );
    assert!(e.contains(says), "expected “{says}”: {e}");
}

#[test]
fn base_plan_is_valid() {
    assert!(from_text(Path::new("/plans/p.toml"), BASE.to_string()).is_ok());
}

#[test]
fn unsupported_format() {
    case("format = 1", "format = 2", "format", "reads format 1");
}

#[test]
fn unknown_key_says_how_to_fix() {
    let e = error_of("errors = \"hc1\"", "errors = \"hc1\"\nweights = \"x\"");
    assert!(
        e.contains("unknown field `weights`") && e.contains("remove or correct the key"),
        "{e}"
    );
}

#[test]
fn data_format_from_extension() {
    case(
        "path = \"data.csv\"",
        "path = \"data.txt\"",
        "data.main.path",
        "add format = \"csv\" or \"parquet\"",
    );
}

#[test]
fn rows_bounds() {
    case(
        "rows = { min = 10, max = 300 }",
        "rows = { min = 30, max = 10 }",
        "data.main.rows",
        "0 <= min <= max",
    );
}

#[test]
fn key_must_be_declared() {
    case(
        "key = \"id\"",
        "key = \"idx\"",
        "data.main.key",
        "is not a declared column of [data.main]",
    );
}

#[test]
fn missing_share_range() {
    case(
        "max_missing_share = 0.2",
        "max_missing_share = 1.5",
        "data.main.max_missing_share",
        "between 0 and 1",
    );
}

#[test]
fn column_min_above_max() {
    case(
        "x   = { kind = \"number\", min = 0, max = 10 }",
        "x   = { kind = \"number\", min = 10, max = 0 }",
        "data.main.columns.x",
        "min is larger than max",
    );
}

#[test]
fn column_kind_is_one_of() {
    case(
        "y   = { kind = \"number\" }",
        "y   = { kind = \"numeric\" }",
        "data.main.columns.y.kind",
        "use one of `id`, `category`",
    );
}

#[test]
fn derived_name_must_be_new() {
    case(
        "[[specification]]\nid = \"ols\"",
        "[derive]\nx = \"y + 1\"\n\n[[specification]]\nid = \"ols\"",
        "derive.x",
        "is already a column or derived variable",
    );
}

#[test]
fn derived_expression_unknown_name() {
    case(
        "[[specification]]\nid = \"ols\"",
        "[derive]\nw = \"y + q\"\n\n[[specification]]\nid = \"ols\"",
        "derive.w",
        "unknown name `q`",
    );
}

#[test]
fn lag_needs_row_order() {
    case(
        "[[specification]]\nid = \"ols\"",
        "[derive]\nw = \"lag(y, 1)\"\n\n[[specification]]\nid = \"ols\"",
        "derive.w",
        "add order_by",
    );
}

#[test]
fn unknown_column_suggests() {
    case(
        "outcome = \"y\"\nregressors",
        "outcome = \"yy\"\nregressors",
        "specification[ols].outcome",
        "`y`",
    );
}

#[test]
fn ols_with_instruments() {
    case(
        "estimator = \"ols\"\noutcome = \"y\"\nregressors = [\"d\"]",
        "estimator = \"ols\"\noutcome = \"y\"\nregressors = [\"d\"]\ninstruments = [\"z\"]",
        "specification[ols].estimator",
        "belong to an instrumental-variable estimator",
    );
}

#[test]
fn iv_with_regressors() {
    case(
        "endogenous = [\"d\"]",
        "endogenous = [\"d\"]\nregressors = [\"x\"]",
        "specification[iv].regressors",
        "move this term",
    );
}

#[test]
fn under_identified() {
    case(
        "instruments = [\"z\"]",
        "instruments = []",
        "specification[iv].instruments",
        "under-identified",
    );
}

#[test]
fn outcome_on_both_sides() {
    case(
        "controls = [\"x\"]\nerrors = \"hc1\"",
        "controls = [\"y\"]\nerrors = \"hc1\"",
        "specification[ols].outcome",
        "also appears on the right-hand side",
    );
}

#[test]
fn term_in_two_roles() {
    case(
        "controls = [\"x\"]\nerrors = \"hc1\"",
        "controls = [\"d\"]\nerrors = \"hc1\"",
        "specification[ols].controls",
        "plays one role",
    );
}

#[test]
fn errors_kind_is_one_of() {
    case(
        "errors = \"hc1\"",
        "errors = \"hc4\"",
        "specification[ols].errors",
        "use one of \"classical\"",
    );
}

#[test]
fn leverage_errors_need_ols() {
    case(
        "errors = { kind = \"cluster\", by = \"grp\" }",
        "errors = \"hc2\"",
        "specification[iv].errors",
        "not available for 2sls",
    );
}

#[test]
fn leverage_errors_need_one_fixed_effect() {
    case(
        "errors = \"hc1\"",
        "errors = \"hc3\"\nfixed_effects = [\"grp\", \"z\"]",
        "specification[ols].errors",
        "single fixed effect only",
    );
}

#[test]
fn hypothesis_statistic_needs_randomization() {
    case(
        "term = \"d\"\nfamily",
        "term = \"d\"\nstatistic = \"t\"\nfamily",
        "hypothesis[H1].statistic",
        "belongs to inference = \"randomization\"",
    );
}

#[test]
fn randomization_needs_resampling() {
    case(
        "term = \"d\"\nfamily",
        "term = \"d\"\ninference = \"randomization\"\nfamily",
        "hypothesis[H1].inference",
        "needs [resampling] with a seed",
    );
}

#[test]
fn hypothesis_inference_is_one_of() {
    case(
        "term = \"d\"\nfamily",
        "term = \"d\"\ninference = \"bootstrap\"\nfamily",
        "hypothesis[H1].inference",
        "`wild-bootstrap`",
    );
}

#[test]
fn family_correction_is_one_of() {
    case(
        "correction = \"holm\"",
        "correction = \"hochberg\"",
        "family.main.correction",
        "`holm`",
    );
}

#[test]
fn alpha_in_unit_interval() {
    case(
        "[study]",
        "[inference]\nalpha = 1.5\n\n[study]",
        "inference.alpha",
        "strictly between 0 and 1",
    );
}

#[test]
fn weak_rule_needs_iv() {
    case("[family.main]", "[[contingency]]\nid = \"c1\"\nspecification = \"ols\"\nwhen = { weak_instruments = { below = 10.0 } }\nthen = \"anderson-rubin\"\n\n[family.main]", "contingency[c1].specification", "needs an instrumental-variable specification");
}

#[test]
fn weak_rule_threshold_positive() {
    case("[family.main]", "[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = -1.0 } }\nthen = \"anderson-rubin\"\n\n[family.main]", "contingency[c1].when", "must be a positive F threshold");
}

#[test]
fn endogeneity_rule_level() {
    case("[family.main]", "[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { endogeneity = { not_rejected_at = 1.5 } }\nthen = \"ols\"\n\n[family.main]", "contingency[c1].when", "strictly between 0 and 1");
}

#[test]
fn endogeneity_rule_then_needs_ols() {
    case("[family.main]", "[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { endogeneity = { not_rejected_at = 0.05 } }\nthen = \"iv\"\n\n[family.main]", "contingency[c1].then", "must name an OLS specification");
}

#[test]
fn cluster_rule_threshold() {
    case("[family.main]", "[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { clusters = { fewer_than = 2 } }\nthen = \"wild-bootstrap\"\n\n[family.main]", "contingency[c1].when", "at least 3");
}

#[test]
fn cluster_rule_needs_clustered_errors() {
    case("[family.main]", "[[contingency]]\nid = \"c1\"\nspecification = \"ols\"\nwhen = { clusters = { fewer_than = 30 } }\nthen = \"wild-bootstrap\"\n\n[family.main]", "contingency[c1].specification", "needs clustered errors");
}

#[test]
fn trigger_shape() {
    case("[family.main]", "[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = 10.0 }, clusters = { fewer_than = 30 } }\nthen = \"anderson-rubin\"\n\n[family.main]", "contingency[c1].when", "one trigger");
}

#[test]
fn resampling_draws_bounds() {
    case(
        "[study]",
        "[resampling]\nseed = 1\ndraws = 5\n\n[study]",
        "resampling.draws",
        "at least",
    );
}
