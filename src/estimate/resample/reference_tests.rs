//! Checks against the brute-force fixtures written by `tests/reference/resampling.py`
//! (statsmodels / numpy refits of every assignment and every weight vector; see that
//! script's docstring). p-values are ratios of counts and are compared exactly; the
//! statistics (sorted, since the enumeration orders differ) to 1e-10 relative.

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::super::covariance::CovSpec;
use super::super::Absorbed;
use super::randomization::{randomization_ar_statistics, randomization_statistics};
use super::wild::wild_statistics;
use super::*;

pub(super) fn fixture(name: &str) -> Vec<Value> {
    let v = crate::testing::fixture(name);
    v["cases"].as_array().unwrap().clone()
}

pub(super) fn vector(v: &Value) -> DVector<f64> {
    DVector::from_vec(
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect(),
    )
}

pub(super) fn matrix(v: &Value) -> DMatrix<f64> {
    let rows: Vec<Vec<f64>> = v
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            r.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect()
        })
        .collect();
    DMatrix::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
}

pub(super) fn ids(v: &Value) -> Vec<usize> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_u64().unwrap() as usize)
        .collect()
}

pub(super) fn design(v: &Value) -> AssignmentDesign {
    match v["kind"].as_str().unwrap() {
        "complete" => AssignmentDesign::Complete,
        "blocked" => AssignmentDesign::Blocked {
            blocks: ids(&v["blocks"]),
        },
        "clustered" => AssignmentDesign::Clustered {
            clusters: ids(&v["clusters"]),
        },
        other => panic!("{other}"),
    }
}

pub(super) fn cov(v: &Value) -> CovSpec {
    match v["kind"].as_str().unwrap() {
        "classical" => CovSpec::Classical,
        "hc1" => CovSpec::Hc1,
        "hc3" => CovSpec::Hc3,
        "cluster" => CovSpec::Cluster {
            ids: ids(&v["ids"]),
        },
        other => panic!("{other}"),
    }
}

/// Exhaustive plan: enumerate whenever possible, no random draws.
pub(super) const EXACT: Draws = Draws {
    draws: 0,
    seed: 0,
    exact_below: DEFAULT_EXACT_BELOW,
};

/// Compares one case; returns the largest relative difference of the statistics.
fn compare(case: &Value, observed: f64, stats: &[Option<f64>], exact: bool) -> f64 {
    let name = case["name"].as_str().unwrap();
    let draws = case["draws"].as_u64().unwrap() as usize;
    assert!(exact, "{name}");
    assert_eq!(stats.len(), draws, "{name}");
    let mut ours: Vec<f64> = stats.iter().map(|s| s.unwrap()).collect();
    ours.sort_by(f64::total_cmp);
    let theirs = vector(&case["stats_sorted"]);
    let rel = |a: f64, b: f64| (a - b).abs() / b.abs().max(1.0);
    let mut worst = rel(observed, case["observed"].as_f64().unwrap());
    for (a, b) in ours.iter().zip(theirs.iter()) {
        worst = worst.max(rel(*a, *b));
    }
    assert!(worst < 1e-10, "{name}: {worst:e}");
    let r = summarise(observed, stats, exact);
    let d = draws as f64;
    assert_eq!(r.draws_used, draws, "{name}");
    assert_eq!(r.skipped, 0, "{name}");
    assert_eq!(
        r.p_value,
        case["count_two"].as_u64().unwrap() as f64 / d,
        "{name}"
    );
    assert_eq!(
        r.p_upper,
        case["count_upper"].as_u64().unwrap() as f64 / d,
        "{name}"
    );
    assert_eq!(
        r.p_lower,
        case["count_lower"].as_u64().unwrap() as f64 / d,
        "{name}"
    );
    worst
}

/// Randomization tests: complete (924 assignments), blocked (216), clustered (70) and a
/// three-valued treatment (1680), under classical, HC1, HC3 and CR1 covariances, for the
/// t statistic and the estimate, against statsmodels refits of every assignment.
#[test]
fn randomization_matches_brute_force() {
    let mut worst: f64 = 0.0;
    for case in fixture("resample_ri.json") {
        let statistic = match case["statistic"].as_str().unwrap() {
            "t" => RiStatistic::T,
            _ => RiStatistic::Estimate,
        };
        let (observed, stats, exact) = randomization_statistics(
            crate::estimate::OlsColumns::new(&vector(&case["y"]), &matrix(&case["x"])),
            crate::estimate::Tested::new(
                case["treatment"].as_u64().unwrap() as usize,
                case["null"].as_f64().unwrap(),
            ),
            &cov(&case["cov"]),
            &Absorbed::NONE,
            &design(&case["design"]),
            statistic,
            &EXACT,
        )
        .unwrap();
        worst = worst.max(compare(&case, observed, &stats, exact));
    }
    eprintln!("randomization: largest relative difference {worst:e}");
}

