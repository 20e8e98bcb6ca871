//! Resampling benchmark: a generated 200,000-row design in 400 clusters, 9,999 restricted
//! wild cluster bootstrap draws and 9,999 randomization draws of a cluster-randomized
//! treatment. Run with `cargo run --release --example bench_resampling` (set
//! RAYON_NUM_THREADS to compare thread counts; the p-values must not change).

use nalgebra::{DMatrix, DVector};
use std::time::Instant;
use sworn::estimate::{
    randomization_test, wild_cluster_bootstrap, Absorbed, AssignmentDesign, CovSpec, Draws,
    RiStatistic, Weights,
};

/// SplitMix64 (invented data only).
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

fn main() {
    let (n, g) = (200_000usize, 400usize);
    let mut s = Stream(20_261_201);
    let effects: Vec<f64> = (0..g).map(|_| 0.5 * s.normal()).collect();
    let treated_cluster: Vec<f64> = (0..g).map(|c| f64::from(u8::from(c % 2 == 0))).collect();
    let clusters: Vec<usize> = (0..n).map(|i| i * g / n).collect();
    let mut x = DMatrix::zeros(n, 3);
    let mut y = DVector::zeros(n);
    for i in 0..n {
        let c = clusters[i];
        let w = s.normal();
        x[(i, 0)] = treated_cluster[c];
        x[(i, 1)] = 1.0;
        x[(i, 2)] = w;
        y[i] = 1.0 + 0.05 * treated_cluster[c] + 0.3 * w + effects[c] + s.normal();
    }
    let draws = Draws {
        draws: 9_999,
        seed: 20_260_501,
        exact_below: 100_000,
    };
    let threads = rayon::current_num_threads();
    println!("design: n = {n}, G = {g}, k = 3; rayon threads: {threads}");

    let start = Instant::now();
    let wild = wild_cluster_bootstrap(
        sworn::estimate::OlsColumns::new(&y, &x),
        sworn::estimate::Tested::new(0, 0.0),
        &clusters,
        Weights::Rademacher,
        &draws,
        &Absorbed::NONE,
    );
    let wild_time = start.elapsed();
    match wild {
        Ok(r) => println!(
            "wild cluster bootstrap (Rademacher, restricted): {} draws in {:.2} s; t = {:.4}, p = {:.4}",
            r.draws_used,
            wild_time.as_secs_f64(),
            r.observed,
            r.p_value
        ),
        Err(e) => println!("wild cluster bootstrap failed: {e}"),
    }

    let start = Instant::now();
    let ri = randomization_test(
        sworn::estimate::OlsColumns::new(&y, &x),
        sworn::estimate::Tested::new(0, 0.0),
        &CovSpec::Cluster {
            ids: clusters.clone(),
        },
        &Absorbed::NONE,
        &AssignmentDesign::Clustered {
            clusters: clusters.clone(),
        },
        RiStatistic::T,
        &draws,
    );
    let ri_time = start.elapsed();
    match ri {
        Ok(r) => println!(
            "randomization inference (clustered, CR1 t): {} draws in {:.2} s; t = {:.4}, p = {:.4}",
            r.draws_used,
            ri_time.as_secs_f64(),
            r.observed,
            r.p_value
        ),
        Err(e) => println!("randomization inference failed: {e}"),
    }
}
