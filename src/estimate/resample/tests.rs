// Over 500 lines because it is one suite over the resampling module: the hand-checked cases,
// the p-value convention and the fast paths checked against full refits share their fixtures.
//! Hand-checked counts and enumerations, the p-value convention, determinism, Monte Carlo
//! agreement with the exact p-values, and agreement of the partialled fast paths with full
//! refits by the crate's own `ols` / `anderson_rubin` (themselves checked against
//! statsmodels and linearmodels in `reference_tests`).

use crate::estimate::IvColumns;
use std::collections::HashSet;

use nalgebra::{DMatrix, DVector};

use super::super::covariance::CovSpec;
use super::super::{anderson_rubin, ols, Absorbed};
use super::assignment::Assigner;
use super::randomization::randomization_statistics;
use super::reference_tests::{cov, design, fixture, ids, matrix, vector, EXACT};
use super::wild::wild_statistics;
use super::*;
use crate::distribution::Reference;
use crate::inference::quantile;

/// The cluster of each of 60 units in 12 clusters of sizes 1–9 (the cell-level and family
/// tests' design).
pub(super) fn twelve_clusters() -> Vec<usize> {
    [1, 9, 3, 7, 5, 2, 8, 4, 6, 5, 4, 6]
        .iter()
        .enumerate()
        .flat_map(|(g, &m)| std::iter::repeat_n(g, m))
        .collect()
}

fn column(v: &[f64]) -> DMatrix<f64> {
    DMatrix::from_column_slice(v.len(), 1, v)
}

fn binary(n: usize, ones: usize) -> DMatrix<f64> {
    DMatrix::from_fn(n, 1, |i, _| f64::from(u8::from(i < ones)))
}

/// Counts worked by hand: C(12, 6) = 924; three blocks of four with two treated each:
/// C(4, 2)³ = 216; 9!/(3!·3!·3!) = 362880/216 = 1680; eight clusters with four treated:
/// C(8, 4) = 70; two blocks of four clusters with two treated in each: C(4, 2)² = 36; a
/// block with one unit value only contributes 1.
#[test]
fn counts_by_hand() {
    let complete = AssignmentDesign::Complete;
    assert_eq!(
        count_assignments(&complete, &binary(12, 6)).unwrap(),
        Some(924)
    );
    let blocks: Vec<usize> = (0..12).map(|i| i / 4).collect();
    let t = column(&[1., 1., 0., 0., 0., 1., 0., 1., 1., 0., 1., 0.]);
    let blocked = AssignmentDesign::Blocked {
        blocks: blocks.clone(),
    };
    assert_eq!(count_assignments(&blocked, &t).unwrap(), Some(216));
    let three = column(&[0., 1., 2., 2., 1., 0., 0., 2., 1.]);
    assert_eq!(count_assignments(&complete, &three).unwrap(), Some(1680));
    let clusters: Vec<usize> = (0..16).map(|i| i / 2).collect();
    let tc = DMatrix::from_fn(16, 1, |i, _| f64::from(u8::from(i / 2 % 2 == 0)));
    let clustered = AssignmentDesign::Clustered {
        clusters: clusters.clone(),
    };
    assert_eq!(count_assignments(&clustered, &tc).unwrap(), Some(70));
    let bc = AssignmentDesign::BlockedClustered {
        blocks: (0..16).map(|i| i / 8).collect(),
        clusters,
    };
    assert_eq!(count_assignments(&bc, &tc).unwrap(), Some(36));
    let constant_block = column(&[1., 1., 0., 1.]);
    let b = AssignmentDesign::Blocked {
        blocks: vec![0, 0, 1, 1],
    };
    assert_eq!(count_assignments(&b, &constant_block).unwrap(), Some(2));
    // −0.0 and 0.0 are the same value.
    let signed = column(&[0.0, -0.0, 1.0]);
    assert_eq!(count_assignments(&complete, &signed).unwrap(), Some(3));
}

