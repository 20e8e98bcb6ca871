//! Design matrices for one specification: sample restriction, listwise deletion, absorbed
//! fixed effects and cluster indices.
//!
//! Without fixed effects the exogenous block is: intercept (when asked for), controls. With
//! fixed effects, observations alone in their level of any fixed effect (singletons) are
//! dropped, repeatedly, and every column (outcome, regressors, instruments, controls) is
//! swept of the fixed effects by alternating projections (`estimate::FixedEffects`; with
//! weighted group means for a weighted specification, whose rows the caller then scales by
//! √w); the intercept is absorbed and the degrees of freedom the fixed effects use travel
//! with the design as [`Absorbed`]. A column with no variation left after the sweep (one the sweep sets
//! to zero: `estimate::absorb` decides, with its one tolerance) is constant within the fixed
//! effects and is reported by name.
//! Collinearity among the remaining columns is resolved left to right by the caller.

use super::{available, IdOrder, Labels, Numbers, Table};
use crate::error::{Error, Result};
use crate::estimate::{Absorbed, CovSpec, FixedEffects};
use crate::expr::Values;
use crate::plan::{DataSource, Errors, Spec};
use nalgebra::{DMatrix, DVector};
use std::sync::Arc;

/// The matrices of one specification after sample restriction and listwise deletion.
/// The specification layer moves `focal`, `exog` and `instruments` out (leaving them empty,
/// their names kept) once it has resolved collinearity, so that they are held once.
#[derive(Debug, Clone)]
pub struct Design {
    /// Rows in the table.
    pub n_table: usize,
    /// Rows passing the sample restriction.
    pub n_sample: usize,
    /// Rows used (sample rows with no missing value in any variable used).
    pub n: usize,
    /// Table row index of each used row (shared by the designs with the same rows).
    pub rows: Arc<Vec<usize>>,
    /// Outcome (swept of fixed effects when there are any).
    pub y: DVector<f64>,
    /// Outcome as in the data (for fitted values in levels: y_raw − residual).
    pub y_raw: DVector<f64>,
    /// Endogenous regressors (2SLS) or regressors of interest (OLS).
    pub focal: Arc<DMatrix<f64>>,
    /// Names of the focal columns.
    pub focal_names: Vec<String>,
    /// Included exogenous columns: intercept (unless absorbed), controls.
    pub exog: Arc<DMatrix<f64>>,
    /// Names of the exogenous columns.
    pub exog_names: Vec<String>,
    /// Excluded instruments (2SLS).
    pub instruments: Arc<DMatrix<f64>>,
    /// Names of the instruments.
    pub instrument_names: Vec<String>,
    /// Dense cluster index of each used row and the number of clusters, per clustering
    /// dimension (empty without clustering, two entries for two-way clustering).
    pub clusters: Vec<(Vec<usize>, usize)>,
    /// Fixed effects and their number of levels in the used rows.
    pub fixed_effects: Vec<(String, usize)>,
    /// Rows dropped as singletons of a fixed effect.
    pub singletons: usize,
    /// Degrees of freedom used by the absorbed fixed effects.
    pub absorbed: Absorbed,
    /// Columns (by name) left without variation by the fixed-effect sweep.
    pub absorbed_columns: Vec<String>,
    /// Whether the column space contains a constant (intercept or fixed effects).
    pub has_constant: bool,
    /// Probability weights of the used rows (`weights = "column"`), as in the data; the
    /// caller scales rows by their square roots before fitting.
    pub weights: Option<DVector<f64>>,
    /// Sample rows complete in every variable but dropped for a weight of zero.
    pub zero_weights: usize,
}

fn column<'t>(table: &'t Table, name: &str, spec: &Spec) -> Result<&'t Numbers> {
    available(table.numeric.get(name), ("variable", name), table, &spec.id)
}

fn labels<'t>(table: &'t Table, name: &str, spec: &Spec) -> Result<&'t Labels> {
    let found = table.labels.get(name);
    available(found, ("grouping column", name), table, &spec.id)
}

