//! `sworn log` and `sworn diff` on a sealed, run and amended study.

use crate::common::Study;

/// Seal, run, amend (a changed key, an added hypothesis) and run into a directory that is
/// then removed, as a killed run leaves it.
fn amended_study() -> Study {
    let s = Study::new();
    s.seal_and_run();
    s.edit("plan.toml", "errors = \"hc1\"", "errors = \"hc3\"");
    let text = s.read("plan.toml");
    s.write(
        "plan.toml",
        &format!(
            "{text}\n[[hypothesis]]\nid = \"H9\"\nspecification = \"ols\"\nterm = \"x\"\ndirection = \"greater\"\nfamily = \"main\"\n"
        ),
    );
    let a = s.sworn(&["amend", "plan.toml", "--reason", "heteroskedasticity worry"]);
    assert_eq!(a.code, 0, "{}", a.stderr);
    let r = s.sworn(&["run", "plan.toml", "--out", "gone"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    std::fs::remove_dir_all(s.path("gone")).expect("remove run directory");
    s
}

#[test]
fn log_lists_every_event_and_the_missing_run_directory() {
    let s = amended_study();
    let l = s.sworn(&["log", "plan.toml"]);
    assert_eq!(l.code, 0, "{}", l.stderr);
    let out = &l.stdout;
    for needle in [
        "line 1  ",
        "sealed  [registered version]",
        "line 2  ",
        "data first read",
        "data.main sha256:",
        "line 3  ",
        "directory out\n",
        "line 4  ",
        "amended",
        "reason: heteroskedasticity worry",
        "changed: hypothesis[H9], specification[ols].errors",
        "directory gone (not there now: never published",
    ] {
        assert!(out.contains(needle), "missing `{needle}` in:\n{out}");
    }
    assert!(!out.contains("ledger problem"), "{out}");
    assert!(!out.contains("matches no earlier"), "{out}");
    // A run of an edited plan that was never amended is pointed out.
    s.edit("plan.toml", "errors = \"hc3\"", "errors = \"hc2\"");
    let r = s.sworn(&["run", "plan.toml", "--out", "edited"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let l = s.sworn(&["log", "plan.toml"]);
    assert!(
        l.stdout
            .contains("this run's plan content matches no earlier seal or amendment"),
        "{}",
        l.stdout
    );
    let none = s.sworn(&["log", "other.toml"]);
    assert_eq!(none.code, 2);
    assert!(
        none.stderr.contains("seal the plan first"),
        "{}",
        none.stderr
    );
}

#[test]
fn diff_shows_each_element_old_to_new() {
    let s = amended_study();
    // Default: the registered version (line 1, in force when the data were first read)
    // against the current plan file.
    let d = s.sworn(&["diff", "plan.toml"]);
    assert_eq!(d.code, 0, "{}", d.stderr);
    let out = &d.stdout;
    assert!(out.contains("from line 1 (sealed"), "{out}");
    assert!(out.contains("the registered version"), "{out}");
    assert!(
        out.contains("changed  specification[ols]\n           errors: \"hc1\" → \"hc3\""),
        "{out}"
    );
    assert!(out.contains("added    hypothesis[H9]"), "{out}");
    assert!(
        out.contains("1 element(s) changed, 1 added, 0 removed"),
        "{out}"
    );
    // Between ledger lines: the seal against the run that followed it is no change.
    let same = s.sworn(&["diff", "plan.toml", "1", "3"]);
    assert_eq!(same.code, 0, "{}", same.stderr);
    assert!(same.stdout.contains("no change"), "{}", same.stdout);
    let back = s.sworn(&["diff", "plan.toml", "4", "1"]);
    assert!(
        back.stdout.contains("removed  hypothesis[H9]"),
        "{}",
        back.stdout
    );
    assert!(
        back.stdout.contains("errors: \"hc3\" → \"hc1\""),
        "{}",
        back.stdout
    );
    // A line without a plan version is refused with the lines that have one.
    let bad = s.sworn(&["diff", "plan.toml", "2"]);
    assert_eq!(bad.code, 2);
    assert!(
        bad.stderr
            .contains("line 2 records no plan version; lines recording a plan version: 1, 3, 4, 5"),
        "{}",
        bad.stderr
    );
}
