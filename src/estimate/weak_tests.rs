//! Tests of the weak-instrument diagnostics.
//!
//! Sources: the fixtures `tests/reference/fixtures/weak_diag_*` and `weak_ncx2_grid`
//! written by `tests/reference/weak_iv.py` (effective F, K_eff and critical value evaluated
//! there with numpy/statsmodels and scipy.stats.ncx2; Cragg–Donald from the eigenvalue
//! formula, asserted there equal to linearmodels' first-stage F); a critical value quoted in
//! the literature (from memory); this crate's `first_stages` (classical F); and the
//! Frisch–Waugh–Lovell identity for absorbed fixed effects.

use nalgebra::{DMatrix, DVector};

use super::{
    effective_f_critical_value, noncentral_chi_square_quantile, noncentral_chi_square_upper_tail,
    stock_yogo, stock_yogo_critical_value, stock_yogo_rows, weak_instruments, StockYogoTable,
    WeakInstruments, DEFAULT_TAU,
};
use crate::estimate::kclass::tests::{demean, dummies};
use crate::estimate::reference_tests::{load, Fixture, Tracker, TOL};
use crate::estimate::{first_stages, Absorbed, CovSpec, EstimateError};

/// Covariance kinds of the first stage (OLS, so HC2/HC3 too).
const KINDS: [&str; 7] = ["classical", "hc0", "hc1", "hc2", "hc3", "cluster", "twoway"];

struct Data {
    exog: DMatrix<f64>,
    endog: DVector<f64>,
    instruments: DMatrix<f64>,
}

fn data(fx: &Fixture) -> Data {
    Data {
        exog: fx.matrix(&fx.setup["exog"]),
        endog: fx.vector(&fx.setup["endog"][0]),
        instruments: fx.matrix(&fx.setup["instruments"]),
    }
}

fn diagnose(d: &Data, spec: &CovSpec, tau: f64) -> Result<WeakInstruments, EstimateError> {
    weak_instruments(
        &d.exog,
        &d.endog,
        &d.instruments,
        spec,
        tau,
        &Absorbed::NONE,
    )
}

/// Every covariance kind and τ of one fixture against the numpy/scipy evaluation.
fn check_fixture(case: &str) {
    let fx = load(case);
    let d = data(&fx);
    let ex = &fx.expected;
    assert_eq!(fx.n as u64, ex["n"].as_u64().expect("n"));
    let mut t = Tracker::default();
    for kind in KINDS {
        for tau in fx.setup["taus"].as_array().expect("taus") {
            let tau = tau.as_f64().expect("tau");
            let e = &ex["by_kind"][kind][format!("{tau}")];
            let got = diagnose(&d, &fx.spec(kind), tau).expect("diagnostics");
            t.scalar(
                &format!("effective_f {kind}"),
                got.effective_f,
                &e["effective_f"],
            );
            t.scalar(
                &format!("effective_df {kind}"),
                got.effective_df,
                &e["effective_df"],
            );
            t.scalar(
                &format!("critical_value {kind}"),
                got.critical_value,
                &e["critical_value"],
            );
            t.scalar("cragg_donald", got.cragg_donald, &ex["cragg_donald"]);
            assert_eq!(Some(got.weak), e["weak"].as_bool(), "{case} {kind} {tau}");
            assert_eq!(got.tau, tau);
        }
    }
    t.finish(case);
}

/// numpy/scipy, strong first stage, three instruments (not weak under any kind).
#[test]
fn effective_f_strong_three_instruments() {
    check_fixture("weak_diag_strong3");
}

/// numpy/scipy, weak first stage, three instruments (weak under every kind).
#[test]
fn effective_f_weak_three_instruments() {
    check_fixture("weak_diag_weak3");
}

/// numpy/scipy, strong first stage, one instrument (K_eff = 1).
#[test]
fn effective_f_strong_one_instrument() {
    check_fixture("weak_diag_strong1");
}

/// numpy/scipy, weak first stage, one instrument.
#[test]
fn effective_f_weak_one_instrument() {
    check_fixture("weak_diag_weak1");
}

/// With the classical covariance the effective F is the classical first-stage F and equals
/// Cragg–Donald (Montiel Olea and Pflueger 2013; one endogenous regressor), and K_eff = q;
/// checked against this crate's `first_stages` (itself checked against linearmodels).
#[test]
fn classical_effective_f_is_first_stage_f() {
    for case in ["weak_diag_strong3", "weak_diag_weak1"] {
        let fx = load(case);
        let d = data(&fx);
        let got = diagnose(&d, &CovSpec::Classical, DEFAULT_TAU).expect("diagnostics");
        let endog = DMatrix::from_column_slice(d.endog.len(), 1, d.endog.as_slice());
        let stage = &first_stages(
            &d.exog,
            &endog,
            &d.instruments,
            true,
            &CovSpec::Classical,
            &Absorbed::NONE,
        )
        .expect("first stage")[0];
        let f = stage.f.statistic;
        assert!((got.effective_f / f - 1.0).abs() < 1e-12, "{case}");
        assert!((got.cragg_donald / f - 1.0).abs() < 1e-12, "{case}");
        let q = d.instruments.ncols() as f64;
        assert!((got.effective_df / q - 1.0).abs() < 1e-12, "{case}");
    }
}