/// Randomization AR: 924 instrument assignments, classical/HC1/HC3, against statsmodels
/// Wald/L of the instrument coefficient for every assignment.
#[test]
fn randomization_ar_matches_brute_force() {
    let mut worst: f64 = 0.0;
    for case in fixture("resample_ar.json") {
        let endog = vector(&case["endog"]);
        let (observed, stats, exact) = randomization_ar_statistics(
            crate::estimate::IvColumns::new(
                &vector(&case["y"]),
                &matrix(&case["exog"]),
                &DMatrix::from_column_slice(endog.len(), 1, endog.as_slice()),
                &matrix(&case["instruments"]),
            ),
            None,
            case["beta0"].as_f64().unwrap(),
            &cov(&case["cov"]),
            &Absorbed::NONE,
            &design(&case["design"]),
            &EXACT,
        )
        .unwrap();
        worst = worst.max(compare(&case, observed, &stats, exact));
    }
    eprintln!("randomization AR: largest relative difference {worst:e}");
}

/// Wild cluster bootstrap: all 1,024 Rademacher vectors for 10 clusters (two nulls) and all
/// 7,776 Webb vectors for 5 clusters, against numpy refits of every bootstrap sample.
#[test]
fn wild_bootstrap_matches_brute_force() {
    let mut worst: f64 = 0.0;
    for case in fixture("resample_wild.json") {
        let weights = match case["weights"].as_str().unwrap() {
            "rademacher" => Weights::Rademacher,
            _ => Weights::Webb,
        };
        let (observed, stats, exact) = wild_statistics(
            crate::estimate::OlsColumns::new(&vector(&case["y"]), &matrix(&case["x"])),
            crate::estimate::Tested::new(
                case["coef_index"].as_u64().unwrap() as usize,
                case["null"].as_f64().unwrap(),
            ),
            &ids(&case["clusters"]),
            weights,
            &EXACT,
            &Absorbed::NONE,
        )
        .unwrap();
        worst = worst.max(compare(&case, observed, &stats, exact));
    }
    eprintln!("wild bootstrap: largest relative difference {worst:e}");
}

/// Assignment counts against Python's exact integers (math.comb, factorials); C(140, 70)
/// exceeds 2^128 − 1 and must be reported as too many.
#[test]
fn counts_match_exact_integers() {
    for case in fixture("resample_counts.json") {
        let expected: u128 = match case["count"].as_str().unwrap().parse() {
            Ok(c) => c,
            Err(_) => {
                // Beyond u128: the values listed must overflow.
                let n = case["n"].as_u64().unwrap() as usize;
                let ones = case["ones"].as_u64().unwrap() as usize;
                let t = DMatrix::from_fn(n, 1, |i, _| f64::from(u8::from(i < ones)));
                let got = count_assignments(&AssignmentDesign::Complete, &t).unwrap();
                assert_eq!(got, None, "{}", case["what"]);
                continue;
            }
        };
        let t = if let Some(multi) = case.get("multi") {
            let m = ids(multi);
            let vals: Vec<f64> = m
                .iter()
                .enumerate()
                .flat_map(|(v, &c)| std::iter::repeat_n(v as f64, c))
                .collect();
            DMatrix::from_column_slice(vals.len(), 1, &vals)
        } else if let Some(n) = case.get("n") {
            let (n, ones) = (n.as_u64().unwrap() as usize, case["ones"].as_u64().unwrap());
            DMatrix::from_fn(n, 1, |i, _| f64::from(u8::from((i as u64) < ones)))
        } else {
            assert_eq!(expected, u128::MAX, "{}", case["what"]);
            continue;
        };
        let got = count_assignments(&AssignmentDesign::Complete, &t).unwrap();
        assert_eq!(got, Some(expected), "{}", case["what"]);
    }
}
