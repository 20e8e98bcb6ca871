//! A table's bytes and cells: reading the file (CSV through Rust's correctly rounded parser,
//! Parquet through `parquet.rs`), and turning each declared column's cells into numbers or
//! labels, checked against its declared kind and range (a mismatch is a deviation, a cell
//! that is not a number an error naming its row). A leaf below `read.rs`.

use super::plain_csv::{PlainColumn, PlainCsv};
use super::{Labels, Numbers, Table};
use crate::deviation::{Deviation, DeviationCode};
use crate::error::{Error, Result};
use crate::plan::{Column, ColumnKind, DataFormat, DataSource};
use polars::prelude::*;

/// Raw values of one column: text (CSV, or text columns in Parquet), numbers as a reader
/// gave them (NaN and infinities possible, refused for a numeric column), or numbers
/// already stored as a table keeps them (finite or missing: the plain CSV parser's).
pub(super) enum RawValues {
    Text(Vec<Option<String>>),
    Numbers(Vec<Option<f64>>),
    Stored(Numbers),
}

pub(super) fn data_err(src: &DataSource, message: impl Into<String>) -> Error {
    Error::Data {
        path: src.path.clone(),
        message: message.into(),
    }
}

/// Reads the file once: CSV is parsed from the bytes in memory while another thread hashes
/// the same bytes (so the fingerprint is of exactly the bytes parsed, with no second read);
/// Parquet is read by its checked reader and hashed in blocks. Returns the frame and the
/// file's SHA-256.
pub(super) fn read_frame(src: &DataSource) -> Result<(DataFrame, String)> {
    check_exists_and_separator(src)?;
    read_checked_frame(src)
}

/// [`read_frame`] once the file's existence and separator are checked.
fn read_checked_frame(src: &DataSource) -> Result<(DataFrame, String)> {
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

/// A read file's cells: the declared columns of a plain CSV file read directly
/// (`plain_csv.rs`), or the general reader's frame (Parquet, or CSV that is not plain).
pub(super) enum Cells {
    Frame(DataFrame),
    Plain(PlainCsv),
}

impl Cells {
    /// Data rows.
    pub fn height(&self) -> usize {
        match self {
            Cells::Frame(frame) => frame.height(),
            Cells::Plain(plain) => plain.rows,
        }
    }

    /// Column names in file order.
    pub fn names(&self) -> Vec<String> {
        match self {
            Cells::Frame(frame) => frame
                .get_column_names()
                .iter()
                .map(|s| s.to_string())
                .collect(),
            Cells::Plain(plain) => plain.header.clone(),
        }
    }

    /// The values of column `name` (parsed as numbers when `numeric`), released from the
    /// cells; `None` when the file has no such column. The first cell of a numeric column
    /// that is not a number is an error naming its place.
    pub fn take(
        &mut self,
        src: &DataSource,
        name: &str,
        numeric: bool,
    ) -> Result<Option<RawValues>> {
        match self {
            Cells::Frame(frame) => {
                let raw = raw_values(src, frame, name, numeric)?;
                // Each polars column is released once converted, so the text of the whole
                // file and every converted column are never held at once.
                drop(frame.drop_in_place(name));
                Ok(raw)
            }
            Cells::Plain(plain) => match plain.take(name) {
                None => Ok(None),
                Some(PlainColumn::Numbers(v)) => Ok(Some(RawValues::Stored(Numbers::stored(v)))),
                Some(PlainColumn::Text(v)) => Ok(Some(RawValues::Text(v))),
                Some(PlainColumn::NotANumber(row, text)) => {
                    Err(not_a_number(src, name, row, &text))
                }
            },
        }
    }
}

/// Reads the file once, with its SHA-256: a plain CSV file's `wanted` columns (name,
/// numeric) directly from its bytes, block by block; any other file as [`read_frame`]
/// (a CSV file found not to be plain part way is read again from the start).
pub(super) fn read_cells(src: &DataSource, wanted: &[(&str, bool)]) -> Result<(Cells, String)> {
    if src.format == DataFormat::Parquet {
        return read_frame(src).map(|(frame, sha)| (Cells::Frame(frame), sha));
    }
    check_exists_and_separator(src)?;
    let dialect = super::plain_csv::Dialect {
        separator: src.separator,
        decimal_comma: src.decimal_comma,
        missing: &src.missing,
    };
    let mut file = crate::files::open_regular(&src.path, crate::files::Links::Follow)?;
    let length = file.metadata().map_or(0, |m| m.len());
    let plain =
        super::plain_csv::read(&mut file, length, &dialect, wanted, super::plain_csv::BLOCK)
            .map_err(|e| Error::io(&src.path, "cannot read the data file", e))?;
    if let Some((plain, sha256)) = plain {
        return Ok((Cells::Plain(plain), sha256));
    }
    // Not plain: read again from the start by the general reader (checked above).
    read_checked_frame(src).map(|(frame, sha)| (Cells::Frame(frame), sha))
}

/// The file exists, and a CSV file's header line is split by the declared separator.
fn check_exists_and_separator(src: &DataSource) -> Result<()> {
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
    Ok(())
}

/// The whole file (a regular file only, never blocking on a FIFO or device).
pub(super) fn read_bytes(src: &DataSource) -> Result<Vec<u8>> {
    use std::io::Read;
    let mut file = crate::files::open_regular(&src.path, crate::files::Links::Follow)?;
    let len = file.metadata().map_or(0, |m| m.len());
    let mut bytes = Vec::with_capacity(usize::try_from(len).unwrap_or(0));
    file.read_to_end(&mut bytes)
        .map_err(|e| Error::io(&src.path, "cannot read the data file", e))?;
    Ok(bytes)
}

/// Every column as text (numbers are parsed by Rust's correctly rounded parser later).
pub(super) fn parse_csv(src: &DataSource, bytes: &[u8]) -> Result<DataFrame> {
    csv_text(bytes, src.separator).map_err(|m| data_err(src, m))
}

/// Every column of CSV `bytes` as text, under the reader's panic guard; the error is a
/// message for the user (the caller adds the file). `run` and `init` both read CSV here.
pub(super) fn csv_text(bytes: &[u8], separator: u8) -> std::result::Result<DataFrame, String> {
    super::parquet::isolated("reading the file as CSV", || {
        CsvReadOptions::default()
            .with_has_header(true)
            .with_infer_schema_length(Some(0))
            .with_parse_options(CsvParseOptions::default().with_separator(separator))
            .into_reader_with_file_handle(std::io::Cursor::new(bytes))
            .finish()
    })
    .map_err(|e| {
        format!(
            "cannot read the file as CSV: {}",
            super::dialect::reader_message(&e, separator)
        )
    })
}

/// The values of column `name`, `None` when the file has no such column. A text column
/// declared numeric (`numeric`) is parsed straight from polars' text, cell by cell, with no
/// intermediate copy; the first unparsable value is an error naming its place.
pub(super) fn raw_values(
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
        return parse_numbers(src, name, &ca.rechunk()).map(|v| Some(RawValues::Stored(v)));
    }
    let values = ca.iter().map(|v| cell(v).map(String::from)).collect();
    Ok(Some(RawValues::Text(values)))
}

