//! `[family.NAME]` tables and `[[hypothesis]]` entries: the term tested, its direction,
//! level and family, and how it is tested (model-based, randomization, wild bootstrap).

use super::scope::{find_spec, spec_terms, unique, unknown, wild_bootstrap_fits, Ctx};
use crate::error::Result;
use crate::inference::{Correction, Direction};
use crate::plan::raw::{RawHypothesis, RawPlan};
use crate::plan::{Estimator, Family, Hypothesis, Method, Plan, Spec};
use std::collections::{BTreeMap, BTreeSet};
use toml::Spanned;

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
        let spec = find_spec(ctx, plan, &h.specification, &key("specification"))?;
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
        let direction = direction(ctx, h)?;
        let (family, alpha) = level(ctx, h, plan)?;
        let method = method(ctx, h, spec, plan)?;
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

/// A hypothesis's `direction`; two-sided when absent.
fn direction(ctx: &Ctx, h: &RawHypothesis) -> Result<Direction> {
    let key = |k: &str| format!("hypothesis[{}].{k}", h.id.get_ref());
    Ok(match &h.direction {
        Some(d) => {
            ctx.one_of(d, &key("direction"), &["two-sided", "greater", "less"])?;
            match d.get_ref().as_str() {
                "greater" => Direction::Greater,
                "less" => Direction::Less,
                _ => Direction::TwoSided,
            }
        }
        None => Direction::TwoSided,
    })
}

/// A hypothesis's family (which must be declared) and its level: the family's, its own
/// `alpha` when it has no family, else the plan's.
fn level(ctx: &Ctx, h: &RawHypothesis, plan: &Plan) -> Result<(Option<String>, f64)> {
    let key = |k: &str| format!("hypothesis[{}].{k}", h.id.get_ref());
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
                format!("the hypothesis is tested at the level of family `{f}`; remove alpha here"),
            ))
        }
        (Some(f), None) => plan.families[f].alpha,
        (None, Some(a)) => ctx.unit_open(a, &key("alpha"))?,
        (None, None) => plan.inference.alpha,
    };
    Ok((family, alpha))
}

/// A hypothesis's `inference`, `statistic` and `weights`.
fn method(ctx: &Ctx, h: &RawHypothesis, spec: &Spec, plan: &Plan) -> Result<Method> {
    let id = h.id.get_ref();
    let key = |k: &str| format!("hypothesis[{id}].{k}");
    let inference = h.inference.as_ref();
    if let Some(i) = inference {
        ctx.one_of(
            i,
            &key("inference"),
            &["model", "randomization", "wild-bootstrap"],
        )?;
    }
    let kind = inference.map_or("model", |i| i.get_ref().as_str());
    if let (Some(s), false) = (&h.statistic, kind == "randomization") {
        return Err(ctx.at(
            s,
            key("statistic"),
            "statistic belongs to inference = \"randomization\"",
        ));
    }
    if let (Some(w), false) = (&h.weights, kind == "wild-bootstrap") {
        return Err(ctx.at(
            w,
            key("weights"),
            "weights belong to inference = \"wild-bootstrap\"",
        ));
    }
    let Some(at) = inference else {
        return Ok(Method::Model);
    };
    // A weighted randomization test re-draws the treatment (OLS) or the instruments (IV) in
    // the data's units and scales each draw by the units' weights: implemented without fixed
    // effects (a weighted sweep does not commute with the re-draws).
    let unweighable = !spec.fixed_effects.is_empty();
    if let (Some(w), "randomization", true) = (&spec.weights, kind, unweighable) {
        return Err(ctx.at(at, key("inference"), format!(
            "inference = \"randomization\" is not available for specification `{}`, which is weighted by `{w}`: with probability weights it is implemented without fixed effects; use inference = \"model\" or \"wild-bootstrap\", or remove the fixed effects or the weights",
            spec.id
        )));
    }
    match kind {
        "randomization" => randomization(ctx, h, spec, plan, at),
        "wild-bootstrap" => wild_bootstrap(ctx, h, spec, plan, at),
        _ => Ok(Method::Model),
    }
}

