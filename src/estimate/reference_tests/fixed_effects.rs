//! Fixed effects absorbed by alternating projections against the explicit dummy-variable
//! regressions of `tests/reference/generate.py`: statsmodels OLS and linearmodels IV2SLS /
//! IVGMM on the data with one dummy column per level (net of one per connected component
//! for a second dimension), whose K counts every dummy. Only the non-dummy coefficients are
//! compared. Cases: one fixed effect (HC2/HC3 through the 1/n_g leverage), two fixed effects
//! whose level graph has two components, a fixed effect nested in the cluster variable
//! (numpy evaluation of CR1 with K leaving out the nested levels), and singletons dropped
//! iteratively (oracle: the dummies regression on the remaining rows). Same tolerance as
//! the other fixtures, [`TOL`](super::TOL).

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::iv::{check_hansen_j, iv_data, IvCheck};
use super::{load, Fixture, Tracker};
use crate::estimate::{drop_singletons, ols, tsls, Absorbed, EstimateError, FixedEffects};

/// The fixed effects named in `setup.absorb`, one id vector per dimension.
fn groups(fx: &Fixture) -> Vec<Vec<usize>> {
    let dims = fx.setup["absorb"].as_array().expect("absorb");
    dims.iter()
        .map(|d| fx.ids(d.as_str().expect("name")))
        .collect()
}

/// Strings of a JSON array.
fn strings(v: &Value) -> Vec<String> {
    let list = v.as_array().expect("array");
    list.iter()
        .map(|s| s.as_str().expect("string").to_string())
        .collect()
}

/// A fixture after singleton removal, its fixed effects and swept design helpers.
struct Swept {
    fx: Fixture,
    fe: FixedEffects,
}

impl Swept {
    /// Loads `case`, drops singletons (checking the generator's mask when it has one) and
    /// builds the fixed effects.
    fn new(case: &str) -> Swept {
        let raw = load(case);
        let keep = drop_singletons(&groups(&raw));
        match raw.expected.get("kept") {
            Some(kept) => {
                let kept: Vec<bool> = kept
                    .as_array()
                    .expect("kept")
                    .iter()
                    .map(|k| k.as_bool().expect("flag"))
                    .collect();
                assert_eq!(keep, kept, "{case}: singleton rows");
                assert!(keep.iter().any(|k| !k), "{case}: the case has singletons");
            }
            None => assert!(keep.iter().all(|k| *k), "{case}: no singletons expected"),
        }
        let fx = raw.keep_rows(&keep);
        let fe = FixedEffects::new(groups(&fx)).expect("fixed effects");
        Swept { fx, fe }
    }

    /// The absorbed coefficients for a covariance kind (the clusters it uses).
    fn absorbed(&self, kind: &str) -> Absorbed {
        match kind {
            "cluster" => self.fe.absorbed(&[&self.fx.ids("g1")]),
            "twoway" => self.fe.absorbed(&[&self.fx.ids("g1"), &self.fx.ids("g2")]),
            _ => self.fe.absorbed(&[]),
        }
    }

    fn vector(&self, name: &Value) -> DVector<f64> {
        self.fe.sweep_vector(&self.fx.vector(name)).expect("sweep")
    }

    fn matrix(&self, names: &Value) -> DMatrix<f64> {
        self.fe.sweep(&self.fx.matrix(names)).expect("sweep")
    }

    /// Kinds of the fixture that need leverage and have none (two or more dimensions).
    fn split_kinds(&self, key: &str) -> (Vec<String>, Vec<String>) {
        let kinds = strings(&self.fx.setup[key]);
        let needs = |k: &String| k == "hc2" || k == "hc3";
        if self.fe.levels().len() == 1 {
            (kinds, Vec::new())
        } else {
            kinds.into_iter().partition(|k| !needs(k))
        }
    }
}

/// OLS on the swept columns against the dummies regression.
fn check_fe_ols(s: &Swept, t: &mut Tracker) {
    let (setup, ex) = (&s.fx.setup["ols"], &s.fx.expected["ols"]);
    let y = s.vector(&setup["outcome"]);
    let x = s.matrix(&setup["regressors"]);
    assert_eq!(s.fx.n as u64, ex["n"].as_u64().expect("n"));
    let (kinds, refused) = s.split_kinds("ols_kinds");
    for kind in &kinds {
        let ab = s.absorbed(kind);
        assert_eq!(ab.df as u64, ex["absorbed_df"].as_u64().expect("df"));
        let fit = ols(&y, &x, true, &s.fx.spec(kind), &ab).expect("fit");
        t.fit("ols ", &fit, ex);
        t.vector(
            &format!("ols se {kind}"),
            &fit.std_errors(),
            &ex["se"][kind.as_str()],
        );
        assert_eq!(fit.df_resid as u64, ex["df_resid"].as_u64().expect("df"));
    }
    for kind in &refused {
        let err = ols(&y, &x, true, &s.fx.spec(kind), &s.absorbed(kind));
        assert!(
            matches!(err, Err(EstimateError::CovarianceUnavailable { .. })),
            "{kind} without leverage"
        );
    }
}

