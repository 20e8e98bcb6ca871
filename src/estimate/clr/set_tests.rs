//! Tests of the LM and CLR confidence sets.
//!
//! Sources: `tests/reference/fixtures/clr_sets.json`, written by `tests/reference/clr_lm.py`:
//! a brute-force scan (20 000 cells in θ over the whole line, the limit at ±∞ evaluated
//! explicitly, every crossing bisected in β to 1e-14 relative) of the LM statistic and of the
//! CLR conditional p-value (ivmodels' `conditional_likelihood_ratio_critical_value_function`,
//! "moreira2003conditional"), and ivmodels' `inverse_lagrange_multiplier_test` and
//! `inverse_conditional_likelihood_ratio_test` (versions in the fixture). Endpoints are
//! checked against the scan to 1e-8 relative; ivmodels' sets are checked to 1e-6 relative
//! where the fixture records that they agree with the scan (its inverse LM misses pieces
//! other than the one around LIML, see the fixture's note). The homogeneous forms are checked
//! against `IvProblem::lm_clr` (itself checked against ivmodels) to 1e-9 relative.

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

use super::set::Forms;
use super::tests::{column, matrix};
use crate::estimate::{Absorbed, ConfidenceSet, IvProblem, SetShape};

pub(super) struct Case {
    pub(super) name: String,
    pub(super) y: DVector<f64>,
    pub(super) exog: DMatrix<f64>,
    pub(super) endog: DMatrix<f64>,
    pub(super) z: DMatrix<f64>,
    pub(super) expected: Value,
}

pub(super) fn cases() -> Vec<Case> {
    let doc = crate::testing::fixture("clr_sets.json");
    let cases = doc["cases"].as_array().expect("cases");
    assert_eq!(cases.len(), 5);
    cases
        .iter()
        .map(|case| {
            let (data, setup) = (&case["data"], &case["setup"]);
            let y = column(data, setup["outcome"].as_str().expect("outcome"), 0);
            let n = y.len();
            Case {
                name: case["name"].as_str().expect("name").to_string(),
                exog: matrix(data, &setup["exog"], n),
                endog: matrix(data, &setup["endog"], n),
                z: matrix(data, &setup["instruments"], n),
                y,
                expected: case["expected"].clone(),
            }
        })
        .collect()
}

fn endpoint(v: &Value) -> f64 {
    match v.as_str() {
        Some("inf") => f64::INFINITY,
        Some("-inf") => f64::NEG_INFINITY,
        _ => v.as_f64().expect("endpoint"),
    }
}

pub(super) fn pieces(v: &Value) -> Vec<(f64, f64)> {
    v.as_array()
        .expect("pieces")
        .iter()
        .map(|p| (endpoint(&p[0]), endpoint(&p[1])))
        .collect()
}

pub(super) fn assert_set(what: &str, got: &ConfidenceSet, want: &[(f64, f64)], tol: f64) {
    assert_eq!(got.pieces.len(), want.len(), "{what}: {got:?} vs {want:?}");
    let mut worst = 0.0f64;
    for (&(g0, g1), &(w0, w1)) in got.pieces.iter().zip(want) {
        for (g, w) in [(g0, w0), (g1, w1)] {
            if w.is_infinite() || g.is_infinite() {
                assert_eq!(g, w, "{what}: {got:?} vs {want:?}");
            } else {
                let rel = (g - w).abs() / w.abs().max(1.0);
                worst = worst.max(rel);
                assert!(rel < tol, "{what}: {g} vs {w} ({rel:.1e})");
            }
        }
    }
    println!("{what}: largest relative endpoint difference {worst:.1e}");
}

#[test]
fn sets_match_the_scan_and_ivmodels() {
    for c in cases() {
        let problem = IvProblem::new(&c.y, &c.exog, &c.endog, &c.z).expect("problem");
        let sets = problem.lm_clr_sets(&Absorbed::NONE, 0.95).expect("sets");
        let ex = &c.expected;
        assert_set(
            &format!("{} lm scan", c.name),
            &sets.lm,
            &pieces(&ex["lm_scan"]),
            1e-8,
        );
        assert_set(
            &format!("{} clr scan", c.name),
            &sets.clr,
            &pieces(&ex["clr_scan"]),
            1e-8,
        );
        for (key, set) in [("lm", &sets.lm), ("clr", &sets.clr)] {
            if ex[format!("{key}_ivmodels_agrees")]
                .as_bool()
                .expect("flag")
            {
                let want = pieces(&ex[format!("{key}_ivmodels")]);
                assert_set(&format!("{} {key} ivmodels", c.name), set, &want, 1e-6);
            }
        }
    }
}