/// `inference = "randomization"`: the plan declares the assignment and resampling, and the
/// term is the assigned variable (OLS) or the endogenous coefficient it instruments (2SLS).
fn randomization(
    ctx: &Ctx,
    h: &RawHypothesis,
    spec: &Spec,
    plan: &Plan,
    at: &Spanned<String>,
) -> Result<Method> {
    let key = |k: &str| format!("hypothesis[{}].{k}", h.id.get_ref());
    if plan.resampling.is_none() {
        return Err(ctx.at(at, key("inference"), "randomization inference needs [resampling] with a seed (e.g. [resampling] seed = 20260501) so its p-values can be reproduced"));
    }
    let Some(a) = &plan.assignment else {
        return Err(ctx.at(at, key("inference"), "randomization inference re-draws the assignment, which the plan must declare in [assignment]"));
    };
    assignment_in_table(ctx, spec, plan, a, at, &key("inference"))?;
    let term = h.term.get_ref();
    let fits = match spec.estimator {
        Estimator::Ols => term == &a.variable,
        Estimator::Tsls => {
            spec.endogenous.len() == 1
                && &spec.endogenous[0] == term
                && spec.instruments == [a.variable.clone()]
        }
        _ => false,
    };
    if !fits {
        return Err(ctx.at(at, key("inference"), format!(
            "randomization inference applies to the assigned variable `{}` in an OLS specification (intention to treat, reduced form), or to the endogenous coefficient of a 2SLS specification whose only instrument is `{}` (through the Anderson–Rubin statistic)",
            a.variable, a.variable
        )));
    }
    // Permuting the swept assignment is valid only when sweeping commutes with the
    // permutations: every fixed effect must be the design's block variable.
    if let Some(fe) = spec
        .fixed_effects
        .iter()
        .find(|f| a.blocks.as_ref() != Some(*f))
    {
        return Err(ctx.at(at, key("inference"), format!(
            "randomization inference with absorbed fixed effects needs each fixed effect to be the assignment's block variable; `{fe}` is not (use it as a control, or declare the blocks)"
        )));
    }
    let studentized = match &h.statistic {
        Some(s) => {
            ctx.one_of(s, &key("statistic"), &["t", "estimate"])?;
            s.get_ref() == "t"
        }
        None => true,
    };
    Ok(Method::Randomization { studentized })
}

/// Every column of the assignment (variable, blocks, clusters) is declared in the table the
/// specification uses.
fn assignment_in_table(
    ctx: &Ctx,
    spec: &Spec,
    plan: &Plan,
    a: &crate::plan::Assignment,
    at: &Spanned<String>,
    key: &str,
) -> Result<()> {
    let table = &plan.data[&spec.data];
    for col in std::iter::once(&a.variable)
        .chain(&a.blocks)
        .chain(&a.clusters)
    {
        if !table.columns.contains_key(col) {
            return Err(ctx.at(at, key, format!(
                "the assignment column `{col}` is not declared in data table `{}`, which specification `{}` uses",
                table.id, spec.id
            )));
        }
    }
    Ok(())
}

/// `inference = "wild-bootstrap"`: the specification fits the wild cluster bootstrap and, for
/// 2SLS, the term is the endogenous coefficient.
fn wild_bootstrap(
    ctx: &Ctx,
    h: &RawHypothesis,
    spec: &Spec,
    plan: &Plan,
    at: &Spanned<String>,
) -> Result<Method> {
    let key = |k: &str| format!("hypothesis[{}].{k}", h.id.get_ref());
    wild_bootstrap_fits(ctx, plan, spec, at, &key("inference"))?;
    if spec.estimator.is_iv() && !spec.endogenous.contains(h.term.get_ref()) {
        return Err(ctx.at(at, key("inference"), format!(
            "the wild restricted efficient bootstrap tests the endogenous coefficient `{}` of a 2SLS specification; use model inference for `{}`",
            spec.endogenous.join("`, `"), h.term.get_ref()
        )));
    }
    let webb = match &h.weights {
        Some(w) => {
            ctx.one_of(w, &key("weights"), &["rademacher", "webb"])?;
            w.get_ref() == "webb"
        }
        None => false,
    };
    Ok(Method::WildBootstrap { webb })
}

/// A Romano–Wolf family needs every member resampled the same way.
pub(super) fn families_resampled(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<()> {
    for (name, f) in &raw.family {
        let Some(family) = plan.families.get(name.get_ref()) else {
            continue;
        };
        if family.correction != Correction::RomanoWolf {
            continue;
        }
        let at = f.get_ref().correction.as_ref().map_or(name, |c| c);
        let key = format!("family.{}.correction", name.get_ref());
        let members: Vec<_> = plan
            .hypotheses
            .iter()
            .filter(|h| h.family.as_deref() == Some(name.get_ref().as_str()))
            .collect();
        let kind = |m: &Method| match m {
            Method::Model => 0,
            Method::Randomization { .. } => 1,
            Method::WildBootstrap { .. } => 2,
        };
        let kinds: BTreeSet<u8> = members.iter().map(|h| kind(&h.method)).collect();
        if kinds.contains(&0) || kinds.len() > 1 {
            return Err(ctx.at(at, key, "the Romano–Wolf step-down uses the family's joint resampling draws: every hypothesis of the family needs the same inference, \"randomization\" or \"wild-bootstrap\""));
        }
    }
    Ok(())
}
