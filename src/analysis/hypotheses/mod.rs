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
//!
//! `one.rs` tests one hypothesis on the fit a rule may have switched it to, with the
//! procedures of `procedures.rs` (t, Anderson–Rubin, tF, resampled); `romano_wolf.rs` lines
//! up a family's resampled draws for the Romano–Wolf step-down; this file corrects each
//! family and decides the verdicts.

mod one;
mod procedures;
mod romano_wolf;

use super::contingency::Substitution;
use super::spec::Fitted;
use crate::inference::{self, Correction, Direction};
use crate::plan::Plan;
use crate::results::{HypothesisResult, Verdict};
use one::test_one;
use romano_wolf::romano_wolf;
use std::collections::BTreeMap;

/// Test every hypothesis of `plan` against the fitted specifications.
pub fn test_all(
    plan: &Plan,
    fitted: &BTreeMap<String, Fitted>,
    subs: &BTreeMap<String, Substitution>,
    registered: Option<&std::collections::BTreeSet<String>>,
) -> BTreeMap<String, HypothesisResult> {
    let added = |id: &str| registered.is_some_and(|r| !r.contains(id));
    let mut tested = Tested {
        live: BTreeMap::new(),
        out: BTreeMap::new(),
    };
    for h in &plan.hypotheses {
        let (r, is_live) = test_one(plan, h, fitted, subs.get(&h.specification));
        tested.live.insert(h.id.clone(), is_live);
        tested.out.insert(h.id.clone(), r);
    }
    for (name, ids) in families(plan, &added) {
        tested.correct(plan, &name, &ids, fitted);
    }
    tested.decide(&added);
    tested.out
}

/// Every hypothesis tested, before and after the corrections.
struct Tested {
    /// Whether each hypothesis takes part in its family's correction.
    live: BTreeMap<String, bool>,
    /// Each hypothesis' result.
    out: BTreeMap<String, HypothesisResult>,
}

/// The members of each family, by correction group: a hypothesis added after the data were
/// read never joins a registered family's correction; it is corrected only with others added
/// after the data (its group is the family's name followed by a NUL and `added`).
fn families(plan: &Plan, added: &impl Fn(&str) -> bool) -> BTreeMap<String, Vec<String>> {
    let mut families: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for h in &plan.hypotheses {
        if let Some(f) = &h.family {
            let key = if added(&h.id) {
                format!("{f}\u{0}added")
            } else {
                f.clone()
            };
            families.entry(key).or_default().push(h.id.clone());
        }
    }
    families
}

impl Tested {
    /// Correct the live members `ids` of the correction group `group` with its family's
    /// correction. A Romano–Wolf step-down that is not possible leaves every member
    /// undetermined, saying why.
    fn correct(
        &mut self,
        plan: &Plan,
        group: &str,
        ids: &[String],
        fitted: &BTreeMap<String, Fitted>,
    ) {
        let name = group.split('\u{0}').next().unwrap_or_default();
        let correction = plan
            .families
            .get(name)
            .map_or(Correction::None, |f| f.correction);
        let members: Vec<&String> = ids.iter().filter(|id| self.live[*id]).collect();
        let ps: Vec<f64> = members
            .iter()
            .map(|id| self.out[*id].p_value.unwrap_or(1.0))
            .collect();
        let adjusted = if correction == Correction::RomanoWolf {
            match romano_wolf(plan, &members, fitted) {
                Ok(a) => a,
                Err(why) => {
                    for id in &members {
                        if let Some(h) = self.out.get_mut(*id) {
                            h.reason = Some(format!("Romano–Wolf step-down not possible: {why}"));
                            h.correction = correction;
                        }
                        self.live.insert((*id).clone(), false);
                    }
                    return;
                }
            }
        } else {
            inference::adjust(&ps, correction)
        };
        for (id, adj) in members.iter().zip(adjusted) {
            if let Some(h) = self.out.get_mut(*id) {
                h.adjusted_p_value = Some(adj);
                h.correction = correction;
            }
        }
    }

    /// The verdicts: supported when the corrected p-value is at most the hypothesis' alpha;
    /// an undetermined hypothesis shows no corrected p-value. Hypotheses added after the
    /// data are marked as not pre-registered.
    fn decide(&mut self, added: &impl Fn(&str) -> bool) {
        for (id, h) in self.out.iter_mut() {
            if added(id) {
                h.pre_registered = false;
            }
            if !self.live[id] {
                h.adjusted_p_value = None;
                continue;
            }
            if let Some(adj) = h.adjusted_p_value {
                h.verdict = if adj <= h.alpha {
                    Verdict::Supported
                } else {
                    Verdict::NotSupported
                };
            }
        }
    }
}

/// Whether `x` lies on the side of `null` the direction claims (always true two-sided).
pub(super) fn on_side(x: f64, null: f64, d: Direction) -> bool {
    match d {
        Direction::TwoSided => true,
        Direction::Greater => x > null,
        Direction::Less => x < null,
    }
}
