//! The rehearsal's reports as a reader gets them: snapshots of rehearsal.md, rehearsal.tex and
//! rehearsal.html (re-bless with `SWORN_BLESS=1`) for the cool-roofs demo plan (rules, first
//! stages, resampled tests with fewer draws) and for the base plan rehearsed on the rows of a
//! baseline file with a take-up so rare that some simulated data sets stop the analysis (the
//! baseline sentence and the failure sentence).

use crate::common::{run_in, Study, PLAN};
use std::path::Path;

const REPORTS: [&str; 3] = ["rehearsal.md", "rehearsal.tex", "rehearsal.html"];

/// The base plan on 120 baseline rows; `d` is almost never 1, so the OLS design is often
/// rank-deficient and the analysis stops on some data sets.
const RARE_TAKE_UP: &str = r#"
[rehearsal]
replications = 8
seed = 31
effects = [0.5, 2.0]

[rehearsal.data.main]
baseline = "baseline.csv"

[rehearsal.data.main.columns]
z = "bernoulli(0.5)"
d = "bernoulli(if(z, 0.015, 0.0))"
y = "2 + effect * d + 0.3 * x + group_normal(grp, 0.4) + normal(0, 1)"
yb = "bernoulli(0.4)"
"#;

/// 240 invented baseline rows in 12 groups (`x` cycles through 0 to 9.5).
fn baseline_rows() -> String {
    let mut s = String::from("id,grp,x\n");
    for i in 0..240u32 {
        s.push_str(&format!(
            "u{i:03},k{},{}\n",
            i % 12,
            f64::from(i % 20) / 2.0
        ));
    }
    s
}

/// A report with the fingerprints (which change with any edit of the plan text or of the
/// baseline file) replaced by fixed marks.
fn normalized(text: &str, json: &serde_json::Value) -> String {
    let mut out = text.to_string();
    let mut volatile = vec![
        ("PLAN-CONTENT", json["plan_content_sha256"].as_str()),
        ("ASSUMPTIONS", json["assumptions_sha256"].as_str()),
    ];
    if let Some(files) = json["baselines"].as_object() {
        volatile.extend(files.values().map(|b| ("BASELINE", b["sha256"].as_str())));
    }
    for (mark, value) in volatile {
        let Some(v) = value else { continue };
        let long = format!("sha256:{v}");
        out = out.replace(
            &sworn::report::tex_breakable(&long),
            &format!("sha256:{mark}"),
        );
        out = out.replace(v, mark);
    }
    out
}

/// Compare (or, with `SWORN_BLESS=1`, rewrite) the three reports in `out` as `NAME.*`.
fn check(name: &str, out: &Path, stale: &mut Vec<String>) {
    let bless = std::env::var_os("SWORN_BLESS").is_some_and(|v| v == "1");
    let snapshots = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/snapshots");
    let json: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(out.join("rehearsal.json")).expect("rehearsal.json"),
    )
    .expect("json");
    for report in REPORTS {
        let text = std::fs::read_to_string(out.join(report)).expect("report");
        let fresh = normalized(&text, &json);
        let path = snapshots.join(format!("{name}.{report}"));
        if bless {
            std::fs::write(&path, &fresh).expect("write snapshot");
            continue;
        }
        let kept = std::fs::read_to_string(&path).unwrap_or_default();
        if kept != fresh {
            let line = kept
                .lines()
                .zip(fresh.lines())
                .position(|(a, b)| a != b)
                .unwrap_or(kept.lines().count().min(fresh.lines().count()));
            stale.push(format!(
                "{}: first difference at line {}:\n  kept:  {}\n  fresh: {}",
                path.display(),
                line + 1,
                kept.lines().nth(line).unwrap_or("(end)"),
                fresh.lines().nth(line).unwrap_or("(end)")
            ));
        }
    }
}

/// rehearsal.md, rehearsal.tex and rehearsal.html match `tests/snapshots/*.rehearsal.*`.
#[test]
fn rehearsal_reports_match_their_snapshots() {
    let mut stale = Vec::new();

    let demo = tempfile::tempdir().expect("temp dir");
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    std::fs::create_dir(demo.path().join("plans")).expect("mkdir");
    std::fs::copy(
        root.join("plans/cool-roofs.toml"),
        demo.path().join("plans/cool-roofs.toml"),
    )
    .expect("copy the demo plan");
    let r = run_in(
        demo.path(),
        &["rehearse", "plans/cool-roofs.toml", "--replications", "4"],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    check(
        "cool-roofs",
        &demo.path().join("plans/cool-roofs-rehearsal"),
        &mut stale,
    );

    let s = Study::with(&format!("{PLAN}{RARE_TAKE_UP}"), "");
    s.write("baseline.csv", &baseline_rows());
    let r = s.sworn(&["rehearse", "plan.toml", "--out", "reh"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let md = s.read("reh/rehearsal.md");
    assert!(
        md.contains("stopped with an error on") && md.contains("baseline file"),
        "the scenario no longer reaches its sentences: {md}"
    );
    check("rare-take-up", &s.path("reh"), &mut stale);

    assert!(
        stale.is_empty(),
        "rehearsal reports differ from their snapshots (review, then re-bless with SWORN_BLESS=1):\n{}",
        stale.join("\n")
    );
}