/// Enumeration lists every assignment once: 924 distinct vectors with six ones, the
/// observed one among them; blocked enumeration keeps two treated per block.
#[test]
fn enumeration_is_complete_and_distinct() {
    let t = column(&[1., 0., 0., 1., 1., 0., 1., 0., 0., 1., 1., 0.]);
    let a = Assigner::new(&AssignmentDesign::Complete, &t).unwrap();
    let all: HashSet<Vec<usize>> = (0..924).map(|i| a.unrank(i)).collect();
    assert_eq!(all.len(), 924);
    assert!(all.iter().all(|v| v.iter().sum::<usize>() == 6));
    assert!(all.contains(&a.observed()));
    let blocks: Vec<usize> = (0..12).map(|i| i / 4).collect();
    let t = column(&[1., 1., 1., 0., 1., 1., 0., 0., 1., 0., 0., 0.]);
    let b = Assigner::new(
        &AssignmentDesign::Blocked {
            blocks: blocks.clone(),
        },
        &t,
    )
    .unwrap();
    let total = b.total().unwrap();
    // Blocks {0..3}, {4..7}, {8..11} hold 3, 2 and 1 treated: C(4,3)·C(4,2)·C(4,1) = 96.
    assert_eq!(total, 96);
    let all: HashSet<Vec<usize>> = (0..96).map(|i| b.unrank(i)).collect();
    assert_eq!(all.len(), 96);
    for v in &all {
        for blk in 0..3 {
            let got: usize = (0..12).filter(|&i| blocks[i] == blk).map(|i| v[i]).sum();
            let want: usize = (0..12)
                .filter(|&i| blocks[i] == blk)
                .map(|i| usize::from(t[i] == 1.0))
                .sum();
            assert_eq!(got, want);
        }
    }
}

/// Design errors: ids of the wrong length, a treatment varying within a cluster, a cluster
/// spanning two blocks.
#[test]
fn design_errors() {
    let t = column(&[1., 1., 0., 0.]);
    let short = AssignmentDesign::Blocked { blocks: vec![0, 1] };
    assert!(matches!(
        count_assignments(&short, &t),
        Err(ResampleError::IdLength {
            what: "blocks",
            n: 4,
            got: 2
        })
    ));
    let varies = AssignmentDesign::Clustered {
        clusters: vec![7, 8, 8, 9],
    };
    assert_eq!(
        count_assignments(&varies, &t),
        Err(ResampleError::VariesWithinCluster { cluster: 8 })
    );
    let spans = AssignmentDesign::BlockedClustered {
        blocks: vec![0, 1, 1, 1],
        clusters: vec![5, 5, 6, 6],
    };
    assert_eq!(
        count_assignments(&spans, &t),
        Err(ResampleError::ClusterSpansBlocks { cluster: 5 })
    );
}

/// The p-value convention on a hand-made list: observed 2, draws 2, −2, 2(1 − 1e-13) (a
/// tie within 1e-12), 1, 3 and one skipped draw: two-sided 4/5, upper 3/5, lower 4/5.
#[test]
fn p_value_convention() {
    let stats = [
        Some(2.0),
        Some(-2.0),
        Some(2.0 * (1.0 - 1e-13)),
        Some(1.0),
        Some(3.0),
        None,
    ];
    let r = summarise(2.0, &stats, false);
    assert_eq!((r.p_value, r.p_upper, r.p_lower), (0.8, 0.6, 0.8));
    assert_eq!((r.draws_used, r.skipped, r.exact), (5, 1, false));
    // A statistic 1e-11 relative below the observed is not a tie.
    let r = summarise(2.0, &[Some(2.0), Some(2.0 * (1.0 - 1e-11))], true);
    assert_eq!(r.p_value, 0.5);
}

/// Webb's six points have mean 0 and variance (1/2 + 1 + 3/2)·2/6 = 1 (Webb 2014).
#[test]
fn webb_points_have_unit_variance() {
    let case = &fixture("resample_wild.json")[2];
    assert_eq!(case["weights"], "webb");
    let a = 0.5f64.sqrt();
    let c = 1.5f64.sqrt();
    let pts = [1.0, -1.0, a, -a, c, -c];
    let mean: f64 = pts.iter().sum::<f64>() / 6.0;
    let var: f64 = pts.iter().map(|p| p * p).sum::<f64>() / 6.0;
    assert!(mean.abs() < 1e-15 && (var - 1.0).abs() < 1e-15);
}

