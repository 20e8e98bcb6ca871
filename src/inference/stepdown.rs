//! Romano–Wolf step-down adjusted p-values from resampled test statistics (Romano and Wolf
//! 2005, "Exact and approximate stepdown methods for multiple hypothesis testing", JASA 100,
//! and "Stepwise multiple testing as formalized data snooping", Econometrica 73; adjusted
//! p-values as in Romano and Wolf 2016, "Efficient computation of adjusted p-values for
//! resampling-based stepdown multiple testing", Statistics & Probability Letters 113;
//! citations from memory).
//!
//! Role: family-wise error control that uses the dependence between the statistics, from
//! draws the caller produced under the null (randomization / permutation draws, or a
//! bootstrap with the null imposed).
//!
//! Conventions:
//! * `draws[b][h]` is the statistic of hypothesis h in draw b; draw 0 must be the observed
//!   statistics (the identity permutation), so it is counted like every other draw and every
//!   adjusted p-value is at least 1/B with B = `draws.len()`.
//! * Two-sided: statistics are compared in absolute value; one-sided: signed, large values
//!   against the null (negate the statistics for the other direction).
//! * A draw counts against a threshold when it is ≥ the threshold (ties count).

/// Why Romano–Wolf p-values could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StepDownError {
    /// No hypotheses or no draws.
    #[error("Romano-Wolf needs at least one hypothesis and one draw ({hypotheses} hypotheses, {draws} draws given)")]
    Empty {
        /// Hypotheses given.
        hypotheses: usize,
        /// Draws given.
        draws: usize,
    },
    /// A draw with the wrong number of statistics.
    #[error("draw {draw} has {got} statistics, expected {expected}")]
    DrawLength {
        /// Index of the draw.
        draw: usize,
        /// Hypotheses (length of `observed`).
        expected: usize,
        /// Statistics in the draw.
        got: usize,
    },
    /// A NaN or infinite statistic.
    #[error("a test statistic is NaN or infinite")]
    NotFinite,
    /// Draw 0 differs from the observed statistics.
    #[error("draw 0 must be the observed statistics (hypothesis {hypothesis} differs)")]
    FirstDrawNotObserved {
        /// The first hypothesis at which they differ.
        hypothesis: usize,
    },
}

/// Relative tolerance for "draw 0 equals the observed statistics" (the two may be computed
/// by different code paths).
pub const OBSERVED_DRAW_TOLERANCE: f64 = 1e-10;

/// Relative tolerance under which a draw ties an observed statistic (and counts as reaching
/// it), as for single resampled p-values.
pub const TIE_TOLERANCE: f64 = 1e-12;

/// Romano–Wolf step-down adjusted p-values, in input order.
///
/// # Formula
/// Order the hypotheses so that s_(1) ≥ … ≥ s_(S), with s = |t| (two-sided) or t. For step
/// j, p̂_(j) = #{b : max_{k ≥ j} s*_{b,(k)} ≥ s_(j)} / B, the share of draws whose maximum
/// over the hypotheses not yet rejected reaches the j-th largest observed statistic; then
/// monotonicity is enforced, p̃_(j) = max(p̂_(j), p̃_(j−1)) (Romano and Wolf 2016). Tied observed statistics receive equal adjusted p-values. "Reaches" allows a relative tie
/// tolerance of [`TIE_TOLERANCE`].
///
/// # Errors
/// [`StepDownError::Empty`], [`StepDownError::DrawLength`], [`StepDownError::NotFinite`],
/// and [`StepDownError::FirstDrawNotObserved`] when draw 0 differs from `observed` by more
/// than [`OBSERVED_DRAW_TOLERANCE`] · max(1, |t|).
pub fn romano_wolf(
    observed: &[f64],
    draws: &[Vec<f64>],
    two_sided: bool,
) -> Result<Vec<f64>, StepDownError> {
    step_down(observed, draws, two_sided, true)
}

