//! Unit tests of the summaries against hand examples and reference fixtures.

use super::*;
use crate::distribution::Reference;
use crate::estimate::CovSpec;
use crate::inference::test_p_value;
use crate::testing::fixture;
use nalgebra::DMatrix;
use serde_json::Value;

const NAN: f64 = f64::NAN;

fn close(a: f64, b: f64, rel: f64) -> bool {
    crate::testing::rel_diff(a, b) <= rel
}

/// Hand example (6 rows, reference rows 0–2). Component A: reference 1, 2, 3 → mean 2,
/// SD 1. Component B (flipped): reference 10, 14, 12 → mean 12, SD 2, z_B = −(B − 12)/2.
/// Raw index = mean of available z: rows (0: −1, +1) → 0, (1: 0, −1) → −½, (2: 1, 0) → ½,
/// (3: A = 4, B = 8: 2, 2) → 2, (4: A = 2, B missing: 0) → 0, (5: none) → NaN. Reference
/// mean 0, SD ½, so the index is 0, −1, 1, 4, 0, NaN (formula of Kling, Liebman and Katz
/// 2007 as documented on [`mean_z`]).
#[test]
fn mean_z_six_rows_by_hand() {
    let x = DMatrix::from_row_slice(
        6,
        2,
        &[
            1.0, 10.0, 2.0, 14.0, 3.0, 12.0, 4.0, 8.0, 2.0, NAN, NAN, NAN,
        ],
    );
    let reference = [true, true, true, false, false, false];
    let idx = mean_z(&x, &reference, &[false, true]).unwrap();
    let expected = [0.0, -1.0, 1.0, 4.0, 0.0];
    for (g, e) in idx.iter().zip(&expected) {
        assert!((g - e).abs() < 1e-14, "{idx}");
    }
    assert!(idx[5].is_nan());
}

/// Hand example for inverse-covariance weights. Reference rows 0–3 have centred
/// components a = (1, 1, −1, −1), b = (1, −1, 1, −1), c = (1, 0, −1, 0) (means 0), so
/// the covariance of their z-scores is the correlation matrix with corr(a, b) = 0,
/// corr(b, c) = 0 and corr(a, c) = a·c/(|a||c|) = 2/√8 = r = 1/√2. Its inverse has the
/// (a, c) block [[1, −r], [−r, 1]]/(1 − r²) = 2[[1, −r], [−r, 1]] and 1 for b, so the
/// row sums are w = (2 − √2, 1, 2 − √2) (Anderson 2008, weights Σ⁻¹1). Row 4 has every
/// component, row 5 lacks c (its weights renormalise over a, b), row 6 has none.
#[test]
fn inverse_covariance_by_hand() {
    let x = DMatrix::from_row_slice(
        7,
        3,
        &[
            1.0, 1.0, 1.0, 1.0, -1.0, 0.0, -1.0, 1.0, -1.0, -1.0, -1.0, 0.0, 2.0, 0.5, -1.0, 1.0,
            3.0, NAN, NAN, NAN, NAN,
        ],
    );
    let reference = [true, true, true, true, false, false, false];
    let idx = inverse_covariance(&x, &reference, &[false, false, false]).unwrap();
    // z-scores: SD of a and b is √(4/3), of c √(2/3).
    let (sa, sc) = ((4.0_f64 / 3.0).sqrt(), (2.0_f64 / 3.0).sqrt());
    let w = [2.0 - 2.0_f64.sqrt(), 1.0, 2.0 - 2.0_f64.sqrt()];
    let raw = |z: &[f64], avail: &[usize]| -> f64 {
        let num: f64 = avail.iter().map(|&c| w[c] * z[c]).sum();
        let den: f64 = avail.iter().map(|&c| w[c]).sum();
        num / den
    };
    let all = [0, 1, 2];
    let mut raws: Vec<f64> = (0..5)
        .map(|i| raw(&[x[(i, 0)] / sa, x[(i, 1)] / sa, x[(i, 2)] / sc], &all))
        .collect();
    raws.push(raw(&[1.0 / sa, 3.0 / sa, 0.0], &[0, 1]));
    let r = &raws[..4];
    let m = r.iter().sum::<f64>() / 4.0;
    let sd = (r.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / 3.0).sqrt();
    for i in 0..6 {
        let e = (raws[i] - m) / sd;
        assert!((idx[i] - e).abs() < 1e-13, "{i}: {} vs {e}", idx[i]);
    }
    assert!(idx[6].is_nan());
    // Unequal weights matter: the equally weighted index differs on row 4.
    let plain = mean_z(&x, &reference, &[false, false, false]).unwrap();
    assert!((plain[4] - idx[4]).abs() > 1e-3);
}

