//! The rehearsal model: replications summarised per hypothesis, rule, first stage and
//! specification, with Monte Carlo intervals and the minimum detectable effect.
//!
//! Invariants: every share is a count over all replications at an effect size (a data set
//! the analysis could not handle counts as not supporting the claim and is reported); every
//! number is finite; the model holds no clock and no path, so it is reproducible from the
//! plan, seed and replication count.

use super::baseline::BaselineRecord;
use super::replicate::{FirstStageStatistic, Outcome};
use crate::error::Result;
use crate::ledger::{PlanPrint, TOOL_VERSION};
use crate::plan::{Hypothesis, Plan, Rehearsal};

use serde::Serialize;
use std::collections::BTreeMap;

/// The normal quantile of the two-sided 95% Wilson interval, Φ⁻¹(0.975) (standard normal
/// table).
pub const WILSON_Z: f64 = 1.959_963_984_540_054;

/// A rehearsal's results (rehearsal.json).
#[derive(Debug, Clone, Serialize)]
pub struct Rehearsed {
    /// Format version of this file.
    pub format: u32,
    /// Tool and version.
    pub tool: String,
    /// The plan's fingerprints (content and bytes).
    pub plan_content_sha256: String,
    /// SHA-256 of the plan file's bytes.
    pub plan_bytes_sha256: String,
    /// SHA-256 of the rehearsal's assumptions: the canonical `[rehearsal]` section with the
    /// replication count used.
    pub assumptions_sha256: String,
    /// Baseline files the simulated tables started from, by table id (absent when every
    /// table was simulated whole).
    #[serde(skip_serializing_if = "BTreeMap::is_empty")]
    pub baselines: BTreeMap<String, BaselineRecord>,
    /// Simulated data sets per effect size.
    pub replications: usize,
    /// Seed.
    pub seed: u64,
    /// Power at which the minimum detectable effect is read.
    pub target_power: f64,
    /// Effect sizes simulated (values of `effect`).
    pub effects: Vec<f64>,
    /// Draws of each resampled test in the rehearsal, when `resampling_draws` lowered them
    /// from the registered count (`[resampling].draws`, the second number).
    pub resampling_draws: Option<(usize, usize)>,
    /// Per hypothesis.
    pub hypotheses: BTreeMap<String, HypothesisPower>,
    /// Per decision rule: the share of data sets in which it fired, per effect size.
    pub rules: BTreeMap<String, RuleRate>,
    /// Per instrumented specification: quantiles of the first-stage F, per effect size.
    pub first_stage: BTreeMap<String, FirstStage>,
    /// Per specification: observations used after the sample rule and deletions.
    pub samples: BTreeMap<String, SampleSize>,
    /// Data sets on which the analysis stopped with an error, per effect size.
    pub failed: Vec<usize>,
    /// The first such error, if any.
    pub first_failure: Option<String>,
    /// What the numbers rest on.
    pub cautions: Vec<&'static str>,
}

/// Power of one hypothesis.
#[derive(Debug, Clone, Serialize)]
pub struct HypothesisPower {
    /// The claim in words.
    pub claim: String,
    /// Specification and term tested.
    pub specification: String,
    /// Term.
    pub term: String,
    /// Family, if any.
    pub family: Option<String>,
    /// Level of the test.
    pub alpha: f64,
    /// Rejection rate with no effect (effect = 0): the test's size, with its interval.
    pub size: Share,
    /// The smallest effect with power at the target, interpolated linearly between the
    /// simulated effect sizes; null when no simulated effect reaches it.
    pub mde: Option<f64>,
    /// The average estimate at the minimum detectable effect (same interpolation): the MDE
    /// in the term's own units.
    pub mde_estimate: Option<f64>,
    /// Why there is no MDE, or what bounds it.
    pub mde_note: String,
    /// The bisection search that located the MDE (null: read by interpolation on the grid).
    pub mde_search: Option<MdeSearch>,
    /// Power at each effect size (the power-curve series).
    pub curve: Vec<CurvePoint>,
}

/// The search for the minimum detectable effect: bisection on the simulated power between the
/// simulated effects bracketing the target, every point simulated with the same replication
/// streams (common random numbers), then linear interpolation inside the final bracket.
#[derive(Debug, Clone, Serialize)]
pub struct MdeSearch {
    /// Bisection steps taken.
    pub steps: usize,
    /// The final bracket: power below the target at `low`, at or above it at `high`.
    pub low: f64,
    /// Upper end of the final bracket.
    pub high: f64,
    /// Half the final bracket's width: how far the MDE can be from the reported value on the
    /// simulated power curve (Monte Carlo error comes on top).
    pub tolerance: f64,
    /// Each effect simulated by the search, with its power, in the order simulated.
    pub points: Vec<CurvePoint>,
}

