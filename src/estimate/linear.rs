//! OLS and 2SLS point estimates and the assembly of a [`LinearFit`].
//!
//! Role: validate inputs, factorise the design (module `qr`), solve, and hand residuals to
//! the covariance estimators (module `covariance`). Invariants: every returned fit has
//! n > k, full-rank regressors, and a covariance from the requested [`CovSpec`].

use std::sync::Arc;

use nalgebra::{DMatrix, DVector};

use super::covariance::{covariance, CovSpec, Covariance, Leverage};
use super::qr::{InputKey, PivotedQr};
use super::refine::residual;
use super::shared::{self, collinear_kept_shared, design_qr, shared_design_qr, shared_qr};
use super::{Absorbed, EstimateError, LinearFit};
use crate::distribution::Reference;

/// A solved least-squares problem: the factorised design and its coefficients.
#[derive(Debug, Clone)]
pub(crate) struct LeastSquares {
    pub(crate) qr: Arc<PivotedQr>,
    /// The factorised design (X for OLS, X̂ for 2SLS).
    pub(crate) design: Arc<DMatrix<f64>>,
    pub(crate) coef: DVector<f64>,
}

impl LeastSquares {
    /// The compensated residuals y − X b on the factorised design. Not kept with the fit:
    /// most callers pass the coefficients to [`assemble`], which forms the residuals of
    /// the regressors it is given (X̂'s residuals are not a 2SLS fit's).
    pub(crate) fn resid(&self, y: &DVector<f64>) -> DVector<f64> {
        residual(&self.design, y, &self.coef)
    }
}

