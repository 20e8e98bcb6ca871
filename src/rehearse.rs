//! `sworn rehearse`: simulate the study from the plan's `[rehearsal]` section and run the
//! complete registered analysis ([`crate::analysis::analyse`]: every specification, decision
//! rule, correction and resampled test) on each simulated data set, to state power, the
//! minimum detectable effect, the size of each test, how often each rule fires, the
//! first-stage strength and the sample after deletions, all before any data exist; and the
//! blinded run ([`blinded`]): the registered analysis on real tables with the assignment
//! re-drawn, keeping nothing that reveals an estimate.
//!
//! Invariants: nothing here reads a study data file or writes anything (a baseline file named
//! by `[rehearsal.data.NAME] baseline` is read once, before the first replication, and is
//! refused if it is a study data file); the model depends only on the plan, the baseline
//! files and the replication count (each replication's stream comes from (seed,
//! replication), and outcomes are gathered in replication order, so the thread count does
//! not matter); the same stream serves a replication at every effect size.
//!
//! Layout: this file runs the replications (in parallel, gathered in order) and hands them to
//! [`summary`]; one replication is [`replicate`]; the reports' model is [`model`] (rendered
//! by `app/rehearse/render.rs`). Child modules depend only on each other and on lower layers
//! (plan, data, expr, analysis, ledger, escape), never on this file, `report` or `app`.

mod baseline;
mod blind;
mod figure;
mod model;
mod picture;
mod replicate;
mod rng;
mod search;
mod simulate;
mod summary;
#[cfg(test)]
mod tests;

pub use baseline::BaselineRecord;
pub use blind::{blinded, redraw as blind_redraw, seed as blind_seed, BlindTest, Blinded, Redrawn};
pub use figure::{power_curve_svg, PowerSeries};
pub use model::RehearsalReport;
pub use replicate::FirstStageStatistic;
pub use summary::{wilson, Rehearsed, WILSON_Z};

use crate::error::{Error, Result};
use crate::plan::Plan;
use rayon::prelude::*;
use replicate::Outcome;
use std::collections::BTreeMap;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Rehearse `plan` with `replications` data sets per effect size (the plan's count when
/// None). `tick` is called after each data set (for a progress bar).
///
/// # Errors
/// The plan has no `[rehearsal]` section; a data-generating process fails (an error at its
/// expression); or the analysis fails on every simulated data set.
pub fn rehearse(
    plan: &Plan,
    replications: Option<usize>,
    tick: &(dyn Fn(usize, usize) + Sync),
) -> Result<Rehearsed> {
    let reh = rehearsal_section(plan)?;
    let reps = replications.unwrap_or(reh.replications).max(1);
    let registered_draws = plan.resampling.map(|r| r.draws);
    let plan = &*with_rehearsal_draws(plan, reh.resampling_draws);
    let baselines = baseline::load(plan)?;
    let baselines = &baselines;
    let total = reps * reh.effects.len();
    let done = AtomicUsize::new(0);
    // The search's effects are not known in advance: the bar grows by one effect per step.
    let expected = AtomicUsize::new(total);
    let simulate = |effect: f64| -> Result<Vec<Outcome>> {
        (0..reps)
            .into_par_iter()
            .map(|r| {
                let out = replicate::one(plan, baselines, reh.seed, r as u64, effect);
                tick(
                    done.fetch_add(1, Ordering::Relaxed) + 1,
                    expected.load(Ordering::Relaxed),
                );
                out
            })
            .collect()
    };
    let outcomes: Vec<Outcome> = (0..total)
        .into_par_iter()
        .map(|i| {
            let (e, r) = (i / reps, i % reps);
            let out = replicate::one(plan, baselines, reh.seed, r as u64, reh.effects[e]);
            tick(done.fetch_add(1, Ordering::Relaxed) + 1, total);
            out
        })
        .collect::<Result<_>>()?;
    refuse_if_all_failed(plan, &outcomes)?;
    let per_effect: Vec<&[Outcome]> = outcomes.chunks(reps).collect();
    let mut r = summary::summarise(plan, registered_draws, reh, reps, &per_effect)?;
    r.set_baselines(
        baselines
            .iter()
            .map(|(id, b)| (id.clone(), b.record.clone()))
            .collect(),
    );
    if reh.mde_steps > 0 {
        let step = |effect: f64| {
            expected.fetch_add(reps, Ordering::Relaxed);
            simulate(effect)
        };
        search::refine(plan, &mut r, reh.mde_steps, &step)?;
    }
    Ok(r)
}

/// The plan's `[rehearsal]` section, or an error saying how to add one.
fn rehearsal_section(plan: &Plan) -> Result<&crate::plan::Rehearsal> {
    plan.rehearsal.as_ref().ok_or_else(|| Error::Plan {
        path: plan.path.clone(),
        line: 1,
        column: 1,
        key: "rehearsal".into(),
        message: "the plan has no [rehearsal] section: add one with seed, effects and a data-generating process per table (docs/plan-reference.md, section rehearsal)".into(),
    })
}

/// The plan a rehearsal runs: the registered one, with `[rehearsal]`'s cheaper number of
/// resampling draws when it gives one (and the plan resamples).
fn with_rehearsal_draws(plan: &Plan, draws: Option<usize>) -> std::borrow::Cow<'_, Plan> {
    match (draws, plan.resampling) {
        (Some(draws), Some(r)) => std::borrow::Cow::Owned(Plan {
            resampling: Some(crate::plan::Resampling { draws, ..r }),
            ..plan.clone()
        }),
        _ => std::borrow::Cow::Borrowed(plan),
    }
}

/// An error naming the first failure when the analysis failed on every simulated data set.
fn refuse_if_all_failed(plan: &Plan, outcomes: &[Outcome]) -> Result<()> {
    let first = outcomes.first().and_then(|o| o.failed.clone());
    match first {
        Some(failure) if outcomes.iter().all(|o| o.failed.is_some()) => Err(Error::Plan {
            path: plan.path.clone(),
            line: 1,
            column: 1,
            key: "rehearsal".into(),
            message: format!("the registered analysis failed on every simulated data set; the first failure: {failure}. Check the data-generating process"),
        }),
        _ => Ok(()),
    }
}

/// The same simulated tables a rehearsal analyses (for tests and inspection).
///
/// # Errors
/// As [`rehearse`] for a baseline file or a data-generating process.
pub fn simulated_tables(
    plan: &Plan,
    replication: u64,
    effect: f64,
) -> Result<BTreeMap<String, crate::data::Table>> {
    let seed = plan.rehearsal.as_ref().map_or(0, |r| r.seed);
    let baselines = baseline::load(plan)?;
    simulate::tables(plan, &baselines, seed, replication, effect)
}
