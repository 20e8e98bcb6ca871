//! `[[contingency]]` decision rules and `[resampling]`: the trigger must be one the tool can
//! evaluate, its threshold possible, and the action must fit the specification it watches.

use super::scope::{find_spec, spec_terms, unique, unknown, wild_bootstrap_fits, Ctx};
use crate::error::Result;
use crate::plan::raw::{RawContingency, RawPlan};
use crate::plan::{Action, Contingency, Errors, Estimator, Plan, Resampling, Spec, Trigger};
use std::collections::BTreeSet;
use toml::Spanned;

const TRIGGERS: [&str; 3] = ["weak_instruments", "endogeneity", "clusters"];

const WEAK_ACTIONS: [&str; 4] = ["anderson-rubin", "clr", "liml", "tf"];

/// All `[[contingency]]` entries, in plan order.
pub(super) fn contingencies(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Vec<Contingency>> {
    unique(
        ctx,
        raw.contingencies.iter().map(|c| &c.get_ref().id),
        "contingency",
    )?;
    let mut out: Vec<Contingency> = Vec::new();
    for c in &raw.contingencies {
        let rule = contingency(ctx, c.get_ref(), plan)?;
        let kind = std::mem::discriminant(&rule.trigger);
        if let Some(other) = out.iter().find(|o| {
            o.specification == rule.specification && std::mem::discriminant(&o.trigger) == kind
        }) {
            let c = c.get_ref();
            return Err(ctx.at(
                &c.when,
                format!("contingency[{}].when", c.id.get_ref()),
                format!(
                    "contingency `{}` already watches the same trigger on specification `{}`; keep one rule per trigger and specification",
                    other.id, rule.specification
                ),
            ));
        }
        out.push(rule);
    }
    Ok(out)
}

fn contingency(ctx: &Ctx, c: &RawContingency, plan: &Plan) -> Result<Contingency> {
    let id = c.id.get_ref().clone();
    let key = |k: &str| format!("contingency[{id}].{k}");
    let spec = find_spec(ctx, plan, &c.specification, &key("specification"))?;
    let trigger = trigger(ctx, &c.when, &key("when"))?;
    let action = match &trigger {
        Trigger::WeakInstruments { .. } => weak_action(ctx, c, spec)?,
        Trigger::Endogeneity { .. } => endogeneity_action(ctx, c, spec, plan)?,
        Trigger::Clusters { .. } => cluster_action(ctx, c, spec, plan)?,
    };
    Ok(Contingency {
        id,
        description: c.description.clone(),
        specification: spec.id.clone(),
        trigger,
        action,
    })
}

/// The action of a weak-instrument rule: the specification is IV with one endogenous regressor
/// and the action fits its estimator.
fn weak_action(ctx: &Ctx, c: &RawContingency, spec: &Spec) -> Result<Action> {
    let key = |k: &str| format!("contingency[{}].{k}", c.id.get_ref());
    let then = c.then.get_ref();
    if !spec.estimator.is_iv() {
        return Err(ctx.at(&c.specification, key("specification"), format!(
            "a weak-instrument rule needs an instrumental-variable specification; `{}` is estimated by {}",
            spec.id, spec.estimator.name()
        )));
    }
    if spec.endogenous.len() != 1 {
        return Err(ctx.at(
            &c.specification,
            key("specification"),
            format!(
                "the effective first-stage F is defined for one endogenous regressor; `{}` has {}",
                spec.id,
                spec.endogenous.len()
            ),
        ));
    }
    ctx.one_of(&c.then, &key("then"), &WEAK_ACTIONS)?;
    Ok(match then.as_str() {
        "anderson-rubin" => Action::AndersonRubin,
        "clr" => {
            clr_errors(ctx, c, spec)?;
            Action::Clr
        }
        "liml" => {
            if spec.estimator != Estimator::Tsls {
                return Err(ctx.at(&c.then, key("then"), format!(
                    "specification `{}` is already estimated by {}; then = \"liml\" replaces 2SLS only",
                    spec.id, spec.estimator.name()
                )));
            }
            Action::Liml
        }
        _ => {
            if spec.estimator != Estimator::Tsls || spec.instruments.len() != 1 {
                return Err(ctx.at(&c.then, key("then"),
                    "the tF procedure applies to a just-identified 2SLS specification (one endogenous regressor, one instrument); use \"anderson-rubin\" here"));
            }
            Action::Tf
        }
    })
}

/// The CLR test exists for the specification's errors: homoskedastic (classical) and robust
/// (Kleibergen 2005) with HC0–HC3 or one-way clusters; two-way clusters and HAC have no form
/// sworn computes.
fn clr_errors(ctx: &Ctx, c: &RawContingency, spec: &Spec) -> Result<()> {
    let key = format!("contingency[{}].then", c.id.get_ref());
    let why = match &spec.errors {
        Errors::Cluster(by) if by.len() > 1 => "has no two-way clustered form (the two-way covariance is not a quadratic form in the residuals, which the robust form needs)",
        Errors::Hac { .. } => "has no HAC form in sworn (its robust form covers HC0–HC3 and one-way clusters)",
        _ => return Ok(()),
    };
    Err(ctx.at(&c.then, key, format!(
        "the CLR test {why}, and specification `{}` uses {} errors; cluster by one variable or use hc0–hc3, or use then = \"anderson-rubin\", which follows the specification's errors",
        spec.id, spec.errors.name()
    )))
}

/// The action of an endogeneity rule: an OLS specification with the same outcome and data that
/// estimates every term the watched specification's hypotheses test.
fn endogeneity_action(ctx: &Ctx, c: &RawContingency, spec: &Spec, plan: &Plan) -> Result<Action> {
    let key = |k: &str| format!("contingency[{}].{k}", c.id.get_ref());
    if !spec.estimator.is_iv() {
        return Err(ctx.at(&c.specification, key("specification"), format!(
            "an endogeneity rule watches an instrumental-variable specification; `{}` is estimated by {}",
            spec.id, spec.estimator.name()
        )));
    }
    let target = find_spec(ctx, plan, &c.then, &key("then"))?;
    if target.estimator != Estimator::Ols {
        return Err(ctx.at(
            &c.then,
            key("then"),
            format!(
                "then must name an OLS specification to report as primary; `{}` is estimated by {}",
                target.id,
                target.estimator.name()
            ),
        ));
    }
    if target.outcome != spec.outcome || target.data != spec.data {
        return Err(ctx.at(
            &c.then,
            key("then"),
            format!(
            "specification `{}` must have the same outcome and data table as `{}` to replace it",
            target.id, spec.id
        ),
        ));
    }
    let terms: BTreeSet<String> = spec_terms(target).into_iter().collect();
    if let Some(h) = plan
        .hypotheses
        .iter()
        .find(|h| h.specification == spec.id && !terms.contains(&h.term))
    {
        return Err(ctx.at(
            &c.then,
            key("then"),
            format!(
                "hypothesis `{}` tests `{}`, which specification `{}` does not estimate",
                h.id, h.term, target.id
            ),
        ));
    }
    Ok(Action::UseSpecification(target.id.clone()))
}

/// The action of a cluster-count rule: the wild cluster bootstrap, on clustered errors.
fn cluster_action(ctx: &Ctx, c: &RawContingency, spec: &Spec, plan: &Plan) -> Result<Action> {
    let key = |k: &str| format!("contingency[{}].{k}", c.id.get_ref());
    if !matches!(spec.errors, Errors::Cluster(_)) {
        return Err(ctx.at(
            &c.specification,
            key("specification"),
            format!(
                "a cluster-count rule needs clustered errors; `{}` uses {}",
                spec.id,
                spec.errors.name()
            ),
        ));
    }
    ctx.one_of(&c.then, &key("then"), &["wild-bootstrap"])?;
    wild_bootstrap_fits(ctx, plan, spec, &c.then, &key("then"))?;
    Ok(Action::WildBootstrap)
}

fn trigger(ctx: &Ctx, when: &Spanned<toml::Value>, key: &str) -> Result<Trigger> {
    let shape = "when must be a table with one trigger, e.g. { weak_instruments = { below = 10.0 } }, { endogeneity = { not_rejected_at = 0.05 } } or { clusters = { fewer_than = 30 } }";
    let Some(table) = when.get_ref().as_table() else {
        return Err(ctx.at(when, key, shape));
    };
    if table.len() != 1 {
        return Err(ctx.at(when, key, shape));
    }
    let (name, body) = table
        .iter()
        .next()
        .ok_or_else(|| ctx.at(when, key, shape))?;
    if !TRIGGERS.contains(&name.as_str()) {
        return Err(ctx.at(
            when,
            key,
            unknown("trigger", name, TRIGGERS.iter().copied()),
        ));
    }
    let field = match name.as_str() {
        "weak_instruments" => "below",
        "endogeneity" => "not_rejected_at",
        _ => "fewer_than",
    };
    let value = body
        .as_table()
        .filter(|t| t.len() == 1)
        .and_then(|t| t.get(field))
        .ok_or_else(|| {
            ctx.at(
                when,
                key,
                format!("trigger `{name}` takes exactly one key, `{field}`: {name} = {{ {field} = ... }}"),
            )
        })?;
    threshold(ctx, when, key, name, value)
}

/// The trigger `name` with its threshold `value`, which must be possible: a positive F, a
/// level strictly between 0 and 1, or a whole number of at least 3 clusters.
fn threshold(
    ctx: &Ctx,
    when: &Spanned<toml::Value>,
    key: &str,
    name: &str,
    value: &toml::Value,
) -> Result<Trigger> {
    let number = value
        .as_float()
        .or_else(|| value.as_integer().map(|i| i as f64));
    match (name, number) {
        ("weak_instruments", Some(f)) if f.is_finite() && f > 0.0 => {
            Ok(Trigger::WeakInstruments { below: f })
        }
        ("weak_instruments", _) => Err(ctx.at(
            when,
            key,
            "weak_instruments.below must be a positive F threshold (e.g. 10.0); no first-stage F is below zero",
        )),
        ("endogeneity", Some(a)) if a > 0.0 && a < 1.0 => Ok(Trigger::Endogeneity { not_rejected_at: a }),
        ("endogeneity", _) => Err(ctx.at(
            when,
            key,
            "endogeneity.not_rejected_at must be a level strictly between 0 and 1 (e.g. 0.05)",
        )),
        (_, _) => match value.as_integer() {
            Some(g) if g >= 3 => Ok(Trigger::Clusters {
                fewer_than: g as usize,
            }),
            _ => Err(ctx.at(
                when,
                key,
                "clusters.fewer_than must be a whole number of clusters of at least 3 (clustered errors need 2 or more, so a lower threshold can never fire)",
            )),
        },
    }
}

/// `[resampling]`.
pub(super) fn resampling(ctx: &Ctx, raw: &RawPlan) -> Result<Option<Resampling>> {
    let Some(r) = &raw.resampling else {
        return Ok(None);
    };
    let r = r.get_ref();
    // Every draw's statistic is kept (for Romano–Wolf), so the counts are capped to keep
    // memory bounded: 10 million draws are 160 MB per test, and 560 MB more while a
    // randomization interval is searched (each draw's fit kept, module
    // `estimate::resample::family`).
    const MAX_DRAWS: i64 = 10_000_000;
    let positive = |v: &Spanned<i64>, key: &str, min: i64| -> Result<i64> {
        if *v.get_ref() < min {
            Err(ctx.at(
                v,
                key,
                format!("{key} must be a whole number of at least {min}"),
            ))
        } else if *v.get_ref() > MAX_DRAWS && key != "resampling.seed" {
            Err(ctx.at(v, key, format!("{key} may be at most {MAX_DRAWS}")))
        } else {
            Ok(*v.get_ref())
        }
    };
    let draws = match &r.draws {
        Some(d) => positive(d, "resampling.draws", 99)? as usize,
        None => 9999,
    };
    let exact_below = match &r.exact_below {
        Some(e) => positive(e, "resampling.exact_below", 0)? as u64,
        None => 100_000,
    };
    let seed = positive(&r.seed, "resampling.seed", 0)? as u64;
    Ok(Some(Resampling {
        draws,
        seed,
        exact_below,
    }))
}
