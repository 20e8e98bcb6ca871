//! Reading a table with polars and checking it against the declared schema: the columns a
//! plan needs, the rows in `order_by` order, row counts and keys, derived variables and
//! indices; baseline files for rehearsals; tables built from simulated columns. The cells
//! themselves are read in `cells.rs`.

use super::cells::{
    data_err, load_column, raw_values, read_cells, read_frame, row_place, to_labels, to_numbers,
    RawValues,
};
use super::Table;
use crate::deviation::{Deviation, DeviationCode};
use crate::error::Result;
use crate::expr::Values;
use crate::plan::{needed_columns, ColumnKind, DataSource, Plan};
use std::collections::{BTreeMap, BTreeSet};

/// Read `src`, check it against its declared schema and evaluate derived variables.
/// Returns the table and the schema deviations found.
pub fn load_table(plan: &Plan, src: &DataSource) -> Result<(Table, Vec<Deviation>)> {
    let wanted: Vec<(&str, bool)> = src
        .columns
        .iter()
        .map(|(name, col)| (name.as_str(), col.kind.is_numeric()))
        .collect();
    let (mut cells, sha256) = read_cells(src, &wanted)?;
    let rows = cells.height();
    if rows == 0 {
        return Err(data_err(
            src,
            format!(
                "[data.{}] has no rows; check that the right file is named",
                src.id
            ),
        ));
    }
    let needed = needed_columns(plan, src);
    let file_columns = cells.names();
    let mut devs = Vec::new();
    let mut table = Table {
        id: src.id.clone(),
        path: src.path.clone(),
        sha256,
        rows,
        numeric: Default::default(),
        labels: Default::default(),
        shared: Default::default(),
    };
    for (name, col) in &src.columns {
        let Some(raw) = cells.take(src, name, col.kind.is_numeric())? else {
            if needed.contains(name) {
                return Err(data_err(
                    src,
                    format!(
                        "declared column `{name}` is not in the file, and the plan uses it{}",
                        crate::plan::suggest_hint(name, file_columns.iter().map(String::as_str))
                    ),
                ));
            }
            devs.push(Deviation::new(
                DeviationCode::ColumnMissing,
                format!("{}.{name}", src.id),
                format!("declared column `{name}` is not in the data file"),
            ));
            continue;
        };
        load_column(src, &mut table, name, col, raw, &mut devs)?;
    }
    order_rows(src, &mut table)?;
    check_rows_and_key(src, &table, &mut devs);
    derive_columns(plan, src, &mut table)?;
    index_columns(plan, src, &mut table)?;
    Ok((table, devs))
}

/// A rehearsal's baseline file, read as numbers: its SHA-256, rows, header and the columns
/// asked for.
#[derive(Debug, Clone)]
pub struct BaselineColumns {
    /// SHA-256 of the file's bytes.
    pub sha256: String,
    /// Rows (the header line excluded).
    pub rows: usize,
    /// Column names in file order.
    pub header: Vec<String>,
    /// The columns of `wanted` the file has, as numbers.
    pub columns: BTreeMap<String, Vec<Option<f64>>>,
}

/// Read the baseline file `path` of a rehearsal of table `src`, with the table's dialect
/// (separator, decimal comma, missing codes) and format. Each column of `wanted` that the
/// file has is read as numbers: a column `src` declares numeric is parsed as a run parses
/// it; a declared id or category column holding text gets codes 1, 2, … in order of first
/// appearance (a rehearsal only needs to tell its labels apart); any other column must hold
/// numbers. A declared binary or integer column must hold 0/1 or whole numbers.
///
/// # Errors
/// The file cannot be read or parsed, is empty, or a column holds a value its kind refuses
/// (naming the column, the line and the value).
pub fn read_baseline(
    src: &DataSource,
    path: &std::path::Path,
    wanted: &BTreeSet<String>,
) -> Result<BaselineColumns> {
    let file = DataSource {
        path: path.to_path_buf(),
        path_text: path.to_string_lossy().into_owned(),
        ..src.clone()
    };
    let (frame, sha256) = read_frame(&file)?;
    let rows = frame.height();
    if rows == 0 {
        return Err(data_err(
            &file,
            "the baseline file has no rows; check that the right file is named",
        ));
    }
    let header: Vec<String> = frame
        .get_column_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let mut columns = BTreeMap::new();
    for name in wanted.iter().filter(|n| header.contains(n)) {
        let kind = src.columns.get(name).map(|c| c.kind);
        let numeric = kind.is_none_or(ColumnKind::is_numeric);
        let Some(raw) = raw_values(&file, &frame, name, numeric)? else {
            continue;
        };
        columns.insert(name.clone(), baseline_values(&file, src, name, raw)?);
    }
    Ok(BaselineColumns {
        sha256,
        rows,
        header,
        columns,
    })
}

