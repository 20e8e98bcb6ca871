//! Reading a table with polars and checking it against the declared schema.

use super::{Labels, Table};
use crate::deviation::{Deviation, DeviationCode};
use crate::error::{Error, Result};
use crate::plan::{Column, ColumnKind, DataFormat, DataSource, Plan};
use polars::prelude::*;
use std::collections::{BTreeMap, BTreeSet};

/// Raw values of one column: text (CSV, or text columns in Parquet) or numbers.
enum RawValues {
    Text(Vec<Option<String>>),
    Numbers(Vec<Option<f64>>),
}

fn data_err(src: &DataSource, message: impl Into<String>) -> Error {
    Error::Data {
        path: src.path.clone(),
        message: message.into(),
    }
}

/// Reads the file once: CSV is parsed from the bytes in memory while another thread hashes
/// the same bytes (so the fingerprint is of exactly the bytes parsed, with no second read);
/// Parquet is read by its checked reader and hashed in blocks. Returns the frame and the
/// file's SHA-256.
fn read_frame(src: &DataSource) -> Result<(DataFrame, String)> {
    if !src.path.exists() {
        return Err(data_err(src, format!(
            "the data file of [data.{}] does not exist (path = \"{}\", relative to the plan); check the path",
            src.id, src.path_text
        )));
    }
    if src.format == DataFormat::Csv {
        super::dialect::check_separator(&src.path, &src.id, src.separator)
            .map_err(|m| data_err(src, m))?;
    }
    match src.format {
        DataFormat::Csv => {
            let bytes = read_bytes(src)?;
            let (frame, sha256) = std::thread::scope(|scope| {
                let hash = scope.spawn(|| crate::ledger::sha256_hex(&bytes));
                let frame = parse_csv(src, &bytes);
                (frame, hash.join())
            });
            let sha256 = sha256.map_err(|_| data_err(src, "hashing the file failed"))?;
            Ok((frame?, sha256))
        }
        DataFormat::Parquet => {
            let frame = super::parquet::read(&src.path).map_err(|e| data_err(src, e))?;
            let sha256 = crate::files::sha256_streamed(&src.path, crate::files::Links::Follow)?;
            Ok((frame, sha256))
        }
    }
}

/// The whole file (a regular file only, never blocking on a FIFO or device).
fn read_bytes(src: &DataSource) -> Result<Vec<u8>> {
    use std::io::Read;
    let mut file = crate::files::open_regular(&src.path, crate::files::Links::Follow)?;
    let len = file.metadata().map_or(0, |m| m.len());
    let mut bytes = Vec::with_capacity(usize::try_from(len).unwrap_or(0));
    file.read_to_end(&mut bytes)
        .map_err(|e| Error::io(&src.path, "cannot read the data file", e))?;
    Ok(bytes)
}

/// Every column as text (numbers are parsed by Rust's correctly rounded parser later).
fn parse_csv(src: &DataSource, bytes: &[u8]) -> Result<DataFrame> {
    super::parquet::isolated("reading the file as CSV", || {
        CsvReadOptions::default()
            .with_has_header(true)
            .with_infer_schema_length(Some(0))
            .with_parse_options(CsvParseOptions::default().with_separator(src.separator))
            .into_reader_with_file_handle(std::io::Cursor::new(bytes))
            .finish()
    })
    .map_err(|e| {
        data_err(
            src,
            format!(
                "cannot read the file as CSV: {}",
                super::dialect::reader_message(&e.to_string(), src.separator)
            ),
        )
    })
}

