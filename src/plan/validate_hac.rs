//! Validation of HAC errors: `errors = { kind = "hac", kernel = "bartlett", bandwidth = B }`.
//!
//! Invariant: a validated [`Errors::Hac`] names the table's `order_by` column and a bandwidth
//! that is a whole number of at least 1 or the Newey–West (1994) rule.

use super::validate::Ctx;
use super::{DataSource, Errors, HacBandwidth};
use crate::error::Result;
use toml::Spanned;

/// The plan spelling of the automatic bandwidth rule.
pub const NEWEY_WEST_1994: &str = "newey-west-1994";

const USAGE: &str = "errors = { kind = \"hac\", kernel = \"bartlett\", bandwidth = 4 } (or bandwidth = \"newey-west-1994\")";

/// Validates the table form of HAC errors for a specification on `table`.
pub(super) fn hac(
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
