//! The rehearsal's report model: what rehearsal.md, rehearsal.tex and rehearsal.html show, as
//! typed values built from the rehearsal summary, with every number formatted once, here
//! (shares as percentages to one decimal with their Wilson interval, the MDE and its estimate
//! to four decimals, first-stage quantiles and mean sample sizes to one, effects and the target
//! power as the plan wrote them). The templates `templates/rehearsal.{md,tex,html}.j2` hold
//! the wording and the layout, and escape every text they place. The LaTeX power curve's
//! coordinates come from [`super::picture`]; the HTML one is the SVG of [`super::figure`].
//!
//! Invariants: the model holds no clock and no path beyond the plan's own text, so it is as
//! reproducible as the summary; its text fields are unescaped (plan text included), numbers
//! are plain ASCII that no escape changes.

use super::figure::power_curve;
use super::picture::{picture, Picture};
use super::summary::{HypothesisPower, Rehearsed, Share};
use serde::Serialize;

/// Everything the three rehearsal reports show.
#[derive(Debug, Serialize)]
pub struct RehearsalReport {
    /// The study's title.
    pub title: String,
    /// Simulated data sets per effect size.
    pub replications: usize,
    /// The rehearsal's seed.
    pub seed: u64,
    /// SHA-256 of the plan's content.
    pub plan_content_sha256: String,
    /// SHA-256 of the rehearsal's assumptions.
    pub assumptions_sha256: String,
    /// The baseline files whose rows every simulated table keeps (empty: all simulated).
    pub baselines: Vec<BaselineLine>,
    /// The resampled tests' draws, when the rehearsal lowered them.
    pub draws: Option<Draws>,
    /// Power at which the MDE is read.
    pub target_power: String,
    /// Effect sizes simulated, in order (effect 0 first).
    pub effects: Vec<String>,
    /// One row per hypothesis, in id order.
    pub hypotheses: Vec<HypothesisRow>,
    /// One row per decision rule, in id order.
    pub rules: Vec<RuleRow>,
    /// One row per instrumented specification, in id order.
    pub first_stage: Vec<FirstStageRow>,
    /// One row per specification that ran at least once, in id order.
    pub samples: Vec<SampleRow>,
    /// Data sets on which the analysis stopped, if any did.
    pub failures: Option<Failures>,
    /// What the numbers rest on.
    pub cautions: Vec<String>,
    /// The power curve for rehearsal.html.
    pub figure: Figure,
    /// The power curve for rehearsal.tex.
    pub picture: Picture,
    /// Width of each effect column of the power table in rehearsal.tex (share of the text
    /// width).
    pub power_column_width: String,
    /// Width of each effect column of the rule table in rehearsal.tex.
    pub rule_column_width: String,
}

/// A baseline file the simulated rows come from.
#[derive(Debug, Serialize)]
pub struct BaselineLine {
    /// Table id.
    pub id: String,
    /// The path as written in the plan.
    pub path: String,
    /// Rows of the file.
    pub rows: usize,
    /// SHA-256 of its bytes.
    pub sha256: String,
}

/// Draws of each resampled test: in the rehearsal and as registered.
#[derive(Debug, Serialize)]
pub struct Draws {
    /// Draws used in the rehearsal (`resampling_draws`).
    pub used: usize,
    /// Draws the registered analysis uses.
    pub registered: usize,
}

/// A share of simulated data sets in percent, with its 95% Wilson interval.
#[derive(Debug, Serialize)]
pub struct Percent {
    /// The share.
    pub share: String,
    /// Lower end of the interval.
    pub low: String,
    /// Upper end.
    pub high: String,
}

/// Power and minimum detectable effect of one hypothesis.
#[derive(Debug, Serialize)]
pub struct HypothesisRow {
    /// Hypothesis id.
    pub id: String,
    /// Specification tested.
    pub specification: String,
    /// Term tested.
    pub term: String,
    /// Rejection rate at effect 0.
    pub size: Percent,
    /// The MDE on the effect scale (none: not reached or not read).
    pub mde: Option<String>,
    /// The mean estimate at the MDE.
    pub mde_estimate: Option<String>,
    /// Why there is no MDE, or what bounds it.
    pub note: String,
    /// Power at each effect size.
    pub power: Vec<Percent>,
}

/// How often one decision rule fired.
#[derive(Debug, Serialize)]
pub struct RuleRow {
    /// Rule id.
    pub id: String,
    /// Specification watched.
    pub specification: String,
    /// Share of data sets in which it fired, at each effect size.
    pub fired: Vec<Percent>,
}

/// First-stage strength of one specification at effect 0.
#[derive(Debug, Serialize)]
pub struct FirstStageRow {
    /// Specification id.
    pub id: String,
    /// Which statistic ("effective" or "wald").
    pub statistic: String,
    /// Quantiles 5%, 25%, 50%, 75%, 95% (none when no effect size was simulated).
    pub quantiles: Option<Vec<String>>,
}