/// The values of column `name`, `None` when the file has no such column. A text column
/// declared numeric (`numeric`) is parsed straight from polars' text, cell by cell, with no
/// intermediate copy; the first unparsable value is an error naming its place.
fn raw_values(
    src: &DataSource,
    frame: &DataFrame,
    name: &str,
    numeric: bool,
) -> Result<Option<RawValues>> {
    let Ok(col) = frame.column(name) else {
        return Ok(None);
    };
    let series = col.as_materialized_series();
    if series.len() != frame.height() {
        return Err(data_err(
            src,
            format!(
                "column `{name}` holds {} values but the file has {} rows; the file is damaged",
                series.len(),
                frame.height()
            ),
        ));
    }
    let err = |e: PolarsError| data_err(src, format!("column `{name}`: {e}"));
    if series.dtype().is_primitive_numeric() || series.dtype() == &DataType::Boolean {
        let cast = series.cast(&DataType::Float64).map_err(err)?;
        let ca = cast.f64().map_err(err)?;
        return Ok(Some(RawValues::Numbers(ca.iter().collect())));
    }
    let cast = series.cast(&DataType::String).map_err(err)?;
    let ca = cast.str().map_err(err)?;
    let cell = |v| present(src, v);
    if numeric {
        let values = ca
            .iter()
            .enumerate()
            .map(|(i, v)| match cell(v) {
                None => Ok(None),
                Some(s) => super::dialect::parse_number(s, src.decimal_comma)
                    .map(Some)
                    .ok_or_else(|| not_a_number(src, name, i, s)),
            })
            .collect::<Result<Vec<_>>>()?;
        return Ok(Some(RawValues::Numbers(values)));
    }
    let values = ca.iter().map(|v| cell(v).map(String::from)).collect();
    Ok(Some(RawValues::Text(values)))
}

/// A cell's trimmed text, `None` when empty or one of the table's missing codes.
fn present<'a>(src: &DataSource, v: Option<&'a str>) -> Option<&'a str> {
    v.map(str::trim)
        .filter(|s| !s.is_empty() && !src.missing.iter().any(|m| m == s))
}

/// Where row `i` (0-based, in file order) is, in the user's terms: the file line of a CSV
/// (the header is line 1) or the row number of a Parquet file.
fn row_place(src: &DataSource, i: usize) -> String {
    match src.format {
        DataFormat::Csv => format!("line {}", i + 2),
        DataFormat::Parquet => format!("row {}", i + 1),
    }
}

/// The error for a value of a numeric column that is not a finite number.
fn not_a_number(src: &DataSource, name: &str, i: usize, shown: &str) -> Error {
    data_err(
        src,
        format!(
            "column `{name}` is declared numeric but {} holds `{}`; {}",
            row_place(src, i),
            crate::escape::clip(shown, crate::escape::SHOWN),
            super::dialect::not_a_number_advice(shown, src.decimal_comma, &src.missing)
        ),
    )
}

/// Numbers of a numeric column; the first non-finite value is an error naming its place and
/// value. NaN and infinities are refused alike from CSV text and Parquet numbers, since
/// neither is a measurement.
fn to_numbers(src: &DataSource, name: &str, raw: RawValues) -> Result<Vec<Option<f64>>> {
    match raw {
        RawValues::Numbers(mut v) => {
            if let Some((i, x)) = v
                .iter()
                .enumerate()
                .find_map(|(i, x)| x.filter(|x| !x.is_finite()).map(|x| (i, x)))
            {
                return Err(not_a_number(src, name, i, &format!("{x}")));
            }
            v.shrink_to_fit();
            Ok(v)
        }
        RawValues::Text(v) => v
            .into_iter()
            .enumerate()
            .map(|(i, s)| match s {
                None => Ok(None),
                Some(s) => super::dialect::parse_number(&s, src.decimal_comma)
                    .map(Some)
                    .ok_or_else(|| not_a_number(src, name, i, &s)),
            })
            .collect(),
    }
}

fn to_labels(src: &DataSource, name: &str, kind: ColumnKind, raw: RawValues) -> Result<Labels> {
    match raw {
        RawValues::Text(v) if kind == ColumnKind::Id => Labels::by_row(v),
        RawValues::Text(v) => Labels::from_text(v),
        RawValues::Numbers(v) => Labels::from_numbers(&v),
    }
    .map_err(|_| too_many_labels(src, name))
}

