//! One hypothesis: which rule applies to it, which fit it is tested on, and which procedure
//! tests it.

use super::procedures::{anderson_rubin, clr, resampled_test, t_test, tf};
use crate::analysis::contingency::Substitution;
use crate::analysis::spec::{procedure, Fitted};
use crate::distribution::Reference;
use crate::inference::Correction;
use crate::plan::{Action, Hypothesis, Method, Plan};
use crate::results::{
    EstimatorKind, HypothesisRegistration, HypothesisResult, Procedure, Term, Verdict,
};
use std::collections::BTreeMap;

/// One hypothesis; the flag says whether it takes part in its family's correction.
pub(super) fn test_one(
    plan: &Plan,
    h: &Hypothesis,
    fitted: &BTreeMap<String, Fitted>,
    sub: Option<&Substitution>,
) -> (HypothesisResult, bool) {
    let f = &fitted[&h.specification];
    let sub = applicable(plan, h, sub);
    let mut r = untested(h, f, sub);
    let Some(source) = tested_source(f, fitted, sub, &mut r) else {
        return (r, false);
    };
    if let Some(reason) = source.degenerate {
        r.reason = Some(reason.clone());
        return (r, false);
    }
    let Some(t) = source.terms.get(&h.term) else {
        r.reason = Some(format!(
            "term `{}` was dropped from specification `{}` as collinear",
            h.term, r.tested_specification
        ));
        return (r, false);
    };
    r.estimate = Some(t.estimate);
    r.std_error = Some(t.std_error);
    // A hypothesis's own resampled inference is explicit and wins over a rule's.
    let resampled = match (sub.map(|s| &s.action), h.method) {
        (Some(Action::UseSpecification(_)), _) => None,
        (_, Method::Randomization { .. } | Method::WildBootstrap { .. }) => procedure(&h.method),
        (Some(Action::WildBootstrap), Method::Model) => Some(Procedure::WildBootstrap),
        _ => None,
    };
    if let Some(kind) = resampled {
        return resampled_test(plan, h, f, t, kind, &mut r);
    }
    match sub.map(|s| &s.action) {
        Some(Action::AndersonRubin) => anderson_rubin(h, f, t, &mut r),
        Some(Action::Clr) => clr(h, f, t, &mut r),
        Some(Action::Tf) => tf(h, f, t, &mut r),
        _ => t_test(h, t, &source.reference, &mut r),
    }
}

/// The rule's substitution when it applies to `h`. A hypothesis's own resampled inference
/// is explicit: rules change only model-based hypotheses (on the endogenous regressor, or
/// any term of an OLS specification for the wild bootstrap), except that an endogeneity
/// rule's switch of specification moves every hypothesis.
fn applicable<'a>(
    plan: &Plan,
    h: &Hypothesis,
    sub: Option<&'a Substitution>,
) -> Option<&'a Substitution> {
    let spec = plan.specifications.iter().find(|s| s.id == h.specification);
    let on_endog = spec.is_some_and(|s| s.endogenous.contains(&h.term));
    let is_iv = spec.is_some_and(|s| s.estimator.is_iv());
    let model = h.method == Method::Model;
    sub.filter(|s| match s.action {
        Action::UseSpecification(_) => true,
        Action::WildBootstrap => model && (on_endog || !is_iv),
        _ => model && on_endog,
    })
}

/// `h`'s result before any test: what the plan states, the specification's estimator and
/// reference distribution, verdict undetermined.
fn untested(h: &Hypothesis, f: &Fitted, sub: Option<&Substitution>) -> HypothesisResult {
    HypothesisResult {
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
        method: f.result.distribution.into(),
        estimator: f.result.estimator,
        tested_specification: h.specification.clone(),
        contingency: sub.map(|s| s.contingency.clone()),
        df: f.result.df,
        ci: None,
        one_sided_bound: None,
        randomization_interval: None,
        draws: None,
        exact: None,
        resampling: None,
        verdict: Verdict::Undetermined,
        reason: None,
        pre_registered: f.result.pre_registered,
        registration: HypothesisRegistration::NotRegistered,
        as_amended: None,
    }
}

/// Where a hypothesis' term is read from.
struct Source<'a> {
    /// The terms of the fit tested.
    terms: &'a BTreeMap<String, Term>,
    /// Their reference distribution.
    reference: Reference,
    /// Why that fit's outcome leaves nothing to test, if so.
    degenerate: &'a Option<String>,
}

/// The fit a hypothesis is tested on: its own specification's, the specification a rule
/// switched to, or the LIML estimate a rule asked for (recorded in `r`). `None` (the reason
/// in `r`) when the LIML estimate is not available.
fn tested_source<'a>(
    f: &'a Fitted,
    fitted: &'a BTreeMap<String, Fitted>,
    sub: Option<&Substitution>,
    r: &mut HypothesisResult,
) -> Option<Source<'a>> {
    let mut source = Source {
        terms: &f.result.terms,
        reference: f.reference,
        degenerate: &f.degenerate,
    };
    match sub.map(|s| &s.action) {
        Some(Action::UseSpecification(target)) => {
            let t = &fitted[target];
            source = Source {
                terms: &t.result.terms,
                reference: t.reference,
                degenerate: &t.degenerate,
            };
            r.tested_specification = target.clone();
            r.estimator = t.result.estimator;
            r.method = t.result.distribution.into();
            r.df = t.result.df;
        }
        Some(Action::Liml) => match &f.result.liml {
            Some(l) => {
                source.terms = &l.terms;
                r.estimator = EstimatorKind::Liml;
            }
            None => {
                r.reason = Some("the LIML estimate is not available".into());
                return None;
            }
        },
        _ => {}
    }
    Some(source)
}
