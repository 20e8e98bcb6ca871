//! Help that teaches: examples on every command, a plan page, completions, colour rules.

use crate::common::Study;

#[test]
fn every_command_help_carries_an_example() {
    let s = Study::new();
    for command in [
        "init",
        "check",
        "seal",
        "amend",
        "run",
        "verify",
        "log",
        "diff",
        "demo",
        "help",
        "completions",
    ] {
        let r = s.sworn(&[command, "--help"]);
        assert_eq!(r.code, 0, "{command}: {}", r.stderr);
        assert!(r.stdout.contains("Example"), "{command}: {}", r.stdout);
        assert!(
            r.stdout.contains(&format!("sworn {command}")),
            "{command}: {}",
            r.stdout
        );
    }
    let top = s.sworn(&["--help"]);
    assert!(top.stdout.contains("A first session:") && top.stdout.contains("sworn help plan"));
}

#[test]
fn help_plan_lists_every_section_with_its_reference_heading() {
    let s = Study::new();
    let r = s.sworn(&["help", "plan"]);
    assert_eq!(r.code, 0);
    for section in [
        "[study]",
        "[inference]",
        "[data.NAME]",
        "[derive]",
        "[assignment]",
        "[[specification]]",
        "[[contingency]]",
        "[family.NAME]",
        "[[hypothesis]]",
        "[resampling]",
        "[[index]]",
        "[balance]",
        "[attrition]",
        "[[table]]",
        "docs/plan-reference.md",
    ] {
        assert!(
            r.stdout.contains(section),
            "missing {section}: {}",
            r.stdout
        );
    }
    // Every heading the page points to exists in the reference.
    let reference = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/docs/plan-reference.md"
    ))
    .expect("docs/plan-reference.md");
    for heading in [
        "Top level",
        "Data tables",
        "Expressions",
        "Specifications",
        "Contingencies",
        "Hypotheses",
        "Resampled inference",
    ] {
        assert!(
            reference.contains(&format!("## {heading}")),
            "no heading {heading}"
        );
    }
}

#[test]
fn help_on_a_command_and_an_unknown_topic() {
    let s = Study::new();
    let r = s.sworn(&["help", "verify"]);
    assert_eq!(r.code, 0);
    assert!(r.stdout.contains("Usage: sworn verify"), "{}", r.stdout);
    let r = s.sworn(&["help", "veryfi"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("no help topic `veryfi`") && r.stderr.contains("did you mean `verify`?"),
        "{}",
        r.stderr
    );
}

#[test]
fn completions_are_scripts_for_the_named_shell() {
    let s = Study::new();
    let r = s.sworn(&["completions", "bash"]);
    assert_eq!(r.code, 0);
    assert!(
        r.stdout.contains("_sworn()") && r.stdout.contains("verify"),
        "{}",
        r.stdout
    );
    let r = s.sworn(&["completions", "zsh"]);
    assert!(r.stdout.starts_with("#compdef sworn"), "{}", r.stdout);
    let r = s.sworn(&["completions", "fish"]);
    assert_eq!(r.code, 0);
    assert!(r.stdout.contains("complete -c sworn"), "{}", r.stdout);
    let r = s.sworn(&["completions", "tcsh"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("bash"), "{}", r.stderr);
}

#[test]
fn piped_errors_carry_no_colour() {
    let s = Study::new();
    let r = s.sworn(&["check", "absent.toml"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.starts_with("error: absent.toml"), "{:?}", r.stderr);
    assert!(!r.stderr.contains('\u{1b}'), "{:?}", r.stderr);
}
