//! `[[contingency]]` rules: what each needs computed, whether it fires, and what it changes.
//!
//! Rules are evaluated in plan order after every specification is fitted. A rule fires when
//! its trigger holds: the effective first-stage F is below `below`, the control-function
//! endogeneity test (with the specification's error type) has p > `not_rejected_at`, or the
//! estimation sample has fewer clusters than `fewer_than`. The first
//! rule that fires on a specification decides the inference of that specification's
//! hypotheses; a later rule that also fires is recorded as superseded and changes nothing.
//! Invoking a rule is not a deviation: it was fixed before the data were seen.

use super::spec::{Fitted, Needs, ResampleNeed};
use crate::format::{num, pval};
use crate::plan::{Action, Contingency, Diagnostic, Method, Plan, Trigger};
use crate::results::{ContingencyResult, SpecResult, Trigger as Watched};
use std::collections::BTreeMap;

/// How the hypotheses of one specification are tested after a rule fired.
#[derive(Debug, Clone)]
pub struct Substitution {
    /// The rule's id.
    pub contingency: String,
    /// What it does.
    pub action: Action,
}

/// What each specification must compute for the plan's rules and its hypotheses' own
/// resampled tests.
pub fn needs(plan: &Plan) -> BTreeMap<String, Needs> {
    let mut out: BTreeMap<String, Needs> = BTreeMap::new();
    for c in &plan.contingencies {
        let n = out.entry(c.specification.clone()).or_default();
        match &c.trigger {
            Trigger::WeakInstruments { .. } => n.diagnostics.push(Diagnostic::WeakInstruments),
            Trigger::Endogeneity { .. } => n.diagnostics.push(Diagnostic::Endogeneity),
            Trigger::Clusters { .. } => {}
        }
        match &c.action {
            Action::Liml => n.liml = true,
            Action::AndersonRubin => n.ar_nulls.extend(endog_nulls(plan, c, &n.ar_nulls)),
            Action::Clr => n.clr_nulls.extend(endog_nulls(plan, c, &n.clr_nulls)),
            Action::WildBootstrap => wild_bootstrap_needs(plan, c, n),
            Action::Tf | Action::UseSpecification(_) => {}
        }
    }
    for h in &plan.hypotheses {
        if h.method != Method::Model {
            out.entry(h.specification.clone())
                .or_default()
                .resample
                .push(ResampleNeed {
                    hypothesis: h.id.clone(),
                    term: h.term.clone(),
                    null: h.null,
                    method: h.method,
                    only_below_clusters: None,
                });
        }
    }
    out
}

/// An Anderson–Rubin or CLR rule needs its test at the null of every hypothesis on the
/// specification's endogenous regressor: the nulls not yet in `have`.
fn endog_nulls(plan: &Plan, c: &Contingency, have: &[f64]) -> Vec<f64> {
    let spec = plan.specifications.iter().find(|s| s.id == c.specification);
    let mut out: Vec<f64> = Vec::new();
    for h in &plan.hypotheses {
        let on_endog = spec.is_some_and(|s| s.endogenous.contains(&h.term));
        let new = !have.contains(&h.null) && !out.contains(&h.null);
        if h.specification == c.specification && on_endog && new {
            out.push(h.null);
        }
    }
    out
}

/// A wild-bootstrap rule needs a bootstrap test of every model-based hypothesis it may
/// switch (any term of OLS, the endogenous regressor of IV); under a cluster-count trigger,
/// only below that count.
fn wild_bootstrap_needs(plan: &Plan, c: &Contingency, n: &mut Needs) {
    n.wild_bootstrap = true;
    let spec = plan.specifications.iter().find(|s| s.id == c.specification);
    let testable =
        |term: &String| spec.is_some_and(|s| !s.estimator.is_iv() || s.endogenous.contains(term));
    let model = plan.hypotheses.iter().filter(|h| {
        h.specification == c.specification && h.method == Method::Model && testable(&h.term)
    });
    for h in model {
        let fewer_than = match c.trigger {
            Trigger::Clusters { fewer_than } => Some(fewer_than),
            _ => None,
        };
        n.resample.push(ResampleNeed {
            hypothesis: h.id.clone(),
            term: h.term.clone(),
            null: h.null,
            method: Method::WildBootstrap { webb: false },
            only_below_clusters: fewer_than,
        });
    }
}

/// A rule's trigger as evaluated on its specification.
struct Triggered {
    /// The trigger's name in results.json.
    trigger: Watched,
    /// The threshold the plan states.
    threshold: f64,
    /// The value compared with it, when it could be computed.
    value: Option<f64>,
    /// Whether the rule fires.
    fires: bool,
    /// The comparison in words.
    reason: String,
}

