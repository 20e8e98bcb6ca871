//! Integrity of the ledger and run directories (issue 9): concurrent appends, atomic and
//! self-contained run directories, verify on directories somebody else prepared.

use crate::common::Edit;
use crate::common::{run_in, Ran, Study};
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

fn ledger_entries(s: &Study) -> Vec<serde_json::Value> {
    s.read("plan.ledger")
        .lines()
        .map(|l| serde_json::from_str(l).expect("every ledger line parses"))
        .collect()
}

/// Issue 9: three simultaneous runs of one plan lost ledger entries, and an amendment during
/// a run vanished. Every entry must now be present, numbered in order and chained.
#[test]
fn concurrent_runs_and_amendments_keep_every_entry() {
    let s = Study::new();
    assert_eq!(s.sworn(&["seal", "plan.toml"]).code, 0);
    let trials = 4;
    for trial in 0..trials {
        s.edit("plan.toml", "title = \"Test study", "title = \"Test study+");
        let mut children = Vec::new();
        for k in 0..3 {
            let out = format!("out-{trial}-{k}");
            children.push(("run", spawn(&s, &["run", "plan.toml", "--out", &out])));
        }
        let reason = format!("title edit {trial}");
        children.push((
            "amend",
            spawn(&s, &["amend", "plan.toml", "--reason", &reason]),
        ));
        for (what, child) in children {
            let out = child.wait_with_output().expect("wait");
            assert!(
                out.status.success(),
                "{what} failed: {}",
                String::from_utf8_lossy(&out.stderr)
            );
        }
    }
    let entries = ledger_entries(&s);
    // seal + data-first-read + per trial three runs and one amendment.
    assert_eq!(entries.len(), 2 + 4 * trials);
    let count = |e: &str| entries.iter().filter(|x| x["event"] == e).count();
    assert_eq!(count("run"), 3 * trials);
    assert_eq!(count("amended"), trials);
    assert_eq!(count("data-first-read"), 1);
    let mut prev = "0".repeat(64);
    for (i, (line, e)) in s.read("plan.ledger").lines().zip(&entries).enumerate() {
        assert_eq!(e["seq"], i as u64 + 1);
        assert_eq!(e["prev"], prev.as_str(), "line {} breaks the chain", i + 1);
        prev = sworn::ledger::sha256_hex(line.as_bytes());
    }
}

fn spawn(s: &Study, args: &[&str]) -> std::process::Child {
    Command::new(env!("CARGO_BIN_EXE_sworn"))
        .args(args)
        .current_dir(s.dir.path())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn sworn")
}

