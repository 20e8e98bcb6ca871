//! Rehearsals on the rows of a baseline file: the rows stay fixed, the assignment is re-drawn,
//! power matches the two-arm closed form, the file's bytes join the assumptions' fingerprint,
//! and a bad baseline is a clear error at its key.

use super::{mcse, normal_power, run};
use crate::plan::{from_text, Plan};
use crate::rehearse::{rehearse, simulated_tables};

/// A two-arm design on the rows of a baseline file: the arm is re-drawn and the outcome
/// simulated on 200 fixed units whose covariate `x` comes from the file.
const ON_BASELINE: &str = r#"format = 1
[study]
title = "Baseline check"
[data.people]
path = "endline.csv"
[data.people.columns]
pid = { kind = "id" }
arm = { kind = "binary" }
x = { kind = "number" }
y = { kind = "number" }
[assignment]
variable = "arm"
design = "complete"
[[specification]]
id = "itt"
estimator = "ols"
outcome = "y"
regressors = ["arm"]
controls = ["x"]
errors = "hc1"
[[hypothesis]]
id = "H1"
claim = "The arm raises y"
specification = "itt"
term = "arm"
[rehearsal]
replications = 300
seed = 12
effects = [0.2, 0.3, 0.4]
[rehearsal.data.people]
baseline = "baseline.csv"
[rehearsal.data.people.columns]
y = "effect * arm + 0.5 * x + normal(0, 1)"
arm = "assigned(0.5)"
"#;

/// 200 invented baseline rows: an id, a covariate and a text column the plan never uses.
fn baseline_csv() -> String {
    let mut s = String::from("pid,x,ward\n");
    for i in 0..200u32 {
        let x = f64::from((i * 37) % 23) / 10.0 - 1.1;
        s.push_str(&format!("{},{x},w{}\n", i + 1, i % 7));
    }
    s
}

/// The plan `text` written beside `files` in a fresh folder.
fn plan_in(dir: &std::path::Path, text: &str, files: &[(&str, &str)]) -> Plan {
    for (name, body) in files {
        std::fs::write(dir.join(name), body).expect("write");
    }
    let path = dir.join("plan.toml");
    std::fs::write(&path, text).expect("write plan");
    crate::plan::load(&path).unwrap_or_else(|e| panic!("plan: {e}"))
}

#[test]
fn a_baseline_rehearsal_keeps_the_rows_records_the_hash_and_has_two_arm_power() {
    let dir = tempfile::tempdir().expect("tempdir");
    let csv = baseline_csv();
    let p = plan_in(dir.path(), ON_BASELINE, &[("baseline.csv", &csv)]);
    let t0 = simulated_tables(&p, 0, 0.3).expect("tables");
    let t1 = simulated_tables(&p, 1, 0.3).expect("tables");
    let (a, b) = (&t0["people"], &t1["people"]);
    assert_eq!((a.rows, b.rows), (200, 200));
    assert_eq!(a.numeric["x"], b.numeric["x"], "baseline rows stay fixed");
    assert_eq!(
        a.numeric["x"].get(5),
        Some(f64::from((5 * 37) % 23) / 10.0 - 1.1)
    );
    assert_ne!(a.numeric["arm"], b.numeric["arm"], "the arm is re-drawn");
    let treated: f64 = a.numeric["arm"].iter().flatten().sum();
    assert_eq!(treated, 100.0, "complete randomization of half the rows");

    let reps = 300;
    let r = run(&p, reps);
    let rec = &r.baselines["people"];
    assert_eq!(rec.path, "baseline.csv");
    assert_eq!(rec.sha256, crate::ledger::sha256_hex(csv.as_bytes()));
    assert_eq!(rec.rows, 200);
    // Same closed form as the two-arm check: 100 per arm, unit residual variance, and the
    // control x (fixed, independent of the re-drawn arm) leaves se ≈ √(1/100 + 1/100).
    let h = &r.hypotheses["H1"];
    let se = (2.0f64 / 100.0).sqrt();
    for c in &h.curve {
        let want = normal_power(c.effect, se, 0.05);
        let tol = 3.0 * mcse(want, reps);
        assert!(
            (c.power.share - want).abs() <= tol,
            "effect {}: power {} vs normal approximation {want} (± {tol})",
            c.effect,
            c.power.share
        );
    }
    // The baseline's bytes are part of the assumptions' fingerprint.
    let other = baseline_csv().replace("\n1,-1.1,w0\n", "\n1,-1,w0\n");
    assert_ne!(other, csv);
    let dir2 = tempfile::tempdir().expect("tempdir");
    let q = plan_in(dir2.path(), ON_BASELINE, &[("baseline.csv", &other)]);
    let r2 = run(&q, 2);
    let r3 = run(&p, 2);
    assert_ne!(r2.assumptions_sha256, r3.assumptions_sha256);
}

