//! The usual cautions a report ends with, chosen by what the run contains.

use super::super::format::{num, pval};
use crate::inference::Correction;
use crate::results::{Results, TestMethod};

pub(super) fn cautions(r: &Results) -> Vec<String> {
    let mut c = Vec::new();
    model_cautions(r, &mut c);
    test_cautions(r, &mut c);
    attrition_cautions(r, &mut c);
    c.push("A verified run shows that the registered plan was followed on these data; it does not show that the design is sound or that its assumptions hold. Decisions rest with the study's own review and its registry's rules.".into());
    c
}

/// Cautions on the models: IV assumptions and LATE, weak instruments, linear probability.
fn model_cautions(r: &Results, c: &mut Vec<String>) {
    let has_iv = r.specifications.values().any(|s| s.estimator.is_iv());
    if has_iv {
        c.push("Instrumental-variable estimates rest on the exclusion restriction (the instrument affects the outcome only through the endogenous regressor) and on instrument exogeneity. These assumptions cannot be tested with the data; over-identification tests only check instruments against each other.".into());
        c.push("With a binary instrument and a binary treatment, 2SLS estimates a local average treatment effect: the effect for compliers, whose take-up the instrument changes, which need not equal the effect for everyone.".into());
    }
    if r.specifications
        .values()
        .any(|s| s.weak_instruments.as_ref().is_some_and(|w| w.weak))
    {
        c.push("At least one specification has weak instruments by the effective-F test: its 2SLS estimate may be biased toward OLS and its t-test may over-reject. The Anderson–Rubin test and set stay valid however weak the instruments are; an unbounded set means the data cannot bound the effect.".into());
    }
    if r.specifications
        .values()
        .any(|s| s.linear_probability.is_some())
    {
        c.push("Linear probability models can predict outside [0, 1]; their coefficients are average marginal effects on the probability, and their errors are heteroskedastic by construction.".into());
    }
}

/// Cautions on the tests: randomization inference and its interval, the wild bootstrap,
/// BKY q-values.
fn test_cautions(r: &Results, c: &mut Vec<String>) {
    if r.hypotheses
        .values()
        .any(|h| h.method == TestMethod::Randomization)
    {
        c.push("Randomization p-values test the sharp null that the assignment changed no unit's outcome beyond the stated null value, a stronger hypothesis than a zero average effect; they are exact given the registered assignment design, so they are only as good as the record of how the assignment was actually drawn.".into());
        if r.hypotheses
            .values()
            .any(|h| h.randomization_interval.is_some())
        {
            c.push("A randomization interval collects the effects the test does not reject if every unit's outcome moves by the same amount when treated; with effects that differ between units it is not an interval for the average effect.".into());
        }
    }
    if r.hypotheses
        .values()
        .any(|h| h.method == TestMethod::WildBootstrap)
    {
        c.push("Wild cluster bootstrap p-values are more reliable than cluster-robust t-tests when clusters are few, but remain approximations; with very few treated clusters they can mislead as well.".into());
    }
    if r.hypotheses
        .values()
        .any(|h| h.correction == Correction::Bky)
    {
        c.push("BKY q-values control the false discovery rate (the expected share of false claims among those made), not the chance of any false claim; a q-value can be below its raw p-value when most hypotheses of the family appear false.".into());
    }
}

/// Cautions on differential attrition and on Lee bounds.
fn attrition_cautions(r: &Results, c: &mut Vec<String>) {
    if let Some(a) = r.attrition.as_ref().filter(|a| a.significant) {
        let named = if a.hypotheses_on_table.is_empty() {
            "no hypothesis uses it".to_string()
        } else {
            format!("this affects {}", a.hypotheses_on_table.join(", "))
        };
        c.push(format!(
            "Outcomes are observed at different rates in the two arms of table `{}` (differential attrition test p = {} at level {}): the arms' observed units may no longer be comparable, so estimates on this table can be biased whatever their p-values say; {named}. Lee bounds, where reported, bound the effect under their own assumption.",
            a.data,
            pval(a.differential.test.p_value),
            num(a.alpha)
        ));
    }
    if r.attrition.as_ref().is_some_and(|a| !a.bounds.is_empty()) {
        c.push("Lee bounds bound the effect for units whose outcome would be observed in either arm, assuming assignment affects whether an outcome is observed in one direction only. Their interval (Imbens and Manski 2004) covers that effect, not the whole bounded set, and rests on a large-sample normal approximation for independently sampled units.".into());
    }
}
