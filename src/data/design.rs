//! Design matrices for one specification: sample restriction, listwise deletion, fixed-effect
//! indicators and cluster indices.
//!
//! Column order of the exogenous block is: intercept, fixed-effect indicators, controls.
//! Collinearity is resolved left to right by the caller, so structural columns come first
//! and a control that duplicates them is the one named.

use super::Table;
use crate::error::{Error, Result};
use crate::plan::{Errors, Spec};
use nalgebra::{DMatrix, DVector};
use std::collections::BTreeMap;

/// Prefix of fixed-effect indicator column names (never shown as terms).
pub const FE_PREFIX: &str = "fe:";

/// The matrices of one specification after sample restriction and listwise deletion.
#[derive(Debug, Clone)]
pub struct Design {
    /// Rows in the table.
    pub n_table: usize,
    /// Rows passing the sample restriction.
    pub n_sample: usize,
    /// Rows used (sample rows with no missing value in any variable used).
    pub n: usize,
    /// Outcome.
    pub y: DVector<f64>,
    /// Endogenous regressors (2SLS) or regressors of interest (OLS).
    pub focal: DMatrix<f64>,
    /// Names of the focal columns.
    pub focal_names: Vec<String>,
    /// Included exogenous columns: intercept, fixed-effect indicators, controls.
    pub exog: DMatrix<f64>,
    /// Names of the exogenous columns.
    pub exog_names: Vec<String>,
    /// Excluded instruments (2SLS).
    pub instruments: DMatrix<f64>,
    /// Names of the instruments.
    pub instrument_names: Vec<String>,
    /// Dense cluster index of each used row, and the number of clusters.
    pub clusters: Option<(Vec<usize>, usize)>,
    /// Fixed effects and their number of levels in the used rows.
    pub fixed_effects: Vec<(String, usize)>,
    /// Whether the column space contains a constant (intercept or fixed effects).
    pub has_constant: bool,
}

fn column<'t>(table: &'t Table, name: &str, spec: &Spec) -> Result<&'t [Option<f64>]> {
    table
        .numeric
        .get(name)
        .map(Vec::as_slice)
        .ok_or_else(|| Error::Estimation {
            spec: spec.id.clone(),
            message: format!(
                "variable `{name}` is not available in data table `{}`",
                table.id
            ),
        })
}

fn labels<'t>(table: &'t Table, name: &str, spec: &Spec) -> Result<&'t [Option<String>]> {
    table
        .labels
        .get(name)
        .map(Vec::as_slice)
        .ok_or_else(|| Error::Estimation {
            spec: spec.id.clone(),
            message: format!(
                "grouping column `{name}` is not available in data table `{}`",
                table.id
            ),
        })
}

/// Rows kept: in the sample and complete in every variable used.
fn kept_rows(table: &Table, spec: &Spec) -> Result<(usize, Vec<usize>)> {
    let in_sample: Vec<bool> = match &spec.sample {
        Some((text, e)) => {
            let lookup = |n: &str| table.numeric.get(n).map(Vec::as_slice);
            e.eval(table.rows, &lookup)
                .map_err(|err| Error::Estimation {
                    spec: spec.id.clone(),
                    message: format!("sample \"{text}\": {}", err.message),
                })?
                .into_iter()
                .map(|v| v.is_some_and(|v| v != 0.0))
                .collect()
        }
        None => vec![true; table.rows],
    };
    let numeric: Vec<&[Option<f64>]> = used_numeric(spec)
        .iter()
        .map(|n| column(table, n, spec))
        .collect::<Result<_>>()?;
    let groups: Vec<&[Option<String>]> = used_groups(spec)
        .iter()
        .map(|n| labels(table, n, spec))
        .collect::<Result<_>>()?;
    let n_sample = in_sample.iter().filter(|b| **b).count();
    let kept = (0..table.rows)
        .filter(|&i| {
            in_sample[i]
                && numeric.iter().all(|c| c[i].is_some())
                && groups.iter().all(|c| c[i].is_some())
        })
        .collect();
    Ok((n_sample, kept))
}