/// A share of replications with its 95% Wilson interval.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Share {
    /// Count.
    pub count: usize,
    /// Share of all replications.
    pub share: f64,
    /// Lower end of the interval.
    pub low: f64,
    /// Upper end.
    pub high: f64,
}

/// Power at one effect size.
#[derive(Debug, Clone, Serialize)]
pub struct CurvePoint {
    /// The value of `effect`.
    pub effect: f64,
    /// Share of data sets in which the claim was supported (after corrections).
    pub power: Share,
    /// Data sets in which the verdict was undetermined.
    pub undetermined: usize,
    /// Mean estimate of the term over the data sets that gave one.
    pub mean_estimate: Option<f64>,
}

/// How often a rule fired.
#[derive(Debug, Clone, Serialize)]
pub struct RuleRate {
    /// Specification watched.
    pub specification: String,
    /// Share of data sets in which it fired, per effect size (same order as `effects`).
    pub fired: Vec<Share>,
}

/// First-stage strength of one specification.
#[derive(Debug, Clone, Serialize)]
pub struct FirstStage {
    /// "effective" (Montiel Olea–Pflueger effective F, where the plan asks for weak-instrument
    /// diagnostics) or "wald" (the first-stage Wald F with the specification's errors).
    pub statistic: FirstStageStatistic,
    /// Quantiles 5%, 25%, 50%, 75%, 95% per effect size (null where no data set gave one).
    pub quantiles: Vec<[f64; 5]>,
}

/// Observations used by a specification.
#[derive(Debug, Clone, Serialize)]
pub struct SampleSize {
    /// Mean over all data sets.
    pub mean: f64,
    /// Smallest.
    pub min: usize,
    /// Largest.
    pub max: usize,
}

/// The cautions every rehearsal states.
const CAUTIONS: [&str; 3] = [
    "Power, size and the minimum detectable effect rest on the data-generating process written in [rehearsal]: base rates, take-up, intra-cluster correlation and covariate strength are assumptions, not measurements.",
    "Each figure is a Monte Carlo estimate from the stated number of simulated data sets; the intervals are 95% Wilson intervals for that simulation error only.",
    "A rehearsal runs the registered analysis; it does not show that the design identifies the effect (exclusion and monotonicity remain untestable, and a 2SLS estimate is a local average effect among compliers).",
];

/// The caution on how the MDE was read (`mde_steps` 0: interpolation only).
fn mde_caution(steps: usize) -> &'static str {
    if steps == 0 {
        "The minimum detectable effect is interpolated between the simulated effect sizes; simulate more sizes near it (or set mde_steps) to narrow it."
    } else {
        "The minimum detectable effect is found by bisection on the simulated power with common random numbers, to the stated tolerance; its Monte Carlo error (the power's error over the curve's slope) comes on top."
    }
}

/// The 95% Wilson score interval for k successes in n trials.
///
/// # Formula
/// Wilson (1927, JASA 22(158)): centre (p̂ + z²/2n)/(1 + z²/n), half-width
/// z·√(p̂(1−p̂)/n + z²/4n²)/(1 + z²/n), z = Φ⁻¹(0.975).
pub fn wilson(k: usize, n: usize) -> Share {
    let nf = n.max(1) as f64;
    let p = k as f64 / nf;
    let z2 = WILSON_Z * WILSON_Z;
    let denom = 1.0 + z2 / nf;
    let centre = (p + z2 / (2.0 * nf)) / denom;
    let half = WILSON_Z * (p * (1.0 - p) / nf + z2 / (4.0 * nf * nf)).sqrt() / denom;
    Share {
        count: k,
        share: p,
        low: (centre - half).max(0.0),
        high: (centre + half).min(1.0),
    }
}

/// The empirical quantile at probability `q` of sorted `x` (linear interpolation between
/// order statistics, Hyndman and Fan 1996, definition 7).
fn quantile(x: &[f64], q: f64) -> f64 {
    if x.is_empty() {
        return f64::NAN;
    }
    let h = (x.len() - 1) as f64 * q;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(x.len() - 1);
    x[lo] + (h - lo as f64) * (x[hi] - x[lo])
}

