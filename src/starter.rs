// Over 500 lines (about 520 of code, the rest tests) because it is one command end to end:
// profile each file's columns, then write the starter plan from those profiles; the two halves
// share the profile types and nothing else uses them.
//! `sworn init DATA…`: a starter plan whose declared schema is inferred from data files.
//!
//! The starter plan declares every column with the kind its values suggest and records what
//! was observed (row count, range, missing values, key candidates) as comments only: observed
//! values never become declared bounds, because a bound read off the data is not a
//! pre-registered one. The places only the study team can fill are marked `"<fill: …>"`;
//! `sworn check` refuses a plan that still holds a mark (see [`crate::plan::unfilled`]).

use crate::data::dialect::{self, DEFAULT_MISSING};
use crate::error::{Error, Result};
use std::collections::BTreeSet;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// What sworn saw in one column.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnProfile {
    /// The column name as in the file.
    pub name: String,
    /// The kind proposed for the declared schema.
    pub kind: &'static str,
    /// Values that are missing (empty, or one of the missing-value codes).
    pub missing: usize,
    /// Distinct non-missing values.
    pub distinct: usize,
    /// Smallest and largest value, for numeric columns.
    pub range: Option<(f64, f64)>,
    /// No value missing and every value distinct: a candidate for `key`.
    pub key_candidate: bool,
}

/// What sworn saw in one data file.
#[derive(Debug, Clone)]
pub struct TableProfile {
    /// The table id proposed for `[data.ID]`.
    pub id: String,
    /// The path as written into the plan (relative to the plan when possible).
    pub path_text: String,
    /// Rows read.
    pub rows: usize,
    /// SHA-256 of the file's bytes.
    pub sha256: String,
    /// The CSV field separator found in the header line.
    pub separator: u8,
    /// Whether numbers use a decimal comma.
    pub decimal_comma: bool,
    /// One profile per column, in file order.
    pub columns: Vec<ColumnProfile>,
}

/// `sworn init DATA… --out PLAN`: write a starter plan; refuse to overwrite.
pub fn init(files: &[PathBuf], out: &Path) -> Result<()> {
    if files.is_empty() {
        return Err(Error::Data {
            path: out.to_path_buf(),
            message: "name at least one data file (CSV or Parquet): sworn init DATA… [--out PLAN]"
                .into(),
        });
    }
    if out.exists() {
        return Err(Error::Data {
            path: out.to_path_buf(),
            message: "the plan file already exists; sworn init never overwrites a plan: choose another name with --out".into(),
        });
    }
    let plan_dir = out
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let mut ids = BTreeSet::new();
    let mut tables = Vec::new();
    for file in files {
        let mut table = profile_file(file, plan_dir)?;
        table.id = unique_id(&table.id, &mut ids);
        tables.push(table);
    }
    let text = starter_text(&tables);
    write_new(out, &text)
}

/// Read and profile one file.
pub fn profile_file(file: &Path, plan_dir: &Path) -> Result<TableProfile> {
    let bytes = std::fs::read(file).map_err(|e| Error::io(file, "cannot read the data file", e))?;
    let sha256 = crate::ledger::sha256_hex(&bytes);
    let separator = dialect::detect(file);
    let columns = read_text_columns(file, separator)?;
    let rows = columns.first().map_or(0, |(_, v)| v.len());
    let decimal_comma = separator != b',' && columns.iter().any(|(_, v)| uses_decimal_comma(v));
    let stem = file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    Ok(TableProfile {
        id: table_id(&stem),
        path_text: relative_path(file, plan_dir),
        rows,
        sha256,
        separator,
        decimal_comma,
        columns: columns
            .iter()
            .map(|(n, v)| profile_column(n, v, decimal_comma))
            .collect(),
    })
}

/// The file's columns as text (missing values as `None`).
fn read_text_columns(file: &Path, separator: u8) -> Result<Vec<(String, Vec<Option<String>>)>> {
    use polars::prelude::*;
    let ext = file
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default();
    let data_err = |message: String| Error::Data {
        path: file.to_path_buf(),
        message,
    };
    let csv_separator = match ext.as_str() {
        "csv" => Some(separator),
        "parquet" | "pq" => None,
        _ => {
            return Err(data_err(format!(
                "cannot tell the format from the extension `.{ext}`; sworn reads `.csv`, `.parquet` and `.pq` files"
            )))
        }
    };
    let frame = crate::data::read_text_frame(file, csv_separator).map_err(data_err)?;
    let mut out = Vec::new();
    for col in frame.columns() {
        let name = col.name().to_string();
        let cast = col
            .as_materialized_series()
            .cast(&DataType::String)
            .map_err(|e| data_err(format!("column `{name}`: {}", first_line(&e.to_string()))))?;
        let ca = cast
            .str()
            .map_err(|e| data_err(format!("column `{name}`: {}", first_line(&e.to_string()))))?;
        let values = (0..ca.len())
            .map(|i| ca.get(i))
            .map(|v| {
                v.map(str::trim)
                    .filter(|s| !s.is_empty() && !DEFAULT_MISSING.contains(s))
                    .map(String::from)
            })
            .collect();
        out.push((name, values));
    }
    Ok(out)
}