/// One column of a baseline file as numbers: text coded 1, 2, … in order of first
/// appearance, numbers as read; a value its declared kind forbids (binary, integer) is an
/// error naming its row.
fn baseline_values(
    file: &DataSource,
    src: &DataSource,
    name: &str,
    raw: RawValues,
) -> Result<Vec<Option<f64>>> {
    let kind = src.columns.get(name).map(|c| c.kind);
    let values: Vec<Option<f64>> = match raw {
        RawValues::Text(v) => {
            let mut codes: BTreeMap<String, f64> = BTreeMap::new();
            v.into_iter()
                .map(|s| {
                    s.map(|s| {
                        let next = codes.len() as f64 + 1.0;
                        *codes.entry(s).or_insert(next)
                    })
                })
                .collect()
        }
        numbers => to_numbers(file, name, numbers)?.iter().collect(),
    };
    let bad = |x: f64| match kind {
        Some(ColumnKind::Binary) => x != 0.0 && x != 1.0,
        Some(ColumnKind::Integer) => x.fract() != 0.0,
        _ => false,
    };
    if let Some((i, x)) = values
        .iter()
        .enumerate()
        .find_map(|(i, x)| x.filter(|x| bad(*x)).map(|x| (i, x)))
    {
        return Err(data_err(
            file,
            format!(
                "column `{name}` is declared {} in [data.{}] but {} holds {x}; correct the baseline file or the declared kind",
                kind.map_or("number", ColumnKind::name),
                src.id,
                row_place(file, i)
            ),
        ));
    }
    Ok(values)
}

/// A table from columns held in memory (a rehearsal's simulated data) rather than a file.
/// Each declared column given is read as `load_column` reads numbers from a file (grouping
/// kinds also as labels, non-numeric kinds as labels only); then rows are ordered and derived
/// variables and indices computed exactly as for a file. `sha256` stands for the file's
/// fingerprint. No schema deviations are produced: the caller built the values.
///
/// # Errors
/// Every column must have `rows` values; ordering, derived variables and indices fail as for
/// a file.
pub fn table_from_columns(
    plan: &Plan,
    src: &DataSource,
    columns: BTreeMap<String, Vec<Option<f64>>>,
    rows: usize,
    sha256: String,
) -> Result<Table> {
    let mut table = Table {
        id: src.id.clone(),
        path: src.path.clone(),
        sha256,
        rows,
        numeric: Default::default(),
        labels: Default::default(),
        shared: Default::default(),
    };
    for (name, values) in columns {
        let Some(col) = src.columns.get(&name) else {
            continue;
        };
        if values.len() != rows {
            return Err(data_err(
                src,
                format!(
                    "column `{name}` holds {} values for {rows} rows",
                    values.len()
                ),
            ));
        }
        if !col.kind.is_numeric() || col.kind.is_grouping() {
            let labels = to_labels(src, &name, col.kind, RawValues::Numbers(values.clone()))?;
            table.labels.insert(name.clone(), labels);
        }
        if col.kind.is_numeric() {
            table.numeric.insert(name, values.into());
        }
    }
    order_rows(src, &mut table)?;
    derive_columns(plan, src, &mut table)?;
    index_columns(plan, src, &mut table)?;
    Ok(table)
}

