//! Hypotheses: one test per hypothesis, corrections within families, verdicts.
//!
//! A verdict is `supported` when the null is rejected in the stated direction at the
//! family's level after correction, `not-supported` when it is not, and `undetermined` when a
//! precondition failed (the term was dropped, or its standard error is zero or not finite).
//! Undetermined hypotheses take no part in their family's correction.

use super::spec::Fitted;
use crate::inference::{self, Correction};
use crate::plan::Plan;
use crate::results::HypothesisResult;
use std::collections::BTreeMap;

/// Test every hypothesis of `plan` against the fitted specifications.
pub fn test_all(
    plan: &Plan,
    fitted: &BTreeMap<String, Fitted>,
) -> BTreeMap<String, HypothesisResult> {
    let mut out: BTreeMap<String, HypothesisResult> = plan
        .hypotheses
        .iter()
        .map(|h| (h.id.clone(), test_one(h, fitted)))
        .collect();
    let mut families: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for h in &plan.hypotheses {
        if let Some(f) = &h.family {
            families.entry(f.clone()).or_default().push(h.id.clone());
        }
    }
    for (name, ids) in families {
        let correction = plan
            .families
            .get(&name)
            .map_or(Correction::None, |f| f.correction);
        let live: Vec<&String> = ids.iter().filter(|id| out[*id].p_value.is_some()).collect();
        let ps: Vec<f64> = live
            .iter()
            .map(|id| out[*id].p_value.unwrap_or(1.0))
            .collect();
        for (id, adj) in live.iter().zip(inference::adjust(&ps, correction)) {
            if let Some(h) = out.get_mut(*id) {
                h.adjusted_p_value = Some(adj);
                h.correction = correction;
            }
        }
    }
    for h in out.values_mut() {
        if let Some(adj) = h.adjusted_p_value {
            h.verdict = if adj <= h.alpha {
                "supported"
            } else {
                "not-supported"
            };
        }
    }
    out
}

fn test_one(h: &crate::plan::Hypothesis, fitted: &BTreeMap<String, Fitted>) -> HypothesisResult {
    let f = &fitted[&h.specification];
    let mut r = HypothesisResult {
        claim: h.claim.clone(),
        specification: h.specification.clone(),
        term: h.term.clone(),
        direction: h.direction,
        null: h.null,
        estimate: None,
        std_error: None,
        statistic: None,
        p_value: None,
        adjusted_p_value: None,
        alpha: h.alpha,
        family: h.family.clone(),
        correction: Correction::None,
        method: f.result.distribution,
        df: f.result.df,
        verdict: "undetermined",
        reason: None,
        pre_registered: f.result.pre_registered,
    };
    let Some(t) = f.result.terms.get(&h.term) else {
        r.reason = Some(format!(
            "term `{}` was dropped from specification `{}` as collinear",
            h.term, h.specification
        ));
        return r;
    };
    r.estimate = Some(t.estimate);
    r.std_error = Some(t.std_error);
    if !(t.std_error.is_finite() && t.std_error > 0.0) {
        r.reason =
            Some("the standard error is zero or not finite, so no test is possible".to_string());
        return r;
    }
    let statistic = (t.estimate - h.null) / t.std_error;
    let p = inference::p_value(statistic, &f.reference, h.direction);
    r.statistic = Some(statistic);
    r.p_value = Some(p);
    r.adjusted_p_value = Some(p);
    r
}
