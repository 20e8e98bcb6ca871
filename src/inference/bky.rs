//! Sharpened q-values: the two-stage false-discovery-rate procedure of Benjamini, Krieger
//! and Yekutieli (2006, "Adaptive linear step-up procedures that control the false
//! discovery rate", Biometrika 93, Definition 6), read as adjusted p-values.
//!
//! The procedure at level q:
//! 1. run Benjamini–Hochberg at q' = q/(1 + q); let r₁ be the number rejected;
//! 2. if r₁ = 0 reject nothing, if r₁ = m reject everything;
//! 3. otherwise estimate the number of true nulls by m̂₀ = m − r₁ and run Benjamini–Hochberg
//!    again at q* = q' m / m̂₀; its rejections are the procedure's.
//!
//! The sharpened q-value of a hypothesis is the smallest q at which the procedure rejects
//! it. It is computed exactly, not on a grid: with aᵢ the Benjamini–Hochberg adjusted
//! p-values (BH at level α rejects i exactly when aᵢ ≤ α) and t = q/(1 + q), the number
//! rejected in stage one is r₁(t) = #{j : aⱼ ≤ t}, a step function whose steps are at the
//! sorted aⱼ. On the stretch where r₁(t) = r, hypothesis i is rejected exactly when
//! t ≥ aᵢ (m − r)/m, so the smallest such t is found by scanning the finitely many stretches;
//! then q = t/(1 − t), capped at 1. The rejection sets grow with q (r₁ and q* both increase
//! with q), so hypothesis i is rejected at level q exactly when q ≥ its q-value (for q < 1).
//!
//! Invariants: output in input order and of the input's length; NaN p-values stay NaN and
//! enter the others' computation as p = 1 (as in [`adjust`](super::adjust)); every q-value
//! lies in [0, 1] and is non-decreasing in p.

use super::correction::{adjust, Correction};

