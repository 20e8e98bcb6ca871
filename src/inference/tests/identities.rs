//! Consistency identities between the distributions, closed forms for special degrees of
//! freedom, and round trips between tails and quantiles.

use super::{assert_rel, chi2, f, t, LIBRARY, TAIL};
use crate::distribution::Reference;
use crate::inference::{log10_upper_tail, lower_tail, p_value, quantile, upper_tail, Direction};
use std::f64::consts::{LN_10, PI};

/// t² with d df is F(1, d), since t = Z / √(χ²_d / d) (the definition of the two laws; A&S
/// 26.7 and 26.6, from memory): tails and quantiles agree, the quantiles found by two
/// different searches.
#[test]
fn squared_t_is_f_with_one_numerator_df() {
    for d in [1.0, 3.0, 12.5, 200.0, 5000.0] {
        for tt in [0.1, 1.0, 2.5, 8.0, 40.0] {
            let two_sided = p_value(tt, &t(d), Direction::TwoSided);
            assert_rel(
                upper_tail(&f(1.0, d), tt * tt),
                two_sided,
                LIBRARY,
                &format!("t={tt}, d={d}"),
            );
        }
        for alpha in [0.1, 0.05, 1e-6] {
            // The F search targets the upper tail 1 - (1 - α) that the rounded 1 - α names.
            let asked = 1.0 - (1.0 - alpha);
            let qt = quantile(&t(d), asked / 2.0);
            assert_rel(
                quantile(&f(1.0, d), 1.0 - alpha),
                qt * qt,
                1e-12,
                &format!("alpha={alpha}, d={d}"),
            );
        }
    }
}

/// χ²_k / k is the limit of F(k, d) as d → ∞, because χ²_d / d → 1 (a standard limit,
/// A&S §26.6 — from memory). F with a finite
/// but huge d runs through the incomplete beta function and χ² through the incomplete
/// gamma function, so agreement to O(1/d) checks one route against the other.
#[test]
fn f_tends_to_scaled_chi_square() {
    for k in [1.0, 4.0, 30.0] {
        for x in [0.2, 1.0, 2.5, 6.0] {
            let limit = upper_tail(&chi2(k), k * x);
            assert_rel(
                upper_tail(&f(k, f64::INFINITY), x),
                limit,
                LIBRARY,
                &format!("F({k}, inf) at {x}"),
            );
            // The gap is O(1/d): about 6e-9 relative at k = 30, x = 6, d = 1e12 (mpmath).
            assert_rel(
                upper_tail(&f(k, 1e12), x),
                limit,
                1e-8,
                &format!("F({k}, 1e12) at {x}"),
            );
            let reciprocal = lower_tail(&chi2(k), k * x);
            assert_rel(
                upper_tail(&f(f64::INFINITY, k), 1.0 / x),
                reciprocal,
                LIBRARY,
                &format!("F(inf, {k})"),
            );
            assert_rel(
                upper_tail(&f(1e12, k), 1.0 / x),
                reciprocal,
                1e-8,
                &format!("F(1e12, {k})"),
            );
        }
    }
}

/// Student's t tends to the normal as df → ∞: beta route against the normal's own routes.
#[test]
fn t_tends_to_normal() {
    for x in [0.3, 1.5, 4.0, 9.0, 25.0] {
        let z = log10_upper_tail(&Reference::Normal, x);
        assert_rel(
            log10_upper_tail(&t(1e12), x),
            z,
            1e-9,
            &format!("t(1e12) at {x}"),
        );
    }
}

/// Closed forms: t with 1 df is the Cauchy law, P(T ≥ t) = atan(1/t)/π for t > 0; with 2
/// df, P(T ≥ t) = 1/((√(2+t²) + t) √(2+t²)) (the closed forms of A&S §26.7 for ν = 1, 2,
/// rearranged to avoid cancellation — from memory); χ² with 2 df is exponential with mean
/// 2, P(X ≥ x) = e^(-x/2) (its density e^(-x/2)/2 integrated; A&S §26.4).
#[test]
fn closed_forms_for_small_df() {
    for tt in [1e-8, 0.3, 1.0, 7.0, 1e4, 1e150] {
        assert_rel(
            upper_tail(&t(1.0), tt),
            (1.0 / tt).atan() / PI,
            LIBRARY,
            &format!("Cauchy at {tt}"),
        );
    }
    for tt in [1e-6_f64, 0.5, 3.0, 1e3, 1e100] {
        let s = (2.0 + tt * tt).sqrt();
        assert_rel(
            upper_tail(&t(2.0), tt),
            1.0 / ((s + tt) * s),
            LIBRARY,
            &format!("t2 at {tt}"),
        );
    }
    for x in [1e-9, 0.7, 10.0, 300.0, 1400.0] {
        assert_rel(
            upper_tail(&chi2(2.0), x),
            (-x / 2.0).exp(),
            LIBRARY,
            &format!("chi2_2 at {x}"),
        );
    }
    assert_rel(
        log10_upper_tail(&chi2(2.0), 1e6),
        -5e5 / LN_10,
        LIBRARY,
        "log10 chi2_2 at 1e6",
    );
}

