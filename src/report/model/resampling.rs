//! The Resampling section: for each resampled test, the procedure, the draws and how the
//! p-value is formed, from results.json's `resampling` object.

use super::super::format::num;
use crate::plan::Plan;
use crate::results::{
    BootstrapVariant, BootstrapWeights, CountingRule, DrawStatistic, Procedure, ResampleMode,
    Results,
};

/// How each resampled test drew its replicates: the procedure, the design it follows, the
/// number of draws and whether the observed one is counted, exact or sampled, the seed and
/// the counting rule, all formatted from the hypothesis's `resampling` record in results.json.
pub(super) fn resampling_lines(plan: &Plan, r: &Results) -> Vec<String> {
    let mut out = Vec::new();
    for h in &plan.hypotheses {
        let Some(res) = r.hypotheses.get(&h.id) else {
            continue;
        };
        let Some(info) = res.resampling.as_ref() else {
            continue;
        };
        out.push(format!(
            "{}: {}; {}; {}.",
            h.id,
            resampling_procedure(info),
            resampling_count(info),
            resampling_p_value(info)
        ));
        if let Some(i) = &res.randomization_interval {
            out.push(format!(
                "{}: the {}% randomization interval is the set of constant additive effects τ (every unit's outcome moved by τ when treated) that the two-sided test does not reject at {}: {} candidate effects tested, each on the same draws, stepping out from the estimate by its standard error times 1, 2, 4, … (up to 4096) and then bisecting, so each end lies within {} of a rejected effect; an end with no rejection found is shown as unbounded.",
                h.id,
                (1e6 * 100.0 * i.level).round() / 1e6,
                num(1.0 - i.level),
                i.evaluations,
                num(i.tolerance)
            ));
        }
    }
    out
}

/// The procedure and what it re-draws, in words.
pub(super) fn resampling_procedure(i: &crate::results::ResamplingInfo) -> String {
    let d = &i.redrawn;
    if i.procedure == Procedure::Randomization {
        let how = match (&d.blocks, &d.clusters) {
            (Some(b), Some(c)) => {
                format!("whole clusters of `{c}` re-assigned within blocks of `{b}`")
            }
            (Some(b), None) => format!("units re-assigned within blocks of `{b}`"),
            (None, Some(c)) => format!("whole clusters of `{c}` re-assigned"),
            (None, None) => "the observed values permuted among all units".to_string(),
        };
        let statistic = match i.statistic {
            DrawStatistic::AndersonRubin => "the Anderson–Rubin statistic",
            DrawStatistic::T => "the studentized coefficient (t)",
            DrawStatistic::Estimate | DrawStatistic::Cr1T => "the coefficient estimate",
        };
        format!(
            "randomization test: `{}` re-drawn by the registered design ({}: {how}); {statistic} recomputed under the sharp null (coefficient {})",
            d.variable.as_deref().unwrap_or_default(),
            d.design,
            i.null_imposed
        )
    } else {
        let variant = match i.bootstrap {
            Some(BootstrapVariant::WildRestrictedEfficient) => {
                "wild restricted efficient bootstrap (2SLS)"
            }
            _ => "restricted wild cluster bootstrap",
        };
        let weights = if i.weights == Some(BootstrapWeights::Webb) {
            "Webb six-point"
        } else {
            "Rademacher"
        };
        let clusters = match (&d.clusters, d.cluster_count) {
            (Some(c), Some(g)) => format!(" of `{c}` ({g} clusters)"),
            (Some(c), None) => format!(" of `{c}`"),
            _ => String::new(),
        };
        format!(
            "{variant}: null imposed (coefficient {}), {weights} weights drawn per cluster{clusters}, CR1 t recomputed",
            i.null_imposed
        )
    }
}

/// Exact or sampled, the draws asked for and used, the observed draw and the seed.
pub(super) fn resampling_count(i: &crate::results::ResamplingInfo) -> String {
    let original = if i.procedure == Procedure::Randomization {
        "the observed assignment"
    } else {
        "the original sample (all weights 1)"
    };
    let skipped = match i.draws_skipped {
        0 => String::new(),
        1 => ", 1 draw left out because its statistic could not be computed".to_string(),
        k => format!(", {k} draws left out because their statistic could not be computed"),
    };
    if i.mode == ResampleMode::Exact {
        format!(
            "exact: every possible draw enumerated ({original} among them), {} used{skipped}; the seed is not used",
            i.draws_used
        )
    } else {
        format!(
            "sampled: {} random draws with seed {} plus {original}, {} used{skipped} (the {} one counted)",
            i.draws_requested,
            i.seed,
            i.draws_used,
            if i.procedure == Procedure::Randomization { "observed" } else { "original" }
        )
    }
}

/// How the p-value is formed from the draws.
pub(super) fn resampling_p_value(i: &crate::results::ResamplingInfo) -> String {
    let rule = match i.p_value_counts {
        CountingRule::TwoSided => "|T*| ≥ |T|",
        CountingRule::Greater => "T* ≥ T",
        CountingRule::Less => "T* ≤ T",
        CountingRule::ArOneSided => {
            "AR* ≥ AR (p = 1 when the estimate lies on the other side of the null)"
        }
    };
    format!(
        "p-value: the share of the {} draws with {rule}, ties within a relative {:e} counted",
        i.draws_used, i.tie_tolerance
    )
}
