//! CSV dialects and missing-value codes declared per table, and detected when undeclared.

use crate::common::{data_csv, Edit, Study, PLAN};

/// The generated data written with `;` between fields and decimal commas.
fn european() -> String {
    data_csv()
        .lines()
        .map(|line| line.replace(',', ";").replace('.', ","))
        .collect::<Vec<_>>()
        .join("\n")
        + "\n"
}

#[test]
fn a_semicolon_file_is_named_as_such_with_the_key_to_set() {
    let s = Study::with(PLAN, &european());
    let r = s.sworn(&["check", "plan.toml", "--data"]);
    assert_eq!(r.code, 2, "{}", r.stdout);
    assert!(
        r.stderr.contains("fields separated by \";\"")
            && r.stderr.contains("set separator = \";\" under [data.main]"),
        "{}",
        r.stderr
    );
}

#[test]
fn a_decimal_comma_is_detected_and_the_declared_dialect_reads_the_same_numbers() {
    let plan = PLAN.edit_first("key = \"id\"", "key = \"id\"\nseparator = \";\"");
    let s = Study::with(&plan, &european());
    let r = s.sworn(&["check", "plan.toml", "--data"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("decimal = \",\""), "{}", r.stderr);
    assert!(!r.stderr.contains("truncate_ragged_lines"), "{}", r.stderr);

    s.edit(
        "plan.toml",
        "separator = \";\"",
        "separator = \";\"\ndecimal = \",\"",
    );
    let european_run = s.seal_and_run();
    let plain = Study::new().seal_and_run();
    assert_eq!(
        european_run["specifications"], plain["specifications"],
        "the same numbers whatever the dialect"
    );
}

#[test]
fn declared_missing_codes_are_read_as_missing_and_listed_when_a_value_is_not_one() {
    let mut lines: Vec<String> = data_csv().lines().map(String::from).collect();
    let mut fields: Vec<&str> = lines[3].split(',').collect();
    fields[5] = "absent"; // the outcome `y`
    lines[3] = fields.join(",");
    let data = lines.join("\n") + "\n";
    let s = Study::with(PLAN, &data);
    let r = s.sworn(&["check", "plan.toml", "--data"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("holds `absent`")
            && r.stderr
                .contains("`missing` codes (now an empty field, `NA`, `.`)"),
        "{}",
        r.stderr
    );
    s.edit(
        "plan.toml",
        "key = \"id\"",
        "key = \"id\"\nmissing = [\"\", \"NA\", \".\", \"absent\"]",
    );
    let r = s.sworn(&["check", "plan.toml", "--data"]);
    assert_eq!(r.code, 0, "{}\n{}", r.stderr, r.stdout);
}

#[test]
fn dialect_keys_are_validated_with_the_valid_values() {
    let s = Study::new();
    s.edit(
        "plan.toml",
        "key = \"id\"",
        "key = \"id\"\nseparator = \":\"",
    );
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("(at `data.main.separator`)") && r.stderr.contains("\"\\t\" (a tab)"),
        "{}",
        r.stderr
    );
    s.edit("plan.toml", "separator = \":\"", "decimal = \",\"");
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr
            .contains("a decimal comma needs another field separator"),
        "{}",
        r.stderr
    );
}

#[test]
fn init_writes_the_dialect_it_found() {
    let s = Study::with("", &european());
    assert_eq!(s.sworn(&["init", "data.csv", "--out", "p.toml"]).code, 0);
    let plan = s.read("p.toml");
    assert!(plan.contains("separator = \";\""), "{plan}");
    assert!(plan.contains("decimal = \",\""), "{plan}");
    let x = plan.lines().find(|l| l.starts_with("x ")).unwrap_or("");
    assert!(x.contains("kind = \"number\""), "{x}");
}

#[test]
fn of_several_unparsable_cells_the_first_in_the_file_is_named() {
    // Numeric cells are parsed on all cores; the message must still name the first bad cell.
    let mut lines: Vec<String> = data_csv().lines().map(String::from).collect();
    let last = lines.len() - 2;
    for (i, text) in [(last, "later"), (3, "earlier")] {
        let mut fields: Vec<&str> = lines[i].split(',').collect();
        fields[5] = text; // the outcome `y`
        lines[i] = fields.join(",");
    }
    let s = Study::with(PLAN, &(lines.join("\n") + "\n"));
    let r = s.sworn(&["check", "plan.toml", "--data"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("line 4 holds `earlier`") && !r.stderr.contains("later"),
        "{}",
        r.stderr
    );
}