/// Noncentral chi-square quantiles and upper tails against scipy.stats.ncx2 on a grid of
/// df (1 to 40, non-integer included), non-centrality (0 to 600) and p (0.05 to 0.999).
#[test]
fn noncentral_chi_square_against_scipy() {
    let fx = load("weak_ncx2_grid");
    let mut t = Tracker::default();
    for row in fx.expected["rows"].as_array().expect("rows") {
        let get = |k: &str| row[k].as_f64().expect("number");
        let (df, nc, p, qv) = (get("df"), get("nc"), get("p"), get("quantile"));
        t.scalar(
            "quantile",
            noncentral_chi_square_quantile(p, df, nc),
            &row["quantile"],
        );
        t.scalar(
            "upper tail",
            noncentral_chi_square_upper_tail(qv, df, nc),
            &row["upper_tail"],
        );
    }
    t.finish("weak_ncx2_grid");
}

/// The just-identified critical value for τ = 10% at 5%: 23.109 (from memory: Montiel Olea
/// and Pflueger 2013, and quoted as 23.1 by Andrews, Stock and Sun 2019, Annual Review of
/// Economics 11). K_eff = 1 whatever the covariance when q = 1.
#[test]
fn just_identified_critical_value_from_literature() {
    let c = effective_f_critical_value(1.0, 0.10);
    assert!((c - 23.109).abs() < 5e-4, "{c}");
    let fx = load("weak_diag_weak1");
    let got = diagnose(&data(&fx), &CovSpec::Hc1, DEFAULT_TAU).expect("diagnostics");
    assert_eq!(got.effective_df, 1.0);
    assert!((got.critical_value - c).abs() <= 1e-12 * c);
}

/// Table lookups: the included cells (from memory, Stock and Yogo 2005 Tables 5.1, 5.2
/// and 5.4) and `None` outside them; each estimator gets only its own tables.
#[test]
fn stock_yogo_cells() {
    // Table 5.2, q = 1, 10% maximal size: 16.38 (from memory).
    assert_eq!(stock_yogo_critical_value("wald-size", 0.10, 1), Some(16.38));
    // Table 5.1, q = 3, 10% relative bias: 9.08 (from memory).
    assert_eq!(
        stock_yogo_critical_value("relative-bias", 0.10, 3),
        Some(9.08)
    );
    assert_eq!(
        stock_yogo_critical_value("relative-bias", 0.30, 10),
        Some(4.86)
    );
    assert_eq!(stock_yogo_critical_value("relative-bias", 0.10, 2), None);
    assert_eq!(stock_yogo_critical_value("relative-bias", 0.10, 11), None);
    assert_eq!(stock_yogo_critical_value("wald-size", 0.10, 6), None);
    assert_eq!(stock_yogo_critical_value("wald-size", 0.05, 1), None);
    assert_eq!(stock_yogo_critical_value("other", 0.10, 3), None);
    assert_eq!(stock_yogo_critical_value("wald-size", 0.10, 0), None);
    // Table 5.4, q = 3, 15% maximal size: 4.36; q = 10, 25%: 2.25 (from memory).
    assert_eq!(
        stock_yogo_critical_value("liml-wald-size", 0.15, 3),
        Some(4.36)
    );
    assert_eq!(
        stock_yogo_critical_value("liml-wald-size", 0.25, 10),
        Some(2.25)
    );
    assert_eq!(stock_yogo_critical_value("liml-wald-size", 0.10, 11), None);
    assert_eq!(stock_yogo_critical_value("liml-wald-size", 0.05, 2), None);
    // With one instrument LIML is 2SLS: Table 5.4's first row is Table 5.2's.
    for level in [0.10, 0.15, 0.20, 0.25] {
        assert_eq!(
            stock_yogo_critical_value("liml-wald-size", level, 1),
            stock_yogo_critical_value("wald-size", level, 1)
        );
    }
    // 2SLS, q = 3: four relative-bias and four size cells; q = 1: size only; q = 12: none.
    let tsls = |q| stock_yogo(StockYogoTable::Tsls, q);
    assert_eq!(tsls(3).len(), 8);
    assert!(tsls(1).iter().all(|s| s.criterion == "wald-size"));
    assert!(tsls(12).is_empty());
    // LIML: its own four size cells for q = 1..=10, never a 2SLS cell.
    for q in 1..=10 {
        let liml = stock_yogo(StockYogoTable::Liml, q);
        assert_eq!(liml.len(), 4, "{q}");
        assert!(liml.iter().all(|s| s.criterion == "liml-wald-size"), "{q}");
    }
    assert!(stock_yogo(StockYogoTable::Liml, 11).is_empty());
    assert_eq!(stock_yogo_rows("relative-bias"), Some(3..=10));
    assert_eq!(stock_yogo_rows("wald-size"), Some(1..=5));
    assert_eq!(stock_yogo_rows("liml-wald-size"), Some(1..=10));
    assert_eq!(stock_yogo_rows("fuller-bias"), None);
}