#[test]
fn shapes_cover_bounded_union_and_unbounded() {
    let shapes: Vec<(SetShape, SetShape)> = cases()
        .iter()
        .map(|c| {
            let problem = IvProblem::new(&c.y, &c.exog, &c.endog, &c.z).expect("problem");
            let sets = problem.lm_clr_sets(&Absorbed::NONE, 0.95).expect("sets");
            (sets.lm.shape(), sets.clr.shape())
        })
        .collect();
    assert!(shapes.contains(&(SetShape::Other, SetShape::Bounded)));
    assert!(shapes.contains(&(SetShape::Other, SetShape::WholeLine)));
    assert!(shapes.contains(&(SetShape::WholeLine, SetShape::WholeLine)));
}

#[test]
fn forms_equal_the_direct_statistics() {
    for c in cases() {
        let problem = IvProblem::new(&c.y, &c.exog, &c.endog, &c.z).expect("problem");
        let forms = Forms::new(&problem, &Absorbed::NONE).expect("forms");
        for beta in [-3.0, -0.4, 0.0, 0.7, 1.3, 25.0] {
            let direct = problem.lm_clr(&Absorbed::NONE, beta).expect("lm_clr");
            let t = forms.theta(beta);
            let b = [t.cos(), -t.sin()];
            let (qs, qt, qst2) = forms.statistics(b).expect("statistics");
            let (clr, p) = forms.clr_at(b);
            let rel = |g: f64, w: f64| (g - w).abs() / w.abs().max(1e-12);
            assert!(
                rel(qst2 / qt, direct.lm.statistic) < 1e-9,
                "{} lm {beta}",
                c.name
            );
            assert!(
                rel(qt, direct.clr.conditioning) < 1e-9,
                "{} qt {beta}",
                c.name
            );
            assert!(
                rel(clr, direct.clr.statistic) < 1e-9,
                "{} clr {beta}",
                c.name
            );
            assert!(
                (p - direct.clr.p_value).abs() < 1e-10,
                "{} p {beta}",
                c.name
            );
            assert!(qs >= 0.0);
        }
        // The limit at infinity equals the scan's value there.
        let (qs, qt, qst2) = forms.statistics([0.0, 1.0]).expect("limit");
        let want = c.expected["lm_at_infinity"]
            .as_f64()
            .expect("lm_at_infinity");
        assert!((qst2 / qt - want).abs() / want < 1e-8, "{} lm at ∞", c.name);
        let p_inf = forms.clr_at([0.0, 1.0]).1;
        let want = c.expected["clr_p_at_infinity"]
            .as_f64()
            .expect("clr_p_at_infinity");
        assert!(
            (p_inf - want).abs() < 1e-8,
            "{} clr p at ∞: {p_inf} vs {want}",
            c.name
        );
        assert!(qs >= 0.0);
    }
}

