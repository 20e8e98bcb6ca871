//! Raw plan → validated [`Plan`]: every name resolved before any data is read.
//!
//! Errors point at the file, line and column of the offending value, give the key path and,
//! for an unknown name, the closest known one. The first problem found is reported.

use super::raw::{RawColumn, RawData, RawPlan};
use super::{
    Column, ColumnKind, DataFormat, DataSource, Derived, Distribution, InferenceDefaults, Plan,
    SourceMap, Study,
};
use crate::error::{Error, Result};
use crate::expr;
use crate::suggest::hint;
use std::collections::{BTreeMap, BTreeSet};
use std::ops::Range;
use std::path::{Path, PathBuf};
use toml::Spanned;

/// Validation context: where the plan is, and how to point into it.
pub(super) struct Ctx {
    pub path: PathBuf,
    pub map: SourceMap,
}

impl Ctx {
    /// An error at a byte span of the plan.
    pub fn err(
        &self,
        span: Range<usize>,
        key: impl Into<String>,
        message: impl Into<String>,
    ) -> Error {
        let (line, column) = self.map.position(span.start);
        Error::Plan {
            path: self.path.clone(),
            line,
            column,
            key: key.into(),
            message: message.into(),
        }
    }

    /// An error at a spanned value.
    pub fn at<T>(
        &self,
        v: &Spanned<T>,
        key: impl Into<String>,
        message: impl Into<String>,
    ) -> Error {
        self.err(v.span(), key, message)
    }

    /// Check that `v` is one of `allowed`.
    pub fn one_of(&self, v: &Spanned<String>, key: &str, allowed: &[&str]) -> Result<()> {
        if allowed.contains(&v.get_ref().as_str()) {
            return Ok(());
        }
        let list = allowed
            .iter()
            .map(|a| format!("`{a}`"))
            .collect::<Vec<_>>()
            .join(", ");
        Err(self.at(
            v,
            key,
            format!(
                "`{}` is not allowed here; use one of {list}{}",
                crate::escape::clip(v.get_ref(), crate::escape::SHOWN),
                hint(v.get_ref(), allowed.iter().copied())
            ),
        ))
    }

    /// Check a probability-like value lies strictly between 0 and 1.
    pub fn unit_open(&self, v: &Spanned<f64>, key: &str) -> Result<f64> {
        let x = *v.get_ref();
        if x > 0.0 && x < 1.0 {
            Ok(x)
        } else {
            Err(self.at(v, key, format!("{x} must lie strictly between 0 and 1")))
        }
    }
}

/// Read, parse and validate the plan at `path`.
pub fn load(path: &Path) -> Result<Plan> {
    let text =
        std::fs::read_to_string(path).map_err(|e| Error::io(path, "cannot read the plan", e))?;
    from_text(path, text)
}

/// Parse and validate plan `text` as if it were the file at `path` (data paths resolve
/// relative to its folder).
pub fn from_text(path: &Path, text: String) -> Result<Plan> {
    let path = std::path::absolute(path)
        .map_err(|e| Error::io(path, "cannot resolve the plan path", e))?;
    super::unfilled::refuse_marks(&path, &text)?;
    let ctx = Ctx {
        path: path.clone(),
        map: SourceMap::new(&text),
    };
    let raw: RawPlan = toml::from_str(&text).map_err(|e| {
        let span = e.span().unwrap_or(0..0);
        let message = e.message().trim().to_string();
        ctx.err(span, "", parse_message(&message))
    })?;
    build(&ctx, raw, text)
}

fn parse_message(message: &str) -> String {
    if message.starts_with("unknown field") {
        format!("{message}; remove or correct the key (see docs/plan-reference.md)")
    } else if message.starts_with("missing field") {
        format!("{message}; this key is required")
    } else {
        format!("malformed plan: {message}")
    }
}