/// `table` with the numeric column `name` replaced by `values` (a blinded run's re-drawn
/// assignment), its labels rebuilt as a file's would be, and derived variables and indices
/// recomputed from it, so nothing computed from the old values survives.
///
/// # Errors
/// `name` is not a numeric column of `src`, the length differs, or a derived variable or
/// index fails as for a file.
pub fn with_column(
    plan: &Plan,
    src: &DataSource,
    table: &Table,
    name: &str,
    values: Vec<Option<f64>>,
) -> Result<Table> {
    let col = src
        .columns
        .get(name)
        .filter(|c| c.kind.is_numeric() && values.len() == table.rows)
        .ok_or_else(|| {
            data_err(
                src,
                format!("column `{name}` must be a declared numeric column to be re-drawn"),
            )
        })?;
    let mut out = table.clone();
    if col.kind.is_grouping() {
        let labels = to_labels(src, name, col.kind, RawValues::Numbers(values.clone()))?;
        out.labels.insert(name.to_string(), labels);
    }
    out.numeric.insert(name.to_string(), values.into());
    derive_columns(plan, src, &mut out)?;
    index_columns(plan, src, &mut out)?;
    Ok(out)
}

/// Sort all columns by `order_by` (numeric ascending, or text order for labels).
fn order_rows(src: &DataSource, table: &mut Table) -> Result<()> {
    let Some(by) = &src.order_by else {
        return Ok(());
    };
    let keys: Vec<Option<f64>> = match table.numeric.get(by) {
        Some(v) => v.iter().collect(),
        None => {
            return Err(data_err(
                src,
                format!(
                "order_by column `{by}` must be numeric (number, integer or binary) to order rows"
            ),
            ))
        }
    };
    if let Some(i) = keys.iter().position(Option::is_none) {
        return Err(data_err(
            src,
            format!(
                "order_by column `{by}` is missing in {}; every row needs a position",
                row_place(src, i)
            ),
        ));
    }
    let mut idx: Vec<usize> = (0..table.rows).collect();
    idx.sort_by(|&a, &b| {
        keys[a]
            .partial_cmp(&keys[b])
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    for v in table.numeric.values_mut() {
        *v = idx.iter().map(|&i| v.get(i)).collect();
    }
    for v in table.labels.values_mut() {
        *v = v.reorder(&idx);
    }
    Ok(())
}

fn check_rows_and_key(src: &DataSource, table: &Table, devs: &mut Vec<Deviation>) {
    let n = table.rows as i64;
    if src.rows_min.is_some_and(|m| n < m) || src.rows_max.is_some_and(|m| n > m) {
        devs.push(Deviation::new(
            DeviationCode::RowsOutOfRange,
            src.id.clone(),
            format!(
                "[data.{}] has {n} rows; the plan expected between {} and {}",
                src.id,
                src.rows_min.map_or("0".into(), |v| v.to_string()),
                src.rows_max.map_or("any number".into(), |v| v.to_string())
            ),
        ));
    }
    let Some(key) = &src.key else { return };
    let Some(labels) = table.labels.get(key) else {
        return;
    };
    let missing = labels.iter().filter(|v| v.is_none()).count();
    if missing > 0 {
        devs.push(Deviation::new(
            DeviationCode::KeyMissing,
            format!("{}.{key}", src.id),
            format!("key `{key}` is missing in {missing} row(s)"),
        ));
    }
    let (count, first) = duplicates(labels);
    if let Some(first) = first {
        devs.push(Deviation::new(
            DeviationCode::KeyDuplicate,
            format!("{}.{key}", src.id),
            format!(
                "key `{key}` is not unique: {} duplicate row(s) (first duplicated value `{}`)",
                count,
                crate::escape::clip(first, crate::escape::SHOWN)
            ),
        ));
    }
}

/// How many present labels repeat an earlier row's, and the first such repeat in row order.
/// By a parallel sort of (label, row): within equal labels rows ascend, so every entry after
/// the first of its run is a repeat; no hashing, so no input can make it slow.
fn duplicates(labels: &super::Labels) -> (usize, Option<&String>) {
    use rayon::prelude::*;
    let mut present: Vec<(&str, usize)> = labels
        .iter()
        .enumerate()
        .filter_map(|(row, v)| v.as_deref().map(|s| (s, row)))
        .collect();
    present.par_sort_unstable();
    let repeats = present
        .windows(2)
        .filter(|w| w[0].0 == w[1].0)
        .map(|w| w[1].1);
    let (count, first_row) = repeats.fold((0, None), |(n, first): (usize, Option<usize>), row| {
        (n + 1, Some(first.map_or(row, |f| f.min(row))))
    });
    (
        count,
        first_row
            .and_then(|r| labels.get(r))
            .and_then(Option::as_ref),
    )
}

fn derive_columns(plan: &Plan, src: &DataSource, table: &mut Table) -> Result<()> {
    for d in &plan.derive {
        if !d.expr.names().iter().all(|n| table.numeric.contains_key(n))
            || (d.expr.uses_lag() && src.order_by.is_none())
        {
            continue;
        }
        let values = {
            let numeric = &table.numeric;
            let lookup = |name: &str| numeric.get(name).map(|c| c as &dyn Values);
            d.expr.eval(table.rows, &lookup)
        }
        .map_err(|e| {
            data_err(
                src,
                format!(
                    "derived variable `{}` = \"{}\": {}",
                    d.name,
                    crate::escape::clip(&d.text, crate::escape::SHOWN),
                    e.message
                ),
            )
        })?;
        table.numeric.insert(d.name.clone(), values.into());
    }
    Ok(())
}

/// Summary indices (`[[index]]`) as new numeric columns. A row with no observed component
/// is missing; the reference group is where the reference expression is non-zero (missing
/// counts as outside it).
fn index_columns(plan: &Plan, src: &DataSource, table: &mut Table) -> Result<()> {
    for i in plan.indices.iter().filter(|i| i.data == src.id) {
        let fail = |message: String| data_err(src, format!("index `{}`: {message}", i.id));
        let mut cols = Vec::new();
        for (c, _) in &i.components {
            let values = table
                .numeric
                .get(c)
                .ok_or_else(|| fail(format!("component `{c}` is not available")))?;
            cols.push(values);
        }
        let complete = |r: usize| cols.iter().all(|c| c.get(r).is_some());
        let m = nalgebra::DMatrix::from_fn(table.rows, cols.len(), |r, j| {
            if i.complete_cases && !complete(r) {
                f64::NAN
            } else {
                cols[j].get(r).unwrap_or(f64::NAN)
            }
        });
        let reference: Vec<bool> = {
            let numeric = &table.numeric;
            let lookup = |name: &str| numeric.get(name).map(|c| c as &dyn Values);
            i.reference
                .1
                .eval(table.rows, &lookup)
                .map_err(|e| {
                    fail(format!(
                        "reference \"{}\": {}",
                        crate::escape::clip(&i.reference.0, crate::escape::SHOWN),
                        e.message
                    ))
                })?
                .into_iter()
                .map(|v| v.is_some_and(|v| v != 0.0))
                .collect()
        };
        let flip: Vec<bool> = i.components.iter().map(|(_, f)| *f).collect();
        let values = match i.method {
            crate::plan::IndexMethod::MeanZ => crate::estimate::mean_z(&m, &reference, &flip),
            crate::plan::IndexMethod::InverseCovariance => {
                crate::estimate::inverse_covariance(&m, &reference, &flip)
            }
        }
        .map_err(|e| fail(format!("{e}")))?;
        table.numeric.insert(
            i.id.clone(),
            values.iter().map(|v| v.is_finite().then_some(*v)).collect(),
        );
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn repeated_keys_are_counted_and_the_first_repeat_in_row_order_named() {
        let rows = ["k9", "k1", "k5", "k1", "", "k9", "k1", "k5"];
        let values = rows
            .iter()
            .map(|s| (!s.is_empty()).then(|| s.to_string()))
            .collect();
        let labels = super::super::Labels::by_row(values).expect("labels");
        // Repeats: k1 at rows 3 and 6, k9 at row 5, k5 at row 7; the first is row 3.
        let (count, first) = duplicates(&labels);
        assert_eq!((count, first.map(String::as_str)), (4, Some("k1")));
        let unique = super::super::Labels::by_row(vec![Some("a".into()), None, Some("b".into())])
            .expect("labels");
        assert_eq!(duplicates(&unique), (0, None));
    }
}
