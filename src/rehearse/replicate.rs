//! One replication: a simulated data set at one effect size run through the complete
//! registered analysis ([`crate::analysis::analyse`]), keeping only what the summary counts
//! (verdicts, rules fired, first-stage strength, observations used) or why the analysis
//! stopped.

use super::baseline::Loaded;
use super::simulate;
use crate::error::Result;
use crate::plan::Plan;
use crate::results::Verdict;
use serde::Serialize;
use std::collections::BTreeMap;

/// Which first-stage statistic a rehearsal records for an instrumented specification.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum FirstStageStatistic {
    /// The Montiel Olea–Pflueger effective F, where the plan asks for weak-instrument
    /// diagnostics.
    Effective,
    /// The first-stage Wald F with the specification's errors (one endogenous regressor).
    Wald,
}

impl FirstStageStatistic {
    /// The name rehearsal.json and the reports use.
    pub fn name(self) -> &'static str {
        match self {
            FirstStageStatistic::Effective => "effective",
            FirstStageStatistic::Wald => "wald",
        }
    }
}

/// What one replication at one effect size gave.
#[derive(Debug, Clone, Default)]
pub(crate) struct Outcome {
    /// Why the analysis failed on this data set, if it did.
    pub failed: Option<String>,
    /// Per hypothesis: (supported, undetermined, estimate).
    pub hypotheses: BTreeMap<String, (bool, bool, Option<f64>)>,
    /// Per decision rule: whether it fired.
    pub rules: BTreeMap<String, bool>,
    /// Per IV specification: first-stage strength and which statistic it is.
    pub first_stage: BTreeMap<String, (f64, FirstStageStatistic)>,
    /// Per specification: observations used.
    pub used: BTreeMap<String, usize>,
}

/// Simulate replication `r` at `effect` and run the registered analysis on it.
///
/// # Errors
/// A data-generating process fails (an analysis that stops is an outcome, not an error).
pub(super) fn one(
    plan: &Plan,
    baselines: &BTreeMap<String, Loaded>,
    seed: u64,
    r: u64,
    effect: f64,
) -> Result<Outcome> {
    let tables = simulate::tables(plan, baselines, seed, r, effect)?;
    let a = match crate::analysis::analyse(plan, &tables, None, None, false) {
        Ok(a) => a,
        Err(e) => {
            return Ok(Outcome {
                failed: Some(e.to_string()),
                ..Outcome::default()
            })
        }
    };
    let mut o = Outcome::default();
    for (id, h) in &a.hypotheses {
        let supported = h.verdict == Verdict::Supported;
        let undetermined = h.verdict == Verdict::Undetermined;
        o.hypotheses
            .insert(id.clone(), (supported, undetermined, h.estimate));
    }
    for c in &a.contingencies {
        o.rules.insert(c.id.clone(), c.invoked);
    }
    for (id, f) in &a.fitted {
        o.used.insert(id.clone(), f.result.n);
        if let Some(w) = &f.result.weak_instruments {
            o.first_stage
                .insert(id.clone(), (w.effective_f, FirstStageStatistic::Effective));
        } else if let Some(fs) = f.result.first_stage.as_ref().filter(|m| m.len() == 1) {
            if let Some(s) = fs.values().next() {
                o.first_stage.insert(
                    id.clone(),
                    (s.robust_f_statistic, FirstStageStatistic::Wald),
                );
            }
        }
    }
    Ok(o)
}

#[cfg(test)]
mod tests {
    use super::FirstStageStatistic;

    /// The statistic's JSON spelling in rehearsal.json, and the name the reports print.
    #[test]
    fn first_stage_statistics_keep_their_spelling() {
        for (s, name) in [
            (FirstStageStatistic::Effective, "effective"),
            (FirstStageStatistic::Wald, "wald"),
        ] {
            assert_eq!(
                serde_json::to_string(&s).expect("json"),
                format!("\"{name}\"")
            );
            assert_eq!(s.name(), name);
        }
    }
}
