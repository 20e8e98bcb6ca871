//! `sworn init`: a starter plan from data files that passes `check` once its marks are filled.

use crate::common::{data_csv, Edit, Study};

/// The generated study's data (see `common::data_csv`) with a column whose name has a space.
fn study() -> Study {
    let data = data_csv().edit_first("id,grp", "id,home grp");
    Study::with("", &data)
}

#[test]
fn init_writes_a_schema_with_observed_facts_as_comments_only() {
    let s = study();
    let r = s.sworn(&["init", "data.csv", "--out", "starter.toml"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.contains("wrote starter.toml"), "{}", r.stdout);
    let plan = s.read("starter.toml");
    assert!(
        plan.contains("[data.data]\npath = \"data.csv\"\n"),
        "{plan}"
    );
    assert!(plan.contains("key = \"id\""), "{plan}");
    assert!(plan.contains("# 240 rows read"), "{plan}");
    for (column, kind) in [
        ("\"home grp\"", "category"),
        ("z ", "binary"),
        ("x ", "number"),
    ] {
        let line = plan
            .lines()
            .find(|l| l.starts_with(column))
            .unwrap_or_else(|| panic!("no line for {column} in {plan}"));
        assert!(line.contains(&format!("kind = \"{kind}\"")), "{line}");
    }
    // The observed range is a comment, never a declared bound.
    let x = plan.lines().find(|l| l.starts_with("x ")).unwrap_or("");
    assert!(x.contains("# observed 0.") && !x.contains("min ="), "{x}");
    // The file's fingerprint is disclosed in the plan.
    let sha = sha256_hex(data_csv().edit_first("id,grp", "id,home grp").as_bytes());
    assert!(plan.contains(&sha), "{plan}");
}

#[test]
fn check_refuses_the_marks_then_accepts_the_filled_plan() {
    let s = study();
    assert_eq!(
        s.sworn(&["init", "data.csv", "--out", "starter.toml"]).code,
        0
    );
    let r = s.sworn(&["check", "starter.toml"]);
    assert_eq!(r.code, 2, "{}", r.stdout);
    assert!(
        r.stderr.contains("starter.toml:")
            && r.stderr.contains("<fill: the study's title>")
            && r.stderr.contains("(at `title`)"),
        "{}",
        r.stderr
    );
    fill_marks(&s, "starter.toml", "\"d\"");
    let r = s.sworn(&["check", "starter.toml", "--data"]);
    assert_eq!(r.code, 0, "{}\n{}", r.stderr, r.stdout);
    assert!(
        r.stdout.contains("the data match the declared schema"),
        "{}",
        r.stdout
    );
}

#[test]
fn init_never_overwrites_a_plan() {
    let s = study();
    s.write("plan.toml", "keep me");
    let r = s.sworn(&["init", "data.csv"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("already exists") && r.stderr.contains("--out"),
        "{}",
        r.stderr
    );
    assert_eq!(s.read("plan.toml"), "keep me");
}

#[test]
fn init_names_an_unreadable_format() {
    let s = study();
    s.write("data.txt", "a,b\n1,2\n");
    let r = s.sworn(&["init", "data.txt", "--out", "p.toml"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("data.txt") && r.stderr.contains("`.csv`"),
        "{}",
        r.stderr
    );
    assert!(!s.path("p.toml").exists());
}

#[test]
fn two_tables_ask_which_one_a_specification_uses() {
    let s = study();
    s.write("other.csv", "k,v\na,1.5\nb,2.5\n");
    assert_eq!(
        s.sworn(&["init", "data.csv", "other.csv", "--out", "p.toml"])
            .code,
        0
    );
    let plan = s.read("p.toml");
    assert!(plan.contains("[data.other]"), "{plan}");
    assert!(
        plan.contains("data = \"<fill: which table: data, other>\""),
        "{plan}"
    );
}

/// Fill the starter plan's marks: a title, `y` as outcome and `regressor` (TOML text, quotes
/// included) as the regressor.
fn fill_marks(s: &Study, plan: &str, regressor: &str) {
    for (mark, value) in [
        ("\"<fill: the study's title>\"", "\"Starter\""),
        ("\"<fill: what this specification estimates>\"", "\"Main\""),
        ("\"<fill: the outcome column>\"", "\"y\""),
        ("\"<fill: the treatment or exposure column>\"", regressor),
    ] {
        s.edit(plan, mark, value);
    }
}

fn sha256_hex(bytes: &[u8]) -> String {
    sworn::ledger::sha256_hex(bytes)
}

#[test]
fn a_column_name_with_a_space_is_usable_in_expressions_between_backticks() {
    let s = Study::with("", &data_csv().edit_first(",x,", ",roof size,"));
    assert_eq!(s.sworn(&["init", "data.csv", "--out", "p.toml"]).code, 0);
    fill_marks(&s, "p.toml", "\"d\"");
    s.edit(
        "p.toml",
        "regressors = [\"d\"]",
        "regressors = [\"d\"]\nsample = \"`roof size` > 1 and not (`roof size` > 9)\"",
    );
    let r = s.sworn(&["check", "p.toml", "--data"]);
    assert_eq!(r.code, 0, "{}\n{}", r.stderr, r.stdout);
}