#[test]
fn index_errors() {
    let x = DMatrix::from_row_slice(3, 2, &[1.0, 2.0, 1.0, 3.0, 2.0, NAN]);
    assert!(matches!(
        mean_z(&x, &[true, true, false], &[false, false]),
        Err(SummaryError::ConstantInReference { component: Some(0) })
    ));
    assert!(matches!(
        mean_z(&x, &[true, false, true], &[false, false]),
        Err(SummaryError::ReferenceTooSmall {
            component: 1,
            available: 1
        })
    ));
    assert!(matches!(
        mean_z(&x, &[true, true], &[false, false]),
        Err(SummaryError::Length { .. })
    ));
    let inf = DMatrix::from_row_slice(2, 1, &[1.0, f64::INFINITY]);
    assert_eq!(
        mean_z(&inf, &[true, true], &[false]),
        Err(SummaryError::NotFinite)
    );
    let y = DMatrix::from_row_slice(3, 2, &[1.0, 2.0, 2.0, 3.0, 3.0, 5.0]);
    assert!(matches!(
        inverse_covariance(&y, &[true, true, false], &[false, false]),
        Err(SummaryError::TooFewCompleteRows { .. })
    ));
}

/// Lee (2009) bounds by hand. Treated: 10 units, 8 observed (q_t = 0.8), outcomes
/// 1..8; comparison: 10 units, 6 observed (q_c = 0.6), outcomes 2, 2, 3, 3, 4, 4 (mean 3).
/// p = (0.8 − 0.6)/0.8 = ¼, K = 8·¾ = 6: lower = mean(1..6) − 3 = 0.5, upper =
/// mean(3..8) − 3 = 2.5 (Lee 2009, section 3: trim the arm with the higher observed
/// share by p from the top for the lower bound, from the bottom for the upper bound).
#[test]
fn lee_bounds_by_hand() {
    let mut y = vec![NAN; 20];
    let mut obs = vec![false; 20];
    let treated: Vec<bool> = (0..20).map(|i| i < 10).collect();
    for i in 0..8 {
        y[i] = (i + 1) as f64;
        obs[i] = true;
    }
    for (j, v) in [2.0, 2.0, 3.0, 3.0, 4.0, 4.0].iter().enumerate() {
        y[10 + j] = *v;
        obs[10 + j] = true;
    }
    let b = lee_bounds(&y, &obs, &treated).unwrap();
    assert_eq!(b.trimmed_arm, TrimmedArm::Treated);
    assert!((b.trim_share - 0.25).abs() < 1e-15);
    assert!((b.lower - 0.5).abs() < 1e-14, "{b:?}");
    assert!((b.upper - 2.5).abs() < 1e-14, "{b:?}");

    // Drop treated outcome 8 and one comparison 4: q_t = 0.7, q_c = 0.5 (outcomes
    // 2, 2, 3, 3, 4, mean 2.8), p = 2/7, K = 10·0.5 = 5 of 7: lower = mean(1..5) − 2.8 =
    // 0.2, upper = mean(3..7) − 2.8 = 2.2.
    obs[7] = false;
    obs[15] = false;
    let b = lee_bounds(&y, &obs, &treated).unwrap();
    assert!((b.lower - 0.2).abs() < 1e-14, "{b:?}");
    assert!((b.upper - 2.2).abs() < 1e-14, "{b:?}");

    // Fractional: treated 3 units all observed (1, 2, 4), comparison 2 units, 1 observed
    // (outcome 0): q_t = 1, q_c = ½, K = 3·½ = 1.5: lower = (1 + ½·2)/1.5 = 4/3,
    // upper = (4 + ½·2)/1.5 = 10/3.
    let b = lee_bounds(
        &[1.0, 2.0, 4.0, 0.0, NAN],
        &[true, true, true, true, false],
        &[true, true, true, false, false],
    )
    .unwrap();
    assert!((b.lower - 4.0 / 3.0).abs() < 1e-14, "{b:?}");
    assert!((b.upper - 10.0 / 3.0).abs() < 1e-14, "{b:?}");

    // Comparison trimmed: swap the arms of the first example, bounds become −2.5, −0.5.
    let swapped: Vec<bool> = treated.iter().map(|t| !t).collect();
    let mut obs = vec![false; 20];
    for o in obs.iter_mut().take(8) {
        *o = true;
    }
    for o in obs.iter_mut().skip(10).take(6) {
        *o = true;
    }
    let b = lee_bounds(&y, &obs, &swapped).unwrap();
    assert_eq!(b.trimmed_arm, TrimmedArm::Comparison);
    assert!((b.lower + 2.5).abs() < 1e-14, "{b:?}");
    assert!((b.upper + 0.5).abs() < 1e-14, "{b:?}");

    assert!(matches!(
        lee_bounds(&[1.0, 2.0], &[true, false], &[true, false]),
        Err(SummaryError::EmptyArm {
            arm: "comparison",
            ..
        })
    ));
    assert_eq!(
        lee_bounds(&[1.0, NAN], &[true, true], &[true, false]),
        Err(SummaryError::NotFinite)
    );
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap_or(f64::NAN))
        .collect()
}

fn bools(v: &Value) -> Vec<bool> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_bool().unwrap())
        .collect()
}

fn matrix(v: &Value) -> DMatrix<f64> {
    let rows: Vec<Vec<f64>> = v.as_array().unwrap().iter().map(floats).collect();
    DMatrix::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
}

