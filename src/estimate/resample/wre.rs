//! The wild restricted efficient (WRE) cluster bootstrap of the coefficient of one endogenous
//! regressor in 2SLS (Davidson and MacKinnon 2010, JBES 28, "Wild bootstrap tests for IV
//! regression"), with Rademacher or Webb (2014) cluster weights.
//!
//! # Algorithm
//! Model y = x β + W γ + u, x = Z π_Z + W π_W + v (x one endogenous column, W the exogenous
//! columns, Z the excluded instruments). Null H₀: β = null.
//! 1. Restricted structural fit: OLS of y − null·x on W gives γ̃ and residuals ũ.
//! 2. Efficient reduced form: OLS of x on [Z, W, ũ] gives coefficients (π̂_Z, π̂_W, δ̂); the
//!    reduced-form residuals are v̈ = x − Z π̂_Z − W π̂_W, i.e. the residuals of that
//!    regression plus δ̂·ũ (Davidson and MacKinnon 2010, section 4: including ũ makes π̂
//!    efficient under the null, and v̈ keeps the part of x correlated with ũ).
//! 3. Draw with cluster weights w_g (w_i = w_{g(i)}): x* = Z π̂_Z + W π̂_W + v̈ ⊙ w,
//!    y* = null·x* + W γ̃ + ũ ⊙ w; refit 2SLS of y* on [x* | W] with instruments [Z | W]
//!    and the CR1 variance, t* = (β̂* − null)/se_CR1(β̂*).
//!
//! The observed statistic is the usual 2SLS CR1 t statistic of β = null; the all-ones draw
//! rebuilds x* = x and y* = y and so reproduces it (to rounding). Each draw is a full 2SLS
//! (the factorisation of the instruments is shared), O(n·L²) per draw.
//!
//! # Enumeration and random draws
//! Exactly as `wild`: Rademacher weights have 2^G distinct vectors and Webb weights 6^G;
//! when that count is at most `exact_below` all of them are used (vector number i has the
//! base-2 or base-6 digits of i, cluster 0 the least significant, clusters numbered in order
//! of first appearance, digit d ↦ the d-th support point 1, −1[, √½, −√½, √1.5, −√1.5]),
//! otherwise the all-ones vector and `draws` random ones (one uniform integer per cluster
//! from the draw's [`Stream`]). p-values as in the documentation of `resample`.
//!
//! With absorbed fixed effects (all columns swept by the caller) `absorbed` enters the CR1
//! factor of every fit; as for `wild`, the bootstrap data are not re-swept, which is exact
//! when the fixed effects are nested in the bootstrap clusters.

use nalgebra::{DMatrix, DVector};

use super::super::covariance::{densify, CovSpec};
use super::super::linear::{hcat, iv_setup, tsls, tsls_from, IvColumns, IvSetup};
use super::super::qr::PivotedQr;
use super::super::refine::residual;
use super::super::{Absorbed, EstimateError};
use super::wild::weight_draws;
use super::Weights;
use super::{summarise, DrawStats, Draws, ResampleError, ResampleResult};

/// Least-squares coefficients and residuals of `y` on `x` (`x` may have no columns).
fn fit(x: &DMatrix<f64>, y: &DVector<f64>) -> Result<(DVector<f64>, DVector<f64>), EstimateError> {
    if x.ncols() == 0 {
        return Ok((DVector::zeros(0), y.clone()));
    }
    let coef = PivotedQr::new(x)?.solve(x, y);
    let resid = residual(x, y, &coef);
    Ok((coef, resid))
}