/// Sharpened (two-stage, Benjamini–Krieger–Yekutieli 2006) q-values, in input order.
///
/// # Formula
/// qᵢ = min(1, tᵢ/(1 − tᵢ)) with tᵢ = min over r ∈ {1..m} of max(a_(r), aᵢ (m − r)/m) among the
/// r for which that value lies below a_(r+1) (a_(m+1) = ∞), where a_(1) ≤ … ≤ a_(m) are the
/// Benjamini–Hochberg adjusted p-values (see the module documentation for the derivation).
/// The scan is exact over the finite set of candidate levels; no grid is used.
///
/// p-values are used as given: the caller supplies values in [0, 1]. Cost O(m²) in the
/// worst case (m hypotheses), immaterial for the families a plan declares.
pub fn bky_q_values(p: &[f64]) -> Vec<f64> {
    let m = p.len();
    let filled: Vec<f64> = p
        .iter()
        .map(|&v| if v.is_nan() { 1.0 } else { v })
        .collect();
    let bh = adjust(&filled, Correction::BenjaminiHochberg);
    let mut sorted = bh.clone();
    sorted.sort_by(f64::total_cmp);
    let mf = m as f64;
    bh.iter()
        .zip(p)
        .map(|(&a, &orig)| {
            if orig.is_nan() {
                return f64::NAN;
            }
            let mut t = f64::INFINITY;
            for r in 1..=m {
                let lo = sorted[r - 1];
                let hi = if r < m { sorted[r] } else { f64::INFINITY };
                if lo >= hi {
                    // r₁(t) jumps past r here (tied adjusted p-values): no stretch.
                    continue;
                }
                let candidate = lo.max(a * (m - r) as f64 / mf);
                if candidate < hi {
                    t = candidate;
                    break;
                }
            }
            if t >= 0.5 {
                // t = ½ is q = 1; the procedure is only read at levels up to 1.
                1.0
            } else {
                (t / (1.0 - t)).clamp(0.0, 1.0)
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The two-stage procedure at one level, written out from BKY (2006, Definition 6) with
    /// the Benjamini–Hochberg comparisons p_(j) ≤ j α / m: rejections in input order.
    fn two_stage(p: &[f64], q: f64) -> Vec<bool> {
        fn bh(p: &[f64], alpha: f64) -> Vec<bool> {
            let m = p.len();
            let mut order: Vec<usize> = (0..m).collect();
            order.sort_by(|&i, &j| p[i].total_cmp(&p[j]));
            let k = (1..=m)
                .rev()
                .find(|&j| p[order[j - 1]] <= j as f64 * alpha / m as f64)
                .unwrap_or(0);
            let mut out = vec![false; m];
            for &i in &order[..k] {
                out[i] = true;
            }
            out
        }
        let m = p.len();
        let q1 = q / (1.0 + q);
        let first = bh(p, q1);
        let r1 = first.iter().filter(|&&r| r).count();
        if r1 == 0 || r1 == m {
            return first;
        }
        bh(p, q1 * m as f64 / (m - r1) as f64)
    }

    /// The 15 p-values of Benjamini and Hochberg (1995, section 4; quoted from memory, as in
    /// `tests/reference/multitest.py`). By hand at q = 0.05: q' = 0.05/1.05, BH at q' rejects
    /// 4 (p_(4) = 0.0095 ≤ 4q'/15 = 0.0127, p_(5) = 0.0201 > 0.0159 and no later p_(j) is
    /// below j q'/15); m̂₀ = 11, q* = q'·15/11 = 0.064935; BH at q* rejects 8
    /// (p_(8) = 0.0344 ≤ 8 q*/15 = 0.034632, p_(9) = 0.0459 > 0.038961, p_(10) = 0.324 >
    /// 0.0433, and the rest larger).
    const BH1995: [f64; 15] = [
        0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240, 0.4262,
        0.5719, 0.6528, 0.7590, 1.000,
    ];

    #[test]
    fn bh1995_rejects_eight_at_five_percent_by_hand() {
        let q = bky_q_values(&BH1995);
        let rejected = q.iter().filter(|&&v| v <= 0.05).count();
        assert_eq!(rejected, 8, "{q:?}");
        assert!(q[..8].iter().all(|&v| v <= 0.05));
        assert!(q[8..].iter().all(|&v| v > 0.05));
        assert_eq!(two_stage(&BH1995, 0.05).iter().filter(|&&r| r).count(), 8);
    }

    /// Every q-value is consistent with the written-out procedure just above and just below
    /// it (relative 1e-9), on the BH (1995) family and on an invented family with ties.
    #[test]
    fn q_values_match_the_procedure_at_their_own_level() {
        let families: [&[f64]; 3] = [
            &BH1995,
            &[0.04, 0.01, 0.04, 0.2, 0.01, 0.5, 0.03, 0.001, 0.0105],
            &[0.3, 0.0002, 0.8, 0.049, 0.012],
        ];
        for p in families {
            let q = bky_q_values(p);
            for (i, &qi) in q.iter().enumerate() {
                if qi < 1.0 {
                    assert!(two_stage(p, qi * (1.0 + 1e-9))[i], "{p:?} {i} {qi}");
                }
                if qi > 0.0 {
                    assert!(!two_stage(p, qi * (1.0 - 1e-9))[i], "{p:?} {i} {qi}");
                }
            }
        }
    }

    /// q-values are ordered like p, tied p-values share a q-value, NaN stays NaN while
    /// counting as p = 1, and a single hypothesis has q = p/(1 − p) by hand (stage one at
    /// q/(1+q) rejects it exactly when p ≤ q/(1+q)).
    #[test]
    fn order_bounds_and_missing() {
        let p = [0.02, f64::NAN, 0.001, 0.3, 0.02];
        let q = bky_q_values(&p);
        assert!(q[1].is_nan());
        assert_eq!(q[0], q[4]);
        assert!(q[2] <= q[0] && q[0] <= q[3]);
        let with_one = bky_q_values(&[0.02, 1.0, 0.001, 0.3, 0.02]);
        for i in [0, 2, 3, 4] {
            assert_eq!(q[i], with_one[i]);
        }
        assert!(bky_q_values(&[]).is_empty());
        assert_eq!(bky_q_values(&[0.5]), vec![1.0]);
        // One hypothesis: rejected once q/(1+q) ≥ p, i.e. q = p/(1 − p).
        let single = bky_q_values(&[0.04])[0];
        assert!((single - 0.04 / 0.96).abs() < 1e-15, "{single}");
    }

    /// Checks against statsmodels 0.15.0 `multipletests(method="fdr_tsbky")` decisions at a
    /// grid of levels on seeded families (fixture by `tests/reference/summaries.py`): at each
    /// level α the q-value must be ≤ α exactly for the rejected hypotheses (levels within
    /// relative 1e-9 of a q-value are skipped, where rounding decides).
    #[test]
    fn agrees_with_statsmodels_decisions() {
        let doc = crate::testing::fixture("summary_bky.json");
        let families = doc["families"].as_array().expect("families");
        let mut checked = 0;
        for family in families {
            let p: Vec<f64> = family["p"]
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap())
                .collect();
            let q = bky_q_values(&p);
            for decision in family["decisions"].as_array().unwrap() {
                let alpha = decision["alpha"].as_f64().unwrap();
                let reject: Vec<bool> = decision["reject"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|v| v.as_bool().unwrap())
                    .collect();
                for (i, (&qi, &r)) in q.iter().zip(&reject).enumerate() {
                    if (qi - alpha).abs() <= 1e-9 * alpha {
                        continue;
                    }
                    assert_eq!(qi <= alpha, r, "family {p:?} h{i} q {qi} alpha {alpha}");
                    checked += 1;
                }
            }
        }
        assert!(checked > 1000, "{checked}");
    }
}