fn first_line(s: &str) -> String {
    let line = s.lines().next().unwrap_or("");
    line.chars().take(200).collect()
}

/// Every value parses with a decimal comma and at least one only with it.
fn uses_decimal_comma(values: &[Option<String>]) -> bool {
    let present: Vec<&str> = values.iter().flatten().map(String::as_str).collect();
    !present.is_empty()
        && present
            .iter()
            .all(|s| dialect::parse_number(s, true).is_some())
        && present
            .iter()
            .any(|s| dialect::parse_number(s, false).is_none())
}

/// Propose a kind for a column from its values.
pub fn profile_column(name: &str, values: &[Option<String>], decimal_comma: bool) -> ColumnProfile {
    let present: Vec<&str> = values.iter().flatten().map(String::as_str).collect();
    let missing = values.len() - present.len();
    let distinct = present.iter().collect::<BTreeSet<_>>().len();
    let key_candidate = missing == 0 && distinct == values.len() && !values.is_empty();
    let numbers: Option<Vec<f64>> = present
        .iter()
        .map(|s| dialect::parse_number(s, decimal_comma))
        .collect();
    let looks_like_id = {
        let lower = name.to_ascii_lowercase();
        lower == "id" || lower.ends_with("_id") || lower.ends_with("id") && lower.len() <= 4
    };
    let (kind, range) = match numbers {
        Some(xs) if !xs.is_empty() => {
            let lo = xs.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = xs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let whole = xs.iter().all(|x| x.fract() == 0.0);
            let kind = if xs.iter().all(|&x| x == 0.0 || x == 1.0) {
                "binary"
            } else if whole && key_candidate && looks_like_id {
                "id"
            } else if whole {
                "integer"
            } else {
                "number"
            };
            (kind, Some((lo, hi)))
        }
        _ if present.is_empty() => ("category", None),
        _ if key_candidate => ("id", None),
        _ => ("category", None),
    };
    ColumnProfile {
        name: name.to_string(),
        kind,
        missing,
        distinct,
        range,
        key_candidate,
    }
}

/// A table id from a file stem: lower-case letters, digits and `_`, starting with a letter.
fn table_id(stem: &str) -> String {
    let mut id: String = stem
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() {
                c.to_ascii_lowercase()
            } else {
                '_'
            }
        })
        .collect();
    if !id.starts_with(|c: char| c.is_ascii_alphabetic()) {
        id.insert_str(0, "t_");
    }
    id
}

fn unique_id(id: &str, taken: &mut BTreeSet<String>) -> String {
    let mut candidate = id.to_string();
    let mut n = 2;
    while !taken.insert(candidate.clone()) {
        candidate = format!("{id}_{n}");
        n += 1;
    }
    candidate
}

/// `file` relative to `plan_dir` when both resolve and share a root; else as given.
fn relative_path(file: &Path, plan_dir: &Path) -> String {
    let (Ok(f), Ok(d)) = (std::path::absolute(file), std::path::absolute(plan_dir)) else {
        return file.to_string_lossy().into_owned();
    };
    let f: Vec<_> = f.components().collect();
    let d: Vec<_> = d.components().collect();
    let common = f.iter().zip(&d).take_while(|(a, b)| a == b).count();
    if common == 0 {
        return file.to_string_lossy().into_owned();
    }
    let mut rel = PathBuf::new();
    for _ in common..d.len() {
        rel.push("..");
    }
    for c in &f[common..] {
        rel.push(c);
    }
    rel.to_string_lossy().replace('\\', "/")
}

/// A TOML string literal.
fn quoted(s: &str) -> String {
    toml::Value::String(s.to_string()).to_string()
}

/// A TOML key: bare when it can be, else quoted.
fn toml_key(s: &str) -> String {
    let bare = !s.is_empty()
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-');
    if bare {
        s.to_string()
    } else {
        quoted(s)
    }
}

/// A number for a comment: whole numbers without a fraction, others with up to 6 significant
/// digits.
fn short(x: f64) -> String {
    if x.fract() == 0.0 && x.abs() < 1e15 {
        format!("{x:.0}")
    } else {
        let s = format!("{x:.6e}");
        s.parse::<f64>().map_or(s, |v| format!("{v}"))
    }
}