/// Checks that every input is finite and has `y.len()` rows.
pub(crate) fn validate(
    y: &DVector<f64>,
    matrices: &[(&'static str, &DMatrix<f64>)],
) -> Result<(), EstimateError> {
    // Checked in blocks, each block without an exit per entry (so it vectorises).
    let finite = |values: &[f64]| {
        values
            .chunks(512)
            .all(|block| block.iter().fold(true, |ok, v| ok & v.is_finite()))
    };
    if !finite(y.as_slice()) {
        return Err(EstimateError::NotFinite);
    }
    for (what, m) in matrices {
        if m.nrows() != y.len() {
            let (expected, got) = (y.len(), m.nrows());
            return Err(EstimateError::DimensionMismatch {
                what,
                expected,
                got,
            });
        }
        if !finite(m.as_slice()) {
            return Err(EstimateError::NotFinite);
        }
    }
    Ok(())
}

/// Requires more observations than `k`.
pub(crate) fn require_observations(n: usize, k: usize) -> Result<(), EstimateError> {
    if n <= k {
        return Err(EstimateError::TooFewObservations { n, k });
    }
    Ok(())
}

/// Least squares of `y` on `x` (inputs already validated, n > k).
pub(crate) fn least_squares(
    y: &DVector<f64>,
    x: &DMatrix<f64>,
) -> Result<LeastSquares, EstimateError> {
    let (design, qr) = design_qr(x)?;
    Ok(fitted(y, x, design, qr))
}

/// [`least_squares`] on a design the caller shares (kept by the memo without a copy).
pub(crate) fn least_squares_shared(
    y: &DVector<f64>,
    x: &Arc<DMatrix<f64>>,
) -> Result<LeastSquares, EstimateError> {
    let (design, qr) = shared_design_qr(x)?;
    Ok(fitted(y, x, design, qr))
}

/// The refined least-squares fit of `y` on `x` (equal to `design`) with its factorisation.
fn fitted(
    y: &DVector<f64>,
    x: &DMatrix<f64>,
    design: Arc<DMatrix<f64>>,
    qr: Arc<PivotedQr>,
) -> LeastSquares {
    let coef = qr.solve(x, y);
    LeastSquares { qr, design, coef }
}

/// Total sum of squares: about the mean when `centered`, else about zero.
fn total_sum_of_squares(y: &DVector<f64>, centered: bool) -> f64 {
    let mean = if centered { y.mean() } else { 0.0 };
    y.iter().map(|v| (v - mean) * (v - mean)).sum()
}

/// Builds the [`LinearFit`] for coefficients `coef` of regressors `x` with covariance from
/// `ls_qr` (the design whose sandwich is used: X for OLS, X̂ for 2SLS).
pub(crate) fn assemble(
    y: &DVector<f64>,
    x: &DMatrix<f64>,
    ls: &LeastSquares,
    has_intercept: bool,
    spec: &CovSpec,
    leverage: Leverage,
    absorbed: &Absorbed,
) -> Result<LinearFit, EstimateError> {
    require_observations(x.nrows(), x.ncols() + absorbed.df)?;
    let resid = residual(x, y, &ls.coef);
    let cov = covariance(&ls.qr, &ls.design, &resid, spec, leverage, absorbed)?;
    Ok(assemble_parts(
        y,
        x,
        &ls.coef,
        resid,
        cov,
        has_intercept,
        absorbed,
    ))
}

/// [`assemble`] from residuals and a covariance already computed (the same bits).
fn assemble_parts(
    y: &DVector<f64>,
    x: &DMatrix<f64>,
    coef: &DVector<f64>,
    resid: DVector<f64>,
    cov: Covariance,
    has_intercept: bool,
    absorbed: &Absorbed,
) -> LinearFit {
    let (n, k) = x.shape();
    let fitted = x * coef;
    let rss = resid.norm_squared();
    let tss = total_sum_of_squares(y, has_intercept);
    let df_resid = n - k - absorbed.df;
    let df = cov.clusters.map_or(df_resid, |g| g - 1);
    LinearFit {
        coef: coef.clone(),
        cov: cov.cov,
        resid,
        fitted,
        n,
        k,
        df_resid,
        rss,
        tss,
        r_squared: 1.0 - rss / tss,
        residual_sd: (rss / df_resid as f64).sqrt(),
        clusters: cov.clusters,
        coef_reference: Reference::StudentT { df: df as f64 },
    }
}

/// Ordinary least squares of `y` on the columns of `x`.
///
/// # Formula
/// b = argmin ‖y − X b‖², computed from X S P = Q R as b = S P R^{-1} Q₁ᵀ y and refined on
/// the augmented system (Björck 1967); covariance as documented in `covariance`.
///
/// With fixed effects swept out of `y` and `x` beforehand (module `absorb`), `absorbed`
/// makes the residual df n − k − a and the small-sample factors count them (see
/// [`Absorbed`]); pass [`Absorbed::NONE`] otherwise.
///
/// # Errors
/// [`EstimateError::NotFinite`], [`EstimateError::DimensionMismatch`],
/// [`EstimateError::TooFewObservations`] (n ≤ k + a), [`EstimateError::RankDeficient`], and
/// the covariance errors (clusters, leverage).
pub fn ols(
    y: &DVector<f64>,
    x: &DMatrix<f64>,
    has_intercept: bool,
    cov: &CovSpec,
    absorbed: &Absorbed,
) -> Result<LinearFit, EstimateError> {
    ols_with(y, x, (has_intercept, cov, absorbed), || least_squares(y, x))
}

/// [`ols`] on a design the caller shares (kept by the memo without a copy and recognised
/// by its address): the same bits.
///
/// # Errors
/// As [`ols`].
pub fn ols_shared(
    y: &DVector<f64>,
    x: &Arc<DMatrix<f64>>,
    has_intercept: bool,
    cov: &CovSpec,
    absorbed: &Absorbed,
) -> Result<LinearFit, EstimateError> {
    ols_with(y, x, (has_intercept, cov, absorbed), || {
        least_squares_shared(y, x)
    })
}

/// [`ols`] with the least-squares fit from `fit` (run after the inputs are checked).
fn ols_with(
    y: &DVector<f64>,
    x: &DMatrix<f64>,
    (has_intercept, cov, absorbed): (bool, &CovSpec, &Absorbed),
    fit: impl FnOnce() -> Result<LeastSquares, EstimateError>,
) -> Result<LinearFit, EstimateError> {
    validate(y, &[("x", x)])?;
    require_observations(x.nrows(), x.ncols() + absorbed.df)?;
    let ls = fit()?;
    assemble(y, x, &ls, has_intercept, cov, Leverage::Allowed, absorbed)
}

/// Horizontal concatenation `[a | b]` (same number of rows).
pub(crate) fn hcat(a: &DMatrix<f64>, b: &DMatrix<f64>) -> DMatrix<f64> {
    assert_eq!(a.nrows(), b.nrows(), "hcat: blocks of different heights");
    let mut out = Vec::with_capacity(a.len() + b.len());
    out.extend_from_slice(a.as_slice());
    out.extend_from_slice(b.as_slice());
    DMatrix::from_vec(a.nrows(), a.ncols() + b.ncols(), out)
}

/// A rank error of an instrument set named as such.
fn instruments_error(e: EstimateError) -> EstimateError {
    match e {
        EstimateError::RankDeficient { dependent } => {
            EstimateError::InstrumentsRankDeficient { dependent }
        }
        other => other,
    }
}

/// Factorises the full instrument set `[instruments | exog]`, with the instrument set itself
/// for fits that keep their design (`z` handed to the memo without a copy).
pub(crate) fn instrument_design(
    z: DMatrix<f64>,
) -> Result<(Arc<DMatrix<f64>>, Arc<PivotedQr>), EstimateError> {
    shared_design_qr(&Arc::new(z)).map_err(instruments_error)
}

/// Validated 2SLS inputs and the shared factorisation of the instruments.
#[derive(Debug, Clone)]
pub(crate) struct IvSetup {
    /// Regressors `[endog | exog]` (the memo's matrix when sharing is on).
    pub(crate) x: Arc<DMatrix<f64>>,
    /// All instruments `[instruments | exog]`.
    pub(crate) z: Arc<DMatrix<f64>>,
    /// QR of `z`.
    pub(crate) zqr: Arc<PivotedQr>,
}

/// `[endog | exog]` and `[instruments | exog]`, joined and shared by the caller.
type Joined = (Arc<DMatrix<f64>>, Arc<DMatrix<f64>>);

/// Checks the 2SLS inputs: finiteness, rows, order condition, sample size, ranks.
pub(crate) fn iv_setup(
    y: &DVector<f64>,
    exog: &DMatrix<f64>,
    endog: &DMatrix<f64>,
    instruments: &DMatrix<f64>,
) -> Result<IvSetup, EstimateError> {
    iv_setup_joined(y, (exog, endog, instruments), None)
}

/// [`iv_setup`], with `[endog | exog]` and `[instruments | exog]` already joined by the
/// caller (`joined`, shared: handed to the memo without a copy), or joined here when `None`.
///
/// # Panics
/// When a joined matrix is not as wide and tall as its parts (a caller's error).
pub(crate) fn iv_setup_joined(
    y: &DVector<f64>,
    (exog, endog, instruments): (&DMatrix<f64>, &DMatrix<f64>, &DMatrix<f64>),
    joined: Option<Joined>,
) -> Result<IvSetup, EstimateError> {
    let inputs = [
        ("exog", exog),
        ("endog", endog),
        ("instruments", instruments),
    ];
    validate(y, &inputs)?;
    let (instr, endo) = (instruments.ncols(), endog.ncols());
    if instr < endo {
        return Err(EstimateError::UnderIdentified {
            instruments: instr,
            endogenous: endo,
        });
    }
    let (n, k) = (y.len(), endog.ncols() + exog.ncols());
    require_observations(n, (instruments.ncols() + exog.ncols()).max(k))?;
    let (x, z) = match joined {
        Some((x, z)) => {
            let n = y.len();
            assert_eq!(
                x.shape(),
                (n, endog.ncols() + exog.ncols()),
                "joined [endog | exog]"
            );
            assert_eq!(
                z.shape(),
                (n, instruments.ncols() + exog.ncols()),
                "joined [instruments | exog]"
            );
            (x, z)
        }
        None => (
            Arc::new(hcat(endog, exog)),
            Arc::new(hcat(instruments, exog)),
        ),
    };
    let (x, dependent) = collinear_kept_shared(x);
    if !dependent.is_empty() {
        return Err(EstimateError::RankDeficient { dependent });
    }
    let (z, zqr) = shared_design_qr(&z).map_err(instruments_error)?;
    Ok(IvSetup { x, z, zqr })
}

/// The columns of an instrumental-variable problem, borrowed: the outcome, the exogenous
/// regressors (the caller's intercept among them), the endogenous regressors and the
/// excluded instruments.
#[derive(Debug, Clone, Copy)]
pub struct IvColumns<'a> {
    pub y: &'a DVector<f64>,
    pub exog: &'a DMatrix<f64>,
    pub endog: &'a DMatrix<f64>,
    pub instruments: &'a DMatrix<f64>,
}

impl<'a> IvColumns<'a> {
    pub fn new(
        y: &'a DVector<f64>,
        exog: &'a DMatrix<f64>,
        endog: &'a DMatrix<f64>,
        instruments: &'a DMatrix<f64>,
    ) -> Self {
        IvColumns {
            y,
            exog,
            endog,
            instruments,
        }
    }

    /// Validates the inputs and factorises the instruments ([`IvProblem::new`]).
    ///
    /// # Errors
    /// As [`IvProblem::new`].
    pub fn problem(self) -> Result<IvProblem<'a>, EstimateError> {
        IvProblem::new(self.y, self.exog, self.endog, self.instruments)
    }
}

