//! Engine benchmark: a generated encouragement design run through the whole plan path.
//!
//! For each row count it writes a seeded CSV (columns `id, cluster, z, z2, d, w1..w6, y1..y3`:
//! `z` an individual-level binary offer, `z2` a normal instrument, `d` an endogenous binary
//! take-up, three outcomes) and a plan with 12 specifications (3 outcomes × OLS/2SLS ×
//! HC1/cluster, every IV diagnostic), then measures, in this one process run:
//!
//! - the floor: reading the file and computing its SHA-256 (median of three),
//! - `sworn check --data` (reading and checking the data alone),
//! - `sworn run` of the 12-specification plan,
//!
//! each `sworn` command in a child process that reports its own peak resident memory. It prints
//! the ratios to the floor and the peak memory against the size of the used columns as f64.
//! With `--resampling` it also times 9,999 clustered randomization draws and 9,999 wild cluster
//! bootstrap draws (200,000 rows, 400 clusters) as a ratio to one model-based run of the same
//! plan. A randomization run also inverts the test into a 95% interval; the nulls it tests
//! are evaluated from each draw's fit, kept once (module `estimate::resample::family`), and
//! the benchmark prints how many there were (from results.json).
//!
//! Run: `cargo run --release --example bench_engine -- [--rows 100000,1000000,4000000]
//! [--resampling] [--keep DIR]`. Generated data live under the system temp folder and are
//! removed afterwards unless `--keep` names a folder.

use sha2::{Digest, Sha256};
use std::fmt::Write as _;
use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

/// Number of clusters in the main design.
const CLUSTERS: usize = 2_000;
/// Columns the 12 specifications use (cluster, z, z2, d, w1..w6, y1..y3).
const USED_COLUMNS: usize = 13;

/// SplitMix64 with Box–Muller normals (invented data only).
struct Stream(u64);

impl Stream {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
}

/// Write the encouragement design with `n` rows to `path`.
fn write_design(path: &Path, n: usize, seed: u64) -> std::io::Result<()> {
    let mut s = Stream(seed);
    let cluster_effect: Vec<f64> = (0..CLUSTERS).map(|_| 0.5 * s.normal()).collect();
    let file = std::fs::File::create(path)?;
    let mut out = std::io::BufWriter::with_capacity(1 << 20, file);
    writeln!(out, "id,cluster,z,z2,d,w1,w2,w3,w4,w5,w6,y1,y2,y3")?;
    let mut line = String::with_capacity(160);
    for i in 0..n {
        let c = i * CLUSTERS / n;
        let z = u8::from(s.uniform() < 0.5);
        let z2 = s.normal();
        let u = s.normal();
        let w: Vec<f64> = (0..6).map(|_| s.normal()).collect();
        let d = u8::from(0.9 * f64::from(z) + 0.3 * z2 + 0.6 * u + s.normal() > 0.7);
        let base = 1.0 + 0.2 * w.iter().sum::<f64>() + cluster_effect[c] + 0.8 * u;
        line.clear();
        let _ = write!(line, "{i},c{c},{z},{z2:.6},{d}");
        for x in &w {
            let _ = write!(line, ",{x:.6}");
        }
        for effect in [0.5, -0.25, 0.0] {
            let y = base + effect * f64::from(d) + s.normal();
            let _ = write!(line, ",{y:.6}");
        }
        line.push('\n');
        out.write_all(line.as_bytes())?;
    }
    out.flush()
}

