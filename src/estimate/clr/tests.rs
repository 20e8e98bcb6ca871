//! Tests of the Kleibergen LM and Moreira CLR tests.
//!
//! Sources: the fixture `tests/reference/fixtures/clr_lm.json` written by
//! `tests/reference/clr_lm.py` (ivmodels `lagrange_multiplier_test` and
//! `conditional_likelihood_ratio_test` with the "moreira2003conditional" integration at
//! tol 1e-10; versions recorded in the fixture), statistics to 1e-6 relative and p-values
//! to 1e-6 absolute (observed differences are printed); and the limits of the conditional
//! law stated by Moreira (2003, section 3): as Q_T → 0 the CLR p-value tends to the
//! χ²(L) tail (the AR test), as Q_T → ∞ to the χ²(1) tail (the LR test with strong
//! instruments); with L = 1 CLR = AR and the p-value is the χ²(1) tail.

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::clr_p_value;
use crate::distribution::Reference;
use crate::estimate::{Absorbed, IvProblem};
use crate::inference::{p_value, test_p_value, Direction};

pub(super) fn column(data: &Value, name: &str, n: usize) -> DVector<f64> {
    if name == "const" {
        return DVector::from_element(n, 1.0);
    }
    let v: Vec<f64> = data[name]
        .as_array()
        .expect("column")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect();
    DVector::from_vec(v)
}

pub(super) fn matrix(data: &Value, names: &Value, n: usize) -> DMatrix<f64> {
    let names = names.as_array().expect("names");
    let mut m = DMatrix::zeros(n, names.len());
    for (j, name) in names.iter().enumerate() {
        m.set_column(j, &column(data, name.as_str().expect("name"), n));
    }
    m
}

#[test]
fn matches_ivmodels() {
    let doc = crate::testing::fixture("clr_lm.json");
    let cases = doc["cases"].as_array().expect("cases");
    assert_eq!(cases.len(), 3);
    for case in cases {
        let name = case["name"].as_str().expect("name");
        let (data, setup, ex) = (&case["data"], &case["setup"], &case["expected"]);
        let y = column(data, setup["outcome"].as_str().expect("outcome"), 0);
        let n = y.len();
        let exog = matrix(data, &setup["exog"], n);
        let endog = matrix(data, &setup["endog"], n);
        let z = matrix(data, &setup["instruments"], n);
        let beta0 = setup["beta0"].as_f64().expect("beta0");
        let problem = IvProblem::new(&y, &exog, &endog, &z).expect("problem");
        let got = problem.lm_clr(&Absorbed::NONE, beta0).expect("lm_clr");
        let want = |k: &str| ex[k].as_f64().expect(k);
        for (what, g, w) in [
            ("lm", got.lm.statistic, want("lm")),
            ("clr", got.clr.statistic, want("clr")),
            ("q_t", got.clr.conditioning, want("q_t")),
        ] {
            let rel = (g - w).abs() / w.abs();
            println!("{name} {what}: relative difference {rel:.2e}");
            assert!(rel < 1e-6, "{name} {what}: {g} vs {w}");
        }
        for (what, g, w) in [
            ("lm p", test_p_value(&got.lm), want("lm_p_value")),
            ("clr p", got.clr.p_value, want("clr_p_value")),
        ] {
            let abs = (g - w).abs();
            println!("{name} {what}: absolute difference {abs:.2e}");
            assert!(abs < 1e-6, "{name} {what}: {g} vs {w}");
        }
    }
}

fn chi2_tail(x: f64, df: f64) -> f64 {
    p_value(x, &Reference::ChiSquare { df }, Direction::TwoSided)
}

#[test]
fn conditional_law_limits() {
    for &m in &[0.5, 2.0, 3.84, 9.0] {
        for l in 2..=6 {
            // Q_T = 0: CLR = Q_S ~ χ²(L).
            let weak = clr_p_value(m, 0.0, l);
            assert!((weak - chi2_tail(m, l as f64)).abs() < 1e-12);
            // Q_T tiny and huge: the two limits.
            let near_weak = clr_p_value(m, 1e-9, l);
            assert!((near_weak - chi2_tail(m, l as f64)).abs() < 1e-8, "{m} {l}");
            let strong = clr_p_value(m, 1e9, l);
            assert!(
                (strong - chi2_tail(m, 1.0)).abs() < 1e-4,
                "{m} {l}: {strong}"
            );
            // In between, monotone in Q_T: between the χ²(1) and χ²(L) tails.
            let mid = clr_p_value(m, 10.0, l);
            assert!(mid > chi2_tail(m, 1.0) && mid < chi2_tail(m, l as f64));
        }
        assert!((clr_p_value(m, 7.0, 1) - chi2_tail(m, 1.0)).abs() < 1e-15);
    }
    assert_eq!(clr_p_value(0.0, 3.0, 3), 1.0);
    assert!(clr_p_value(f64::NAN, 3.0, 3).is_nan());
    assert!(clr_p_value(1.0, -1.0, 3).is_nan());
}

