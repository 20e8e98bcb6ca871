//! Mutation fuzzer: damaged plans, CSV files and Parquet files driven through the library's
//! entry points (`plan::load`, `analysis::load_tables`, `app::execute`: the analysis and its
//! rendered reports), in process.
//!
//! A finding is a panic, an input that takes longer than [`SLOW`], or a report that breaks
//! an output invariant (a control or bidirectional-formatting character, or raw HTML from the
//! plan, in report.md or report.html). Errors are not findings: bad input must be refused, and
//! is. An abort (an allocation the reader could not make) ends the test process, which fails
//! the test too.
//!
//! The mutations are seeded (SplitMix64), so a run is reproducible: a finding prints its seed
//! and input number, and writes the input to a folder it names.
//!
//! - `fuzz_bounded` (default test run): as many inputs as fit in about a minute;
//! - `fuzz_long` (ignored): `SWORN_FUZZ_INPUTS` inputs (default 100,000):
//!   `cargo test --release -- --ignored fuzz_long --nocapture`.

use crate::common::{data_csv, PLAN};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;
use std::time::{Duration, Instant};

/// An input slower than this is a finding (a hang, or cost out of proportion to the input).
const SLOW: Duration = Duration::from_secs(20);

/// The demo's weekly table written as Parquet by pyarrow (see `tests/fixtures/parquet/README.md`).
const WEEKLY_PARQUET: &[u8] = include_bytes!("../fixtures/parquet/weekly.parquet");
const WEEKLY_PLAN: &str = include_str!("../fixtures/parquet/plan.toml");

struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
    fn pick<'a>(&mut self, from: &[&'a str]) -> &'a str {
        from[self.below(from.len())]
    }
}

/// Values that have broken parsers and numerics before.
const NASTY: &[&str] = &[
    "",
    "NA",
    ".",
    "nan",
    "NaN",
    "inf",
    "-inf",
    "N/A",
    "absent",
    "1e308",
    "-1e308",
    "1e-320",
    "1e153",
    "1e-200",
    "0",
    "-0",
    "1",
    "9007199254740993",
    "\u{1b}[2K\rverified",
    "\u{202e}gnp.x",
    "<script>alert(1)</script>",
    "<!--",
    "\"",
    "\\",
    "[",
    "{",
    "=",
    "#",
    "\n",
];

fn mutate_lines(rng: &mut Rng, text: &str) -> String {
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    if lines.is_empty() {
        return String::new();
    }
    for _ in 0..=rng.below(3) {
        let i = rng.below(lines.len());
        match rng.below(7) {
            0 => {
                lines.remove(i);
                if lines.is_empty() {
                    break;
                }
            }
            1 => {
                let l = lines[i].clone();
                lines.insert(i, l);
            }
            2 => {
                let j = rng.below(lines.len());
                lines.swap(i, j);
            }
            3 | 4 => {
                // Replace one token (split on separators) with a nasty value.
                let parts: Vec<&str> = lines[i].split_inclusive([',', ' ', '"', '=']).collect();
                if !parts.is_empty() {
                    let k = rng.below(parts.len());
                    let nasty = rng.pick(NASTY);
                    let mut l = String::new();
                    for (n, p) in parts.iter().enumerate() {
                        if n == k {
                            let sep = p.chars().last().filter(|c| ",\" =".contains(*c));
                            l.push_str(nasty);
                            l.extend(sep);
                        } else {
                            l.push_str(p);
                        }
                    }
                    lines[i] = l;
                }
            }
            5 => {
                let mut bytes = lines[i].clone().into_bytes();
                if !bytes.is_empty() {
                    let k = rng.below(bytes.len());
                    bytes[k] = b" ,=\"[]{}#0123456789.-ex"[rng.below(23)];
                }
                lines[i] = String::from_utf8_lossy(&bytes).into_owned();
            }
            _ => {
                let long = "9".repeat(1 + rng.below(5000));
                lines[i].push_str(&long);
            }
        }
    }
    let mut out = lines.join("\n");
    out.push('\n');
    out
}

/// A CSV mutation that keeps the shape but makes the numbers degenerate or extreme.
fn degenerate_csv(rng: &mut Rng, text: &str) -> String {
    let mut rows: Vec<Vec<String>> = text
        .lines()
        .map(|l| l.split(',').map(String::from).collect())
        .collect();
    let width = rows.first().map_or(0, Vec::len);
    if rows.len() < 2 || width == 0 {
        return text.to_string();
    }
    let col = rng.below(width);
    let scale = rng.pick(&["1e153", "1e-200", "1e300", "0", "same"]);
    let first = rows[1].get(col).cloned().unwrap_or_default();
    for r in rows.iter_mut().skip(1) {
        if let Some(v) = r.get_mut(col) {
            *v = match (scale, v.parse::<f64>()) {
                ("same", _) => first.clone(),
                (s, Ok(x)) => format!("{:e}", x * s.parse::<f64>().unwrap_or(1.0)),
                _ => v.clone(),
            };
        }
    }
    rows.iter()
        .map(|r| r.join(","))
        .collect::<Vec<_>>()
        .join("\n")
        + "\n"
}