fn used_numeric(spec: &Spec) -> Vec<String> {
    let mut v = vec![spec.outcome.clone()];
    v.extend(
        spec.focal()
            .iter()
            .chain(&spec.instruments)
            .chain(&spec.controls)
            .cloned(),
    );
    v
}

fn used_groups(spec: &Spec) -> Vec<String> {
    let mut v = spec.fixed_effects.clone();
    if let Errors::Cluster(by) = &spec.errors {
        v.extend(by.iter().cloned());
    }
    v
}

fn matrix(table: &Table, names: &[String], rows: &[usize], spec: &Spec) -> Result<DMatrix<f64>> {
    let cols: Vec<&[Option<f64>]> = names
        .iter()
        .map(|n| column(table, n, spec))
        .collect::<Result<_>>()?;
    Ok(DMatrix::from_fn(rows.len(), names.len(), |i, j| {
        cols[j][rows[i]].unwrap_or(f64::NAN)
    }))
}

/// Dense 0-based group index per kept row (groups numbered in sorted label order).
fn group_index(values: &[Option<String>], rows: &[usize]) -> (Vec<usize>, usize) {
    let mut ids: BTreeMap<&str, usize> = BTreeMap::new();
    for &r in rows {
        if let Some(v) = &values[r] {
            ids.entry(v.as_str()).or_insert(0);
        }
    }
    for (i, v) in ids.values_mut().enumerate() {
        *v = i;
    }
    let idx = rows
        .iter()
        .map(|&r| values[r].as_deref().map_or(0, |v| ids[v]))
        .collect();
    (idx, ids.len())
}

/// Build the design of `spec` from `table`.
pub fn design(table: &Table, spec: &Spec) -> Result<Design> {
    let (n_sample, rows) = kept_rows(table, spec)?;
    let n = rows.len();
    let outcome = column(table, &spec.outcome, spec)?;
    let y = DVector::from_iterator(n, rows.iter().map(|&r| outcome[r].unwrap_or(f64::NAN)));
    let mut exog_cols: Vec<DVector<f64>> = Vec::new();
    let mut exog_names = Vec::new();
    let has_constant = spec.intercept || !spec.fixed_effects.is_empty();
    if has_constant {
        exog_cols.push(DVector::from_element(n, 1.0));
        exog_names.push("intercept".to_string());
    }
    let mut fixed_effects = Vec::new();
    for fe in &spec.fixed_effects {
        let (idx, levels) = group_index(labels(table, fe, spec)?, &rows);
        for level in 1..levels {
            exog_cols.push(DVector::from_iterator(
                n,
                idx.iter().map(|&g| f64::from(u8::from(g == level))),
            ));
            exog_names.push(format!("{FE_PREFIX}{fe}#{level}"));
        }
        fixed_effects.push((fe.clone(), levels));
    }
    let controls = matrix(table, &spec.controls, &rows, spec)?;
    for j in 0..controls.ncols() {
        exog_cols.push(controls.column(j).into_owned());
    }
    exog_names.extend(spec.controls.iter().cloned());
    let exog = if exog_cols.is_empty() {
        DMatrix::zeros(n, 0)
    } else {
        DMatrix::from_columns(&exog_cols)
    };
    let clusters = match &spec.errors {
        Errors::Cluster(by) => Some(group_index(labels(table, &by[0], spec)?, &rows)),
        _ => None,
    };
    Ok(Design {
        n_table: table.rows,
        n_sample,
        n,
        y,
        focal: matrix(table, spec.focal(), &rows, spec)?,
        focal_names: spec.focal().to_vec(),
        exog,
        exog_names,
        instruments: matrix(table, &spec.instruments, &rows, spec)?,
        instrument_names: spec.instruments.clone(),
        clusters,
        fixed_effects,
        has_constant,
    })
}
