//! `[assignment]` and every `[[specification]]`: the estimator, the terms and their roles,
//! fixed effects, the sample, the errors and the diagnostics. Runs after data sources,
//! derived variables and indices are known.

use super::errors::errors_value;
use super::scope::{
    available_with_indices, data_table, distribution, expr_error, groupings, unique, unknown, Ctx,
};
use crate::error::Result;
use crate::expr;
use crate::plan::raw::{RawPlan, RawSpec};
use crate::plan::{Assignment, DataSource, Diagnostic, Errors, Estimator, Plan, Spec};
use std::collections::{BTreeMap, BTreeSet};
use toml::Spanned;

/// The `[assignment]` table.
pub(super) fn assignment(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Option<Assignment>> {
    let Some(a) = &raw.assignment else {
        return Ok(None);
    };
    let a = a.get_ref();
    ctx.one_of(
        &a.design,
        "assignment.design",
        &["complete", "blocked", "clustered", "blocked-clustered"],
    )?;
    let all: BTreeSet<&str> = plan
        .data
        .values()
        .flat_map(|t| t.columns.keys().map(String::as_str))
        .collect();
    let check = |v: &Spanned<String>, key: &str| {
        if all.contains(v.get_ref().as_str()) {
            Ok(v.get_ref().clone())
        } else {
            Err(ctx.at(v, key, unknown("column", v.get_ref(), all.iter().copied())))
        }
    };
    let needs = |v: &Option<Spanned<String>>, key: &str, needed: bool| -> Result<Option<String>> {
        match v {
            Some(v) => check(v, key).map(Some),
            None if needed => Err(ctx.at(
                &a.design,
                key,
                format!("design `{}` needs `{key}`", a.design.get_ref()),
            )),
            None => Ok(None),
        }
    };
    let design = a.design.get_ref();
    Ok(Some(Assignment {
        variable: check(&a.variable, "assignment.variable")?,
        design: design.clone(),
        blocks: needs(&a.blocks, "assignment.blocks", design.contains("blocked"))?,
        clusters: needs(
            &a.clusters,
            "assignment.clusters",
            design.contains("clustered"),
        )?,
    }))
}

/// All `[[specification]]` entries.
pub(super) fn specifications(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Vec<Spec>> {
    if raw.specifications.is_empty() {
        return Err(ctx.err(
            0..0,
            "specification",
            "the plan has no [[specification]]; declare at least one",
        ));
    }
    unique(
        ctx,
        raw.specifications.iter().map(|s| &s.get_ref().id),
        "specification",
    )?;
    raw.specifications
        .iter()
        .map(|s| specification(ctx, s.get_ref(), plan))
        .collect()
}

fn specification(ctx: &Ctx, s: &RawSpec, plan: &Plan) -> Result<Spec> {
    let id = s.id.get_ref().clone();
    let key = |k: &str| format!("specification[{id}].{k}");
    let table = data_table(ctx, plan, s.data.as_ref(), &s.id, &key("data"))?;
    let (estimator, fuller_k) = estimator(ctx, s, &key)?;
    let worst_case_bias = match &s.worst_case_bias {
        Some(b) => ctx.unit_open(b, &key("worst_case_bias"))?,
        None => 0.10,
    };
    let names = available_with_indices(table, plan);
    let numeric = |v: &Spanned<String>, k: &str| regression_column(ctx, table, &names, v, (&id, k));
    let list = |vs: &[Spanned<String>], k: &str| {
        vs.iter().map(|v| numeric(v, k)).collect::<Result<Vec<_>>>()
    };
    let outcome = numeric(&s.outcome, "outcome")?;
    let spec = Spec {
        id: id.clone(),
        title: s.title.clone().unwrap_or_else(|| id.clone()),
        data: table.id.clone(),
        estimator,
        outcome,
        endogenous: list(&s.endogenous, "endogenous")?,
        instruments: list(&s.instruments, "instruments")?,
        regressors: list(&s.regressors, "regressors")?,
        controls: list(&s.controls, "controls")?,
        fixed_effects: groupings(ctx, &s.fixed_effects, table, &key("fixed_effects"))?,
        intercept: s.intercept.unwrap_or(true),
        sample: sample(ctx, s, &names, &key("sample"))?,
        errors: errors(ctx, s, table, &key("errors"))?,
        diagnostics: diagnostics(ctx, s, estimator, &key("diagnostics"))?,
        drop_collinear: on_collinear(ctx, s, &key("on_collinear"))?,
        exploratory: s.exploratory,
        distribution: match &s.distribution {
            Some(d) => distribution(ctx, d, &key("distribution"))?,
            None => plan.inference.distribution,
        },
        confidence: match &s.confidence {
            Some(c) => ctx.unit_open(c, &key("confidence"))?,
            None => plan.inference.confidence,
        },
        fuller_k,
        worst_case_bias,
        weights: weights(ctx, s.weights.as_ref(), table, &key("weights"))?,
        stop_on_missing_weight: on_missing_weight(ctx, s, &key("on_missing_weight"))?,
    };
    check_shape(ctx, s, &spec)?;
    Ok(spec)
}

/// A variable that may enter a regression (`names`: the table's numeric columns, derived
/// variables and indices), at key `k` of specification `id`.
fn regression_column(
    ctx: &Ctx,
    table: &DataSource,
    names: &BTreeSet<String>,
    v: &Spanned<String>,
    (id, k): (&str, &str),
) -> Result<String> {
    let n = v.get_ref();
    if names.contains(n) {
        return Ok(n.clone());
    }
    let message = match table.columns.get(n) {
        Some(c) if c.kind.is_numeric() => format!("`{n}` cannot be used here"),
        Some(c) => format!(
            "`{n}` is of kind {}; only number, integer and binary columns can enter a regression (use fixed_effects for categories)",
            c.kind.name()
        ),
        None => format!("{} in specification `{id}`.{k}", unknown("column", n, names.iter().map(String::as_str))),
    };
    Err(ctx.at(v, format!("specification[{id}].{k}"), message))
}

/// The estimator and Fuller's constant (1 unless stated; stated only for Fuller).
fn estimator(ctx: &Ctx, s: &RawSpec, key: &dyn Fn(&str) -> String) -> Result<(Estimator, f64)> {
    ctx.one_of(
        &s.estimator,
        &key("estimator"),
        &["ols", "2sls", "liml", "fuller"],
    )?;
    let estimator = match s.estimator.get_ref().as_str() {
        "ols" => Estimator::Ols,
        "liml" => Estimator::Liml,
        "fuller" => Estimator::Fuller,
        _ => Estimator::Tsls,
    };
    let fuller_k = match &s.fuller_k {
        Some(k) if estimator != Estimator::Fuller => {
            return Err(ctx.at(
                k,
                key("fuller_k"),
                "fuller_k belongs to estimator = \"fuller\"",
            ))
        }
        Some(k) if !(k.get_ref().is_finite() && *k.get_ref() > 0.0) => {
            return Err(ctx.at(
                k,
                key("fuller_k"),
                "fuller_k must be a positive number (1 is the usual choice, 4 minimises mean squared error)",
            ))
        }
        Some(k) => *k.get_ref(),
        None => 1.0,
    };
    Ok((estimator, fuller_k))
}

fn sample(
    ctx: &Ctx,
    s: &RawSpec,
    names: &BTreeSet<String>,
    key: &str,
) -> Result<Option<(String, expr::Expr)>> {
    let Some(text) = &s.sample else {
        return Ok(None);
    };
    let e = expr::parse(text.get_ref()).map_err(|e| expr_error(ctx, text, key, &e))?;
    if let Some(n) = e.names().into_iter().find(|n| !names.contains(n)) {
        return Err(ctx.at(
            text,
            key,
            format!(
                "{} in the sample expression",
                unknown("column", &n, names.iter().map(String::as_str))
            ),
        ));
    }
    Ok(Some((text.get_ref().clone(), e)))
}

fn errors(ctx: &Ctx, s: &RawSpec, table: &DataSource, key: &str) -> Result<Errors> {
    errors_value(ctx, s.errors.as_ref(), table, key)
}

fn diagnostics(ctx: &Ctx, s: &RawSpec, estimator: Estimator, key: &str) -> Result<Vec<Diagnostic>> {
    let mut out = Vec::new();
    for d in &s.diagnostics {
        ctx.one_of(
            d,
            key,
            &[
                "first_stage",
                "reduced_form",
                "endogeneity",
                "overidentification",
                "weak_instruments",
            ],
        )?;
        if estimator == Estimator::Ols {
            return Err(ctx.at(
                d,
                key,
                format!(
                    "diagnostic `{}` applies to instrumental-variable specifications (2sls, liml, fuller) only",
                    d.get_ref()
                ),
            ));
        }
        if d.get_ref() == "weak_instruments" && s.endogenous.len() != 1 {
            return Err(ctx.at(
                d,
                key,
                "the weak_instruments diagnostic (effective F, Anderson–Rubin set) needs exactly one endogenous regressor",
            ));
        }
        out.push(match d.get_ref().as_str() {
            "first_stage" => Diagnostic::FirstStage,
            "reduced_form" => Diagnostic::ReducedForm,
            "endogeneity" => Diagnostic::Endogeneity,
            "weak_instruments" => Diagnostic::WeakInstruments,
            _ => Diagnostic::Overidentification,
        });
    }
    out.sort();
    out.dedup();
    Ok(out)
}

/// `on_missing_weight`: whether a used row without a weight stops the run; only with
/// `weights`.
fn on_missing_weight(ctx: &Ctx, s: &RawSpec, key: &str) -> Result<bool> {
    let Some(v) = &s.on_missing_weight else {
        return Ok(false);
    };
    if s.weights.is_none() {
        return Err(ctx.at(
            v,
            key,
            "on_missing_weight applies to a weighted specification: add weights = \"COLUMN\" or remove the key",
        ));
    }
    ctx.one_of(v, key, &["leave-out", "stop"])?;
    Ok(v.get_ref() == "stop")
}

fn on_collinear(ctx: &Ctx, s: &RawSpec, key: &str) -> Result<bool> {
    match &s.on_collinear {
        Some(v) => {
            ctx.one_of(v, key, &["error", "drop"])?;
            Ok(v.get_ref() == "drop")
        }
        None => Ok(false),
    }
}

fn check_shape(ctx: &Ctx, s: &RawSpec, spec: &Spec) -> Result<()> {
    let key = |k: &str| format!("specification[{}].{k}", spec.id);
    match spec.estimator {
        Estimator::Ols => {
            if let Some(v) = s.endogenous.first().or(s.instruments.first()) {
                return Err(ctx.at(v, key("estimator"), "endogenous and instruments belong to an instrumental-variable estimator (\"2sls\", \"liml\", \"fuller\"); for OLS list terms under regressors"));
            }
        }
        _ => {
            if let Some(v) = s.regressors.first() {
                return Err(ctx.at(v, key("regressors"), "an instrumental-variable specification lists endogenous, instruments and controls; move this term"));
            }
            if spec.endogenous.is_empty() {
                return Err(ctx.at(
                    &s.estimator,
                    key("endogenous"),
                    "an instrumental-variable estimator needs at least one endogenous regressor",
                ));
            }
            if spec.instruments.len() < spec.endogenous.len() {
                return Err(ctx.at(&s.estimator, key("instruments"), format!(
                    "under-identified: {} excluded instrument(s) for {} endogenous regressor(s); list at least as many instruments",
                    spec.instruments.len(), spec.endogenous.len()
                )));
            }
        }
    }
    one_role_each(ctx, s, spec)?;
    leverage_errors(ctx, s, spec)?;
    weighted_refusals(ctx, s, spec)
}

/// The `weights` column: declared in the table's schema as a number, integer or binary
/// column (a derived variable or an index is not a stored sampling weight). Also the
/// `weights` of `[balance]` and `[attrition]`.
pub(super) fn weights(
    ctx: &Ctx,
    w: Option<&Spanned<String>>,
    table: &DataSource,
    key: &str,
) -> Result<Option<String>> {
    let Some(w) = w else {
        return Ok(None);
    };
    let n = w.get_ref();
    match table.columns.get(n) {
        Some(c) if c.kind.is_numeric() => Ok(Some(n.clone())),
        Some(c) => Err(ctx.at(w, key, format!(
            "`{n}` is of kind {}; weights must be a column declared as number or integer in data table `{}`",
            c.kind.name(), table.id
        ))),
        None => Err(ctx.at(w, key, format!(
            "{}; weights must be a numeric column declared in data table `{}` (not a derived variable or index)",
            unknown("column", n, table.columns.keys().map(String::as_str)), table.id
        ))),
    }
}

/// What a weighted specification cannot have yet: two-way cluster and HAC errors (their
/// weighted forms are not implemented and checked). Refused at `check`. HC2 and HC3 take
/// the leverage of the √w-scaled rows (OLS only, as unweighted: `leverage_errors`).
fn weighted_refusals(ctx: &Ctx, s: &RawSpec, spec: &Spec) -> Result<()> {
    let Some(w) = s.weights.as_ref().filter(|_| spec.weights.is_some()) else {
        return Ok(());
    };
    let key = |k: &str| format!("specification[{}].{k}", spec.id);
    let available = match &spec.errors {
        Errors::Classical | Errors::Hc0 | Errors::Hc1 | Errors::Hc2 | Errors::Hc3 => true,
        Errors::Cluster(by) => by.len() == 1,
        _ => false,
    };
    if !available {
        let at = s.errors.as_ref().map_or(w.span(), |e| e.span());
        return Err(ctx.err(at, key("errors"), format!(
            "a weighted specification (weights = \"{}\") takes \"classical\", \"hc0\", \"hc1\", \"hc2\", \"hc3\" or {{ kind = \"cluster\", by = \"COLUMN\" }} with one column; {} errors with probability weights are not available; choose one of those or remove `weights`",
            w.get_ref(), match &spec.errors { Errors::Cluster(_) => "two-way cluster", e => e.name() }
        )));
    }
    Ok(())
}

/// Each term plays one role: not the outcome, not listed twice, not in two lists; and the
/// specification has at least one term.
fn one_role_each(ctx: &Ctx, s: &RawSpec, spec: &Spec) -> Result<()> {
    let key = |k: &str| format!("specification[{}].{k}", spec.id);
    let mut seen = BTreeMap::new();
    let listed = |list: &'static str| s_list(s, list).iter().map(move |v| (list, v));
    let all = listed("endogenous")
        .chain(listed("instruments"))
        .chain(listed("regressors"))
        .chain(listed("controls"));
    for (list, v) in all {
        if v.get_ref() == &spec.outcome {
            return Err(ctx.at(
                v,
                key("outcome"),
                format!(
                    "the outcome `{}` also appears on the right-hand side",
                    spec.outcome
                ),
            ));
        }
        if let Some(first) = seen.insert(v.get_ref(), list) {
            let message = if first == list {
                format!(
                    "`{}` is listed twice in `{list}`; list it once",
                    v.get_ref()
                )
            } else {
                format!(
                    "`{}` is listed in both `{first}` and `{list}`; a variable plays one role in a specification, so remove it from one of them",
                    v.get_ref()
                )
            };
            return Err(ctx.at(v, key(list), message));
        }
    }
    if seen.is_empty() && !spec.intercept && spec.fixed_effects.is_empty() {
        return Err(ctx.at(
            &s.id,
            key("regressors"),
            "the specification has no terms at all",
        ));
    }
    Ok(())
}

/// HC2 and HC3 weight residuals by leverage: fixed by the literature for OLS only, and
/// computed by sworn for at most one absorbed fixed effect. Refused here, at `check`, rather
/// than when the run reaches the specification.
fn leverage_errors(ctx: &Ctx, s: &RawSpec, spec: &Spec) -> Result<()> {
    let (Some(v), Errors::Hc2 | Errors::Hc3) = (&s.errors, &spec.errors) else {
        return Ok(());
    };
    let key = format!("specification[{}].errors", spec.id);
    let kind = spec.errors.name();
    if spec.estimator != Estimator::Ols {
        return Err(ctx.at(v, key, format!(
            "{kind} errors are not available for {} (no leverage is fixed for an instrumental-variable estimator); use \"classical\", \"hc0\", \"hc1\" or cluster errors",
            spec.estimator.name()
        )));
    }
    if spec.fixed_effects.len() > 1 {
        return Err(ctx.at(v, key, format!(
            "{kind} errors need the leverage of the absorbed fixed effects, which sworn computes for a single fixed effect only; use \"hc0\", \"hc1\" or cluster errors, or one fixed effect"
        )));
    }
    Ok(())
}

/// The raw list of a specification named by its key.
fn s_list<'r>(s: &'r RawSpec, list: &str) -> &'r [Spanned<String>] {
    match list {
        "endogenous" => &s.endogenous,
        "instruments" => &s.instruments,
        "regressors" => &s.regressors,
        _ => &s.controls,
    }
}