/// Evaluate `c`'s trigger on the results of its specification.
fn triggered(c: &Contingency, r: &SpecResult) -> Triggered {
    match &c.trigger {
        Trigger::WeakInstruments { below } => {
            let f = r.weak_instruments.as_ref().map(|w| w.effective_f);
            let fires = f.is_some_and(|f| f < *below);
            let reason = match f {
                Some(f) if fires => format!("effective first-stage F {} < {below}", num(f)),
                Some(f) => format!("effective first-stage F {} ≥ {below}", num(f)),
                None => "the effective F could not be computed".to_string(),
            };
            Triggered {
                trigger: Watched::WeakInstruments,
                threshold: *below,
                value: f,
                fires,
                reason,
            }
        }
        Trigger::Endogeneity { not_rejected_at } => {
            let p = r.endogeneity.as_ref().map(|e| e.control_function.p_value);
            let fires = p.is_some_and(|p| p > *not_rejected_at);
            let reason = match p {
                Some(p) if fires => format!(
                    "control-function endogeneity test p = {} > {not_rejected_at}: exogeneity not rejected",
                    pval(p)
                ),
                Some(p) => format!(
                    "control-function endogeneity test p = {} ≤ {not_rejected_at}: exogeneity rejected",
                    pval(p)
                ),
                None => "the endogeneity test could not be computed".to_string(),
            };
            Triggered {
                trigger: Watched::Endogeneity,
                threshold: *not_rejected_at,
                value: p,
                fires,
                reason,
            }
        }
        Trigger::Clusters { fewer_than } => {
            let g = r.clusters;
            Triggered {
                trigger: Watched::Clusters,
                threshold: *fewer_than as f64,
                value: g.map(|g| g as f64),
                fires: g.is_some_and(|g| g < *fewer_than),
                reason: format!("{} clusters", g.unwrap_or(0)),
            }
        }
    }
}

/// The hypotheses a rule that fires changes: those of its specification that are
/// model-based (every one for a switch of specification), on the endogenous regressor (or
/// any term of OLS for the wild bootstrap).
fn affected(plan: &Plan, c: &Contingency) -> Vec<String> {
    let spec = plan.specifications.iter().find(|s| s.id == c.specification);
    plan.hypotheses
        .iter()
        .filter(|h| h.specification == c.specification)
        .filter(|h| h.method == Method::Model || matches!(c.action, Action::UseSpecification(_)))
        .filter(|h| match c.action {
            Action::UseSpecification(_) => true,
            Action::WildBootstrap => {
                spec.is_some_and(|s| !s.estimator.is_iv() || s.endogenous.contains(&h.term))
            }
            _ => spec.is_some_and(|s| s.endogenous.contains(&h.term)),
        })
        .map(|h| h.id.clone())
        .collect()
}

/// Evaluate every rule; returns the results (plan order) and the substitution per
/// specification.
pub fn evaluate(
    plan: &Plan,
    fitted: &BTreeMap<String, Fitted>,
) -> (Vec<ContingencyResult>, BTreeMap<String, Substitution>) {
    let mut results = Vec::new();
    let mut subs: BTreeMap<String, Substitution> = BTreeMap::new();
    for c in &plan.contingencies {
        let t = triggered(c, &fitted[&c.specification].result);
        let mut hypotheses = Vec::new();
        let mut reason = t.reason;
        if t.fires {
            if let Some(first) = subs.get(&c.specification) {
                reason = format!(
                    "{reason}; superseded by contingency `{}`, which fired first on this specification",
                    first.contingency
                );
            } else {
                hypotheses = affected(plan, c);
                subs.insert(
                    c.specification.clone(),
                    Substitution {
                        contingency: c.id.clone(),
                        action: c.action.clone(),
                    },
                );
                reason = format!("{reason}: {}", action_words(&c.action));
            }
        }
        results.push(ContingencyResult {
            id: c.id.clone(),
            specification: c.specification.clone(),
            trigger: t.trigger,
            threshold: t.threshold,
            value: t.value,
            invoked: t.fires,
            action: c.action.name(),
            hypotheses,
            reason,
        });
    }
    (results, subs)
}

/// What a rule that fired does, in words.
fn action_words(a: &Action) -> String {
    match a {
        Action::AndersonRubin => {
            "hypotheses on the endogenous regressor use the Anderson–Rubin test and set".into()
        }
        Action::Clr => {
            "hypotheses on the endogenous regressor use the conditional LR test and set (homoskedastic errors)".into()
        }
        Action::Liml => "hypotheses on the endogenous regressor use the LIML estimate".into(),
        Action::Tf => {
            "hypotheses on the endogenous regressor use the tF critical value for the t-ratio"
                .into()
        }
        Action::UseSpecification(s) => format!("specification `{s}` is reported as primary"),
        Action::WildBootstrap => "hypotheses use the restricted wild cluster bootstrap".into(),
    }
}
