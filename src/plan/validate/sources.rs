//! The study, the plan-wide inference defaults, the data tables (paths, formats, columns,
//! CSV dialect) and the derived variables: what every later section resolves names against.

use super::scope::{available, distribution, expr_error, is_identifier, Ctx};
use crate::error::Result;
use crate::expr;
use crate::plan::raw::{RawColumn, RawData, RawPlan};
use crate::plan::{
    Column, ColumnKind, DataFormat, DataSource, Derived, Distribution, InferenceDefaults, Study,
};
use crate::suggest::hint;
use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;
use toml::Spanned;

pub(super) fn study(ctx: &Ctx, raw: &RawPlan) -> Result<Study> {
    let s = raw.study.get_ref();
    if s.title.trim().is_empty() {
        return Err(ctx.at(&raw.study, "study.title", "the study needs a title"));
    }
    Ok(Study {
        title: s.title.clone(),
        id: s.id.clone(),
        authors: s.authors.clone(),
        registered: s.registered.as_ref().map(|d| d.to_string()),
        summary: s.summary.clone(),
    })
}

pub(super) fn inference(ctx: &Ctx, raw: &RawPlan) -> Result<InferenceDefaults> {
    let r = &raw.inference;
    let alpha = match &r.alpha {
        Some(a) => ctx.unit_open(a, "inference.alpha")?,
        None => 0.05,
    };
    let confidence = match &r.confidence {
        Some(c) => ctx.unit_open(c, "inference.confidence")?,
        None => 0.95,
    };
    let distribution = match &r.distribution {
        Some(d) => distribution(ctx, d, "inference.distribution")?,
        None => Distribution::T,
    };
    Ok(InferenceDefaults {
        alpha,
        distribution,
        confidence,
    })
}

pub(super) fn data_sources(ctx: &Ctx, raw: &RawPlan) -> Result<BTreeMap<String, DataSource>> {
    if raw.data.is_empty() {
        return Err(ctx.err(
            0..0,
            "data",
            "the plan declares no data; add a [data.NAME] table with a path and its columns",
        ));
    }
    let base = ctx.path.parent().map(Path::to_path_buf).unwrap_or_default();
    let mut out = BTreeMap::new();
    for (id, d) in &raw.data {
        let source = data_source(ctx, id, d.get_ref(), &base)?;
        out.insert(id.get_ref().clone(), source);
    }
    Ok(out)
}

fn data_source(ctx: &Ctx, id: &Spanned<String>, d: &RawData, base: &Path) -> Result<DataSource> {
    let key = |k: &str| format!("data.{}.{k}", id.get_ref());
    let path_text = d.path.get_ref().clone();
    let path = base.join(&path_text);
    let format = data_format(ctx, d, &path, &key)?;
    let mut columns = BTreeMap::new();
    for (name, c) in &d.columns {
        columns.insert(
            name.get_ref().clone(),
            column(ctx, name, c, &key("columns"))?,
        );
    }
    let (rows_min, rows_max) = row_bounds(ctx, d, &key)?;
    let declared = |v: &Option<Spanned<String>>, k: &str| -> Result<Option<String>> {
        let Some(v) = v else { return Ok(None) };
        if !columns.contains_key(v.get_ref()) {
            return Err(ctx.at(v, key(k), format!(
                "`{}` is not a declared column of [data.{}]; declare it under [data.{}.columns]{}",
                v.get_ref(), id.get_ref(), id.get_ref(), hint(v.get_ref(), columns.keys().map(String::as_str))
            )));
        }
        Ok(Some(v.get_ref().clone()))
    };
    let key_col = declared(&d.key, "key")?;
    let order_by = declared(&d.order_by, "order_by")?;
    let max_missing_share = match &d.max_missing_share {
        Some(s) if !(0.0..=1.0).contains(s.get_ref()) => {
            return Err(ctx.at(
                s,
                key("max_missing_share"),
                "max_missing_share must lie between 0 and 1",
            ))
        }
        Some(s) => Some(*s.get_ref()),
        None => None,
    };
    let dialect = dialect(ctx, d, &key, format)?;
    Ok(DataSource {
        id: id.get_ref().clone(),
        path,
        path_text,
        format,
        rows_min,
        rows_max,
        key: key_col,
        order_by,
        max_missing_share,
        separator: dialect.separator,
        decimal_comma: dialect.decimal_comma,
        missing: dialect.missing,
        columns,
    })
}