/// The plan error of rehearsing `text` beside `files`, at `key`.
fn baseline_error(text: &str, files: &[(&str, &str)], key: &str) -> String {
    let dir = tempfile::tempdir().expect("tempdir");
    let p = plan_in(dir.path(), text, files);
    match rehearse(&p, Some(2), &|_, _| {}) {
        Err(crate::error::Error::Plan {
            key: k, message, ..
        }) => {
            assert_eq!(k, key, "{message}");
            message
        }
        other => panic!("expected a plan error at {key}, got {other:?}"),
    }
}

#[test]
fn a_bad_baseline_is_a_clear_error() {
    let csv = baseline_csv();
    let m = baseline_error(ON_BASELINE, &[], "rehearsal.data.people.baseline");
    assert!(
        m.contains("does not exist") && m.contains("rows = N"),
        "{m}"
    );

    let clash = csv.replace("pid,x,ward", "pid,x,y");
    let m = baseline_error(
        ON_BASELINE,
        &[("baseline.csv", &clash)],
        "rehearsal.data.people.columns.y",
    );
    assert!(
        m.contains("rehearsal.data.people.baseline")
            && m.contains("rehearsal.data.people.columns.y"),
        "{m}"
    );

    let study = ON_BASELINE.replace("baseline = \"baseline.csv\"", "baseline = \"endline.csv\"");
    let m = baseline_error(
        &study,
        &[("endline.csv", &csv)],
        "rehearsal.data.people.baseline",
    );
    assert!(m.contains("study's data"), "{m}");

    let missing_x = csv.replace("pid,x,ward", "pid,q,ward");
    let m = baseline_error(
        ON_BASELINE,
        &[("baseline.csv", &missing_x)],
        "rehearsal.data.people.columns.y",
    );
    assert!(m.contains("`x` is neither simulated"), "{m}");

    let text_x = csv.replace("\n3,", "\n3,abc");
    let dir = tempfile::tempdir().expect("tempdir");
    let p = plan_in(dir.path(), ON_BASELINE, &[("baseline.csv", &text_x)]);
    let e = rehearse(&p, Some(2), &|_, _| {}).expect_err("text in a number column");
    assert!(e.to_string().contains("line 4"), "{e}");

    let with_rows = ON_BASELINE.replace(
        "baseline = \"baseline.csv\"",
        "baseline = \"baseline.csv\"\nrows = 200",
    );
    let e = from_text(std::path::Path::new("/nonexistent/check.toml"), with_rows)
        .expect_err("rows with baseline");
    let m = e.to_string();
    assert!(
        m.contains("rehearsal.data.people.rows") && m.contains("remove rows"),
        "{m}"
    );
    let neither = ON_BASELINE.replace("baseline = \"baseline.csv\"", "");
    let m = from_text(std::path::Path::new("/nonexistent/check.toml"), neither)
        .expect_err("no rows")
        .to_string();
    assert!(m.contains("baseline = "), "{m}");
}
