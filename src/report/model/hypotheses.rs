//! The hypotheses table (one row per hypothesis, with how it was tested) and the decision
//! rules' rows. The model carries typed values; the words are the macros of
//! `templates/words.j2` (`rule`, `invoked`, `hyp_test`, `hyp_method`, `hyp_interval`,
//! `hyp_adjusted`, `hyp_note`, `opt`).

use super::super::format::{num, pval, set_text};
use super::super::labels::correction_name;
use crate::inference::Direction;
use crate::results::{HypothesisRegistration, Results, TestMethod};
use serde::Serialize;

#[derive(Debug, Serialize)]
pub(super) struct RuleRow {
    id: String,
    specification: String,
    rule: Rule,
    invoked: bool,
    /// Why the rule was or was not invoked (worded by the analysis).
    reason: String,
    hypotheses: Vec<String>,
}

/// A decision rule: the plan's description, when it applies and what it does.
#[derive(Debug, Serialize)]
pub(super) struct Rule {
    description: Option<String>,
    /// `weak_instruments`, `endogeneity` or `clusters`, with the plan's threshold.
    trigger: &'static str,
    threshold: String,
    /// `anderson_rubin`, `clr`, `liml`, `tf`, `use_specification` or `wild_bootstrap`.
    action: &'static str,
    specification: Option<String>,
}

#[derive(Debug, Serialize)]
pub(super) struct HypRow {
    id: String,
    claim: String,
    test: HypTest,
    method: Method,
    interval: Interval,
    estimate: Option<String>,
    p: Option<String>,
    adjusted: Option<String>,
    correction: &'static str,
    level: String,
    verdict: String,
    note: Note,
}

/// The term and the null a hypothesis tests.
#[derive(Debug, Serialize)]
pub(super) struct HypTest {
    term: String,
    specification: String,
    /// `two_sided`, `greater` or `less`.
    direction: &'static str,
    null: String,
}

/// How a hypothesis was tested.
#[derive(Debug, Serialize)]
pub(super) struct Method {
    /// `anderson_rubin`, `clr`, `clr_robust`, `tf`, `randomization_ar`, `randomization`,
    /// `wild_bootstrap`, `normal` or `t`.
    kind: &'static str,
    estimator: &'static str,
    df: Option<String>,
    draws: Option<usize>,
    exact: bool,
    /// The specification tested, when a decision rule moved the test to another one.
    tested_in: Option<String>,
    contingency: Option<String>,
}

/// A hypothesis' interval: a one-sided bound, a randomization interval or the set.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(super) enum Interval {
    Lower {
        bound: String,
        level: String,
        two_sided: Option<String>,
    },
    Upper {
        bound: String,
        level: String,
        two_sided: Option<String>,
    },
    Randomization {
        level: String,
        lower: Option<String>,
        upper: Option<String>,
    },
    Set {
        set: Option<String>,
    },
}

/// What the verdict's note says: the analysis' reason and the registration's flags.
#[derive(Debug, Serialize)]
pub(super) struct Note {
    reason: Option<String>,
    pre_registered: bool,
    /// `removed` (result as registered), `amended` (the amended result differs) or none.
    registration: Option<&'static str>,
}

pub(super) fn rule_row(
    c: &crate::plan::Contingency,
    r: &crate::results::ContingencyResult,
) -> RuleRow {
    use crate::plan::{Action, Trigger};
    let (trigger, threshold) = match &c.trigger {
        Trigger::WeakInstruments { below } => ("weak_instruments", below.to_string()),
        Trigger::Endogeneity { not_rejected_at } => ("endogeneity", not_rejected_at.to_string()),
        Trigger::Clusters { fewer_than } => ("clusters", fewer_than.to_string()),
    };
    let (action, specification) = match &c.action {
        Action::AndersonRubin => ("anderson_rubin", None),
        Action::Clr => ("clr", None),
        Action::Liml => ("liml", None),
        Action::Tf => ("tf", None),
        Action::UseSpecification(s) => ("use_specification", Some(s.clone())),
        Action::WildBootstrap => ("wild_bootstrap", None),
    };
    RuleRow {
        id: c.id.clone(),
        specification: c.specification.clone(),
        rule: Rule {
            description: c.description.clone(),
            trigger,
            threshold,
            action,
            specification,
        },
        invoked: r.invoked,
        reason: r.reason.clone(),
        hypotheses: r.hypotheses.clone(),
    }
}

fn method(h: &crate::results::HypothesisResult, r: &Results) -> Method {
    let robust_clr = r
        .specifications
        .get(&h.tested_specification)
        .and_then(|s| s.lm_clr.as_ref())
        .is_some_and(|lc| lc.errors != crate::results::LmClrErrors::Homoskedastic);
    let kind = match h.method {
        TestMethod::AndersonRubin => "anderson_rubin",
        TestMethod::Clr if robust_clr => "clr_robust",
        TestMethod::Clr => "clr",
        TestMethod::Tf => "tf",
        TestMethod::Randomization if h.estimator.is_iv() => "randomization_ar",
        TestMethod::Randomization => "randomization",
        TestMethod::WildBootstrap => "wild_bootstrap",
        TestMethod::Normal => "normal",
        TestMethod::T => "t",
    };
    Method {
        kind,
        estimator: h.estimator.label(),
        df: h.df.map(|d| d.to_string()),
        draws: h.draws,
        exact: h.exact == Some(true),
        tested_in: Some(h.tested_specification.clone()).filter(|t| *t != h.specification),
        contingency: h.contingency.clone(),
    }
}

fn interval(h: &crate::results::HypothesisResult) -> Interval {
    let two_sided = || h.ci.as_deref().map(set_text);
    let level = || format!("{:.0}", 100.0 * (1.0 - h.alpha));
    match (h.one_sided_bound, h.direction) {
        (Some(b), Direction::Greater) => Interval::Lower {
            bound: num(b),
            level: level(),
            two_sided: two_sided(),
        },
        (Some(b), Direction::Less) => Interval::Upper {
            bound: num(b),
            level: level(),
            two_sided: two_sided(),
        },
        _ => match &h.randomization_interval {
            Some(i) => Interval::Randomization {
                level: ((1e6 * 100.0 * i.level).round() / 1e6).to_string(),
                lower: i.lower.map(num),
                upper: i.upper.map(num),
            },
            None => Interval::Set { set: two_sided() },
        },
    }
}

pub(super) fn hyp_row(id: &str, r: &Results) -> HypRow {
    let h = &r.hypotheses[id];
    HypRow {
        id: id.to_string(),
        claim: h.claim.clone(),
        test: HypTest {
            term: h.term.clone(),
            specification: h.specification.clone(),
            direction: match h.direction {
                Direction::TwoSided => "two_sided",
                Direction::Greater => "greater",
                Direction::Less => "less",
            },
            null: h.null.to_string(),
        },
        method: method(h, r),
        interval: interval(h),
        estimate: h.estimate.map(num),
        p: h.p_value.map(pval),
        adjusted: h.adjusted_p_value.map(pval),
        correction: correction_name(h.correction),
        level: num(h.alpha),
        verdict: h.verdict.to_string(),
        note: Note {
            reason: h.reason.clone().filter(|r| !r.is_empty()),
            pre_registered: h.pre_registered,
            registration: if h.registration == HypothesisRegistration::RemovedAfterData {
                Some("removed")
            } else if h.as_amended.is_some() {
                Some("amended")
            } else {
                None
            },
        },
    }
}