/// The cells of a text column declared numeric, parsed on all cores straight into the
/// table's store (a cell that is not a finite number is refused, so what is stored is finite
/// or NaN for missing); the error names the first unparsable cell in row order whatever the
/// thread count.
fn parse_numbers(src: &DataSource, name: &str, ca: &StringChunked) -> Result<Numbers> {
    use rayon::prelude::*;
    use std::sync::atomic::{AtomicUsize, Ordering};
    let first_bad = AtomicUsize::new(usize::MAX);
    let parse = |(i, v): (usize, Option<&str>)| {
        let s = present(src, v)?;
        let x = super::dialect::parse_number(s, src.decimal_comma);
        if x.is_none() {
            first_bad.fetch_min(i, Ordering::Relaxed);
        }
        x
    };
    let mut values = Vec::with_capacity(ca.len());
    let mut offset = 0;
    for arr in ca.downcast_iter() {
        let n = arr.len();
        values.par_extend(
            (0..n)
                .into_par_iter()
                .map(|i| parse((offset + i, arr.get(i))).unwrap_or(f64::NAN)),
        );
        offset += n;
    }
    match first_bad.into_inner() {
        usize::MAX => Ok(Numbers::stored(values)),
        i => {
            let shown = ca.get(i).map(str::trim).unwrap_or_default();
            Err(not_a_number(src, name, i, shown))
        }
    }
}

/// A cell's trimmed text, `None` when empty or one of the table's missing codes.
pub(super) fn present<'a>(src: &DataSource, v: Option<&'a str>) -> Option<&'a str> {
    v.and_then(|v| super::dialect::present(v, &src.missing))
}

/// Where row `i` (0-based, in file order) is, in the user's terms: the file line of a CSV
/// (the header is line 1) or the row number of a Parquet file.
pub(super) fn row_place(src: &DataSource, i: usize) -> String {
    match src.format {
        DataFormat::Csv => format!("line {}", i + 2),
        DataFormat::Parquet => format!("row {}", i + 1),
    }
}

/// The error for a value of a numeric column that is not a finite number.
pub(super) fn not_a_number(src: &DataSource, name: &str, i: usize, shown: &str) -> Error {
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
pub(super) fn to_numbers(src: &DataSource, name: &str, raw: RawValues) -> Result<Numbers> {
    match raw {
        RawValues::Numbers(v) => {
            if let Some((i, x)) = v
                .iter()
                .enumerate()
                .find_map(|(i, x)| x.filter(|x| !x.is_finite()).map(|x| (i, x)))
            {
                return Err(not_a_number(src, name, i, &format!("{x}")));
            }
            Ok(Numbers::from(v))
        }
        RawValues::Stored(n) => Ok(n),
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

pub(super) fn to_labels(
    src: &DataSource,
    name: &str,
    kind: ColumnKind,
    raw: RawValues,
) -> Result<Labels> {
    match raw {
        RawValues::Text(v) if kind == ColumnKind::Id => Labels::by_row(v),
        RawValues::Text(v) => Labels::from_text(v),
        RawValues::Numbers(v) => Labels::from_numbers(v.iter().copied()),
        RawValues::Stored(n) => Labels::from_numbers(n.iter()),
    }
    .map_err(|_| too_many_labels(src, name))
}

pub(super) fn too_many_labels(src: &DataSource, name: &str) -> Error {
    data_err(
        src,
        format!(
            "grouping column `{name}` has more than 4,294,967,295 distinct labels; split the file"
        ),
    )
}

pub(super) fn load_column(
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
        let labels = Labels::from_numbers(values.iter()).map_err(|_| too_many_labels(src, name))?;
        table.labels.insert(name.to_string(), labels);
    }
    table.numeric.insert(name.to_string(), values);
    Ok(())
}

pub(super) fn bound(b: Option<f64>) -> String {
    b.map_or("unbounded".to_string(), |v| format!("{v}"))
}
