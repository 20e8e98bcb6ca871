//! An `errors` value → [`Errors`]: the plain kinds, cluster tables and HAC tables, with the
//! columns they name resolved in the specification's or summary's data table. Shared by
//! specifications and the balance and attrition checks; depends only on [`scope`](super::scope).
//!
//! Invariant: a validated [`Errors::Hac`] names the table's `order_by` column and a bandwidth
//! that is a whole number of at least 1 or the Newey–West (1994) rule.

use super::scope::{groupings, Ctx};
use crate::error::Result;
use crate::plan::{DataSource, Errors, HacBandwidth};
use crate::suggest::hint;
use toml::Spanned;

/// The plan spelling of the automatic bandwidth rule.
pub const NEWEY_WEST_1994: &str = "newey-west-1994";

const USAGE: &str = "errors = { kind = \"hac\", kernel = \"bartlett\", bandwidth = 4 } (or bandwidth = \"newey-west-1994\")";

/// An `errors` value (plain kind or cluster table); hc1 when absent.
pub(super) fn errors_value(
    ctx: &Ctx,
    v: Option<&Spanned<toml::Value>>,
    table: &DataSource,
    key: &str,
) -> Result<Errors> {
    let Some(v) = v else {
        return Ok(Errors::Hc1);
    };
    let plain = ["classical", "hc0", "hc1", "hc2", "hc3"];
    let bad = || {
        ctx.at(v, key, "errors must be one of \"classical\", \"hc0\", \"hc1\", \"hc2\", \"hc3\", { kind = \"cluster\", by = \"COLUMN\" }, or { kind = \"hac\", bandwidth = 4 }")
    };
    let (kind, by) = match v.get_ref() {
        toml::Value::String(k) => (k.clone(), None),
        toml::Value::Table(t) => {
            if t.get("kind").and_then(toml::Value::as_str) == Some("hac") {
                return hac(ctx, v, t, table, key);
            }
            if let Some(extra) = t.keys().find(|k| *k != "kind" && *k != "by") {
                return Err(ctx.at(
                    v,
                    key,
                    format!("unknown key `{extra}` in errors; use kind and by"),
                ));
            }
            (
                t.get("kind")
                    .and_then(toml::Value::as_str)
                    .ok_or_else(bad)?
                    .to_string(),
                t.get("by").cloned(),
            )
        }
        _ => return Err(bad()),
    };
    if kind != "cluster" {
        if kind == "hac" {
            return Err(ctx.at(v, key, "hac errors need a bandwidth: errors = { kind = \"hac\", bandwidth = 4 } (or bandwidth = \"newey-west-1994\")"));
        }
        if !plain.contains(&kind.as_str()) {
            return Err(ctx.at(
                v,
                key,
                format!(
                    "unknown error kind `{}`; use one of \"classical\", \"hc0\", \"hc1\", \"hc2\", \"hc3\", {{ kind = \"cluster\", by = \"COLUMN\" }} or {{ kind = \"hac\", kernel = \"bartlett\", bandwidth = … }}{}",
                    crate::escape::clip(&kind, crate::escape::SHOWN),
                    hint(&kind, plain.iter().copied().chain(["cluster", "hac"]))
                ),
            ));
        }
        if by.is_some() {
            return Err(ctx.at(v, key, "`by` only goes with kind = \"cluster\""));
        }
        return Ok(match kind.as_str() {
            "classical" => Errors::Classical,
            "hc0" => Errors::Hc0,
            "hc2" => Errors::Hc2,
            "hc3" => Errors::Hc3,
            _ => Errors::Hc1,
        });
    }
    let names: Vec<String> = match by {
        Some(toml::Value::String(b)) => vec![b],
        Some(toml::Value::Array(a)) => a
            .iter()
            .filter_map(|x| x.as_str().map(String::from))
            .collect(),
        _ => return Err(ctx.at(
            v,
            key,
            "cluster errors need by = \"COLUMN\" (or a list of two columns for two-way clustering)",
        )),
    };
    if names.is_empty() || names.len() > 2 {
        return Err(ctx.at(v, key, "cluster errors take one or two cluster columns"));
    }
    if names.len() == 2 && names[0] == names[1] {
        return Err(ctx.at(v, key, "two-way clustering needs two different columns"));
    }
    let spanned: Vec<Spanned<String>> = names
        .iter()
        .map(|n| Spanned::new(v.span(), n.clone()))
        .collect();
    groupings(ctx, &spanned, table, key).map(Errors::Cluster)
}

/// Validates the table form of HAC errors for a specification on `table`.
fn hac(
    ctx: &Ctx,
    v: &Spanned<toml::Value>,
    t: &toml::Table,
    table: &DataSource,
    key: &str,
) -> Result<Errors> {
    if let Some(extra) = t
        .keys()
        .find(|k| !["kind", "kernel", "bandwidth"].contains(&k.as_str()))
    {
        return Err(ctx.at(
            v,
            key,
            format!("unknown key `{extra}` in hac errors; use kind, kernel and bandwidth: {USAGE}"),
        ));
    }
    match t.get("kernel") {
        None => {}
        Some(toml::Value::String(k)) if k == "bartlett" => {}
        Some(other) => {
            return Err(ctx.at(
                v,
                key,
                format!("kernel {other} is not available; the one HAC kernel is \"bartlett\""),
            ))
        }
    }
    let bandwidth = match t.get("bandwidth") {
        Some(toml::Value::Integer(b)) if *b >= 1 && *b <= i64::from(u32::MAX) => {
            HacBandwidth::Stated(*b as u32)
        }
        Some(toml::Value::String(s)) if s == NEWEY_WEST_1994 => HacBandwidth::NeweyWest1994,
        Some(other) => {
            return Err(ctx.at(
                v,
                key,
                format!("bandwidth {other} is not valid: give a whole number of at least 1 (lag d gets weight 1 − d/bandwidth) or \"{NEWEY_WEST_1994}\""),
            ))
        }
        None => {
            return Err(ctx.at(
                v,
                key,
                format!("hac errors need a bandwidth: {USAGE}"),
            ))
        }
    };
    let Some(order_by) = table.order_by.clone() else {
        return Err(ctx.at(
            v,
            key,
            format!(
                "hac errors need the rows in time order: add order_by = \"COLUMN\" to the [data.{}] table",
                table.id
            ),
        ));
    };
    Ok(Errors::Hac {
        order_by,
        bandwidth,
    })
}
