//! Hypotheses: one test per hypothesis, corrections within families, verdicts.
//!
//! A verdict is `supported` when the null is rejected in the stated direction at the
//! family's level after correction, `not-supported` when it is not, and `undetermined` when a
//! precondition failed (the term was dropped, its standard error is zero or not finite, or
//! the Anderson–Rubin set is unbounded). Undetermined hypotheses take no part in their
//! family's correction.
//!
//! When a contingency fired on the hypothesis's specification (module `contingency`), the
//! test changes as the rule says: the Anderson–Rubin test at the hypothesis's null, the LIML
//! t-ratio, the 2SLS t-ratio against the tF critical value, or the term of the substituted OLS
//! specification. The Anderson–Rubin and tF procedures are two-sided; for a one-sided
//! hypothesis sworn uses their two-sided p-value when the evidence lies on the hypothesized
//! side (a conservative one-sided test) and 1 otherwise.

use super::contingency::Substitution;
use super::spec::Fitted;
use crate::estimate;
use crate::inference::{self, Correction, Direction};
use crate::plan::{Action, Hypothesis, Method, Plan};
use crate::results::{HypothesisResult, SetPiece, Term};
use std::collections::BTreeMap;

/// Test every hypothesis of `plan` against the fitted specifications.
pub fn test_all(
    plan: &Plan,
    fitted: &BTreeMap<String, Fitted>,
    subs: &BTreeMap<String, Substitution>,
    registered: Option<&std::collections::BTreeSet<String>>,
) -> BTreeMap<String, HypothesisResult> {
    let added = |id: &str| registered.is_some_and(|r| !r.contains(id));
    let mut live: BTreeMap<String, bool> = BTreeMap::new();
    let mut out = BTreeMap::new();
    for h in &plan.hypotheses {
        let (r, is_live) = test_one(plan, h, fitted, subs.get(&h.specification));
        live.insert(h.id.clone(), is_live);
        out.insert(h.id.clone(), r);
    }
    let mut families: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for h in &plan.hypotheses {
        if let Some(f) = &h.family {
            // A hypothesis added after the data were read never joins a registered family's
            // correction: it is corrected only with others added after the data.
            let key = if added(&h.id) {
                format!("{f}\u{0}added")
            } else {
                f.clone()
            };
            families.entry(key).or_default().push(h.id.clone());
        }
    }
    for (name, ids) in families {
        let name = name.split('\u{0}').next().unwrap_or_default().to_string();
        let correction = plan
            .families
            .get(&name)
            .map_or(Correction::None, |f| f.correction);
        let members: Vec<&String> = ids.iter().filter(|id| live[*id]).collect();
        let ps: Vec<f64> = members
            .iter()
            .map(|id| out[*id].p_value.unwrap_or(1.0))
            .collect();
        let adjusted = if correction == Correction::RomanoWolf {
            match romano_wolf(plan, &members, fitted) {
                Ok(a) => a,
                Err(why) => {
                    for id in &members {
                        if let Some(h) = out.get_mut(*id) {
                            h.reason = Some(format!("Romano–Wolf step-down not possible: {why}"));
                            h.correction = correction;
                        }
                        live.insert((*id).clone(), false);
                    }
                    continue;
                }
            }
        } else {
            inference::adjust(&ps, correction)
        };
        for (id, adj) in members.iter().zip(adjusted) {
            if let Some(h) = out.get_mut(*id) {
                h.adjusted_p_value = Some(adj);
                h.correction = correction;
            }
        }
    }
    for (id, h) in out.iter_mut() {
        if added(id) {
            h.pre_registered = false;
        }
        if !live[id] {
            // An undetermined hypothesis has no corrected p-value to show.
            h.adjusted_p_value = None;
            continue;
        }
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

/// Romano–Wolf adjusted p-values of a family from its members' joint resampling draws.
/// Each statistic is oriented so that large values are evidence for the claim (|t| for
/// two-sided hypotheses, −t for "less"), and the one-sided step-down runs on them.
fn romano_wolf(
    plan: &Plan,
    members: &[&String],
    fitted: &BTreeMap<String, Fitted>,
) -> Result<Vec<f64>, String> {
    let mut observed = Vec::new();
    let mut columns: Vec<Vec<f64>> = Vec::new();
    let mut units: Option<&str> = None;
    let mut exact = None;
    for id in members {
        let h = plan
            .hypotheses
            .iter()
            .find(|h| &&h.id == id)
            .ok_or_else(|| format!("hypothesis `{id}` is unknown"))?;
        let f = &fitted[&h.specification];
        let kind = super::spec::method_name(&h.method);
        let r = f
            .resampled
            .get(&(h.id.clone(), kind))
            .ok_or_else(|| format!("hypothesis `{id}` has no resampled draws"))?;
        if units.is_some_and(|u| u != f.resample_units) || exact.is_some_and(|e| e != r.exact) {
            return Err("its hypotheses resample different units or designs, so their draws cannot be lined up; use one data table, sample and design for the family".into());
        }
        units = Some(&f.resample_units);
        exact = Some(r.exact);
        let orient = |v: f64| match h.direction {
            Direction::TwoSided => v.abs(),
            Direction::Greater => v,
            Direction::Less => -v,
        };
        // The randomization AR statistic (2SLS) is non-negative: it is used as it is, and a
        // one-sided member whose estimate lies on the other side can never be rejected.
        let ar = kind == "randomization" && f.result.estimator != "ols";
        let orient = |v: f64| if ar { v } else { orient(v) };
        let draws: Option<Vec<f64>> = r.statistics.iter().map(|s| s.map(orient)).collect();
        let draws = draws.ok_or_else(|| format!("hypothesis `{id}` skipped degenerate draws"))?;
        if columns.first().is_some_and(|c| c.len() != draws.len()) {
            return Err("its hypotheses used different numbers of draws".into());
        }
        let estimate = f.result.terms.get(&h.term).map_or(f64::NAN, |t| t.estimate);
        let against =
            ar && h.direction != Direction::TwoSided && !on_side(estimate, h.null, h.direction);
        observed.push(if against {
            f64::INFINITY
        } else {
            orient(r.observed)
        });
        columns.push(draws);
    }
    let b = columns.first().map_or(0, Vec::len);
    let draws: Vec<Vec<f64>> = (0..b)
        .map(|i| columns.iter().map(|c| c[i]).collect())
        .collect();
    let result = if exact == Some(true) {
        inference::romano_wolf_enumerated(&observed, &draws, false)
    } else {
        inference::romano_wolf(&observed, &draws, false)
    };
    result.map_err(|e| e.to_string())
}

fn piece(ci: [f64; 2]) -> Vec<SetPiece> {
    vec![SetPiece {
        lower: Some(ci[0]),
        upper: Some(ci[1]),
    }]
}

/// Whether `x` lies on the side of `null` the direction claims (always true two-sided).
fn on_side(x: f64, null: f64, d: Direction) -> bool {
    match d {
        Direction::TwoSided => true,
        Direction::Greater => x > null,
        Direction::Less => x < null,
    }
}

/// One hypothesis; the flag says whether it takes part in its family's correction.
fn test_one(
    plan: &Plan,
    h: &Hypothesis,
    fitted: &BTreeMap<String, Fitted>,
    sub: Option<&Substitution>,
) -> (HypothesisResult, bool) {
    let f = &fitted[&h.specification];
    let spec = plan.specifications.iter().find(|s| s.id == h.specification);
    let on_endog = spec.is_some_and(|s| s.endogenous.contains(&h.term));
    let is_iv = spec.is_some_and(|s| s.estimator.is_iv());
    // A hypothesis's own resampled inference is explicit: rules change only model-based
    // hypotheses, except that an endogeneity rule moves every hypothesis to the OLS spec.
    let model = h.method == Method::Model;
    let sub = sub.filter(|s| match s.action {
        Action::UseSpecification(_) => true,
        Action::WildBootstrap => model && (on_endog || !is_iv),
        _ => model && on_endog,
    });
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
        verdict: "undetermined",
        reason: None,
        pre_registered: f.result.pre_registered,
        registration: "not-registered",
        as_amended: None,
    };
    let (mut terms, mut reference) = (&f.result.terms, f.reference);
    let mut degenerate = &f.degenerate;
    match sub.map(|s| &s.action) {
        Some(Action::UseSpecification(target)) => {
            let t = &fitted[target];
            degenerate = &t.degenerate;
            terms = &t.result.terms;
            reference = t.reference;
            r.tested_specification = target.clone();
            r.estimator = t.result.estimator;
            r.method = t.result.distribution;
            r.df = t.result.df;
        }
        Some(Action::Liml) => match &f.result.liml {
            Some(l) => {
                terms = &l.terms;
                r.estimator = "liml";
            }
            None => {
                r.reason = Some("the LIML estimate is not available".into());
                return (r, false);
            }
        },
        _ => {}
    }
    if let Some(reason) = degenerate {
        r.reason = Some(reason.clone());
        return (r, false);
    }
    let Some(t) = terms.get(&h.term) else {
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
        (_, Method::Randomization { .. } | Method::WildBootstrap { .. }) => {
            Some(super::spec::method_name(&h.method))
        }
        (Some(Action::WildBootstrap), Method::Model) => Some("wild-bootstrap"),
        _ => None,
    };
    if let Some(kind) = resampled {
        return resampled_test(plan, h, f, t, kind, &mut r);
    }
    match sub.map(|s| &s.action) {
        Some(Action::AndersonRubin) => anderson_rubin(h, f, t, &mut r),
        Some(Action::Tf) => tf(h, f, t, &mut r),
        _ => t_test(h, t, &reference, &mut r),
    }
}

/// A resampled test: randomization inference or the wild cluster bootstrap.
fn resampled_test(
    plan: &Plan,
    h: &Hypothesis,
    f: &Fitted,
    t: &Term,
    kind: &'static str,
    r: &mut HypothesisResult,
) -> (HypothesisResult, bool) {
    // No resampled interval is computed; the model-based one would mislead here.
    r.ci = None;
    let Some(res) = f.resampled.get(&(h.id.clone(), kind)) else {
        r.reason = Some(format!("the {kind} test is not available"));
        return (r.clone(), false);
    };
    r.method = kind;
    r.df = None;
    if kind == "randomization" {
        r.randomization_interval = f.ri_intervals.get(&h.id).cloned();
    }
    r.draws = Some(res.draws_used);
    r.exact = Some(res.exact);
    r.resampling = super::resampled::describe(plan, h, f, kind, res);
    r.statistic = Some(res.observed);
    // The randomization AR statistic is non-negative and two-sided by nature: for a
    // one-sided hypothesis its p-value counts only when the estimate lies on the claimed side.
    let ar = kind == "randomization" && f.result.estimator != "ols";
    let p = match h.direction {
        Direction::TwoSided => res.p_value,
        _ if ar => {
            if on_side(t.estimate, h.null, h.direction) {
                res.p_value
            } else {
                1.0
            }
        }
        Direction::Greater => res.p_upper,
        Direction::Less => res.p_lower,
    };
    r.p_value = Some(p);
    r.adjusted_p_value = Some(p);
    (r.clone(), true)
}

fn t_test(
    h: &Hypothesis,
    t: &Term,
    reference: &crate::distribution::Reference,
    r: &mut HypothesisResult,
) -> (HypothesisResult, bool) {
    r.ci = Some(piece(t.ci));
    if !(t.std_error.is_finite() && t.std_error > 0.0) {
        r.reason =
            Some("the standard error is zero or not finite, so no test is possible".to_string());
        return (r.clone(), false);
    }
    let statistic = (t.estimate - h.null) / t.std_error;
    let p = inference::p_value(statistic, reference, h.direction);
    r.one_sided_bound =
        inference::one_sided_bound(t.estimate, t.std_error, reference, h.alpha, h.direction);
    r.statistic = Some(statistic);
    r.p_value = Some(p);
    r.adjusted_p_value = Some(p);
    (r.clone(), true)
}

fn anderson_rubin(
    h: &Hypothesis,
    f: &Fitted,
    t: &Term,
    r: &mut HypothesisResult,
) -> (HypothesisResult, bool) {
    r.method = "anderson-rubin";
    let Some(ar) = &f.result.anderson_rubin else {
        r.reason = Some("the Anderson–Rubin set is not available".into());
        return (r.clone(), false);
    };
    let Some((_, test)) = f.ar_tests.iter().find(|(n, _)| *n == h.null) else {
        r.reason = Some("the Anderson–Rubin test at this null is not available".into());
        return (r.clone(), false);
    };
    r.ci = Some(ar.set.clone());
    r.df = None;
    r.statistic = Some(test.statistic);
    let two_sided = inference::test_p_value(test);
    let bounded = ar
        .set
        .iter()
        .all(|p| p.lower.is_some() && p.upper.is_some());
    if !bounded || ar.set.is_empty() {
        r.p_value = Some(two_sided);
        r.reason = Some(if ar.set.is_empty() {
            "the Anderson–Rubin set is empty (the instruments' exclusion is rejected at every value), so no verdict is possible".into()
        } else {
            format!(
                "the Anderson–Rubin set is unbounded ({}), so the data cannot bound the effect and no verdict is possible",
                ar.shape
            )
        });
        return (r.clone(), false);
    }
    // One-sided: the set lying wholly on the other side of the null is no evidence for the
    // claim, whatever the two-sided p-value says.
    let flip = match h.direction {
        Direction::Greater => Direction::Less,
        Direction::Less => Direction::Greater,
        Direction::TwoSided => Direction::TwoSided,
    };
    let wrong_side = h.direction != Direction::TwoSided
        && (!on_side(t.estimate, h.null, h.direction)
            || ar.set.iter().all(|p| {
                p.lower.is_some_and(|x| on_side(x, h.null, flip))
                    && p.upper.is_some_and(|x| on_side(x, h.null, flip))
            }));
    let p = if wrong_side { 1.0 } else { two_sided };
    r.p_value = Some(p);
    r.adjusted_p_value = Some(p);
    (r.clone(), true)
}

fn tf(h: &Hypothesis, f: &Fitted, t: &Term, r: &mut HypothesisResult) -> (HypothesisResult, bool) {
    r.method = "tf";
    let first = f
        .result
        .first_stage
        .as_ref()
        .and_then(|fs| fs.get(&h.term))
        .map(|s| s.robust_f_statistic);
    let Some(fstat) = first else {
        r.reason = Some("the first-stage F is not available".into());
        return (r.clone(), false);
    };
    r.ci = Some(piece(t.ci));
    r.df = None;
    if !(t.std_error.is_finite() && t.std_error > 0.0) {
        r.reason =
            Some("the standard error is zero or not finite, so no test is possible".to_string());
        return (r.clone(), false);
    }
    let statistic = (t.estimate - h.null) / t.std_error;
    r.statistic = Some(statistic);
    let two_sided = estimate::tf_p_value(statistic, fstat);
    let p = if on_side(t.estimate, h.null, h.direction) {
        two_sided
    } else {
        1.0
    };
    r.p_value = Some(p);
    r.adjusted_p_value = Some(p);
    (r.clone(), true)
}