/// [`romano_wolf`] over a complete enumeration of the draws (exact randomization or every
/// sign vector): the observed draw is one of `draws`, wherever the enumeration puts it, so
/// draw 0 is not required to be the observed one.
///
/// # Errors
/// As [`romano_wolf`], without [`StepDownError::FirstDrawNotObserved`].
pub fn romano_wolf_enumerated(
    observed: &[f64],
    draws: &[Vec<f64>],
    two_sided: bool,
) -> Result<Vec<f64>, StepDownError> {
    step_down(observed, draws, two_sided, false)
}

fn step_down(
    observed: &[f64],
    draws: &[Vec<f64>],
    two_sided: bool,
    first_is_observed: bool,
) -> Result<Vec<f64>, StepDownError> {
    let s = observed.len();
    if s == 0 || draws.is_empty() {
        return Err(StepDownError::Empty {
            hypotheses: s,
            draws: draws.len(),
        });
    }
    if observed.iter().any(|v| !v.is_finite()) {
        return Err(StepDownError::NotFinite);
    }
    for (b, draw) in draws.iter().enumerate() {
        if draw.len() != s {
            return Err(StepDownError::DrawLength {
                draw: b,
                expected: s,
                got: draw.len(),
            });
        }
        if draw.iter().any(|v| !v.is_finite()) {
            return Err(StepDownError::NotFinite);
        }
    }
    if let Some(h) = (0..s).filter(|_| first_is_observed).find(|&h| {
        (draws[0][h] - observed[h]).abs() > OBSERVED_DRAW_TOLERANCE * observed[h].abs().max(1.0)
    }) {
        return Err(StepDownError::FirstDrawNotObserved { hypothesis: h });
    }
    let score = |v: f64| if two_sided { v.abs() } else { v };
    // Descending by score; stable, so tied statistics keep their input order.
    let mut order: Vec<usize> = (0..s).collect();
    order.sort_by(|&i, &j| score(observed[j]).total_cmp(&score(observed[i])));
    // A draw ties the observed statistic when within 1e-12 relative (the project's p-value
    // convention), so the same statistic computed by another code path still counts.
    let thresholds: Vec<f64> = order
        .iter()
        .map(|&h| {
            let t = score(observed[h]);
            t - TIE_TOLERANCE * t.abs()
        })
        .collect();
    let mut counts = vec![0_u64; s];
    let mut suffix = vec![0.0_f64; s];
    for draw in draws {
        let mut running = f64::NEG_INFINITY;
        for j in (0..s).rev() {
            running = running.max(score(draw[order[j]]));
            suffix[j] = running;
        }
        for j in 0..s {
            if suffix[j] >= thresholds[j] {
                counts[j] += 1;
            }
        }
    }
    let b = draws.len() as f64;
    let mut adjusted = vec![f64::NAN; s];
    let mut running = 0.0_f64;
    for j in 0..s {
        running = running.max(counts[j] as f64 / b);
        adjusted[order[j]] = running;
    }
    Ok(adjusted)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Three hypotheses, five draws (draw 0 observed), computed by hand with the formula of
    /// [`romano_wolf`]. Two-sided, order h0 (2.5), h2 (1.8), h1 (1.0):
    /// step 1: draws with max|t*| ≥ 2.5 are b0, b2 → 2/5; step 2: max over {h2, h1} ≥ 1.8 in
    /// b0, b1 (2.0), b4 (1.9) → 3/5; step 3: |t*_h1| ≥ 1.0 in b0, b1 → 2/5, raised to 3/5 by
    /// monotonicity. One-sided, order h0, h2, h1 (−1.0): step 1 only b0 → 1/5; step 2 b0, b4
    /// → 2/5; step 3 every draw has t*_h1 ≥ −1 → 1.
    #[test]
    fn hand_case_three_hypotheses_five_draws() {
        let observed = [2.5, -1.0, 1.8];
        let draws = vec![
            vec![2.5, -1.0, 1.8],
            vec![0.3, 1.2, -2.0],
            vec![-2.7, 0.1, 0.4],
            vec![1.1, -0.9, 0.5],
            vec![0.2, 0.5, 1.9],
        ];
        let two = romano_wolf(&observed, &draws, true).unwrap();
        assert_eq!(two, vec![0.4, 0.6, 0.6]);
        let one = romano_wolf(&observed, &draws, false).unwrap();
        assert_eq!(one, vec![0.2, 1.0, 0.4]);
        // An enumeration that lists the observed draw last gives the same hand values, and the
        // draw-0 check is what the plain version would refuse it for.
        let mut moved = draws.clone();
        moved.rotate_left(1);
        assert_eq!(
            romano_wolf_enumerated(&observed, &moved, true).unwrap(),
            vec![0.4, 0.6, 0.6]
        );
        assert_eq!(
            romano_wolf_enumerated(&observed, &moved, false).unwrap(),
            vec![0.2, 1.0, 0.4]
        );
        assert!(matches!(
            romano_wolf(&observed, &moved, true),
            Err(StepDownError::FirstDrawNotObserved { .. })
        ));
    }

    #[test]
    fn bad_inputs_are_errors() {
        let ok = vec![vec![1.0, 2.0], vec![0.0, 0.5]];
        assert!(matches!(
            romano_wolf(&[], &ok, true),
            Err(StepDownError::Empty { .. })
        ));
        assert!(matches!(
            romano_wolf(&[1.0, 2.0], &[], true),
            Err(StepDownError::Empty { .. })
        ));
        assert_eq!(
            romano_wolf(&[1.0, 2.0], &[vec![1.0, 2.0], vec![0.0]], true),
            Err(StepDownError::DrawLength {
                draw: 1,
                expected: 2,
                got: 1
            })
        );
        assert_eq!(
            romano_wolf(&[1.0, 2.0], &[vec![1.0, 2.0], vec![0.0, f64::NAN]], true),
            Err(StepDownError::NotFinite)
        );
        assert_eq!(
            romano_wolf(&[1.0, 2.5], &ok, true),
            Err(StepDownError::FirstDrawNotObserved { hypothesis: 1 })
        );
    }

    /// Tied observed statistics get equal adjusted p-values whatever their input order, and
    /// adjusted p-values are never below the single-hypothesis randomization p-values.
    #[test]
    fn ties_and_lower_bound() {
        let observed = [1.5, 0.7, 1.5];
        let draws = vec![
            vec![1.5, 0.7, 1.5],
            vec![1.6, 0.1, 0.2],
            vec![0.1, 0.9, 1.4],
            vec![-0.3, -1.0, 0.3],
        ];
        let p = romano_wolf(&observed, &draws, true).unwrap();
        assert_eq!(p[0], p[2]);
        for h in 0..3 {
            let single = draws
                .iter()
                .filter(|d| d[h].abs() >= observed[h].abs())
                .count() as f64
                / 4.0;
            assert!(p[h] >= single, "{h} {p:?}");
        }
    }

    /// Against the direct numpy step-down in `tests/reference/summaries.py` on seeded
    /// correlated draws (fixture `summary_romano_wolf.json`), two- and one-sided: identical
    /// counts, so equality to 1e-15.
    #[test]
    fn agrees_with_numpy() {
        let doc = crate::testing::fixture("summary_romano_wolf.json");
        let vec_of = |v: &serde_json::Value| -> Vec<f64> {
            v.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect()
        };
        let cases = doc["cases"].as_array().unwrap();
        assert!(!cases.is_empty());
        for case in cases {
            let observed = vec_of(&case["observed"]);
            let draws: Vec<Vec<f64>> = case["draws"]
                .as_array()
                .unwrap()
                .iter()
                .map(vec_of)
                .collect();
            for (key, two_sided) in [("two_sided", true), ("one_sided", false)] {
                let expected = vec_of(&case[key]);
                let got = romano_wolf(&observed, &draws, two_sided).unwrap();
                for (g, e) in got.iter().zip(&expected) {
                    assert!((g - e).abs() <= 1e-15, "{key}: {got:?} vs {expected:?}");
                }
            }
        }
    }
}