/// The MDE and its estimate from a power curve, with a note.
fn mde(effects: &[f64], curve: &[CurvePoint], target: f64) -> (Option<f64>, Option<f64>, String) {
    let Some(i) = curve.iter().position(|c| c.power.share >= target) else {
        let last = curve.last().map_or(0.0, |c| c.power.share);
        return (
            None,
            None,
            format!(
                "power stays below {target} up to the largest effect simulated ({}: power {last:.3}); simulate larger effects",
                effects.last().copied().unwrap_or(0.0)
            ),
        );
    };
    if i == 0 {
        return (
            None,
            None,
            "the claim is supported in at least the target share of data sets at effect 0: its term does not depend on `effect` in the data-generating process, or the test does not hold its size".into(),
        );
    }
    let (a, b) = (&curve[i - 1], &curve[i]);
    let t = (target - a.power.share) / (b.power.share - a.power.share);
    let m = a.effect + t * (b.effect - a.effect);
    let est = match (a.mean_estimate, b.mean_estimate) {
        (Some(x), Some(y)) => Some(x + t * (y - x)),
        _ => None,
    };
    (
        Some(m),
        est,
        format!(
            "between the simulated effects {} and {}",
            a.effect, b.effect
        ),
    )
}

/// Power of hypothesis `id` at `effect` over the replications `outs` (of `reps`).
pub(super) fn point(id: &str, effect: f64, outs: &[Outcome], reps: usize) -> CurvePoint {
    let got: Vec<&(bool, bool, Option<f64>)> =
        outs.iter().filter_map(|o| o.hypotheses.get(id)).collect();
    let estimates: Vec<f64> = got.iter().filter_map(|g| g.2).collect();
    CurvePoint {
        effect,
        power: wilson(got.iter().filter(|g| g.0).count(), reps),
        undetermined: got.iter().filter(|g| g.1).count(),
        mean_estimate: (!estimates.is_empty())
            .then(|| estimates.iter().sum::<f64>() / estimates.len() as f64),
    }
}

/// Summarise the outcomes `per_effect` (one slice of `reps` replications per effect size of
/// `reh`) into the rehearsal model.
///
/// # Errors
/// The plan's fingerprint cannot be computed.
pub(super) fn summarise(
    plan: &Plan,
    registered_draws: Option<usize>,
    reh: &Rehearsal,
    reps: usize,
    per_effect: &[&[Outcome]],
) -> Result<Rehearsed> {
    let print = PlanPrint::of(&plan.path, &plan.text)?;
    let hypotheses = plan
        .hypotheses
        .iter()
        .map(|h| (h.id.clone(), hypothesis_power(h, reh, reps, per_effect)))
        .collect();
    let rules = plan
        .contingencies
        .iter()
        .map(|c| {
            (
                c.id.clone(),
                rule_rate(&c.id, &c.specification, reps, per_effect),
            )
        })
        .collect();
    let first_stage = plan
        .specifications
        .iter()
        .filter_map(|s| Some((s.id.clone(), first_stage(&s.id, per_effect)?)))
        .collect();
    let samples = plan
        .specifications
        .iter()
        .filter_map(|s| Some((s.id.clone(), sample_size(&s.id, per_effect)?)))
        .collect();
    let all = per_effect.iter().flat_map(|o| o.iter());
    Ok(Rehearsed {
        format: 1,
        tool: format!("sworn {TOOL_VERSION}"),
        plan_content_sha256: print.content_sha256.clone(),
        plan_bytes_sha256: print.bytes_sha256.clone(),
        assumptions_sha256: assumptions_sha256(&print, reps),
        baselines: BTreeMap::new(),
        replications: reps,
        seed: reh.seed,
        target_power: reh.target_power,
        effects: reh.effects.clone(),
        resampling_draws: reh.resampling_draws.zip(registered_draws),
        hypotheses,
        rules,
        first_stage,
        samples,
        failed: per_effect
            .iter()
            .map(|o| o.iter().filter(|x| x.failed.is_some()).count())
            .collect(),
        first_failure: all.filter_map(|o| o.failed.clone()).next(),
        cautions: cautions(reh.mde_steps),
    })
}

/// The cautions of a rehearsal whose MDE search took `mde_steps` steps at most.
fn cautions(mde_steps: usize) -> Vec<&'static str> {
    CAUTIONS
        .iter()
        .copied()
        .chain(std::iter::once(mde_caution(mde_steps)))
        .collect()
}

/// Power of hypothesis `h` at every effect size of `reh`, its size and its MDE read by
/// interpolation on the grid.
fn hypothesis_power(
    h: &Hypothesis,
    reh: &Rehearsal,
    reps: usize,
    per_effect: &[&[Outcome]],
) -> HypothesisPower {
    let curve: Vec<CurvePoint> = reh
        .effects
        .iter()
        .zip(per_effect)
        .map(|(e, outs)| point(&h.id, *e, outs, reps))
        .collect();
    let (m, est, note) = mde(&reh.effects, &curve, reh.target_power);
    HypothesisPower {
        claim: h.claim.clone(),
        specification: h.specification.clone(),
        term: h.term.clone(),
        family: h.family.clone(),
        alpha: h.alpha,
        size: curve[0].power,
        mde: m,
        mde_estimate: est,
        mde_note: note,
        mde_search: None,
        curve,
    }
}

