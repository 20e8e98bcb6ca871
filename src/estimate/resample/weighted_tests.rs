//! Resampled tests with probability weights against the brute-force fixture written by
//! `tests/reference/weights_resampling.py` (every Rademacher vector of 8 clusters and every
//! one of the 924 assignments, each draw refitted by statsmodels WLS or linearmodels IV2SLS
//! with weights): the counts (p-values are their ratios) exactly, the observed and sorted
//! draw statistics within the fixture tolerance (relative 1e-8).

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::super::covariance::CovSpec;
use super::super::linear::IvColumns;
use super::super::Absorbed;
use super::randomization::{randomization_ar_statistics, randomization_statistics, WeightedRedraw};
use super::reference_tests::{ids, EXACT};
use super::wild::wild_statistics;
use super::wre::wre_statistics;
use super::*;
use crate::testing::{rel_diff, FIXTURE_TOL};

fn column(data: &Value, name: &str) -> DVector<f64> {
    let v: Vec<f64> = data[name]
        .as_array()
        .expect("column")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect();
    DVector::from_vec(v)
}

/// The columns named, side by side ("1" is the constant).
fn columns(data: &Value, names: &[&str]) -> DMatrix<f64> {
    let cols: Vec<DVector<f64>> = names
        .iter()
        .map(|n| match *n {
            "1" => DVector::from_element(column(data, "y").len(), 1.0),
            n => column(data, n),
        })
        .collect();
    DMatrix::from_columns(&cols)
}

/// The draws' statistics and counts against the fixture's case.
fn compare(e: &Value, observed: f64, stats: &[Option<f64>], exact: bool) {
    assert!(exact);
    let want = e["observed"].as_f64().expect("observed");
    assert!(
        rel_diff(observed, want) < FIXTURE_TOL,
        "{observed} vs {want}"
    );
    let r = summarise(observed, stats, exact);
    let draws = e["draws"].as_u64().expect("draws") as f64;
    assert_eq!(r.draws_used as f64, draws);
    for (p, key) in [
        (r.p_value, "count_two"),
        (r.p_upper, "count_upper"),
        (r.p_lower, "count_lower"),
    ] {
        assert_eq!(p, e[key].as_f64().expect("count") / draws, "{key}");
    }
    let mut got: Vec<f64> = stats.iter().map(|s| s.expect("a statistic")).collect();
    got.sort_by(f64::total_cmp);
    for (g, w) in got.iter().zip(e["stats_sorted"].as_array().expect("stats")) {
        let w = w.as_f64().expect("stat");
        assert!(rel_diff(*g, w) < FIXTURE_TOL, "{g} vs {w}");
    }
}

/// The √w-scaled copy of `m`'s rows.
fn scaled(m: &DMatrix<f64>, w: &DVector<f64>) -> DMatrix<f64> {
    scale_rows(m.clone(), Some(&w.map(f64::sqrt)))
}

#[test]
fn weighted_wild_bootstraps_match_brute_force() {
    let f = crate::testing::fixture("weights_resampling.json");
    let (d, e) = (&f["clustered"], &f["expected"]);
    let (y, w, g) = (column(d, "y"), column(d, "w"), ids(&d["g"]));
    let x = columns(d, &["x", "1", "c"]);
    let null = e["wild_ols"]["null"].as_f64().expect("null");
    let (obs, stats, exact) = wild_statistics(
        OlsColumns::new(&y, &x).weighted(&w),
        Tested::new(0, null),
        &g,
        Weights::Rademacher,
        &EXACT,
        &Absorbed::NONE,
    )
    .expect("wild");
    compare(&e["wild_ols"], obs, &stats, exact);
    // 2SLS: the wild restricted efficient bootstrap of the √w-scaled model.
    let ys = y.component_mul(&w.map(f64::sqrt));
    let (exog, endog) = (columns(d, &["1", "c"]), columns(d, &["x"]));
    let z = columns(d, &["z1", "z2"]);
    let (exog, endog, z) = (scaled(&exog, &w), scaled(&endog, &w), scaled(&z, &w));
    let null = e["wild_tsls"]["null"].as_f64().expect("null");
    let (obs, stats, exact) = wre_statistics(
        IvColumns::new(&ys, &exog, &endog, &z),
        null,
        &g,
        Weights::Rademacher,
        &EXACT,
        &Absorbed::NONE,
    )
    .expect("wre");
    compare(&e["wild_tsls"], obs, &stats, exact);
}

#[test]
fn weighted_randomization_matches_brute_force() {
    let f = crate::testing::fixture("weights_resampling.json");
    let (d, e) = (&f["randomized"], &f["expected"]);
    let (y, w) = (column(d, "y"), column(d, "w"));
    let x = columns(d, &["t", "1", "c"]);
    for (case, statistic) in [
        ("ri_t", RiStatistic::T),
        ("ri_estimate", RiStatistic::Estimate),
    ] {
        let null = e[case]["null"].as_f64().expect("null");
        let (obs, stats, exact) = randomization_statistics(
            OlsColumns::new(&y, &x).weighted(&w),
            Tested::new(0, null),
            &CovSpec::Hc1,
            &Absorbed::NONE,
            &AssignmentDesign::Complete,
            statistic,
            &EXACT,
        )
        .expect("randomization");
        compare(&e[case], obs, &stats, exact);
    }
    // Weights of the wrong length or not positive are errors, not a silent unweighted test.
    let short = DVector::from_element(3, 1.0);
    let zero = DVector::from_fn(y.len(), |i, _| if i == 0 { 0.0 } else { 1.0 });
    for bad in [&short, &zero] {
        let r = randomization_statistics(
            OlsColumns::new(&y, &x).weighted(bad),
            Tested::new(0, 0.0),
            &CovSpec::Hc1,
            &Absorbed::NONE,
            &AssignmentDesign::Complete,
            RiStatistic::T,
            &EXACT,
        );
        assert!(r.is_err());
    }
}

/// The randomization Anderson–Rubin test of weighted 2SLS: the √w-scaled problem, the
/// instrument re-drawn in the data's units with each unit keeping its weight, against every
/// one of the 924 assignments refitted by statsmodels WLS (HC1).
#[test]
fn weighted_randomization_ar_matches_brute_force() {
    let f = crate::testing::fixture("weights_resampling.json");
    let (d, e) = (&f["randomized"], &f["expected"]["ri_ar"]);
    let (y, w) = (column(d, "y"), column(d, "w"));
    let ys = y.component_mul(&w.map(f64::sqrt));
    let (exog, endog, z) = (
        columns(d, &["1", "c"]),
        columns(d, &["x"]),
        columns(d, &["t"]),
    );
    let (exog_s, endog_s, z_s) = (scaled(&exog, &w), scaled(&endog, &w), scaled(&z, &w));
    let null = e["null"].as_f64().expect("null");
    let redraw = WeightedRedraw {
        instruments: &z,
        weights: &w,
    };
    let (obs, stats, exact) = randomization_ar_statistics(
        IvColumns::new(&ys, &exog_s, &endog_s, &z_s),
        Some(redraw),
        null,
        &CovSpec::Hc1,
        &Absorbed::NONE,
        &AssignmentDesign::Complete,
        &EXACT,
    )
    .expect("randomization AR");
    compare(e, obs, &stats, exact);
}
