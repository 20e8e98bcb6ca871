// Over 500 lines because it is one table of cases, one per user-facing validation message.
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
    let e = error_of("errors = \"hc1\"", "errors = \"hc1\"\nweight = \"x\"");
    assert!(
        e.contains("unknown field `weight`") && e.contains("remove or correct the key"),
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

/// The base plan from the IV specification's errors to the family, with `errors` in their
/// place and a `clr` rule on `iv` before the family.
fn clr_rule_with(errors: &str) -> (&'static str, String) {
    const TAIL: &str = "errors = { kind = \"cluster\", by = \"grp\" }\n\n[[hypothesis]]\nid = \"H1\"\nspecification = \"iv\"\nterm = \"d\"\nfamily = \"main\"\n\n[family.main]";
    let rule = "[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = 10.0 } }\nthen = \"clr\"\n\n[family.main]";
    let with = TAIL
        .replace("errors = { kind = \"cluster\", by = \"grp\" }", errors)
        .replace("[family.main]", rule);
    (TAIL, with)
}

#[test]
fn clr_rule_refuses_two_way_clusters() {
    let (anchor, with) = clr_rule_with("errors = { kind = \"cluster\", by = [\"grp\", \"id\"] }");
    case(
        anchor,
        &with,
        "contingency[c1].then",
        "has no two-way clustered form",
    );
}

#[test]
fn clr_rule_refuses_hac_errors() {
    let (anchor, with) = clr_rule_with("errors = { kind = \"hac\", bandwidth = 2 }");
    // HAC needs the rows in time order: the table's order_by, a second edit.
    let text = BASE.replacen(anchor, &with, 1).replacen(
        "key = \"id\"",
        "key = \"id\"\norder_by = \"id\"",
        1,
    );
    let e = match from_text(Path::new("/plans/p.toml"), text) {
        Ok(_) => panic!("hac errors with a clr rule were accepted"),
        Err(e @ Error::Plan { .. }) => e.to_string(),
        Err(other) => panic!("not a plan error: {other}"),
    };
    assert!(e.contains("`contingency[c1].then`"), "{e}");
    assert!(e.contains("has no HAC form"), "{e}");
    assert!(e.contains("then = \"anderson-rubin\""), "{e}");
}

/// Classical, HC and one-way clustered errors take the rule (the robust forms, Kleibergen
/// 2005, with the specification's own covariance).
#[test]
fn clr_rule_accepts_classical_hc_and_one_way_clusters() {
    for errors in [
        "errors = \"classical\"",
        "errors = \"hc1\"",
        "errors = { kind = \"cluster\", by = \"grp\" }",
    ] {
        let (anchor, with) = clr_rule_with(errors);
        let plan = BASE.replace(anchor, &with);
        assert!(
            from_text(Path::new("/plans/p.toml"), plan).is_ok(),
            "{errors}"
        );
    }
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

/// Where a new table goes in the base plan (before the family it already declares).
const FAMILY: &str = "[family.main]";
/// The end of the OLS specification, where its optional keys go.
const OLS_END: &str = "errors = \"hc1\"";
/// The end of the IV specification, where its optional keys go.
const IV_END: &str = "errors = { kind = \"cluster\", by = \"grp\" }";
/// The hypothesis's term and family, where its optional keys go.
const H1_END: &str = "term = \"d\"\nfamily = \"main\"";
/// From the end of the IV specification to the end of the hypothesis on it.
const IV_TO_H1: &str = "errors = { kind = \"cluster\", by = \"grp\" }\n\n[[hypothesis]]\nid = \"H1\"\nspecification = \"iv\"\nterm = \"d\"\nfamily = \"main\"";
/// From the IV specification's estimator to the end of the hypothesis on it.
const IV_SPEC_TO_H1: &str = "estimator = \"2sls\"\noutcome = \"y\"\nendogenous = [\"d\"]\ninstruments = [\"z\"]\ncontrols = [\"x\"]\nerrors = { kind = \"cluster\", by = \"grp\" }\n\n[[hypothesis]]\nid = \"H1\"\nspecification = \"iv\"\nterm = \"d\"\nfamily = \"main\"";
/// Inside `[data.main]`, after its `key`.
const DATA_KEY: &str = "key = \"id\"";
/// Where `[derive]` goes (before the first specification).
const FIRST_SPEC: &str = "[[specification]]\nid = \"ols\"";

/// `table` inserted before `[family.main]`.
fn before_family(table: &str) -> String {
    format!("{table}\n\n{FAMILY}")
}

/// `[derive]` with `entries`, before the first specification.
fn derive(entries: &str) -> String {
    format!("[derive]\n{entries}\n\n{FIRST_SPEC}")
}

/// Checks one case: `Err` says what did not match, so every case is reported at once.
fn check_case(
    front: &str,
    anchor: &str,
    with: &str,
    key: &str,
    says: &str,
) -> std::result::Result<(), String> {
    if !BASE.contains(anchor) {
        return Err(format!("anchor `{anchor}` is not in the base plan"));
    }
    let text = BASE
        .replacen(anchor, with, 1)
        .replacen("[study]", &format!("{front}[study]"), 1);
    let e = match from_text(Path::new("/plans/p.toml"), text) {
        Ok(_) => return Err(format!("accepted: {with}")),
        Err(e @ Error::Plan { .. }) => e.to_string(),
        Err(other) => return Err(format!("not a plan error: {other}")),
    };
    if !e.contains(&format!("`{key}`")) {
        return Err(format!("key `{key}` not named: {e}"));
    }
    if !e.contains(says) {
        return Err(format!("expected “{says}”: {e}"));
    }
    Ok(())
}

// Long because it is a table of cases that reads top to bottom, one line per message.
/// One case per user-facing message not checked by a test above: (top-level tables put
/// before `[study]`, anchor, its replacement, key named, fragment of the message).
fn message_cases() -> Vec<(
    &'static str,
    &'static str,
    String,
    &'static str,
    &'static str,
)> {
    let resampling = "[resampling]\nseed = 1\n\n";
    let assigned_z =
        "[resampling]\nseed = 1\n\n[assignment]\nvariable = \"z\"\ndesign = \"complete\"\n\n";
    vec![
        // The study, defaults and data tables.
        ("", "title = \"Validation cases\"", "title = \" \"".into(), "study.title", "the study needs a title"),
        ("", "[study]", "[inference]\nconfidence = 1.0\n\n[study]".into(), "inference.confidence", "strictly between 0 and 1"),
        ("", "[study]", "[inference]\ndistribution = \"cauchy\"\n\n[study]".into(), "inference.distribution", "use one of `t`, `normal`"),
        ("", DATA_KEY, format!("{DATA_KEY}\nformat = \"xlsx\""), "data.main.format", "use one of `csv`, `parquet`"),
        ("", DATA_KEY, format!("{DATA_KEY}\norder_by = \"when\""), "data.main.order_by", "is not a declared column of [data.main]"),
        ("", DATA_KEY, format!("{DATA_KEY}\nformat = \"parquet\"\nseparator = \";\""), "data.main.separator", "applies to CSV files only"),
        ("", DATA_KEY, format!("{DATA_KEY}\nseparator = \"#\""), "data.main.separator", "is not a separator sworn reads"),
        ("", DATA_KEY, format!("{DATA_KEY}\ndecimal = \"'\""), "data.main.decimal", "use one of `.`, `,`"),
        ("", DATA_KEY, format!("{DATA_KEY}\ndecimal = \",\""), "data.main.decimal", "a decimal comma needs another field separator"),
        ("", DATA_KEY, format!("{DATA_KEY}\nmissing = [\" NA\"]"), "data.main.missing", "has spaces around it"),
        ("", "y   = { kind = \"number\" }", "y   = { kind = \"number\" }\nintercept = { kind = \"number\" }".into(), "data.main.columns.intercept", "is reserved for the constant term"),
        // Derived variables.
        ("", FIRST_SPEC, derive("if = \"y + 1\""), "derive.if", "cannot name a variable"),
        ("", FIRST_SPEC, derive("w = \"y +\""), "derive.w", "in expression \"y +\""),
        ("", FIRST_SPEC, derive("w = \"grp + 1\""), "derive.w", "expressions work on numeric columns"),
        ("", FIRST_SPEC, format!("[data.other]\npath = \"other.csv\"\n\n[data.other.columns]\nq = {{ kind = \"number\" }}\n\n{}", derive("w = \"y + q\"")), "derive.w", "do not all come from one data table"),
        // The assignment.
        ("", FAMILY, before_family("[assignment]\nvariable = \"z\"\ndesign = \"random\""), "assignment.design", "use one of `complete`"),
        ("", FAMILY, before_family("[assignment]\nvariable = \"zz\"\ndesign = \"complete\""), "assignment.variable", "unknown column `zz`"),
        ("", FAMILY, before_family("[assignment]\nvariable = \"z\"\ndesign = \"blocked\""), "assignment.blocks", "design `blocked` needs `assignment.blocks`"),
        // Specifications.
        ("", "id = \"iv\"", "id = \"ols\"".into(), "specification", "specification id `ols` is used twice"),
        ("", "estimator = \"2sls\"", "estimator = \"gmm\"".into(), "specification[iv].estimator", "use one of `ols`, `2sls`"),
        ("", IV_END, format!("{IV_END}\nfuller_k = 1.0"), "specification[iv].fuller_k", "fuller_k belongs to estimator = \"fuller\""),
        ("", "estimator = \"2sls\"", "estimator = \"fuller\"\nfuller_k = -1.0".into(), "specification[iv].fuller_k", "fuller_k must be a positive number"),
        ("", IV_END, format!("{IV_END}\nworst_case_bias = 1.5"), "specification[iv].worst_case_bias", "strictly between 0 and 1"),
        ("", "controls = [\"x\"]\nerrors = \"hc1\"", "controls = [\"grp\"]\nerrors = \"hc1\"".into(), "specification[ols].controls", "only number, integer and binary columns can enter a regression"),
        ("", OLS_END, format!("{OLS_END}\ndata = \"other\""), "specification[ols].data", "unknown data table `other`"),
        ("", FIRST_SPEC, format!("[data.other]\npath = \"other.csv\"\n\n[data.other.columns]\nq = {{ kind = \"number\" }}\n\n{FIRST_SPEC}"), "specification[ols].data", "the plan has several data tables"),
        ("", OLS_END, format!("{OLS_END}\nfixed_effects = [\"x\"]"), "specification[ols].fixed_effects", "groups need a category, id, integer or binary column"),
        ("", OLS_END, format!("{OLS_END}\nfixed_effects = [\"g2\"]"), "specification[ols].fixed_effects", "unknown column `g2`"),
        ("", OLS_END, format!("{OLS_END}\nsample = \"y >\""), "specification[ols].sample", "in expression \"y >\""),
        ("", OLS_END, format!("{OLS_END}\nsample = \"q > 1\""), "specification[ols].sample", "in the sample expression"),
        ("", IV_END, format!("{IV_END}\ndiagnostics = [\"sargan\"]"), "specification[iv].diagnostics", "use one of `first_stage`"),
        ("", OLS_END, format!("{OLS_END}\ndiagnostics = [\"first_stage\"]"), "specification[ols].diagnostics", "applies to instrumental-variable specifications"),
        ("", "endogenous = [\"d\"]", "endogenous = [\"d\", \"x\"]\ndiagnostics = [\"weak_instruments\"]".into(), "specification[iv].diagnostics", "needs exactly one endogenous regressor"),
        ("", OLS_END, format!("{OLS_END}\non_collinear = \"ignore\""), "specification[ols].on_collinear", "use one of `error`, `drop`"),
        ("", "endogenous = [\"d\"]", "endogenous = []".into(), "specification[iv].endogenous", "needs at least one endogenous regressor"),
        ("", "controls = [\"x\"]\nerrors = \"hc1\"", "controls = [\"x\", \"x\"]\nerrors = \"hc1\"".into(), "specification[ols].controls", "is listed twice in `controls`"),
        ("", "regressors = [\"d\"]\ncontrols = [\"x\"]\nerrors = \"hc1\"", "regressors = []\nintercept = false\nerrors = \"hc1\"".into(), "specification[ols].regressors", "has no terms at all"),
        // Errors (the wording of each malformed value is checked in plan::raw::errors).
        ("", OLS_END, "errors = 3".into(), "specification[ols].errors", "errors must be one of"),
        ("", IV_END, "errors = { kind = \"cluster\", by = \"g2\" }".into(), "specification[iv].errors", "unknown column `g2`"),
        ("", OLS_END, "errors = { kind = \"hac\", bandwidth = 2 }".into(), "specification[ols].errors", "hac errors need the rows in time order"),
        // Families and hypotheses.
        ("", "correction = \"holm\"", "correction = \"holm\"\nalpha = 2.0".into(), "family.main.alpha", "strictly between 0 and 1"),
        ("", "specification = \"iv\"\nterm", "specification = \"iv2\"\nterm".into(), "hypothesis[H1].specification", "unknown specification `iv2`"),
        ("", H1_END, "term = \"q\"\nfamily = \"main\"".into(), "hypothesis[H1].term", "is not a term of specification `iv`"),
        ("", H1_END, format!("{H1_END}\ndirection = \"up\""), "hypothesis[H1].direction", "use one of `two-sided`"),
        ("", H1_END, "term = \"d\"\nfamily = \"other\"".into(), "hypothesis[H1].family", "declare it as [family.other]"),
        ("", H1_END, format!("{H1_END}\nalpha = 0.1"), "hypothesis[H1].alpha", "remove alpha here"),
        ("", FAMILY, before_family("[[hypothesis]]\nid = \"H1\"\nspecification = \"iv\"\nterm = \"d\""), "hypothesis", "hypothesis id `H1` is used twice"),
        ("", H1_END, format!("{H1_END}\nweights = \"webb\""), "hypothesis[H1].weights", "weights belong to inference = \"wild-bootstrap\""),
        ("", FAMILY, before_family(&format!("{resampling}\n\n[[hypothesis]]\nid = \"H2\"\nspecification = \"iv\"\nterm = \"d\"\ninference = \"randomization\"")), "hypothesis[H2].inference", "which the plan must declare in [assignment]"),
        ("", FAMILY, before_family(&format!("{resampling}\n\n[assignment]\nvariable = \"d\"\ndesign = \"complete\"\n\n[[hypothesis]]\nid = \"H2\"\nspecification = \"iv\"\nterm = \"d\"\ninference = \"randomization\"")), "hypothesis[H2].inference", "applies to the assigned variable `d`"),
        (assigned_z, IV_TO_H1, IV_TO_H1.replacen("by = \"grp\" }", "by = \"grp\" }\nfixed_effects = [\"grp\"]", 1) + "\ninference = \"randomization\"", "hypothesis[H1].inference", "needs each fixed effect to be the assignment's block variable"),
        (assigned_z, IV_TO_H1, IV_TO_H1.replacen("by = \"grp\" }", "by = \"grp\" }\nfixed_effects = [\"grp\"]\nweights = \"x\"", 1) + "\ninference = \"randomization\"", "hypothesis[H1].inference", "with probability weights it is implemented without fixed effects"),
        (assigned_z, H1_END, format!("{H1_END}\ninference = \"randomization\"\nstatistic = \"z\""), "hypothesis[H1].statistic", "use one of `t`, `estimate`"),
        (resampling, H1_END, "term = \"x\"\nfamily = \"main\"\ninference = \"wild-bootstrap\"".into(), "hypothesis[H1].inference", "tests the endogenous coefficient `d`"),
        ("", H1_END, format!("{H1_END}\ninference = \"wild-bootstrap\""), "hypothesis[H1].inference", "the wild cluster bootstrap needs [resampling]"),
        (resampling, "specification = \"iv\"\nterm", "specification = \"ols\"\ninference = \"wild-bootstrap\"\nterm".into(), "hypothesis[H1].inference", "resamples one-way clusters"),
        (resampling, IV_SPEC_TO_H1, IV_SPEC_TO_H1.replacen("2sls", "liml", 1) + "\ninference = \"wild-bootstrap\"", "hypothesis[H1].inference", "implemented for OLS specifications and for 2SLS"),
        (resampling, H1_END, format!("{H1_END}\ninference = \"wild-bootstrap\"\nweights = \"normal\""), "hypothesis[H1].weights", "use one of `rademacher`, `webb`"),
        ("", "correction = \"holm\"", "correction = \"romano-wolf\"".into(), "family.main.correction", "uses the family's joint resampling draws"),
        // Table shells.
        ("", FAMILY, before_family("[[table]]\nid = \"t1\"\ncolumns = [\"iv2\"]\nrows = [\"d\"]"), "table[t1].columns", "unknown specification `iv2`"),
        ("", FAMILY, before_family("[[table]]\nid = \"t1\"\ncolumns = [\"iv\"]\nrows = [\"q\"]"), "table[t1].rows", "in the table's specifications"),
        ("", FAMILY, before_family("[[table]]\nid = \"t1\"\ncolumns = [\"iv\"]\nrows = [\"d\"]\nstars = true"), "table[t1].stars", "`stars = true` does not say which thresholds"),
        ("", FAMILY, before_family("[[table]]\nid = \"t1\"\ncolumns = [\"iv\"]\nrows = [\"d\"]\nstars = \"*\""), "table[t1].stars", "expected a list of p-value thresholds, found a string"),
        ("", FAMILY, before_family("[[table]]\nid = \"t1\"\ncolumns = [\"iv\"]\nrows = [\"d\"]\nstars = [1.5]"), "table[t1].stars", "each threshold must be a distinct number"),
        ("", FAMILY, before_family("[[table]]\nid = \"t1\"\ncolumns = [\"iv\"]\nrows = [\"d\"]\nstars = [0.1, 0.05, 0.01, 0.001]"), "table[t1].stars", "give one to three thresholds"),
        ("", FAMILY, before_family("[[table]]\nid = \"t1\"\ncolumns = [\"iv\"]\nrows = [\"d\"]\nsummary_rows = [\"median\"]"), "table[t1].summary_rows", "use one of"),
        ("", FAMILY, before_family("[[table]]\nid = \"t1\"\ncolumns = [\"iv\"]\nrows = [\"d\"]\n\n[[table]]\nid = \"t1\"\ncolumns = [\"ols\"]\nrows = [\"d\"]"), "table", "table id `t1` is used twice"),
        // Decision rules and resampling.
        ("", FAMILY, before_family("[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = 10.0 } }\nthen = \"liml\"\n\n[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = 5.0 } }\nthen = \"liml\""), "contingency", "contingency id `c1` is used twice"),
        ("", FAMILY, before_family("[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = 10.0 } }\nthen = \"liml\"\n\n[[contingency]]\nid = \"c2\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = 5.0 } }\nthen = \"anderson-rubin\""), "contingency[c2].when", "already watches the same trigger"),
        ("", FAMILY, before_family("[[contingency]]\nid = \"c1\"\nspecification = \"iv2\"\nwhen = { weak_instruments = { below = 10.0 } }\nthen = \"liml\""), "contingency[c1].specification", "unknown specification `iv2`"),
        ("", FAMILY, before_family("[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = 10.0 } }\nthen = \"bootstrap\""), "contingency[c1].then", "use one of `anderson-rubin`, `clr`, `liml`, `tf`"),
        ("", IV_SPEC_TO_H1, IV_SPEC_TO_H1.replacen("2sls", "liml", 1) + "\n\n[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = 10.0 } }\nthen = \"liml\"", "contingency[c1].then", "is already estimated by"),
        ("", IV_SPEC_TO_H1, IV_SPEC_TO_H1.replacen("2sls", "liml", 1) + "\n\n[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { below = 10.0 } }\nthen = \"tf\"", "contingency[c1].then", "the tF procedure applies to a just-identified 2SLS"),
        ("", FAMILY, before_family("[[contingency]]\nid = \"c1\"\nspecification = \"ols\"\nwhen = { endogeneity = { not_rejected_at = 0.05 } }\nthen = \"ols\""), "contingency[c1].specification", "an endogeneity rule watches an instrumental-variable specification"),
        ("", "outcome = \"y\"\nregressors = [\"d\"]\ncontrols = [\"x\"]\nerrors = \"hc1\"", "outcome = \"x\"\nregressors = [\"d\"]\nerrors = \"hc1\"\n\n[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { endogeneity = { not_rejected_at = 0.05 } }\nthen = \"ols\"".into(), "contingency[c1].then", "must have the same outcome and data table"),
        ("", "regressors = [\"d\"]\ncontrols = [\"x\"]\nerrors = \"hc1\"", "regressors = [\"z\"]\ncontrols = [\"x\"]\nerrors = \"hc1\"\n\n[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { endogeneity = { not_rejected_at = 0.05 } }\nthen = \"ols\"".into(), "contingency[c1].then", "hypothesis `H1` tests `d`, which specification `ols` does not estimate"),
        ("", FAMILY, before_family("[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { heat = { above = 1 } }\nthen = \"liml\""), "contingency[c1].when", "unknown trigger `heat`"),
        ("", FAMILY, before_family("[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { weak_instruments = { under = 10.0 } }\nthen = \"liml\""), "contingency[c1].when", "takes exactly one key, `below`"),
        ("", FAMILY, before_family("[[contingency]]\nid = \"c1\"\nspecification = \"iv\"\nwhen = { clusters = { fewer_than = 30 } }\nthen = \"liml\""), "contingency[c1].then", "use one of `wild-bootstrap`"),
        ("", "[study]", "[resampling]\nseed = -1\n\n[study]".into(), "resampling.seed", "at least 0"),
        ("", "[study]", "[resampling]\nseed = 1\ndraws = 20000000\n\n[study]".into(), "resampling.draws", "may be at most 10000000"),
        // Summary indices, balance and attrition.
        ("", FAMILY, before_family("[[index]]\nid = \"y\"\nmethod = \"mean-z\"\ncomponents = [\"x\", \"y\"]\nreference = \"z == 0\""), "index[y].id", "already a column or derived variable"),
        ("", FAMILY, before_family("[[index]]\nid = \"1i\"\nmethod = \"mean-z\"\ncomponents = [\"x\", \"y\"]\nreference = \"z == 0\""), "index[1i].id", "an index id must be a plain name"),
        ("", FAMILY, before_family("[[index]]\nid = \"i1\"\nmethod = \"pca\"\ncomponents = [\"x\", \"y\"]\nreference = \"z == 0\""), "index[i1].method", "use one of `anderson`, `mean-z`"),
        ("", FAMILY, before_family("[[index]]\nid = \"i1\"\nmethod = \"mean-z\"\ncomponents = [\"x\"]\nreference = \"z == 0\""), "index[i1].components", "at least two components"),
        ("", FAMILY, before_family("[[index]]\nid = \"i1\"\nmethod = \"mean-z\"\ncomponents = [\"x\", \"q\"]\nreference = \"z == 0\""), "index[i1].components", "among the index's components"),
        ("", FAMILY, before_family("[[index]]\nid = \"i1\"\nmethod = \"mean-z\"\ncomponents = [\"x\", \"-x\"]\nreference = \"z == 0\""), "index[i1].components", "`x` is listed twice"),
        ("", FAMILY, before_family("[[index]]\nid = \"i1\"\nmethod = \"mean-z\"\ncomponents = [\"x\", \"y\"]\nreference = \"lag(z, 1) == 0\""), "index[i1].reference", "lag/diff need the table's row order"),
        ("", FAMILY, before_family("[[index]]\nid = \"i1\"\nmethod = \"mean-z\"\ncomponents = [\"x\", \"y\"]\nreference = \"q == 0\""), "index[i1].reference", "unknown name `q`"),
        ("", FAMILY, before_family("[[index]]\nid = \"i1\"\nmethod = \"mean-z\"\ncomponents = [\"x\", \"y\"]\nreference = \"z == 0\"\nmissing = \"drop\""), "index[i1].missing", "use one of `available`, `complete`"),
        ("", FAMILY, before_family("[[index]]\nid = \"i1\"\ndata = \"other\"\nmethod = \"mean-z\"\ncomponents = [\"x\", \"y\"]\nreference = \"z == 0\""), "index[i1].data", "unknown data table `other`"),
        ("", FAMILY, before_family("[balance]\nby = \"x\"\ncovariates = [\"y\"]"), "balance.by", "the arm indicator must be a binary (0/1) column"),
        ("", FAMILY, before_family("[balance]\nby = \"q\"\ncovariates = [\"y\"]"), "balance.by", "unknown column `q`"),
        ("", FAMILY, before_family("[balance]\nby = \"z\"\ncovariates = []"), "balance.covariates", "list at least one baseline covariate"),
        ("", FAMILY, before_family("[balance]\nby = \"z\"\ncovariates = [\"q\"]"), "balance.covariates", "among the baseline covariates"),
        ("", FAMILY, before_family("[balance]\nby = \"z\"\ncovariates = [\"x\", \"x\"]"), "balance.covariates", "`x` is listed twice"),
        ("", FAMILY, before_family("[balance]\nby = \"z\"\ncovariates = [\"z\"]"), "balance.covariates", "the arm indicator cannot be its own covariate"),
        ("[balance]\nby = \"z\"\ncovariates = [\"x\"]\nerrors = { kind = \"hac\", bandwidth = 2 }\n\n", DATA_KEY, format!("{DATA_KEY}\norder_by = \"id\""), "balance.errors", "offered for specifications only"),
        ("", FAMILY, before_family("[assignment]\nvariable = \"z\"\ndesign = \"clustered\"\nclusters = \"grp\"\n\n[balance]\nby = \"z\"\ncovariates = [\"x\"]\nerrors = \"hc1\""), "balance.errors", "so these errors must be clustered by it"),
        ("", FAMILY, before_family("[attrition]\nby = \"z\"\nobserved = \"q > 0\""), "attrition.observed", "unknown name `q`"),
        ("", FAMILY, before_family("[attrition]\nby = \"z\"\nobserved = \"y > 0\"\nbounds = [\"q\"]"), "attrition.bounds", "among the outcomes to bound"),
    ]
}

#[test]
fn every_message_is_reachable_and_names_its_key() {
    let failures: Vec<String> = message_cases()
        .into_iter()
        .enumerate()
        .filter_map(|(i, (front, anchor, with, key, says))| {
            check_case(front, anchor, &with, key, says)
                .err()
                .map(|e| format!("case {i} ({key}): {e}"))
        })
        .collect();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn malformed_toml_and_missing_keys_say_what_to_do() {
    let e = error_of("format = 1", "format = \"one\"");
    assert!(e.contains("malformed plan"), "{e}");
    let e = error_of("id = \"H1\"\n", "");
    assert!(
        e.contains("missing field `id`") && e.contains("this key is required"),
        "{e}"
    );
}

// Long because it is a table of cases, one per message of a weighted specification.
#[test]
fn weights_messages() {
    let hc1 = "errors = \"hc1\"";
    let w = |extra: &str| format!("{hc1}\nweights = \"x\"{extra}");
    let cases = [
        (
            hc1,
            format!("{hc1}\nweights = \"wt\""),
            "specification[ols].weights",
            "unknown column `wt`",
        ),
        (
            hc1,
            format!("{hc1}\nweights = \"grp\""),
            "specification[ols].weights",
            "weights must be a column declared as number or integer",
        ),
        (
            hc1,
            "weights = \"x\"\nerrors = { kind = \"cluster\", by = [\"grp\", \"z\"] }".to_string(),
            "specification[ols].errors",
            "two-way cluster errors with probability weights are not available",
        ),
        (
            hc1,
            w("\non_missing_weight = \"drop\""),
            "specification[ols].on_missing_weight",
            "use one of `leave-out`, `stop`",
        ),
        (
            hc1,
            format!("{hc1}\non_missing_weight = \"stop\""),
            "specification[ols].on_missing_weight",
            "applies to a weighted specification",
        ),
    ];
    for (anchor, with, key, says) in cases {
        let with = if key.starts_with("hypothesis") {
            BASE.replacen(anchor, &with, 1).replacen(
                "family = \"main\"",
                "family = \"main\"\ninference = \"wild-bootstrap\"",
                1,
            )
        } else {
            BASE.replacen(anchor, &with, 1)
        };
        let e = match from_text(Path::new("/plans/p.toml"), with) {
            Ok(_) => panic!("accepted: {key}"),
            Err(e) => e.to_string(),
        };
        assert!(
            e.contains(&format!("`{key}`")) && e.contains(says),
            "{key}: {e}"
        );
    }
    let ok = BASE.replacen(hc1, &w(""), 1);
    let plan = from_text(Path::new("/plans/p.toml"), ok).expect("weighted hc1 OLS is valid");
    assert_eq!(plan.specifications[0].weights.as_deref(), Some("x"));
    for errors in ["classical", "hc2", "hc3"] {
        let ok = BASE.replacen(hc1, &format!("errors = \"{errors}\"\nweights = \"x\""), 1);
        from_text(Path::new("/plans/p.toml"), ok).expect("weighted OLS with these errors");
    }
    let fe = BASE.replacen(hc1, &w("\nfixed_effects = [\"grp\"]"), 1);
    let plan = from_text(Path::new("/plans/p.toml"), fe).expect("weighted OLS with fixed effects");
    assert_eq!(plan.specifications[0].fixed_effects, ["grp"]);
}

/// The base plan with a `[balance]` and an `[attrition]` check on `main` (unweighted).
fn with_checks() -> String {
    format!(
        "{BASE}\n[balance]\nby = \"z\"\ncovariates = [\"x\"]\nerrors = \"hc1\"\n\n[attrition]\nby = \"z\"\nobserved = \"y > 0\"\nerrors = \"hc1\"\n"
    )
}

// Long because it is a table of cases, one per message of a weighted check.
#[test]
fn weighted_check_messages() {
    let cases = [
        ("covariates = [\"x\"]", "covariates = [\"x\"]\nweights = \"wt\"", "balance.weights", "unknown column `wt`"),
        ("covariates = [\"x\"]", "covariates = [\"x\"]\nweights = \"grp\"", "balance.weights", "weights must be a column declared as number or integer"),
        ("observed = \"y > 0\"", "observed = \"y > 0\"\nweights = \"z_x\"", "attrition.weights", "unknown column `z_x`"),
        (
            "covariates = [\"x\"]\nerrors = \"hc1\"",
            "covariates = [\"x\"]\nweights = \"x\"\nerrors = { kind = \"cluster\", by = [\"grp\", \"d\"] }",
            "balance.errors",
            "two-way cluster errors with probability weights are not available",
        ),
        (
            "observed = \"y > 0\"",
            "observed = \"y > 0\"\nbounds = [\"y\"]\nweights = \"x\"",
            "attrition.bounds",
            "Lee bounds with probability weights (weights = \"x\") are not available",
        ),
    ];
    let base = with_checks();
    from_text(Path::new("/plans/p.toml"), base.clone()).expect("the checks are valid");
    for (anchor, with, key, says) in cases {
        assert!(base.contains(anchor), "anchor `{anchor}` missing");
        let e = match from_text(Path::new("/plans/p.toml"), base.replacen(anchor, with, 1)) {
            Ok(_) => panic!("accepted: {key}"),
            Err(e) => e.to_string(),
        };
        assert!(
            e.contains(&format!("`{key}`")) && e.contains(says),
            "{key}: {e}"
        );
    }
    let ok = base
        .replacen(
            "covariates = [\"x\"]",
            "covariates = [\"x\"]\nweights = \"x\"",
            1,
        )
        .replacen(
            "observed = \"y > 0\"",
            "observed = \"y > 0\"\nweights = \"y\"",
            1,
        );
    let plan = from_text(Path::new("/plans/p.toml"), ok).expect("weighted checks are valid");
    assert_eq!(plan.balance.and_then(|b| b.weights).as_deref(), Some("x"));
    assert_eq!(plan.attrition.and_then(|a| a.weights).as_deref(), Some("y"));
}

/// A check's weights are part of the canonical form: adding them changes the fingerprinted
/// text, and the amendment names the key.
#[test]
fn check_weights_are_fingerprinted() {
    let base = with_checks();
    let weighted = base.replacen(
        "covariates = [\"x\"]",
        "covariates = [\"x\"]\nweights = \"x\"",
        1,
    );
    let p = Path::new("/plans/p.toml");
    let (a, b) = (
        crate::plan::canonical::canonical_text(p, &base).expect("canonical"),
        crate::plan::canonical::canonical_text(p, &weighted).expect("canonical"),
    );
    assert_ne!(a, b);
    let keys = crate::plan::canonical::changed_keys(&a, &b);
    assert!(
        keys.iter().any(|k| k.contains("balance.weights")),
        "{keys:?}"
    );
}

/// A rehearsal simulates unweighted data sets: a weighted check is refused with the fix.
#[test]
fn weighted_check_refuses_a_rehearsal() {
    let text = with_checks()
        .replacen("covariates = [\"x\"]", "covariates = [\"x\"]\nweights = \"x\"", 1)
        + "\n[rehearsal]\nseed = 1\neffects = [0.0]\n\n[rehearsal.data.main]\nrows = 50\n\n[rehearsal.data.main.columns]\nx = \"1\"\n";
    let e = match from_text(Path::new("/plans/p.toml"), text) {
        Ok(_) => panic!("a rehearsal of a weighted check was accepted"),
        Err(e) => e.to_string(),
    };
    assert!(
        e.contains("`rehearsal`") && e.contains("[balance] is weighted by `x`"),
        "{e}"
    );
}