fn too_many_labels(src: &DataSource, name: &str) -> Error {
    data_err(
        src,
        format!(
            "grouping column `{name}` has more than 4,294,967,295 distinct labels; split the file"
        ),
    )
}

/// Declared columns a run needs: those used by specifications (directly or through derived
/// variables), keys, row orders, clusters and the assignment.
pub(crate) fn needed_columns(plan: &Plan, src: &DataSource) -> BTreeSet<String> {
    let mut names = BTreeSet::new();
    for s in plan.specifications.iter().filter(|s| s.data == src.id) {
        names.extend(
            s.endogenous
                .iter()
                .chain(&s.instruments)
                .chain(&s.regressors)
                .chain(&s.controls)
                .cloned(),
        );
        names.insert(s.outcome.clone());
        names.extend(s.fixed_effects.iter().cloned());
        names.extend(s.errors.cluster_columns().iter().cloned());
        if let Some((_, e)) = &s.sample {
            names.extend(e.names());
        }
    }
    for i in plan.indices.iter().filter(|i| i.data == src.id) {
        names.extend(i.components.iter().map(|(c, _)| c.clone()));
        names.extend(i.reference.1.names());
    }
    if let Some(b) = plan.balance.as_ref().filter(|b| b.data == src.id) {
        names.insert(b.by.clone());
        names.extend(b.covariates.iter().cloned());
        names.extend(b.errors.cluster_columns().iter().cloned());
    }
    if let Some(a) = plan.attrition.as_ref().filter(|a| a.data == src.id) {
        names.insert(a.by.clone());
        names.extend(a.observed.1.names());
        names.extend(a.bounds.iter().cloned());
        names.extend(a.errors.cluster_columns().iter().cloned());
    }
    if let Some(a) = &plan.assignment {
        names.insert(a.variable.clone());
        names.extend(a.blocks.iter().cloned());
        names.extend(a.clusters.iter().cloned());
    }
    for d in plan.derive.iter().rev() {
        if names.contains(&d.name) {
            names.extend(d.expr.names());
        }
    }
    names.extend(src.key.iter().cloned());
    names.extend(src.order_by.iter().cloned());
    names.retain(|n| src.columns.contains_key(n));
    names
}

/// Read `src`, check it against its declared schema and evaluate derived variables.
/// Returns the table and the schema deviations found.
pub fn load_table(plan: &Plan, src: &DataSource) -> Result<(Table, Vec<Deviation>)> {
    let (mut frame, sha256) = read_frame(src)?;
    let rows = frame.height();
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
    let file_columns: Vec<String> = frame
        .get_column_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let mut devs = Vec::new();
    let mut table = Table {
        id: src.id.clone(),
        path: src.path.clone(),
        sha256,
        rows,
        numeric: Default::default(),
        labels: Default::default(),
    };
    for (name, col) in &src.columns {
        let Some(raw) = raw_values(src, &frame, name, col.kind.is_numeric())? else {
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
        // Each polars column is released once converted, so the text of the whole file
        // and every converted column are never held at once.
        drop(frame.drop_in_place(name));
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
        let values = match raw {
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
            numbers => to_numbers(&file, name, numbers)?,
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
                &file,
                format!(
                    "column `{name}` is declared {} in [data.{}] but {} holds {x}; correct the baseline file or the declared kind",
                    kind.map_or("number", ColumnKind::name),
                    src.id,
                    row_place(&file, i)
                ),
            ));
        }
        columns.insert(name.clone(), values);
    }
    Ok(BaselineColumns {
        sha256,
        rows,
        header,
        columns,
    })
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
            table.numeric.insert(name, values);
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
    out.numeric.insert(name.to_string(), values);
    derive_columns(plan, src, &mut out)?;
    index_columns(plan, src, &mut out)?;
    Ok(out)
}