/// Frisch–Waugh–Lovell: fixed effects of g2 as dummies in exog, or swept out with
/// `Absorbed { df: G }`, give the same effective F, K_eff, critical value and Cragg–Donald
/// (classical, HC1, CR1 on the non-nested g1).
#[test]
fn absorbed_fixed_effects_match_dummies() {
    let fx = load("weak_diag_strong3");
    let d = data(&fx);
    let g2: Vec<usize> = fx.columns["g2"].iter().map(|&v| v as usize).collect();
    let w1 = d.exog.columns(1, 1).into_owned();
    let with_dummies = crate::estimate::linear::hcat(&w1, &dummies(&g2));
    let absorbed = Absorbed {
        df: with_dummies.ncols() - 1,
        nested_df: 0,
        leverage: None,
    };
    let endog_m = DMatrix::from_column_slice(fx.n, 1, d.endog.as_slice());
    let endog_w = DVector::from_column_slice(demean(&endog_m, &g2).as_slice());
    let (w1_w, instr_w) = (demean(&w1, &g2), demean(&d.instruments, &g2));
    let mut worst: f64 = 0.0;
    for kind in ["classical", "hc1", "cluster"] {
        let spec = fx.spec(kind);
        let full = weak_instruments(
            &with_dummies,
            &d.endog,
            &d.instruments,
            &spec,
            DEFAULT_TAU,
            &Absorbed::NONE,
        )
        .expect("dummies");
        let within = weak_instruments(&w1_w, &endog_w, &instr_w, &spec, DEFAULT_TAU, &absorbed)
            .expect("within");
        for (a, b) in [
            (full.effective_f, within.effective_f),
            (full.effective_df, within.effective_df),
            (full.critical_value, within.critical_value),
            (full.cragg_donald, within.cragg_donald),
        ] {
            worst = worst.max((a / b - 1.0).abs());
        }
    }
    println!("dummies versus absorbed: largest relative difference {worst:.2e}");
    assert!(worst < TOL, "{worst}");
}

/// τ must be finite and positive.
#[test]
fn invalid_tau() {
    let fx = load("weak_diag_strong1");
    let d = data(&fx);
    for tau in [0.0, -0.1, f64::NAN, f64::INFINITY, 1e-320] {
        assert_eq!(
            diagnose(&d, &CovSpec::Classical, tau),
            Err(EstimateError::NotFinite),
            "{tau}"
        );
    }
}

/// Largest gap allowed between the nominal maximal size r of a Stock–Yogo LIML cell and the
/// worst-case size (over the endogeneity correlation) of the LIML Wald test that the
/// simulation of `tests/reference/stock_yogo_kclass.py` finds at the concentration parameter
/// the remembered critical value implies: one percentage point, a fifth of the 5-point
/// spacing of the table's levels. The simulation's own error is about 0.0004 (one binomial
/// standard error at 10⁶ draws); Stock and Yogo's numerical error is visible in the
/// one-instrument row, where the fixture gives the size in closed form: up to 0.0037 from
/// nominal for values remembered with confidence (they are also Table 5.2's).
const LIML_SIZE_TOLERANCE: f64 = 0.01;

/// Largest relative gap allowed between a remembered LIML critical value and the one the
/// simulation solves for. Where the worst-case size is flat in the critical value (the 10%
/// column) a small error of size is a large error of critical value: the closed-form
/// one-instrument size puts the exact 15% value at 8.70 against the published 8.96 (3.0%).
const LIML_VALUE_TOLERANCE: f64 = 0.05;

