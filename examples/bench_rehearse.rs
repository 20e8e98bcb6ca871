//! Rehearsal benchmark on the cool-roofs demo plan (2,304 households, 8 specifications,
//! 6 hypotheses, 3 decision rules). Prints the median of several runs of:
//! - 1,000 simulated data sets with model-based inference only (the plan with H4's
//!   randomization inference replaced by its model-based test and the few-blocks rule, which
//!   calls the wild bootstrap, unable to fire);
//! - the plan as registered with its resampled tests at the rehearsal's `resampling_draws`
//!   (199) and at the registered 9,999 draws, per data set;
//! - simulating the tables alone, per data set;
//!
//! and the ratios between them, all measured in the same run. The MDE search is switched off
//! (`mde_steps = 0`) so the counts are the grid's data sets.
//! Run with `cargo run --release --example bench_rehearse [-- --runs 3 --datasets 1000]`.

use std::path::Path;
use std::time::Instant;
use sworn::plan::{from_text, Plan};

fn arg(name: &str, default: usize) -> usize {
    let args: Vec<String> = std::env::args().collect();
    args.iter()
        .position(|a| a == name)
        .and_then(|i| args.get(i + 1))
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Median seconds of `runs` calls of `f`.
fn time(runs: usize, mut f: impl FnMut()) -> f64 {
    median(
        (0..runs)
            .map(|_| {
                let t = Instant::now();
                f();
                t.elapsed().as_secs_f64()
            })
            .collect(),
    )
}

fn plan(text: &str) -> Plan {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("plans/cool-roofs.toml");
    from_text(&path, text.to_string()).expect("the demo plan validates")
}

fn main() {
    let runs = arg("--runs", 3);
    let datasets = arg("--datasets", 1000);
    // The grid of effect sizes only (`mde_steps = 0`): the MDE search adds at most
    // mde_steps x replications data sets per bracketing pair, at the same cost each.
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("plans/cool-roofs.toml"),
    )
    .expect("plans/cool-roofs.toml")
    .replace(
        "target_power = 0.80\n",
        "target_power = 0.80\nmde_steps = 0\n",
    );
    let model_text = text
        .replace("inference = \"randomization\"\n", "")
        .replace("fewer_than = 100", "fewer_than = 3");
    let model = plan(&model_text);
    let registered = plan(&text);
    let full = plan(&text.replace("resampling_draws = 199\n", ""));
    let effects = registered.rehearsal.as_ref().map_or(1, |r| r.effects.len());
    let reps = (datasets / effects).max(1);
    let n = (reps * effects) as f64;
    let quiet = |_: usize, _: usize| {};
    let threads = rayon::current_num_threads();
    println!("cool-roofs rehearsal, {threads} thread(s), median of {runs} run(s)");

    let t_model = time(runs, || {
        sworn::rehearse::rehearse(&model, Some(reps), &quiet).expect("rehearses");
    });
    println!(
        "model-based inference: {n} data sets ({reps} replications x {effects} effect sizes) in {t_model:.2} s, {:.1} ms per data set",
        1e3 * t_model / n
    );
    let t_sim = time(runs, || {
        for r in 0..reps as u64 {
            sworn::rehearse::simulated_tables(&model, r, 1.0).expect("simulates");
        }
    }) / reps as f64;
    println!(
        "simulating the tables alone: {:.2} ms per data set ({:.1}% of the model-based time)",
        1e3 * t_sim,
        100.0 * t_sim / (t_model / n)
    );
    let small = (reps / 10).max(1);
    let t_199 = time(runs, || {
        sworn::rehearse::rehearse(&registered, Some(small), &quiet).expect("rehearses");
    }) / (small * effects) as f64;
    println!(
        "as registered, resampled tests at 199 draws: {:.1} ms per data set ({:.1}x model-based; the resampled tests add {:.1} ms)",
        1e3 * t_199,
        t_199 / (t_model / n),
        1e3 * (t_199 - t_model / n)
    );
    let t_full = time(runs.min(2), || {
        sworn::rehearse::rehearse(&full, Some(1), &quiet).expect("rehearses");
    }) / effects as f64;
    println!(
        "as registered, resampled tests at 9,999 draws: {:.0} ms per data set ({:.1}x model-based)",
        1e3 * t_full,
        t_full / (t_model / n)
    );
    println!(
        "1,000 data sets: {:.1} s model-based, {:.1} s at 199 draws, {:.0} s at 9,999 draws",
        1000.0 * t_model / n,
        1000.0 * t_199,
        1000.0 * t_full
    );
}