/// Wild restricted efficient cluster bootstrap test of β = `null`, β the coefficient of the
/// single endogenous column `endog` in the 2SLS of `y` on `[endog | exog]` with instruments
/// `[instruments | exog]`, clustered by `clusters`.
///
/// # Formula
/// See the module documentation (Davidson and MacKinnon 2010): restricted fit ũ, efficient
/// reduced form π̂ and v̈ = x − Zπ̂_Z − Wπ̂_W, bootstrap data x* = Zπ̂_Z + Wπ̂_W + v̈ ⊙ w and
/// y* = null·x* + Wγ̃ + ũ ⊙ w, t* = (β̂*_2SLS − null)/se_CR1(β̂*); p = share of draws with
/// |t*| ≥ |t| (the observed all-ones draw included), as in the documentation of `resample`.
/// A draw whose 2SLS fails (x* uncorrelated with the instruments) or whose standard error
/// is zero is skipped.
///
/// # Errors
/// [`EstimateError::DimensionMismatch`] with `what = "endog (columns)"` when `endog` does not
/// have exactly one column; the errors of [`tsls`](super::super::tsls) with clustered errors
/// (finiteness, dimensions, identification, ranks, cluster ids, G ≥ 2); a non-finite `null`
/// ([`EstimateError::NotFinite`]); [`EstimateError::RankDeficient`] when the restricted
/// residuals ũ lie in the span of [Z, W] (the efficient reduced form is then undefined);
/// [`ResampleError::ObservedNotFinite`]; [`ResampleError::NoDraws`].
pub fn wild_restricted_efficient(
    data: IvColumns,
    null: f64,
    clusters: &[usize],
    weights: Weights,
    plan: &Draws,
    absorbed: &Absorbed,
) -> Result<ResampleResult, ResampleError> {
    let (observed, stats, exact) = wre_statistics(data, null, clusters, weights, plan, absorbed)?;
    Ok(summarise(observed, &stats, exact))
}

/// [`wild_restricted_efficient`] before summarising: the observed t, every draw's t* in
/// draw order, and whether the weight vectors were enumerated.
pub(crate) fn wre_statistics(
    data: IvColumns,
    null: f64,
    clusters: &[usize],
    weights: Weights,
    plan: &Draws,
    absorbed: &Absorbed,
) -> Result<DrawStats, ResampleError> {
    let IvColumns {
        y,
        exog,
        endog,
        instruments,
    } = data;
    if endog.ncols() != 1 {
        return Err(EstimateError::DimensionMismatch {
            what: "endog (columns)",
            expected: 1,
            got: endog.ncols(),
        }
        .into());
    }
    if !null.is_finite() {
        return Err(EstimateError::NotFinite.into());
    }
    let spec = CovSpec::Cluster {
        ids: clusters.to_vec(),
    };
    // Validates everything (finiteness, rows, ranks, clusters) before any bootstrap work.
    let observed_fit = tsls(y, exog, endog, instruments, false, &spec, absorbed)?;
    let observed = (observed_fit.coef[0] - null) / observed_fit.cov[(0, 0)].sqrt();
    if !observed.is_finite() {
        return Err(ResampleError::ObservedNotFinite);
    }
    let setup = iv_setup(y, exog, endog, instruments)?;
    let (ids, g) = densify(clusters);
    let x = endog.column(0).into_owned();

    // 1. Restricted structural fit: y − null·x on W.
    let (_, u_tilde) = fit(exog, &(y - &x * null))?;
    let w_gamma = y - &x * null - &u_tilde;
    // 2. Efficient reduced form: x on [Z, W, ũ]; keep the Z and W part.
    let zw: &DMatrix<f64> = &setup.z;
    let mut zwu = zw.clone().insert_column(zw.ncols(), 0.0);
    zwu.set_column(zw.ncols(), &u_tilde);
    let (coef, _) = fit(&zwu, &x)?;
    let x_fit = zw * coef.rows(0, zw.ncols());
    let v_ddot = &x - &x_fit;

    let stat = |wv: &DVector<f64>| -> Option<f64> {
        let mut xs = x_fit.clone();
        let mut ys = w_gamma.clone();
        for (i, &c) in ids.iter().enumerate() {
            xs[i] += v_ddot[i] * wv[c];
            ys[i] += u_tilde[i] * wv[c];
        }
        ys.axpy(null, &xs, 1.0);
        let draw_setup = IvSetup {
            x: std::sync::Arc::new(hcat(
                &DMatrix::from_column_slice(xs.len(), 1, xs.as_slice()),
                exog,
            )),
            z: setup.z.clone(),
            zqr: setup.zqr.clone(),
        };
        let f = tsls_from(&ys, &draw_setup, 1, false, &spec, absorbed).ok()?;
        let s = (f.coef[0] - null) / f.cov[(0, 0)].sqrt();
        s.is_finite().then_some(s)
    };
    let (stats, exact) = weight_draws(g, weights, plan, observed, stat)?;
    Ok((observed, stats, exact))
}

