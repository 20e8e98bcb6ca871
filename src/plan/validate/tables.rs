//! `[[table]]` shells: the specifications a table shows, the terms in its rows, its
//! significance marks and summary rows.

use super::scope::{find_spec, spec_terms, unique, unknown, Ctx};
use crate::error::Result;
use crate::plan::raw::RawPlan;
use crate::plan::{Plan, Table};
use std::collections::BTreeSet;
use toml::Spanned;

/// `[[table]]` shells.
pub(super) fn tables(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Vec<Table>> {
    unique(ctx, raw.tables.iter().map(|t| &t.get_ref().id), "table")?;
    let mut out = Vec::new();
    for t in &raw.tables {
        let t = t.get_ref();
        let key = |k: &str| format!("table[{}].{k}", t.id.get_ref());
        let mut terms = BTreeSet::new();
        for c in &t.columns {
            let spec = find_spec(ctx, plan, c, &key("columns"))?;
            terms.extend(spec_terms(spec));
        }
        for r in &t.rows {
            if !terms.contains(r.get_ref()) {
                return Err(ctx.at(
                    r,
                    key("rows"),
                    format!(
                        "{} in the table's specifications",
                        unknown("term", r.get_ref(), terms.iter().map(String::as_str))
                    ),
                ));
            }
        }
        out.push(Table {
            id: t.id.get_ref().clone(),
            title: t.title.clone().unwrap_or_else(|| t.id.get_ref().clone()),
            columns: t.columns.iter().map(|c| c.get_ref().clone()).collect(),
            rows: t.rows.iter().map(|r| r.get_ref().clone()).collect(),
            stars: star_thresholds(ctx, t.stars.as_ref(), &key("stars"))?,
            summary_rows: t
                .summary_rows
                .iter()
                .map(|r| {
                    ctx.one_of(r, &key("summary_rows"), &crate::plan::SUMMARY_ROWS)
                        .map(|()| r.get_ref().clone())
                })
                .collect::<Result<_>>()?,
        });
    }
    Ok(out)
}

/// A table's `stars`: absent or `false` is no marks; otherwise a list of one to three distinct
/// p-value thresholds strictly between 0 and 1, returned largest first.
fn star_thresholds(ctx: &Ctx, v: Option<&Spanned<toml::Value>>, key: &str) -> Result<Vec<f64>> {
    const FIX: &str = "state the thresholds as a list, e.g. `stars = [0.05, 0.01]` (one mark for p below 0.05, two below 0.01), or leave the key out for no marks";
    let Some(v) = v else {
        return Ok(Vec::new());
    };
    let list = match v.get_ref() {
        toml::Value::Boolean(false) => return Ok(Vec::new()),
        toml::Value::Boolean(true) => {
            return Err(ctx.at(
                v,
                key,
                format!("`stars = true` does not say which thresholds the marks mean; {FIX}"),
            ))
        }
        toml::Value::Array(a) => a,
        other => {
            return Err(ctx.at(
                v,
                key,
                format!(
                    "expected a list of p-value thresholds, found a {}; {FIX}",
                    other.type_str()
                ),
            ))
        }
    };
    let mut out = Vec::new();
    for x in list {
        let t = match x {
            toml::Value::Float(f) => *f,
            toml::Value::Integer(i) => *i as f64,
            _ => f64::NAN,
        };
        if !(t > 0.0 && t < 1.0) || out.contains(&t) {
            return Err(ctx.at(
                v,
                key,
                format!("each threshold must be a distinct number strictly between 0 and 1 (found {x}); {FIX}"),
            ));
        }
        out.push(t);
    }
    if out.is_empty() || out.len() > 3 {
        return Err(ctx.at(
            v,
            key,
            format!("give one to three thresholds (found {}); {FIX}", out.len()),
        ));
    }
    out.sort_by(|a, b| b.total_cmp(a));
    Ok(out)
}
