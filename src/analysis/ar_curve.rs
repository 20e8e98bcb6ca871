//! The Anderson–Rubin statistic on a grid of coefficient values (results.json's
//! `anderson_rubin.curve`), so the HTML report can draw it without recomputing a statistic.

use crate::estimate::ArProblem;
use crate::results::{ArCurve, SetPiece, Term, AR_CURVE_POINTS};

/// The grid: [`AR_CURVE_POINTS`] equally spaced values over the span of the set's finite
/// endpoints, the estimate and its Wald interval, widened by a fifth of the span each side
/// (by 1, or a tenth of the largest magnitude, when the span is zero).
pub fn grid(set: &[SetPiece], wald: Option<&Term>) -> Vec<f64> {
    let mut points: Vec<f64> = set
        .iter()
        .flat_map(|p| [p.lower, p.upper])
        .flatten()
        .chain(
            wald.into_iter()
                .flat_map(|t| [t.estimate, t.ci[0], t.ci[1]]),
        )
        .filter(|v| v.is_finite())
        .collect();
    if points.is_empty() {
        points.push(0.0);
    }
    let lo = points.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = points.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let span = hi - lo;
    let pad = if span > 0.0 {
        0.2 * span
    } else {
        (0.1 * lo.abs()).max(1.0)
    };
    let (a, b) = (lo - pad, hi + pad);
    let last = (AR_CURVE_POINTS - 1) as f64;
    (0..AR_CURVE_POINTS)
        .map(|i| a + (b - a) * i as f64 / last)
        .collect()
}

/// AR on the grid for the set `set` and Wald term `wald`; null when it cannot be computed
/// (the test at a single null then failed too, or the grid is not finite).
pub fn curve(ar: &ArProblem, set: &[SetPiece], wald: Option<&Term>) -> Option<ArCurve> {
    let coefficient = grid(set, wald);
    let statistic = ar.curve(&coefficient).ok()?;
    Some(ArCurve {
        coefficient,
        statistic,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The grid covers the bounded set, the estimate and its interval, with 101 points.
    #[test]
    fn grid_covers_the_set_and_the_estimate() {
        let set = [SetPiece {
            lower: Some(-1.0),
            upper: Some(3.0),
        }];
        let t = Term {
            estimate: 1.0,
            std_error: 1.0,
            statistic: 1.0,
            p_value: 0.3,
            ci: [-0.5, 4.0],
        };
        let g = grid(&set, Some(&t));
        assert_eq!(g.len(), AR_CURVE_POINTS);
        // span [-1, 4] widened by 1 on each side.
        assert_eq!(g[0], -2.0);
        assert_eq!(g[AR_CURVE_POINTS - 1], 5.0);
        assert!(g.windows(2).all(|w| w[0] < w[1]));
        // Rays: only the finite ends count.
        let rays = [
            SetPiece {
                lower: None,
                upper: Some(-2.0),
            },
            SetPiece {
                lower: Some(6.0),
                upper: None,
            },
        ];
        let g = grid(&rays, Some(&t));
        assert!(g[0] < -2.0 && g[AR_CURVE_POINTS - 1] > 6.0);
    }
}
