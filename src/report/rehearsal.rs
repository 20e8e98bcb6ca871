//! The report's "Power as rehearsed" section: the rehearsal that preceded registration, cited
//! from the ledger with its assumptions' fingerprint, and every other rehearsal cited for what
//! it is (after registration, or after the data were seen), never as evidence of power stated
//! in advance.

use crate::ledger::PowerRecord;
use crate::results::{RehearsalCitation, RehearsalTiming, Results};
use serde::Serialize;

/// The section's content. Typed values; the sentences are the `reh_*` macros of
/// `templates/words.j2`.
#[derive(Debug, Serialize)]
pub struct RehearsalModel {
    /// Whether a rehearsal preceded registration and is cited as power stated before it
    /// (the heading and lead say which).
    cited: bool,
    /// Which rehearsal is cited, where the ledger records it, and on what plan.
    lead: Option<Lead>,
    /// One line per hypothesis of the cited rehearsal.
    rows: Vec<PowerRow>,
    /// Every other rehearsal, with its timing.
    others: Vec<Other>,
    /// The cited rehearsal's power curve as inline SVG (report.html only), drawn from the
    /// power its ledger entry records; none when it records none.
    figure: Option<String>,
}

/// The rehearsal cited as evidence of power before registration.
#[derive(Debug, Serialize)]
struct Lead {
    ledger_line: usize,
    time: String,
    /// The registered version's ledger line.
    registered_at: Option<usize>,
    assumptions: Option<String>,
    /// Simulated data sets per effect size; `None` when the entry records no power.
    replications: Option<usize>,
    /// The plan content it rehearsed, when not the registered version (`Some(None)`: not
    /// recorded).
    earlier_plan: Option<Option<String>>,
}

/// One hypothesis's rehearsed power.
#[derive(Debug, Serialize)]
struct PowerRow {
    id: String,
    /// Power at each effect size after the first (effect 0), two decimals.
    power: Vec<String>,
    effects: Vec<String>,
    /// Rejection rate at effect 0.
    size: String,
    mde: Option<String>,
    target: String,
}

/// A rehearsal that is not cited as evidence of power before registration.
#[derive(Debug, Serialize)]
struct Other {
    ledger_line: usize,
    time: String,
    /// `before_registration`, `after_registration`, `after_data_inspected`,
    /// `after_results_computed` or `no_registration`.
    timing: &'static str,
    assumptions: Option<String>,
    /// (replications, rows); `None` when its entry records no power.
    power: Option<(usize, Vec<PowerRow>)>,
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

/// One row per hypothesis: power at each effect size, the size at effect 0 and the MDE.
fn power_rows(p: &PowerRecord) -> Vec<PowerRow> {
    let effects: Vec<String> = p.effects.iter().skip(1).map(|e| e.to_string()).collect();
    p.hypotheses
        .iter()
        .map(|(id, h)| PowerRow {
            id: id.clone(),
            power: h.power.iter().skip(1).map(|x| format!("{x:.2}")).collect(),
            effects: effects.clone(),
            size: h.power.first().map_or("n/a".into(), |x| format!("{x:.2}")),
            mde: h.mde.map(|m| format!("{m:.3}")),
            target: p.target_power.to_string(),
        })
        .collect()
}

fn timing(c: &RehearsalCitation) -> &'static str {
    match c.timing {
        RehearsalTiming::BeforeRegistration => "before_registration",
        RehearsalTiming::AfterRegistration => "after_registration",
        RehearsalTiming::AfterDataInspected => "after_data_inspected",
        RehearsalTiming::AfterResultsComputed => "after_results_computed",
        RehearsalTiming::NoRegistration => "no_registration",
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
        .map(|c| Other {
            ledger_line: c.ledger_line,
            time: c.time.clone(),
            timing: timing(c),
            assumptions: c.assumptions_sha256.clone(),
            power: c.power.as_ref().map(|p| (p.replications, power_rows(p))),
        })
        .collect::<Vec<_>>();
    if cited.is_none() && others.is_empty() {
        return None;
    }
    Some(RehearsalModel {
        cited: cited.is_some(),
        lead: cited.map(|c| Lead {
            ledger_line: c.ledger_line,
            time: c.time.clone(),
            registered_at: r.registration.as_ref().map(|p| p.ledger_line),
            assumptions: c.assumptions_sha256.clone(),
            replications: c.power.as_ref().map(|p| p.replications),
            earlier_plan: (!c.rehearsed_registered_version).then(|| c.plan_content_sha256.clone()),
        }),
        rows: cited
            .and_then(|c| c.power.as_ref())
            .map(power_rows)
            .unwrap_or_default(),
        others,
        figure: cited.and_then(|c| c.power.as_ref()).and_then(power_figure),
    })
}
