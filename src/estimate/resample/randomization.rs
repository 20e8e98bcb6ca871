//! Randomization (permutation) tests under a sharp null, re-drawing the assignment as the
//! design says (Fisher 1935, The Design of Experiments; for regression-adjusted and
//! studentized statistics see e.g. Young 2019, QJE 134, and Imbens and Rubin 2015, ch. 5).
//!
//! Under the sharp null "the effect is `null` for every unit", the outcome net of the
//! effect, y₀ = y − null · t, does not depend on the assignment, so the statistic of every
//! possible assignment t* is computable: regress y₀ on [t* | W] (W the other columns, fixed).
//! The controls are partialled out once (module `partial`); under a cluster-randomised design
//! each draw is fitted from cell-level statistics (module `cells`).

use nalgebra::{DMatrix, DVector};

use super::super::covariance::CovSpec;
use super::super::linear::{validate, IvColumns};
use super::super::wald::wald;
use super::super::{Absorbed, EstimateError};
use super::assignment::{Assigner, AssignmentDesign};
use super::cells::Cells;
use super::family::Pencil;
use super::partial::{Partialled, ZFit};
use super::{run_draws, summarise, DrawStats, Draws, ResampleError, ResampleResult, Stream};
use super::{scale_rows, OlsColumns, Tested};

/// The statistic of a randomization test for one coefficient.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RiStatistic {
    /// The coefficient studentized with the requested covariance, (b − null)/se.
    T,
    /// The coefficient itself, b − null.
    Estimate,
}

/// Drops column `j` of `x`.
fn without_column(x: &DMatrix<f64>, j: usize) -> DMatrix<f64> {
    x.clone().remove_column(j)
}

/// Fits the re-drawn columns of a draw given as group labels: from cell-level statistics
/// (module `cells`) when the design is cluster-randomised and the covariance allows it,
/// else unit by unit.
pub(super) struct DrawFitter<'a> {
    part: &'a Partialled,
    assigner: &'a Assigner,
    cells: Option<Cells>,
    /// √w of each unit for a weighted problem: a draw's values are scaled by the weights of
    /// the units they land on, unit by unit (the cell-level statistics assume unweighted
    /// rows, so a weighted problem never uses them).
    root: Option<&'a DVector<f64>>,
    /// The second outcome t̃ of a pencil fitter ([`DrawFitter::with_second`]).
    t_tilde: Option<&'a DVector<f64>>,
}

impl<'a> DrawFitter<'a> {
    fn new(part: &'a Partialled, assigner: &'a Assigner, root: Option<&'a DVector<f64>>) -> Self {
        Self::build(part, assigner, root, None)
    }

    /// A fitter of [`Pencil`]s for the outcome family ỹ − τ₀t̃ (`t_tilde` = t̃).
    pub(super) fn with_second(
        part: &'a Partialled,
        assigner: &'a Assigner,
        root: Option<&'a DVector<f64>>,
        t_tilde: &'a DVector<f64>,
    ) -> Self {
        Self::build(part, assigner, root, Some(t_tilde))
    }

    fn build(
        part: &'a Partialled,
        assigner: &'a Assigner,
        root: Option<&'a DVector<f64>>,
        t_tilde: Option<&'a DVector<f64>>,
    ) -> Self {
        let cells = if assigner.grouped() && root.is_none() {
            part.cell_parts().map(|parts| match t_tilde {
                Some(t) => Cells::with_second(&parts, assigner.unit_group(), t),
                None => Cells::new(&parts, assigner.unit_group()),
            })
        } else {
            None
        };
        DrawFitter {
            part,
            assigner,
            cells,
            root,
            t_tilde,
        }
    }

    /// A re-drawn assignment (`units` false) or the observed one (`units` true: always
    /// fitted unit by unit, so the observed statistic has the bits of the direct fit; draws
    /// that reproduce it differ by rounding only, far inside [`TIE_TOLERANCE`]).
    ///
    /// [`TIE_TOLERANCE`]: super::TIE_TOLERANCE
    fn fit(&self, labels: &[usize], units: bool, with_cov: bool) -> Option<ZFit> {
        match &self.cells {
            Some(cells) if !units => {
                cells.fit(self.part, &self.assigner.group_values(labels), with_cov)
            }
            _ => self.part.fit(&self.unit_values(labels), with_cov),
        }
    }