fn mutate_bytes(rng: &mut Rng, bytes: &[u8]) -> Vec<u8> {
    let mut b = bytes.to_vec();
    for _ in 0..=rng.below(2) {
        if b.is_empty() {
            break;
        }
        let i = rng.below(b.len());
        match rng.below(5) {
            0 => b[i] ^= 0xFF,
            1 => b[i] = 0,
            2 => b[i] = (rng.next() & 0xFF) as u8,
            3 => b[i] ^= 1 << rng.below(8),
            _ => b[i] = 0x7F,
        }
    }
    if rng.below(50) == 0 {
        let keep = rng.below(b.len());
        b.truncate(keep);
    }
    b
}

/// What one input did.
enum Verdict {
    Fine,
    Finding(String),
}

/// Run one study folder through plan loading, data loading and the analysis.
fn exercise(dir: &Path) -> Verdict {
    let started = Instant::now();
    let outcome = catch_unwind(AssertUnwindSafe(|| -> Option<String> {
        let plan = sworn::plan::load(&dir.join("plan.toml")).ok()?;
        let (tables, devs) = sworn::analysis::load_tables(&plan).ok()?;
        let ledger = sworn::ledger::Ledger::empty(dir.join("plan.toml.ledger"));
        let out = sworn::app::execute(&plan, &ledger, "..", &tables, devs).ok()?;
        for name in ["report.md", "report.html"] {
            let (_, text) = out.files.iter().find(|(n, _)| n == name)?;
            let bad = text
                .chars()
                .find(|c| *c != '\n' && sworn::escape::is_unsafe(*c));
            if let Some(c) = bad {
                return Some(format!(
                    "{name} holds the unsafe character U+{:04X}",
                    c as u32
                ));
            }
            if text.contains("<script") || text.contains("<!--") {
                return Some(format!("{name} holds raw HTML from the plan"));
            }
        }
        None
    }));
    let slow = started.elapsed() > SLOW;
    match outcome {
        Err(p) => Verdict::Finding(format!(
            "panic: {}",
            p.downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default()
        )),
        Ok(Some(why)) => Verdict::Finding(why),
        Ok(None) if slow => Verdict::Finding(format!("took {:?}", started.elapsed())),
        Ok(None) => Verdict::Fine,
    }
}

/// Write input `n` of the stream seeded by `seed` into `dir` (plan.toml and its data).
fn make_input(rng: &mut Rng, dir: &Path, csv: &str) {
    let parquet = rng.below(3) == 0;
    let (plan, data_name, data): (String, &str, Vec<u8>) = if parquet {
        let plan = if rng.below(4) == 0 {
            mutate_lines(rng, WEEKLY_PLAN)
        } else {
            WEEKLY_PLAN.to_string()
        };
        (plan, "weekly.parquet", mutate_bytes(rng, WEEKLY_PARQUET))
    } else {
        let plan = if rng.below(2) == 0 {
            mutate_lines(rng, PLAN)
        } else {
            PLAN.to_string()
        };
        let data = match rng.below(3) {
            0 => csv.to_string(),
            1 => degenerate_csv(rng, csv),
            _ => mutate_lines(rng, csv),
        };
        (plan, "data.csv", data.into_bytes())
    };
    std::fs::write(dir.join("plan.toml"), plan).expect("write plan");
    std::fs::write(dir.join(data_name), data).expect("write data");
}

/// Run inputs from `seed` until `count` are done or `budget` is spent; returns the number
/// run and the findings.
fn campaign(seed: u64, count: usize, budget: Duration) -> (usize, Vec<String>) {
    let csv = data_csv();
    let started = Instant::now();
    let mut rng = Rng(seed);
    let mut findings = Vec::new();
    let keep = std::env::temp_dir().join(format!("sworn-fuzz-{seed}"));
    let mut n = 0;
    while n < count && started.elapsed() < budget {
        let dir = tempfile::tempdir().expect("temp dir");
        make_input(&mut rng, dir.path(), &csv);
        if let Verdict::Finding(why) = exercise(dir.path()) {
            let to = keep.join(format!("input-{n}"));
            let _ = std::fs::create_dir_all(&to);
            for f in ["plan.toml", "data.csv", "weekly.parquet"] {
                let _ = std::fs::copy(dir.path().join(f), to.join(f));
            }
            findings.push(format!("input {n}: {why} (kept in {})", to.display()));
        }
        n += 1;
    }
    (n, findings)
}

#[test]
fn fuzz_bounded() {
    let (n, findings) = campaign(2026, usize::MAX, Duration::from_secs(60));
    println!("fuzz: {n} inputs, {} finding(s)", findings.len());
    assert!(n > 0);
    assert!(findings.is_empty(), "{}", findings.join("\n"));
}

#[test]
#[ignore = "long run: about 100,000 inputs"]
fn fuzz_long() {
    let count = std::env::var("SWORN_FUZZ_INPUTS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(100_000);
    let (n, findings) = campaign(10, count, Duration::from_secs(86_400));
    println!("fuzz: {n} inputs, {} finding(s)", findings.len());
    assert!(findings.is_empty(), "{}", findings.join("\n"));
}