/// Random permutations are uniform: 60,000 shuffles of (1, 1, 0, 0) fall into the 6
/// distinct assignments with a chi-square (5 df) below its 1 − 1e-6 quantile. The seed
/// is fixed, so this is a fixed check of the generator and the shuffle, not a flaky one.
#[test]
fn shuffles_are_uniform() {
    let t = column(&[1., 1., 0., 0.]);
    let a = Assigner::new(&AssignmentDesign::Complete, &t).unwrap();
    let index: Vec<Vec<usize>> = (0..6).map(|i| a.unrank(i)).collect();
    let mut freq = [0f64; 6];
    let draws = 60_000u64;
    for b in 1..=draws {
        let v = a.shuffle(&mut Stream::for_draw(42, b));
        freq[index.iter().position(|w| *w == v).unwrap()] += 1.0;
    }
    let e = draws as f64 / 6.0;
    let chi2: f64 = freq.iter().map(|f| (f - e) * (f - e) / e).sum();
    let crit = quantile(&Reference::ChiSquare { df: 5.0 }, 1.0 - 1e-6);
    assert!(chi2 < crit, "{chi2} {crit} {freq:?}");
    // The uniform integer sampler: below(6) over 60,000 calls, same check.
    let mut stream = Stream::for_draw(7, 0);
    let mut freq = [0f64; 6];
    for _ in 0..draws {
        freq[stream.below(6) as usize] += 1.0;
    }
    let chi2: f64 = freq.iter().map(|f| (f - e) * (f - e) / e).sum();
    assert!(chi2 < crit, "{chi2} {freq:?}");
}

fn first_ri_case() -> serde_json::Value {
    fixture("resample_ri.json")
        .into_iter()
        .find(|c| c["name"] == "complete_hc1_t_0.0")
        .unwrap()
}

fn random_plan(draws: usize, seed: u64) -> Draws {
    Draws {
        draws,
        seed,
        exact_below: 10,
    }
}

fn ri_run(case: &serde_json::Value, plan: &Draws) -> ResampleResult {
    randomization_test(
        crate::estimate::OlsColumns::new(&vector(&case["y"]), &matrix(&case["x"])),
        crate::estimate::Tested::new(
            case["treatment"].as_u64().unwrap() as usize,
            case["null"].as_f64().unwrap(),
        ),
        &cov(&case["cov"]),
        &Absorbed::NONE,
        &design(&case["design"]),
        RiStatistic::T,
        plan,
    )
    .unwrap()
}

fn wild_run(case: &serde_json::Value, plan: &Draws) -> ResampleResult {
    wild_cluster_bootstrap(
        crate::estimate::OlsColumns::new(&vector(&case["y"]), &matrix(&case["x"])),
        crate::estimate::Tested::new(
            case["coef_index"].as_u64().unwrap() as usize,
            case["null"].as_f64().unwrap(),
        ),
        &ids(&case["clusters"]),
        Weights::Rademacher,
        plan,
        &Absorbed::NONE,
    )
    .unwrap()
}

fn pool(threads: usize) -> rayon::ThreadPool {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
}

/// Same seed: bit-identical results with 1 and 2 threads; another seed: other draws.
#[test]
fn random_draws_are_deterministic() {
    let case = first_ri_case();
    let plan = random_plan(2_000, 11);
    let one = pool(1).install(|| ri_run(&case, &plan));
    let two = pool(2).install(|| ri_run(&case, &plan));
    assert_eq!(one, two);
    assert!(!one.exact);
    assert_eq!(one.draws_used, 2_001);
    let other = ri_run(&case, &random_plan(2_000, 12));
    assert_ne!(one.p_value, other.p_value);
    let wcase = &fixture("resample_wild.json")[0];
    let one = pool(1).install(|| wild_run(wcase, &plan));
    let two = pool(2).install(|| wild_run(wcase, &plan));
    assert_eq!(one, two);
    // Full statistic vectors too, bit for bit.
    let stats = |threads| {
        pool(threads).install(|| {
            wild_statistics(
                crate::estimate::OlsColumns::new(&vector(&wcase["y"]), &matrix(&wcase["x"])),
                crate::estimate::Tested::new(1, 0.0),
                &ids(&wcase["clusters"]),
                Weights::Webb,
                &plan,
                &Absorbed::NONE,
            )
            .unwrap()
        })
    };
    let (a, b) = (stats(1), stats(2));
    assert_eq!(a.1.len(), 2_001);
    assert!(a
        .1
        .iter()
        .zip(&b.1)
        .all(|(x, y)| x.unwrap().to_bits() == y.unwrap().to_bits()));
}

/// Random mode agrees with the exact p-value within Monte Carlo error (4.5 binomial
/// standard deviations, 20,000 draws): the complete 924-assignment case and the
/// 10-cluster Rademacher case (1,024 vectors), exact values from the fixtures.
#[test]
fn random_draws_agree_with_enumeration() {
    let b = 20_000;
    let check = |p: f64, exact: f64| {
        let sd = (exact * (1.0 - exact) / b as f64).sqrt();
        assert!((p - exact).abs() < 4.5 * sd + 1.0 / b as f64, "{p} {exact}");
    };
    for case in fixture("resample_ri.json").iter().take(3) {
        let exact = case["count_two"].as_f64().unwrap() / case["draws"].as_f64().unwrap();
        let r = ri_run(case, &random_plan(b, 2024));
        assert!(!r.exact);
        check(r.p_value, exact);
        let upper = case["count_upper"].as_f64().unwrap() / case["draws"].as_f64().unwrap();
        check(r.p_upper, upper);
    }
    for case in fixture("resample_wild.json").iter().take(2) {
        let exact = case["count_two"].as_f64().unwrap() / case["draws"].as_f64().unwrap();
        let r = wild_run(case, &random_plan(b, 99));
        check(r.p_value, exact);
    }
}