/// Each tail is computed on its own; in the body they still add to one.
#[test]
fn upper_and_lower_tails_add_to_one() {
    let refs = [
        Reference::Normal,
        t(2.0),
        t(17.0),
        t(3000.0),
        f(3.0, 20.0),
        f(40.0, 60.0),
        chi2(1.0),
        chi2(9.0),
        chi2(500.0),
    ];
    for r in refs {
        for x in [-2.0, -0.5, 0.01, 0.4, 1.0, 1.7, 3.0, 8.0, 480.0, 520.0] {
            let sum = upper_tail(&r, x) + lower_tail(&r, x);
            assert!(
                (sum - 1.0).abs() < 4e-15,
                "{r:?} at {x}: upper + lower = {sum}"
            );
        }
    }
}

/// quantile inverts the tails, down to probabilities far below 1e-300.
#[test]
fn quantile_round_trips() {
    let refs = [
        Reference::Normal,
        t(1.0),
        t(6.0),
        t(250.0),
        f(2.0, 9.0),
        f(30.0, 45.0),
        chi2(0.5),
        chi2(3.0),
        chi2(800.0),
    ];
    for r in refs {
        for p in [1e-300, 1e-40, 1e-6, 0.01, 0.3, 0.5] {
            let lower = quantile(&r, p);
            if lower < f64::MIN_POSITIVE
                && !matches!(r, Reference::Normal | Reference::StudentT { .. })
            {
                // The exact quantile lies below the normal f64 range (chi-square with 0.5 df
                // at 1e-300 sits near 1e-1200): the search must then stop at the bottom.
                assert!(
                    lower_tail(&r, f64::MIN_POSITIVE) >= p,
                    "{r:?}: quantile({p}) = {lower}"
                );
                continue;
            }
            assert_rel(
                lower_tail(&r, lower),
                p,
                1e-12,
                &format!("{r:?}: lower tail at quantile({p})"),
            );
            if p > 1e-15 {
                // 1 - (1 - p) is the tail the rounded 1 - p asks for (exact by Sterbenz).
                let asked = 1.0 - (1.0 - p);
                let upper = quantile(&r, 1.0 - p);
                assert_rel(
                    upper_tail(&r, upper),
                    asked,
                    1e-12,
                    &format!("{r:?}: upper tail at quantile(1-{p})"),
                );
            }
        }
    }
    // Symmetry of the t quantile (1 - p rounds, so equality is to rounding).
    for p in [0.025, 0.2, 0.4] {
        assert_rel(
            quantile(&t(7.0), 1.0 - p),
            -quantile(&t(7.0), p),
            1e-14,
            "t symmetry",
        );
    }
}

/// The ends of the support and invalid probabilities.
#[test]
fn quantile_edges() {
    assert_eq!(quantile(&Reference::Normal, 0.0), f64::NEG_INFINITY);
    assert_eq!(quantile(&t(3.0), 1.0), f64::INFINITY);
    assert_eq!(quantile(&chi2(3.0), 0.0), 0.0);
    assert_eq!(quantile(&f(2.0, 5.0), 1.0), f64::INFINITY);
    assert_eq!(quantile(&t(3.0), 0.5), 0.0);
    for p in [-0.1, 1.5, f64::NAN] {
        assert!(quantile(&Reference::Normal, p).is_nan(), "p = {p}");
    }
    assert!(quantile(&chi2(-2.0), 0.5).is_nan());
    // Far tail: P(Z ≤ x) = 1e-300 at x = -37.0470962993612 (scipy 1.17.1, stats.norm.ppf(1e-300)).
    assert_rel(
        quantile(&Reference::Normal, 1e-300),
        -37.047_096_299_361_2,
        TAIL,
        "z at 1e-300",
    );
}