/// 2SLS, its diagnostics and Hansen's J on the swept columns.
fn check_fe_iv(s: &Swept, t: &mut Tracker) {
    let setup = &s.fx.setup["iv"];
    let ex = &s.fx.expected["iv"];
    let raw = iv_data(&s.fx, setup);
    let d = super::iv::IvData {
        y: s.fe.sweep_vector(&raw.y).expect("sweep"),
        exog: s.fe.sweep(&raw.exog).expect("sweep"),
        endog: s.fe.sweep(&raw.endog).expect("sweep"),
        instruments: s.fe.sweep(&raw.instruments).expect("sweep"),
    };
    let absorbed = |kind: &str| s.absorbed(kind);
    check_hansen_j(&s.fx, &d, &ex["hansen_j"], &absorbed, t);
    let (ols_kinds, refused) = s.split_kinds("ols_kinds");
    let check = IvCheck {
        fx: &s.fx,
        d,
        ex,
        ols_kinds,
        iv_kinds: strings(&s.fx.setup["iv_kinds"]),
        refused,
        absorbed: &absorbed,
    };
    check.run(t);
}

fn check_fe(case: &str) {
    let s = Swept::new(case);
    let mut t = Tracker::default();
    check_fe_ols(&s, &mut t);
    check_fe_iv(&s, &mut t);
    t.finish(case);
}

/// statsmodels / linearmodels with 15 dummy columns: one fixed effect, every kind
/// including HC2/HC3 (leverage 1/n_g plus that of the swept regressors).
#[test]
fn one_fixed_effect() {
    check_fe("fe_one");
}

/// Two fixed effects whose level graph has two connected components: absorbed df is
/// 15 + 8 − 2 (numpy matrix_rank of all dummies in the generator); HC2/HC3 are refused.
#[test]
fn two_fixed_effects() {
    let s = Swept::new("fe_two");
    assert_eq!(s.fe.levels(), vec![15, 8]);
    check_fe("fe_two");
}

/// Singletons (one of them created by dropping another) are dropped as the generator's
/// pandas loop drops them; then as [`two_fixed_effects`].
#[test]
fn singletons_dropped() {
    check_fe("fe_singletons");
}

/// A fixed effect nested in the cluster variable: CR1 counts only the swept regressors in
/// K (numpy formula in the generator, equal to the rescaled statsmodels / linearmodels
/// dummies matrix), while classical errors count every level.
#[test]
fn fixed_effect_nested_in_clusters() {
    let s = Swept::new("fe_nested");
    let ex = &s.fx.expected;
    let ab = s.absorbed("cluster");
    let levels = ex["absorbed_df"].as_u64().expect("df") as usize;
    assert_eq!((ab.df, ab.nested_df), (levels, levels));
    assert_eq!(s.absorbed("classical").nested_df, 0);
    let mut t = Tracker::default();
    let setup = &s.fx.setup["ols"];
    let (y, x) = (s.vector(&setup["outcome"]), s.matrix(&setup["regressors"]));
    for kind in ["cluster", "classical"] {
        let fit = ols(&y, &x, true, &s.fx.spec(kind), &s.absorbed(kind)).expect("ols");
        t.vector("ols coef", &fit.coef, &ex["ols"]["coef"]);
        t.vector(
            &format!("ols se {kind}"),
            &fit.std_errors(),
            &ex["ols"]["se"][kind],
        );
        assert_eq!(
            fit.df_resid as u64,
            ex["ols"]["df_resid"].as_u64().expect("df")
        );
        if kind == "cluster" {
            assert_eq!(fit.clusters.map(|g| g as u64), ex["clusters"].as_u64());
        }
    }
    let setup = &s.fx.setup["iv"];
    let raw = iv_data(&s.fx, setup);
    let sw = |m: &DMatrix<f64>| s.fe.sweep(m).expect("sweep");
    let y = s.fe.sweep_vector(&raw.y).expect("sweep");
    for kind in ["cluster", "classical"] {
        let (spec, ab) = (s.fx.spec(kind), s.absorbed(kind));
        let exog = sw(&raw.exog);
        let fit = tsls(
            &y,
            &exog,
            &sw(&raw.endog),
            &sw(&raw.instruments),
            true,
            &spec,
            &ab,
        );
        let fit = fit.expect("2sls");
        t.vector("2sls coef", &fit.coef, &ex["iv"]["coef"]);
        t.vector(
            &format!("2sls se {kind}"),
            &fit.std_errors(),
            &ex["iv"]["se"][kind],
        );
    }
    t.finish("fe_nested");
}
