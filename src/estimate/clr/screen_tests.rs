//! Tests of the screened CLR set scan: the approximation stays far inside the margin the
//! screen assumes, and the screened scan returns the exact scan's boundaries bit for bit.
//!
//! Sources: the exact conditional p-value ([`super::clr_p_value`], itself checked against
//! ivmodels in `tests.rs`) and the exact scan (`anderson_rubin::scan_boundaries` on the exact
//! p-value, as before the screen); the χ² tails against the incomplete-gamma tail
//! (`inference::p_value`, checked against scipy in the inference tests). Invented designs from
//! `set_tests::design`.

use nalgebra::DMatrix;
use std::cell::Cell;

use super::screen::{clr_p_value_screen, scan, SCREEN_MARGIN};
use super::set::{direction, scan_exact, Forms};
use super::set_tests::design;
use super::{clr_p_value, CLR_GRID};
use crate::distribution::Reference;
use crate::estimate::anderson_rubin::theta_grid;
use crate::estimate::{Absorbed, CovSpec, IvProblem};
use crate::inference::{p_value, Direction};

/// The approximate p-value is within 1e-10 of the exact one (the screen assumes 1e-8) over
/// statistics from 1e-3 to 300, conditioning values from 1e-4 to 1e7 and 1 to 64
/// instruments; the closed-form χ² tails within 1e-13 relative of the incomplete gamma's.
#[test]
fn screen_p_value_is_close_to_the_exact_one() {
    let mut worst = 0.0f64;
    for l in [1usize, 2, 3, 4, 5, 7, 10, 21, 64] {
        for i in 0..24 {
            let m = 1e-3 * 10f64.powf(5.5 * i as f64 / 23.0);
            for k in 0..24 {
                let q = 1e-4 * 10f64.powf(11.0 * k as f64 / 23.0);
                let exact = clr_p_value(m, q, l);
                let approx = clr_p_value_screen(m, q, l).expect("usable input");
                let gap = (exact - approx).abs();
                assert!(gap < 1e-10, "m {m} q {q} l {l}: {exact} vs {approx}");
                worst = worst.max(gap);
            }
        }
    }
    println!("largest |approximate - exact| CLR p-value: {worst:.1e}");
    for l in [1usize, 2, 3, 6, 9, 40] {
        for x in [1e-6, 0.3, 1.0, 4.0, 17.0, 60.0, 250.0] {
            let want = p_value(
                x,
                &Reference::ChiSquare { df: l as f64 },
                Direction::TwoSided,
            );
            let got = super::screen::chi2_upper_integer(x, l);
            let rel = (got - want).abs() / want.max(1e-300);
            assert!(rel < 1e-13, "x {x} l {l}: {got} vs {want}");
        }
    }
    for (m, q, l) in [(0.0, 1.0, 3), (1.0, -1.0, 3), (1.0, 1.0, 0), (1.0, 1.0, 65)] {
        assert!(clr_p_value_screen(m, q, l).is_none());
    }
    for (m, q, l) in [(3.0, 0.0, 3), (3.0, 7.0, 1)] {
        let (exact, approx) = (clr_p_value(m, q, l), clr_p_value_screen(m, q, l));
        assert!(
            (exact - approx.expect("closed form")).abs() < 1e-14,
            "{m} {q} {l}"
        );
    }
    assert!(clr_p_value_screen(f64::NAN, 1.0, 3).is_none());
}

/// Runs the screened and the exact scan of `phi` and asserts the same bits; returns the
/// screened scan's exact evaluations.
fn same_scan(what: &str, phi: &dyn Fn(f64) -> f64, approx: &dyn Fn(f64) -> Option<f64>) -> usize {
    let count = Cell::new(0usize);
    let counted = |t: f64| {
        count.set(count.get() + 1);
        phi(t)
    };
    let (got, got_inf) = scan(&counted, approx, &theta_grid(CLR_GRID));
    let (want, want_inf) = scan_exact(phi);
    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    assert_eq!(bits(&got), bits(&want), "{what}: {got:?} vs {want:?}");
    assert_eq!(got_inf, want_inf, "{what}");
    count.get()
}

/// On 36 invented designs (2 to 4 instruments, weak to strong, homoskedastic and HC1 and
/// clustered tests, levels 0.9 and 0.99) the screened scan gives the exact scan's boundary
/// points bit for bit, with far fewer exact p-values than the grid's 1,025 nodes.
#[test]
fn screened_scan_equals_the_exact_scan() {
    let (mut exact_calls, mut scans) = (0usize, 0usize);
    for seed in 0..12u64 {
        let l = 2 + (seed % 3) as usize;
        let pi = [0.03, 0.1, 0.3, 1.0][(seed / 3) as usize % 4];
        let (y, x, z) = design(500 + seed, 80 + 20 * seed as usize, l, pi);
        let w = DMatrix::from_element(y.len(), 1, 1.0);
        let problem = IvProblem::new(&y, &w, &x, &z).expect("problem");
        let alpha = if seed % 2 == 0 { 0.1 } else { 0.01 };
        let forms = Forms::new(&problem, &Absorbed::NONE).expect("forms");
        let phi = |t: f64| alpha - forms.clr_at(direction(t)).1;
        let approx = |t: f64| {
            let (clr, qt) = forms.clr_stat(direction(t))?;
            clr_p_value_screen(clr, qt, l).map(|p| alpha - p)
        };
        exact_calls += same_scan(&format!("seed {seed} homoskedastic"), &phi, &approx);
        scans += 1;
        let clusters = CovSpec::Cluster {
            ids: (0..y.len()).map(|i| i / 5).collect(),
        };
        for (name, cov) in [("hc1", CovSpec::Hc1), ("cluster", clusters)] {
            let robust = problem
                .lm_clr_robust(&cov, &Absorbed::NONE)
                .expect("robust");
            let (phi, approx) = robust.clr_phi(alpha);
            exact_calls += same_scan(&format!("seed {seed} {name}"), &phi, &approx);
            scans += 1;
        }
    }
    let per_scan = exact_calls as f64 / scans as f64;
    println!("exact p-values per screened scan: {per_scan:.0} (margin {SCREEN_MARGIN:e})");
}
