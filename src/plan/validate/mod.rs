//! Raw plan → validated [`Plan`]: every name resolved before any data is read.
//!
//! Errors point at the file, line and column of the offending value, give the key path and,
//! for an unknown name, the closest known one. The first problem found is reported.
//!
//! Layout: [`scope`] is the leaf every section validator shares (the context that points into
//! the plan text and every lookup of names, tables and terms); [`errors`] turns a typed
//! `errors` value into [`Errors`](crate::plan::Errors) on top of it. The sections
//! ([`sources`], [`specifications`], [`hypotheses`], [`tables`], [`rules`], [`summaries`],
//! [`rehearsal`]) depend on those two and never on one another; [`build`] calls them in
//! order, each seeing the plan as validated so far.

mod errors;
mod hypotheses;
pub(super) mod rehearsal;
mod rules;
pub(super) mod scope;
mod sources;
mod specifications;
mod summaries;
mod tables;
#[cfg(test)]
mod tests;

use super::raw::RawPlan;
use super::{Plan, SourceMap};
use crate::error::{Error, Result};
use scope::Ctx;
use std::collections::BTreeMap;
use std::path::Path;

/// Read, parse and validate the plan at `path`.
pub fn load(path: &Path) -> Result<Plan> {
    let text =
        std::fs::read_to_string(path).map_err(|e| Error::io(path, "cannot read the plan", e))?;
    from_text(path, text)
}

/// Parse and validate plan `text` as if it were the file at `path` (data paths resolve
/// relative to its folder).
pub fn from_text(path: &Path, text: String) -> Result<Plan> {
    let path = std::path::absolute(path)
        .map_err(|e| Error::io(path, "cannot resolve the plan path", e))?;
    super::unfilled::refuse_marks(&path, &text)?;
    let ctx = Ctx {
        path: path.clone(),
        map: SourceMap::new(&text),
    };
    let raw: RawPlan = toml::from_str(&text).map_err(|e| {
        let span = e.span().unwrap_or(0..0);
        let message = e.message().trim().to_string();
        ctx.err(span, "", parse_message(&message))
    })?;
    build(&ctx, raw, text)
}

fn parse_message(message: &str) -> String {
    if message.starts_with("unknown field") {
        format!("{message}; remove or correct the key (see docs/plan-reference.md)")
    } else if message.starts_with("missing field") {
        format!("{message}; this key is required")
    } else {
        format!("malformed plan: {message}")
    }
}

fn build(ctx: &Ctx, raw: RawPlan, text: String) -> Result<Plan> {
    if *raw.format.get_ref() != 1 {
        return Err(ctx.at(
            &raw.format,
            "format",
            format!(
                "plan format {} is not supported; this version of sworn reads format 1",
                raw.format.get_ref()
            ),
        ));
    }
    let study = sources::study(ctx, &raw)?;
    let inference = sources::inference(ctx, &raw)?;
    let data = sources::data_sources(ctx, &raw)?;
    let derive = sources::derived(ctx, &raw, &data)?;
    let mut plan = Plan {
        path: ctx.path.clone(),
        text,
        study,
        inference,
        data,
        derive,
        assignment: None,
        specifications: Vec::new(),
        hypotheses: Vec::new(),
        families: BTreeMap::new(),
        tables: Vec::new(),
        contingencies: Vec::new(),
        resampling: None,
        indices: Vec::new(),
        balance: None,
        attrition: None,
        rehearsal: None,
    };
    plan.assignment = specifications::assignment(ctx, &raw, &plan)?;
    plan.resampling = rules::resampling(ctx, &raw)?;
    plan.indices = summaries::indices(ctx, &raw, &plan)?;
    plan.balance = summaries::balance(ctx, &raw, &plan)?;
    plan.attrition = summaries::attrition(ctx, &raw, &plan)?;
    plan.specifications = specifications::specifications(ctx, &raw, &plan)?;
    plan.families = hypotheses::families(ctx, &raw, &plan)?;
    plan.hypotheses = hypotheses::hypotheses(ctx, &raw, &plan)?;
    plan.tables = tables::tables(ctx, &raw, &plan)?;
    plan.contingencies = rules::contingencies(ctx, &raw, &plan)?;
    hypotheses::families_resampled(ctx, &raw, &plan)?;
    plan.rehearsal = rehearsal::rehearsal(ctx, &raw, &plan)?;
    Ok(plan)
}
