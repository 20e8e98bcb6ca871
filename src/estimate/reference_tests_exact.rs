//! Comparison with an exact reference, through a committed fixture, at [`EXACT_TOL`].
//!
//! Source: `tests/reference/fixtures/exact_sandwich.json`, written by
//! `tests/reference/exact_sandwich.py` with exact rational arithmetic (Python fractions) on
//! the exact binary values of the f64 data; square roots in mpmath at 50 digits. It holds
//! OLS and 2SLS coefficients with HC1 and CR1 standard errors, and for the 2SLS design the
//! endogeneity statistics (control function under HC1 and CR1, Durbin, Wu–Hausman) and the
//! over-identification statistics (Sargan, Basmann), exact rationals, all as 25-digit
//! decimals.
//!
//! The data are not stored: [`generate`] rebuilds them from the same integer formulas as
//! the script (each value an integer divided once by 100.0 or 1000.0, a correctly rounded
//! division that gives the same f64 in both languages), and the fixture's FNV-1a digest of
//! the f64 bits confirms that the regenerated data are the ones the reference used.
//! The tolerance is far tighter than the library fixtures' 1e-8, so losses in the last
//! digits show up here; the test prints the largest relative difference per group.

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::{ols, Absorbed, CovSpec, IvProblem, LinearFit};

/// Relative tolerance against the exact reference.
const EXACT_TOL: f64 = 1e-14;

/// The regenerated data: columns as f64 and the cluster id of each row.
struct Data {
    y: Vec<f64>,
    d: Vec<f64>,
    w1: Vec<f64>,
    w2: Vec<f64>,
    w3: Vec<f64>,
    z: Vec<f64>,
    z2: Vec<f64>,
    g: Vec<usize>,
}

/// The rows 0..n from the integer formulas of `tests/reference/exact_sandwich.py` (every
/// `%` has a non-negative left operand, so Rust's remainder equals Python's).
fn generate(n: usize) -> Data {
    let mut data = Data {
        y: Vec::with_capacity(n),
        d: Vec::with_capacity(n),
        w1: Vec::with_capacity(n),
        w2: Vec::with_capacity(n),
        w3: Vec::with_capacity(n),
        z: Vec::with_capacity(n),
        z2: Vec::with_capacity(n),
        g: Vec::with_capacity(n),
    };
    for i in 0..n as i64 {
        let w1n = (i * 7919 + 13) % 2003;
        let w2n = (i * i * 31 + i * 17 + 5) % 1009 - 504;
        let w3n = 50000 + 7 * ((i * 104729 + 3) % 997) - 3489;
        let z = ((i * 2654435761) % 4294967296) >> 31;
        let z2n = (i * 6007 + i * i * 3 + 11) % 1999 - 999;
        let e = (i * i * 97 + i * 389 + 41) % 2001 - 1000;
        let dn = 1500 * z + 2 * z2n + 2 * e + 3 * w1n - 2000;
        let v = (i * i * 211 + i * 7 + 3) % 1201 - 600;
        let g = ((i * i * 7 + i * 37) % 997 + i % 7) % 250;
        let c = ((g * 53) % 41 - 20) * 40;
        let yn =
            2 * dn + 15 * w1n - 3 * w2n + (w3n - 50000) + 500 + 7 * e + v * (2 + 3 * z + i % 5) + c;
        data.y.push(yn as f64 / 1000.0);
        data.d.push(dn as f64 / 1000.0);
        data.w1.push(w1n as f64 / 100.0);
        data.w2.push(w2n as f64 / 1000.0);
        data.w3.push(w3n as f64 / 1000.0);
        data.z.push(z as f64);
        data.z2.push(z2n as f64 / 100.0);
        data.g
            .push(usize::try_from(g).expect("non-negative cluster id"));
    }
    data
}

/// FNV-1a (64-bit) over the little-endian bytes of y, d, w1, w2, w3, z, z2 (f64) and g
/// (u64), row by row: the digest the script stores.
fn digest(data: &Data) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    let mut eat = |bytes: [u8; 8]| {
        for b in bytes {
            h = (h ^ u64::from(b)).wrapping_mul(0x0000_0100_0000_01b3);
        }
    };
    for i in 0..data.y.len() {
        for col in [
            &data.y, &data.d, &data.w1, &data.w2, &data.w3, &data.z, &data.z2,
        ] {
            eat(col[i].to_le_bytes());
        }
        eat((data.g[i] as u64).to_le_bytes());
    }
    format!("{h:016x}")
}

/// The columns side by side.
fn matrix(cols: &[DVector<f64>]) -> DMatrix<f64> {
    DMatrix::from_columns(cols)
}

/// Worst relative difference per group, checked against [`EXACT_TOL`] at the end.
#[derive(Default)]
struct Worst(Vec<(String, f64)>);

impl Worst {
    /// Compares `got` elementwise with the decimal strings in `expected`.
    fn compare(&mut self, group: &str, got: &DVector<f64>, expected: &Value) {
        let e = expected
            .as_array()
            .unwrap_or_else(|| panic!("{group}: expected an array"));
        assert_eq!(got.len(), e.len(), "{group}: length");
        let mut worst = 0.0_f64;
        for (j, (g, x)) in got.iter().zip(e).enumerate() {
            let text = x
                .as_str()
                .unwrap_or_else(|| panic!("{group}[{j}]: expected a decimal string"));
            let x: f64 = text
                .parse()
                .unwrap_or_else(|e| panic!("{group}[{j}]: {text}: {e}"));
            let rel = (g - x).abs() / x.abs();
            worst = worst.max(rel);
        }
        self.0.push((group.to_string(), worst));
    }