/// Rows kept: in the sample and complete in every variable used.
fn kept_rows(table: &Table, spec: &Spec) -> Result<(usize, Vec<usize>)> {
    let in_sample: Vec<bool> = match &spec.sample {
        Some((text, e)) => {
            let lookup = |n: &str| table.numeric.get(n).map(|c| c as &dyn Values);
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
    let numeric: Vec<&Numbers> = used_numeric(spec)
        .iter()
        .map(|n| column(table, n, spec))
        .collect::<Result<_>>()?;
    let groups: Vec<&Labels> = used_groups(spec)
        .iter()
        .map(|n| labels(table, n, spec))
        .collect::<Result<_>>()?;
    let n_sample = in_sample.iter().filter(|b| **b).count();
    // Sized once (at most the sample): grown by doubling, a million rows were copied and
    // faulted in again about twenty times per specification.
    let mut kept = Vec::with_capacity(n_sample);
    kept.extend((0..table.rows).filter(|&i| {
        in_sample[i]
            && numeric.iter().all(|c| c.get(i).is_some())
            && groups.iter().all(|c| c[i].is_some())
    }));
    Ok((n_sample, kept))
}

/// Rows with every variable but the weight, for a specification whose plan says a missing
/// weight stops the run: the first such row in file order (`None` for any other
/// specification, whose kept rows already have their weight).
fn first_row_missing_weight(table: &Table, spec: &Spec, kept: &[usize]) -> Option<usize> {
    if !spec.stop_on_missing_weight {
        return None;
    }
    let w = table.numeric.get(spec.weights.as_ref()?)?;
    kept.iter().copied().find(|&r| w.get(r).is_none())
}

/// The numeric columns whose missing values leave a row out: every variable, and the weight
/// unless a missing weight stops the run instead (checked on the rows kept without it).
fn used_numeric(spec: &Spec) -> Vec<String> {
    let mut v = vec![spec.outcome.clone()];
    v.extend(
        spec.weights
            .iter()
            .filter(|_| !spec.stop_on_missing_weight)
            .cloned(),
    );
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
    v.extend(spec.errors.cluster_columns().iter().cloned());
    v
}

/// The columns `names` at `rows`, after a leading column of ones when `ones`, written once
/// column by column (a missing value as NaN).
fn gathered(
    table: &Table,
    names: &[String],
    rows: &[usize],
    spec: &Spec,
    ones: bool,
) -> Result<DMatrix<f64>> {
    let cols: Vec<&Numbers> = names
        .iter()
        .map(|n| column(table, n, spec))
        .collect::<Result<_>>()?;
    let (n, k) = (rows.len(), usize::from(ones) + names.len());
    let mut out = Vec::with_capacity(n * k);
    if ones {
        out.resize(n, 1.0);
    }
    for col in cols {
        // Missing cells are stored as NaN, which is what a missing cell reads as here.
        let values = col.raw();
        out.extend(rows.iter().map(|&r| values[r]));
    }
    Ok(DMatrix::from_vec(n, k, out))
}

/// Dense 0-based group index per kept row (groups numbered in sorted label order) and the
/// number of groups. Kept rows have every grouping label ([`kept_rows`]), so a missing one
/// is an error of sworn's, reported rather than numbered.
fn group_index(values: &Labels, rows: &[usize], spec: &Spec) -> Result<(Vec<usize>, usize)> {
    values
        .dense_ids(rows, IdOrder::Sorted)
        .ok_or_else(|| Error::Estimation {
            spec: spec.id.clone(),
            message:
                "a kept row has no label in a grouping column (an error in sworn; please report it)"
                    .into(),
        })
}

/// The rows a design keeps, and what choosing them found.
struct DesignRows<'t> {
    /// Rows of the sample restriction, before listwise deletion.
    n_sample: usize,
    /// The rows kept, in table order.
    rows: Vec<usize>,
    /// Rows left out for a weight of zero.
    zero_weights: usize,
    /// Each fixed effect's labels, by table row.
    groups: Vec<&'t Labels>,
    /// Rows left out alone in a fixed-effect level.
    singletons: usize,
    /// The kept rows' weights (weighted specifications).
    weights: Option<DVector<f64>>,
}

/// The rows of `spec`'s design: the sample's complete rows, a missing weight handled as the
/// plan says, zero weights and then fixed-effect singletons left out, and the weights of the
/// rows finally kept.
fn design_rows<'t>(table: &'t Table, source: &DataSource, spec: &Spec) -> Result<DesignRows<'t>> {
    let (n_sample, mut rows) = kept_rows(table, spec)?;
    if let Some(r) = first_row_missing_weight(table, spec, &rows) {
        return Err(super::weights::missing_weight(table, source, spec, r));
    }
    let zero_weights = super::weights::drop_zero_weights(table, source, spec, &mut rows)?;
    let groups = spec
        .fixed_effects
        .iter()
        .map(|fe| labels(table, fe, spec))
        .collect::<Result<Vec<_>>>()?;
    let singletons = drop_singleton_rows(&groups, &mut rows, spec)?;
    let weights = super::weights::row_weights(table, spec, &rows)?;
    Ok(DesignRows {
        n_sample,
        rows,
        zero_weights,
        groups,
        singletons,
        weights,
    })
}

