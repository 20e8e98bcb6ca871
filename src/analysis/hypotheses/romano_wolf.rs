//! The Romano–Wolf step-down of a family: its members' resampled draws lined up draw by draw,
//! each statistic oriented so that large values are evidence for the claim.

use super::on_side;
use crate::analysis::spec::{procedure, Fitted};
use crate::estimate;
use crate::inference::{self, Direction};
use crate::plan::{Hypothesis, Plan};
use crate::results::Procedure;
use std::collections::BTreeMap;

/// Romano–Wolf adjusted p-values of a family from its members' joint resampling draws.
/// Each statistic is oriented so that large values are evidence for the claim (|t| for
/// two-sided hypotheses, −t for "less"), and the one-sided step-down runs on them.
pub(super) fn romano_wolf(
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
        let kind = procedure(&h.method)
            .ok_or_else(|| format!("hypothesis `{id}` is tested model-based, not resampled"))?;
        let r = f
            .resampled
            .get(&(h.id.clone(), kind))
            .ok_or_else(|| format!("hypothesis `{id}` has no resampled draws"))?;
        if units.is_some_and(|u| u != f.resample_units) || exact.is_some_and(|e| e != r.exact) {
            return Err("its hypotheses resample different units or designs, so their draws cannot be lined up; use one data table, sample and design for the family".into());
        }
        units = Some(&f.resample_units);
        exact = Some(r.exact);
        let (obs, draws) = oriented(h, f, kind, r)?;
        if columns.first().is_some_and(|c| c.len() != draws.len()) {
            return Err("its hypotheses used different numbers of draws".into());
        }
        observed.push(obs);
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

/// A family member's observed statistic and draws, oriented so that large values are
/// evidence for its claim.
fn oriented(
    h: &Hypothesis,
    f: &Fitted,
    kind: Procedure,
    r: &estimate::ResampleResult,
) -> Result<(f64, Vec<f64>), String> {
    let orient = |v: f64| match h.direction {
        Direction::TwoSided => v.abs(),
        Direction::Greater => v,
        Direction::Less => -v,
    };
    // The randomization AR statistic (2SLS) is non-negative: it is used as it is, and a
    // one-sided member whose estimate lies on the other side can never be rejected.
    let ar = kind == Procedure::Randomization && f.result.estimator.is_iv();
    let orient = |v: f64| if ar { v } else { orient(v) };
    let draws: Option<Vec<f64>> = r.statistics.iter().map(|s| s.map(orient)).collect();
    let draws = draws.ok_or_else(|| format!("hypothesis `{}` skipped degenerate draws", h.id))?;
    let estimate = f.result.terms.get(&h.term).map_or(f64::NAN, |t| t.estimate);
    let against =
        ar && h.direction != Direction::TwoSided && !on_side(estimate, h.null, h.direction);
    let observed = if against {
        f64::INFINITY
    } else {
        orient(r.observed)
    };
    Ok((observed, draws))
}