/// The starter plan's text.
pub fn starter_text(tables: &[TableProfile]) -> String {
    let mut t = String::new();
    let _ = writeln!(
        t,
        "# A starter plan written by `sworn init`. Fill every place marked \"<fill: …>\","
    );
    let _ = writeln!(
        t,
        "# review every declared kind, then `sworn check` this file and `sworn seal` it."
    );
    let _ = writeln!(t, "# The reference for every key: docs/plan-reference.md.");
    let _ = writeln!(t, "#");
    let _ = writeln!(
        t,
        "# Disclosure: `sworn init` read the files below to write this plan. If they hold"
    );
    let _ = writeln!(
        t,
        "# outcome data, say so in the study summary: a plan written after seeing outcomes"
    );
    let _ = writeln!(
        t,
        "# is not pre-registered. Observed ranges appear only as comments; declare `min` and"
    );
    let _ = writeln!(
        t,
        "# `max` from the questionnaire or codebook, not from these values."
    );
    for table in tables {
        let _ = writeln!(t, "#   {} (sha256 {})", table.path_text, table.sha256);
    }
    t.push_str("format = 1\n\n[study]\n");
    t.push_str("title = \"<fill: the study's title>\"\n");
    t.push_str("# id = \"the registry's id for this study\"\n");
    t.push_str("# authors = [\"…\"]\n");
    t.push_str("# summary = \"\"\"What was randomized, among whom, and what is measured.\"\"\"\n");
    for table in tables {
        table_text(&mut t, table);
    }
    example_text(&mut t, tables);
    t
}

fn table_text(t: &mut String, table: &TableProfile) {
    let _ = writeln!(t, "\n[data.{}]", table.id);
    let _ = writeln!(t, "path = {}", quoted(&table.path_text));
    if table.separator != b',' {
        let _ = writeln!(
            t,
            "separator = {}   # found in the header line",
            dialect::shown(table.separator)
                .split(' ')
                .next()
                .unwrap_or("\",\"")
        );
    }
    if table.decimal_comma {
        let _ = writeln!(
            t,
            "decimal = \",\"   # numbers are written with a decimal comma"
        );
    }
    let _ = writeln!(
        t,
        "# {} rows read; state the rows you expect, e.g. rows = {{ min = …, max = … }}",
        table.rows
    );
    key_lines(t, table);
    let _ = writeln!(t, "\n[data.{}.columns]", table.id);
    let width = table
        .columns
        .iter()
        .map(|c| toml_key(&c.name).chars().count())
        .max()
        .unwrap_or(0);
    for c in &table.columns {
        let key = toml_key(&c.name);
        let pad = " ".repeat(width - key.chars().count());
        let decl = format!("{{ kind = \"{}\" }}", c.kind);
        let _ = writeln!(t, "{key}{pad} = {decl:<22} # {}", observed(c));
    }
}

/// The table's key (the one complete and unique id column), or a comment naming the
/// candidates; and a commented `order_by` when a numeric column could order a series.
fn key_lines(t: &mut String, table: &TableProfile) {
    let keys: Vec<&ColumnProfile> = table.columns.iter().filter(|c| c.key_candidate).collect();
    match keys.iter().find(|c| c.kind == "id") {
        Some(k) => {
            let _ = writeln!(t, "key = {}", quoted(&k.name));
        }
        None if keys.is_empty() => {
            let _ = writeln!(
                t,
                "# no column is complete and unique, so none can be the key"
            );
        }
        None => {
            let names: Vec<String> = keys.iter().map(|c| format!("`{}`", c.name)).collect();
            let _ = writeln!(
                t,
                "# key candidates (complete and unique): {}",
                names.join(", ")
            );
        }
    }
    if let Some(order) = keys
        .iter()
        .find(|c| c.kind == "integer" || c.kind == "number")
    {
        let _ = writeln!(
            t,
            "# order_by = {}   # for a series: the row order that lag() and diff() follow",
            quoted(&order.name)
        );
    }
}

fn observed(c: &ColumnProfile) -> String {
    let mut parts = Vec::new();
    match c.range {
        Some((lo, hi)) if c.kind == "binary" => {
            parts.push(format!("values {} and {}", short(lo), short(hi)))
        }
        Some((lo, hi)) => parts.push(format!("observed {} to {}", short(lo), short(hi))),
        None => parts.push(format!("{} distinct labels", c.distinct)),
    }
    if c.missing > 0 {
        parts.push(format!("{} missing", c.missing));
    }
    if c.key_candidate {
        parts.push("complete and unique".into());
    }
    parts.join("; ")
}

