//! The happy path: check, seal, run, verify; determinism; verify catches every changed byte.

use crate::common::{codes, run_in, Study};

#[test]
fn check_seal_run_verify() {
    let s = Study::new();
    let c = s.sworn(&["check", "plan.toml", "--data"]);
    assert_eq!(c.code, 0, "{}{}", c.stdout, c.stderr);
    let r = s.seal_and_run();
    assert_eq!(r["format"], 1);
    assert_eq!(r["plan"]["sealed"], true);
    assert_eq!(r["plan"]["integrity"], "sealed-unchanged");
    assert!(codes(&r).is_empty(), "{:?}", codes(&r));
    let iv = &r["specifications"]["iv"];
    assert_eq!(iv["estimator"], "2sls");
    assert_eq!(iv["n"], 240);
    assert_eq!(iv["clusters"], 12);
    assert_eq!(iv["df"], 11.0);
    assert!(iv["first_stage"]["d"]["f_statistic"].as_f64().is_some());
    assert!(iv["reduced_form"]["terms"]["z"]["estimate"]
        .as_f64()
        .is_some());
    assert!(iv["endogeneity"]["durbin"]["p_value"].as_f64().is_some());
    assert_eq!(r["hypotheses"]["H1"]["verdict"], "supported");
    assert!(r["digest"]
        .as_str()
        .is_some_and(|d| d.starts_with("sha256:")));
    for f in ["report.md", "report.tex", "results.json"] {
        assert!(s.path("out").join(f).exists(), "{f} missing");
    }
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 0, "{}{}", v.stdout, v.stderr);
}

#[test]
fn same_plan_and_data_give_identical_results() {
    let s = Study::new();
    s.seal_and_run();
    let first = s.read("out/results.json");
    let md = s.read("out/report.md");
    s.run_ok();
    assert_eq!(first, s.read("out/results.json"));
    assert_eq!(md, s.read("out/report.md"));
}

#[test]
fn verify_fails_after_any_changed_byte() {
    for target in [
        "data.csv",
        "out/plan.toml",
        "out/plan.ledger",
        "out/report.md",
        "out/report.tex",
        "out/report.html",
        "out/results.json",
    ] {
        let s = Study::new();
        s.seal_and_run();
        assert_eq!(s.sworn(&["verify", "out"]).code, 0);
        let mut bytes = std::fs::read(s.path(target)).expect("read");
        let i = bytes.len() / 2;
        bytes[i] = if bytes[i] == b'7' { b'8' } else { b'7' };
        std::fs::write(s.path(target), bytes).expect("write");
        let v = s.sworn(&["verify", "out"]);
        assert_eq!(
            v.code, 1,
            "changing {target} must fail verify: {}",
            v.stdout
        );
        assert!(v.stdout.contains("FAILED"), "{}", v.stdout);
    }
}

#[test]
fn verify_without_results_is_bad_input() {
    let s = Study::new();
    let v = s.sworn(&["verify", "nowhere"]);
    assert_eq!(v.code, 2);
    assert!(v.stderr.contains("results.json"), "{}", v.stderr);
}

#[test]
fn latex_report_compiles() {
    if pdflatex_missing() {
        return;
    }
    let s = Study::new();
    s.seal_and_run();
    let out = std::process::Command::new("pdflatex")
        .args(["-interaction=nonstopmode", "-halt-on-error", "report.tex"])
        .current_dir(s.path("out"))
        .output()
        .expect("pdflatex runs");
    assert!(
        out.status.success(),
        "pdflatex failed:\n{}",
        String::from_utf8_lossy(&out.stdout)
    );
    assert!(s.path("out/report.pdf").exists());
    let log = std::fs::read_to_string(s.path("out/report.log")).unwrap_or_default();
    assert_eq!(overfull_over_1pt(&log), Vec::<String>::new());
}

/// Whether pdflatex is absent (the test then skips, saying why).
pub(crate) fn pdflatex_missing() -> bool {
    let missing = std::process::Command::new("pdflatex")
        .arg("--version")
        .output()
        .is_err();
    if missing {
        println!("skipped: pdflatex is not installed (.ci/run installs it)");
    }
    missing
}

/// Lines of a LaTeX log reporting a box more than 1 pt too wide.
pub(crate) fn overfull_over_1pt(log: &str) -> Vec<String> {
    log.lines()
        .filter(|l| l.starts_with("Overfull \\hbox ("))
        .filter(|l| {
            l.trim_start_matches("Overfull \\hbox (")
                .split("pt")
                .next()
                .and_then(|v| v.parse::<f64>().ok())
                .is_some_and(|v| v > 1.0)
        })
        .map(String::from)
        .collect()
}

/// Both demo reports compile and fit the page: no box more than 1 pt too wide.
#[test]
fn demo_pdfs_fit_the_page() {
    if pdflatex_missing() {
        return;
    }
    let dir = tempfile::tempdir().expect("temp dir");
    assert_eq!(run_in(dir.path(), &["demo", "--out", "demo"]).code, 0);
    for plan in ["cool-roofs", "grid-demand"] {
        let out_dir = dir.path().join("demo/out").join(plan);
        let out = std::process::Command::new("pdflatex")
            .args(["-interaction=nonstopmode", "-halt-on-error", "report.tex"])
            .current_dir(&out_dir)
            .output()
            .expect("pdflatex runs");
        assert!(
            out.status.success(),
            "{plan}: {}",
            String::from_utf8_lossy(&out.stdout)
        );
        let log = std::fs::read_to_string(out_dir.join("report.log")).unwrap_or_default();
        assert_eq!(overfull_over_1pt(&log), Vec::<String>::new(), "{plan}");
    }
}

#[test]
fn demo_runs_and_verifies() {
    let dir = tempfile::tempdir().expect("temp dir");
    let d = run_in(dir.path(), &["demo", "--out", "demo"]);
    assert_eq!(d.code, 0, "{}{}", d.stdout, d.stderr);
    assert!(d.stdout.contains("report: "), "{}", d.stdout);
    for plan in ["cool-roofs", "grid-demand"] {
        let v = run_in(dir.path(), &["verify", &format!("demo/out/{plan}")]);
        assert_eq!(v.code, 0, "{}", v.stdout);
    }
    let r: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("demo/out/cool-roofs/results.json"))
            .expect("read"),
    )
    .expect("json");
    let ols = r["specifications"]["temp_ols"]["terms"]["painted"]["estimate"]
        .as_f64()
        .expect("ols");
    let iv = r["specifications"]["temp_iv"]["terms"]["painted"]["estimate"]
        .as_f64()
        .expect("iv");
    // The design makes take-up more likely in hotter homes, so OLS understates the cooling.
    assert!(iv < ols && ols < 0.0, "ols {ols}, iv {iv}");
}