fn load_column(
    src: &DataSource,
    table: &mut Table,
    name: &str,
    col: &Column,
    raw: RawValues,
    devs: &mut Vec<Deviation>,
) -> Result<()> {
    let subject = format!("{}.{name}", src.id);
    if !col.kind.is_numeric() {
        table
            .labels
            .insert(name.to_string(), to_labels(src, name, col.kind, raw)?);
        return Ok(());
    }
    let values = to_numbers(src, name, raw)?;
    let present = || {
        values
            .iter()
            .enumerate()
            .filter_map(|(i, v)| v.map(|v| (i, v)))
    };
    let bad_kind: Vec<(usize, f64)> = match col.kind {
        ColumnKind::Binary => present().filter(|(_, v)| *v != 0.0 && *v != 1.0).collect(),
        ColumnKind::Integer => present().filter(|(_, v)| v.fract() != 0.0).collect(),
        _ => Vec::new(),
    };
    if let Some((row, v)) = bad_kind.first() {
        devs.push(Deviation::new(
            DeviationCode::ColumnKind,
            subject.clone(),
            format!(
                "column `{name}` is declared {} but {} value(s) are not (first: {}, value {v})",
                col.kind.name(),
                bad_kind.len(),
                row_place(src, *row)
            ),
        ));
    }
    let outside: Vec<(usize, f64)> = present()
        .filter(|(_, v)| col.min.is_some_and(|m| *v < m) || col.max.is_some_and(|m| *v > m))
        .collect();
    if let Some((row, v)) = outside.first() {
        devs.push(Deviation::new(DeviationCode::ValueOutOfRange, subject, format!(
            "{} value(s) of `{name}` lie outside the declared range [{}, {}] (first: {}, value {v})",
            outside.len(), bound(col.min), bound(col.max), row_place(src, *row)
        )));
    }
    if col.kind.is_grouping() {
        let labels = Labels::from_numbers(&values).map_err(|_| too_many_labels(src, name))?;
        table.labels.insert(name.to_string(), labels);
    }
    table.numeric.insert(name.to_string(), values);
    Ok(())
}

fn bound(b: Option<f64>) -> String {
    b.map_or("unbounded".to_string(), |v| format!("{v}"))
}

/// Sort all columns by `order_by` (numeric ascending, or text order for labels).
fn order_rows(src: &DataSource, table: &mut Table) -> Result<()> {
    let Some(by) = &src.order_by else {
        return Ok(());
    };
    let keys: Vec<Option<f64>> = match table.numeric.get(by) {
        Some(v) => v.clone(),
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
        *v = idx.iter().map(|&i| v[i]).collect();
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
    let mut seen = BTreeSet::new();
    let dups: Vec<&String> = labels
        .iter()
        .flatten()
        .filter(|v| !seen.insert(v.as_str()))
        .collect();
    if let Some(first) = dups.first() {
        devs.push(Deviation::new(
            DeviationCode::KeyDuplicate,
            format!("{}.{key}", src.id),
            format!(
                "key `{key}` is not unique: {} duplicate row(s) (first duplicated value `{}`)",
                dups.len(),
                crate::escape::clip(first, crate::escape::SHOWN)
            ),
        ));
    }
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
            let lookup = |name: &str| numeric.get(name).map(Vec::as_slice);
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
        table.numeric.insert(d.name.clone(), values);
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
        let complete = |r: usize| cols.iter().all(|c| c[r].is_some());
        let m = nalgebra::DMatrix::from_fn(table.rows, cols.len(), |r, j| {
            if i.complete_cases && !complete(r) {
                f64::NAN
            } else {
                cols[j][r].unwrap_or(f64::NAN)
            }
        });
        let reference: Vec<bool> = {
            let numeric = &table.numeric;
            let lookup = |name: &str| numeric.get(name).map(Vec::as_slice);
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
