//! Validation of the estimation part of a plan: specifications, hypotheses, families,
//! table shells and the assignment. Runs after data sources and derived variables are known.

use super::raw::{RawPlan, RawSpec};
use super::validate::{distribution, expr_error, Ctx};
use super::{
    Assignment, DataSource, Diagnostic, Errors, Estimator, Family, Hypothesis, Plan, Spec, Table,
};
use crate::error::Result;
use crate::expr;
use crate::inference::{Correction, Direction};
use crate::suggest::hint;
use std::collections::{BTreeMap, BTreeSet};
use toml::Spanned;

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
    let table = spec_table(ctx, s, plan, &key("data"))?;
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
    let worst_case_bias = match &s.worst_case_bias {
        Some(b) => ctx.unit_open(b, &key("worst_case_bias"))?,
        None => 0.10,
    };
    let names = super::validate_summaries::available_with_indices(table, plan);
    let numeric = |v: &Spanned<String>, k: &str| -> Result<String> {
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
        Err(ctx.at(v, key(k), message))
    };
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
    };
    check_shape(ctx, s, &spec)?;
    Ok(spec)
}

fn spec_table<'p>(ctx: &Ctx, s: &RawSpec, plan: &'p Plan, key: &str) -> Result<&'p DataSource> {
    match &s.data {
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
        None if plan.data.len() == 1 => Ok(plan.data.values().next().expect("one table")),
        None => Err(ctx.at(
            &s.id,
            key,
            "the plan has several data tables; say which one with data = \"NAME\"",
        )),
    }
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
                return super::validate_hac::hac(ctx, v, t, table, key);
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
    leverage_errors(ctx, s, spec)
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

/// `[family.NAME]` tables.
pub(super) fn families(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<BTreeMap<String, Family>> {
    let mut out = BTreeMap::new();
    for (name, f) in &raw.family {
        let key = format!("family.{}", name.get_ref());
        let f = f.get_ref();
        let alpha = match &f.alpha {
            Some(a) => ctx.unit_open(a, &format!("{key}.alpha"))?,
            None => plan.inference.alpha,
        };
        let correction = match &f.correction {
            Some(c) => {
                ctx.one_of(
                    c,
                    &format!("{key}.correction"),
                    &[
                        "none",
                        "bonferroni",
                        "holm",
                        "benjamini-hochberg",
                        "bky",
                        "romano-wolf",
                    ],
                )?;
                match c.get_ref().as_str() {
                    "none" => Correction::None,
                    "bonferroni" => Correction::Bonferroni,
                    "holm" => Correction::Holm,
                    "bky" => Correction::Bky,
                    "romano-wolf" => Correction::RomanoWolf,
                    _ => Correction::BenjaminiHochberg,
                }
            }
            None => Correction::None,
        };
        out.insert(
            name.get_ref().clone(),
            Family {
                name: name.get_ref().clone(),
                alpha,
                correction,
            },
        );
    }
    Ok(out)
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

/// `[[hypothesis]]` entries.
pub(super) fn hypotheses(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Vec<Hypothesis>> {
    unique(
        ctx,
        raw.hypotheses.iter().map(|h| &h.get_ref().id),
        "hypothesis",
    )?;
    let mut out = Vec::new();
    for h in &raw.hypotheses {
        let h = h.get_ref();
        let key = |k: &str| format!("hypothesis[{}].{k}", h.id.get_ref());
        let spec = plan
            .specifications
            .iter()
            .find(|s| &s.id == h.specification.get_ref())
            .ok_or_else(|| {
                ctx.at(
                    &h.specification,
                    key("specification"),
                    unknown(
                        "specification",
                        h.specification.get_ref(),
                        plan.specifications.iter().map(|s| s.id.as_str()),
                    ),
                )
            })?;
        let terms = spec_terms(spec);
        if !terms.contains(h.term.get_ref()) {
            return Err(ctx.at(
                &h.term,
                key("term"),
                format!(
                    "{} is not a term of specification `{}`",
                    unknown("term", h.term.get_ref(), terms.iter().map(String::as_str)),
                    spec.id
                ),
            ));
        }
        let direction = match &h.direction {
            Some(d) => {
                ctx.one_of(d, &key("direction"), &["two-sided", "greater", "less"])?;
                match d.get_ref().as_str() {
                    "greater" => Direction::Greater,
                    "less" => Direction::Less,
                    _ => Direction::TwoSided,
                }
            }
            None => Direction::TwoSided,
        };
        let family = match &h.family {
            Some(f) if !plan.families.contains_key(f.get_ref()) => {
                return Err(ctx.at(
                    f,
                    key("family"),
                    format!(
                        "{}; declare it as [family.{}]",
                        unknown(
                            "family",
                            f.get_ref(),
                            plan.families.keys().map(String::as_str)
                        ),
                        f.get_ref()
                    ),
                ))
            }
            Some(f) => Some(f.get_ref().clone()),
            None => None,
        };
        let alpha = match (&family, &h.alpha) {
            (Some(f), Some(a)) => {
                return Err(ctx.at(
                    a,
                    key("alpha"),
                    format!(
                        "the hypothesis is tested at the level of family `{f}`; remove alpha here"
                    ),
                ))
            }
            (Some(f), None) => plan.families[f].alpha,
            (None, Some(a)) => ctx.unit_open(a, &key("alpha"))?,
            (None, None) => plan.inference.alpha,
        };
        let method = super::validate_rules::method(ctx, h, spec, plan)?;
        out.push(Hypothesis {
            method,
            id: h.id.get_ref().clone(),
            claim: h.claim.clone().unwrap_or_default(),
            specification: spec.id.clone(),
            term: h.term.get_ref().clone(),
            direction,
            null: h.null.unwrap_or(0.0),
            family,
            alpha,
        });
    }
    Ok(out)
}

/// `[[table]]` shells.
pub(super) fn tables(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Vec<Table>> {
    unique(ctx, raw.tables.iter().map(|t| &t.get_ref().id), "table")?;
    let mut out = Vec::new();
    for t in &raw.tables {
        let t = t.get_ref();
        let key = |k: &str| format!("table[{}].{k}", t.id.get_ref());
        let mut terms = BTreeSet::new();
        for c in &t.columns {
            let spec = plan
                .specifications
                .iter()
                .find(|s| &s.id == c.get_ref())
                .ok_or_else(|| {
                    ctx.at(
                        c,
                        key("columns"),
                        unknown(
                            "specification",
                            c.get_ref(),
                            plan.specifications.iter().map(|s| s.id.as_str()),
                        ),
                    )
                })?;
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
                    ctx.one_of(r, &key("summary_rows"), &crate::report::SUMMARY_ROWS)
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

/// The raw list of a specification named by its key.
fn s_list<'r>(s: &'r RawSpec, list: &str) -> &'r [Spanned<String>] {
    match list {
        "endogenous" => &s.endogenous,
        "instruments" => &s.instruments,
        "regressors" => &s.regressors,
        _ => &s.controls,
    }
}