/// A column's least-squares fit on Z = [instruments | exog]: `zqr.solve` and the
/// compensated residual, the same bits as [`assemble`] forms for that regression.
#[derive(Debug, Clone)]
pub(crate) struct OnInstruments {
    pub(crate) coef: DVector<f64>,
    pub(crate) resid: DVector<f64>,
}

impl OnInstruments {
    fn new(setup: &IvSetup, v: &DVector<f64>) -> Self {
        let coef = setup.zqr.solve(&setup.z, v);
        let resid = residual(&setup.z, v, &coef);
        OnInstruments { coef, resid }
    }
}

/// One IV problem, prepared once and shared by the fit and every diagnostic of a
/// specification: the inputs, the validated setup (X = [endog | exog], Z = [instruments |
/// exog] and the QR of Z) and, computed on first use, the 2SLS residuals that the
/// over-identification tests share and the fits on Z that the reduced form, the first
/// stage, the weak-instrument diagnostics and the Anderson–Rubin and CLR tests share.
///
/// Each method gives exactly the bits of the free function of the same name called with
/// the same inputs (the same factorisations of the same matrices); it only avoids repeating
/// them. Before, every diagnostic rebuilt the setup from the raw columns: nine QRs of Z and
/// eight collinearity scans of X per 2SLS specification with every diagnostic. Across
/// specifications, the factorisations of the same matrices are shared too (module `shared`).
#[derive(Debug)]
pub struct IvProblem<'a> {
    pub(crate) y: &'a DVector<f64>,
    pub(crate) exog: &'a DMatrix<f64>,
    pub(crate) endog: &'a DMatrix<f64>,
    pub(crate) instruments: &'a DMatrix<f64>,
    pub(crate) setup: IvSetup,
    tsls_resid: std::sync::OnceLock<Result<DVector<f64>, EstimateError>>,
    /// The outcome's fit on Z: coefficients and compensated residuals (the reduced form,
    /// which the Anderson–Rubin and robust CLR tests start from too).
    outcome_on_z: std::sync::OnceLock<OnInstruments>,
    /// Covariances of the outcome's coefficients on Z, by covariance and absorbed key.
    outcome_on_z_cov: std::sync::Mutex<Vec<([u8; 32], Covariance)>>,
    exog_qr: std::sync::OnceLock<Result<Arc<PivotedQr>, EstimateError>>,
    /// The key (an [`InputKey`](super::qr::InputKey) hash) of the outcome-free inputs besides Z (see [`IvProblem::outcome_free_key`]).
    outcome_free: std::sync::OnceLock<[u8; 32]>,
}