/// The 12-specification plan.
fn main_plan(data_file: &str, rows: usize) -> String {
    let mut p = String::new();
    let _ = write!(
        p,
        "format = 1\n[study]\ntitle = \"Engine benchmark: generated encouragement design\"\n\n\
         [data.units]\npath = \"{data_file}\"\nkey = \"id\"\nrows = {{ min = {rows}, max = {rows} }}\n\
         [data.units.columns]\nid = {{ kind = \"id\" }}\ncluster = {{ kind = \"category\" }}\n\
         z = {{ kind = \"binary\" }}\nz2 = {{ kind = \"number\" }}\nd = {{ kind = \"binary\" }}\n"
    );
    for c in ["w1", "w2", "w3", "w4", "w5", "w6", "y1", "y2", "y3"] {
        let _ = writeln!(p, "{c} = {{ kind = \"number\" }}");
    }
    let controls = r#"["w1", "w2", "w3", "w4", "w5", "w6"]"#;
    for y in ["y1", "y2", "y3"] {
        for (tag, errors) in [
            ("hc1", "\"hc1\"".to_string()),
            ("cl", "{ kind = \"cluster\", by = \"cluster\" }".to_string()),
        ] {
            let _ = write!(
                p,
                "\n[[specification]]\nid = \"{y}_ols_{tag}\"\nestimator = \"ols\"\noutcome = \"{y}\"\n\
                 regressors = [\"d\"]\ncontrols = {controls}\nerrors = {errors}\n"
            );
            let _ = write!(
                p,
                "\n[[specification]]\nid = \"{y}_iv_{tag}\"\nestimator = \"2sls\"\noutcome = \"{y}\"\n\
                 endogenous = [\"d\"]\ninstruments = [\"z\", \"z2\"]\ncontrols = {controls}\nerrors = {errors}\n\
                 diagnostics = [\"first_stage\", \"reduced_form\", \"endogeneity\", \"overidentification\", \"weak_instruments\"]\n"
            );
        }
    }
    p
}

/// A cluster-randomized design (200,000 rows, 400 clusters) for the resampling figures.
fn write_cluster_design(path: &Path, n: usize, g: usize) -> std::io::Result<()> {
    let mut s = Stream(20_261_202);
    let effect: Vec<f64> = (0..g).map(|_| 0.5 * s.normal()).collect();
    let file = std::fs::File::create(path)?;
    let mut out = std::io::BufWriter::with_capacity(1 << 20, file);
    writeln!(out, "id,cluster,t,w,y")?;
    for i in 0..n {
        let c = i * g / n;
        let t = u8::from(c.is_multiple_of(2));
        let w = s.normal();
        let y = 1.0 + 0.05 * f64::from(t) + 0.3 * w + effect[c] + s.normal();
        writeln!(out, "{i},k{c},{t},{w:.6},{y:.6}")?;
    }
    out.flush()
}

/// The resampling plan: one OLS specification and one hypothesis tested by `inference`.
fn resampling_plan(data_file: &str, inference: &str) -> String {
    format!(
        "format = 1\n[study]\ntitle = \"Engine benchmark: cluster-randomized design\"\n\n\
         [data.units]\npath = \"{data_file}\"\nkey = \"id\"\n[data.units.columns]\n\
         id = {{ kind = \"id\" }}\ncluster = {{ kind = \"category\" }}\nt = {{ kind = \"binary\" }}\n\
         w = {{ kind = \"number\" }}\ny = {{ kind = \"number\" }}\n\n\
         [assignment]\nvariable = \"t\"\ndesign = \"clustered\"\nclusters = \"cluster\"\n\n\
         [resampling]\nseed = 20260501\ndraws = 9999\nexact_below = 1000\n\n\
         [[specification]]\nid = \"itt\"\nestimator = \"ols\"\noutcome = \"y\"\nregressors = [\"t\"]\n\
         controls = [\"w\"]\nerrors = {{ kind = \"cluster\", by = \"cluster\" }}\n\n\
         [[hypothesis]]\nid = \"H1\"\nspecification = \"itt\"\nterm = \"t\"\ninference = \"{inference}\"\n"
    )
}

/// Read a file and hash it: the floor every run pays.
fn read_and_hash(path: &Path) -> f64 {
    let start = Instant::now();
    let bytes = std::fs::read(path).unwrap_or_default();
    let digest = Sha256::digest(&bytes);
    std::hint::black_box(digest);
    start.elapsed().as_secs_f64()
}

/// Median of a few numbers.
fn median(mut xs: Vec<f64>) -> f64 {
    xs.sort_by(f64::total_cmp);
    xs[xs.len() / 2]
}

/// What a child `sworn` command reported.
struct ChildRun {
    seconds: f64,
    peak_mib: f64,
    ok: bool,
}

/// Run `sworn ARGS` in a child process of this example, which reports its own time and peak RSS.
fn child(args: &[&str]) -> ChildRun {
    let exe = std::env::current_exe().unwrap_or_else(|_| PathBuf::from("bench_engine"));
    let out = Command::new(exe).arg("--child").args(args).output();
    let Ok(out) = out else {
        return ChildRun {
            seconds: f64::NAN,
            peak_mib: f64::NAN,
            ok: false,
        };
    };
    let text = String::from_utf8_lossy(&out.stdout);
    let field = |name: &str| {
        text.lines()
            .find_map(|l| l.strip_prefix(name))
            .and_then(|v| v.trim().parse::<f64>().ok())
            .unwrap_or(f64::NAN)
    };
    let ok = field("bench-exit=") == 0.0;
    if !ok {
        eprintln!(
            "child `sworn {}` failed:\n{}\n{}",
            args.join(" "),
            text,
            String::from_utf8_lossy(&out.stderr)
        );
    }
    ChildRun {
        seconds: field("bench-seconds="),
        peak_mib: field("bench-peak-kib=") / 1024.0,
        ok,
    }
}