#[cfg(test)]
mod tests {
    //! Checks against the brute-force fixture written by `tests/reference/wre.py` (numpy:
    //! every weight vector's bootstrap data rebuilt and refitted by explicit 2SLS with the
    //! textbook CR1 sandwich; see that script's docstring). Counts are compared exactly, the
    //! sorted statistics to 1e-10 relative.

    use super::super::reference_tests::{fixture, ids, matrix, vector};
    use super::*;

    /// The inputs of one fixture case: y, exog, endog, instruments, null, clusters, weights.
    type Inputs = (
        DVector<f64>,
        DMatrix<f64>,
        DMatrix<f64>,
        DMatrix<f64>,
        f64,
        Vec<usize>,
        Weights,
    );

    fn case_inputs(case: &serde_json::Value) -> Inputs {
        let y = vector(&case["y"]);
        let endog = vector(&case["endog"]);
        let endog = DMatrix::from_column_slice(endog.len(), 1, endog.as_slice());
        let weights = match case["weights"].as_str().unwrap() {
            "rademacher" => Weights::Rademacher,
            "webb" => Weights::Webb,
            other => panic!("unknown weights {other}"),
        };
        (
            y,
            matrix(&case["exog"]),
            endog,
            matrix(&case["instruments"]),
            case["null"].as_f64().unwrap(),
            ids(&case["clusters"]),
            weights,
        )
    }

    const ENUMERATE: Draws = Draws {
        draws: 0,
        seed: 1,
        exact_below: 100_000,
    };

    // Source: tests/reference/wre.py (numpy brute force, Davidson and MacKinnon 2010).
    #[test]
    fn wre_matches_brute_force() {
        let mut worst = 0.0f64;
        let cases = fixture("resample_wre.json");
        assert_eq!(cases.len(), 3);
        for case in cases {
            let (y, exog, endog, z, null, cl, weights) = case_inputs(&case);
            let r = wild_restricted_efficient(
                crate::estimate::IvColumns::new(&y, &exog, &endog, &z),
                null,
                &cl,
                weights,
                &ENUMERATE,
                &Absorbed::NONE,
            )
            .unwrap();
            let name = case["name"].as_str().unwrap();
            assert!(r.exact, "{name}");
            assert_eq!(r.skipped, 0, "{name}");
            let obs = case["observed"].as_f64().unwrap();
            let d = (r.observed - obs).abs() / obs.abs();
            assert!(d < 1e-10, "{name}: observed {} vs {obs}", r.observed);
            worst = worst.max(d);
            let mut got: Vec<f64> = r.statistics.iter().map(|s| s.unwrap()).collect();
            got.sort_by(|a, b| a.total_cmp(b));
            let want = vector(&case["stats_sorted"]);
            assert_eq!(got.len(), want.len(), "{name}");
            for (a, b) in got.iter().zip(want.iter()) {
                let d = (a - b).abs() / b.abs().max(1.0);
                assert!(d < 1e-10, "{name}: {a} vs {b}");
                worst = worst.max(d);
            }
            let draws = case["draws"].as_u64().unwrap() as f64;
            let share = |key: &str| case[key].as_u64().unwrap() as f64 / draws;
            assert_eq!(r.draws_used as f64, draws, "{name}");
            assert_eq!(r.p_value, share("count_two"), "{name}");
            assert_eq!(r.p_upper, share("count_upper"), "{name}");
            assert_eq!(r.p_lower, share("count_lower"), "{name}");
        }
        eprintln!("wre: largest relative difference {worst:e}");
    }