impl<'a> IvProblem<'a> {
    /// Validates the inputs and factorises the instruments.
    ///
    /// # Errors
    /// As [`tsls`]: non-finite or mismatched inputs, under-identification, too few rows,
    /// collinear regressors or instruments.
    pub fn new(
        y: &'a DVector<f64>,
        exog: &'a DMatrix<f64>,
        endog: &'a DMatrix<f64>,
        instruments: &'a DMatrix<f64>,
    ) -> Result<Self, EstimateError> {
        Self::with_setup(y, (exog, endog, instruments), None)
    }

    /// [`IvProblem::new`] with `[endog | exog]` and `[instruments | exog]` already joined by
    /// the caller and shared (the same bits as joining them here), and the exogenous block
    /// the caller shares (`exog`), which the memo then keeps without a copy.
    ///
    /// # Errors
    /// As [`IvProblem::new`].
    pub(crate) fn joined(
        y: &'a DVector<f64>,
        (exog, endog, instruments): (&'a Arc<DMatrix<f64>>, &'a DMatrix<f64>, &'a DMatrix<f64>),
        x: Arc<DMatrix<f64>>,
        z: Arc<DMatrix<f64>>,
    ) -> Result<Self, EstimateError> {
        shared::hold(exog);
        Self::with_setup(y, (exog, endog, instruments), Some((x, z)))
    }

    fn with_setup(
        y: &'a DVector<f64>,
        (exog, endog, instruments): (&'a DMatrix<f64>, &'a DMatrix<f64>, &'a DMatrix<f64>),
        joined: Option<Joined>,
    ) -> Result<Self, EstimateError> {
        let setup = iv_setup_joined(y, (exog, endog, instruments), joined)?;
        Ok(IvProblem {
            y,
            exog,
            endog,
            instruments,
            setup,
            tsls_resid: std::sync::OnceLock::new(),
            outcome_on_z: std::sync::OnceLock::new(),
            outcome_on_z_cov: std::sync::Mutex::new(Vec::new()),
            exog_qr: std::sync::OnceLock::new(),
            outcome_free: std::sync::OnceLock::new(),
        })
    }

    /// A key for results that depend on this problem's regressors and instruments but not
    /// on its outcome (first stages, weak-instrument diagnostics): `tag`, then the bits of
    /// X = [endog | exog] and how X and Z split into their parts. Z itself is implied by
    /// the shared factorisation the results are kept with (`PivotedQr::derived`).
    pub(crate) fn outcome_free_key(&self, tag: &str) -> InputKey {
        let digest = self.outcome_free.get_or_init(|| {
            InputKey::new("regressors")
                .bytes(&shared::digest(&self.setup.x))
                .count(self.setup.x.nrows())
                .count(self.endog.ncols())
                .count(self.instruments.ncols())
                .finish()
        });
        InputKey::new(tag).bytes(digest)
    }

    /// The QR of the exogenous regressors, computed once (callers check that there are
    /// some: the factorisation of no columns is never asked for).
    pub(crate) fn exog_qr(&self) -> Result<&PivotedQr, EstimateError> {
        self.exog_qr
            .get_or_init(|| shared_qr(self.exog))
            .as_ref()
            .map(|qr| &**qr)
            .map_err(Clone::clone)
    }

    /// Residuals of `v` on the exogenous regressors (`v` itself when there are none), by
    /// the shared factorisation: the same bits as a fresh least-squares fit.
    pub(crate) fn exog_residuals(&self, v: &DVector<f64>) -> Result<DVector<f64>, EstimateError> {
        if self.exog.ncols() == 0 {
            return Ok(v.clone());
        }
        let coef = self.exog_qr()?.solve(self.exog, v);
        Ok(residual(self.exog, v, &coef))
    }

    /// The structural 2SLS residuals u = y − X b alone, for tests that need nothing else:
    /// the same factorisation, solve and compensated residual as [`IvProblem::tsls`], so the
    /// same bits, without the covariance a fit would also compute; computed once.
    pub(crate) fn tsls_residuals(&self) -> Result<DVector<f64>, EstimateError> {
        self.tsls_resid
            .get_or_init(|| {
                let xhat = self.projected()?;
                let (_, qr) = shared_design_qr(&xhat)?;
                let coef = qr.solve(&xhat, self.y);
                Ok(residual(&self.setup.x, self.y, &coef))
            })
            .clone()
    }

    /// The outcome's fit on Z, computed once per problem.
    pub(crate) fn outcome_on_instruments(&self) -> &OnInstruments {
        self.outcome_on_z
            .get_or_init(|| OnInstruments::new(&self.setup, self.y))
    }

    /// The first endogenous column's fit on Z: outcome-free, so computed once per sample and
    /// kept with the instruments' factorisation.
    pub(crate) fn endog_on_instruments(&self) -> Result<Arc<OnInstruments>, EstimateError> {
        self.setup.zqr.derived(
            || {
                self.outcome_free_key("first endogenous column on instruments")
                    .finish()
            },
            || {
                let x = self.endog.column(0).into_owned();
                Ok(Arc::new(OnInstruments::new(&self.setup, &x)))
            },
        )
    }

    /// The covariance of the outcome's coefficients on Z (leverage allowed), computed once
    /// per covariance and absorbed degrees of freedom: the reduced form, the Anderson–Rubin
    /// problem and its test at 0 ask for the same one. Errors are not kept.
    pub(crate) fn outcome_on_instruments_covariance(
        &self,
        spec: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<Covariance, EstimateError> {
        let key = absorbed
            .keyed(spec.keyed(InputKey::new("outcome on instruments")))
            .finish();
        let kept = |cache: &Vec<([u8; 32], Covariance)>| {
            cache
                .iter()
                .find(|(k, _)| *k == key)
                .map(|(_, c)| c.clone())
        };
        let lock = || {
            self.outcome_on_z_cov
                .lock()
                .unwrap_or_else(std::sync::PoisonError::into_inner)
        };
        if let Some(cov) = kept(&lock()) {
            return Ok(cov);
        }
        let on_z = self.outcome_on_instruments();
        let cov = covariance(
            &self.setup.zqr,
            &self.setup.z,
            &on_z.resid,
            spec,
            Leverage::Allowed,
            absorbed,
        )?;
        lock().push((key, cov.clone()));
        Ok(cov)
    }

    /// The first endogenous column on Z with the caller's covariance (its first stage, and
    /// the weak-instrument diagnostics' regression), from the kept fit and a covariance kept
    /// per sample and covariance: the same bits as [`assemble`] on a fresh solve.
    pub(crate) fn endog_fit(
        &self,
        has_intercept: bool,
        spec: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<LinearFit, EstimateError> {
        let (z, zqr) = (&self.setup.z, &self.setup.zqr);
        require_observations(z.nrows(), z.ncols() + absorbed.df)?;
        let on_x = self.endog_on_instruments()?;
        let key = || {
            let key = self.outcome_free_key("first endogenous column's covariance");
            absorbed.keyed(spec.keyed(key)).finish()
        };
        let cov: Covariance = zqr.derived(key, || {
            covariance(zqr, z, &on_x.resid, spec, Leverage::Allowed, absorbed)
        })?;
        let x = self.endog.column(0).into_owned();
        Ok(self.fit_on_instruments(&x, &on_x, cov, has_intercept, absorbed))
    }

    /// The [`LinearFit`] of `v` on Z from its kept fit `on` and covariance `cov`.
    fn fit_on_instruments(
        &self,
        v: &DVector<f64>,
        on: &OnInstruments,
        cov: Covariance,
        has_intercept: bool,
        absorbed: &Absorbed,
    ) -> LinearFit {
        let resid = on.resid.clone();
        assemble_parts(
            v,
            &self.setup.z,
            &on.coef,
            resid,
            cov,
            has_intercept,
            absorbed,
        )
    }

    /// The reduced form (y on Z with the caller's covariance) from the kept fit and
    /// covariance: the same bits as [`assemble`] on a fresh solve.
    pub(crate) fn reduced_form_fit(
        &self,
        has_intercept: bool,
        spec: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<LinearFit, EstimateError> {
        let z = &self.setup.z;
        require_observations(z.nrows(), z.ncols() + absorbed.df)?;
        let cov = self.outcome_on_instruments_covariance(spec, absorbed)?;
        let on_y = self.outcome_on_instruments();
        Ok(self.fit_on_instruments(self.y, on_y, cov, has_intercept, absorbed))
    }

    /// X̂ = [P_Z endog | exog] (as [`projected_regressors`]): outcome-free, so kept with the
    /// instruments' factorisation once per sample and handed to the memo without a copy.
    pub(crate) fn projected(&self) -> Result<Arc<DMatrix<f64>>, EstimateError> {
        self.setup.zqr.derived(
            || self.outcome_free_key("projected regressors").finish(),
            || projected_regressors(&self.setup, self.endog.ncols()).map(Arc::new),
        )
    }

    /// Two-stage least squares on this problem (as [`tsls`]).
    ///
    /// # Errors
    /// As [`tsls`].
    pub fn tsls(
        &self,
        has_intercept: bool,
        cov: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<LinearFit, EstimateError> {
        let setup = &self.setup;
        require_observations(
            self.y.len(),
            setup.z.ncols().max(setup.x.ncols()) + absorbed.df,
        )?;
        let ls = least_squares_shared(self.y, &self.projected()?)?;
        let fit = tsls_assemble(self.y, setup, &ls, has_intercept, cov, absorbed)?;
        // The fit's residuals are exactly those `tsls_residuals` computes (same projection,
        // factorisation, solve and compensated residual): the tests reuse them.
        let _ = self.tsls_resid.set(Ok(fit.resid.clone()));
        Ok(fit)
    }
}

/// X̂ = [P_Z endog | exog]: exogenous columns are their own projections.
///
/// # Errors
/// [`EstimateError::RankDeficient`] naming j when ‖P_Z endog_j‖ ≤ max(n, L)·eps·‖endog_j‖
/// (instruments orthogonal to endog_j: the projection is rounding noise, which unit-norm
/// column scaling must not be allowed to turn into a regressor).
pub(crate) fn projected_regressors(
    setup: &IvSetup,
    endogenous: usize,
) -> Result<DMatrix<f64>, EstimateError> {
    let (xhat, dependent) = projection(setup, endogenous);
    if dependent.is_empty() {
        Ok(xhat)
    } else {
        Err(EstimateError::RankDeficient { dependent })
    }
}

/// X̂ = [P_Z endog | exog] and the indices j of the endogenous columns with
/// ‖P_Z endog_j‖ ≤ max(n, L)·eps·‖endog_j‖ (orthogonal to the instruments up to rounding).
/// The one place the endogenous columns are projected; [`projected_regressors`] refuses the
/// orthogonal ones, Shea's partial R² reads them as zero.
pub(crate) fn projection(setup: &IvSetup, endogenous: usize) -> (DMatrix<f64>, Vec<usize>) {
    let (n, l) = setup.z.shape();
    let tol = n.max(l) as f64 * f64::EPSILON;
    let mut xhat = (*setup.x).clone();
    let mut orthogonal = Vec::new();
    for j in 0..endogenous {
        let col = setup.x.column(j).into_owned();
        let projected = setup.zqr.project(&col);
        if projected.norm() <= tol * col.norm() {
            orthogonal.push(j);
        }
        xhat.set_column(j, &projected);
    }
    (xhat, orthogonal)
}

/// Two-stage least squares. Coefficient order: endogenous columns first, then exog columns.
///
/// # Formula
/// With Z = [instruments | exog], X = [endog | exog] and X̂ = P_Z X,
/// b = (X̂'X̂)^{-1} X̂'y (Theil 1953; Basmann 1957), computed by QR of X̂. Residuals are
/// structural, u = y − X b; the classical covariance is s² (X̂'X̂)^{-1} with
/// s² = u'u/(n − k); HC0/HC1/cluster sandwiches use X̂ and u (White 1982, Econometrica 50).
/// r_squared = 1 − u'u/tss and may be negative. `absorbed` counts swept fixed effects in
/// every df (s² uses n − k − a), as for [`ols`].
///
/// # Errors
/// As [`ols`], plus [`EstimateError::UnderIdentified`],
/// [`EstimateError::InstrumentsRankDeficient`], and
/// [`EstimateError::CovarianceUnavailable`] for HC2/HC3. n must exceed both k and the number
/// of instruments, each plus the absorbed a.
pub fn tsls(
    y: &DVector<f64>,
    exog: &DMatrix<f64>,
    endog: &DMatrix<f64>,
    instruments: &DMatrix<f64>,
    has_intercept: bool,
    cov: &CovSpec,
    absorbed: &Absorbed,
) -> Result<LinearFit, EstimateError> {
    IvProblem::new(y, exog, endog, instruments)?.tsls(has_intercept, cov, absorbed)
}

/// 2SLS on a prepared [`IvSetup`].
pub(crate) fn tsls_from(
    y: &DVector<f64>,
    setup: &IvSetup,
    endogenous: usize,
    has_intercept: bool,
    cov: &CovSpec,
    absorbed: &Absorbed,
) -> Result<LinearFit, EstimateError> {
    let xhat = projected_regressors(setup, endogenous)?;
    let ls = least_squares(y, &xhat)?;
    tsls_assemble(y, setup, &ls, has_intercept, cov, absorbed)
}

/// The 2SLS fit from the least-squares fit of y on X̂: structural residuals and the
/// covariance (as [`tsls_from`]).
fn tsls_assemble(
    y: &DVector<f64>,
    setup: &IvSetup,
    ls: &LeastSquares,
    has_intercept: bool,
    cov: &CovSpec,
    absorbed: &Absorbed,
) -> Result<LinearFit, EstimateError> {
    assemble(
        y,
        &setup.x,
        ls,
        has_intercept,
        cov,
        Leverage::Refused("2sls"),
        absorbed,
    )
}
