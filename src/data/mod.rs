//! Data: read each declared table (polars), check it against the declared schema, derive
//! variables, and hand out design matrices. This is the only bridge from polars to nalgebra.
//!
//! Invariants of a loaded [`Table`]: rows are in `order_by` order when one is declared;
//! numeric columns (declared numeric kinds and derived variables) are contiguous `f64`
//! ([`Numbers`], NaN marking a missing cell, read back as `None`); grouping columns
//! (category, id, integer, binary) are also available as labels.

mod cells;
mod design;
pub mod dialect;
mod labels;
mod numbers;
mod parquet;
mod plain_csv;
mod read;
mod shared_columns;
mod weights;

pub use design::{cov_spec, design, CovSpecGap, Design};
pub use labels::{IdOrder, Labels, TooManyLabels};
pub use numbers::Numbers;
pub use read::{load_table, read_baseline, table_from_columns, with_column, BaselineColumns};
pub use shared_columns::SharedColumns;
pub use weights::check_weights as check_summary_weights;

use std::collections::BTreeMap;
use std::path::PathBuf;

/// A data table as loaded for a run.
#[derive(Debug, Clone)]
pub struct Table {
    /// Table id.
    pub id: String,
    /// File read.
    pub path: PathBuf,
    /// SHA-256 of the file's bytes.
    pub sha256: String,
    /// Number of rows.
    pub rows: usize,
    /// Numeric columns and derived variables.
    pub numeric: BTreeMap<String, Numbers>,
    /// Group labels of grouping columns.
    pub labels: BTreeMap<String, Labels>,
    /// Column blocks read for designs, shared by the specifications that use them (empty in
    /// a clone).
    pub shared: SharedColumns,
}

/// Why [`Table::label_ids`] found no ids.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LabelIdsError {
    /// The table has no grouping column of that name.
    NoColumn,
    /// A requested row has no label.
    Missing,
}

/// `found`, or the error of `holder` (a specification's id, or `balance`/`attrition`) naming
/// what was looked for in `table`.
fn available<'t, T>(
    found: Option<&'t T>,
    (what, name): (&str, &str),
    table: &Table,
    holder: &str,
) -> crate::error::Result<&'t T> {
    found.ok_or_else(|| crate::error::Error::Estimation {
        spec: holder.to_string(),
        message: format!(
            "{what} `{name}` is not available in data table `{}`",
            table.id
        ),
    })
}

impl Table {
    /// Dense 0-based ids (in order of first appearance) of the labels of `column` at `rows`.
    pub fn label_ids(&self, column: &str, rows: &[usize]) -> Result<Vec<usize>, LabelIdsError> {
        let labels = self.labels.get(column).ok_or(LabelIdsError::NoColumn)?;
        labels
            .dense_ids(rows, IdOrder::FirstSeen)
            .map(|(ids, _)| ids)
            .ok_or(LabelIdsError::Missing)
    }
}

/// A file's columns as a frame, read as `sworn run` reads it: CSV with every column as text
/// under the reader's panic guard, Parquet by the defensive reader (`parquet.rs`). For the
/// starter plan, which has only a path. The error is a message for the user.
pub fn read_text_frame(
    path: &std::path::Path,
    csv_separator: Option<u8>,
) -> Result<polars::prelude::DataFrame, String> {
    match csv_separator {
        Some(separator) => {
            let bytes = std::fs::read(path).map_err(|e| format!("cannot read the file: {e}"))?;
            cells::csv_text(&bytes, separator)
        }
        None => parquet::read(path),
    }
}
