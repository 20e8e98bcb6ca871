//! The minimum detectable effect by bisection on the simulated power.
//!
//! Between the two simulated effects that bracket the target power, the midpoint is simulated
//! with the same replication streams as every other effect (common random numbers: the
//! stream of replication r depends on (seed, r) only), so the power differences along the
//! search reflect the effect, not fresh noise. The half where the target is crossed is kept;
//! after `mde_steps` halvings the MDE is interpolated linearly inside the final bracket, whose
//! half-width is the stated tolerance. Midpoints shared by several hypotheses are simulated
//! once.

use super::replicate::Outcome;
use super::summary::{point, CurvePoint, MdeSearch, Rehearsed};
use crate::error::Result;
use crate::plan::Plan;
use std::collections::BTreeMap;

/// Simulates every replication at one effect size (in replication order).
pub(super) type Simulate<'a> = dyn Fn(f64) -> Result<Vec<Outcome>> + 'a;

/// Refine each hypothesis's MDE in `r` by `steps` bisection steps.
///
/// # Errors
/// As a simulation at a new effect size.
pub(super) fn refine(
    plan: &Plan,
    r: &mut Rehearsed,
    steps: usize,
    simulate: &Simulate<'_>,
) -> Result<()> {
    let target = r.target_power;
    let mut cache: BTreeMap<u64, Vec<Outcome>> = BTreeMap::new();
    for h in &plan.hypotheses {
        let Some(hp) = r.hypotheses.get_mut(&h.id) else {
            continue;
        };
        let Some(i) = hp.curve.iter().position(|c| c.power.share >= target) else {
            continue;
        };
        if i == 0 {
            continue;
        }
        let (mut lo, mut hi) = (hp.curve[i - 1].clone(), hp.curve[i].clone());
        let mut points = Vec::with_capacity(steps);
        for _ in 0..steps {
            let m = 0.5 * (lo.effect + hi.effect);
            let outs = match cache.get(&m.to_bits()) {
                Some(o) => o,
                None => {
                    let o = simulate(m)?;
                    cache.entry(m.to_bits()).or_insert(o)
                }
            };
            let p = point(&h.id, m, outs, r.replications);
            points.push(p.clone());
            if p.power.share >= target {
                hi = p;
            } else {
                lo = p;
            }
        }
        let (mde, estimate) = interpolate(&lo, &hi, target);
        hp.mde = Some(mde);
        hp.mde_estimate = estimate;
        hp.mde_note = format!(
            "by {steps} bisection steps between the simulated effects {} and {} (common random numbers): within ±{:.4} of the simulated curve's crossing",
            hp.curve[i - 1].effect,
            hp.curve[i].effect,
            0.5 * (hi.effect - lo.effect)
        );
        hp.mde_search = Some(MdeSearch {
            steps,
            low: lo.effect,
            high: hi.effect,
            tolerance: 0.5 * (hi.effect - lo.effect),
            points,
        });
    }
    Ok(())
}

/// The effect (and mean estimate) where the line through `lo` and `hi` reaches `target`.
fn interpolate(lo: &CurvePoint, hi: &CurvePoint, target: f64) -> (f64, Option<f64>) {
    let rise = hi.power.share - lo.power.share;
    let t = if rise > 0.0 {
        ((target - lo.power.share) / rise).clamp(0.0, 1.0)
    } else {
        1.0
    };
    let m = lo.effect + t * (hi.effect - lo.effect);
    let est = match (lo.mean_estimate, hi.mean_estimate) {
        (Some(x), Some(y)) => Some(x + t * (y - x)),
        _ => None,
    };
    (m, est)
}