    /// As [`DrawFitter::fit`], the draw's [`Pencil`] (`None` also for a fitter not built
    /// by [`DrawFitter::with_second`]).
    pub(super) fn pencil(&self, labels: &[usize], units: bool, with_cov: bool) -> Option<Pencil> {
        let t_tilde = self.t_tilde?;
        match &self.cells {
            Some(cells) if !units => {
                cells.pencil(self.part, &self.assigner.group_values(labels), with_cov)
            }
            _ => self
                .part
                .pencil(&self.unit_values(labels), t_tilde, with_cov),
        }
    }

    /// The re-drawn column of each unit (rows scaled by √w when weighted).
    fn unit_values(&self, labels: &[usize]) -> DMatrix<f64> {
        let units = self.assigner.expand(labels);
        scale_rows(self.assigner.values(&units), self.root)
    }
}

/// Probability weights, when given, are one per row, finite and positive.
pub(super) fn check_weights(w: Option<&DVector<f64>>, n: usize) -> Result<(), EstimateError> {
    let Some(w) = w else {
        return Ok(());
    };
    if w.len() != n {
        return Err(EstimateError::DimensionMismatch {
            what: "weights",
            expected: n,
            got: w.len(),
        });
    }
    if w.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
        return Err(EstimateError::NotFinite);
    }
    Ok(())
}

/// Evaluates `stat` on the observed draw (must succeed; second argument true) and on every
/// re-drawn assignment (false), each given as group labels.
fn permutation_run<F>(
    assigner: &Assigner,
    plan: &Draws,
    stat: F,
) -> Result<DrawStats, ResampleError>
where
    F: Fn(&[usize], bool) -> Option<f64> + Sync + Send,
{
    let keep = |s: Option<f64>| s.filter(|v| v.is_finite());
    permutation_draws(assigner, plan, |labels, observed| {
        let s = stat(labels, observed);
        if observed {
            s
        } else {
            keep(s)
        }
    })
}

/// [`permutation_run`] for any per-draw result `T`: `stat` on the observed draw (must give
/// `Some`) and on every re-drawn assignment, in draw order.
pub(super) fn permutation_draws<T, F>(
    assigner: &Assigner,
    plan: &Draws,
    stat: F,
) -> Result<(T, Vec<Option<T>>, bool), ResampleError>
where
    T: Send + Clone,
    F: Fn(&[usize], bool) -> Option<T> + Sync + Send,
{
    let observed =
        stat(&assigner.observed_groups(), true).ok_or(ResampleError::ObservedNotFinite)?;
    let (stats, exact) = run_draws(
        assigner.total(),
        plan,
        observed.clone(),
        |i| stat(&assigner.unrank_groups(i), false),
        |b| {
            let mut stream = Stream::for_draw(plan.seed, b);
            stat(&assigner.shuffle_groups(&mut stream), false)
        },
    )?;
    Ok((observed, stats, exact))
}

/// Randomization test of the sharp null "the effect of column `treatment` of `x` is `null`
/// for every unit".
///
/// # Formula
/// y₀ = y − null·t (t = column `treatment`); for each assignment t* allowed by `design`
/// (all of them when their number is at most `plan.exact_below`, else the observed one and
/// `plan.draws` random ones), b* is the coefficient of t* in the OLS of y₀ on [t* | W]
/// (W = the other columns of `x`), computed as (t̃*'ỹ₀)/(t̃*'t̃*) with t̃* = M_W t*, and the
/// statistic is b* ([`RiStatistic::Estimate`]) or b*/se(b*) under `cov`
/// ([`RiStatistic::T`]). The observed statistic is that of the observed t, i.e. b − null
/// or the usual t statistic of b = null. p-values as in the module documentation of
/// `resample`; residual df and small-sample factors count `absorbed.df`.
///
/// With probability weights (`cols.weights`), `y` and `x` are in the data's units: the
/// observed values of t are re-drawn among the units, each unit keeps its weight, and every
/// draw is the weighted least squares fit (rows scaled by √w) with `cov`'s sandwich on the
/// scaled rows. The caller must not combine weights with absorbed fixed effects (a weighted
/// sweep does not commute with the permutations).
///
/// With absorbed fixed effects, `x` holds swept columns and the swept treatment is permuted:
/// this is valid only when every absorbed fixed effect is constant within the design's
/// blocks (e.g. block fixed effects with a blocked design), because then sweeping commutes
/// with the permutations. The caller must ensure it.
///
/// # Errors
/// Input errors of [`ols`](super::super::ols) (finiteness, dimensions, collinear controls,
/// clusters, leverage), [`EstimateError::IndexOutOfRange`] for `treatment`, design errors,
/// [`ResampleError::ObservedNotFinite`] when the observed statistic is undefined,
/// [`ResampleError::NoDraws`].
pub fn randomization_test(
    cols: OlsColumns,
    tested: Tested,
    cov: &CovSpec,
    absorbed: &Absorbed,
    design: &AssignmentDesign,
    statistic: RiStatistic,
    plan: &Draws,
) -> Result<ResampleResult, ResampleError> {
    let (observed, stats, exact) =
        randomization_statistics(cols, tested, cov, absorbed, design, statistic, plan)?;
    Ok(summarise(observed, &stats, exact))
}

