//! The statistics of every sharp null from one fit of each draw (`NullFamily`) against a
//! separate randomization test at each null (`randomization_statistics`, itself checked
//! against full refits in `tests` and against statsmodels in `reference_tests`): every
//! covariance with a pencil, both statistics, cluster cells and the per-unit path, weights,
//! absorbed degrees of freedom and leverages, random draws and enumeration; two-way and HAC
//! errors have no family.

use nalgebra::{DMatrix, DVector};

use super::super::covariance::CovSpec;
use super::super::Absorbed;
use super::family::randomization_family;
use super::randomization::randomization_statistics;
use super::*;

/// Invented data: 60 units in 12 assignment clusters of sizes 1–9; x = [1, t, w, c] with t
/// assigned by cluster (6 of 12 treated), w unit-level and c cluster-level; a true effect
/// of 0.7 and cluster-level noise.
fn design() -> (DVector<f64>, DMatrix<f64>, Vec<usize>, DVector<f64>) {
    let mut s = Stream::for_draw(31, 0);
    let mut u = || (s.next_u64() >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
    let group = super::tests::twelve_clusters();
    let n = group.len();
    let level: Vec<f64> = (0..12).map(|_| u()).collect();
    let x = DMatrix::from_fn(n, 4, |i, j| match j {
        0 => 1.0,
        1 => f64::from(u8::from(group[i].is_multiple_of(2))),
        2 => u() * 3.0 + 10.0,
        _ => level[group[i]],
    });
    let y = DVector::from_fn(n, |i, _| {
        2.0 + 0.7 * x[(i, 1)] + 0.2 * x[(i, 2)] + level[group[i]] + u()
    });
    let weights = DVector::from_fn(n, |_, _| 0.5 + u() + 0.5);
    (y, x, group, weights)
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1e-12)
}

/// Every draw's statistic, for each null, as the separate test's.
#[test]
fn one_fit_per_draw_gives_every_null() {
    let (y, x, group, weights) = design();
    let n = y.len();
    let coarse: Vec<usize> = group.iter().map(|g| g / 3).collect();
    let covs = [
        CovSpec::Classical,
        CovSpec::Hc0,
        CovSpec::Hc1,
        CovSpec::Hc2,
        CovSpec::Hc3,
        CovSpec::Cluster { ids: group.clone() },
        CovSpec::Cluster { ids: coarse },
        CovSpec::Cluster {
            ids: (0..n).map(|i| i % 5).collect(),
        },
    ];
    let designs = [
        AssignmentDesign::Clustered {
            clusters: group.clone(),
        },
        AssignmentDesign::Complete,
    ];
    // 924 assignments of 6 treated clusters among 12: enumerated with the larger
    // threshold, 40 random draws with the smaller.
    let plans = [(40, 10), (0, 1_000)].map(|(draws, exact_below)| Draws {
        draws,
        seed: 77,
        exact_below,
    });
    // Absorbed effects are taken as given here (their degrees of freedom and leverage enter
    // the small-sample factors and the HC2/HC3 leverages; both paths share them).
    let absorbed_sets = [
        Absorbed::NONE,
        Absorbed {
            df: 3,
            nested_df: 1,
            leverage: Some((0..n).map(|i| 0.02 + 0.01 * (i % 7) as f64).collect()),
        },
    ];
    let mut compared = 0usize;
    for absorbed in &absorbed_sets {
        for design in &designs {
            for cov in &covs {
                for weighted in [false, true] {
                    for statistic in [RiStatistic::T, RiStatistic::Estimate] {
                        for plan in &plans {
                            if matches!(design, AssignmentDesign::Complete) && plan.draws == 0 {
                                continue; // C(60, 30) assignments: too many to enumerate.
                            }
                            let cols = OlsColumns::new(&y, &x);
                            let cols = if weighted {
                                cols.weighted(&weights)
                            } else {
                                cols
                            };
                            let family = randomization_family(
                                cols, 1, cov, absorbed, design, statistic, plan,
                            )
                            .unwrap()
                            .expect("a pencil for every one-way covariance");
                            for null in [-1.3, 0.0, 0.4, 0.7, 7.5] {
                                let (o1, s1, e1) = randomization_statistics(
                                    cols,
                                    Tested::new(1, null),
                                    cov,
                                    absorbed,
                                    design,
                                    statistic,
                                    plan,
                                )
                                .unwrap();
                                let (o2, s2, e2) = family.statistics(null).unwrap();
                                assert_eq!(
                                    family.p_value(null).unwrap(),
                                    summarise(o2, &s2, e2).p_value
                                );
                                let what = format!(
                                "{design:?} {cov:?} w={weighted} {statistic:?} {plan:?} τ₀={null}"
                            );
                                assert_eq!(e1, e2, "{what}");
                                assert!(close(o1, o2), "{what}: observed {o1} {o2}");
                                assert_eq!(s1.len(), s2.len(), "{what}");
                                for (b, (a, c)) in s1.iter().zip(&s2).enumerate() {
                                    match (a, c) {
                                        (Some(a), Some(c)) => {
                                            assert!(close(*a, *c), "{what} draw {b}: {a} {c}");
                                            compared += 1;
                                        }
                                        (None, None) => {}
                                        other => panic!("{what} draw {b}: {other:?}"),
                                    }
                                }
                            }
                        }
                    }
                }
            }
        }
    }
    assert!(compared > 200_000, "only {compared} statistics compared");
}

