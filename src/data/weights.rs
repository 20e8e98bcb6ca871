//! Probability weights of a specification's rows (`weights = "column"`): read for the rows
//! the sample restriction and listwise deletion kept (a missing weight has already dropped
//! its row there, like any missing variable), zero weights dropped and counted, a negative
//! weight refused naming its place. Non-finite values never reach here: the reader refuses
//! them in every numeric column (`cells::to_numbers`).

use super::cells::row_place;
use super::{available, Numbers, Table};
use crate::error::{Error, Result};
use crate::plan::{DataSource, Spec};
use nalgebra::DVector;

/// The error for a used row without a weight when the plan says `on_missing_weight = "stop"`.
pub(super) fn missing_weight(table: &Table, source: &DataSource, spec: &Spec, r: usize) -> Error {
    Error::Estimation {
        spec: spec.id.clone(),
        message: format!(
            "weights column `{}` is missing at {} of data table `{}`, a row the specification uses, and the plan says on_missing_weight = \"stop\": supply the weight, exclude the row with `sample`, or set on_missing_weight = \"leave-out\"",
            spec.weights.as_deref().unwrap_or_default(),
            row_place(source, r),
            table.id
        ),
    }
}

/// Drop the zero-weight rows from `rows` (the rows the sample and listwise deletion kept),
/// refusing a negative weight; returns how many were dropped (0 for an unweighted
/// specification).
pub(super) fn drop_zero_weights(
    table: &Table,
    source: &DataSource,
    spec: &Spec,
    rows: &mut Vec<usize>,
) -> Result<usize> {
    let Some((name, column)) = weight_column(table, spec)? else {
        return Ok(0);
    };
    let fix = "exclude the row with the specification's `sample`";
    refuse_negative(table, source, (&spec.id, name, fix), column, rows)?;
    Ok(drop_zero(column, rows))
}

/// Drops from `rows` those whose weight is not positive; returns how many left.
fn drop_zero(column: &Numbers, rows: &mut Vec<usize>) -> usize {
    let before = rows.len();
    rows.retain(|&r| column.get(r).is_some_and(|v| v > 0.0));
    before - rows.len()
}

/// Who holds a weights column (a specification's id, or `balance`/`attrition`), the
/// column's name, and how to leave a row out there.
type Holder<'a> = (&'a str, &'a str, &'a str);

/// Refuse a used row whose weight is negative (or missing: the caller's row selection has
/// already required it), naming its place.
fn refuse_negative(
    table: &Table,
    source: &DataSource,
    (holder, name, fix): Holder,
    column: &Numbers,
    rows: &[usize],
) -> Result<()> {
    let value = |r: usize| column.get(r).unwrap_or(f64::NAN);
    if let Some(&r) = rows.iter().find(|&&r| value(r).is_nan() || value(r) < 0.0) {
        return Err(Error::Estimation {
            spec: holder.to_string(),
            message: format!(
                "weights column `{name}` holds {} at {} of data table `{}`; probability weights must be zero or positive: correct the value, or {fix}",
                value(r),
                row_place(source, r),
                table.id
            ),
        });
    }
    Ok(())
}

/// The weights of a weighted `[balance]` or `[attrition]` check (`what`) on `rows`, the
/// rows complete in every variable the check uses and the weight (a row without a weight
/// has left as a missing value, as a specification's default): a negative weight is refused
/// naming its place, zero-weight rows leave `rows` and are counted. Returns the weights of
/// the rows kept and the number dropped for a zero weight.
pub fn check_weights(
    table: &Table,
    source: &DataSource,
    what: &str,
    name: &str,
    rows: &mut Vec<usize>,
) -> Result<(Vec<f64>, usize)> {
    let column = cells(table, what, name)?;
    let fix = "remove the row from the data or correct it at its source";
    refuse_negative(table, source, (what, name, fix), column, rows)?;
    let dropped = drop_zero(column, rows);
    let w = rows
        .iter()
        .map(|&r| column.get(r).unwrap_or(f64::NAN))
        .collect();
    Ok((w, dropped))
}

/// The weights of the final `rows` (after zero weights and fixed-effect singletons left),
/// each positive ([`drop_zero_weights`] ran first); `None` for an unweighted specification.
pub(super) fn row_weights(
    table: &Table,
    spec: &Spec,
    rows: &[usize],
) -> Result<Option<DVector<f64>>> {
    let Some((_, column)) = weight_column(table, spec)? else {
        return Ok(None);
    };
    let w = rows.iter().map(|&r| column.get(r).unwrap_or(f64::NAN));
    Ok(Some(DVector::from_iterator(rows.len(), w)))
}

/// A weights column's name and its cells.
type WeightColumn<'t> = (&'t str, &'t Numbers);

/// The specification's weights column and its name (`None` unweighted).
fn weight_column<'t>(table: &'t Table, spec: &'t Spec) -> Result<Option<WeightColumn<'t>>> {
    let Some(name) = &spec.weights else {
        return Ok(None);
    };
    Ok(Some((name, cells(table, &spec.id, name)?)))
}

/// The cells of weights column `name` of `holder` (a specification's id, or
/// `balance`/`attrition`), or an error naming it.
fn cells<'t>(table: &'t Table, holder: &str, name: &str) -> Result<&'t Numbers> {
    available(
        table.numeric.get(name),
        ("weights column", name),
        table,
        holder,
    )
}