fn build(ctx: &Ctx, raw: RawPlan, text: String) -> Result<Plan> {
    if *raw.format.get_ref() != 1 {
        return Err(ctx.at(
            &raw.format,
            "format",
            format!(
                "plan format {} is not supported; this version of sworn reads format 1",
                raw.format.get_ref()
            ),
        ));
    }
    let study = study(ctx, &raw)?;
    let inference = inference(ctx, &raw)?;
    let data = data_sources(ctx, &raw)?;
    let derive = derived(ctx, &raw, &data)?;
    let mut plan = Plan {
        path: ctx.path.clone(),
        text,
        study,
        inference,
        data,
        derive,
        assignment: None,
        specifications: Vec::new(),
        hypotheses: Vec::new(),
        families: BTreeMap::new(),
        tables: Vec::new(),
        contingencies: Vec::new(),
        resampling: None,
        indices: Vec::new(),
        balance: None,
        attrition: None,
        rehearsal: None,
    };
    plan.assignment = super::validate_spec::assignment(ctx, &raw, &plan)?;
    plan.resampling = super::validate_rules::resampling(ctx, &raw)?;
    plan.indices = super::validate_summaries::indices(ctx, &raw, &plan)?;
    plan.balance = super::validate_summaries::balance(ctx, &raw, &plan)?;
    plan.attrition = super::validate_summaries::attrition(ctx, &raw, &plan)?;
    plan.specifications = super::validate_spec::specifications(ctx, &raw, &plan)?;
    plan.families = super::validate_spec::families(ctx, &raw, &plan)?;
    plan.hypotheses = super::validate_spec::hypotheses(ctx, &raw, &plan)?;
    plan.tables = super::validate_spec::tables(ctx, &raw, &plan)?;
    plan.contingencies = super::validate_rules::contingencies(ctx, &raw, &plan)?;
    super::validate_rules::families_resampled(ctx, &raw, &plan)?;
    plan.rehearsal = super::validate_rehearsal::rehearsal(ctx, &raw, &plan)?;
    Ok(plan)
}

fn study(ctx: &Ctx, raw: &RawPlan) -> Result<Study> {
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

fn inference(ctx: &Ctx, raw: &RawPlan) -> Result<InferenceDefaults> {
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

/// Parse a distribution name.
pub(super) fn distribution(ctx: &Ctx, d: &Spanned<String>, key: &str) -> Result<Distribution> {
    ctx.one_of(d, key, &["t", "normal"])?;
    Ok(if d.get_ref() == "t" {
        Distribution::T
    } else {
        Distribution::Normal
    })
}

fn data_sources(ctx: &Ctx, raw: &RawPlan) -> Result<BTreeMap<String, DataSource>> {
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
    let format = match &d.format {
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
    };
    let mut columns = BTreeMap::new();
    for (name, c) in &d.columns {
        columns.insert(
            name.get_ref().clone(),
            column(ctx, name, c, &key("columns"))?,
        );
    }
    let (rows_min, rows_max) = match &d.rows {
        Some(r) => {
            let (lo, hi) = (r.get_ref().min, r.get_ref().max);
            if lo.zip(hi).is_some_and(|(lo, hi)| lo > hi) || lo.is_some_and(|v| v < 0) {
                return Err(ctx.at(r, key("rows"), "rows needs 0 <= min <= max"));
            }
            (lo, hi)
        }
        None => (None, None),
    };
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
    use crate::data::dialect::{DEFAULT_MISSING, SEPARATORS};
    if format == DataFormat::Parquet {
        for (k, v) in [("separator", &d.separator), ("decimal", &d.decimal)] {
            if let Some(v) = v {
                return Err(ctx.at(v, key(k), format!(
                    "`{k}` applies to CSV files only; a Parquet file stores its own types: remove the key"
                )));
            }
        }
    }
    let separator = match &d.separator {
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
    };
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

/// A valid variable name: letters, digits and underscores, not starting with a digit.
pub(super) fn is_identifier(name: &str) -> bool {
    let mut chars = name.chars();
    chars
        .next()
        .is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && chars.all(|c| c.is_ascii_alphanumeric() || c == '_')
}

fn derived(ctx: &Ctx, raw: &RawPlan, data: &BTreeMap<String, DataSource>) -> Result<Vec<Derived>> {
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

/// Point an expression error at its place inside the string value.
pub(super) fn expr_error(
    ctx: &Ctx,
    text: &Spanned<String>,
    key: &str,
    e: &expr::ExprError,
) -> Error {
    let start = text.span().start + 1 + e.offset.unwrap_or(0);
    ctx.err(
        start..start,
        key,
        format!("in expression \"{}\": {}", text.get_ref(), e.message),
    )
}

/// Names available in table `t`: its numeric declared columns, then derived variables whose
/// inputs are all available (and, for lag/diff, whose table has an `order_by`).
pub(super) fn available(t: &DataSource, derive: &[Derived]) -> BTreeSet<String> {
    let mut names: BTreeSet<String> = t
        .columns
        .iter()
        .filter(|(_, c)| c.kind.is_numeric())
        .map(|(n, _)| n.clone())
        .collect();
    for d in derive {
        if d.expr.names().iter().all(|n| names.contains(n))
            && (!d.expr.uses_lag() || t.order_by.is_some())
        {
            names.insert(d.name.clone());
        }
    }
    names
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