/// Observations one specification used.
#[derive(Debug, Serialize)]
pub struct SampleRow {
    /// Specification id.
    pub id: String,
    /// Mean over all data sets.
    pub mean: String,
    /// Smallest.
    pub min: usize,
    /// Largest.
    pub max: usize,
}

/// Data sets on which the analysis stopped with an error.
#[derive(Debug, Serialize)]
pub struct Failures {
    /// How many, over all effect sizes.
    pub count: usize,
    /// The first error.
    pub first: String,
}

/// The power curve as SVG, or why it could not be drawn.
#[derive(Debug, Serialize)]
pub struct Figure {
    /// The SVG document.
    pub svg: Option<String>,
    /// The plotting error.
    pub error: Option<String>,
}

fn percent(s: &Share) -> Percent {
    Percent {
        share: format!("{:.1}", 100.0 * s.share),
        low: format!("{:.1}", 100.0 * s.low),
        high: format!("{:.1}", 100.0 * s.high),
    }
}

fn four(x: Option<f64>) -> Option<String> {
    x.map(|v| format!("{v:.4}"))
}

/// `k` effect columns sharing `share` of the text width.
fn column_width(k: usize, share: f64) -> String {
    format!("{:.3}", share / k.max(1) as f64)
}

impl RehearsalReport {
    /// The report model of rehearsal `r` of the study titled `title`.
    pub fn build(r: &Rehearsed, title: &str) -> Self {
        let figure = match power_curve(r) {
            Ok(svg) => Figure {
                svg: Some(svg),
                error: None,
            },
            Err(e) => Figure {
                svg: None,
                error: Some(e),
            },
        };
        let k = r.effects.len();
        RehearsalReport {
            title: title.to_string(),
            replications: r.replications,
            seed: r.seed,
            plan_content_sha256: r.plan_content_sha256.clone(),
            assumptions_sha256: r.assumptions_sha256.clone(),
            baselines: baselines(r),
            draws: r
                .resampling_draws
                .map(|(used, registered)| Draws { used, registered }),
            target_power: r.target_power.to_string(),
            effects: r.effects.iter().map(f64::to_string).collect(),
            hypotheses: r
                .hypotheses
                .iter()
                .map(|(id, h)| hypothesis(id, h))
                .collect(),
            rules: rules(r),
            first_stage: first_stage(r),
            samples: samples(r),
            failures: failures(r),
            cautions: r.cautions.iter().map(ToString::to_string).collect(),
            figure,
            picture: picture(r),
            power_column_width: column_width(k, 0.8),
            rule_column_width: column_width(k, 0.6),
        }
    }
}

fn baselines(r: &Rehearsed) -> Vec<BaselineLine> {
    r.baselines
        .iter()
        .map(|(id, b)| BaselineLine {
            id: id.clone(),
            path: b.path.clone(),
            rows: b.rows,
            sha256: b.sha256.clone(),
        })
        .collect()
}

fn hypothesis(id: &str, h: &HypothesisPower) -> HypothesisRow {
    HypothesisRow {
        id: id.to_string(),
        specification: h.specification.clone(),
        term: h.term.clone(),
        size: percent(&h.size),
        mde: four(h.mde),
        mde_estimate: four(h.mde_estimate),
        note: h.mde_note.clone(),
        power: h.curve.iter().map(|c| percent(&c.power)).collect(),
    }
}

fn rules(r: &Rehearsed) -> Vec<RuleRow> {
    r.rules
        .iter()
        .map(|(id, rule)| RuleRow {
            id: id.clone(),
            specification: rule.specification.clone(),
            fired: rule.fired.iter().map(percent).collect(),
        })
        .collect()
}

fn first_stage(r: &Rehearsed) -> Vec<FirstStageRow> {
    r.first_stage
        .iter()
        .map(|(id, f)| FirstStageRow {
            id: id.clone(),
            statistic: f.statistic.name().to_string(),
            quantiles: f
                .quantiles
                .first()
                .map(|q| q.iter().map(|v| format!("{v:.1}")).collect()),
        })
        .collect()
}

fn samples(r: &Rehearsed) -> Vec<SampleRow> {
    r.samples
        .iter()
        .map(|(id, s)| SampleRow {
            id: id.clone(),
            mean: format!("{:.1}", s.mean),
            min: s.min,
            max: s.max,
        })
        .collect()
}

fn failures(r: &Rehearsed) -> Option<Failures> {
    let count: usize = r.failed.iter().sum();
    (count > 0).then(|| Failures {
        count,
        first: r.first_failure.clone().unwrap_or_default(),
    })
}
