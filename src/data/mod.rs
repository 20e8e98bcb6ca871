//! Data: read each declared table (polars), check it against the declared schema, derive
//! variables, and hand out design matrices. This is the only bridge from polars to nalgebra.
//!
//! Invariants of a loaded [`Table`]: rows are in `order_by` order when one is declared;
//! numeric columns (declared numeric kinds and derived variables) are `f64` with `None` for
//! missing; grouping columns (category, id, integer, binary) are also available as labels.

mod cells;
mod design;
pub mod dialect;
mod labels;
mod parquet;
mod read;
mod weights;

pub use design::{cov_spec, design, CovSpecGap, Design};
pub use labels::{Labels, TooManyLabels};
pub(crate) use read::needed_columns;
pub use read::{load_table, read_baseline, table_from_columns, with_column, BaselineColumns};

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
    pub numeric: BTreeMap<String, Vec<Option<f64>>>,
    /// Group labels of grouping columns.
    pub labels: BTreeMap<String, Labels>,
}

/// Why [`Table::label_ids`] found no ids.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LabelIdsError {
    /// The table has no grouping column of that name.
    NoColumn,
    /// A requested row has no label.
    Missing,
}

impl Table {
    /// Dense 0-based ids (in order of first appearance) of the labels of `column` at `rows`.
    pub fn label_ids(&self, column: &str, rows: &[usize]) -> Result<Vec<usize>, LabelIdsError> {
        let labels = self.labels.get(column).ok_or(LabelIdsError::NoColumn)?;
        let mut map: BTreeMap<&str, usize> = BTreeMap::new();
        rows.iter()
            .map(|&r| {
                let next = map.len();
                labels[r]
                    .as_deref()
                    .map(|v| *map.entry(v).or_insert(next))
                    .ok_or(LabelIdsError::Missing)
            })
            .collect()
    }
}
