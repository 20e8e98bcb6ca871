//! HAC errors for one specification: time positions from the table's `order_by` order, the
//! bandwidth stated or chosen by the Newey–West (1994) rule, and what results.json records.
//!
//! Invariants: positions are the rows of the table in `order_by` order (a row missing from
//! the estimation sample keeps its place, so its neighbours stay two rows apart); the
//! `order_by` values of the rows used never repeat (checked here, naming the value); the
//! bandwidth is resolved once per specification and the same [`CovSpec`] serves the fit, the
//! first stage, the diagnostics and Anderson–Rubin, so every number uses one kernel.

use crate::data::{Design, Table};
use crate::error::{Error, Result};
use crate::estimate::{self, Absorbed, CovSpec};
use crate::plan::{Errors, HacBandwidth, Spec};
use crate::results::HacResult;
use nalgebra::{DMatrix, DVector};

/// The regressions whose scores the automatic rule weighs.
pub(super) struct Scores<'a> {
    /// Outcome (swept of fixed effects when there are any).
    pub y: &'a DVector<f64>,
    /// Included exogenous columns.
    pub exog: &'a DMatrix<f64>,
    /// Names of `exog` (an `intercept` column is left out of the rule's weights).
    pub exog_names: &'a [String],
    /// Endogenous regressors (IV) or regressors of interest (OLS).
    pub focal: &'a DMatrix<f64>,
    /// Excluded instruments (IV), empty for OLS.
    pub instruments: &'a DMatrix<f64>,
    /// Whether the column space has a constant.
    pub has_constant: bool,
    /// Absorbed fixed effects.
    pub absorbed: &'a Absorbed,
}

fn err(spec: &Spec, message: String) -> Error {
    Error::Estimation {
        spec: spec.id.clone(),
        message,
    }
}

/// The HAC covariance of `spec` and its record, or `None` when `spec` has other errors.
///
/// # Errors
/// Repeated `order_by` values among the rows used; an automatic bandwidth that is undefined;
/// a preliminary fit that fails.
pub(super) fn resolve(
    spec: &Spec,
    table: &Table,
    d: &Design,
    s: &Scores,
    iv: bool,
) -> Result<Option<(CovSpec, HacResult)>> {
    let Errors::Hac {
        order_by,
        bandwidth,
    } = &spec.errors
    else {
        return Ok(None);
    };
    check_order(spec, table, order_by, &d.rows)?;
    let positions = d.rows.to_vec();
    let (b, rule) = match bandwidth {
        HacBandwidth::Stated(b) => (f64::from(*b), crate::results::BandwidthRule::Stated),
        HacBandwidth::NeweyWest1994 => (
            automatic(spec, s, iv, &positions)?,
            crate::results::BandwidthRule::NeweyWest1994,
        ),
    };
    let record = HacResult {
        kernel: crate::results::HacKernel::Bartlett,
        bandwidth: b,
        bandwidth_rule: rule,
        lags: estimate::bartlett_lags(b),
        order_by: order_by.clone(),
        small_sample_factor: if d.absorbed.df > 0 {
            crate::results::SmallSampleFactor::Absorbed
        } else {
            crate::results::SmallSampleFactor::Plain
        },
    };
    Ok(Some((
        CovSpec::Hac {
            positions,
            bandwidth: b,
        },
        record,
    )))
}

/// Refuses repeated `order_by` values among `rows` (rows are sorted by it already).
fn check_order(spec: &Spec, table: &Table, order_by: &str, rows: &[usize]) -> Result<()> {
    let Some(values) = table.numeric.get(order_by) else {
        return Err(err(
            spec,
            format!("order_by column `{order_by}` is not available for hac errors"),
        ));
    };
    for w in rows.windows(2) {
        if let (Some(a), Some(b)) = (values.get(w[0]), values.get(w[1])) {
            if a >= b {
                return Err(err(spec, format!(
                    "hac errors need one row per time position, but order_by column `{order_by}` has the value {b} in more than one row used (table rows {} and {}); restrict the sample to one series or use cluster errors",
                    w[0] + 1, w[1] + 1
                )));
            }
        }
    }
    Ok(())
}

/// The Newey–West (1994) bandwidth from the scores of a preliminary fit: OLS, or for IV
/// estimators 2SLS (first-stage fitted regressors and structural residuals).
fn automatic(spec: &Spec, s: &Scores, iv: bool, positions: &[usize]) -> Result<f64> {
    let e = |x: estimate::EstimateError| err(spec, format!("hac bandwidth: {x}"));
    let pre = CovSpec::Hc0;
    let (regressors, resid) = if iv {
        let fit = estimate::tsls(
            s.y,
            s.exog,
            s.focal,
            s.instruments,
            s.has_constant,
            &pre,
            s.absorbed,
        )
        .map_err(e)?;
        let stages = estimate::first_stages(
            s.exog,
            s.focal,
            s.instruments,
            s.has_constant,
            &pre,
            s.absorbed,
        )
        .map_err(e)?;
        let mut xhat = DMatrix::zeros(s.y.len(), s.focal.ncols() + s.exog.ncols());
        for (j, st) in stages.iter().enumerate() {
            xhat.set_column(j, &st.fit.fitted);
        }
        xhat.columns_mut(s.focal.ncols(), s.exog.ncols())
            .copy_from(s.exog);
        (xhat, fit.resid)
    } else {
        let mut x = DMatrix::zeros(s.y.len(), s.focal.ncols() + s.exog.ncols());
        x.columns_mut(0, s.focal.ncols()).copy_from(s.focal);
        x.columns_mut(s.focal.ncols(), s.exog.ncols())
            .copy_from(s.exog);
        let fit = estimate::ols(s.y, &x, s.has_constant, &pre, s.absorbed).map_err(e)?;
        (x, fit.resid)
    };
    let constant = s
        .exog_names
        .iter()
        .position(|n| n == "intercept")
        .map(|j| s.focal.ncols() + j);
    estimate::newey_west_1994_bandwidth(&regressors, constant, &resid, positions).map_err(e)
}