    // The all-ones vector (enumeration index 0) rebuilds x* = x, y* = y (module docs).
    #[test]
    fn all_ones_draw_reproduces_observed_t() {
        for case in fixture("resample_wre.json") {
            let (y, exog, endog, z, null, cl, weights) = case_inputs(&case);
            let (observed, stats, exact) = wre_statistics(
                crate::estimate::IvColumns::new(&y, &exog, &endog, &z),
                null,
                &cl,
                weights,
                &ENUMERATE,
                &Absorbed::NONE,
            )
            .unwrap();
            assert!(exact);
            let first = stats[0].unwrap();
            assert!(
                (first - observed).abs() < 1e-12 * observed.abs(),
                "{first} vs {observed}"
            );
        }
    }

    fn random_run(threads: usize, seed: u64, draws: usize) -> ResampleResult {
        let case = &fixture("resample_wre.json")[0];
        let (y, exog, endog, z, null, cl, weights) = case_inputs(case);
        let plan = Draws {
            draws,
            seed,
            exact_below: 0,
        };
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| {
                wild_restricted_efficient(
                    crate::estimate::IvColumns::new(&y, &exog, &endog, &z),
                    null,
                    &cl,
                    weights,
                    &plan,
                    &Absorbed::NONE,
                )
                .unwrap()
            })
    }

    #[test]
    fn random_draws_are_deterministic_across_threads() {
        let one = random_run(1, 42, 499);
        let two = random_run(2, 42, 499);
        let again = random_run(2, 42, 499);
        assert!(!one.exact);
        assert_eq!(one.draws_used, 500);
        assert_eq!(one.statistics[0], Some(one.observed));
        let bits = |r: &ResampleResult| -> Vec<u64> {
            r.statistics.iter().map(|s| s.unwrap().to_bits()).collect()
        };
        assert_eq!(bits(&one), bits(&two));
        assert_eq!(bits(&two), bits(&again));
        assert_eq!(one, two);
        let other = random_run(2, 43, 499);
        assert_ne!(bits(&one), bits(&other));
    }

    // Random draws sample the same 256 vectors the enumeration lists, so the random p-value
    // estimates the exact one (fixture count_two / 256); 4000 draws give a Monte Carlo
    // standard error below 0.008, and the tolerance is 0.04 (five standard errors).
    #[test]
    fn random_p_value_estimates_exact_one() {
        let case = &fixture("resample_wre.json")[0];
        let exact = case["count_two"].as_u64().unwrap() as f64 / 256.0;
        let r = random_run(2, 7, 4000);
        assert!((r.p_value - exact).abs() < 0.04, "{} vs {exact}", r.p_value);
    }

    #[test]
    fn input_errors() {
        let case = &fixture("resample_wre.json")[0];
        let (y, exog, endog, z, null, cl, weights) = case_inputs(case);
        let run = |endog: &DMatrix<f64>, null: f64, plan: &Draws, cl: &[usize]| {
            wild_restricted_efficient(
                crate::estimate::IvColumns::new(&y, &exog, endog, &z),
                null,
                cl,
                weights,
                plan,
                &Absorbed::NONE,
            )
        };
        let two = hcat(&endog, &endog);
        assert!(matches!(
            run(&two, null, &ENUMERATE, &cl),
            Err(ResampleError::Estimate(EstimateError::DimensionMismatch {
                expected: 1,
                got: 2,
                ..
            }))
        ));
        assert!(matches!(
            run(&endog, f64::NAN, &ENUMERATE, &cl),
            Err(ResampleError::Estimate(EstimateError::NotFinite))
        ));
        let none = Draws {
            draws: 0,
            seed: 1,
            exact_below: 10,
        };
        assert!(matches!(
            run(&endog, null, &none, &cl),
            Err(ResampleError::NoDraws { count: Some(256) })
        ));
        let short = &cl[1..];
        assert!(matches!(
            run(&endog, null, &ENUMERATE, short),
            Err(ResampleError::Estimate(EstimateError::ClusterLength { .. }))
        ));
        let mut bad = y.clone();
        bad[0] = f64::INFINITY;
        assert!(wild_restricted_efficient(
            crate::estimate::IvColumns::new(&bad, &exog, &endog, &z),
            null,
            &cl,
            weights,
            &ENUMERATE,
            &Absorbed::NONE
        )
        .is_err());
    }
}