/// [`randomization_test`] before summarising: the observed statistic, every draw's
/// statistic in draw order, and whether the draws were enumerated.
pub(crate) fn randomization_statistics(
    cols: OlsColumns,
    tested: Tested,
    cov: &CovSpec,
    absorbed: &Absorbed,
    design: &AssignmentDesign,
    statistic: RiStatistic,
    plan: &Draws,
) -> Result<DrawStats, ResampleError> {
    let fixed = Fixed::new(cols, tested, cov, absorbed)?;
    let assigner = Assigner::new(design, &fixed.observed)?;
    let fitter = DrawFitter::new(&fixed.part, &assigner, fixed.root.as_ref());
    let with_cov = statistic == RiStatistic::T;
    permutation_run(&assigner, plan, |labels, observed| {
        let (g, v) = fitter.fit(labels, observed, with_cov)?;
        Some(match v {
            Some(v) => g[0] / v[(0, 0)].sqrt(),
            None => g[0],
        })
    })
}

/// The fixed parts of a randomization test of one coefficient under a sharp null.
pub(super) struct Fixed {
    /// The regression of the outcome net of the null effect on the other columns.
    pub(super) part: Partialled,
    /// √w of each row (`None` unweighted).
    pub(super) root: Option<DVector<f64>>,
    /// The tested column as observed, in the data's units (n × 1).
    pub(super) observed: DMatrix<f64>,
}

impl Fixed {
    /// Checks the inputs and partials the other columns out of y − null·t (rows scaled by
    /// √w when weighted).
    pub(super) fn new(
        cols: OlsColumns,
        tested: Tested,
        cov: &CovSpec,
        absorbed: &Absorbed,
    ) -> Result<Self, ResampleError> {
        let root = cols.root_weights();
        let (
            OlsColumns { y, x, .. },
            Tested {
                index: treatment,
                null,
            },
        ) = (cols, tested);
        validate(y, &[("x", x)])?;
        tested.check(x.ncols())?;
        check_weights(cols.weights, y.len())?;
        let t = x.column(treatment).into_owned();
        let y0 = y - &t * null;
        let y0 = match &root {
            Some(r) => y0.component_mul(r),
            None => y0,
        };
        let w = scale_rows(without_column(x, treatment), root.as_ref());
        let part = Partialled::new(&y0, &w, 1, cov, absorbed)?;
        let observed_values = DMatrix::from_column_slice(t.len(), 1, t.as_slice());
        if part
            .fit(&scale_rows(observed_values.clone(), root.as_ref()), false)
            .is_none()
        {
            return Err(EstimateError::RankDeficient {
                dependent: vec![treatment],
            }
            .into());
        }
        Ok(Fixed {
            part,
            root,
            observed: observed_values,
        })
    }
}

