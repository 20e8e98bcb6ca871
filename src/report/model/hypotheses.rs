//! The hypotheses table (one row per hypothesis, with how it was tested) and the decision
//! rules' rows.

use super::super::format::{num, pval, set_text};
use super::super::labels::correction_name;
use crate::inference::Direction;
use crate::results::{HypothesisRegistration, Results, TestMethod};
use serde::Serialize;

#[derive(Debug, Serialize)]
pub(super) struct RuleRow {
    id: String,
    specification: String,
    rule: String,
    invoked: String,
    outcome: String,
}

#[derive(Debug, Serialize)]
pub(super) struct HypRow {
    id: String,
    claim: String,
    test: String,
    method: String,
    interval: String,
    estimate: String,
    p: String,
    adjusted: String,
    level: String,
    verdict: String,
    note: String,
}

pub(super) fn direction_text(d: Direction, null: f64) -> String {
    match d {
        Direction::TwoSided => format!("≠ {null}"),
        Direction::Greater => format!("> {null}"),
        Direction::Less => format!("< {null}"),
    }
}

pub(super) fn rule_row(
    c: &crate::plan::Contingency,
    r: &crate::results::ContingencyResult,
) -> RuleRow {
    let trigger = match &c.trigger {
        crate::plan::Trigger::WeakInstruments { below } => {
            format!("if the effective first-stage F is below {below}")
        }
        crate::plan::Trigger::Endogeneity { not_rejected_at } => {
            format!("if exogeneity is not rejected at {not_rejected_at}")
        }
        crate::plan::Trigger::Clusters { fewer_than } => {
            format!("if there are fewer than {fewer_than} clusters")
        }
    };
    let action = match &c.action {
        crate::plan::Action::AndersonRubin => "use Anderson–Rubin inference".to_string(),
        crate::plan::Action::Clr => {
            "use conditional LR inference (homoskedastic errors)".to_string()
        }
        crate::plan::Action::Liml => "use the LIML estimate".to_string(),
        crate::plan::Action::Tf => "use the tF critical value".to_string(),
        crate::plan::Action::UseSpecification(s) => format!("report `{s}` as primary"),
        crate::plan::Action::WildBootstrap => {
            "use the restricted wild cluster bootstrap".to_string()
        }
    };
    let mut rule = format!("{trigger}, {action}");
    if let Some(d) = &c.description {
        rule = format!("{d} ({rule})");
    }
    RuleRow {
        id: c.id.clone(),
        specification: c.specification.clone(),
        rule,
        invoked: if r.invoked { "yes" } else { "no" }.to_string(),
        outcome: if r.hypotheses.is_empty() {
            r.reason.clone()
        } else {
            format!("{} (hypotheses {})", r.reason, r.hypotheses.join(", "))
        },
    }
}

pub(super) fn method_text(h: &crate::results::HypothesisResult) -> String {
    let draws = match (h.draws, h.exact) {
        (Some(b), Some(true)) => format!("exact: all {b} draws"),
        (Some(b), _) => format!("{b} draws counting the observed one, sampled"),
        _ => String::new(),
    };
    let base = match h.method {
        TestMethod::AndersonRubin => "Anderson–Rubin".to_string(),
        TestMethod::Clr => "conditional LR (Moreira), homoskedastic errors".to_string(),
        TestMethod::Tf => "tF".to_string(),
        TestMethod::Randomization if h.estimator.is_iv() => {
            format!("randomization inference on the AR statistic ({draws})")
        }
        TestMethod::Randomization => format!("randomization inference ({draws})"),
        TestMethod::WildBootstrap => format!("restricted wild cluster bootstrap ({draws})"),
        TestMethod::Normal => format!("{} z", h.estimator.label()),
        TestMethod::T => format!(
            "{} t{}",
            h.estimator.label(),
            h.df.map_or(String::new(), |d| format!("({d})"))
        ),
    };
    let mut text = base;
    if h.tested_specification != h.specification {
        text = format!("{text} in {}", h.tested_specification);
    }
    if let Some(c) = &h.contingency {
        text = format!("{text}, by contingency {c}");
    }
    text
}

/// A randomization interval's text, unbounded ends as ∞.
pub(super) fn ri_interval_text(i: &crate::results::RandomizationIntervalResult) -> String {
    format!(
        "randomization {}%: [{}, {}]",
        (1e6 * 100.0 * i.level).round() / 1e6,
        i.lower.map_or("−∞".to_string(), num),
        i.upper.map_or("+∞".to_string(), num)
    )
}

pub(super) fn hyp_row(id: &str, r: &Results) -> HypRow {
    let h = &r.hypotheses[id];
    let opt = |v: Option<f64>, f: fn(f64) -> String| v.map_or("n/a".to_string(), f);
    let mut note = h.reason.clone().unwrap_or_default();
    if !h.pre_registered {
        note = format!("not pre-registered. {note}").trim().to_string();
    }
    if h.registration == HypothesisRegistration::RemovedAfterData {
        note =
            format!("removed from the plan after the data were seen; result as registered. {note}")
                .trim()
                .to_string();
    } else if h.as_amended.is_some() {
        note = format!("as registered; the amended plan's result differs, see Registered and amended analyses. {note}")
            .trim()
            .to_string();
    }
    HypRow {
        id: id.to_string(),
        claim: h.claim.clone(),
        test: format!(
            "`{}` in {}: {}",
            h.term,
            h.specification,
            direction_text(h.direction, h.null)
        ),
        method: method_text(h),
        interval: match (h.one_sided_bound, h.direction) {
            (Some(b), crate::inference::Direction::Greater) => format!(
                "lower bound {} (one-sided {:.0}%); two-sided {}",
                num(b),
                100.0 * (1.0 - h.alpha),
                h.ci.as_deref().map_or("n/a".to_string(), set_text)
            ),
            (Some(b), crate::inference::Direction::Less) => format!(
                "upper bound {} (one-sided {:.0}%); two-sided {}",
                num(b),
                100.0 * (1.0 - h.alpha),
                h.ci.as_deref().map_or("n/a".to_string(), set_text)
            ),
            _ => match &h.randomization_interval {
                Some(i) => ri_interval_text(i),
                None => h.ci.as_deref().map_or("n/a".to_string(), set_text),
            },
        },
        estimate: opt(h.estimate, num),
        p: opt(h.p_value, pval),
        adjusted: format!(
            "{} ({})",
            opt(h.adjusted_p_value, pval),
            correction_name(h.correction)
        ),
        level: num(h.alpha),
        verdict: h.verdict.to_string(),
        note,
    }
}
