//! `sworn rehearse`: outputs, determinism across thread counts, ledger semantics (a
//! rehearsal never counts as reading the data and changes nothing a later run or verify
//! accepts), and the errors of a bad `[rehearsal]` section.

use crate::common::{data_csv, Edit, Study, PLAN};
use std::process::Command;

/// The base plan's data simulated: 12 groups of 20, take-up by instrument arm, an effect of
/// d on y with a group-level shock.
const SECTION: &str = r#"
[rehearsal]
replications = 30
seed = 9
effects = [0.5, 1.5]

[rehearsal.data.main]
rows = 240

[rehearsal.data.main.columns]
id = "group(240)"
grp = "group(12)"
z = "bernoulli(0.5)"
d = "bernoulli(if(z, 0.7, 0.2))"
x = "uniform(0, 10)"
y = "1 + effect * d + 0.5 * x + group_normal(grp, 0.5) + normal(0, 1)"
yb = "bernoulli(0.3)"
"#;

fn study() -> Study {
    Study::with(&format!("{PLAN}{SECTION}"), &data_csv())
}

fn rehearse_with_threads(s: &Study, threads: &str, out: &str) -> String {
    let o = Command::new(env!("CARGO_BIN_EXE_sworn"))
        .args(["rehearse", "plan.toml", "--out", out])
        .env("RAYON_NUM_THREADS", threads)
        .current_dir(s.dir.path())
        .output()
        .expect("run sworn");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    s.read(&format!("{out}/rehearsal.json"))
}

#[test]
fn rehearse_writes_power_for_every_hypothesis_and_is_the_same_on_one_or_two_threads() {
    let s = study();
    let one = rehearse_with_threads(&s, "1", "r1");
    let two = rehearse_with_threads(&s, "2", "r2");
    assert_eq!(one, two, "rehearsal.json depends on the thread count");
    let j: serde_json::Value = serde_json::from_str(&one).expect("json");
    for h in ["H1", "H2"] {
        let curve = j["hypotheses"][h]["curve"].as_array().expect("curve");
        assert_eq!(curve.len(), 3, "effects 0, 0.5, 1.5");
        assert_eq!(curve[0]["effect"], 0.0);
    }
    // x's coefficient is 0.5 in every data set: power 1 at every effect size.
    assert_eq!(j["hypotheses"]["H2"]["size"]["share"], 1.0);
    assert!(
        j["first_stage"]["iv"]["quantiles"][0][2]
            .as_f64()
            .expect("median")
            > 10.0
    );
    assert_eq!(j["samples"]["ols"]["min"], 240);
    let md = s.read("r1/rehearsal.md");
    assert!(
        md.contains("| H1 |") && md.contains("Read with care"),
        "{md}"
    );
    // Only `rehearsed` entries: the data were never read.
    let ledger = s.read("plan.ledger");
    assert_eq!(
        ledger.matches("\"event\":\"rehearsed\"").count(),
        2,
        "{ledger}"
    );
    assert!(!ledger.contains("data-first-read"));
    let log = s.sworn(&["log", "plan.toml"]);
    assert!(log.stdout.contains("rehearsed"), "{}", log.stdout);
}

