//! Validation of the field-experiment summaries: `[[index]]` summary indices, `[balance]`
//! and `[attrition]`. Indices run after derived variables and before specifications, which
//! may use an index as a variable.

use super::errors::errors_value;
use super::scope::{
    available, available_with_indices, data_table, expr_error, is_identifier, unique, unknown, Ctx,
};
use crate::error::Result;
use crate::expr;
use crate::plan::raw::{RawErrors, RawPlan};
use crate::plan::{Attrition, Balance, ColumnKind, DataSource, Errors, Index, IndexMethod, Plan};
use crate::suggest::hint;
use std::collections::BTreeSet;
use toml::Spanned;

fn name_in(
    ctx: &Ctx,
    v: &Spanned<String>,
    names: &BTreeSet<String>,
    key: &str,
    what: &str,
) -> Result<String> {
    if names.contains(v.get_ref()) {
        Ok(v.get_ref().clone())
    } else {
        Err(ctx.at(
            v,
            key,
            format!(
                "{} {what}",
                unknown("variable", v.get_ref(), names.iter().map(String::as_str))
            ),
        ))
    }
}

fn expression(
    ctx: &Ctx,
    text: &Spanned<String>,
    names: &BTreeSet<String>,
    table: &DataSource,
    key: &str,
) -> Result<(String, expr::Expr)> {
    let e = expr::parse(text.get_ref()).map_err(|e| expr_error(ctx, text, key, &e))?;
    if e.uses_lag() && table.order_by.is_none() {
        return Err(ctx.at(text, key, "lag/diff need the table's row order: add order_by = \"COLUMN\" to its [data.NAME] table"));
    }
    if let Some(n) = e.names().into_iter().find(|n| !names.contains(n)) {
        return Err(ctx.at(
            text,
            key,
            format!(
                "unknown name `{n}` in \"{}\"{}",
                text.get_ref(),
                hint(&n, names.iter().map(String::as_str))
            ),
        ));
    }
    Ok((text.get_ref().clone(), e))
}

fn binary_arm(ctx: &Ctx, t: &DataSource, by: &Spanned<String>, key: &str) -> Result<String> {
    match t.columns.get(by.get_ref()) {
        Some(c) if c.kind == ColumnKind::Binary => Ok(by.get_ref().clone()),
        Some(c) => Err(ctx.at(
            by,
            key,
            format!(
                "`{}` is of kind {}; the arm indicator must be a binary (0/1) column",
                by.get_ref(),
                c.kind.name()
            ),
        )),
        None => Err(ctx.at(
            by,
            key,
            unknown("column", by.get_ref(), t.columns.keys().map(String::as_str)),
        )),
    }
}

