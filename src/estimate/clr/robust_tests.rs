//! Tests of the robust Kleibergen K and CLR tests and their sets.
//!
//! Sources, beside each test: the homoskedastic statistics of the parent module (themselves
//! checked against ivmodels, `tests.rs`), which the robust forms must reproduce exactly when
//! given the classical covariance.

use super::set_tests::{assert_set, cases};
use crate::estimate::{Absorbed, CovSpec, IvProblem};

/// Source: `IvProblem::lm_clr` and `lm_clr_sets` (checked against ivmodels 0.10.0 and a
/// brute-force scan in `tests.rs`, `set_tests.rs`). With the classical covariance blocks the
/// robust formulas are algebraically the homoskedastic Q_S, Q_T, LM and CLR (module
/// documentation), so they must agree to rounding: statistics and p-values to 1e-9
/// relative, set endpoints to 1e-8 relative.
#[test]
fn classical_blocks_give_the_homoskedastic_tests() {
    for c in cases() {
        let problem = IvProblem::new(&c.y, &c.exog, &c.endog, &c.z).expect("problem");
        let robust = problem
            .lm_clr_robust(&CovSpec::Classical, &Absorbed::NONE)
            .expect("robust");
        for beta in [-3.0, -0.4, 0.0, 0.7, 1.3, 25.0] {
            let want = problem.lm_clr(&Absorbed::NONE, beta).expect("lm_clr");
            let got = robust.test(beta).expect("test");
            for (what, g, w) in [
                ("lm", got.lm.statistic, want.lm.statistic),
                ("clr", got.clr.statistic, want.clr.statistic),
                ("rk", got.clr.conditioning, want.clr.conditioning),
                ("p", got.clr.p_value, want.clr.p_value),
            ] {
                let rel = (g - w).abs() / w.abs().max(1e-12);
                assert!(rel < 1e-9, "{} {what} at {beta}: {g} vs {w}", c.name);
            }
        }
        let want = problem.lm_clr_sets(&Absorbed::NONE, 0.95).expect("sets");
        let got = robust.sets(0.95).expect("sets");
        assert_set(&format!("{} lm", c.name), &got.lm, &want.lm.pieces, 1e-8);
        assert_set(&format!("{} clr", c.name), &got.clr, &want.clr.pieces, 1e-8);
    }
}