fn example_text(t: &mut String, tables: &[TableProfile]) {
    let data_line = if tables.len() > 1 {
        format!(
            "data = \"<fill: which table: {}>\"\n",
            tables
                .iter()
                .map(|t| t.id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        )
    } else {
        String::new()
    };
    t.push_str(
        "\n# One specification is required. Estimators: ols, 2sls, liml, fuller. For an IV\n\
         # specification replace `regressors` by `endogenous` and `instruments`, e.g.\n\
         #   estimator = \"2sls\"\n\
         #   endogenous = [\"take_up\"]\n\
         #   instruments = [\"offer\"]\n\
         #   diagnostics = [\"first_stage\", \"reduced_form\", \"endogeneity\"]\n\
         # Errors: \"hc1\" (default), \"classical\", \"hc0\", \"hc2\", \"hc3\", or\n\
         #   { kind = \"cluster\", by = \"COLUMN\" } when assignment was by cluster.\n\
         [[specification]]\n\
         id = \"main\"\n\
         title = \"<fill: what this specification estimates>\"\n",
    );
    t.push_str(&data_line);
    t.push_str(
        "estimator = \"ols\"\n\
         outcome = \"<fill: the outcome column>\"\n\
         regressors = [\"<fill: the treatment or exposure column>\"]\n\
         # controls = [\"…\"]\n\
         errors = \"hc1\"\n\
         \n\
         # Hypotheses and the families they are corrected within, e.g.\n\
         # [family.primary]\n\
         # correction = \"holm\"\n\
         #\n\
         # [[hypothesis]]\n\
         # id = \"H1\"\n\
         # claim = \"The offer raises take-up.\"\n\
         # specification = \"main\"\n\
         # term = \"offer\"\n\
         # direction = \"greater\"\n\
         # family = \"primary\"\n",
    );
}

/// Write `text` to `out` only if `out` does not exist, never leaving a partial file.
fn write_new(out: &Path, text: &str) -> Result<()> {
    let dir = out
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "plan.toml".into());
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    std::fs::write(&tmp, text).map_err(|e| Error::io(&tmp, "cannot write the starter plan", e))?;
    // A hard link fails when the target exists, so a plan written meanwhile is never replaced.
    let linked = std::fs::hard_link(&tmp, out);
    let _ = std::fs::remove_file(&tmp);
    linked.map_err(|e| {
        if e.kind() == std::io::ErrorKind::AlreadyExists {
            Error::Data {
                path: out.to_path_buf(),
                message: "the plan file already exists; sworn init never overwrites a plan: choose another name with --out".into(),
            }
        } else {
            Error::io(out, "cannot write the starter plan", e)
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn col(values: &[&str]) -> Vec<Option<String>> {
        values
            .iter()
            .map(|s| (!s.is_empty()).then(|| s.to_string()))
            .collect()
    }

    #[test]
    fn kinds_follow_the_values() {
        assert_eq!(
            profile_column("z", &col(&["0", "1", "1"]), false).kind,
            "binary"
        );
        assert_eq!(
            profile_column("hh_id", &col(&["4", "5", "6"]), false).kind,
            "id"
        );
        assert_eq!(
            profile_column("storeys", &col(&["1", "2", "2"]), false).kind,
            "integer"
        );
        assert_eq!(
            profile_column("temp", &col(&["20.5", "21", ""]), false).kind,
            "number"
        );
        assert_eq!(
            profile_column("code", &col(&["a1", "b2", "c3"]), false).kind,
            "id"
        );
        assert_eq!(
            profile_column("district", &col(&["n", "s", "n"]), false).kind,
            "category"
        );
        assert_eq!(
            profile_column("empty", &col(&["", ""]), false).kind,
            "category"
        );
    }

    #[test]
    fn observed_facts_are_counted() {
        let p = profile_column("temp", &col(&["20.5", "", "31"]), false);
        assert_eq!(p.missing, 1);
        assert_eq!(p.range, Some((20.5, 31.0)));
        assert!(!p.key_candidate);
    }

    #[test]
    fn keys_and_ids_are_valid_toml() {
        assert_eq!(toml_key("temp_c"), "temp_c");
        assert_eq!(toml_key("floor area"), "\"floor area\"");
        assert_eq!(table_id("2024 Endline-survey"), "t_2024_endline_survey");
        let mut taken = BTreeSet::new();
        assert_eq!(unique_id("a", &mut taken), "a");
        assert_eq!(unique_id("a", &mut taken), "a_2");
    }
}
