//! Multiple-testing corrections: adjusted p-values for a family of hypotheses.
//!
//! An adjusted p-value is the smallest family-wise level (Bonferroni, Holm) or false
//! discovery rate (Benjamini–Hochberg) at which the hypothesis would be rejected, so a
//! hypothesis is rejected at level α exactly when its adjusted p-value is ≤ α.
//!
//! Invariants: the output has the input's length and order; every adjusted value lies in
//! [p, 1] for its own p, except BKY's sharpened q-values, which fall below p when the first
//! stage estimates that most nulls are false (Benjamini, Krieger and Yekutieli 2006); the adjustment is monotone in p and does not depend on the order
//! in which tied p-values are listed. A NaN p-value stays NaN in the output but still
//! counts as one of the m hypotheses, entering the others' adjustment as p = 1 (the
//! conservative reading of a test that could not be computed).

use serde::Serialize;

/// A multiple-testing correction, as named in a plan's `[family.*].correction`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Correction {
    /// No adjustment: each p-value stands alone.
    None,
    /// Bonferroni: min(1, m p).
    Bonferroni,
    /// Holm's (1979) step-down procedure.
    Holm,
    /// Benjamini and Hochberg's (1995) step-up procedure, controlling the FDR.
    BenjaminiHochberg,
    /// Sharpened q-values of Benjamini, Krieger and Yekutieli (2006), controlling the FDR.
    Bky,
    /// Romano and Wolf's (2005) resampling step-down, controlling the FWER. It needs the
    /// family's joint resampling draws; [`adjust`], which sees only p-values, returns Holm's
    /// adjustment for it, a valid but more conservative bound.
    RomanoWolf,
}

/// Adjusted p-values, in input order.
///
/// # Formula
/// With m hypotheses and p_(1) ≤ … ≤ p_(m) the ordered p-values (ties kept in input order):
/// - Bonferroni: min(1, m p_i).
/// - Holm (1979, "A simple sequentially rejective multiple test procedure", Scand. J.
///   Statist. 6): p̃_(i) = max_{j ≤ i} min(1, (m - j + 1) p_(j)).
/// - Benjamini and Hochberg (1995, "Controlling the false discovery rate", JRSS B 57):
///   p̃_(i) = min_{j ≥ i} min(1, m p_(j) / j).
pub fn adjust(p_values: &[f64], correction: Correction) -> Vec<f64> {
    let m = p_values.len() as f64;
    let adjusted = match correction {
        Correction::None => p_values.to_vec(),
        Correction::Bonferroni => p_values.iter().map(|&p| (m * p).min(1.0)).collect(),
        Correction::Holm => step_down(p_values),
        Correction::BenjaminiHochberg => step_up(p_values),
        Correction::Bky => super::bky_q_values(p_values),
        Correction::RomanoWolf => step_down(p_values),
    };
    adjusted
        .into_iter()
        .zip(p_values)
        .map(|(a, &p)| if p.is_nan() { f64::NAN } else { a })
        .collect()
}

/// Indices that sort the p-values ascending (NaN read as 1), stable for ties.
fn ascending_order(p_values: &[f64]) -> Vec<usize> {
    let key = |i: usize| {
        if p_values[i].is_nan() {
            1.0
        } else {
            p_values[i]
        }
    };
    let mut order: Vec<usize> = (0..p_values.len()).collect();
    order.sort_by(|&i, &j| key(i).total_cmp(&key(j)));
    order
}

/// Holm's step-down adjustment with the running maximum that keeps it monotone.
fn step_down(p_values: &[f64]) -> Vec<f64> {
    let m = p_values.len();
    let mut adjusted = vec![f64::NAN; m];
    let mut running = 0.0_f64;
    for (rank, &i) in ascending_order(p_values).iter().enumerate() {
        let p = if p_values[i].is_nan() {
            1.0
        } else {
            p_values[i]
        };
        running = running.max(((m - rank) as f64 * p).min(1.0));
        adjusted[i] = running;
    }
    adjusted
}

/// Benjamini–Hochberg step-up adjustment with the running minimum taken from the top.
fn step_up(p_values: &[f64]) -> Vec<f64> {
    let m = p_values.len();
    let mut adjusted = vec![f64::NAN; m];
    let mut running = 1.0_f64;
    for (rank, &i) in ascending_order(p_values).iter().enumerate().rev() {
        let p = if p_values[i].is_nan() {
            1.0
        } else {
            p_values[i]
        };
        running = running.min(m as f64 * p / (rank + 1) as f64);
        adjusted[i] = running;
    }
    adjusted
}