/// The columns `names` at `rows` (after a column of ones when `ones`): the block the table
/// keeps for them when `share` (module `shared_columns`), else read afresh.
fn block(
    table: &Table,
    (names, ones): (&[String], bool),
    rows: &Arc<Vec<usize>>,
    spec: &Spec,
    share: bool,
) -> Result<Arc<DMatrix<f64>>> {
    if !share {
        return gathered(table, names, rows, spec, ones).map(Arc::new);
    }
    let sources = names
        .iter()
        .map(|n| column(table, n, spec).map(|c| c.raw().as_ptr() as usize))
        .collect::<Result<Vec<_>>>()?;
    table.shared.read(rows, (names, ones, sources), || {
        gathered(table, names, rows, spec, ones)
    })
}

/// Build the design of `spec` from `table` (read from `source`).
pub fn design(table: &Table, source: &DataSource, spec: &Spec) -> Result<Design> {
    let DesignRows {
        n_sample,
        rows,
        zero_weights,
        groups,
        singletons,
        weights,
    } = design_rows(table, source, spec)?;
    let n = rows.len();
    // Blocks neither swept nor scaled are the same for every design with these rows.
    let share = groups.is_empty() && weights.is_none();
    let rows = match share {
        true => table.shared.rows(rows),
        false => Arc::new(rows),
    };
    let outcome = column(table, &spec.outcome, spec)?;
    let y_raw = DVector::from_iterator(n, rows.iter().map(|&r| outcome.raw()[r]));
    let mut focal = block(table, (spec.focal(), false), &rows, spec, share)?;
    let mut instruments = block(table, (&spec.instruments, false), &rows, spec, share)?;
    // With an intercept (never with fixed effects, so never swept) the controls are read
    // after a column of ones: they are the exogenous block as it stands.
    let with_intercept = spec.intercept && spec.fixed_effects.is_empty();
    let mut controls = block(table, (&spec.controls, with_intercept), &rows, spec, share)?;
    let clusters = spec
        .errors
        .cluster_columns()
        .iter()
        .map(|b| group_index(labels(table, b, spec)?, &rows, spec))
        .collect::<Result<Vec<_>>>()?;
    let mut y = y_raw.clone();
    let swept = match groups.is_empty() || n == 0 {
        true => Swept::default(),
        false => sweep_fixed_effects(
            spec,
            (&groups, &rows, weights.as_ref()),
            &clusters,
            &mut y,
            [
                (Arc::make_mut(&mut focal), spec.focal()),
                (Arc::make_mut(&mut instruments), &spec.instruments),
                (Arc::make_mut(&mut controls), &spec.controls),
            ],
        )?,
    };
    let (exog, exog_names) = (controls, exogenous_names(spec, with_intercept));
    Ok(Design {
        n_table: table.rows,
        n_sample,
        n,
        rows,
        y,
        y_raw,
        focal,
        focal_names: spec.focal().to_vec(),
        exog,
        exog_names,
        instruments,
        instrument_names: spec.instruments.clone(),
        clusters,
        fixed_effects: swept.fixed_effects,
        singletons,
        absorbed: swept.absorbed,
        absorbed_columns: swept.absorbed_columns,
        has_constant: spec.intercept || !spec.fixed_effects.is_empty(),
        weights,
        zero_weights,
    })
}

/// What sweeping the fixed effects left: each one's name and levels, the absorbed degrees
/// of freedom, and the columns with no variation left within them.
#[derive(Default)]
struct Swept {
    fixed_effects: Vec<(String, usize)>,
    absorbed: Absorbed,
    absorbed_columns: Vec<String>,
}

/// Sweep the fixed effects (`groups`, one label column each, over the kept `rows`, with
/// weighted group means when the rows have `weights`) out of the outcome `y` and each named
/// block of regressors, in place.
fn sweep_fixed_effects(
    spec: &Spec,
    (groups, rows, weights): (&[&Labels], &[usize], Option<&DVector<f64>>),
    clusters: &[(Vec<usize>, usize)],
    y: &mut DVector<f64>,
    blocks: [(&mut DMatrix<f64>, &[String]); 3],
) -> Result<Swept> {
    let ids: Vec<Vec<usize>> = groups
        .iter()
        .map(|g| Ok(group_index(g, rows, spec)?.0))
        .collect::<Result<_>>()?;
    let fe = match weights {
        Some(w) => FixedEffects::weighted(ids, w.as_slice()),
        None => FixedEffects::new(ids),
    }
    .map_err(|e| sweep_error(spec, &e))?;
    let cluster_ids: Vec<&[usize]> = clusters.iter().map(|(c, _)| c.as_slice()).collect();
    let mut swept = Swept {
        fixed_effects: spec
            .fixed_effects
            .iter()
            .cloned()
            .zip(fe.levels())
            .collect(),
        absorbed: fe.absorbed(&cluster_ids),
        absorbed_columns: Vec::new(),
    };
    let mut sweep = |m: &mut DMatrix<f64>, names: &[String]| -> Result<()> {
        let out = fe.sweep(m).map_err(|e| sweep_error(spec, &e))?;
        // The sweep sets a column to exactly zero when no variation is left within the
        // fixed effects (`estimate::ABSORBED_COLUMN_TOLERANCE`, the one tolerance).
        for (j, name) in names.iter().enumerate() {
            if out.column(j).iter().all(|v| *v == 0.0) {
                swept.absorbed_columns.push(name.clone());
            }
        }
        *m = out;
        Ok(())
    };
    let mut ym = DMatrix::from_column_slice(y.len(), 1, y.as_slice());
    sweep(&mut ym, std::slice::from_ref(&spec.outcome))?;
    *y = ym.column(0).into_owned();
    for (m, names) in blocks {
        sweep(m, names)?;
    }
    Ok(swept)
}

