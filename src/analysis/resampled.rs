//! The record of how a resampled p-value was obtained (`results.json`'s `resampling` object of
//! a hypothesis), built from the plan and the test's own counts so that the reports, which
//! only format it, and the JSON state the same values.

use super::spec::Fitted;
use crate::estimate::ResampleResult;
use crate::inference::{Direction, TIE_TOLERANCE};
use crate::plan::{Hypothesis, Method, Plan};
use crate::results::{
    BootstrapVariant, BootstrapWeights, CountingRule, DrawStatistic, EstimatorKind, Procedure,
    Redrawn, ResampleMode, ResamplingInfo,
};

/// The record of hypothesis `h`'s resampled test `res` by procedure `kind`; null without
/// `[resampling]` (the test cannot then have run).
pub fn describe(
    plan: &Plan,
    h: &Hypothesis,
    f: &Fitted,
    kind: Procedure,
    res: &ResampleResult,
) -> Option<ResamplingInfo> {
    let rs = plan.resampling.as_ref()?;
    let iv = f.result.estimator.is_iv();
    let randomization = kind == Procedure::Randomization;
    let (statistic, bootstrap, weights, redrawn) = if randomization {
        randomization_record(plan, h, iv)?
    } else {
        bootstrap_record(h, f)
    };
    let p_value_counts = match h.direction {
        Direction::TwoSided => CountingRule::TwoSided,
        _ if randomization && iv => CountingRule::ArOneSided,
        Direction::Greater => CountingRule::Greater,
        Direction::Less => CountingRule::Less,
    };
    Some(ResamplingInfo {
        procedure: kind,
        bootstrap,
        weights,
        statistic,
        null_imposed: h.null,
        redrawn,
        mode: if res.exact {
            ResampleMode::Exact
        } else {
            ResampleMode::Sampled
        },
        draws_requested: rs.draws,
        exact_below: rs.exact_below,
        draws_used: res.draws_used,
        observed_counted: true,
        draws_skipped: res.skipped,
        seed: rs.seed,
        seed_used: !res.exact,
        p_value_counts,
        tie_tolerance: TIE_TOLERANCE,
    })
}

/// What a resampled test computed and re-drew: the statistic, the bootstrap variant and its
/// weights (none for a randomization test), and what was re-drawn.
type Record = (
    DrawStatistic,
    Option<BootstrapVariant>,
    Option<BootstrapWeights>,
    Redrawn,
);

/// A randomization test re-draws the registered assignment; its statistic is the estimate,
/// its t, or (IV) the Anderson–Rubin statistic. Null without `[assignment]`.
fn randomization_record(plan: &Plan, h: &Hypothesis, iv: bool) -> Option<Record> {
    let studentized = matches!(h.method, Method::Randomization { studentized: true });
    let statistic = match (iv, studentized) {
        (true, _) => DrawStatistic::AndersonRubin,
        (false, true) => DrawStatistic::T,
        (false, false) => DrawStatistic::Estimate,
    };
    let a = plan.assignment.as_ref()?;
    let redrawn = Redrawn {
        design: a.design.clone(),
        variable: Some(a.variable.clone()),
        blocks: a.blocks.clone(),
        clusters: a.clusters.clone(),
        cluster_count: None,
    };
    Some((statistic, None, None, redrawn))
}

/// A wild cluster bootstrap re-draws cluster weights (Rademacher, or Webb when the
/// hypothesis asks); restricted efficient for 2SLS, restricted for OLS, on the CR1 t.
fn bootstrap_record(h: &Hypothesis, f: &Fitted) -> Record {
    // A decision rule that switches to the bootstrap uses Rademacher weights.
    let webb = h.method == (Method::WildBootstrap { webb: true });
    let redrawn = Redrawn {
        design: "cluster-weights".into(),
        variable: None,
        blocks: None,
        clusters: f
            .result
            .cluster_by
            .as_ref()
            .and_then(|c| c.first().cloned()),
        cluster_count: f.result.clusters,
    };
    let variant = if f.result.estimator == EstimatorKind::Tsls {
        BootstrapVariant::WildRestrictedEfficient
    } else {
        BootstrapVariant::RestrictedWildCluster
    };
    let weights = if webb {
        BootstrapWeights::Webb
    } else {
        BootstrapWeights::Rademacher
    };
    (DrawStatistic::Cr1T, Some(variant), Some(weights), redrawn)
}
