//! A specification's columns made ready to fit: the design read from the table, rows and
//! columns the fixed effects leave without information handled, and collinearity resolved
//! left to right over `[intercept, controls | focal terms]` (so the later column is named).

use super::est_err;
use crate::analysis::degenerate;
use crate::data::{design, Design, Table};
use crate::deviation::{Deviation, DeviationCode};
use crate::error::Result;
use crate::estimate;
use crate::plan::{DataSource, Spec};
use nalgebra::DMatrix;
use std::sync::Arc;

/// The columns of a design kept after collinearity was resolved, by role.
pub(super) struct Parts {
    /// Included exogenous columns (intercept and controls).
    pub(super) exog: Arc<DMatrix<f64>>,
    /// Names of `exog`.
    pub(super) exog_names: Vec<String>,
    /// Endogenous regressors (IV) or regressors of interest (OLS).
    pub(super) focal: Arc<DMatrix<f64>>,
    /// Names of `focal`.
    pub(super) focal_names: Vec<String>,
    /// Excluded instruments (IV), empty for OLS.
    pub(super) instruments: Arc<DMatrix<f64>>,
    /// Names of `instruments`.
    pub(super) instrument_names: Vec<String>,
    /// Names of the columns dropped as collinear.
    pub(super) dropped: Vec<String>,
}

/// A block of named columns.
struct Block<'a> {
    /// The columns.
    m: &'a Arc<DMatrix<f64>>,
    /// Their names.
    names: &'a [String],
}

/// Read `spec`'s design from `table` and resolve its absorbed and collinear columns.
/// Columns dropped with `on_collinear = "drop"` are recorded in `deviations`.
pub(super) fn columns(
    spec: &Spec,
    table: &Table,
    source: &DataSource,
    deviations: &mut Vec<Deviation>,
) -> Result<(Design, Parts)> {
    let d = design(table, source, spec)?;
    check_rows_left(spec, &d)?;
    let d = absorbed_columns(spec, d, deviations)?;
    degenerate::check_scales(spec, &d)?;
    let mut d = d;
    let p = parts(spec, table, &mut d)?;
    Ok((d, p))
}

/// Refuse a design with no row left: every row incomplete, or every complete row alone in
/// its level of a fixed effect.
fn check_rows_left(spec: &Spec, d: &Design) -> Result<()> {
    if d.n == 0 && d.singletons > 0 {
        return Err(est_err(spec, format!(
            "all {} complete rows of the sample are alone in their level of the fixed effect(s) `{}`, and such rows are dropped (they carry no information), so none is left; use a coarser fixed effect or none",
            d.singletons,
            spec.fixed_effects.join("`, `")
        )));
    }
    if d.n == 0 {
        return Err(est_err(spec, "no row of the sample is complete in every variable used; check the sample restriction and missing values"));
    }
    Ok(())
}

/// Columns of `m` selected by `keep`.
pub(super) fn select(m: &DMatrix<f64>, keep: &[usize]) -> DMatrix<f64> {
    DMatrix::from_fn(m.nrows(), keep.len(), |i, j| m[(i, keep[j])])
}

/// Moves a matrix out of the design (its columns go to [`Parts`]), keeping the columns
/// `keep`: the matrix itself, not a copy, when every column is kept in order.
fn take_columns(m: &mut Arc<DMatrix<f64>>, keep: &[usize]) -> Arc<DMatrix<f64>> {
    let m = std::mem::replace(m, Arc::new(DMatrix::zeros(0, 0)));
    if keep.len() == m.ncols() && keep.iter().enumerate().all(|(i, &j)| i == j) {
        m
    } else {
        Arc::new(select(&m, keep))
    }
}

