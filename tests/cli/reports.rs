//! The demo reports as a reader gets them: snapshots of report.md, report.tex and report.html
//! (re-bless with `SWORN_BLESS=1`), labels of our own, well-formed self-contained HTML, and
//! the HTML rendered in headless Chromium (skipped, saying why, when it is not installed).

use crate::common::run_in;
use std::path::{Path, PathBuf};

const PLANS: [&str; 2] = ["cool-roofs", "grid-demand"];
const REPORTS: [&str; 3] = ["report.md", "report.tex", "report.html"];

/// Run the demo into a temporary folder.
fn demo() -> tempfile::TempDir {
    let dir = tempfile::tempdir().expect("temp dir");
    let d = run_in(dir.path(), &["demo", "--out", "demo"]);
    assert_eq!(d.code, 0, "{}{}", d.stdout, d.stderr);
    dir
}

fn out_dir(dir: &Path, plan: &str) -> PathBuf {
    dir.join("demo/out").join(plan)
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// A report with the values that change from run to run (the ledger head hashes entry
/// times; the results digest covers it) replaced by fixed marks.
fn normalized(text: &str, results: &serde_json::Value) -> String {
    let mut out = text.to_string();
    let volatile = [
        ("LEDGER-HEAD", results["plan"]["ledger_head"].as_str()),
        ("RESULTS-DIGEST", results["digest"].as_str()),
    ];
    for (mark, value) in volatile {
        let Some(v) = value else { continue };
        out = out.replace(&sworn::report::tex_breakable(v), mark);
        out = out.replace(v, mark);
    }
    out
}

/// report.md, report.tex and report.html of both demo plans match the committed snapshots in
/// `tests/snapshots/` (set `SWORN_BLESS=1` to rewrite them after a reviewed change).
#[test]
fn demo_reports_match_their_snapshots() {
    let dir = demo();
    let bless = std::env::var_os("SWORN_BLESS").is_some_and(|v| v == "1");
    let snapshots = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/snapshots");
    let mut stale = Vec::new();
    for plan in PLANS {
        let out = out_dir(dir.path(), plan);
        let results: serde_json::Value =
            serde_json::from_str(&read(&out.join("results.json"))).expect("results.json");
        for report in REPORTS {
            let fresh = normalized(&read(&out.join(report)), &results);
            let path = snapshots.join(format!("{plan}.{report}"));
            if bless {
                std::fs::create_dir_all(&snapshots).expect("snapshot folder");
                std::fs::write(&path, &fresh).expect("write snapshot");
                continue;
            }
            let kept = std::fs::read_to_string(&path).unwrap_or_default();
            if kept != fresh {
                let line = kept
                    .lines()
                    .zip(fresh.lines())
                    .position(|(a, b)| a != b)
                    .map_or(kept.lines().count().min(fresh.lines().count()), |i| i);
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
    assert!(
        stale.is_empty(),
        "reports differ from their snapshots (review, then re-bless with SWORN_BLESS=1):\n{}",
        stale.join("\n")
    );
}

/// Phrases and block layouts a reader would tie to particular existing programs (issue 13):
/// none may appear in any demo report.
const NOT_OURS: &[&str] = &[
    "Durbin (χ²",
    "Wu–Hausman (F(",
    "Sargan (homoskedastic)",
    "Basmann (homoskedastic)",
    "partial R² of excluded instruments",
    "F on excluded instruments",
    "Shea's partial R²",
    "Shea’s partial R²",
    "Cragg–Donald statistic",
    "Stock–Yogo critical value, maximal size",
    "maximal size of a 5% Wald test",
    "alternating projections",
    "absorbed fixed effects",
    "nested in a cluster variable",
    "they use",
    "* p < 0.10",
    "p < 0.10, **",
    "p<0.10",
    "Standard errors in parentheses",
    "Endogeneity tests (null",
    "Weak-instrument diagnostics",
    "Over-identification tests (null",
];

#[test]
fn demo_reports_use_labels_of_our_own() {
    let dir = demo();
    for plan in PLANS {
        for report in REPORTS {
            let text = read(&out_dir(dir.path(), plan).join(report));
            // The LaTeX report spells some symbols as commands; compare its words too.
            let plain = text
                .replace("\\textsuperscript{2}", "²")
                .replace("$\\chi$", "χ")
                .replace("--", "–")
                .replace("\\&", "&");
            for phrase in NOT_OURS {
                assert!(
                    !plain.contains(phrase),
                    "{plan}/{report} contains {phrase:?}"
                );
            }
        }
        // The identification panel asks its questions in every output.
        for report in REPORTS {
            let text = read(&out_dir(dir.path(), plan).join(report));
            assert!(text.contains("strong enough?"), "{plan}/{report}");
            assert!(text.contains("Identification"), "{plan}/{report}");
        }
    }
}

/// Elements HTML defines without an end tag.
const VOID: &[&str] = &["meta", "br", "hr", "img", "input", "link", "col", "wbr"];

/// Check that `html` is well formed: every element closed in order (void elements and
/// `/>` excepted), every `<` opening a tag, comment or doctype, every `&` a character
/// reference. Returns the first problem.
fn well_formed(html: &str) -> Result<usize, String> {
    let mut stack: Vec<String> = Vec::new();
    let mut elements = 0;
    let bytes = html.as_bytes();
    let mut i = 0;
    while i < bytes.len() {
        match bytes[i] {
            b'<' => {
                let rest = &html[i..];
                if rest.starts_with("<!--") {
                    i += rest.find("-->").ok_or("an unclosed comment")? + 3;
                    continue;
                }
                if rest.starts_with("<!DOCTYPE") || rest.starts_with("<?xml") {
                    i += rest.find('>').ok_or("an unclosed declaration")? + 1;
                    continue;
                }
                let end = rest
                    .find('>')
                    .ok_or_else(|| format!("an unclosed tag at byte {i}"))?;
                let tag = &rest[1..end];
                let closing = tag.starts_with('/');
                let name: String = tag
                    .trim_start_matches('/')
                    .chars()
                    .take_while(|c| c.is_ascii_alphanumeric() || *c == '-' || *c == ':')
                    .collect::<String>()
                    .to_ascii_lowercase();
                if name.is_empty() {
                    return Err(format!("a bare `<` at byte {i}: {}", &rest[..end.min(40)]));
                }
                if !tag.matches('"').count().is_multiple_of(2) {
                    return Err(format!("an unbalanced quote in <{tag}>"));
                }
                if closing {
                    match stack.pop() {
                        Some(open) if open == name => {}
                        other => {
                            return Err(format!("</{name}> closes {other:?} at byte {i}"));
                        }
                    }
                } else if !tag.ends_with('/') && !VOID.contains(&name.as_str()) {
                    stack.push(name);
                    elements += 1;
                } else {
                    elements += 1;
                }
                i += end + 1;
            }
            b'&' => {
                let rest = &html[i..];
                let end = rest.find(';').filter(|&e| e < 12);
                let ok = end.is_some_and(|e| {
                    let body = &rest[1..e];
                    body.chars().all(|c| c.is_ascii_alphanumeric() || c == '#') && !body.is_empty()
                });
                if !ok {
                    return Err(format!(
                        "a bare `&` at byte {i}: {}",
                        &rest[..rest.len().min(20)]
                    ));
                }
                i += 1;
            }
            _ => i += 1,
        }
    }
    if stack.is_empty() {
        Ok(elements)
    } else {
        Err(format!("unclosed elements: {stack:?}"))
    }
}

#[test]
fn well_formed_catches_broken_markup() {
    assert!(well_formed("<p>a &amp; b</p>").is_ok());
    assert!(well_formed("<p>a <b>b</p></b>").is_err());
    assert!(well_formed("<p>a < b</p>").is_err());
    assert!(well_formed("<p>a & b</p>").is_err());
    assert!(well_formed("<div><p>x</p>").is_err());
    assert!(well_formed("<svg><path d=\"M0 0\"/></svg><br>").is_ok());
}

/// The HTML reports are well formed, self-contained (no script, no external asset) and carry
/// one inline SVG per figure.
#[test]
fn demo_html_is_well_formed_and_self_contained() {
    let dir = demo();
    for plan in PLANS {
        let html = read(&out_dir(dir.path(), plan).join("report.html"));
        let n = well_formed(&html).unwrap_or_else(|e| panic!("{plan}: {e}"));
        assert!(n > 100, "{plan}: only {n} elements");
        let lower = html.to_ascii_lowercase();
        for asset in [
            "<script", "src=", "href=", "url(", "@import", "<link", "<iframe",
        ] {
            assert!(!lower.contains(asset), "{plan}: {asset}");
        }
        assert!(lower.contains("<svg"), "{plan}: no figure");
        assert_eq!(
            lower.matches("<svg").count(),
            lower.matches("<figure>").count(),
            "{plan}: a figure without its drawing"
        );
    }
}

/// Plan text cannot open an element in the HTML report: a hostile table title and study
/// title arrive as text, and the report stays well formed.
#[test]
fn hostile_plan_text_stays_text_in_html() {
    let s = crate::common::Study::new();
    s.edit(
        "plan.toml",
        "title = \"Test study\"",
        "title = \"Study <script>alert('x')</script> & <!-- \\u202e\"",
    );
    s.seal_and_run();
    let html = s.read("out/report.html");
    assert!(!html.contains("<script"), "{html}");
    assert!(html.contains("Study &lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; &lt;!--"));
    assert!(!html.contains('\u{202e}'));
    well_formed(&html).unwrap_or_else(|e| panic!("{e}"));
}

/// Where headless Chromium lives, if installed.
fn chromium() -> Option<PathBuf> {
    ["/usr/bin/chromium", "/usr/bin/chromium-browser"]
        .iter()
        .map(PathBuf::from)
        .find(|p| p.exists())
}

/// Decode an 8-bit RGB or RGBA PNG (non-interlaced, as Chromium writes screenshots) into
/// (width, height, channels, pixels).
fn decode_png(bytes: &[u8]) -> Result<(usize, usize, usize, Vec<u8>), String> {
    use std::io::Read;
    if bytes.get(..8) != Some(b"\x89PNG\r\n\x1a\n".as_slice()) {
        return Err("not a PNG".into());
    }
    let (mut width, mut height, mut channels) = (0, 0, 0);
    let mut idat = Vec::new();
    let mut at = 8;
    while at + 8 <= bytes.len() {
        let len = u32::from_be_bytes(bytes[at..at + 4].try_into().map_err(|_| "chunk")?) as usize;
        let kind = &bytes[at + 4..at + 8];
        let data = bytes.get(at + 8..at + 8 + len).ok_or("truncated chunk")?;
        match kind {
            b"IHDR" => {
                width = u32::from_be_bytes(data[0..4].try_into().map_err(|_| "w")?) as usize;
                height = u32::from_be_bytes(data[4..8].try_into().map_err(|_| "h")?) as usize;
                if data[8] != 8 || data[12] != 0 {
                    return Err("only 8-bit non-interlaced PNGs are read here".into());
                }
                channels = match data[9] {
                    2 => 3,
                    6 => 4,
                    c => return Err(format!("colour type {c} not read here")),
                };
            }
            b"IDAT" => idat.extend_from_slice(data),
            b"IEND" => break,
            _ => {}
        }
        at += 12 + len;
    }
    let mut raw = Vec::new();
    flate2::read::ZlibDecoder::new(&idat[..])
        .read_to_end(&mut raw)
        .map_err(|e| e.to_string())?;
    let stride = width * channels;
    let mut px = vec![0u8; stride * height];
    for y in 0..height {
        let line = raw
            .get(y * (stride + 1)..(y + 1) * (stride + 1))
            .ok_or("short data")?;
        let (filter, src) = (line[0], &line[1..]);
        for x in 0..stride {
            let a = if x >= channels {
                px[y * stride + x - channels]
            } else {
                0
            };
            let b = if y > 0 { px[(y - 1) * stride + x] } else { 0 };
            let c = if y > 0 && x >= channels {
                px[(y - 1) * stride + x - channels]
            } else {
                0
            };
            let predicted = match filter {
                0 => 0,
                1 => a,
                2 => b,
                3 => ((u16::from(a) + u16::from(b)) / 2) as u8,
                4 => {
                    let p = i16::from(a) + i16::from(b) - i16::from(c);
                    let (pa, pb, pc) = (
                        (p - i16::from(a)).abs(),
                        (p - i16::from(b)).abs(),
                        (p - i16::from(c)).abs(),
                    );
                    if pa <= pb && pa <= pc {
                        a
                    } else if pb <= pc {
                        b
                    } else {
                        c
                    }
                }
                f => return Err(format!("filter {f}")),
            };
            px[y * stride + x] = src[x].wrapping_add(predicted);
        }
    }
    Ok((width, height, channels, px))
}

/// report.html renders in headless Chromium: the screenshot is not blank and shows the
/// figures' blue (2SLS) marks. Skipped, saying why, when Chromium is not installed (`.ci/run`
/// installs Debian's `chromium`).
#[test]
fn demo_html_renders_in_chromium() {
    let Some(browser) = chromium() else {
        println!("skipped: chromium is not installed (.ci/run installs it)");
        return;
    };
    let dir = demo();
    let out = out_dir(dir.path(), "cool-roofs");
    let shot = out.join("screenshot.png");
    let url = format!("file://{}", out.join("report.html").display());
    let profile = dir.path().join("chromium-profile");
    let ran = std::process::Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--hide-scrollbars",
            "--window-size=1200,6000",
            &format!("--user-data-dir={}", profile.display()),
            &format!("--screenshot={}", shot.display()),
            &url,
        ])
        .output()
        .expect("chromium runs");
    assert!(
        shot.exists(),
        "no screenshot: {}",
        String::from_utf8_lossy(&ran.stderr)
    );
    let (w, h, ch, px) = decode_png(&std::fs::read(&shot).expect("read screenshot"))
        .unwrap_or_else(|e| panic!("{e}"));
    assert_eq!((w, h), (1200, 6000));
    let pixels = px.chunks(ch);
    let (mut ink, mut blue) = (0usize, 0usize);
    for p in pixels {
        if p[0] < 200 || p[1] < 200 || p[2] < 200 {
            ink += 1;
        }
        // The 2SLS colour of the figures, rgb(31, 95, 168), give or take antialiasing.
        if (i16::from(p[0]) - 31).abs() < 25
            && (i16::from(p[1]) - 95).abs() < 25
            && (i16::from(p[2]) - 168).abs() < 25
        {
            blue += 1;
        }
    }
    let share = ink as f64 / (w * h) as f64;
    println!(
        "chromium screenshot: {w}x{h}, {ink} inked pixels ({share:.4}), {blue} figure-blue pixels"
    );
    assert!(share > 0.01, "the page looks blank: {share}");
    assert!(blue > 500, "the figures do not show: {blue} blue pixels");
}

/// Significance marks only with thresholds the plan states; the legend repeats them.
#[test]
fn stars_follow_the_plans_thresholds() {
    let s = crate::common::Study::new();
    let plain = {
        s.seal_and_run();
        s.read("out/report.md")
    };
    assert!(!plain.contains("Marks ("), "no marks unless asked");
    let s = crate::common::Study::new();
    s.edit(
        "plan.toml",
        "rows = [\"d\", \"x\"]",
        "rows = [\"d\", \"x\"]\nstars = [0.01, 0.05]",
    );
    let v = s.seal_and_run();
    let md = s.read("out/report.md");
    assert!(md.contains("\\* p &lt; 0.05, \\*\\* p &lt; 0.01"), "{md}");
    // Each cell carries one mark per threshold its p-value is below.
    let p = v["specifications"]["ols"]["terms"]["d"]["p_value"]
        .as_f64()
        .unwrap();
    let marks = [0.05, 0.01].iter().filter(|&&t| p < t).count();
    let est = sworn::report::num(
        v["specifications"]["ols"]["terms"]["d"]["estimate"]
            .as_f64()
            .unwrap(),
    );
    assert!(
        md.contains(&format!("| `d` | {est}{} |", "\\*".repeat(marks))),
        "{md}"
    );
    for (bad, says) in [
        ("stars = true", "does not say which thresholds"),
        ("stars = [1.5]", "strictly between 0 and 1"),
        ("stars = \"yes\"", "expected a list of p-value thresholds"),
    ] {
        let s = crate::common::Study::new();
        s.edit(
            "plan.toml",
            "rows = [\"d\", \"x\"]",
            &format!("rows = [\"d\", \"x\"]\n{bad}"),
        );
        let r = s.sworn(&["check", "plan.toml"]);
        assert_eq!(r.code, 2, "{bad}");
        assert!(
            r.stderr.contains(says) && r.stderr.contains("table[t1].stars"),
            "{bad}: {}",
            r.stderr
        );
        assert!(
            r.stderr.contains("stars = [0.05, 0.01]"),
            "the fix: {}",
            r.stderr
        );
    }
}

/// `summary_rows = ["first-stage-strength"]` adds the first-stage F beneath an IV column, blank
/// beneath OLS; an unknown row name is refused with the valid ones.
#[test]
fn first_stage_strength_rows_on_request() {
    let s = crate::common::Study::new();
    s.edit(
        "plan.toml",
        "rows = [\"d\", \"x\"]",
        "rows = [\"d\", \"x\"]\nsummary_rows = [\"first-stage-strength\"]",
    );
    let v = s.seal_and_run();
    let f = v["specifications"]["iv"]["first_stage"]["d"]["robust_f_statistic"]
        .as_f64()
        .unwrap();
    let md = s.read("out/report.md");
    assert!(
        md.contains(&format!(
            "| first-stage F, the column's errors |  | {} |",
            sworn::report::num(f)
        )),
        "{md}"
    );
    let s = crate::common::Study::new();
    s.edit(
        "plan.toml",
        "rows = [\"d\", \"x\"]",
        "rows = [\"d\", \"x\"]\nsummary_rows = [\"first-stage-strenght\"]",
    );
    let r = s.sworn(&["check", "plan.toml"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.contains("table[t1].summary_rows") && r.stderr.contains("`first-stage-strength`"),
        "{}",
        r.stderr
    );
}
