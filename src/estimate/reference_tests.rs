//! Comparisons with reference libraries, through committed fixtures.
//!
//! Source: `tests/reference/fixtures/*.json`, written by `tests/reference/generate.py` from
//! invented, seeded data with statsmodels (OLS, HC0–HC3, one- and two-way clusters, Wald
//! tests) and linearmodels IV2SLS (2SLS, first-stage diagnostics, Durbin, Wu–Hausman,
//! Sargan, Basmann, first-stage Shea partial R²), linearmodels IVGMM (Hansen's J), and the
//! fixed-effect cases (module `fixed_effects`: the same libraries on explicit dummy
//! columns); each fixture records the library versions. Every quantity must agree to
//! [`TOL`] relative; each test prints the largest relative difference per quantity.
//! Invariant: a missing fixture is a failure (they are committed with the crate).

mod fixed_effects;
mod hac;
mod iv;
mod plan;

use std::collections::BTreeMap;

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::{ols, Absorbed, CovSpec, LinearFit};

/// Relative tolerance for every fixture comparison.
pub(super) const TOL: f64 = crate::testing::FIXTURE_TOL;

/// Covariance kinds computed for OLS fixtures.
pub(super) const OLS_KINDS: [&str; 7] =
    ["classical", "hc0", "hc1", "hc2", "hc3", "cluster", "twoway"];

/// A fixture's data after listwise deletion, plus its setup and expected values.
pub(super) struct Fixture {
    pub(super) columns: BTreeMap<String, Vec<f64>>,
    pub(super) setup: Value,
    pub(super) expected: Value,
    pub(super) n: usize,
}

/// Loads `case`, keeping the rows where every column is present (listwise deletion).
pub(super) fn load(case: &str) -> Fixture {
    let doc = crate::testing::fixture(&format!("{case}.json"));
    let data = doc["data"].as_object().expect("data object");
    let raw: BTreeMap<String, Vec<Option<f64>>> = data
        .iter()
        .map(|(k, v)| {
            (
                k.clone(),
                v.as_array()
                    .expect("column")
                    .iter()
                    .map(Value::as_f64)
                    .collect(),
            )
        })
        .collect();
    let rows = raw.values().next().map_or(0, Vec::len);
    let keep: Vec<usize> = (0..rows)
        .filter(|&i| raw.values().all(|c| c[i].is_some()))
        .collect();
    let columns = raw
        .into_iter()
        .map(|(k, c)| (k, keep.iter().filter_map(|&i| c[i]).collect()))
        .collect();
    let (setup, expected) = (doc["setup"].clone(), doc["expected"].clone());
    Fixture {
        columns,
        setup,
        expected,
        n: keep.len(),
    }
}

impl Fixture {
    /// The design for `names` (a JSON array of column names; "const" is a column of ones).
    pub(super) fn matrix(&self, names: &Value) -> DMatrix<f64> {
        let names = names.as_array().expect("names");
        let mut m = DMatrix::zeros(self.n, names.len());
        for (j, name) in names.iter().enumerate() {
            let name = name.as_str().expect("name");
            let col = match name {
                "const" => DVector::from_element(self.n, 1.0),
                _ => DVector::from_vec(self.columns[name].clone()),
            };
            m.set_column(j, &col);
        }
        m
    }

    /// The rows flagged in `keep` (one flag per row).
    pub(super) fn keep_rows(&self, keep: &[bool]) -> Fixture {
        assert_eq!(keep.len(), self.n, "one flag per row");
        let columns = self
            .columns
            .iter()
            .map(|(k, c)| {
                let kept = c.iter().zip(keep).filter(|(_, k)| **k).map(|(v, _)| *v);
                (k.clone(), kept.collect())
            })
            .collect();
        Fixture {
            columns,
            setup: self.setup.clone(),
            expected: self.expected.clone(),
            n: keep.iter().filter(|k| **k).count(),
        }
    }

    /// The column `name` as a vector.
    pub(super) fn vector(&self, name: &Value) -> DVector<f64> {
        DVector::from_vec(self.columns[name.as_str().expect("name")].clone())
    }

    /// Ids from an integer column (clusters, fixed-effect levels).
    pub(super) fn ids(&self, name: &str) -> Vec<usize> {
        self.columns[name].iter().map(|&v| v as usize).collect()
    }