/// Resolve collinearity among `[exog | extra]`: returns the columns of `exog` and of `extra`
/// to keep, recording dropped names, or fails naming the dependent columns.
fn resolve(
    (spec, table): (&Spec, &Table),
    exog: Block,
    extra: Block,
    what: &str,
    dropped: &mut Vec<String>,
) -> Result<(Vec<usize>, Vec<usize>)> {
    // The scan is needed only when a bound from the blocks' cross-products cannot settle
    // that it finds nothing (estimate::clearly_independent_parts; the same answer either
    // way): then the blocks are joined and scanned.
    let settled = table.shared.settled(&[exog.m, extra.m], || {
        estimate::clearly_independent_parts(&[exog.m.as_ref(), extra.m.as_ref()])
    });
    let dependent = if settled {
        Vec::new()
    } else {
        estimate::collinear_of_shared(&table.shared.joined(&[exog.m, extra.m]))
    };
    let names: Vec<&String> = exog.names.iter().chain(extra.names).collect();
    if dependent.is_empty() {
        return Ok((
            (0..exog.m.ncols()).collect(),
            (0..extra.m.ncols()).collect(),
        ));
    }
    let listed: Vec<String> = dependent
        .iter()
        .map(|&j| format!("`{}`", names[j]))
        .collect();
    if !spec.drop_collinear {
        return Err(est_err(spec, format!(
            "rank-deficient design: {} {} a linear combination of the other {what}; remove the term(s) or set on_collinear = \"drop\" (a dropped term is reported as a deviation)",
            listed.join(", "), if listed.len() == 1 { "is" } else { "are" }
        )));
    }
    dropped.extend(dependent.iter().map(|&j| names[j].clone()));
    let keep_e = (0..exog.m.ncols())
        .filter(|j| !dependent.contains(j))
        .collect();
    let keep_x = (0..extra.m.ncols())
        .filter(|j| !dependent.contains(&(j + exog.m.ncols())))
        .collect();
    Ok((keep_e, keep_x))
}

/// The names selected by `keep`.
fn pick(names: &[String], keep: &[usize]) -> Vec<String> {
    keep.iter().map(|&j| names[j].clone()).collect()
}

/// The design's columns with collinearity resolved: first among the regressors, then among
/// the instruments and the controls kept. The columns move from `d` to the parts (the
/// design's `focal`, `exog` and `instruments` are left empty; their names stay).
fn parts(spec: &Spec, table: &Table, d: &mut Design) -> Result<Parts> {
    let mut dropped = Vec::new();
    let (ke, kf) = resolve(
        (spec, table),
        Block {
            m: &d.exog,
            names: &d.exog_names,
        },
        Block {
            m: &d.focal,
            names: &d.focal_names,
        },
        "regressors",
        &mut dropped,
    )?;
    let exog = take_columns(&mut d.exog, &ke);
    let exog_names = pick(&d.exog_names, &ke);
    let (_, ki) = resolve(
        (spec, table),
        Block {
            m: &exog,
            names: &exog_names,
        },
        Block {
            m: &d.instruments,
            names: &d.instrument_names,
        },
        "instruments and controls",
        &mut dropped,
    )?;
    let p = Parts {
        focal: take_columns(&mut d.focal, &kf),
        focal_names: pick(&d.focal_names, &kf),
        instruments: take_columns(&mut d.instruments, &ki),
        instrument_names: pick(&d.instrument_names, &ki),
        exog,
        exog_names,
        dropped,
    };
    if spec.estimator.is_iv() && p.instruments.ncols() < p.focal.ncols() {
        return Err(est_err(spec, "after dropping collinear instruments the specification is under-identified; fix the instrument list"));
    }
    Ok(p)
}

/// Handle columns the fixed-effect sweep left without variation: an error naming them, or
/// (with on_collinear = "drop") dropping them as deviations. The outcome or an endogenous
/// regressor or instrument without within variation is always an error.
fn absorbed_columns(spec: &Spec, mut d: Design, devs: &mut Vec<Deviation>) -> Result<Design> {
    if d.absorbed_columns.is_empty() {
        return Ok(d);
    }
    let fes = spec.fixed_effects.join("`, `");
    let structural: Vec<&String> = d
        .absorbed_columns
        .iter()
        .filter(|c| !spec.controls.contains(c))
        .collect();
    if !structural.is_empty() || !spec.drop_collinear {
        let names: Vec<String> = d
            .absorbed_columns
            .iter()
            .map(|c| format!("`{c}`"))
            .collect();
        let advice = if structural.is_empty() {
            "remove it or set on_collinear = \"drop\""
        } else {
            "the specification cannot be estimated with these fixed effects; remove the fixed effect or change the specification"
        };
        return Err(est_err(spec, format!(
            "{} {} constant within the fixed effects `{fes}` (no variation left after absorbing them); {advice}",
            names.join(", "),
            if names.len() == 1 { "is" } else { "are" }
        )));
    }
    let keep: Vec<usize> = (0..d.exog.ncols())
        .filter(|&j| !d.absorbed_columns.contains(&d.exog_names[j]))
        .collect();
    for c in &d.absorbed_columns {
        devs.push(Deviation::new(
            DeviationCode::CollinearDropped,
            format!("{}.{}", spec.id, c),
            format!("term dropped: `{c}` is constant within the fixed effects `{fes}`"),
        ));
    }
    d.exog = Arc::new(select(&d.exog, &keep));
    d.exog_names = pick(&d.exog_names, &keep);
    Ok(d)
}
