//! The CSV fixtures meant for end-to-end tests through the plan path
//! (`plan_timeseries.csv`, `plan_missing.csv`), checked here directly against their JSON
//! expected values (linearmodels IV2SLS / statsmodels OLS, see `generate.py`), so that the
//! numbers are known to match the estimators' conventions before any plan reads them.

use std::collections::BTreeMap;

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::Tracker;
use crate::estimate::{
    drop_singletons, first_stages, ols, overidentification, tsls, Absorbed, CovSpec, FixedEffects,
};

/// Reads `name.csv` and `name.json` from the fixtures; cells as text ("NA" for missing).
fn read(name: &str) -> (BTreeMap<String, Vec<String>>, Value) {
    let csv = crate::testing::fixture_text(&format!("{name}.csv"));
    let json = crate::testing::fixture_text(&format!("{name}.json"));
    let mut lines = csv.lines();
    let header: Vec<String> = lines
        .next()
        .expect("header")
        .split(',')
        .map(str::to_string)
        .collect();
    let mut columns: BTreeMap<String, Vec<String>> =
        header.iter().map(|h| (h.clone(), Vec::new())).collect();
    for line in lines {
        for (h, cell) in header.iter().zip(line.split(',')) {
            columns.get_mut(h).expect("column").push(cell.to_string());
        }
    }
    (columns, serde_json::from_str(&json).expect("JSON"))
}

fn numbers(cells: &[String]) -> Vec<f64> {
    cells.iter().map(|c| c.parse().expect("number")).collect()
}

fn named(v: &Value, names: &[&str]) -> Value {
    Value::Array(names.iter().map(|n| v[*n].clone()).collect())
}

/// Weekly 2SLS with instruments lagged one week, HC1 errors (linearmodels / statsmodels).
#[test]
fn plan_timeseries_expected_values() {
    let (cols, doc) = read("plan_timeseries");
    let weeks = numbers(&cols["week"]);
    assert!(
        weeks.windows(2).all(|w| w[1] > w[0]),
        "stored in week order"
    );
    let (y, p, z, w) = (
        numbers(&cols["y"]),
        numbers(&cols["p"]),
        numbers(&cols["z"]),
        numbers(&cols["w"]),
    );
    let n = y.len() - 1;
    let yv = DVector::from_fn(n, |i, _| y[i + 1]);
    let endog = DMatrix::from_fn(n, 1, |i, _| p[i + 1]);
    let exog = DMatrix::from_fn(n, 2, |i, j| if j == 0 { 1.0 } else { w[i + 1] });
    let instruments = DMatrix::from_fn(n, 2, |i, j| if j == 0 { z[i] } else { p[i] });
    let ex = &doc["expected"];
    let none = Absorbed::NONE;
    let fit = tsls(&yv, &exog, &endog, &instruments, true, &CovSpec::Hc1, &none).expect("2sls");
    let names = ["p", "const", "w"];
    let mut t = Tracker::default();
    assert_eq!(n as u64, ex["n"].as_u64().expect("n"));
    t.vector("coef", &fit.coef, &named(&ex["coef"], &names));
    t.vector("se hc1", &fit.std_errors(), &named(&ex["se_hc1"], &names));
    let stage = &first_stages(&exog, &endog, &instruments, true, &CovSpec::Hc1, &none)
        .expect("first stage")[0];
    let fs = &ex["first_stage"];
    t.scalar("first stage f", stage.f.statistic, &fs["f"]);
    t.scalar("robust f", stage.robust_f.statistic, &fs["robust_f_hc1"]);
    t.scalar(
        "partial r2",
        stage.partial_r_squared,
        &fs["partial_r_squared"],
    );
    let o = overidentification(&yv, &exog, &endog, &instruments, &none).expect("overid");
    t.scalar(
        "sargan",
        o.expect("overidentified").sargan.statistic,
        &ex["sargan"],
    );
    t.finish("plan_timeseries");
}

/// OLS with clusters after listwise deletion, then with a region fixed effect whose two
/// singleton levels are dropped (statsmodels on the dummies).
#[test]
fn plan_missing_expected_values() {
    let (cols, doc) = read("plan_missing");
    let used = ["y", "x", "x1", "x2", "group"];
    let rows: Vec<usize> = (0..cols["y"].len())
        .filter(|&i| used.iter().all(|c| cols[*c][i] != "NA"))
        .collect();
    let get = |c: &str| -> Vec<f64> {
        rows.iter()
            .map(|&i| cols[c][i].parse().expect("num"))
            .collect()
    };
    let (y, x, x1, x2, group) = (get("y"), get("x"), get("x1"), get("x2"), get("group"));
    let ids: Vec<usize> = group.iter().map(|&g| g as usize).collect();
    let n = rows.len();
    let ex = &doc["expected"];
    let mut t = Tracker::default();
    let design = |keep: &[usize], constant: bool| {
        let k0 = usize::from(constant);
        DMatrix::from_fn(keep.len(), 3 + k0, |i, j| match j + 1 - k0 {
            0 => 1.0,
            1 => x[keep[i]],
            2 => x1[keep[i]],
            _ => x2[keep[i]],
        })
    };
    let all: Vec<usize> = (0..n).collect();
    let spec = CovSpec::Cluster { ids: ids.clone() };
    let yv = DVector::from_vec(y.clone());
    let fit = ols(&yv, &design(&all, true), true, &spec, &Absorbed::NONE).expect("ols");
    let pooled = &ex["pooled"];
    assert_eq!(n as u64, pooled["n"].as_u64().expect("n"));
    let names = ["const", "x", "x1", "x2"];
    t.vector("pooled coef", &fit.coef, &named(&pooled["coef"], &names));
    t.vector(
        "pooled se",
        &fit.std_errors(),
        &named(&pooled["se_cluster"], &names),
    );
    // Region labels to ids, singletons out, sweep, estimate.
    let mut labels = BTreeMap::new();
    let region: Vec<usize> = rows
        .iter()
        .map(|&i| {
            let next = labels.len();
            *labels.entry(cols["region"][i].clone()).or_insert(next)
        })
        .collect();
    let keep = drop_singletons(std::slice::from_ref(&region));
    let kept: Vec<usize> = (0..n).filter(|&i| keep[i]).collect();
    let fe_ex = &ex["fixed_effect"];
    let dropped = (n - kept.len()) as u64;
    assert_eq!(
        dropped,
        fe_ex["singletons_dropped"].as_u64().expect("dropped")
    );
    let fe = FixedEffects::new(vec![kept.iter().map(|&i| region[i]).collect()]).expect("fe");
    let cl: Vec<usize> = kept.iter().map(|&i| ids[i]).collect();
    let ab = fe.absorbed(&[&cl]);
    assert_eq!((ab.df, ab.nested_df), (12, 0));
    let ys = fe
        .sweep_vector(&DVector::from_iterator(
            kept.len(),
            kept.iter().map(|&i| y[i]),
        ))
        .expect("sweep");
    let xs = fe.sweep(&design(&kept, false)).expect("sweep");
    let fit = ols(&ys, &xs, true, &CovSpec::Cluster { ids: cl }, &ab).expect("fe ols");
    let names = ["x", "x1", "x2"];
    t.vector("fe coef", &fit.coef, &named(&fe_ex["coef"], &names));
    t.vector(
        "fe se",
        &fit.std_errors(),
        &named(&fe_ex["se_cluster"], &names),
    );
    t.scalar("fe within r2", fit.r_squared, &fe_ex["within_r_squared"]);
    assert_eq!(fit.df_resid as u64, fe_ex["df_resid"].as_u64().expect("df"));
    t.finish("plan_missing");
}
