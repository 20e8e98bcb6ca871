//! Shared helpers for the integration tests: a generated study in a temp dir, and running
//! the built binary on it.

use std::fmt::Write;
use std::path::{Path, PathBuf};
use std::process::Command;

/// A study laid out in a temporary folder: `plan.toml`, `data.csv`.
pub struct Study {
    pub dir: tempfile::TempDir,
}

/// What a command printed and how it exited.
pub struct Ran {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

/// Generated test data (invented): 240 rows in 12 groups, a binary instrument `z`, an
/// endogenous binary `d`, a control `x`, outcomes `y` (continuous) and `yb` (binary).
pub fn data_csv() -> String {
    let mut state: u64 = 12345;
    let mut unif = move || {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((state >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    };
    let mut out = String::from("id,grp,z,d,x,y,yb\n");
    for i in 0..240 {
        let g = i / 20;
        let z = u8::from(unif() < 0.5);
        let u = unif() - 0.5;
        let d = u8::from(0.6 * f64::from(z) + u + 0.3 * (unif() - 0.5) > 0.3);
        let x = 10.0 * unif();
        let y = 1.0 + 2.0 * f64::from(d) + 0.5 * x + 2.0 * u + (unif() - 0.5) + 0.1 * g as f64;
        let yb = u8::from(unif() < 0.3 + 0.2 * f64::from(d));
        let _ = writeln!(out, "r{i:03},g{g:02},{z},{d},{x:.4},{y:.4},{yb}");
    }
    out
}

/// The base plan used by most tests.
pub const PLAN: &str = r#"format = 1

[study]
title = "Test study"

[data.main]
path = "data.csv"
rows = { min = 200, max = 300 }
key = "id"
max_missing_share = 0.2

[data.main.columns]
id  = { kind = "id" }
grp = { kind = "category" }
z   = { kind = "binary" }
d   = { kind = "binary" }
x   = { kind = "number", min = 0, max = 10 }
y   = { kind = "number" }
yb  = { kind = "binary" }

[[specification]]
id = "ols"
estimator = "ols"
outcome = "y"
regressors = ["d"]
controls = ["x"]
errors = "hc1"

[[specification]]
id = "iv"
estimator = "2sls"
outcome = "y"
endogenous = ["d"]
instruments = ["z"]
controls = ["x"]
errors = { kind = "cluster", by = "grp" }
diagnostics = ["first_stage", "reduced_form", "endogeneity"]

[[hypothesis]]
id = "H1"
claim = "d raises y"
specification = "iv"
term = "d"
direction = "greater"
family = "main"

[[hypothesis]]
id = "H2"
specification = "ols"
term = "x"
family = "main"

[family.main]
correction = "holm"

[[table]]
id = "t1"
columns = ["ols", "iv"]
rows = ["d", "x"]
"#;

impl Study {
    /// A study with the base plan and data.
    pub fn new() -> Self {
        Self::with(PLAN, &data_csv())
    }

    /// A study with the given plan and data text.
    pub fn with(plan: &str, data: &str) -> Self {
        let dir = tempfile::tempdir().expect("temp dir");
        std::fs::write(dir.path().join("plan.toml"), plan).expect("write plan");
        std::fs::write(dir.path().join("data.csv"), data).expect("write data");
        Study { dir }
    }

    pub fn path(&self, rel: &str) -> PathBuf {
        self.dir.path().join(rel)
    }

    /// Run the binary with `args` in the study folder.
    pub fn sworn(&self, args: &[&str]) -> Ran {
        run_in(self.dir.path(), args)
    }

    pub fn read(&self, rel: &str) -> String {
        std::fs::read_to_string(self.path(rel)).unwrap_or_default()
    }

    pub fn write(&self, rel: &str, text: &str) {
        std::fs::write(self.path(rel), text).expect("write");
    }

    /// Replace the first occurrence of `from` in the file `rel`.
    pub fn edit(&self, rel: &str, from: &str, to: &str) {
        let text = self.read(rel);
        assert!(text.contains(from), "`{from}` not in {rel}");
        self.write(rel, &text.replacen(from, to, 1));
    }

    /// Seal and run; returns the results JSON.
    pub fn seal_and_run(&self) -> serde_json::Value {
        let s = self.sworn(&["seal", "plan.toml"]);
        assert_eq!(s.code, 0, "seal: {}", s.stderr);
        self.run_ok()
    }

    pub fn run_ok(&self) -> serde_json::Value {
        let r = self.sworn(&["run", "plan.toml", "--out", "out", "--replace"]);
        assert_eq!(r.code, 0, "run failed: {}\n{}", r.stderr, r.stdout);
        serde_json::from_str(&self.read("out/results.json")).expect("results.json parses")
    }
}

pub fn run_in(dir: &Path, args: &[&str]) -> Ran {
    let out = Command::new(env!("CARGO_BIN_EXE_sworn"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("run sworn");
    Ran {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Deviation codes in a results value.
pub fn codes(results: &serde_json::Value) -> Vec<String> {
    results["deviations"].as_array().map_or(Vec::new(), |a| {
        a.iter()
            .filter_map(|d| d["code"].as_str().map(String::from))
            .collect()
    })
}

/// Plan and file edits that fail loudly when their anchor text is missing (a plain
/// `str::replace` silently does nothing when the anchor drifts, and the test then checks
/// an unedited plan).
pub trait Edit {
    /// Replace every occurrence of `from` with `to`; panics when `from` does not occur.
    fn edit(&self, from: &str, to: &str) -> String;
    /// Replace the first occurrence of `from` with `to`; panics when `from` does not occur.
    fn edit_first(&self, from: &str, to: &str) -> String;
}

impl Edit for str {
    fn edit(&self, from: &str, to: &str) -> String {
        assert!(self.contains(from), "edit anchor not found: `{from}`");
        self.replace(from, to)
    }

    fn edit_first(&self, from: &str, to: &str) -> String {
        assert!(self.contains(from), "edit anchor not found: `{from}`");
        self.replacen(from, to, 1)
    }
}
