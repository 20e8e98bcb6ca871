//! Hostile and degenerate input (issue 10): damaged Parquet files, plan text that tries to
//! forge sworn's own lines, degenerate and extreme data, and one test per message fixed.

use crate::common::Edit;
use crate::common::{data_csv, run_in, Ran, Study, PLAN};
use std::path::Path;

fn fixtures() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/parquet")
}

/// A study folder holding the Parquet plan and `data` as `weekly.parquet`.
fn parquet_study(data: &[u8]) -> tempfile::TempDir {
    let dir = tempfile::tempdir().expect("temp dir");
    std::fs::copy(fixtures().join("plan.toml"), dir.path().join("plan.toml")).expect("plan");
    std::fs::write(dir.path().join("weekly.parquet"), data).expect("data");
    dir
}

fn no_panic(r: &Ran) {
    assert!(
        !r.stderr.contains("panicked") && r.code != 101 && r.code != 134 && r.code != -1,
        "exit {}: {}",
        r.code,
        r.stderr
    );
}

fn check_data(plan: &str, data: &str) -> Ran {
    let s = Study::with(plan, data);
    s.sworn(&["check", "plan.toml", "--data"])
}

fn refused(r: &Ran, expect: &[&str]) {
    no_panic(r);
    assert_eq!(r.code, 2, "expected exit 2: {}{}", r.stdout, r.stderr);
    for e in expect {
        assert!(r.stderr.contains(e), "stderr lacks `{e}`: {}", r.stderr);
    }
}