/// A small invented IV design (splitmix64 normals): `l` instruments of strength `pi`.
pub(super) fn design(
    seed: u64,
    n: usize,
    l: usize,
    pi: f64,
) -> (DVector<f64>, DMatrix<f64>, DMatrix<f64>) {
    let mut state = seed;
    let mut uniform = move || {
        state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut normal = move || {
        let (a, b) = (uniform().max(1e-300), uniform());
        (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
    };
    let z = DMatrix::from_fn(n, l, |_, _| normal());
    let mut x = DMatrix::zeros(n, 1);
    let mut y = DVector::zeros(n);
    for i in 0..n {
        let u = normal();
        x[(i, 0)] = pi * z.row(i).sum() + 0.8 * u + 0.6 * normal();
        y[i] = 0.5 * x[(i, 0)] + u;
    }
    (y, x, z)
}

/// Membership of the LM and CLR sets agrees with the direct statistics (`lm_clr`) at 401
/// points on each of 24 invented designs, except within 1e-9 relative of an endpoint.
#[test]
fn membership_agrees_with_the_direct_tests() {
    let c =
        crate::inference::quantile(&crate::distribution::Reference::ChiSquare { df: 1.0 }, 0.95);
    for seed in 0..24u64 {
        let l = 2 + (seed % 3) as usize;
        let pi = [0.02, 0.08, 0.2, 0.5][(seed / 6) as usize % 4];
        let (y, x, z) = design(seed, 60 + 10 * seed as usize, l, pi);
        let w = DMatrix::from_element(y.len(), 1, 1.0);
        let problem = IvProblem::new(&y, &w, &x, &z).expect("problem");
        let sets = problem.lm_clr_sets(&Absorbed::NONE, 0.95).expect("sets");
        let near = |set: &ConfidenceSet, b: f64| {
            set.pieces.iter().any(|&(lo, hi)| {
                [lo, hi]
                    .iter()
                    .any(|e| e.is_finite() && (e - b).abs() <= 1e-9 * e.abs().max(1.0))
            })
        };
        for k in 0..=400 {
            let beta = -20.0 + 40.0 * k as f64 / 400.0;
            let Ok(t) = problem.lm_clr(&Absorbed::NONE, beta) else {
                continue;
            };
            if !near(&sets.lm, beta) {
                let inside = t.lm.statistic <= c;
                assert_eq!(sets.lm.contains(beta), inside, "seed {seed} lm at {beta}");
            }
            if !near(&sets.clr, beta) {
                let inside = t.clr.p_value >= 0.05;
                assert_eq!(sets.clr.contains(beta), inside, "seed {seed} clr at {beta}");
            }
        }
    }
}

/// With one instrument LM = CLR = Q_S (Q_ST² = Q_S Q_T), so the two sets are one set: on
/// 24 invented designs, weak to strong, their pieces agree to 1e-8 relative and membership
/// agrees with the direct LM statistic at 401 points. (Before the one-instrument case used
/// the AR quadratic, rounding near the zero of Q_T cut spurious gaps into the LM set.)
#[test]
fn one_instrument_lm_and_clr_sets_are_one_set() {
    let c =
        crate::inference::quantile(&crate::distribution::Reference::ChiSquare { df: 1.0 }, 0.95);
    for seed in 0..24u64 {
        let pi = [0.0, 0.02, 0.08, 0.2, 0.5, 1.0][(seed % 6) as usize];
        let (y, x, z) = design(100 + seed, 50 + 15 * seed as usize, 1, pi);
        let w = DMatrix::from_element(y.len(), 1, 1.0);
        let problem = IvProblem::new(&y, &w, &x, &z).expect("problem");
        let sets = problem.lm_clr_sets(&Absorbed::NONE, 0.95).expect("sets");
        assert_eq!(
            sets.lm.pieces.len(),
            sets.clr.pieces.len(),
            "seed {seed}: lm {:?} clr {:?}",
            sets.lm.pieces,
            sets.clr.pieces
        );
        for (a, b) in sets.lm.pieces.iter().zip(&sets.clr.pieces) {
            for (u, v) in [(a.0, b.0), (a.1, b.1)] {
                let same = u == v || (u - v).abs() <= 1e-8 * u.abs().max(1.0);
                assert!(same, "seed {seed}: lm {a:?} clr {b:?}");
            }
        }
        for k in 0..=400 {
            let beta = -20.0 + 40.0 * k as f64 / 400.0;
            let Ok(t) = problem.lm_clr(&Absorbed::NONE, beta) else {
                continue;
            };
            let near = sets.lm.pieces.iter().any(|&(lo, hi)| {
                [lo, hi]
                    .iter()
                    .any(|e| e.is_finite() && (e - beta).abs() <= 1e-9 * e.abs().max(1.0))
            });
            if !near {
                assert_eq!(
                    sets.lm.contains(beta),
                    t.lm.statistic <= c,
                    "seed {seed} at {beta}"
                );
            }
        }
    }
}