/// Stock and Yogo (2005) Table 5.4 (LIML Wald size, typed from memory): every carried cell
/// against the seeded simulation of the weak-instrument limit (fixture
/// `weak_stock_yogo_kclass`, numpy/scipy), and the simulator against the closed form at
/// one instrument.
#[test]
fn liml_wald_size_values_pass_the_simulation_check() {
    let fx = load("weak_stock_yogo_kclass");
    let ex = &fx.expected;
    let draws = ex["draws"].as_f64().expect("draws");
    for row in ex["simulator_one_instrument"].as_array().expect("rows") {
        let get = |k: &str| row[k].as_f64().expect("number");
        let (sim, exact, level) = (get("simulated"), get("exact"), get("level"));
        let se = (exact * (1.0 - exact) / draws).sqrt();
        assert!((sim - exact).abs() < 4.0 * se, "{row}");
        // With one instrument the closed form checks the value itself.
        assert_eq!(
            stock_yogo_critical_value("liml-wald-size", level, 1),
            Some(get("critical_value"))
        );
        assert!((exact - level).abs() <= LIML_SIZE_TOLERANCE, "{row}");
        let value_gap = get("exact_critical_value") / get("critical_value") - 1.0;
        assert!(value_gap.abs() <= LIML_VALUE_TOLERANCE, "{row}");
    }
    let (mut checked, mut worst_size, mut worst_value) = (0, 0.0_f64, 0.0_f64);
    let (mut slips, mut slips_caught) = (0, 0);
    for (q, cells) in ex["liml_wald_size"].as_object().expect("rows") {
        let q: usize = q.parse().expect("q");
        for cell in cells.as_array().expect("cells") {
            let get = |k: &str| cell[k].as_f64().expect("number");
            let (level, remembered) = (get("level"), get("remembered"));
            // The script checked the values this crate ships ...
            assert_eq!(
                stock_yogo_critical_value("liml-wald-size", level, q),
                Some(remembered),
                "q = {q}, level {level}"
            );
            // ... and its concentration parameter maps back to them through this crate's
            // non-central chi-square quantile.
            let back =
                noncentral_chi_square_quantile(0.95, q as f64, get("implied_mu2")) / q as f64;
            assert!(
                (back / remembered - 1.0).abs() < 1e-9,
                "{back} {remembered}"
            );
            let size_gap = (get("size_at_remembered") - level).abs();
            let value_gap = (get("simulated") / remembered - 1.0).abs();
            assert!(
                size_gap <= LIML_SIZE_TOLERANCE,
                "q = {q}, level {level}: {cell}"
            );
            assert!(
                value_gap <= LIML_VALUE_TOLERANCE,
                "q = {q}, level {level}: {cell}"
            );
            worst_size = worst_size.max(size_gap);
            worst_value = worst_value.max(value_gap);
            checked += 1;
            // The check can fail: a slip to the neighbouring row's value (same level) is
            // caught wherever the size is not flat, always in the 20% and 25% columns.
            for (_, size) in cell["size_at_neighbouring_rows"].as_object().expect("rows") {
                let caught = (size.as_f64().expect("size") - level).abs() > LIML_SIZE_TOLERANCE;
                assert!(caught || level < 0.2, "q = {q}, level {level}: {cell}");
                slips += 1;
                slips_caught += usize::from(caught);
            }
        }
    }
    assert_eq!(checked, 40, "every carried LIML cell is checked");
    println!(
        "LIML Stock–Yogo: largest size gap {worst_size:.4}, largest value gap {worst_value:.4}, \
         neighbouring-row slips caught {slips_caught} of {slips}"
    );
}

/// Why Fuller specifications get no Stock–Yogo values: the Fuller relative-bias values we
/// remember (Stock and Yogo 2005, Table 5.3, Fuller constant 1; kept only in the reference
/// script and fixture) are not confirmed by the same kind of simulation: every simulated
/// value lies below the remembered one, by up to 6%, more than [`LIML_VALUE_TOLERANCE`].
/// No criterion carried here is a Fuller one.
#[test]
fn fuller_values_are_unconfirmed_and_not_carried() {
    let fx = load("weak_stock_yogo_kclass");
    let rows = fx.expected["fuller_relative_bias_unconfirmed"]
        .as_object()
        .expect("rows");
    let gaps: Vec<f64> = rows
        .values()
        .flat_map(|cells| cells.as_array().expect("cells").iter())
        .map(|cell| cell["relative_difference"].as_f64().expect("number"))
        .collect();
    assert_eq!(gaps.len(), 20);
    assert!(gaps.iter().all(|&g| g < 0.0), "{gaps:?}");
    let worst = gaps.iter().fold(0.0_f64, |m, g| m.max(g.abs()));
    assert!(worst > LIML_VALUE_TOLERANCE, "{worst}");
    for table in [StockYogoTable::Tsls, StockYogoTable::Liml] {
        assert!(table.criteria().iter().all(|c| !c.contains("fuller")));
    }
}