/// Drops, from `rows`, the rows alone in their level of any fixed effect (`groups`, one
/// label column per fixed effect), repeatedly (`estimate::drop_singletons`); returns how
/// many were dropped.
fn drop_singleton_rows(groups: &[&Labels], rows: &mut Vec<usize>, spec: &Spec) -> Result<usize> {
    if groups.is_empty() {
        return Ok(0);
    }
    let ids: Vec<Vec<usize>> = groups
        .iter()
        .map(|g| Ok(group_index(g, rows, spec)?.0))
        .collect::<Result<_>>()?;
    let keep = crate::estimate::drop_singletons(&ids);
    let before = rows.len();
    *rows = rows
        .iter()
        .zip(&keep)
        .filter(|(_, k)| **k)
        .map(|(r, _)| *r)
        .collect();
    Ok(before - rows.len())
}

/// The exogenous block's names: the intercept (when the design has one; never with fixed
/// effects, which absorb it), then the controls.
fn exogenous_names(spec: &Spec, with_intercept: bool) -> Vec<String> {
    let mut names = Vec::with_capacity(1 + spec.controls.len());
    if with_intercept {
        names.push("intercept".to_string());
    }
    names.extend(spec.controls.iter().cloned());
    names
}

fn sweep_error(spec: &Spec, e: &crate::estimate::EstimateError) -> Error {
    Error::Estimation {
        spec: spec.id.clone(),
        message: format!("absorbing the fixed effects failed: {e}"),
    }
}

/// Why [`cov_spec`] cannot name the covariance estimator from the errors and cluster ids alone.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CovSpecGap {
    /// HAC errors need the rows' time positions and a bandwidth, which `analysis::hac` builds
    /// from the table's `order_by` column.
    TimeOrder,
    /// The cluster ids given are not one vector per column the errors cluster by.
    ClusterDimensions,
}

impl std::fmt::Display for CovSpecGap {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            CovSpecGap::TimeOrder => "hac errors are offered for specifications only",
            CovSpecGap::ClusterDimensions => {
                "the cluster ids do not match the columns the errors cluster by"
            }
        })
    }
}

/// The covariance estimator `errors` asks for: the one place a plan's [`Errors`] become an
/// [`estimate::CovSpec`](CovSpec). `clusters` holds the dense cluster id of each used row,
/// one vector per column in [`Errors::cluster_columns`] (empty unless clustered).
///
/// # Errors
/// [`CovSpecGap::TimeOrder`] for HAC errors (built by `analysis::hac`);
/// [`CovSpecGap::ClusterDimensions`] when `clusters` does not match the columns.
pub fn cov_spec(
    errors: &Errors,
    clusters: Vec<Vec<usize>>,
) -> std::result::Result<CovSpec, CovSpecGap> {
    if clusters.len() != errors.cluster_columns().len() {
        return Err(CovSpecGap::ClusterDimensions);
    }
    Ok(match errors {
        Errors::Classical => CovSpec::Classical,
        Errors::Hc0 => CovSpec::Hc0,
        Errors::Hc1 => CovSpec::Hc1,
        Errors::Hc2 => CovSpec::Hc2,
        Errors::Hc3 => CovSpec::Hc3,
        Errors::Hac { .. } => return Err(CovSpecGap::TimeOrder),
        Errors::Cluster(_) => {
            let mut dims = clusters.into_iter();
            match (dims.next(), dims.next()) {
                (Some(ids), None) => CovSpec::Cluster { ids },
                (Some(first), Some(second)) => CovSpec::TwoWay { first, second },
                (None, _) => return Err(CovSpecGap::ClusterDimensions),
            }
        }
    })
}