/// Run sworn in `dir`, failing the test if it takes longer than `secs` (a hang).
fn sworn_within(dir: &Path, args: &[&str], secs: u64) -> Ran {
    let mut child = Command::new(env!("CARGO_BIN_EXE_sworn"))
        .args(args)
        .current_dir(dir)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn sworn");
    let start = Instant::now();
    while child.try_wait().expect("wait").is_none() {
        if start.elapsed() > Duration::from_secs(secs) {
            let _ = child.kill();
            panic!("sworn {args:?} did not answer within {secs} s");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    let out = child.wait_with_output().expect("output");
    Ran {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

#[test]
fn existing_run_directory_is_refused_unless_replaced() {
    let s = Study::new();
    s.seal_and_run();
    let before = s.read("plan.ledger").lines().count();
    let r = s.sworn(&["run", "plan.toml", "--out", "out"]);
    assert_eq!(r.code, 2, "{}", r.stdout);
    assert!(r.stderr.contains("--replace"), "{}", r.stderr);
    assert_eq!(
        s.read("plan.ledger").lines().count(),
        before,
        "no entry added"
    );
    std::fs::create_dir(s.path("empty")).expect("mkdir");
    let r = s.sworn(&["run", "plan.toml", "--out", "empty"]);
    assert_eq!(r.code, 0, "an empty folder is fine: {}", r.stderr);
    let r = s.sworn(&["run", "plan.toml", "--out", "out", "--replace"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_eq!(s.sworn(&["verify", "out"]).code, 0);
}

#[test]
fn stale_temporaries_are_removed() {
    let s = Study::new();
    // A process id above Linux's largest pid_max (2^22) is never running.
    let stale = s.path(".out.sworn-tmp-4294967");
    std::fs::create_dir(&stale).expect("mkdir");
    std::fs::write(stale.join("results.json"), "{}").expect("write");
    s.seal_and_run();
    assert!(!stale.exists(), "stale temporary left behind");
    let names: Vec<String> = std::fs::read_dir(s.dir.path())
        .expect("list")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    assert!(!names.iter().any(|n| n.contains("sworn-tmp")), "{names:?}");
}

/// Issue 9: after a later amendment, verify of an earlier run failed; a run directory moved
/// elsewhere could not be verified.
#[test]
fn run_directory_verifies_after_amendment_and_when_shipped_alone() {
    let s = Study::new();
    s.seal_and_run();
    s.edit(
        "plan.toml",
        "title = \"Test study",
        "title = \"Test study, revised",
    );
    assert_eq!(
        s.sworn(&["amend", "plan.toml", "--reason", "title"]).code,
        0
    );
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 0, "{}", v.stdout);
    let elsewhere = tempfile::tempdir().expect("temp dir");
    let copy = elsewhere.path().join("package");
    std::fs::create_dir(&copy).expect("mkdir");
    for e in std::fs::read_dir(s.path("out")).expect("list") {
        let e = e.expect("entry");
        std::fs::copy(e.path(), copy.join(e.file_name())).expect("copy");
    }
    let v = run_in(elsewhere.path(), &["verify", "package"]);
    assert_eq!(v.code, 1, "{}", v.stdout);
    assert!(v.stdout.contains("--data"), "{}", v.stdout);
    let data = s.path("data.csv");
    let data = data.to_str().expect("utf-8 path");
    let v = run_in(elsewhere.path(), &["verify", "package", "--data", data]);
    assert_eq!(v.code, 0, "{}", v.stdout);
    assert!(
        v.stdout.contains("registered plan: sha256:"),
        "{}",
        v.stdout
    );
    assert!(v.stdout.contains("not established"), "{}", v.stdout);
}

/// Issue 10: verify on directories a dishonest sender prepared answers at once.
#[cfg(unix)]
#[test]
fn verify_refuses_fifos_devices_links_and_padding() {
    let mkfifo = |p: &Path| {
        let ok = Command::new("mkfifo").arg(p).status().expect("mkfifo");
        assert!(ok.success());
    };
    // A FIFO in place of results.json.
    let s = Study::new();
    s.seal_and_run();
    std::fs::remove_file(s.path("out/results.json")).expect("rm");
    mkfifo(&s.path("out/results.json"));
    let v = sworn_within(s.dir.path(), &["verify", "out"], 10);
    assert_eq!(v.code, 2);
    assert!(v.stderr.contains("FIFO"), "{}", v.stderr);
    // report.md and the ledger linked to /dev/zero.
    for target in ["out/report.md", "out/plan.ledger", "out/plan.toml"] {
        let s = Study::new();
        s.seal_and_run();
        std::fs::remove_file(s.path(target)).expect("rm");
        std::os::unix::fs::symlink("/dev/zero", s.path(target)).expect("link");
        let v = sworn_within(s.dir.path(), &["verify", "out"], 10);
        assert_eq!(v.code, 1, "{target}: {}", v.stdout);
        assert!(v.stdout.contains("symbolic link"), "{target}: {}", v.stdout);
    }
    // A ledger padded with 16 MB of blank lines.
    let s = Study::new();
    s.seal_and_run();
    let mut f = std::fs::OpenOptions::new()
        .append(true)
        .open(s.path("out/plan.ledger"))
        .expect("open");
    std::io::Write::write_all(&mut f, &vec![b'\n'; 16 << 20]).expect("pad");
    drop(f);
    let v = sworn_within(s.dir.path(), &["verify", "out"], 10);
    assert_eq!(v.code, 1, "{}", v.stdout);
    assert!(
        v.stdout.contains("not a valid ledger entry"),
        "{}",
        v.stdout
    );
    // A data file that is a FIFO, named on the command line.
    let s = Study::new();
    s.seal_and_run();
    mkfifo(&s.path("pipe.csv"));
    let v = sworn_within(s.dir.path(), &["verify", "out", "--data", "pipe.csv"], 10);
    assert!(v.stdout.contains("FIFO"), "{}", v.stdout);
}

/// Issue 10: `plan.path` in results.json pointing outside the directory is never opened,
/// even with a recomputed digest.
#[test]
fn plan_path_outside_the_directory_is_refused() {
    let s = Study::new();
    s.seal_and_run();
    let text = s.read("out/results.json");
    let forged = text.edit("\"path\": \"plan.toml\"", "\"path\": \"/etc/passwd\"");
    assert_ne!(forged, text);
    let (old, new) = sworn::results::digest_of_text(&forged).expect("digest");
    s.write("out/results.json", &forged.edit(&old, &new));
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 1, "{}", v.stdout);
    assert!(v.stdout.contains("own plan copy"), "{}", v.stdout);
    assert!(!v.stdout.contains("root:"), "{}", v.stdout);
}

/// Issue 9: verify said "verified" (exit 0) for runs carrying data-changed or unsealed
/// findings; `--registered` ties the run to the deposited fingerprint.
#[test]
fn verify_fails_on_integrity_findings_and_checks_the_deposit() {
    let s = Study::new();
    let seal = s.sworn(&["seal", "plan.toml"]);
    let print = seal
        .stdout
        .split_whitespace()
        .find(|w| w.starts_with("sha256:"))
        .expect("seal prints the fingerprint")
        .to_string();
    s.run_ok();
    let v = s.sworn(&["verify", "out", "--registered", &print]);
    assert_eq!(v.code, 0, "{}", v.stdout);
    assert!(v.stdout.contains(&print), "{}", v.stdout);
    let other = format!("sha256:{}", "ab".repeat(32));
    let v = s.sworn(&["verify", "out", "--registered", &other]);
    assert_eq!(v.code, 1, "{}", v.stdout);
    assert!(v.stdout.contains("not the deposited"), "{}", v.stdout);
    s.edit("data.csv", "r000,g00,", "r000,g01,");
    s.run_ok();
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 1, "{}", v.stdout);
    assert!(v.stdout.contains("data-changed"), "{}", v.stdout);
    assert!(v.stdout.contains("re-derive, but"), "{}", v.stdout);
    let u = Study::new();
    u.run_ok();
    let v = u.sworn(&["verify", "out"]);
    assert_eq!(v.code, 1, "{}", v.stdout);
    assert!(v.stdout.contains("unsealed"), "{}", v.stdout);
}

/// Issue 9: after a data value changed, the banner still said "Sealed and unchanged".
#[test]
fn banner_and_summary_name_every_integrity_finding() {
    let s = Study::new();
    s.seal_and_run();
    s.edit("data.csv", "r000,g00,", "r000,g01,");
    let r = s.sworn(&["run", "plan.toml", "--out", "out", "--replace"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let banner = "NOT AS REGISTERED: data changed since first read ([data.main])";
    assert!(r.stdout.contains(banner), "{}", r.stdout);
    let md = s.read("out/report.md");
    assert!(md.contains(banner), "{md}");
    assert!(!md.contains("Sealed and unchanged"), "{md}");
}

/// Issue 9: a hypothesis added to family `main` after the first run was reported as
/// pre-registered and joined the registered Holm family, moving H1's adjusted p-value.
#[test]
fn hypothesis_added_after_data_stays_out_of_the_registered_family() {
    let s = Study::new();
    let before = s.seal_and_run();
    let h1 = before["hypotheses"]["H1"]["adjusted_p_value"].clone();
    let text = s.read("plan.toml").edit(
        "[family.main]",
        "[[hypothesis]]\nid = \"H3\"\nspecification = \"ols\"\nterm = \"d\"\nfamily = \"main\"\n\n[family.main]",
    );
    s.write("plan.toml", &text);
    assert_eq!(
        s.sworn(&["amend", "plan.toml", "--reason", "add H3"]).code,
        0
    );
    let r = s.run_ok();
    assert_eq!(r["hypotheses"]["H3"]["pre_registered"], false);
    assert_eq!(r["hypotheses"]["H1"]["pre_registered"], true);
    assert_eq!(r["hypotheses"]["H1"]["adjusted_p_value"], h1);
    assert!(
        crate::common::codes(&r).contains(&"hypothesis-added-after-data".to_string()),
        "{:?}",
        crate::common::codes(&r)
    );
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 1, "{}", v.stdout);
    assert!(
        v.stdout.contains("hypothesis-added-after-data"),
        "{}",
        v.stdout
    );
}

/// Issue 9 item 8: each specification gets the Stock–Yogo values of its own estimator (Stock
/// and Yogo 2005, from memory: Tables 5.1/5.2 for 2SLS, Table 5.4 for LIML), never another
/// estimator's; Fuller gets none and says why. One instrument (z) and two (z and z·x).
#[test]
fn kclass_specifications_get_no_2sls_stock_yogo_values() {
    // Table 5.2 (2SLS) and Table 5.4 (LIML) rows for q = 1 and 2, sizes 10/15/20/25%.
    let tsls = [[16.38, 8.96, 6.66, 5.53], [19.93, 11.59, 8.75, 7.25]];
    let liml = [[16.38, 8.96, 6.66, 5.53], [8.68, 5.33, 4.42, 3.92]];
    for (estimator, q) in [
        ("2sls", 1),
        ("2sls", 2),
        ("liml", 1),
        ("liml", 2),
        ("fuller", 1),
        ("fuller", 2),
    ] {
        let s = Study::new();
        s.edit(
            "plan.toml",
            "estimator = \"2sls\"",
            &format!("estimator = \"{estimator}\""),
        );
        s.edit(
            "plan.toml",
            "\"reduced_form\", \"endogeneity\"]",
            "\"reduced_form\", \"endogeneity\", \"weak_instruments\"]",
        );
        if q == 2 {
            s.edit(
                "plan.toml",
                "instruments = [\"z\"]",
                "instruments = [\"z\", \"zx\"]",
            );
            s.edit(
                "plan.toml",
                "[[specification]]\nid = \"ols\"",
                "[derive]\nzx = \"z * x\"\n\n[[specification]]\nid = \"ols\"",
            );
        }
        let v = s.seal_and_run();
        let w = &v["specifications"]["iv"]["weak_instruments"];
        let sy = w["stock_yogo"].as_array().expect("stock_yogo array");
        let note = w["stock_yogo_note"].as_str();
        let report = s.read("out/report.md");
        let criteria: Vec<&str> = sy.iter().filter_map(|c| c["criterion"].as_str()).collect();
        let values: Vec<f64> = sy
            .iter()
            .filter_map(|c| c["critical_value"].as_f64())
            .collect();
        let case = format!("{estimator}, q = {q}: {sy:?} {note:?}");
        match estimator {
            "2sls" => {
                // Size cells only (the relative-bias table starts at 3), and a note saying so.
                assert_eq!(criteria, ["wald-size"; 4], "{case}");
                assert_eq!(values, tsls[q - 1], "{case}");
                assert!(
                    note.is_some_and(
                        |n| n.contains("Stock and Yogo's 2SLS relative-bias table starts at 3 excluded instruments")
                    ),
                    "{case}"
                );
                assert!(report.contains("Stock–Yogo (2005) Table 5.2, "), "{report}");
                assert!(!report.contains("Table 5.4"), "{report}");
                assert!(!report.contains("this bounds 2SLS"), "{report}");
            }
            "liml" => {
                assert_eq!(criteria, ["liml-wald-size"; 4], "{case}");
                assert_eq!(values, liml[q - 1], "{case}");
                assert_eq!(note, None, "{case}");
                assert!(report.contains("Stock–Yogo (2005) Table 5.4, "), "{report}");
                assert!(report.contains("Wald test of LIML"), "{report}");
                assert!(!report.contains("Table 5.2"), "{report}");
                assert!(!report.contains("Table 5.1"), "{report}");
                if q == 2 {
                    assert!(!report.contains("19.930"), "{report}");
                }
                assert!(report.contains("this bounds 2SLS, not this"), "{report}");
            }
            _ => {
                assert!(sy.is_empty(), "{case}");
                let expected = "none given for Fuller's estimator: the Stock and Yogo (2005) Fuller values known to this version were not confirmed by the project's simulation check";
                assert!(note.is_some_and(|n| n.starts_with(expected)), "{case}");
                assert!(report.contains(expected), "{report}");
                assert!(!report.contains("Stock–Yogo (2005) Table"), "{report}");
                assert!(report.contains("this bounds 2SLS, not this"), "{report}");
            }
        }
    }
}

/// Issue 9 item 8: a one-sided hypothesis reports the one-sided bound its test implies.
#[test]
fn one_sided_hypotheses_report_their_bound() {
    let s = Study::new();
    let v = s.seal_and_run();
    let h1 = &v["hypotheses"]["H1"];
    assert_eq!(h1["direction"], "greater", "{h1}");
    let (est, se, df) = (
        h1["estimate"].as_f64().expect("estimate"),
        h1["std_error"].as_f64().expect("std_error"),
        h1["df"].as_f64(),
    );
    let bound = h1["one_sided_bound"].as_f64().expect("one_sided_bound");
    assert!(bound < est, "{h1}");
    // The unadjusted test rejects at alpha exactly when the null lies below the bound.
    let p = h1["p_value"].as_f64().expect("p");
    let alpha = h1["alpha"].as_f64().expect("alpha");
    assert_eq!(bound > 0.0, p <= alpha, "{h1} (df {df:?}, se {se})");
    let report = s.read("out/report.md");
    assert!(report.contains("lower bound"), "{report}");
    assert!(report.contains("(one-sided 95%); two-sided ["), "{report}");
    // A two-sided hypothesis has none.
    assert!(v["hypotheses"]["H2"]["one_sided_bound"].is_null());
}

/// An amendment after the data were read that changes a registered element (here a
/// specification's error type) is disclosed per element with its keys old → new, the banner
/// says the run is not as registered, and verify refuses it.
#[test]
fn an_element_changed_after_the_data_is_a_finding_with_its_keys() {
    let s = Study::new();
    s.seal_and_run();
    s.edit("plan.toml", "errors = \"hc1\"", "errors = \"hc3\"");
    let a = s.sworn(&["amend", "plan.toml", "--reason", "robust to leverage"]);
    assert_eq!(a.code, 0, "{}", a.stderr);
    let r = s.run_ok();
    let dev = r["deviations"]
        .as_array()
        .and_then(|d| d.iter().find(|d| d["code"] == "amended-after-data"))
        .cloned()
        .expect("an amended-after-data deviation");
    assert_eq!(dev["subject"], "specification[ols]");
    assert!(
        dev["message"]
            .as_str()
            .is_some_and(|m| m.contains("errors: \"hc1\" → \"hc3\"")),
        "{dev}"
    );
    let report = s.read("out/report.md");
    assert!(
        report.contains("NOT AS REGISTERED: registered plan amended after results were computed: 1 change(s) (specification[ols])"),
        "{report}"
    );
    let v = s.sworn(&["verify", "out"]);
    assert_eq!(v.code, 1, "{}", v.stdout);
    assert!(v.stdout.contains("amended-after-data"), "{}", v.stdout);
}
