//! The README's walkthrough, run as written: the commands of its three marked blocks, with the
//! edit it describes, must take a new user from data to a verified report.

use crate::common::run_in;
use crate::common::Edit;

/// The first fenced block after `marker` in the README.
fn block_after(readme: &str, marker: &str) -> String {
    let at = readme
        .find(marker)
        .unwrap_or_else(|| panic!("README lacks {marker}"));
    let rest = &readme[at..];
    let open = rest.find("```").expect("a fenced block");
    let body = &rest[open..];
    let start = body.find('\n').expect("fence line") + 1;
    let end = body[start..].find("```").expect("closing fence");
    body[start..start + end].to_string()
}

fn commands(block: &str) -> Vec<Vec<String>> {
    block
        .lines()
        .map(str::trim)
        .filter(|l| l.starts_with("sworn "))
        .map(|l| l.split_whitespace().skip(1).map(String::from).collect())
        .collect()
}

#[test]
fn the_walkthrough_reaches_a_verified_report() {
    let readme = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md"))
        .expect("README.md");
    let dir = tempfile::tempdir().expect("temp dir");
    let run = |args: &[String]| {
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        run_in(dir.path(), &args)
    };
    let first = commands(&block_after(&readme, "<!-- walkthrough:"));
    assert_eq!(first.len(), 3, "{first:?}");
    for args in &first[..2] {
        let r = run(args);
        assert_eq!(r.code, 0, "{args:?}: {}", r.stderr);
    }
    let r = run(&first[2]);
    assert_eq!(r.code, 2, "check must stop at the marks");
    assert!(r.stderr.contains("<fill:"), "{}", r.stderr);

    // The edit the README describes.
    let plan_path = dir.path().join("roofs.toml");
    let plan = std::fs::read_to_string(&plan_path).expect("roofs.toml");
    let cut = plan
        .find("# One specification is required")
        .expect("the starter plan's specification comment");
    let edited = plan[..cut].edit(
        "\"<fill: the study's title>\"",
        "\"Cool-roof offer and indoor heat\"",
    ) + &block_after(&readme, "<!-- walkthrough-plan -->");
    std::fs::write(&plan_path, edited).expect("write roofs.toml");

    let rest = commands(&block_after(&readme, "<!-- walkthrough-rest -->"));
    assert_eq!(rest.len(), 4, "{rest:?}");
    let mut last = None;
    for args in &rest {
        let r = run(args);
        assert_eq!(r.code, 0, "{args:?}: {}\n{}", r.stderr, r.stdout);
        last = Some(r);
    }
    let verified = last.expect("verify ran");
    assert!(verified.stdout.contains("verified"), "{}", verified.stdout);
}