#[test]
fn invalid_inputs_are_errors() {
    let n = 30;
    let y = DVector::from_fn(n, |i, _| (i as f64 * 0.7).sin());
    let x = DMatrix::from_fn(n, 1, |i, _| (i as f64 * 1.3).cos());
    let x2 = DMatrix::from_fn(n, 2, |i, j| ((i * (j + 2)) as f64).cos());
    let z = DMatrix::from_fn(n, 3, |i, j| ((i * (j + 3)) as f64 * 0.37).sin());
    let w = DMatrix::from_element(n, 1, 1.0);
    let p = IvProblem::new(&y, &w, &x, &z).expect("problem");
    assert!(p.lm_clr(&Absorbed::NONE, f64::NAN).is_err());
    assert!(p.lm_clr(&Absorbed::NONE, 0.3).is_ok());
    let p2 = IvProblem::new(&y, &w, &x2, &z).expect("problem");
    assert!(p2.lm_clr(&Absorbed::NONE, 0.0).is_err());
    // y = x β₀ exactly: e = 0, the error variance is zero.
    let exact = x.column(0) * 2.0;
    let p3 = IvProblem::new(&exact, &w, &x, &z).expect("problem");
    assert!(p3.lm_clr(&Absorbed::NONE, 2.0).is_err());
}

/// Frisch–Waugh–Lovell: demeaning by group and passing `Absorbed { df: G }` gives the same
/// LM, CLR, Q_T and p-value as including the G group dummies as controls (the degrees of
/// freedom n − L − |W| − a count the absorbed levels).
#[test]
fn absorbed_fixed_effects_equal_dummies() {
    let doc = crate::testing::fixture("clr_lm.json");
    let case = &doc["cases"][0];
    let (data, setup) = (&case["data"], &case["setup"]);
    let y = column(data, "y", 0);
    let n = y.len();
    let x = matrix(data, &setup["endog"], n);
    let z = matrix(data, &setup["instruments"], n);
    let c1 = column(data, "c1", n);
    let g = 5;
    let groups: Vec<usize> = (0..n).map(|i| (i * 7 + i / 3) % g).collect();
    let mut dummies = DMatrix::zeros(n, g + 1);
    for (i, &gi) in groups.iter().enumerate() {
        dummies[(i, gi)] = 1.0;
        dummies[(i, g)] = c1[i];
    }
    let demean = |m: &DMatrix<f64>| {
        let mut out = m.clone();
        for j in 0..m.ncols() {
            let (mut sums, mut counts) = (vec![0.0; g], vec![0.0; g]);
            for (i, &gi) in groups.iter().enumerate() {
                sums[gi] += m[(i, j)];
                counts[gi] += 1.0;
            }
            for (i, &gi) in groups.iter().enumerate() {
                out[(i, j)] -= sums[gi] / counts[gi];
            }
        }
        out
    };
    let yd = DVector::from_column_slice(
        demean(&DMatrix::from_column_slice(n, 1, y.as_slice())).as_slice(),
    );
    let wd = demean(&DMatrix::from_column_slice(n, 1, c1.as_slice()));
    let (xd, zd) = (demean(&x), demean(&z));
    let absorbed = Absorbed {
        df: g,
        nested_df: 0,
        leverage: None,
    };
    for beta0 in [0.0, 0.4] {
        let full = IvProblem::new(&y, &dummies, &x, &z)
            .expect("dummies")
            .lm_clr(&Absorbed::NONE, beta0)
            .expect("lm_clr");
        let within = IvProblem::new(&yd, &wd, &xd, &zd)
            .expect("within")
            .lm_clr(&absorbed, beta0)
            .expect("lm_clr");
        for (a, b) in [
            (full.lm.statistic, within.lm.statistic),
            (full.clr.statistic, within.clr.statistic),
            (full.clr.conditioning, within.clr.conditioning),
            (full.clr.p_value, within.clr.p_value),
        ] {
            assert!((a - b).abs() <= 1e-9 * a.abs(), "{beta0}: {a} vs {b}");
        }
    }
}

/// Monte Carlo size at 5% under a weak design with the null true: n = 200, L = 4,
/// π = 0.07 per instrument (concentration parameter n‖π‖² ≈ 3.9), corr(u, v) = 0.95,
/// normal homoskedastic errors, 4,000 replications. Both tests are asymptotically exact
/// however weak the instruments (Kleibergen 2002; Moreira 2003), so each rejection rate must
/// lie within 4 Monte Carlo standard errors (4 × 0.34%) of 0.05. This checks the conditional
/// p-value's integral where it matters (small Q_T), which no fixed value can.
#[test]
fn monte_carlo_size_under_weak_instruments() {
    let (n, l, reps) = (200, 4, 4000);
    let mut rng = crate::random::SplitMix64::new(20_261_204);
    let w = DMatrix::from_element(n, 1, 1.0);
    let (mut lm_rej, mut clr_rej) = (0usize, 0usize);
    for _ in 0..reps {
        let z = DMatrix::from_fn(n, l, |_, _| rng.normal());
        let mut x = DMatrix::zeros(n, 1);
        let mut y = DVector::zeros(n);
        for i in 0..n {
            let u = rng.normal();
            let v = 0.95 * u + (1.0 - 0.95f64 * 0.95).sqrt() * rng.normal();
            x[(i, 0)] = 0.07 * z.row(i).sum() + v;
            y[i] = 1.0 + u;
        }
        let t = IvProblem::new(&y, &w, &x, &z)
            .expect("problem")
            .lm_clr(&Absorbed::NONE, 0.0)
            .expect("lm_clr");
        lm_rej += usize::from(test_p_value(&t.lm) <= 0.05);
        clr_rej += usize::from(t.clr.p_value <= 0.05);
    }
    let se = (0.05f64 * 0.95 / reps as f64).sqrt();
    for (what, rej) in [("lm", lm_rej), ("clr", clr_rej)] {
        let rate = rej as f64 / reps as f64;
        println!("{what}: rejection rate {rate:.4} (Monte Carlo se {se:.4})");
        assert!((rate - 0.05).abs() <= 4.0 * se, "{what}: {rate}");
    }
}
