//! A typed `errors` value ([`RawErrors`]) → [`Errors`], with the columns it names resolved in
//! the specification's or summary's data table. Shared by specifications and the balance and
//! attrition checks; depends only on [`scope`](super::scope).
//!
//! Invariant: a validated [`Errors::Hac`] names the table's `order_by` column and a bandwidth
//! that is a whole number of at least 1 or the Newey–West (1994) rule (the bandwidth is
//! checked when the value is read, in `plan::raw::errors`).

use super::scope::{groupings, Ctx};
use crate::error::Result;
use crate::plan::raw::RawErrors;
use crate::plan::{DataSource, Errors};
use toml::Spanned;

/// An `errors` value on `table`; hc1 when absent.
pub(super) fn errors_value(
    ctx: &Ctx,
    v: Option<&Spanned<RawErrors>>,
    table: &DataSource,
    key: &str,
) -> Result<Errors> {
    let Some(v) = v else {
        return Ok(Errors::Hc1);
    };
    let columns = |names: &[&String]| -> Result<Errors> {
        let spanned: Vec<Spanned<String>> = names
            .iter()
            .map(|n| Spanned::new(v.span(), (*n).clone()))
            .collect();
        groupings(ctx, &spanned, table, key).map(Errors::Cluster)
    };
    match v.get_ref() {
        RawErrors::Classical => Ok(Errors::Classical),
        RawErrors::Hc0 => Ok(Errors::Hc0),
        RawErrors::Hc1 => Ok(Errors::Hc1),
        RawErrors::Hc2 => Ok(Errors::Hc2),
        RawErrors::Hc3 => Ok(Errors::Hc3),
        RawErrors::Cluster(by) => columns(&[by]),
        RawErrors::TwoWay(first, second) => columns(&[first, second]),
        RawErrors::Hac(bandwidth) => match &table.order_by {
            Some(order_by) => Ok(Errors::Hac {
                order_by: order_by.clone(),
                bandwidth: *bandwidth,
            }),
            None => Err(ctx.at(
                v,
                key,
                format!(
                    "hac errors need the rows in time order: add order_by = \"COLUMN\" to the [data.{}] table",
                    table.id
                ),
            )),
        },
        RawErrors::Invalid(message) => Err(ctx.at(v, key, message.clone())),
    }
}