/// The p-value at each null is the separate test's, so the interval's search meets the same
/// candidates; under two-way and HAC errors there is no family and each candidate is its own
/// test.
#[test]
fn p_values_agree_and_refitting_errors_have_no_family() {
    let (y, x, group, _) = design();
    let design = AssignmentDesign::Clustered {
        clusters: group.clone(),
    };
    let plan = Draws {
        draws: 0,
        seed: 1,
        exact_below: 1_000,
    };
    let cov = CovSpec::Cluster { ids: group.clone() };
    let cols = OlsColumns::new(&y, &x);
    let family = randomization_family(
        cols,
        1,
        &cov,
        &Absorbed::NONE,
        &design,
        RiStatistic::T,
        &plan,
    )
    .unwrap()
    .unwrap();
    let mut distinct = std::collections::BTreeSet::new();
    let (mut lowest, mut highest) = (1.0_f64, 0.0_f64);
    for step in -40..=40 {
        let null = 0.7 + 0.05 * f64::from(step);
        let one = randomization_test(
            cols,
            Tested::new(1, null),
            &cov,
            &Absorbed::NONE,
            &design,
            RiStatistic::T,
            &plan,
        )
        .unwrap();
        let (o, s, e) = family.statistics(null).unwrap();
        let all = summarise(o, &s, e);
        assert_eq!(one.p_value, all.p_value, "τ₀ = {null}");
        assert_eq!(one.p_value, family.p_value(null).unwrap(), "τ₀ = {null}");
        assert_eq!(one.draws_used, all.draws_used, "τ₀ = {null}");
        distinct.insert(one.p_value.to_bits());
        lowest = lowest.min(one.p_value);
        highest = highest.max(one.p_value);
    }
    // The scan crosses the interval's ends: many p-values, down to rejection.
    assert!(
        distinct.len() >= 10 && lowest < 0.05 && highest > 0.5,
        "{} distinct p-values in [{lowest}, {highest}]",
        distinct.len()
    );
    let two_way = CovSpec::TwoWay {
        first: group,
        second: (0..y.len()).map(|i| i % 4).collect(),
    };
    let hac = CovSpec::Hac {
        positions: (0..y.len()).collect(),
        bandwidth: 3.0,
    };
    for refitting in [&two_way, &hac] {
        let none = randomization_family(
            cols,
            1,
            refitting,
            &Absorbed::NONE,
            &design,
            RiStatistic::T,
            &plan,
        )
        .unwrap();
        assert!(none.is_none(), "{refitting:?}");
    }
}