/// `[[index]]` entries.
pub(super) fn indices(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Vec<Index>> {
    unique(ctx, raw.indices.iter().map(|i| &i.get_ref().id), "index")?;
    let mut out: Vec<Index> = Vec::new();
    for i in &raw.indices {
        let i = i.get_ref();
        let id = i.id.get_ref().clone();
        let key = |k: &str| format!("index[{id}].{k}");
        let t = data_table(ctx, plan, i.data.as_ref(), &i.id, &key("data"))?;
        let names = available(t, &plan.derive);
        if names.contains(&id) || t.columns.contains_key(&id) || id == "intercept" {
            return Err(ctx.at(
                &i.id,
                key("id"),
                format!(
                    "index id `{id}` is already a column or derived variable; choose another name"
                ),
            ));
        }
        if !is_identifier(&id) {
            return Err(ctx.at(&i.id, key("id"), "an index id must be a plain name (letters, digits, underscores, not starting with a digit)"));
        }
        ctx.one_of(&i.method, &key("method"), &["anderson", "mean-z"])?;
        let method = if i.method.get_ref() == "anderson" {
            IndexMethod::InverseCovariance
        } else {
            IndexMethod::MeanZ
        };
        if i.components.len() < 2 {
            return Err(ctx.at(
                &i.id,
                key("components"),
                "a summary index needs at least two components",
            ));
        }
        let components = components(ctx, &i.components, &names, &key("components"))?;
        let reference = expression(ctx, &i.reference, &names, t, &key("reference"))?;
        let complete_cases = match &i.missing {
            Some(m) => {
                ctx.one_of(m, &key("missing"), &["available", "complete"])?;
                m.get_ref() == "complete"
            }
            None => false,
        };
        out.push(Index {
            complete_cases,
            id,
            data: t.id.clone(),
            method,
            components,
            reference,
        });
    }
    Ok(out)
}

/// An index's components, each a variable of its table, `-name` flipping its sign; no name
/// twice.
fn components(
    ctx: &Ctx,
    listed: &[Spanned<String>],
    names: &BTreeSet<String>,
    key: &str,
) -> Result<Vec<(String, bool)>> {
    let mut components = Vec::new();
    let mut seen = BTreeSet::new();
    for c in listed {
        let (flip, name) = match c.get_ref().strip_prefix('-') {
            Some(rest) => (true, rest.trim().to_string()),
            None => (false, c.get_ref().clone()),
        };
        let named = Spanned::new(c.span(), name);
        let name = name_in(ctx, &named, names, key, "among the index's components")?;
        if !seen.insert(name.clone()) {
            return Err(ctx.at(c, key, format!("`{name}` is listed twice")));
        }
        components.push((name, flip));
    }
    Ok(components)
}

/// `[balance]`'s covariates: at least one, each available in the table (or an index), none
/// twice, and not the arm indicator `by`.
fn balance_covariates(
    ctx: &Ctx,
    b: &crate::plan::raw::RawBalance,
    t: &DataSource,
    plan: &Plan,
    by: &str,
) -> Result<Vec<String>> {
    let names = available_with_indices(t, plan);
    if b.covariates.is_empty() {
        return Err(ctx.at(
            &b.by,
            "balance.covariates",
            "list at least one baseline covariate",
        ));
    }
    let covariates = b
        .covariates
        .iter()
        .map(|c| {
            name_in(
                ctx,
                c,
                &names,
                "balance.covariates",
                "among the baseline covariates",
            )
        })
        .collect::<Result<Vec<_>>>()?;
    let mut seen = BTreeSet::new();
    if let Some(dup) = b
        .covariates
        .iter()
        .find(|c| !seen.insert(c.get_ref().clone()))
    {
        return Err(ctx.at(
            dup,
            "balance.covariates",
            format!("`{}` is listed twice", dup.get_ref()),
        ));
    }
    if covariates.iter().any(|c| c == by) {
        return Err(ctx.at(
            &b.by,
            "balance.covariates",
            "the arm indicator cannot be its own covariate",
        ));
    }
    Ok(covariates)
}

/// `[balance]`.
pub(super) fn balance(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Option<Balance>> {
    let Some(b) = &raw.balance else {
        return Ok(None);
    };
    let b = b.get_ref();
    let t = data_table(ctx, plan, b.data.as_ref(), &b.by, "balance.data")?;
    let by = binary_arm(ctx, t, &b.by, "balance.by")?;
    let covariates = balance_covariates(ctx, b, t, plan, &by)?;
    let (errors, blocks) = registered_design(ctx, plan, t, &b.by, b.errors.as_ref(), "balance")?;
    let weights = summary_weights(
        ctx,
        b.weights.as_ref(),
        b.errors.as_ref(),
        &errors,
        t,
        "balance",
    )?;
    Ok(Some(Balance {
        data: t.id.clone(),
        by,
        covariates,
        errors,
        blocks,
        weights,
    }))
}

/// `[attrition]`.
pub(super) fn attrition(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Option<Attrition>> {
    let Some(a) = &raw.attrition else {
        return Ok(None);
    };
    let a = a.get_ref();
    let t = data_table(ctx, plan, a.data.as_ref(), &a.by, "attrition.data")?;
    let by = binary_arm(ctx, t, &a.by, "attrition.by")?;
    let names = available_with_indices(t, plan);
    let observed = expression(ctx, &a.observed, &names, t, "attrition.observed")?;
    let bounds = a
        .bounds
        .iter()
        .map(|c| {
            name_in(
                ctx,
                c,
                &names,
                "attrition.bounds",
                "among the outcomes to bound",
            )
        })
        .collect::<Result<Vec<_>>>()?;
    let (errors, blocks) = registered_design(ctx, plan, t, &a.by, a.errors.as_ref(), "attrition")?;
    let weights = summary_weights(
        ctx,
        a.weights.as_ref(),
        a.errors.as_ref(),
        &errors,
        t,
        "attrition",
    )?;
    if let (Some(w), Some(first)) = (
        a.weights.as_ref().filter(|_| weights.is_some()),
        a.bounds.first(),
    ) {
        return Err(ctx.at(first, "attrition.bounds", format!(
            "Lee bounds with probability weights (weights = \"{}\") are not available: the weighted trimming needs weighted quantiles, which sworn does not compute; remove `bounds` for the weighted differential-attrition test, or remove `weights` for unweighted bounds",
            w.get_ref()
        )));
    }
    Ok(Some(Attrition {
        data: t.id.clone(),
        by,
        observed,
        bounds,
        errors,
        blocks,
        weights,
    }))
}

/// The `weights` of `[balance]` or `[attrition]`: a numeric column of the table (as for a
/// specification), with the errors a weighted specification takes: classical, hc0–hc3 or
/// one-way clusters (two-way weighted errors are not implemented).
fn summary_weights(
    ctx: &Ctx,
    w: Option<&Spanned<String>>,
    raw_errors: Option<&Spanned<RawErrors>>,
    errors: &Errors,
    t: &DataSource,
    section: &str,
) -> Result<Option<String>> {
    let weights = super::specifications::weights(ctx, w, t, &format!("{section}.weights"))?;
    let (Some(w), Errors::Cluster(by)) = (w.filter(|_| weights.is_some()), errors) else {
        return Ok(weights);
    };
    if by.len() > 1 {
        let at = raw_errors.map_or(w.span(), |e| e.span());
        return Err(ctx.err(at, format!("{section}.errors"), format!(
            "a weighted check (weights = \"{}\") takes \"classical\", \"hc0\", \"hc1\", \"hc2\", \"hc3\" or {{ kind = \"cluster\", by = \"COLUMN\" }} with one column; two-way cluster errors with probability weights are not available; choose one of those or remove `weights`",
            w.get_ref()
        )));
    }
    Ok(weights)
}

/// An `errors` value for balance or attrition, where HAC errors have no time order to use.
fn summary_errors(
    ctx: &Ctx,
    v: Option<&Spanned<RawErrors>>,
    t: &DataSource,
    key: &str,
) -> Result<Errors> {
    let e = errors_value(ctx, v, t, key)?;
    match (&e, v) {
        (Errors::Hac { .. }, Some(v)) => Err(ctx.at(
            v,
            key,
            "hac errors are offered for specifications only; use classical, hc0-hc3 or cluster errors here",
        )),
        _ => Ok(e),
    }
}

/// The errors and blocks of a balance or attrition check. When `by` is the variable
/// `[assignment]` randomizes, the check follows the registered design: its blocks are
/// absorbed as fixed effects, and under a clustered design the errors are clustered at the
/// registered clusters (the default when `errors` is left out; any other `errors` must
/// cluster by them, alone or with a second dimension). Otherwise `errors` alone decides.
fn registered_design(
    ctx: &Ctx,
    plan: &Plan,
    t: &DataSource,
    by: &Spanned<String>,
    raw: Option<&Spanned<RawErrors>>,
    section: &str,
) -> Result<(Errors, Option<String>)> {
    let key = format!("{section}.errors");
    let design = plan
        .assignment
        .as_ref()
        .filter(|a| &a.variable == by.get_ref());
    let Some(a) = design else {
        return Ok((summary_errors(ctx, raw, t, &key)?, None));
    };
    for column in a.blocks.iter().chain(&a.clusters) {
        if !t.columns.contains_key(column) {
            return Err(ctx.at(
                by,
                format!("{section}.by"),
                format!(
                    "`{}` is the [assignment] variable, so this check follows the registered design, but its block or cluster column `{column}` is not in data table `{}`; add the column to [data.{}] or check another table",
                    by.get_ref(),
                    t.id,
                    t.id
                ),
            ));
        }
    }
    let errors = match (&a.clusters, raw) {
        (Some(c), None) => Errors::Cluster(vec![c.clone()]),
        (Some(c), Some(v)) => {
            let e = summary_errors(ctx, Some(v), t, &key)?;
            match &e {
                Errors::Cluster(dims) if dims.contains(c) => e,
                _ => {
                    return Err(ctx.at(
                        v,
                        &key,
                        format!(
                            "[assignment] randomized `{}` by cluster `{c}`, so these errors must be clustered by it: write errors = {{ kind = \"cluster\", by = \"{c}\" }} or leave errors out (it is then the default)",
                            a.variable
                        ),
                    ))
                }
            }
        }
        (None, _) => summary_errors(ctx, raw, t, &key)?,
    };
    Ok((errors, a.blocks.clone()))
}