/// How often rule `id` (watching `specification`) fired at each effect size.
fn rule_rate(id: &str, specification: &str, reps: usize, per_effect: &[&[Outcome]]) -> RuleRate {
    RuleRate {
        specification: specification.to_string(),
        fired: per_effect
            .iter()
            .map(|outs| wilson(fired(outs, id), reps))
            .collect(),
    }
}

/// How many of `outs` fired rule `id`.
fn fired(outs: &[Outcome], id: &str) -> usize {
    outs.iter()
        .filter(|o| o.rules.get(id) == Some(&true))
        .count()
}

/// Quantiles of specification `id`'s first-stage statistic per effect size; none when no
/// data set gave one (not an instrumented specification, or it never ran).
fn first_stage(id: &str, per_effect: &[&[Outcome]]) -> Option<FirstStage> {
    let statistic = per_effect
        .iter()
        .flat_map(|o| o.iter())
        .find_map(|o| o.first_stage.get(id).map(|f| f.1))?;
    let quantiles = per_effect
        .iter()
        .map(|outs| {
            let mut f: Vec<f64> = outs
                .iter()
                .filter_map(|o| o.first_stage.get(id).map(|f| f.0))
                .filter(|f| f.is_finite())
                .collect();
            f.sort_by(f64::total_cmp);
            [0.05, 0.25, 0.5, 0.75, 0.95].map(|q| quantile(&f, q))
        })
        .collect();
    Some(FirstStage {
        statistic,
        quantiles,
    })
}

/// Observations specification `id` used over every data set; none when it never ran.
fn sample_size(id: &str, per_effect: &[&[Outcome]]) -> Option<SampleSize> {
    let used: Vec<usize> = per_effect
        .iter()
        .flat_map(|o| o.iter())
        .filter_map(|o| o.used.get(id).copied())
        .collect();
    let (min, max) = (used.iter().min()?, used.iter().max()?);
    Some(SampleSize {
        mean: used.iter().sum::<usize>() as f64 / used.len() as f64,
        min: *min,
        max: *max,
    })
}

/// SHA-256 of the canonical JSON `{"rehearsal": SECTION, "replications": N}`, where SECTION
/// is the `[rehearsal]` section as the plan's canonical form writes it (so comments and key
/// order do not change it) and N the replication count used.
pub fn assumptions_sha256(print: &PlanPrint, reps: usize) -> String {
    let section = serde_json::from_str::<serde_json::Value>(&print.canonical)
        .ok()
        .and_then(|v| v.get("rehearsal").cloned())
        .unwrap_or(serde_json::Value::Null);
    let mut out = String::new();
    crate::plan::canonical::write_canonical(
        &serde_json::json!({"rehearsal": section, "replications": reps}),
        &mut out,
    );
    crate::ledger::sha256_hex(out.as_bytes())
}

impl Rehearsed {
    /// Record the baseline files the rehearsal read; they join its assumptions, so the
    /// assumptions' fingerprint also covers the files' bytes.
    pub(crate) fn set_baselines(&mut self, baselines: BTreeMap<String, BaselineRecord>) {
        if baselines.is_empty() {
            return;
        }
        let files: serde_json::Map<String, serde_json::Value> = baselines
            .iter()
            .map(|(id, b)| {
                (
                    id.clone(),
                    serde_json::json!({"path": b.path, "sha256": b.sha256}),
                )
            })
            .collect();
        let mut out = String::new();
        crate::plan::canonical::write_canonical(
            &serde_json::json!({"assumptions": self.assumptions_sha256, "baselines": files}),
            &mut out,
        );
        self.assumptions_sha256 = crate::ledger::sha256_hex(out.as_bytes());
        self.baselines = baselines;
    }

    /// What the `rehearsed` ledger entry records, for a later run to cite.
    pub fn power_record(&self) -> crate::ledger::PowerRecord {
        crate::ledger::PowerRecord {
            replications: self.replications,
            target_power: self.target_power,
            effects: self.effects.clone(),
            hypotheses: self
                .hypotheses
                .iter()
                .map(|(id, h)| {
                    (
                        id.clone(),
                        crate::ledger::HypothesisPowerRecord {
                            power: h.curve.iter().map(|c| c.power.share).collect(),
                            mde: h.mde,
                        },
                    )
                })
                .collect(),
        }
    }
}
