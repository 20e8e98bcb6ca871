//! The Resampling section: for each resampled test, the procedure, the draws and how the
//! p-value is formed, from results.json's `resampling` object. The model carries the values;
//! the sentences are the `resampling` macros of `templates/words.j2`.

use super::super::format::num;
use crate::plan::Plan;
use crate::results::{
    BootstrapVariant, BootstrapWeights, CountingRule, DrawStatistic, Procedure, ResampleMode,
    Results,
};
use serde::Serialize;

/// One item of the Resampling section.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(super) enum ResamplingItem {
    /// How a resampled test drew its replicates.
    Test {
        id: String,
        /// Randomization (else the wild bootstrap).
        randomization: bool,
        /// Boxed: the largest part, which would make every item as large.
        procedure: Box<ProcedureText>,
        count: Count,
        /// `two_sided`, `greater`, `less` or `ar_one_sided`.
        counts: &'static str,
        tie_tolerance: String,
    },
    /// How a randomization interval was found.
    Interval {
        id: String,
        level: String,
        alpha: String,
        evaluations: usize,
        tolerance: String,
    },
}

/// The procedure and what it re-draws.
#[derive(Debug, Serialize)]
pub(super) struct ProcedureText {
    variable: String,
    design: String,
    blocks: Option<String>,
    clusters: Option<String>,
    cluster_count: Option<usize>,
    /// `anderson_rubin`, `t` or `estimate`.
    statistic: &'static str,
    null: String,
    /// The wild restricted efficient bootstrap (else the restricted wild cluster bootstrap).
    efficient: bool,
    webb: bool,
    /// The tested specification's probability weights column (every draw a weighted fit).
    probability_weights: Option<String>,
}

/// Exact or sampled, the draws asked for and used, and the seed.
#[derive(Debug, Serialize)]
pub(super) struct Count {
    exact: bool,
    requested: usize,
    used: usize,
    skipped: usize,
    seed: String,
}

/// How each resampled test drew its replicates, and how each randomization interval was
/// found, from the hypothesis's `resampling` record in results.json.
pub(super) fn resampling_lines(plan: &Plan, r: &Results) -> Vec<ResamplingItem> {
    let mut out = Vec::new();
    for h in &plan.hypotheses {
        let Some(res) = r.hypotheses.get(&h.id) else {
            continue;
        };
        let Some(info) = res.resampling.as_ref() else {
            continue;
        };
        out.push(ResamplingItem::Test {
            id: h.id.clone(),
            randomization: info.procedure == Procedure::Randomization,
            procedure: Box::new(ProcedureText {
                probability_weights: r
                    .specifications
                    .get(&res.tested_specification)
                    .and_then(|s| s.weights.clone()),
                ..procedure(info)
            }),
            count: Count {
                exact: info.mode == ResampleMode::Exact,
                requested: info.draws_requested,
                used: info.draws_used,
                skipped: info.draws_skipped,
                seed: info.seed.to_string(),
            },
            counts: match info.p_value_counts {
                CountingRule::TwoSided => "two_sided",
                CountingRule::Greater => "greater",
                CountingRule::Less => "less",
                CountingRule::ArOneSided => "ar_one_sided",
            },
            tie_tolerance: format!("{:e}", info.tie_tolerance),
        });
        if let Some(i) = &res.randomization_interval {
            out.push(ResamplingItem::Interval {
                id: h.id.clone(),
                level: ((1e6 * 100.0 * i.level).round() / 1e6).to_string(),
                alpha: num(1.0 - i.level),
                evaluations: i.evaluations,
                tolerance: num(i.tolerance),
            });
        }
    }
    out
}

fn procedure(i: &crate::results::ResamplingInfo) -> ProcedureText {
    let d = &i.redrawn;
    ProcedureText {
        variable: d.variable.clone().unwrap_or_default(),
        design: d.design.clone(),
        blocks: d.blocks.clone(),
        clusters: d.clusters.clone(),
        cluster_count: d.cluster_count,
        statistic: match i.statistic {
            DrawStatistic::AndersonRubin => "anderson_rubin",
            DrawStatistic::T => "t",
            DrawStatistic::Estimate | DrawStatistic::Cr1T => "estimate",
        },
        null: i.null_imposed.to_string(),
        efficient: i.bootstrap == Some(BootstrapVariant::WildRestrictedEfficient),
        webb: i.weights == Some(BootstrapWeights::Webb),
        probability_weights: None,
    }
}