/// In the child: run one sworn command through the library and report time, exit and VmHWM.
fn child_main(args: &[String]) -> ! {
    use clap::Parser as _;
    let argv = std::iter::once("sworn".to_string()).chain(args.iter().cloned());
    let start = Instant::now();
    let code = match sworn::cli::Cli::try_parse_from(argv) {
        Ok(cli) => match sworn::app::dispatch(cli.command) {
            Ok(o) => o.code(),
            Err(e) => {
                eprintln!("error: {e}");
                e.exit_code()
            }
        },
        Err(e) => {
            eprintln!("{e}");
            2
        }
    };
    let seconds = start.elapsed().as_secs_f64();
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    let peak = status
        .lines()
        .find_map(|l| l.strip_prefix("VmHWM:"))
        .and_then(|v| v.trim().trim_end_matches("kB").trim().parse::<f64>().ok())
        .unwrap_or(f64::NAN);
    println!("bench-seconds={seconds}");
    println!("bench-peak-kib={peak}");
    println!("bench-exit={code}");
    std::process::exit(0)
}

struct Options {
    rows: Vec<usize>,
    resampling: bool,
    keep: Option<PathBuf>,
}

fn options(args: &[String]) -> Result<Options, String> {
    let mut o = Options {
        rows: vec![100_000, 1_000_000],
        resampling: false,
        keep: None,
    };
    let mut it = args.iter();
    while let Some(a) = it.next() {
        match a.as_str() {
            "--rows" => {
                let v = it
                    .next()
                    .ok_or("--rows needs a list, e.g. 100000,1000000")?;
                o.rows = v
                    .split(',')
                    .map(|x| x.trim().replace('_', "").parse::<usize>())
                    .collect::<Result<_, _>>()
                    .map_err(|_| format!("--rows: not a list of whole numbers: {v}"))?;
                if o.rows.iter().any(|&n| n < 2 * CLUSTERS) {
                    return Err(format!(
                        "--rows: each count must be at least {}",
                        2 * CLUSTERS
                    ));
                }
            }
            "--resampling" => o.resampling = true,
            "--keep" => o.keep = Some(PathBuf::from(it.next().ok_or("--keep needs a folder")?)),
            other => {
                return Err(format!(
                    "unknown argument {other}; use --rows, --resampling, --keep"
                ))
            }
        }
    }
    Ok(o)
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    if args.first().map(String::as_str) == Some("--child") {
        child_main(&args[1..]);
    }
    let opts = match options(&args) {
        Ok(o) => o,
        Err(e) => {
            eprintln!("bench_engine: {e}");
            std::process::exit(2);
        }
    };
    let root = opts.keep.clone().unwrap_or_else(|| {
        std::env::temp_dir().join(format!("sworn-bench-engine-{}", std::process::id()))
    });
    if let Err(e) = std::fs::create_dir_all(&root) {
        eprintln!("bench_engine: cannot create {}: {e}", root.display());
        std::process::exit(2);
    }
    println!(
        "engine benchmark; {} logical CPUs; rayon threads {}",
        std::thread::available_parallelism().map_or(1, usize::from),
        rayon::current_num_threads()
    );
    println!(
        "{:>9} {:>8} {:>9} {:>9} {:>7} {:>9} {:>7} {:>9} {:>9} {:>7}",
        "rows",
        "file MB",
        "floor s",
        "check s",
        "×floor",
        "12 specs",
        "×floor",
        "peak MiB",
        "f64 MiB",
        "×f64"
    );
    let mut per_row = Vec::new();
    for &n in &opts.rows {
        let dir = root.join(format!("rows-{n}"));
        let _ = std::fs::remove_dir_all(&dir);
        if std::fs::create_dir_all(&dir).is_err() {
            eprintln!("bench_engine: cannot create {}", dir.display());
            continue;
        }
        let data = dir.join("units.csv");
        if let Err(e) = write_design(&data, n, 20_261_202 ^ n as u64) {
            eprintln!("bench_engine: cannot write {}: {e}", data.display());
            continue;
        }
        let plan = dir.join("engine.toml");
        if std::fs::write(&plan, main_plan("units.csv", n)).is_err() {
            eprintln!("bench_engine: cannot write {}", plan.display());
            continue;
        }
        let file_mb = std::fs::metadata(&data).map_or(0.0, |m| m.len() as f64 / 1e6);
        let floor = median((0..3).map(|_| read_and_hash(&data)).collect());
        let plan_s = plan.to_string_lossy().to_string();
        let check = child(&["check", &plan_s, "--data"]);
        let out = dir.join("out");
        let out_s = out.to_string_lossy().to_string();
        let run = child(&["run", &plan_s, "--out", &out_s]);
        let f64_mib = (n * USED_COLUMNS * 8) as f64 / (1024.0 * 1024.0);
        println!(
            "{:>9} {:>8.1} {:>9.3} {:>9.2} {:>7.1} {:>9.2} {:>7.1} {:>9.0} {:>9.0} {:>7.2}{}",
            n,
            file_mb,
            floor,
            check.seconds,
            check.seconds / floor,
            run.seconds,
            run.seconds / floor,
            run.peak_mib,
            f64_mib,
            run.peak_mib / f64_mib,
            if check.ok && run.ok {
                ""
            } else {
                "  (a command failed)"
            }
        );
        per_row.push((n, run.seconds));
        if opts.keep.is_none() {
            let _ = std::fs::remove_dir_all(&dir);
        }
    }
    if let (Some(&(n0, t0)), true) = (per_row.first(), per_row.len() > 1) {
        println!("scaling of the 12 specifications (time per row relative to {n0} rows):");
        for &(n, t) in &per_row[1..] {
            println!(
                "  {n} rows: {:.2}× the rows, {:.2}× the time ({:.2} per-row ratio; 1.00 is linear)",
                n as f64 / n0 as f64,
                t / t0,
                (t / t0) / (n as f64 / n0 as f64)
            );
        }
    }
    if opts.resampling {
        resampling_figures(&root);
    }
    if opts.keep.is_none() {
        let _ = std::fs::remove_dir_all(&root);
    }
}

