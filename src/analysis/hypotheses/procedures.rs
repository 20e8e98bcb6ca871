//! The procedures that test one hypothesis: the t test, the Anderson–Rubin and conditional LR
//! tests, the tF procedure and a resampled test. Each fills the result and says whether the hypothesis
//! takes part in its family's correction.

use super::on_side;
use crate::analysis::spec::Fitted;
use crate::estimate;
use crate::inference::{self, Direction};
use crate::plan::{Hypothesis, Plan};
use crate::results::{ArShape, HypothesisResult, Procedure, SetPiece, Term, TestMethod};

/// A model-based interval as a one-piece set.
fn piece(ci: [f64; 2]) -> Vec<SetPiece> {
    vec![SetPiece {
        lower: Some(ci[0]),
        upper: Some(ci[1]),
    }]
}

/// A resampled test: randomization inference or the wild cluster bootstrap.
pub(super) fn resampled_test(
    plan: &Plan,
    h: &Hypothesis,
    f: &Fitted,
    t: &Term,
    kind: Procedure,
    r: &mut HypothesisResult,
) -> (HypothesisResult, bool) {
    // No resampled interval is computed; the model-based one would mislead here.
    r.ci = None;
    let Some(res) = f.resampled.get(&(h.id.clone(), kind)) else {
        r.reason = Some(format!("the {kind} test is not available"));
        return (r.clone(), false);
    };
    r.method = kind.into();
    r.df = None;
    if kind == Procedure::Randomization {
        r.randomization_interval = f.ri_intervals.get(&h.id).cloned();
    }
    r.draws = Some(res.draws_used);
    r.exact = Some(res.exact);
    r.resampling = crate::analysis::resampled::describe(plan, h, f, kind, res);
    r.statistic = Some(res.observed);
    // The randomization AR statistic is non-negative and two-sided by nature: for a
    // one-sided hypothesis its p-value counts only when the estimate lies on the claimed side.
    let ar = kind == Procedure::Randomization && f.result.estimator.is_iv();
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

/// The t test of the term against the null with the fit's reference distribution.
pub(super) fn t_test(
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

/// The Anderson–Rubin test at the hypothesis' null, with its set as the interval; no
/// verdict when the set is empty or unbounded.
pub(super) fn anderson_rubin(
    h: &Hypothesis,
    f: &Fitted,
    t: &Term,
    r: &mut HypothesisResult,
) -> (HypothesisResult, bool) {
    r.method = TestMethod::AndersonRubin;
    let Some(ar) = &f.result.anderson_rubin else {
        r.reason = Some("the Anderson–Rubin set is not available".into());
        return (r.clone(), false);
    };
    let Some((_, test)) = f.ar_tests.iter().find(|(n, _)| *n == h.null) else {
        r.reason = Some("the Anderson–Rubin test at this null is not available".into());
        return (r.clone(), false);
    };
    r.statistic = Some(test.statistic);
    let p = inference::test_p_value(test);
    set_verdict(h, t, r, &ar.set, ar.shape, "Anderson–Rubin", p)
}

/// The conditional LR test at the hypothesis' null (homoskedastic with classical errors,
/// robust with HC or one-way clustered errors), with the CLR set as the interval; no verdict
/// when the set is empty or unbounded.
pub(super) fn clr(
    h: &Hypothesis,
    f: &Fitted,
    t: &Term,
    r: &mut HypothesisResult,
) -> (HypothesisResult, bool) {
    r.method = TestMethod::Clr;
    let Some(lc) = &f.result.lm_clr else {
        r.reason = Some(
            "the conditional LR set is not available (the statistics are undefined for these data)"
                .into(),
        );
        return (r.clone(), false);
    };
    let Some((_, test)) = f.clr_tests.iter().find(|(n, _)| *n == h.null) else {
        r.reason = Some("the conditional LR test at this null is not available (the statistics are undefined there)".into());
        return (r.clone(), false);
    };
    r.statistic = Some(test.statistic);
    let p = test.p_value;
    set_verdict(h, t, r, &lc.clr_set, lc.clr_shape, "conditional LR", p)
}

/// The verdict of a test inverted into `set`, given its two-sided p-value at the null: the
/// set is the interval; empty or unbounded, no verdict; one-sided, the estimate off the
/// claimed side or the whole set beyond the null gives p = 1.
fn set_verdict(
    h: &Hypothesis,
    t: &Term,
    r: &mut HypothesisResult,
    set: &[SetPiece],
    shape: ArShape,
    name: &str,
    two_sided: f64,
) -> (HypothesisResult, bool) {
    r.ci = Some(set.to_vec());
    r.df = None;
    let bounded = set.iter().all(|p| p.lower.is_some() && p.upper.is_some());
    if !bounded || set.is_empty() {
        r.p_value = Some(two_sided);
        r.reason = Some(if set.is_empty() {
            format!("the {name} set is empty (the instruments' exclusion is rejected at every value), so no verdict is possible")
        } else {
            format!(
                "the {name} set is unbounded ({shape}), so the data cannot bound the effect and no verdict is possible"
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
            || set.iter().all(|p| {
                p.lower.is_some_and(|x| on_side(x, h.null, flip))
                    && p.upper.is_some_and(|x| on_side(x, h.null, flip))
            }));
    let p = if wrong_side { 1.0 } else { two_sided };
    r.p_value = Some(p);
    r.adjusted_p_value = Some(p);
    (r.clone(), true)
}

/// The 2SLS t-ratio judged against the tF critical value of the robust first-stage F.
pub(super) fn tf(
    h: &Hypothesis,
    f: &Fitted,
    t: &Term,
    r: &mut HypothesisResult,
) -> (HypothesisResult, bool) {
    r.method = TestMethod::Tf;
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
