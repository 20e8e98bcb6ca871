//! Multiple-testing corrections against a worked example from the literature and against
//! statsmodels 0.15.0 (`statsmodels.stats.multitest.multipletests`, produced by
//! tests/reference/multitest.py; the one-line call is given beside each family).

use crate::inference::{adjust, Correction};

/// Adjusted p-values agree with the reference to rounding (statsmodels prints 17 digits).
fn assert_adjusted(actual: &[f64], expected: &[f64], what: &str) {
    assert_eq!(actual.len(), expected.len(), "{what}: length");
    for (i, (a, e)) in actual.iter().zip(expected).enumerate() {
        assert!(
            (a - e).abs() <= 1e-15 * e.max(1e-300) + 1e-17,
            "{what}[{i}]: got {a}, expected {e}"
        );
    }
}

/// Number of hypotheses rejected at level `alpha`.
fn rejections(adjusted: &[f64], alpha: f64) -> usize {
    adjusted.iter().filter(|&&p| p <= alpha).count()
}

/// The 15 p-values of Benjamini and Hochberg (1995, JRSS B 57, section 4 — quoted from
/// memory). The paper reports that at 0.05 the Bonferroni procedure rejects 3 and the FDR
/// procedure rejects 4 (from memory); Holm's step-down also rejects 3 (checked by hand:
/// 0.0095 > 0.05/12).
const BH1995: [f64; 15] = [
    0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240, 0.4262, 0.5719,
    0.6528, 0.7590, 1.000,
];

#[test]
fn benjamini_hochberg_1995_example_rejection_counts() {
    assert_eq!(
        rejections(&adjust(&BH1995, Correction::Bonferroni), 0.05),
        3
    );
    assert_eq!(rejections(&adjust(&BH1995, Correction::Holm), 0.05), 3);
    assert_eq!(
        rejections(&adjust(&BH1995, Correction::BenjaminiHochberg), 0.05),
        4
    );
    assert_eq!(rejections(&adjust(&BH1995, Correction::None), 0.05), 9);
}

/// multipletests(BH1995, alpha=0.05, method=...)[1] for "bonferroni", "holm", "fdr_bh".
#[test]
fn benjamini_hochberg_1995_example_matches_statsmodels() {
    let bonferroni = [
        0.0015, 0.006, 0.0285, 0.1425, 0.3015, 0.417, 0.447, 0.516, 0.6885, 1.0, 1.0, 1.0, 1.0,
        1.0, 1.0,
    ];
    let holm = [
        0.0015,
        0.0056,
        0.0247,
        0.11399999999999999,
        0.2211,
        0.27799999999999997,
        0.27799999999999997,
        0.27799999999999997,
        0.32130000000000003,
        1.0,
        1.0,
        1.0,
        1.0,
        1.0,
        1.0,
    ];
    let bh = [
        0.0015,
        0.003,
        0.0095,
        0.035625,
        0.0603,
        0.06385714285714286,
        0.06385714285714286,
        0.0645,
        0.07650000000000001,
        0.48600000000000004,
        0.5811818181818182,
        0.7148749999999999,
        0.7532307692307693,
        0.8132142857142857,
        1.0,
    ];
    assert_adjusted(
        &adjust(&BH1995, Correction::Bonferroni),
        &bonferroni,
        "bonferroni",
    );
    assert_adjusted(&adjust(&BH1995, Correction::Holm), &holm, "holm");
    assert_adjusted(
        &adjust(&BH1995, Correction::BenjaminiHochberg),
        &bh,
        "fdr_bh",
    );
}

/// Invented family, unsorted with ties: multipletests(TIES, alpha=0.05, method=...)[1].
#[test]
fn unsorted_family_with_ties_matches_statsmodels() {
    const TIES: [f64; 7] = [0.04, 0.01, 0.04, 0.2, 0.01, 0.5, 0.03];
    let bonferroni = [0.28, 0.07, 0.28, 1.0, 0.07, 1.0, 0.21];
    let holm = [0.16, 0.07, 0.16, 0.4, 0.07, 0.5, 0.15];
    let bh = [0.056, 0.035, 0.056, 0.23333333333333336, 0.035, 0.5, 0.056];
    assert_adjusted(
        &adjust(&TIES, Correction::Bonferroni),
        &bonferroni,
        "bonferroni",
    );
    assert_adjusted(&adjust(&TIES, Correction::Holm), &holm, "holm");
    assert_adjusted(&adjust(&TIES, Correction::BenjaminiHochberg), &bh, "fdr_bh");
}

/// The adjustment does not depend on the order of the input (tied values included).
#[test]
fn adjustment_is_permutation_equivariant() {
    let family = [0.03, 0.2, 0.03, 0.001, 0.7, 0.03];
    let order = [4, 2, 0, 5, 1, 3];
    let permuted: Vec<f64> = order.iter().map(|&i| family[i]).collect();
    for c in [
        Correction::Bonferroni,
        Correction::Holm,
        Correction::BenjaminiHochberg,
    ] {
        let direct = adjust(&family, c);
        let via = adjust(&permuted, c);
        for (k, &i) in order.iter().enumerate() {
            assert_eq!(via[k], direct[i], "{c:?} at {i}");
        }
    }
}

/// Common practice: empty families, single hypotheses and untestable (NaN) members.
#[test]
fn edge_cases() {
    for c in [
        Correction::None,
        Correction::Bonferroni,
        Correction::Holm,
        Correction::BenjaminiHochberg,
    ] {
        assert!(adjust(&[], c).is_empty());
        assert_eq!(adjust(&[0.02], c), vec![0.02]);
    }
    // A NaN stays NaN and counts as one of m = 3 hypotheses, entering as p = 1.
    let with_nan = [0.01, f64::NAN, 0.02];
    let holm = adjust(&with_nan, Correction::Holm);
    assert!(holm[1].is_nan());
    assert_eq!([holm[0], holm[2]], [0.03, 0.04]);
    let bh = adjust(&with_nan, Correction::BenjaminiHochberg);
    assert!(bh[1].is_nan());
    assert_eq!([bh[0], bh[2]], [0.03, 0.03]);
    assert!(adjust(&with_nan, Correction::Bonferroni)[1].is_nan());
}