fn resampling_figures(root: &Path) {
    let (n, g) = (200_000usize, 400usize);
    let dir = root.join("resampling");
    let _ = std::fs::remove_dir_all(&dir);
    if std::fs::create_dir_all(&dir).is_err() {
        return;
    }
    let data = dir.join("units.csv");
    if let Err(e) = write_cluster_design(&data, n, g) {
        eprintln!("bench_engine: cannot write {}: {e}", data.display());
        return;
    }
    println!("resampling: {n} rows, {g} clusters, 9,999 draws (the observed draw added)");
    let mut model_s = f64::NAN;
    for inference in ["model", "randomization", "wild-bootstrap"] {
        let plan = dir.join(format!("{inference}.toml"));
        if std::fs::write(&plan, resampling_plan("units.csv", inference)).is_err() {
            return;
        }
        let out = dir.join(format!("out-{inference}"));
        let run = child(&[
            "run",
            &plan.to_string_lossy(),
            "--out",
            &out.to_string_lossy(),
        ]);
        if inference == "model" {
            model_s = run.seconds;
        }
        println!(
            "  {:<15} {:>8.2} s  {:>6.1}× the model-based run  peak {:.0} MiB{}",
            inference,
            run.seconds,
            run.seconds / model_s,
            run.peak_mib,
            if run.ok { "" } else { "  (failed)" }
        );
        // A run also inverts the randomization test into an interval: each of its
        // evaluations tests one more null on the same 9,999 draws, from their kept fits.
        if let Some(evaluations) = interval_evaluations(&out.join("results.json")) {
            println!(
                "  {:<15} including the 95% randomization interval: {evaluations} nulls tested \
                 on the same draws",
                ""
            );
        }
    }
}

/// The number of test evaluations behind the run's randomization interval, if it has one.
fn interval_evaluations(results: &Path) -> Option<u64> {
    let text = std::fs::read_to_string(results).ok()?;
    let json: serde_json::Value = serde_json::from_str(&text).ok()?;
    json["hypotheses"]["H1"]["randomization_interval"]["evaluations"].as_u64()
}