/// A table's format: stated, or read off the path's extension.
fn data_format(
    ctx: &Ctx,
    d: &RawData,
    path: &Path,
    key: &dyn Fn(&str) -> String,
) -> Result<DataFormat> {
    let path_text = d.path.get_ref();
    Ok(match &d.format {
        Some(f) => {
            ctx.one_of(f, &key("format"), &["csv", "parquet"])?;
            if f.get_ref() == "csv" { DataFormat::Csv } else { DataFormat::Parquet }
        }
        None => match path.extension().and_then(|e| e.to_str()).map(str::to_lowercase).as_deref() {
            Some("csv") => DataFormat::Csv,
            Some("parquet") | Some("pq") => DataFormat::Parquet,
            _ => return Err(ctx.at(&d.path, key("path"), format!(
                "cannot tell the format of `{path_text}` from its extension; add format = \"csv\" or \"parquet\""
            ))),
        },
    })
}

/// A table's `rows = { min, max }` bounds, when stated.
fn row_bounds(
    ctx: &Ctx,
    d: &RawData,
    key: &dyn Fn(&str) -> String,
) -> Result<(Option<i64>, Option<i64>)> {
    Ok(match &d.rows {
        Some(r) => {
            let (lo, hi) = (r.get_ref().min, r.get_ref().max);
            if lo.zip(hi).is_some_and(|(lo, hi)| lo > hi) || lo.is_some_and(|v| v < 0) {
                return Err(ctx.at(r, key("rows"), "rows needs 0 <= min <= max"));
            }
            (lo, hi)
        }
        None => (None, None),
    })
}

/// A table's declared CSV dialect and missing-value codes.
struct Dialect {
    separator: u8,
    decimal_comma: bool,
    missing: Vec<String>,
}

fn dialect(
    ctx: &Ctx,
    d: &RawData,
    key: &dyn Fn(&str) -> String,
    format: DataFormat,
) -> Result<Dialect> {
    use crate::plan::DEFAULT_MISSING;
    if format == DataFormat::Parquet {
        for (k, v) in [("separator", &d.separator), ("decimal", &d.decimal)] {
            if let Some(v) = v {
                return Err(ctx.at(v, key(k), format!(
                    "`{k}` applies to CSV files only; a Parquet file stores its own types: remove the key"
                )));
            }
        }
    }
    let separator = separator(ctx, d, key)?;
    let decimal_comma = match &d.decimal {
        None => false,
        Some(v) => {
            ctx.one_of(v, &key("decimal"), &[".", ","])?;
            v.get_ref() == ","
        }
    };
    if decimal_comma && separator == b',' {
        let at = d.decimal.as_ref().map_or(0..0, |v| v.span());
        return Err(ctx.err(at, key("decimal"), "a decimal comma needs another field separator; set separator = \";\" (the usual pairing) or a tab"));
    }
    let missing = match &d.missing {
        None => DEFAULT_MISSING.iter().map(|s| s.to_string()).collect(),
        Some(v) => {
            if let Some(bad) = v.get_ref().iter().find(|s| s.trim() != s.as_str()) {
                return Err(ctx.at(v, key("missing"), format!(
                    "missing-value code `{}` has spaces around it; values are trimmed before they are compared, so write it without them",
                    bad.chars().take(80).collect::<String>()
                )));
            }
            v.get_ref().clone()
        }
    };
    Ok(Dialect {
        separator,
        decimal_comma,
        missing,
    })
}

/// The CSV field separator: a comma unless one of `dialect::SEPARATORS` is stated.
fn separator(ctx: &Ctx, d: &RawData, key: &dyn Fn(&str) -> String) -> Result<u8> {
    use crate::plan::SEPARATORS;
    Ok(match &d.separator {
        None => b',',
        Some(v) => match SEPARATORS.iter().find(|(text, _, _)| *text == v.get_ref()) {
            Some((_, byte, _)) => *byte,
            None => {
                let list: Vec<String> = SEPARATORS
                    .iter()
                    .map(|(_, _, shown)| shown.to_string())
                    .collect();
                return Err(ctx.at(
                    v,
                    key("separator"),
                    format!(
                        "`{}` is not a separator sworn reads; use one of {}",
                        v.get_ref().chars().take(20).collect::<String>(),
                        list.join(", ")
                    ),
                ));
            }
        },
    })
}