/// Random draws with none requested and too many to enumerate is an error.
#[test]
fn no_draws_is_an_error() {
    let case = first_ri_case();
    let plan = Draws {
        draws: 0,
        seed: 1,
        exact_below: 10,
    };
    let err = randomization_test(
        crate::estimate::OlsColumns::new(&vector(&case["y"]), &matrix(&case["x"])),
        crate::estimate::Tested::new(1, 0.0),
        &CovSpec::Hc1,
        &Absorbed::NONE,
        &AssignmentDesign::Complete,
        RiStatistic::T,
        &plan,
    );
    assert_eq!(err, Err(ResampleError::NoDraws { count: Some(924) }));
}

/// Invented data: n = 40, x = [1, t, c], 8 clusters of 5, a second clustering of 4.
fn invented() -> (DVector<f64>, DMatrix<f64>, Vec<usize>, Vec<usize>) {
    let n = 40;
    let mut s = Stream::for_draw(5, 5);
    let mut u = || (s.next_u64() >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
    let x = DMatrix::from_fn(n, 3, |i, j| match j {
        0 => 1.0,
        1 => f64::from(u8::from(i % 3 == 0)),
        _ => (i as f64 * 0.37).sin(),
    });
    let y = DVector::from_fn(n, |i, _| {
        0.4 * x[(i, 1)] + x[(i, 2)] + u() * (1.0 + x[(i, 2)])
    });
    let c1 = (0..n).map(|i| i / 5).collect();
    let c2 = (0..n).map(|i| i % 4).collect();
    (y, x, c1, c2)
}

/// The partialled observed t equals the full-regression t of the crate's `ols` for every
/// covariance (classical, HC0–HC3, CR1, two-way), with and without a null; and a re-drawn
/// assignment's statistic equals `ols` on the re-drawn design.
#[test]
fn partialled_fit_matches_full_refit() {
    let (y, x, c1, c2) = invented();
    let specs = [
        CovSpec::Classical,
        CovSpec::Hc0,
        CovSpec::Hc1,
        CovSpec::Hc2,
        CovSpec::Hc3,
        CovSpec::Cluster { ids: c1.clone() },
        CovSpec::TwoWay {
            first: c1.clone(),
            second: c2,
        },
    ];
    let t_of = |y: &DVector<f64>, x: &DMatrix<f64>, spec: &CovSpec, null: f64| {
        let fit = ols(y, x, true, spec, &Absorbed::NONE).unwrap();
        (fit.coef[1] - null) / fit.cov[(1, 1)].sqrt()
    };
    let plan = random_plan(3, 8);
    for spec in &specs {
        for null in [0.0, 0.25] {
            let (obs, stats, _) = randomization_statistics(
                crate::estimate::OlsColumns::new(&y, &x),
                crate::estimate::Tested::new(1, null),
                spec,
                &Absorbed::NONE,
                &AssignmentDesign::Complete,
                RiStatistic::T,
                &plan,
            )
            .unwrap();
            let want = t_of(&y, &x, spec, null);
            assert!(
                (obs - want).abs() < 1e-11 * want.abs(),
                "{spec:?} {obs} {want}"
            );
            // Draw 1 re-done by hand: shuffle, then refit y − null·t on the new design.
            let a =
                Assigner::new(&AssignmentDesign::Complete, &x.columns(1, 1).into_owned()).unwrap();
            let tstar = a.values(&a.shuffle(&mut Stream::for_draw(8, 1)));
            let mut xs = x.clone();
            xs.set_column(1, &tstar.column(0));
            let y0 = &y - x.column(1) * null;
            let want = t_of(&y0, &xs, spec, 0.0);
            let got = stats[1].unwrap();
            assert!(
                (got - want).abs() < 1e-10 * want.abs(),
                "{spec:?} {got} {want}"
            );
        }
    }
}

/// The randomization AR observed statistic equals the crate's `anderson_rubin` at β₀
/// (classical, HC1, CR1), and its two-sided and upper p-values coincide.
#[test]
fn randomization_ar_observed_matches_anderson_rubin() {
    let (y, x, c1, _) = invented();
    let z = x.columns(1, 1).into_owned();
    let endog = DMatrix::from_fn(40, 1, |i, _| z[i] + 0.3 * x[(i, 2)] + (i as f64).cos());
    let yy = &y + endog.column(0) * 0.8;
    let exog = DMatrix::from_fn(40, 2, |i, j| if j == 0 { 1.0 } else { x[(i, 2)] });
    for spec in [
        CovSpec::Classical,
        CovSpec::Hc1,
        CovSpec::Cluster { ids: c1.clone() },
    ] {
        let ar = anderson_rubin(
            IvColumns::new(&yy, &exog, &endog, &z),
            &spec,
            &Absorbed::NONE,
            0.5,
            0.95,
        )
        .unwrap();
        let r = randomization_ar(
            crate::estimate::IvColumns::new(&yy, &exog, &endog, &z),
            None,
            0.5,
            &spec,
            &Absorbed::NONE,
            &AssignmentDesign::Complete,
            &random_plan(200, 3),
        )
        .unwrap();
        let want = ar.test.statistic;
        assert!(
            (r.observed - want).abs() < 1e-10 * want,
            "{spec:?} {} {want}",
            r.observed
        );
        assert_eq!(r.p_value, r.p_upper);
    }
}

/// The wild bootstrap's observed t is the CR1 t of `ols`, and the all-ones draw (draw 0 in
/// random mode, enumeration index 0 in exact mode) reproduces it.
#[test]
fn wild_all_ones_draw_is_observed() {
    let (y, x, c1, _) = invented();
    let fit = ols(
        &y,
        &x,
        true,
        &CovSpec::Cluster { ids: c1.clone() },
        &Absorbed::NONE,
    )
    .unwrap();
    let want = (fit.coef[2] - 0.9) / fit.cov[(2, 2)].sqrt();
    let (obs, stats, exact) = wild_statistics(
        crate::estimate::OlsColumns::new(&y, &x),
        crate::estimate::Tested::new(2, 0.9),
        &c1,
        Weights::Rademacher,
        &EXACT,
        &Absorbed::NONE,
    )
    .unwrap();
    assert!(exact);
    assert_eq!(stats.len(), 256);
    assert!((obs - want).abs() < 1e-11 * want.abs());
    assert!((stats[0].unwrap() - obs).abs() < 1e-10 * obs.abs());
    // Rademacher symmetry: w and −w give t* of opposite sign (index i and 255 − i).
    for i in 0..256 {
        let (a, b) = (stats[i].unwrap(), stats[255 - i].unwrap());
        assert!((a + b).abs() < 1e-10 * a.abs().max(1.0));
    }
}

/// Absorbing the block fixed effects (block means swept from y and the columns, a = 3)
/// gives the same statistics and p-values as including the block dummies: the fixture's
/// blocked HC1 case.
#[test]
fn absorbed_block_effects_match_dummies() {
    let case = fixture("resample_ri.json")
        .into_iter()
        .find(|c| c["name"] == "blocked_hc1_t")
        .unwrap();
    let y = vector(&case["y"]);
    let x = matrix(&case["x"]);
    let blocks = ids(&case["design"]["blocks"]);
    let sweep = |v: DVector<f64>| {
        let mut out = v.clone();
        for b in 0..3 {
            let members: Vec<usize> = (0..12).filter(|&i| blocks[i] == b).collect();
            let mean = members.iter().map(|&i| v[i]).sum::<f64>() / members.len() as f64;
            for &i in &members {
                out[i] -= mean;
            }
        }
        out
    };
    let ys = sweep(y);
    let mut xs = DMatrix::zeros(12, 2);
    xs.set_column(0, &sweep(x.column(0).into_owned()));
    xs.set_column(1, &sweep(x.column(4).into_owned()));
    let absorbed = Absorbed {
        df: 3,
        nested_df: 0,
        leverage: None,
    };
    let r = randomization_test(
        crate::estimate::OlsColumns::new(&ys, &xs),
        crate::estimate::Tested::new(0, 0.0),
        &CovSpec::Hc1,
        &absorbed,
        &design(&case["design"]),
        RiStatistic::T,
        &EXACT,
    )
    .unwrap();
    let d = case["draws"].as_f64().unwrap();
    assert!((r.observed - case["observed"].as_f64().unwrap()).abs() < 1e-10);
    assert_eq!(r.p_value, case["count_two"].as_f64().unwrap() / d);
    assert_eq!(r.p_upper, case["count_upper"].as_f64().unwrap() / d);
}
