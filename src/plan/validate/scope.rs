//! The leaf of plan validation: the context that points an error into the plan text, and
//! every lookup the section validators share (names available in a table, specifications,
//! data tables, terms, identifiers, expression errors). It depends on no section.

use crate::error::{Error, Result};
use crate::expr;
use crate::plan::{DataSource, Derived, Distribution, Errors, Estimator, Plan, SourceMap, Spec};
use crate::suggest::hint;
use std::collections::BTreeSet;
use std::ops::Range;
use std::path::PathBuf;
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

pub(super) fn unknown<'a>(
    what: &str,
    name: &str,
    known: impl IntoIterator<Item = &'a str>,
) -> String {
    format!("unknown {what} `{name}`{}", hint(name, known))
}

/// Check that ids are unique.
pub(super) fn unique<'a>(
    ctx: &Ctx,
    ids: impl IntoIterator<Item = &'a Spanned<String>>,
    what: &str,
) -> Result<()> {
    let mut seen = BTreeSet::new();
    for id in ids {
        if !seen.insert(id.get_ref().as_str()) {
            return Err(ctx.at(
                id,
                what,
                format!(
                    "{what} id `{}` is used twice; ids must be unique",
                    id.get_ref()
                ),
            ));
        }
    }
    Ok(())
}

/// A valid variable name: letters, digits and underscores, not starting with a digit.
pub(super) fn is_identifier(name: &str) -> bool {
    let mut chars = name.chars();
    chars
        .next()
        .is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && chars.all(|c| c.is_ascii_alphanumeric() || c == '_')
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

/// Parse a distribution name.
pub(super) fn distribution(ctx: &Ctx, d: &Spanned<String>, key: &str) -> Result<Distribution> {
    ctx.one_of(d, key, &["t", "normal"])?;
    Ok(if d.get_ref() == "t" {
        Distribution::T
    } else {
        Distribution::Normal
    })
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

/// Names usable in `table`: [`available`] plus the indices computed on it.
pub(super) fn available_with_indices(table: &DataSource, plan: &Plan) -> BTreeSet<String> {
    let mut names = available(table, &plan.derive);
    names.extend(
        plan.indices
            .iter()
            .filter(|i| i.data == table.id)
            .map(|i| i.id.clone()),
    );
    names
}

pub(super) fn data_table<'p>(
    ctx: &Ctx,
    plan: &'p Plan,
    data: Option<&Spanned<String>>,
    at: &Spanned<String>,
    key: &str,
) -> Result<&'p DataSource> {
    match data {
        Some(d) => plan.data.get(d.get_ref()).ok_or_else(|| {
            ctx.at(
                d,
                key,
                unknown(
                    "data table",
                    d.get_ref(),
                    plan.data.keys().map(String::as_str),
                ),
            )
        }),
        None if plan.data.len() == 1 => plan
            .data
            .values()
            .next()
            .ok_or_else(|| ctx.at(at, key, "the plan has no data table")),
        None => Err(ctx.at(
            at,
            key,
            "the plan has several data tables; say which one with data = \"NAME\"",
        )),
    }
}

pub(super) fn find_spec<'p>(
    ctx: &Ctx,
    plan: &'p Plan,
    name: &Spanned<String>,
    key: &str,
) -> Result<&'p Spec> {
    plan.specifications
        .iter()
        .find(|s| &s.id == name.get_ref())
        .ok_or_else(|| {
            ctx.at(
                name,
                key,
                unknown(
                    "specification",
                    name.get_ref(),
                    plan.specifications.iter().map(|s| s.id.as_str()),
                ),
            )
        })
}

pub(super) fn groupings(
    ctx: &Ctx,
    vs: &[Spanned<String>],
    table: &DataSource,
    key: &str,
) -> Result<Vec<String>> {
    vs.iter()
        .map(|v| match table.columns.get(v.get_ref()) {
            Some(c) if c.kind.is_grouping() => Ok(v.get_ref().clone()),
            Some(c) => Err(ctx.at(
                v,
                key,
                format!(
                    "`{}` is of kind {}; groups need a category, id, integer or binary column",
                    v.get_ref(),
                    c.kind.name()
                ),
            )),
            None => Err(ctx.at(
                v,
                key,
                unknown(
                    "column",
                    v.get_ref(),
                    table.columns.keys().map(String::as_str),
                ),
            )),
        })
        .collect()
}

/// The terms a specification estimates, as named in outputs.
pub fn spec_terms(spec: &Spec) -> Vec<String> {
    let mut terms: Vec<String> = spec.focal().to_vec();
    terms.extend(spec.controls.iter().cloned());
    if spec.intercept && spec.fixed_effects.is_empty() {
        terms.push("intercept".to_string());
    }
    terms
}

/// The wild cluster bootstrap needs `[resampling]`, one-way clusters and an OLS specification
/// or a 2SLS one with one endogenous regressor (the wild restricted efficient bootstrap).
pub(super) fn wild_bootstrap_fits(
    ctx: &Ctx,
    plan: &Plan,
    spec: &Spec,
    at: &Spanned<String>,
    key: &str,
) -> Result<()> {
    if plan.resampling.is_none() {
        return Err(ctx.at(at, key, "the wild cluster bootstrap needs [resampling] with a seed (e.g. [resampling] seed = 20260501) so its p-values can be reproduced"));
    }
    let fits = match spec.estimator {
        Estimator::Ols => true,
        Estimator::Tsls => spec.endogenous.len() == 1,
        _ => false,
    };
    if !fits {
        return Err(ctx.at(at, key, format!(
            "the wild cluster bootstrap is implemented for OLS specifications and for 2SLS with one endogenous regressor (the wild restricted efficient bootstrap); `{}` is estimated by {} with {} endogenous regressor(s)",
            spec.id, spec.estimator.name(), spec.endogenous.len()
        )));
    }
    match &spec.errors {
        Errors::Cluster(by) if by.len() == 1 => Ok(()),
        _ => Err(ctx.at(at, key, format!(
            "the wild cluster bootstrap resamples one-way clusters; specification `{}` must use errors = {{ kind = \"cluster\", by = \"COLUMN\" }}",
            spec.id
        ))),
    }
}
