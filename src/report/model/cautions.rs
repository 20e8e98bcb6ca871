//! The usual cautions a report ends with, chosen by what the run contains. The model names
//! which caution applies; the sentences are the `caution` macro of `templates/words.j2`.

use super::super::format::{num, pval};
use crate::inference::Correction;
use crate::results::{Results, TestMethod};
use serde::Serialize;

/// One caution: which one, with the values the differential-attrition one states.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(super) enum Caution {
    IvAssumptions,
    Late,
    WeakInstruments,
    LinearProbability,
    SharpNull,
    RandomizationInterval,
    WildBootstrap,
    Bky,
    Attrition {
        data: String,
        p: String,
        alpha: String,
        hypotheses: Vec<String>,
    },
    LeeBounds,
    Verification,
}

pub(super) fn cautions(r: &Results) -> Vec<Caution> {
    let mut c = Vec::new();
    model_cautions(r, &mut c);
    test_cautions(r, &mut c);
    attrition_cautions(r, &mut c);
    c.push(Caution::Verification);
    c
}

/// Cautions on the models: IV assumptions and LATE, weak instruments, linear probability.
fn model_cautions(r: &Results, c: &mut Vec<Caution>) {
    if r.specifications.values().any(|s| s.estimator.is_iv()) {
        c.push(Caution::IvAssumptions);
        c.push(Caution::Late);
    }
    if r.specifications
        .values()
        .any(|s| s.weak_instruments.as_ref().is_some_and(|w| w.weak))
    {
        c.push(Caution::WeakInstruments);
    }
    if r.specifications
        .values()
        .any(|s| s.linear_probability.is_some())
    {
        c.push(Caution::LinearProbability);
    }
}

/// Cautions on the tests: randomization inference and its interval, the wild bootstrap,
/// BKY q-values.
fn test_cautions(r: &Results, c: &mut Vec<Caution>) {
    if r.hypotheses
        .values()
        .any(|h| h.method == TestMethod::Randomization)
    {
        c.push(Caution::SharpNull);
        if r.hypotheses
            .values()
            .any(|h| h.randomization_interval.is_some())
        {
            c.push(Caution::RandomizationInterval);
        }
    }
    if r.hypotheses
        .values()
        .any(|h| h.method == TestMethod::WildBootstrap)
    {
        c.push(Caution::WildBootstrap);
    }
    if r.hypotheses
        .values()
        .any(|h| h.correction == Correction::Bky)
    {
        c.push(Caution::Bky);
    }
}

/// Cautions on differential attrition and on Lee bounds.
fn attrition_cautions(r: &Results, c: &mut Vec<Caution>) {
    if let Some(a) = r.attrition.as_ref().filter(|a| a.significant) {
        c.push(Caution::Attrition {
            data: a.data.clone(),
            p: pval(a.differential.test.p_value),
            alpha: num(a.alpha),
            hypotheses: a.hypotheses_on_table.clone(),
        });
    }
    if r.attrition.as_ref().is_some_and(|a| !a.bounds.is_empty()) {
        c.push(Caution::LeeBounds);
    }
}
