//! Critical values and probabilities against published statistical tables, compared at the
//! precision the tables print.

use super::{assert_printed, chi2, f, t};
use crate::distribution::Reference;
use crate::inference::{lower_tail, quantile, upper_tail};

/// Upper critical values of Student's t, P(T > t) = α.
///
/// Source: NIST/SEMATECH e-Handbook of Statistical Methods, §1.3.6.7.2 ("Upper critical
/// values of the Student's t distribution"), 3 decimals. Typed from memory and compared
/// with a reproduction of that table; the ∞ row is the normal.
#[test]
fn student_t_critical_values_match_nist_table() {
    // (df, [α = 0.05, 0.025, 0.005])
    let rows: [(f64, [f64; 3]); 7] = [
        (1.0, [6.314, 12.706, 63.657]),
        (2.0, [2.920, 4.303, 9.925]),
        (5.0, [2.015, 2.571, 4.032]),
        (10.0, [1.812, 2.228, 3.169]),
        (30.0, [1.697, 2.042, 2.750]),
        (100.0, [1.660, 1.984, 2.626]),
        (f64::INFINITY, [1.645, 1.960, 2.576]),
    ];
    for (df, values) in rows {
        for (alpha, printed) in [0.05, 0.025, 0.005].into_iter().zip(values) {
            let q = quantile(&t(df), 1.0 - alpha);
            assert_printed(q, printed, 3, &format!("t quantile 1-{alpha}, df {df}"));
        }
    }
}

/// ν = 120 is not in the NIST table. Source: Abramowitz and Stegun (1964), Table 26.10
/// (percentage points of the t-distribution), 3 decimals — from memory.
#[test]
fn student_t_120_df_matches_abramowitz_stegun_table() {
    assert_printed(quantile(&t(120.0), 0.975), 1.980, 3, "t 0.975, 120 df");
    assert_printed(quantile(&t(120.0), 0.995), 2.617, 3, "t 0.995, 120 df");
    assert_printed(quantile(&t(120.0), 0.95), 1.658, 3, "t 0.95, 120 df");
}

/// Upper critical values of F, P(F > f) = α.
///
/// Source: NIST/SEMATECH e-Handbook, §1.3.6.7.3 ("Upper critical values of the F
/// distribution"), 3 decimals — from memory.
#[test]
fn f_critical_values_match_nist_table() {
    // (α, df1, df2, printed)
    let cells = [
        (0.05, 3.0, 20.0, 3.098),
        (0.05, 1.0, 1.0, 161.448),
        (0.05, 2.0, 2.0, 19.000),
        (0.05, 4.0, 10.0, 3.478),
        (0.05, 10.0, 10.0, 2.978),
        (0.05, 5.0, 100.0, 2.305),
        (0.05, 1.0, 100.0, 3.936),
        (0.01, 2.0, 10.0, 7.559),
        (0.01, 1.0, 1.0, 4052.181),
        (0.01, 5.0, 20.0, 4.103),
        (0.01, 10.0, 100.0, 2.503),
        (0.10, 2.0, 10.0, 2.924),
    ];
    for (alpha, df1, df2, printed) in cells {
        let q = quantile(&f(df1, df2), 1.0 - alpha);
        assert_printed(
            q,
            printed,
            3,
            &format!("F quantile 1-{alpha} ({df1}, {df2})"),
        );
    }
}

/// Upper critical values of chi-square, P(X > x) = α.
///
/// Source: NIST/SEMATECH e-Handbook, §1.3.6.7.4 ("Critical values of the chi-square
/// distribution"), 3 decimals — from memory.
#[test]
fn chi_square_critical_values_match_nist_table() {
    // (df, [α = 0.10, 0.05, 0.025, 0.01, 0.001])
    let rows: [(f64, [f64; 5]); 5] = [
        (1.0, [2.706, 3.841, 5.024, 6.635, 10.828]),
        (2.0, [4.605, 5.991, 7.378, 9.210, 13.816]),
        (10.0, [15.987, 18.307, 20.483, 23.209, 29.588]),
        (30.0, [40.256, 43.773, 46.979, 50.892, 59.703]),
        (100.0, [118.498, 124.342, 129.561, 135.807, 149.449]),
    ];
    for (df, values) in rows {
        for (alpha, printed) in [0.10, 0.05, 0.025, 0.01, 0.001].into_iter().zip(values) {
            let q = quantile(&chi2(df), 1.0 - alpha);
            assert_printed(
                q,
                printed,
                3,
                &format!("chi-square quantile 1-{alpha}, df {df}"),
            );
        }
    }
}

/// Standard normal percentage points and tail.
///
/// Sources: Abramowitz and Stegun (1964), Table 26.5 (percentage points of the normal,
/// z_0.975 = 1.959964, z_0.995 = 2.575829, 6 decimals) and Table 26.2 (Q(6) = 9.866e-10
/// at 4 significant digits) — both from memory. NIST/SEMATECH e-Handbook §1.3.6.7.1
/// (area from 0 to z, 5 decimals) — from memory.
#[test]
fn normal_matches_published_tables() {
    let z = Reference::Normal;
    assert_printed(quantile(&z, 0.975), 1.959964, 6, "z 0.975");
    assert_printed(quantile(&z, 0.995), 2.575829, 6, "z 0.995");
    assert_printed(
        upper_tail(&z, 6.0) * 1e13,
        9866.0,
        0,
        "Q(6) in units of 1e-13",
    );
    for (x, area) in [
        (1.0, 0.34134),
        (1.96, 0.47500),
        (2.5, 0.49379),
        (3.0, 0.49865),
    ] {
        assert_printed(lower_tail(&z, x) - 0.5, area, 5, &format!("area 0..{x}"));
    }
}
