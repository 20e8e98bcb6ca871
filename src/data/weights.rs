//! Probability weights of a specification's rows (`weights = "column"`): read for the rows
//! the sample restriction and listwise deletion kept (a missing weight has already dropped
//! its row there, like any missing variable), zero weights dropped and counted, a negative
//! weight refused naming its place. Non-finite values never reach here: the reader refuses
//! them in every numeric column (`cells::to_numbers`).

use super::cells::row_place;
use super::Table;
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

/// The weights of the rows kept, after dropping zero-weight rows from `rows`; with the
/// number dropped. `None` (and 0) for an unweighted specification.
pub(super) fn sample_weights(
    table: &Table,
    source: &DataSource,
    spec: &Spec,
    rows: &mut Vec<usize>,
) -> Result<(Option<DVector<f64>>, usize)> {
    let Some(name) = &spec.weights else {
        return Ok((None, 0));
    };
    let column = table.numeric.get(name).ok_or_else(|| Error::Estimation {
        spec: spec.id.clone(),
        message: format!(
            "weights column `{name}` is not available in data table `{}`",
            table.id
        ),
    })?;
    let value = |r: usize| column[r].unwrap_or(f64::NAN);
    if let Some(&r) = rows.iter().find(|&&r| value(r).is_nan() || value(r) < 0.0) {
        return Err(Error::Estimation {
            spec: spec.id.clone(),
            message: format!(
                "weights column `{name}` holds {} at {} of data table `{}`; probability weights must be zero or positive: correct the value, or exclude the row with the specification's `sample`",
                value(r),
                row_place(source, r),
                table.id
            ),
        });
    }
    let before = rows.len();
    rows.retain(|&r| value(r) > 0.0);
    let w = DVector::from_iterator(rows.len(), rows.iter().map(|&r| value(r)));
    Ok((Some(w), before - rows.len()))
}
