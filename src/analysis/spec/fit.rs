//! Fitting a specification's estimator (OLS, 2SLS, LIML or Fuller) with the covariance its
//! errors ask for, and the linear-probability check of a binary outcome.

use super::resolve::Parts;
use super::{cov_spec, est_err, Prepared};
use crate::analysis::hac;
use crate::data::{Design, Table};
use crate::deviation::{Deviation, DeviationCode};
use crate::error::{Error, Result};
use crate::estimate::{self, CovSpec, EstimateError, LinearFit};
use crate::plan::{ColumnKind, DataSource, Errors, Estimator, Spec};
use crate::results::{HacResult, LpmInfo};

/// A specification's fit.
pub(super) struct Estimated<'a> {
    /// An IV specification's problem, validated and with its instruments factorised once,
    /// for the fit and every diagnostic; `None` for OLS.
    pub(super) iv: Option<estimate::IvProblem<'a>>,
    /// The fit of the specification's own estimator.
    pub(super) fit: LinearFit,
    /// The k-class parameter of a LIML or Fuller fit.
    pub(super) kappa: Option<f64>,
}

/// The covariance estimator of `spec` and, for HAC errors, its record (bandwidth resolved
/// once, so the fit and every diagnostic use one kernel).
pub(super) fn covariance(
    spec: &Spec,
    table: &Table,
    d: &Design,
    p: &Parts,
) -> Result<(CovSpec, Option<HacResult>)> {
    let scores = hac::Scores {
        y: &d.y,
        exog: &p.exog,
        exog_names: &p.exog_names,
        focal: &p.focal,
        instruments: &p.instruments,
        has_constant: d.has_constant,
        absorbed: &d.absorbed,
    };
    Ok(
        match hac::resolve(spec, table, d, &scores, spec.estimator.is_iv())? {
            Some((cov, record)) => (cov, Some(record)),
            None => (cov_spec(spec, d)?, None),
        },
    )
}

/// Fit `prepared`'s estimator.
pub(super) fn estimate<'a>(prepared: &'a Prepared) -> Result<Estimated<'a>> {
    let (spec, d, p, cov) = (prepared.spec, &prepared.d, &prepared.p, &prepared.cov);
    let has_c = d.has_constant;
    let ab = &d.absorbed;
    let err = |e| map_estimate_error(spec, e);
    // [focal | exog] and [instruments | exog] as the table keeps them (the same matrices
    // for every specification with these columns and rows; module `data::shared_columns`).
    let shared = &prepared.table.shared;
    let iv = if spec.estimator.is_iv() {
        let x = shared.joined(&[&p.focal, &p.exog]);
        let z = shared.joined(&[&p.instruments, &p.exog]);
        let columns = (&p.exog, &*p.focal, &*p.instruments);
        Some(estimate::IvProblem::joined(&d.y, columns, x, z).map_err(err)?)
    } else {
        None
    };
    let mut kappa = None;
    let fit = match (&iv, spec.estimator) {
        (Some(iv), Estimator::Tsls) => iv.tsls(has_c, cov, ab).map_err(err)?,
        (Some(iv), Estimator::Liml | Estimator::Fuller) => {
            let which = if spec.estimator == Estimator::Liml {
                estimate::KClass::Liml
            } else {
                estimate::KClass::Fuller {
                    alpha: spec.fuller_k,
                }
            };
            let k = iv.kclass(has_c, cov, which, ab).map_err(err)?;
            kappa = Some(k.kappa);
            k.fit
        }
        _ => {
            let x = shared.joined(&[&p.focal, &p.exog]);
            estimate::ols_shared(&d.y, &x, has_c, cov, ab).map_err(err)?
        }
    };
    Ok(Estimated { iv, fit, kappa })
}

/// An estimation error of `spec` in the user's terms (which errors to choose instead).
pub(super) fn map_estimate_error(spec: &Spec, e: EstimateError) -> Error {
    let message = match e {
        EstimateError::TooFewClusters { clusters } => format!("{clusters} cluster(s) in the estimation sample; clustered errors need at least 2 (cluster by a coarser or different variable)"),
        EstimateError::CovarianceUnavailable { estimator, kind } if estimator.starts_with("absorbed") => format!(
            "{kind} errors need the leverage of the absorbed fixed effects, which sworn computes for a single fixed effect only; use hc0, hc1 or cluster errors, or one fixed effect"
        ),
        EstimateError::CovarianceUnavailable { estimator, kind } => format!(
            "{kind} errors are not available for {estimator} (no leverage is fixed for it); use classical, hc0, hc1 or cluster errors"
        ),
        other => format!("{other}"),
    };
    est_err(spec, message)
}

/// A binary outcome makes the fit a linear probability model: count fitted values outside
/// [0, 1] and disclose classical errors as invalid for it. `None` for other outcomes.
pub(super) fn lpm_check(
    spec: &Spec,
    source: &DataSource,
    fit: &LinearFit,
    d: &Design,
    devs: &mut Vec<Deviation>,
) -> Option<LpmInfo> {
    let binary = source
        .columns
        .get(&spec.outcome)
        .is_some_and(|c| c.kind == ColumnKind::Binary);
    if !binary {
        return None;
    }
    // Fitted values in levels (fixed effects included): y − residual.
    let outside = d
        .y_raw
        .iter()
        .zip(super::weighted::residuals(fit, d).iter())
        .map(|(y, u)| y - u)
        .filter(|v| *v < 0.0 || *v > 1.0)
        .count();
    if spec.errors == Errors::Classical {
        devs.push(Deviation::new(DeviationCode::LpmClassicalErrors, spec.id.clone(), "the outcome is binary (a linear probability model), whose errors are heteroskedastic by construction; classical standard errors are not valid here, robust ones (hc1 or cluster) are recommended"));
    }
    Some(LpmInfo {
        fitted_outside_unit_interval: outside,
    })
}