fn column(ctx: &Ctx, name: &Spanned<String>, c: &Spanned<RawColumn>, key: &str) -> Result<Column> {
    let key = format!("{key}.{}", name.get_ref());
    if name.get_ref() == "intercept" {
        return Err(ctx.at(
            name,
            key,
            "`intercept` is reserved for the constant term; rename the column",
        ));
    }
    let raw = c.get_ref();
    ctx.one_of(
        &raw.kind,
        &format!("{key}.kind"),
        &["id", "category", "binary", "number", "integer"],
    )?;
    let kind = match raw.kind.get_ref().as_str() {
        "id" => ColumnKind::Id,
        "category" => ColumnKind::Category,
        "binary" => ColumnKind::Binary,
        "integer" => ColumnKind::Integer,
        _ => ColumnKind::Number,
    };
    if raw.min.zip(raw.max).is_some_and(|(lo, hi)| lo > hi) {
        return Err(ctx.at(c, key, "min is larger than max"));
    }
    Ok(Column {
        kind,
        min: raw.min,
        max: raw.max,
        unit: raw.unit.clone(),
    })
}

pub(super) fn derived(
    ctx: &Ctx,
    raw: &RawPlan,
    data: &BTreeMap<String, DataSource>,
) -> Result<Vec<Derived>> {
    let mut out: Vec<Derived> = Vec::new();
    for (name, text) in &raw.derive {
        let key = format!("derive.{}", name.get_ref());
        let n = name.get_ref();
        if !is_identifier(n) || n == "intercept" || ["and", "or", "not", "if"].contains(&n.as_str())
        {
            return Err(ctx.at(
                name,
                key,
                format!("`{n}` cannot name a variable; use letters, digits and underscores"),
            ));
        }
        if out.iter().any(|d| &d.name == n) || data.values().any(|t| t.columns.contains_key(n)) {
            return Err(ctx.at(
                name,
                key,
                format!("`{n}` is already a column or derived variable; choose another name"),
            ));
        }
        let parsed = expr::parse(text.get_ref()).map_err(|e| expr_error(ctx, text, &key, &e))?;
        check_expr_names(ctx, text, &key, &parsed, data, &out)?;
        out.push(Derived {
            name: n.clone(),
            text: text.get_ref().clone(),
            expr: parsed,
        });
    }
    Ok(out)
}

fn check_expr_names(
    ctx: &Ctx,
    text: &Spanned<String>,
    key: &str,
    e: &expr::Expr,
    data: &BTreeMap<String, DataSource>,
    earlier: &[Derived],
) -> Result<()> {
    let ok = data.values().any(|t| {
        let names = available(t, earlier);
        e.names().iter().all(|n| names.contains(n)) && (!e.uses_lag() || t.order_by.is_some())
    });
    if ok {
        return Ok(());
    }
    let all: BTreeSet<String> = data.values().flat_map(|t| available(t, earlier)).collect();
    for n in e.names() {
        if let Some((t, c)) = data
            .values()
            .find_map(|t| t.columns.get(&n).map(|c| (t, c)))
        {
            if !c.kind.is_numeric() {
                return Err(ctx.at(text, key, format!(
                    "`{n}` in [data.{}] is of kind {}; expressions work on numeric columns (number, integer, binary)",
                    t.id, c.kind.name()
                )));
            }
        } else if !all.contains(&n) {
            return Err(ctx.at(
                text,
                key,
                format!(
                    "unknown name `{n}` in expression \"{}\"{}",
                    text.get_ref(),
                    hint(&n, all.iter().map(String::as_str))
                ),
            ));
        }
    }
    Err(ctx.at(text, key, if e.uses_lag() {
        "lag/diff need the table's row order: add order_by = \"COLUMN\" to its [data.NAME] table".to_string()
    } else {
        "the names in this expression do not all come from one data table".to_string()
    }))
}