/// Randomization Anderson–Rubin test of the sharp null β = `beta0` for one endogenous
/// regressor, re-drawing the excluded instruments as `design` says.
///
/// # Formula
/// y₀ = y − x β₀ is fixed under the sharp null (the instruments being the randomised
/// assignment). For each assignment Z* of the rows of `instruments` (n × L), AR(Z*) =
/// g'V^{-1}g / L with g the Z*-coefficients of the OLS of y₀ on [Z* | W] (W = `exog`) and V
/// their covariance under `cov` (Anderson and Rubin 1949, Ann. Math. Statist. 20; the
/// statistic of [`anderson_rubin`](super::super::anderson_rubin) at β₀). p-values as in the
/// module documentation (for this non-negative statistic the two-sided and upper p-values
/// coincide). Absorbed fixed effects: as for [`randomization_test`].
///
/// With probability weights, `data` holds the rows scaled by √w (the weighted 2SLS problem)
/// and `redraw` the instruments in the data's units with the weights: the observed values are
/// re-drawn among the units, each unit keeps its weight, and each draw's instrument rows are
/// scaled by the √w of their units, so every draw is the weighted regression of y₀ on
/// [Z* | W]. The caller must not combine weights with absorbed fixed effects (as for
/// [`randomization_test`]).
///
/// # Errors
/// As [`randomization_test`]; [`EstimateError::DimensionMismatch`] unless `endog` has one
/// column; [`EstimateError::InstrumentsRankDeficient`] when the observed M_W Z is rank
/// deficient; [`EstimateError::SingularCovariance`] for a singular observed V.
pub fn randomization_ar(
    data: IvColumns,
    redraw: Option<WeightedRedraw>,
    beta0: f64,
    cov: &CovSpec,
    absorbed: &Absorbed,
    design: &AssignmentDesign,
    plan: &Draws,
) -> Result<ResampleResult, ResampleError> {
    let (observed, stats, exact) =
        randomization_ar_statistics(data, redraw, beta0, cov, absorbed, design, plan)?;
    Ok(summarise(observed, &stats, exact))
}

/// The instruments of a weighted Anderson–Rubin randomization test in the data's units, with
/// the probability weights (module documentation of [`randomization_ar`]).
#[derive(Debug, Clone, Copy)]
pub struct WeightedRedraw<'a> {
    /// The excluded instruments, unscaled: the values the design re-draws among the units.
    pub instruments: &'a DMatrix<f64>,
    /// One positive, finite weight per row.
    pub weights: &'a DVector<f64>,
}

/// [`randomization_ar`] before summarising (see [`randomization_statistics`]).
pub(crate) fn randomization_ar_statistics(
    data: IvColumns,
    redraw: Option<WeightedRedraw>,
    beta0: f64,
    cov: &CovSpec,
    absorbed: &Absorbed,
    design: &AssignmentDesign,
    plan: &Draws,
) -> Result<DrawStats, ResampleError> {
    let IvColumns {
        y,
        exog,
        endog,
        instruments,
    } = data;
    validate(
        y,
        &[
            ("exog", exog),
            ("endog", endog),
            ("instruments", instruments),
        ],
    )?;
    if endog.ncols() != 1 {
        return Err(EstimateError::DimensionMismatch {
            what: "endog columns",
            expected: 1,
            got: endog.ncols(),
        }
        .into());
    }
    if !beta0.is_finite() {
        return Err(EstimateError::NotFinite.into());
    }
    let l = instruments.ncols();
    let y0 = y - endog.column(0) * beta0;
    let part = Partialled::new(&y0, exog, l, cov, absorbed)?;
    let indices: Vec<usize> = (0..l).collect();
    let observed = part
        .fit(instruments, true)
        .ok_or(EstimateError::InstrumentsRankDeficient {
            dependent: indices.clone(),
        })?;
    if let (g, Some(v)) = &observed {
        wald(g, v, &indices)?;
    }
    let root = match redraw {
        Some(r) => {
            check_weights(Some(r.weights), y.len())?;
            if r.instruments.shape() != instruments.shape() {
                return Err(EstimateError::DimensionMismatch {
                    what: "unscaled instruments",
                    expected: instruments.ncols(),
                    got: r.instruments.ncols(),
                }
                .into());
            }
            Some(r.weights.map(f64::sqrt))
        }
        None => None,
    };
    let assigner = Assigner::new(design, redraw.map_or(instruments, |r| r.instruments))?;
    let fitter = DrawFitter::new(&part, &assigner, root.as_ref());
    permutation_run(&assigner, plan, |labels, observed| {
        let (g, v) = fitter.fit(labels, observed, true)?;
        Some(wald(&g, &v?, &indices).ok()? / l as f64)
    })
}