/// Against numpy (`tests/reference/summaries.py`, fixture `summary_indices.json`):
/// seeded components with 8% missing, flips, both indices; relative 1e-12.
#[test]
fn indices_agree_with_numpy() {
    let doc = fixture("summary_indices.json");
    let x = matrix(&doc["components"]);
    let reference = bools(&doc["reference"]);
    let flip = bools(&doc["flip"]);
    for (name, got) in [
        ("mean_z", mean_z(&x, &reference, &flip).unwrap()),
        (
            "inverse_covariance",
            inverse_covariance(&x, &reference, &flip).unwrap(),
        ),
    ] {
        let expected = floats(&doc[name]);
        assert_eq!(got.len(), expected.len());
        let mut nans = 0;
        for (g, e) in got.iter().zip(&expected) {
            if e.is_nan() {
                assert!(g.is_nan(), "{name}");
                nans += 1;
            } else {
                assert!(close(*g, *e, 1e-12), "{name}: {g} vs {e}");
            }
        }
        assert!(nans > 0, "the fixture must contain an all-missing row");
    }
}

fn spec(kind: &str, clusters: &[usize]) -> CovSpec {
    match kind {
        "classical" => CovSpec::Classical,
        "hc1" => CovSpec::Hc1,
        "hc3" => CovSpec::Hc3,
        "cluster" => CovSpec::Cluster {
            ids: clusters.to_vec(),
        },
        other => panic!("unknown kind {other}"),
    }
}

/// Against statsmodels OLS (`tests/reference/summaries.py`, fixture
/// `summary_balance.json`): per-covariate differences, SEs, t and p-values, and the
/// joint F test (`f_test`) with its p-value, for classical, HC1, HC3 and CR1 errors, and
/// the differential attrition regression; relative 1e-9.
#[test]
fn balance_and_attrition_agree_with_statsmodels() {
    let doc = fixture("summary_balance.json");
    let x = matrix(&doc["covariates"]);
    let treated = bools(&doc["treated"]);
    let observed = bools(&doc["observed"]);
    let clusters: Vec<usize> = doc["clusters"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap() as usize)
        .collect();
    let means_t = floats(&doc["mean_treated"]);
    let means_c = floats(&doc["mean_comparison"]);
    for case in doc["cases"].as_array().unwrap() {
        let kind = case["kind"].as_str().unwrap();
        let s = spec(kind, &clusters);
        let table = balance(&x, &treated, &s, None, None).unwrap();
        let diff = floats(&case["difference"]);
        let se = floats(&case["std_error"]);
        let p = floats(&case["p_value"]);
        for (j, row) in table.rows.iter().enumerate() {
            assert!(close(row.mean_treated, means_t[j], 1e-12), "{kind} {j}");
            assert!(close(row.mean_comparison, means_c[j], 1e-12), "{kind} {j}");
            assert!(close(row.difference, diff[j], 1e-9), "{kind} {j}");
            assert!(close(row.std_error, se[j], 1e-9), "{kind} {j}");
            assert!(close(test_p_value(&row.t), p[j], 1e-9), "{kind} {j}");
        }
        let f = case["joint_f"].as_f64().unwrap();
        let fp = case["joint_p"].as_f64().unwrap();
        let df2 = case["joint_df_denom"].as_f64().unwrap();
        assert!(close(table.joint.statistic, f, 1e-9), "{kind}");
        assert!(close(test_p_value(&table.joint), fp, 1e-9), "{kind}");
        assert_eq!(
            table.joint.reference,
            Reference::F {
                df1: x.ncols() as f64,
                df2
            }
        );
        let a = differential_attrition(&observed, &treated, &s, None, None).unwrap();
        let att = &case["attrition"];
        assert!(close(
            a.difference,
            att["difference"].as_f64().unwrap(),
            1e-9
        ));
        assert!(close(a.std_error, att["std_error"].as_f64().unwrap(), 1e-9));
        assert!(close(
            test_p_value(&a.t),
            att["p_value"].as_f64().unwrap(),
            1e-9
        ));
    }
}

/// Against an independent numpy implementation of the trimming (cumulative weights on the
/// sorted outcomes; fixture `summary_lee.json`) on seeded data, with the treated or the
/// comparison arm trimmed and fractional kept mass; relative 1e-12.
#[test]
fn lee_bounds_agree_with_numpy() {
    let doc = fixture("summary_lee.json");
    for case in doc["cases"].as_array().unwrap() {
        let y = floats(&case["outcome"]);
        let obs = bools(&case["observed"]);
        let treated = bools(&case["treated"]);
        let b = lee_bounds(&y, &obs, &treated).unwrap();
        let arm = case["trimmed_arm"].as_str().unwrap();
        assert_eq!(
            b.trimmed_arm,
            if arm == "treated" {
                TrimmedArm::Treated
            } else {
                TrimmedArm::Comparison
            }
        );
        assert!(close(
            b.trim_share,
            case["trim_share"].as_f64().unwrap(),
            1e-12
        ));
        assert!(
            close(b.lower, case["lower"].as_f64().unwrap(), 1e-12),
            "{b:?}"
        );
        assert!(
            close(b.upper, case["upper"].as_f64().unwrap(), 1e-12),
            "{b:?}"
        );
    }
}