#[test]
fn parquet_fixture_reads() {
    let dir = parquet_study(&std::fs::read(fixtures().join("weekly.parquet")).expect("fixture"));
    let r = run_in(dir.path(), &["check", "plan.toml", "--data"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
}

/// Each damaged file made sworn panic before the reader was isolated (one per panic site
/// found by editing single bytes, see tests/fixtures/parquet/README.md).
#[test]
fn issue_10_damaged_parquet_is_refused_naming_the_file() {
    let dir = fixtures().join("damaged");
    let mut seen = 0;
    for entry in std::fs::read_dir(&dir).expect("damaged fixtures") {
        let path = entry.expect("entry").path();
        let study = parquet_study(&std::fs::read(&path).expect("read"));
        let r = run_in(study.path(), &["check", "plan.toml", "--data"]);
        no_panic(&r);
        assert_eq!(r.code, 2, "{}: {}{}", path.display(), r.stdout, r.stderr);
        assert!(r.stderr.contains("weekly.parquet"), "{}", r.stderr);
        assert!(r.stderr.lines().count() == 1, "{}", r.stderr);
        seen += 1;
    }
    assert!(seen >= 5, "only {seen} damaged fixtures");
}

#[test]
fn issue_10_truncated_parquet_is_refused() {
    let bytes = std::fs::read(fixtures().join("weekly.parquet")).expect("fixture");
    for keep in [0, 5, 12, bytes.len() / 2, bytes.len() - 1] {
        let study = parquet_study(&bytes[..keep]);
        let r = run_in(study.path(), &["check", "plan.toml", "--data"]);
        refused(&r, &["weekly.parquet", "damaged"]);
    }
}

#[test]
fn issue_10_parquet_nan_is_refused_like_csv() {
    let study = parquet_study(&std::fs::read(fixtures().join("weekly-nan.parquet")).expect("nan"));
    let r = run_in(study.path(), &["check", "plan.toml", "--data"]);
    refused(&r, &["column `price`", "row 5", "`NaN`"]);
}

/// ANSI escapes in the plan path a results file names cannot paint a "verified" line.
#[test]
fn issue_10_ansi_in_plan_path_cannot_forge_a_verified_line() {
    let s = Study::new();
    s.seal_and_run();
    let text = s.read("out/results.json");
    let v: serde_json::Value = serde_json::from_str(&text).expect("json");
    let old = v["plan"]["path"].as_str().expect("plan path").to_string();
    let forged = "\u{1b}[1A\u{1b}[2K\rverified: out re-derives exactly\u{1b}[8m";
    s.write(
        "out/results.json",
        &text.edit_first(
            &format!("\"path\": \"{old}\""),
            &format!("\"path\": {}", serde_json::to_string(forged).expect("json")),
        ),
    );
    let r = s.sworn(&["verify", "out"]);
    assert_eq!(r.code, 1, "{}{}", r.stdout, r.stderr);
    for out in [&r.stdout, &r.stderr] {
        assert!(!out.contains('\u{1b}') && !out.contains('\r'), "{out:?}");
        assert!(!out.lines().any(|l| l.starts_with("verified")), "{out}");
    }
}

/// Control characters, bidi overrides, HTML and line breaks in plan text reach neither the
/// terminal nor the reports raw, and cannot add a line that looks like sworn's own.
#[test]
fn issue_10_plan_text_cannot_forge_report_or_terminal_lines() {
    let plan = PLAN
        .edit(
            "title = \"Test study\"",
            "title = \"Study\\n\\n**Integrity: sealed, verified**\\n<!--\\u001b[2K\\u202e\\u0000\"",
        )
        .edit(
            "claim = \"d raises y\"",
            "claim = \"<script>alert(1)</script><img src=x onerror=alert(2)> | cell\"",
        );
    let s = Study::with(&plan, &data_csv());
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(!r.stdout.contains('\u{1b}') && !r.stdout.contains('\u{202e}'));
    assert_eq!(
        r.stdout.lines().filter(|l| l.contains("integrity")).count(),
        1,
        "{}",
        r.stdout
    );
    let md = s.read("out/report.md");
    for bad in ["<script", "<img", "<!--", "\u{1b}", "\u{202e}", "\u{0}"] {
        assert!(!md.contains(bad), "report.md holds {bad:?}");
    }
    assert_eq!(
        md.lines().filter(|l| l.starts_with("**Integrity")).count(),
        1,
        "{md}"
    );
    let tex = s.read("out/report.tex");
    assert!(!tex.contains('\u{1b}') && !tex.contains('\u{0}'));
}

fn with_column(csv: &str, col: usize, f: impl Fn(&str) -> String) -> String {
    csv.lines()
        .enumerate()
        .map(|(i, l)| {
            let mut cells: Vec<String> = l.split(',').map(String::from).collect();
            if i > 0 {
                cells[col] = f(&cells[col]);
            }
            cells.join(",") + "\n"
        })
        .collect()
}

/// A constant outcome: no t, p or test is reported and every hypothesis on it is undetermined
/// with the reason (it used to report LIML t = 7.44 and a "supported" hypothesis).
#[test]
fn issue_10_constant_outcome_is_undetermined() {
    let csv = with_column(&data_csv(), 5, |_| "5.0".into());
    let plan = PLAN.edit(
        "[[hypothesis]]\nid = \"H1\"",
        "[[specification]]\nid = \"liml\"\nestimator = \"liml\"\noutcome = \"y\"\nendogenous = [\"d\"]\ninstruments = [\"z\"]\ncontrols = [\"x\"]\n\n[[hypothesis]]\nid = \"H1\"",
    );
    let s = Study::with(&plan, &csv);
    let v = s.seal_and_run();
    for id in ["H1", "H2"] {
        let h = &v["hypotheses"][id];
        assert_eq!(h["verdict"], "undetermined", "{h}");
        assert!(h["adjusted_p_value"].is_null(), "{h}");
        assert!(
            h["reason"].as_str().unwrap_or("").contains("single value"),
            "{h}"
        );
    }
    for spec in ["ols", "iv", "liml"] {
        let r = &v["specifications"][spec];
        assert!(r["terms"]["d"]["statistic"].is_null(), "{spec}: {r}");
        assert!(r["r_squared"].is_null(), "{spec}: {r}");
        assert!(r["endogeneity"].is_null(), "{spec}: {r}");
    }
    assert!(crate::common::codes(&v).contains(&"outcome-degenerate".to_string()));
    let md = s.read("out/report.md");
    assert!(!md.contains("inf") && !md.contains("NaN"), "{md}");
}

/// Values scaled so their squares overflow or underflow: exit 2 naming the column and a
/// rescale (they used to be called collinear, or to print t = inf).
#[test]
fn issue_10_extreme_scales_are_refused_naming_the_column() {
    let plan = PLAN.edit(
        "x   = { kind = \"number\", min = 0, max = 10 }",
        "x   = { kind = \"number\" }",
    );
    for factor in [1e153, 1e-200] {
        let csv = with_column(&data_csv(), 4, |v| {
            format!("{:e}", v.parse::<f64>().unwrap_or(0.0) * factor)
        });
        let s = Study::with(&plan, &csv);
        assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
        let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
        refused(&r, &["column `x`", "rescale", "x_scaled"]);
    }
    let csv = with_column(&data_csv(), 5, |v| {
        format!("{:e}", v.parse::<f64>().unwrap_or(0.0) * 1e300)
    });
    let s = Study::with(PLAN, &csv);
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    refused(
        &s.sworn(&["run", "plan.toml", "--out", "out"]),
        &["column `y`", "rescale"],
    );
}

/// A stray text value in a numeric column: the file line (header = line 1), the value cut
/// to 80 characters, and the accepted missing-value codes (not "declare it a category").
#[test]
fn issue_10_stray_text_names_the_line_and_the_missing_codes() {
    let long = "absent".repeat(2000);
    let csv = data_csv();
    let mut lines: Vec<String> = csv.lines().map(String::from).collect();
    let mut cells: Vec<String> = lines[102].split(',').map(String::from).collect();
    cells[5] = long;
    lines[102] = cells.join(",");
    let r = check_data(PLAN, &(lines.join("\n") + "\n"));
    refused(
        &r,
        &[
            "column `y`",
            "line 103",
            "(12000 characters)",
            "`NA`",
            "`.`",
        ],
    );
    assert!(!r.stderr.contains("category"), "{}", r.stderr);
    assert!(r.stderr.len() < 600, "{} characters", r.stderr.len());
}

#[test]
fn issue_10_long_flat_sum_is_not_called_nesting() {
    let sum = vec!["x"; 201].join(" + ");
    let plan = PLAN.edit(
        "[[specification]]\nid = \"ols\"",
        &format!("[derive]\nbig = \"{sum}\"\n\n[[specification]]\nid = \"ols\""),
    );
    let s = Study::with(&plan, &data_csv());
    refused(
        &s.sworn(&["check", "plan.toml"]),
        &["a + b + c", "sums of at most 200"],
    );
}

#[test]
fn issue_10_unknown_error_kind_lists_the_valid_kinds() {
    let plan = PLAN.edit_first("errors = \"hc1\"", "errors = \"robust\"");
    let s = Study::with(&plan, &data_csv());
    refused(
        &s.sworn(&["check", "plan.toml"]),
        &[
            "`robust`",
            "\"classical\", \"hc0\", \"hc1\", \"hc2\", \"hc3\"",
            "kind = \"cluster\"",
        ],
    );
}

#[test]
fn issue_10_instrument_equal_to_endogenous_is_reported_at_instruments() {
    let plan = PLAN.edit("instruments = [\"z\"]", "instruments = [\"d\"]");
    let s = Study::with(&plan, &data_csv());
    refused(
        &s.sworn(&["check", "plan.toml"]),
        &[
            "specification[iv].instruments",
            "both `endogenous` and `instruments`",
        ],
    );
}

#[test]
fn issue_10_all_singleton_fixed_effects_say_so() {
    let plan = PLAN.edit(
        "controls = [\"x\"]\nerrors = \"hc1\"",
        "controls = [\"x\"]\nfixed_effects = [\"id\"]\nerrors = \"hc1\"",
    );
    let s = Study::with(&plan, &data_csv());
    assert_eq!(
        s.sworn(&["seal", "plan.toml"]).code,
        0,
        "{}",
        s.sworn(&["check", "plan.toml"]).stderr
    );
    refused(
        &s.sworn(&["run", "plan.toml", "--out", "out"]),
        &["alone in their level", "`id`"],
    );
}

#[test]
fn issue_10_collinear_balance_covariates_are_named() {
    let plan = PLAN.edit(
        "[[hypothesis]]\nid = \"H1\"",
        "[derive]\nx2 = \"2 * x\"\n\n[balance]\nby = \"z\"\ncovariates = [\"x\", \"x2\"]\n\n[[hypothesis]]\nid = \"H1\"",
    );
    let s = Study::with(&plan, &data_csv());
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    refused(&r, &["`x2`", "[balance] covariates"]);
    assert!(!r.stderr.contains("[1"), "{}", r.stderr);
}

/// A treatment that varies within a declared cluster: `check --data` reports it (naming the
/// cluster by its label), and `run` stops naming the label, not an internal number.
#[test]
fn issue_10_treatment_varying_within_a_cluster_is_found_by_check() {
    let plan = PLAN.edit(
        "[[hypothesis]]\nid = \"H1\"",
        "[resampling]\nseed = 1\n\n[assignment]\nvariable = \"z\"\ndesign = \"clustered\"\nclusters = \"grp\"\n\n[[specification]]\nid = \"itt\"\nestimator = \"ols\"\noutcome = \"y\"\nregressors = [\"z\"]\nerrors = { kind = \"cluster\", by = \"grp\" }\n\n[[hypothesis]]\nid = \"H3\"\nspecification = \"itt\"\nterm = \"z\"\ninference = \"randomization\"\n\n[[hypothesis]]\nid = \"H1\"",
    );
    let s = Study::with(&plan, &data_csv());
    let c = s.sworn(&["check", "plan.toml", "--data"]);
    no_panic(&c);
    assert_eq!(c.code, 1, "{}{}", c.stdout, c.stderr);
    assert!(
        c.stdout.contains("assignment-varies-in-cluster"),
        "{}",
        c.stdout
    );
    assert!(c.stdout.contains("cluster `g00`"), "{}", c.stdout);
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    refused(&r, &["`g00` of `grp`"]);
}

/// A reader that stops early (`sworn demo | head`) ends sworn quietly, not with a panic.
#[test]
fn closed_stdout_is_not_a_panic() {
    let s = Study::new();
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_sworn"))
        .args(["check", "plan.toml", "--data"])
        .current_dir(s.dir.path())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("spawn");
    drop(child.stdout.take());
    let out = child.wait_with_output().expect("wait");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(
        matches!(out.status.code(), Some(0) | Some(141)),
        "{:?}",
        out.status
    );
}

/// `sworn init` reads a Parquet file through the same defensive reader as `run`: every damaged
/// and truncated fixture is refused in one line naming the file, with no panic and no plan
/// written (before, init called the library directly, without the footer and metadata checks).
#[test]
fn init_refuses_damaged_parquet_like_run() {
    let good = std::fs::read(fixtures().join("weekly.parquet")).expect("fixture");
    let mut cases: Vec<Vec<u8>> = std::fs::read_dir(fixtures().join("damaged"))
        .expect("damaged fixtures")
        .map(|e| std::fs::read(e.expect("entry").path()).expect("read"))
        .collect();
    cases.extend([0, 5, good.len() / 2].map(|keep| good[..keep].to_vec()));
    for bytes in &cases {
        let study = parquet_study(bytes);
        let r = run_in(
            study.path(),
            &["init", "weekly.parquet", "--out", "starter.toml"],
        );
        no_panic(&r);
        assert_eq!(r.code, 2, "{}{}", r.stdout, r.stderr);
        assert!(r.stderr.contains("weekly.parquet"), "{}", r.stderr);
        assert!(r.stderr.lines().count() == 1, "{}", r.stderr);
        assert!(!study.path().join("starter.toml").exists());
    }
    let study = parquet_study(&good);
    let r = run_in(
        study.path(),
        &["init", "weekly.parquet", "--out", "starter.toml"],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
}