    /// The [`CovSpec`] a fixture kind names (clusters are the columns g1 and g2).
    pub(super) fn spec(&self, kind: &str) -> CovSpec {
        match kind {
            "classical" => CovSpec::Classical,
            "hc0" => CovSpec::Hc0,
            "hc1" => CovSpec::Hc1,
            "hc2" => CovSpec::Hc2,
            "hc3" => CovSpec::Hc3,
            "cluster" => CovSpec::Cluster {
                ids: self.ids("g1"),
            },
            "twoway" => CovSpec::TwoWay {
                first: self.ids("g1"),
                second: self.ids("g2"),
            },
            other => panic!("unknown kind {other}"),
        }
    }
}

/// Records the largest relative difference per quantity and checks them against [`TOL`].
#[derive(Default)]
pub(super) struct Tracker {
    worst: BTreeMap<String, f64>,
}

impl Tracker {
    /// Compares one number.
    pub(super) fn scalar(&mut self, what: &str, got: f64, expected: &Value) {
        let e = expected
            .as_f64()
            .unwrap_or_else(|| panic!("{what}: expected a number"));
        let rel = (got - e).abs() / e.abs().max(f64::MIN_POSITIVE);
        let slot = self.worst.entry(what.to_string()).or_insert(0.0);
        *slot = slot.max(rel);
    }

    /// Compares a vector elementwise.
    pub(super) fn vector(&mut self, what: &str, got: &DVector<f64>, expected: &Value) {
        let e = expected
            .as_array()
            .unwrap_or_else(|| panic!("{what}: expected an array"));
        assert_eq!(got.len(), e.len(), "{what}: length");
        for (g, x) in got.iter().zip(e) {
            self.scalar(what, *g, x);
        }
    }

    /// Compares the summary statistics and coefficients of a fit.
    pub(super) fn fit(&mut self, prefix: &str, fit: &LinearFit, expected: &Value) {
        self.vector(&format!("{prefix}coef"), &fit.coef, &expected["coef"]);
        for key in ["rss", "r_squared", "residual_sd"] {
            if !expected[key].is_null() {
                let got = match key {
                    "rss" => fit.rss,
                    "r_squared" => fit.r_squared,
                    _ => fit.residual_sd,
                };
                self.scalar(&format!("{prefix}{key}"), got, &expected[key]);
            }
        }
    }

    /// Prints the table and fails if any quantity exceeds [`TOL`].
    pub(super) fn finish(self, case: &str) {
        println!("{case}: largest relative difference per quantity");
        for (what, rel) in &self.worst {
            println!("  {what:40} {rel:.2e}");
        }
        let bad: Vec<_> = self.worst.iter().filter(|(_, r)| **r > TOL).collect();
        assert!(bad.is_empty(), "{case}: above {TOL}: {bad:?}");
    }
}

/// Checks an OLS fixture: coefficients, fit statistics, every error type, n and clusters.
fn check_ols(case: &str) {
    let fx = load(case);
    let (y, x) = (
        fx.vector(&fx.setup["outcome"]),
        fx.matrix(&fx.setup["regressors"]),
    );
    let intercept = fx.setup["intercept"].as_bool().expect("intercept");
    let ex = &fx.expected;
    assert_eq!(
        fx.n as u64,
        ex["n"].as_u64().expect("n"),
        "{case}: rows after deletion"
    );
    let mut t = Tracker::default();
    for kind in OLS_KINDS {
        let fit = ols(&y, &x, intercept, &fx.spec(kind), &Absorbed::NONE).expect("fixture fit");
        t.fit("", &fit, ex);
        t.vector(&format!("se {kind}"), &fit.std_errors(), &ex["se"][kind]);
        assert_eq!(fit.df_resid as u64, ex["df_resid"].as_u64().expect("df"));
        if let Some(g) = ex["clusters"][kind].as_u64() {
            assert_eq!(fit.clusters, Some(g as usize), "{case}: clusters {kind}");
        }
    }
    t.finish(case);
}

/// statsmodels OLS, every error type (classical, HC0–HC3, CR1, two-way CGM).
#[test]
fn ols_every_error_type() {
    check_ols("ols_errors");
}

/// statsmodels OLS on a binary outcome (linear probability model).
#[test]
fn ols_linear_probability_model() {
    check_ols("ols_binary_lpm");
}

/// statsmodels OLS after listwise deletion done by the generator; n must match.
#[test]
fn ols_after_listwise_deletion() {
    let fx = load("ols_missing");
    let before = fx.expected["rows_before_deletion"].as_u64().expect("rows");
    assert!(
        (fx.n as u64) < before,
        "the fixture must contain missing values"
    );
    check_ols("ols_missing");
}