    /// One statistic against the decimal string `expected`.
    fn scalar(&mut self, group: &str, got: f64, expected: &Value) {
        self.compare(
            group,
            &DVector::from_element(1, got),
            &Value::Array(vec![expected.clone()]),
        );
    }

    /// Coefficients and standard errors of one fit.
    fn fit(&mut self, group: &str, fit: &LinearFit, expected: &Value, kind: &str) {
        if kind == "hc1" {
            self.compare(&format!("{group} coef"), &fit.coef, &expected["coef"]);
        }
        self.compare(
            &format!("{group} se {kind}"),
            &fit.std_errors(),
            &expected["se"][kind],
        );
    }

    fn finish(self) {
        println!("exact_sandwich: largest relative difference per group (tolerance {EXACT_TOL:e})");
        for (group, rel) in &self.0 {
            println!("  {group:28} {rel:.2e}");
        }
        let bad: Vec<_> = self.0.iter().filter(|(_, r)| *r > EXACT_TOL).collect();
        assert!(bad.is_empty(), "above {EXACT_TOL:e}: {bad:?}");
    }
}

/// OLS and 2SLS coefficients, HC1 and CR1 standard errors, against exact rationals
/// (square roots at 50 digits) to 1e-14 relative; and the endogeneity (control function
/// under HC1 and CR1, Durbin, Wu–Hausman) and over-identification (Sargan, Basmann)
/// statistics of the 2SLS design, against exact rationals to 1e-14 relative.
#[test]
fn exact_sandwich_ols_and_tsls() {
    let fx = crate::testing::fixture("exact_sandwich.json");
    let n = usize::try_from(fx["n"].as_u64().expect("n")).expect("n fits");
    assert_eq!(
        fx["generator"]["n"].as_u64(),
        Some(n as u64),
        "generator rows"
    );
    let data = generate(n);
    assert_eq!(
        Some(digest(&data).as_str()),
        fx["generator"]["fnv1a64"].as_str(),
        "the regenerated data must be the data of the reference"
    );
    let col = |v: &[f64]| DVector::from_column_slice(v);
    let ones = DVector::from_element(n, 1.0);
    let (d, w1, w2, w3) = (col(&data.d), col(&data.w1), col(&data.w2), col(&data.w3));
    let y = col(&data.y);
    // Coefficient order [d, const, w1, w2, w3], as in the fixture; for 2SLS [endog | exog].
    let x = matrix(&[d.clone(), ones.clone(), w1.clone(), w2.clone(), w3.clone()]);
    let exog = matrix(&[ones, w1, w2, w3]);
    let endog = matrix(&[d]);
    let instruments = matrix(&[col(&data.z), col(&data.z2)]);
    let clusters = usize::try_from(fx["clusters"].as_u64().expect("clusters")).expect("fits");

    // One IV problem for both covariances, as a run shares it between its diagnostics
    // (the same bits as the free functions, which each build one).
    let iv = IvProblem::new(&y, &exog, &endog, &instruments).expect("iv problem");
    let mut worst = Worst::default();
    for kind in ["hc1", "cluster"] {
        let spec = match kind {
            "hc1" => CovSpec::Hc1,
            _ => CovSpec::Cluster {
                ids: data.g.clone(),
            },
        };
        let fit = ols(&y, &x, true, &spec, &Absorbed::NONE).expect("ols");
        assert_eq!(fit.k, 5);
        if kind == "cluster" {
            assert_eq!(fit.clusters, Some(clusters), "ols clusters");
        }
        worst.fit("ols", &fit, &fx["ols"], kind);
        let fit = iv.tsls(true, &spec, &Absorbed::NONE).expect("2sls");
        assert_eq!(fit.k, 5);
        if kind == "cluster" {
            assert_eq!(fit.clusters, Some(clusters), "2sls clusters");
        }
        worst.fit("2sls", &fit, &fx["tsls"], kind);
        let tests = iv
            .endogeneity(true, &spec, &Absorbed::NONE)
            .expect("endogeneity");
        let expected = &fx["tsls"]["endogeneity"];
        worst.scalar(
            &format!("control function {kind}"),
            tests.control_function.statistic,
            &expected["control_function"][kind],
        );
        // Durbin and Wu–Hausman do not depend on the covariance: compared once.
        if kind == "hc1" {
            worst.scalar("durbin", tests.durbin.statistic, &expected["durbin"]);
            worst.scalar(
                "wu-hausman",
                tests.wu_hausman.statistic,
                &expected["wu_hausman"],
            );
        }
    }
    let over = iv
        .overidentification(&Absorbed::NONE)
        .expect("overidentification")
        .expect("two instruments for one endogenous column: over-identified");
    let expected = &fx["tsls"]["overidentification"];
    worst.scalar("sargan", over.sargan.statistic, &expected["sargan"]);
    worst.scalar("basmann", over.basmann.statistic, &expected["basmann"]);
    worst.finish();
}