#[test]
fn a_rehearsal_changes_nothing_a_later_run_or_verify_accepts() {
    let strip = |mut v: serde_json::Value| {
        v["plan"]["ledger_head"] = serde_json::Value::Null;
        v["digest"] = serde_json::Value::Null;
        // The rehearsal's own ledger line moves later lines down by one; their times differ.
        for moment in ["data_inspected", "results_computed"] {
            v["registration"][moment] = serde_json::Value::Null;
        }
        // The citation of the rehearsal itself (checked in the tests below).
        v["rehearsals"] = serde_json::Value::Null;
        v
    };
    let plain = study();
    let a = strip(plain.seal_and_run());
    let rehearsed = study();
    assert_eq!(rehearsed.sworn(&["seal", "plan.toml"]).code, 0);
    let r = rehearsed.sworn(&["rehearse", "plan.toml", "--replications", "5"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let b = strip(rehearsed.run_ok());
    assert_eq!(a, b, "the run differs after a rehearsal");
    for s in [&plain, &rehearsed] {
        let v = s.sworn(&["verify", "out"]);
        assert_eq!(v.code, 0, "{}{}", v.stdout, v.stderr);
    }
}

/// The assumptions fingerprint recorded in the ledger's `rehearsed` line `line` (1-based).
fn assumptions_at(s: &Study, line: usize) -> String {
    let ledger = s.read("plan.ledger");
    let entry: serde_json::Value =
        serde_json::from_str(ledger.lines().nth(line - 1).expect("line")).expect("entry");
    assert_eq!(entry["event"], "rehearsed", "{entry}");
    entry["assumptions"]
        .as_str()
        .expect("assumptions")
        .to_string()
}

#[test]
fn a_run_cites_the_rehearsal_made_before_registration_as_power_stated_in_advance() {
    let s = study();
    let r = s.sworn(&["rehearse", "plan.toml", "--replications", "20"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let rehearsal: serde_json::Value =
        serde_json::from_str(&s.read("plan-rehearsal/rehearsal.json")).expect("json");
    let v = s.seal_and_run();
    let c = &v["rehearsals"][0];
    assert_eq!(v["rehearsals"].as_array().map(Vec::len), Some(1), "{v}");
    assert_eq!(c["timing"], "before-registration");
    assert_eq!(c["ledger_line"], 1);
    assert_eq!(c["rehearsed_registered_version"], true);
    let sha = assumptions_at(&s, 1);
    assert_eq!(c["assumptions_sha256"], sha.as_str());
    // The power cited is the rehearsal's own, read from the ledger.
    let h1 = rehearsal["hypotheses"]["H1"]["curve"][1]["power"]["share"].clone();
    assert_eq!(c["power"]["hypotheses"]["H1"]["power"][1], h1);
    assert_eq!(c["power"]["replications"], 20);
    for report in ["out/report.md", "out/report.html", "out/report.tex"] {
        // LaTeX may break a fingerprint after any 16 characters.
        let text = s.read(report).replace("\\allowbreak{}", "");
        assert!(
            text.contains("Power as rehearsed before the data"),
            "{report}"
        );
        assert!(text.contains(&sha), "{report}: no assumptions fingerprint");
        assert!(text.contains("power rests on them"), "{report}: no caution");
    }
    // report.html draws the cited rehearsal's power curve (an inline SVG, with its legend
    // naming the hypotheses); the after-registration case below draws none.
    let html = s.read("out/report.html");
    let at = html
        .find("<h4>Power as rehearsed, by effect size</h4>")
        .expect("power-curve figure in report.html");
    let figure = &html[at..];
    assert!(
        figure.starts_with("<h4>Power as rehearsed, by effect size</h4>\n<svg"),
        "{figure}"
    );
    let svg = &figure[..figure.find("</svg>").expect("closed svg")];
    assert!(svg.contains("H1"), "legend lacks H1: {svg}");
    let md = s.read("out/report.md");
    let power = h1.as_f64().expect("share");
    assert!(
        md.contains(&format!("H1: power {power:.2} / ")),
        "H1's power {power} not cited: {md}"
    );
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 0, "{}{}", v.stdout, v.stderr);
}

#[test]
fn a_rehearsal_after_registration_or_after_the_data_is_cited_as_such() {
    let s = study();
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["rehearse", "plan.toml", "--replications", "5"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v = s.run_ok();
    assert_eq!(v["rehearsals"][0]["timing"], "after-registration", "{v}");
    let md = s.read("out/report.md");
    assert!(md.contains("## Power as rehearsed\n"), "{md}");
    assert!(!md.contains("Power as rehearsed before the data"), "{md}");
    assert!(!s
        .read("out/report.html")
        .contains("Power as rehearsed, by effect size"));
    assert!(
        md.contains("No rehearsal precedes the registered version"),
        "{md}"
    );
    assert!(
        md.contains("not as evidence of power stated before registration"),
        "{md}"
    );
    // A rehearsal after results were computed, cited by a later run.
    let r = s.sworn(&["rehearse", "plan.toml", "--replications", "5", "--replace"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v = s.run_ok();
    assert_eq!(
        v["rehearsals"][1]["timing"], "after-results-computed",
        "{v}"
    );
    assert!(s
        .read("out/report.md")
        .contains("after results were computed: not evidence"));
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 0, "{}{}", v.stdout, v.stderr);
}

/// The rehearsal study with its instrument declared as the randomized assignment.
fn assigned_study() -> Study {
    let s = study();
    s.edit(
        "plan.toml",
        "[[specification]]",
        "[assignment]\nvariable = \"z\"\ndesign = \"complete\"\n\n[[specification]]",
    );
    s
}

#[test]
fn a_blinded_run_masks_estimates_writes_nothing_and_counts_as_inspecting_the_data() {
    let s = assigned_study();
    // Unsealed: refused before any data are read, nothing written.
    let r = s.sworn(&["rehearse", "plan.toml", "--blind"]);
    assert_eq!(r.code, 2, "{}", r.stdout);
    assert!(r.stderr.contains("sworn seal PLAN"), "{}", r.stderr);
    assert!(!s.path("plan.ledger").exists());
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["rehearse", "plan.toml", "--blind"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("`z` re-drawn") && r.stdout.contains("estimates masked"));
    assert!(
        r.stdout.contains("specification iv: ran on"),
        "{}",
        r.stdout
    );
    assert!(
        r.stdout.contains("hypothesis H1: tested (result masked)"),
        "{}",
        r.stdout
    );
    // No number with a decimal point: no estimate, statistic or p-value is printed.
    let decimal = r
        .stdout
        .as_bytes()
        .windows(3)
        .any(|w| w[0].is_ascii_digit() && w[1] == b'.' && w[2].is_ascii_digit());
    assert!(!decimal, "{}", r.stdout);
    assert!(
        !s.path("plan-rehearsal").exists(),
        "a blinded run writes no folder"
    );
    let again = s.sworn(&["rehearse", "plan.toml", "--blind"]);
    let strip = |t: &str| {
        t.lines()
            .filter(|l| !l.contains("ledger"))
            .collect::<Vec<_>>()
            .join("\n")
    };
    assert_eq!(
        strip(&again.stdout),
        strip(&r.stdout),
        "the re-draw depends on the seed only"
    );
    let ledger = s.read("plan.ledger");
    assert_eq!(
        ledger.matches("\"event\":\"data-inspected\"").count(),
        1,
        "{ledger}"
    );
    assert!(!ledger.contains("data-first-read"), "{ledger}");
    // The later real run: the data were inspected at line 2, results computed at line 3, and
    // nothing is flagged.
    let v = s.run_ok();
    assert_eq!(v["registration"]["data_inspected"]["ledger_line"], 2, "{v}");
    assert_eq!(
        v["registration"]["data_inspected"]["event"],
        "data-inspected"
    );
    assert_eq!(v["registration"]["results_computed"]["ledger_line"], 3);
    assert_eq!(v["plan"]["integrity"], "sealed-unchanged");
    let codes = crate::common::codes(&v);
    assert!(
        !codes
            .iter()
            .any(|c| c.contains("data") || c.contains("amended")),
        "{codes:?}"
    );
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 0, "{}{}", v.stdout, v.stderr);
}

#[test]
fn an_amendment_after_a_blinded_run_is_disclosed_as_made_after_the_data_were_inspected() {
    let s = assigned_study();
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    assert_eq!(s.sworn(&["rehearse", "plan.toml", "--blind"]).code, 0);
    s.edit("plan.toml", "seed = 9", "seed = 10");
    let r = s.sworn(&["rehearse", "plan.toml", "--blind"]);
    assert_eq!(r.code, 2, "a changed plan is refused: {}", r.stdout);
    assert!(r.stderr.contains("sworn amend"), "{}", r.stderr);
    let a = s.sworn(&["amend", "plan.toml", "--reason", "another seed"]);
    assert_eq!(a.code, 0, "{}", a.stderr);
    let v = s.run_ok();
    let after: Vec<&str> = v["registration"]["elements"]
        .as_array()
        .expect("elements")
        .iter()
        .filter_map(|e| e["after"].as_str())
        .collect();
    assert_eq!(after, ["data-inspected"], "{v}");
}

#[test]
fn a_blinded_run_needs_an_assignment_to_redraw() {
    let s = study();
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let r = s.sworn(&["rehearse", "plan.toml", "--blind"]);
    assert_eq!(r.code, 2, "{}", r.stdout);
    assert!(r.stderr.contains("no [assignment] section"), "{}", r.stderr);
    assert!(!s.read("plan.ledger").contains("data-inspected"));
    let r = s.sworn(&["rehearse", "plan.toml", "--blind", "--replications", "3"]);
    assert_eq!(r.code, 2, "--blind and --replications conflict");
}

#[test]
fn the_rehearsal_report_compiles_in_latex_and_its_page_draws_the_power_curve() {
    let s = study();
    let r = s.sworn(&["rehearse", "plan.toml", "--replications", "10"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let html = s.read("plan-rehearsal/rehearsal.html");
    assert!(
        html.contains("<svg") && html.contains("</svg>"),
        "no figure"
    );
    assert!(
        html.contains("target power 0.8"),
        "no target line in the legend"
    );
    for h in ["H1", "H2"] {
        assert!(html.contains(&format!(">{h}<")), "{h} not in the legend");
    }
    let tex = s.read("plan-rehearsal/rehearsal.tex");
    assert!(tex.contains("\\begin{picture}") && tex.contains("Read with care"));
    let ledger = s.read("plan.ledger");
    assert!(ledger.contains("\"rehearsal.tex\"") && ledger.contains("\"rehearsal.html\""));
    if crate::happy::pdflatex_missing() {
        return;
    }
    let out = Command::new("pdflatex")
        .args([
            "-interaction=nonstopmode",
            "-halt-on-error",
            "rehearsal.tex",
        ])
        .current_dir(s.path("plan-rehearsal"))
        .output()
        .expect("pdflatex runs");
    assert!(
        out.status.success(),
        "pdflatex failed:\n{}",
        String::from_utf8_lossy(&out.stdout)
    );
    let log = s.read("plan-rehearsal/rehearsal.log");
    assert_eq!(crate::happy::overfull_over_1pt(&log), Vec::<String>::new());
}

#[test]
fn rehearse_refuses_a_non_empty_output_folder_and_a_plan_without_the_section() {
    let s = study();
    std::fs::create_dir(s.path("busy")).expect("mkdir");
    s.write("busy/keep.txt", "mine");
    let r = s.sworn(&["rehearse", "plan.toml", "--out", "busy"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("--replace"), "{}", r.stderr);
    assert_eq!(s.read("busy/keep.txt"), "mine");
    let plain = Study::new();
    let r = plain.sworn(&["rehearse", "plan.toml"]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("no [rehearsal] section"), "{}", r.stderr);
    assert!(!plain.path("plan-rehearsal").exists());
}

fn refused(from: &str, to: &str, wanted: &[&str]) {
    let s = study();
    s.edit("plan.toml", from, to);
    let r = s.sworn(&["rehearse", "plan.toml"]);
    assert_eq!(r.code, 2, "{to}: {}", r.stdout);
    for w in wanted {
        assert!(r.stderr.contains(w), "`{w}` not in: {}", r.stderr);
    }
    assert!(!s.path("plan-rehearsal").exists());
    assert!(!s.path("plan.ledger").exists());
}

#[test]
fn bad_rehearsal_sections_are_refused_with_the_key_and_the_fix() {
    refused(
        "grp = \"group(12)\"\n",
        "grpp = \"group(12)\"\n",
        &["rehearsal.data.main.columns.grpp", "did you mean `grp`"],
    );
    refused(
        "id = \"group(240)\"\n",
        "",
        &["rehearsal.data.main.columns", "`id`", "add `id = \"...\"`"],
    );
    refused(
        "effects = [0.5, 1.5]",
        "effects = [1.5, 0.5]",
        &["rehearsal.effects", "increase"],
    );
    refused(
        "x = \"uniform(0, 10)\"",
        "x = \"uniform(0, 10) + w\"",
        &["rehearsal.data.main.columns.x", "`w` is not simulated"],
    );
    refused(
        "z = \"bernoulli(0.5)\"",
        "z = \"assigned(0.5)\"",
        &["needs an [assignment] section"],
    );
    refused(
        "x = \"uniform(0, 10)\"",
        "x = \"uniform(0, 10) + y\"",
        &["depend on each other in a circle"],
    );
    refused("seed = 9", "seed = -1", &["rehearsal.seed"]);
    refused(
        "seed = 9",
        "seed = 9\nmde_steps = 21",
        &["rehearsal.mde_steps", "from 0"],
    );
    refused("rows = 240", "rows = 1", &["rehearsal.data.main.rows"]);
    // Simulating fails on a probability outside [0, 1]: the error names the expression.
    refused(
        "yb = \"bernoulli(0.3)\"",
        "yb = \"bernoulli(0.3 + effect)\"",
        &[
            "rehearsal.data.main.columns.yb",
            "bernoulli(p) in row 1",
            "p = 1.8",
        ],
    );
}

#[test]
fn random_draws_are_refused_outside_a_rehearsal() {
    let s = Study::new();
    s.edit(
        "plan.toml",
        "[[specification]]",
        "[derive]\nnoise = \"normal(0, 1)\"\n\n[[specification]]",
    );
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("derive.noise") && r.stderr.contains("only a [rehearsal]"),
        "{}",
        r.stderr
    );
}

#[test]
fn rehearse_json_prints_one_object() {
    let s = study();
    let r = s.sworn(&["rehearse", "plan.toml", "--replications", "3", "--json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: serde_json::Value = serde_json::from_str(r.stdout.trim()).expect("one JSON object");
    assert_eq!(v["command"], "rehearse");
    assert_eq!(v["rehearsal"]["replications"], 3);
}

#[test]
fn the_demo_plan_rehearses_every_hypothesis_and_rule() {
    let dir = tempfile::tempdir().expect("temp dir");
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    std::fs::create_dir(dir.path().join("plans")).expect("mkdir");
    std::fs::copy(
        root.join("plans/cool-roofs.toml"),
        dir.path().join("plans/cool-roofs.toml"),
    )
    .expect("copy the demo plan");
    let r = crate::common::run_in(
        dir.path(),
        &["rehearse", "plans/cool-roofs.toml", "--replications", "2"],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    for h in ["H1", "H2", "H3", "H4", "H5", "H6"] {
        assert!(r.stdout.contains(&format!("  {h} (")), "{h}: {}", r.stdout);
    }
    for rule in ["few-blocks", "weak-call", "exogenous-painting"] {
        assert!(
            r.stdout.contains(&format!("rule {rule} fires in")),
            "{rule}: {}",
            r.stdout
        );
    }
    let md = std::fs::read_to_string(dir.path().join("plans/cool-roofs-rehearsal/rehearsal.md"))
        .expect("rehearsal.md beside the plan");
    assert!(
        md.contains("used 199 draws") && md.contains("uses 9999"),
        "{md}"
    );
}

/// The base plan rehearsed on the rows of a baseline file holding id, grp and x.
const ON_BASELINE: &str = r#"
[rehearsal]
replications = 10
seed = 9
effects = [1.0]

[rehearsal.data.main]
baseline = "baseline.csv"

[rehearsal.data.main.columns]
z = "bernoulli(0.5)"
d = "bernoulli(if(z, 0.7, 0.2))"
y = "1 + effect * d + 0.5 * x + group_normal(grp, 0.5) + normal(0, 1)"
yb = "bernoulli(0.3)"
"#;

/// 240 invented baseline rows in 12 groups.
fn baseline_rows() -> String {
    let mut s = String::from("id,grp,x\n");
    for i in 0..240u32 {
        s.push_str(&format!(
            "b{i},g{},{}\n",
            i % 12,
            f64::from((i * 7) % 41) / 4.1
        ));
    }
    s
}

#[test]
fn a_baseline_rehearsal_records_the_file_hash_and_never_reads_the_data() {
    let s = Study::with(&format!("{PLAN}{ON_BASELINE}"), &data_csv());
    let csv = baseline_rows();
    s.write("baseline.csv", &csv);
    let r = s.sworn(&["rehearse", "plan.toml", "--out", "reh"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.contains("baseline.csv"), "{}", r.stdout);
    let sha = {
        use sha2::Digest;
        sha2::Sha256::digest(csv.as_bytes())
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect::<String>()
    };
    let j: serde_json::Value = serde_json::from_str(&s.read("reh/rehearsal.json")).expect("json");
    assert_eq!(j["baselines"]["main"]["sha256"], sha.as_str());
    assert_eq!(j["baselines"]["main"]["path"], "baseline.csv");
    assert_eq!(j["samples"]["ols"]["min"], 240);
    let ledger = s.read("plan.ledger");
    let entry: serde_json::Value =
        serde_json::from_str(ledger.lines().last().expect("line")).expect("entry");
    assert_eq!(entry["event"], "rehearsed");
    assert_eq!(entry["baselines"]["main"]["sha256"], sha.as_str());
    assert!(entry.get("data").is_none(), "{entry}");
    assert!(!ledger.contains("data-first-read") && !ledger.contains("data-inspected"));
    assert!(s.read("reh/rehearsal.md").contains(&sha));
    assert!(s.read("reh/rehearsal.html").contains(&sha));
    assert!(s.read("reh/rehearsal.tex").contains("baseline.csv"));
    let log = s.sworn(&["log", "plan.toml"]);
    assert!(
        log.stdout.contains("baseline of main") && log.stdout.contains("not study data"),
        "{}",
        log.stdout
    );
}

#[test]
fn a_bad_baseline_stops_before_any_output_or_ledger_line() {
    let s = Study::with(&format!("{PLAN}{ON_BASELINE}"), &data_csv());
    let r = s.sworn(&["rehearse", "plan.toml", "--out", "reh"]);
    assert_ne!(r.code, 0);
    assert!(
        r.stderr.contains("rehearsal.data.main.baseline") && r.stderr.contains("does not exist"),
        "{}",
        r.stderr
    );
    assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
    assert!(!s.path("reh").exists(), "no half-written output");
    assert!(!s.read("plan.ledger").contains("rehearsed"));
    s.write(
        "baseline.csv",
        &baseline_rows().edit("id,grp,x", "id,grp,y"),
    );
    let r = s.sworn(&["rehearse", "plan.toml", "--out", "reh"]);
    assert_ne!(r.code, 0);
    assert!(
        r.stderr.contains("is both a column of the baseline file"),
        "{}",
        r.stderr
    );
    assert!(!s.path("reh").exists());
}

#[test]
fn a_copy_of_the_study_data_is_refused_as_a_baseline_once_the_ledger_has_its_hash() {
    let s = Study::with(&format!("{PLAN}{ON_BASELINE}"), &data_csv());
    s.seal_and_run();
    s.write("baseline.csv", &data_csv());
    let r = s.sworn(&["rehearse", "plan.toml", "--out", "reh"]);
    assert_ne!(r.code, 0, "{}", r.stdout);
    assert!(
        r.stderr.contains("same bytes") && r.stderr.contains("[data.main]"),
        "{}",
        r.stderr
    );
    assert!(!s.path("reh").exists());
}
