//! The report's "Power as rehearsed" section: the rehearsal that preceded registration, cited
//! from the ledger with its assumptions' fingerprint, and every other rehearsal cited for what
//! it is (after registration, or after the data were seen), never as evidence of power stated
//! in advance.

use crate::ledger::PowerRecord;
use crate::results::{RehearsalCitation, RehearsalTiming, Results};
use serde::Serialize;

/// The section's content, formatted.
#[derive(Debug, Serialize)]
pub struct RehearsalModel {
    /// "Power as rehearsed before the data", or "Power as rehearsed" when no rehearsal
    /// preceded registration.
    heading: String,
    /// Which rehearsal is cited, where the ledger records it, and on what plan.
    lead: String,
    /// One line per hypothesis of the cited rehearsal.
    rows: Vec<String>,
    /// Every other rehearsal, with its timing.
    others: Vec<String>,
    /// What rehearsed power rests on.
    caution: String,
    /// The cited rehearsal's power curve as inline SVG (report.html only), drawn from the
    /// power its ledger entry records; none when it records none.
    figure: Option<String>,
}

/// The power curve of a ledger power record: each share with its 95% Wilson interval over
/// the recorded number of simulated data sets.
fn power_figure(p: &PowerRecord) -> Option<String> {
    let n = p.replications;
    let series: Vec<crate::rehearse::PowerSeries> = p
        .hypotheses
        .iter()
        .map(|(id, h)| crate::rehearse::PowerSeries {
            id: id.clone(),
            points: p
                .effects
                .iter()
                .zip(&h.power)
                .map(|(&e, &share)| {
                    let k = (share * n as f64).round() as usize;
                    let w = crate::rehearse::wilson(k, n);
                    (e, share, w.low, w.high)
                })
                .collect(),
        })
        .collect();
    crate::rehearse::power_curve_svg(&p.effects, p.target_power, &series).ok()
}

const CAUTION: &str = "Rehearsed power is a Monte Carlo estimate under the data-generating process the plan's [rehearsal] section states: base rates, take-up, intra-cluster correlation and covariate strength are assumptions, not measurements, and power rests on them. It says nothing about whether the design identifies the effect.";

fn short(sha: &Option<String>) -> String {
    sha.as_deref()
        .map_or("not recorded".into(), |s| format!("sha256:{s}"))
}

/// One line per hypothesis: power at each effect size, the size at effect 0 and the MDE.
fn power_rows(p: &PowerRecord) -> Vec<String> {
    let effects: Vec<String> = p.effects.iter().skip(1).map(|e| e.to_string()).collect();
    p.hypotheses
        .iter()
        .map(|(id, h)| {
            let at: Vec<String> = h.power.iter().skip(1).map(|x| format!("{x:.2}")).collect();
            let size = h.power.first().map_or("n/a".into(), |x| format!("{x:.2}"));
            let mde = h.mde.map_or(
                format!(
                    "no minimum detectable effect at power {} within the effects simulated",
                    p.target_power
                ),
                |m| {
                    format!(
                        "minimum detectable effect {m:.3} at power {}",
                        p.target_power
                    )
                },
            );
            format!(
                "{id}: power {} at effect {} (rejection rate {size} at effect 0); {mde}",
                at.join(" / "),
                effects.join(" / ")
            )
        })
        .collect()
}

fn timing_phrase(c: &RehearsalCitation) -> &'static str {
    match c.timing {
        RehearsalTiming::BeforeRegistration => "an earlier rehearsal before registration, superseded by the one cited above",
        RehearsalTiming::AfterRegistration => "after registration, before the data were seen: cited as such, not as evidence of power stated before registration",
        RehearsalTiming::AfterDataInspected => "after the data were inspected: its assumptions could have been chosen knowing the data, so it is not evidence of power stated in advance",
        RehearsalTiming::AfterResultsComputed => "after results were computed: not evidence of power stated in advance",
        RehearsalTiming::NoRegistration => "the run has no registered version (the plan was never sealed before the data), so no rehearsal is evidence of power stated before registration",
    }
}

fn summary(c: &RehearsalCitation) -> String {
    match &c.power {
        Some(p) => format!(
            "{} simulated data sets per effect size; {}",
            p.replications,
            power_rows(p).join("; ")
        ),
        None => "its ledger entry records no power (written by an earlier version of sworn); see its rehearsal.json".into(),
    }
}

/// The section, when the ledger records any rehearsal.
pub fn build(r: &Results) -> Option<RehearsalModel> {
    let cited = r
        .rehearsals
        .iter()
        .rfind(|c| c.timing == RehearsalTiming::BeforeRegistration);
    let others = r
        .rehearsals
        .iter()
        .filter(|c| cited.is_none_or(|k| k.ledger_line != c.ledger_line))
        .map(|c| {
            format!(
                "Rehearsal at ledger line {} ({}), {}; assumptions {}; {}.",
                c.ledger_line,
                c.time,
                timing_phrase(c),
                short(&c.assumptions_sha256),
                summary(c)
            )
        })
        .collect::<Vec<_>>();
    if cited.is_none() && others.is_empty() {
        return None;
    }
    let Some(c) = cited else {
        return Some(RehearsalModel {
            heading: "Power as rehearsed".into(),
            lead: "No rehearsal precedes the registered version: none of the rehearsals below is evidence of power stated before registration.".into(),
            rows: Vec::new(),
            others,
            caution: CAUTION.into(),
            figure: None,
        });
    };
    Some(RehearsalModel {
        heading: "Power as rehearsed before the data".into(),
        lead: cited_lead(r, c),
        rows: c.power.as_ref().map(power_rows).unwrap_or_default(),
        others,
        caution: CAUTION.into(),
        figure: c.power.as_ref().and_then(power_figure),
    })
}

/// The sentence introducing the rehearsal cited as evidence of power before registration.
fn cited_lead(r: &Results, c: &RehearsalCitation) -> String {
    let registered_at = r.registration.as_ref().map_or(String::new(), |p| {
        format!(" (ledger line {})", p.ledger_line)
    });
    let mut lead = format!(
        "Power as rehearsed before the data, by the rehearsal at ledger line {} ({}), made before the registered version{registered_at}; assumptions {}",
        c.ledger_line,
        c.time,
        short(&c.assumptions_sha256)
    );
    match &c.power {
        Some(p) => lead.push_str(&format!(
            "; {} simulated data sets per effect size.",
            p.replications
        )),
        None => lead.push_str("; its ledger entry records no power (written by an earlier version of sworn): see its rehearsal.json."),
    }
    if !c.rehearsed_registered_version {
        lead.push_str(&format!(
            " It rehearsed an earlier version of the plan (content {}), not the registered version: the analysis it simulated may differ from the registered one.",
            short(&c.plan_content_sha256)
        ));
    }
    lead
}
