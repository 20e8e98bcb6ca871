//! Estimating one specification: columns (design, absorbed and collinear columns) → fit →
//! diagnostics → resampled tests → results.
//!
//! One file per concern: `resolve.rs` reads the design and resolves its columns, `fit.rs`
//! chooses the covariance (with the columns, a [`Prepared`]) and fits the estimator,
//! `diagnostics.rs` adds the IV diagnostics, `resample.rs` runs the resampled tests the
//! hypotheses ask for, `result.rs` assembles what results.json records. [`fit_spec`] runs
//! them in that order.

mod diagnostics;
mod fit;
mod resample;
mod resolve;
mod result;
mod weighted;

use crate::data::{Design, Table};
use crate::deviation::Deviation;
use crate::distribution::{Reference, TestStatistic};
use crate::error::{Error, Result};
use crate::estimate::{self, CovSpec};
use crate::plan::{Assignment, DataSource, Diagnostic, Method, Resampling, Spec};
use crate::results::{HacResult, Procedure, SpecResult};
use std::collections::BTreeMap;

pub use diagnostics::DiagnosticOrder;
pub use result::term;

/// A fitted specification: its results, coefficient references and what it found.
pub struct Fitted {
    /// The results as written.
    pub result: SpecResult,
    /// Why the outcome leaves nothing to test (no variation, or fitted exactly), if so; the
    /// specification's hypotheses are then undetermined.
    pub degenerate: Option<String>,
    /// The reference distribution of single-coefficient tests.
    pub reference: Reference,
    /// Deviations and notes raised while estimating.
    pub deviations: Vec<Deviation>,
    /// Anderson–Rubin tests at the nulls asked for in [`Needs::ar_nulls`].
    pub ar_tests: Vec<(f64, TestStatistic)>,
    /// CLR tests at the nulls asked for in [`Needs::clr_nulls`].
    pub clr_tests: Vec<(f64, estimate::ConditionalLr)>,
    /// Resampled tests by (hypothesis id, method name).
    pub resampled: BTreeMap<(String, Procedure), estimate::ResampleResult>,
    /// Randomization-inference intervals of OLS coefficients by hypothesis id.
    pub ri_intervals: BTreeMap<String, crate::results::RandomizationIntervalResult>,
    /// What resampled draws of this specification are draws of: the data table, the rows
    /// used and the clustering, so that tests of several specifications can be lined up
    /// draw by draw only when they resample the same units the same way.
    pub resample_units: String,
}

/// A resampled test a hypothesis needs.
#[derive(Debug, Clone)]
pub struct ResampleNeed {
    /// Hypothesis id.
    pub hypothesis: String,
    /// Term tested.
    pub term: String,
    /// Null value.
    pub null: f64,
    /// How.
    pub method: Method,
    /// Compute only when the specification has fewer clusters than this (a cluster-count
    /// rule's test, useless unless the rule fires).
    pub only_below_clusters: Option<usize>,
}

/// The resampling procedure of a hypothesis' method; `None` for a model-based test.
pub fn procedure(m: &Method) -> Option<Procedure> {
    match m {
        Method::Model => None,
        Method::Randomization { .. } => Some(Procedure::Randomization),
        Method::WildBootstrap { .. } => Some(Procedure::WildBootstrap),
    }
}

/// What beyond the plan's own diagnostics a specification must compute, because a
/// contingency or a hypothesis depends on it.
#[derive(Debug, Clone, Default)]
pub struct Needs {
    /// Diagnostics to add to the specification's own.
    pub diagnostics: Vec<Diagnostic>,
    /// Compute a LIML estimate beside the specification's own.
    pub liml: bool,
    /// Nulls at which the Anderson–Rubin statistic is wanted (hypotheses on the endogenous
    /// regressor).
    pub ar_nulls: Vec<f64>,
    /// Nulls at which the CLR test is wanted (a `clr` rule's hypotheses on the endogenous
    /// regressor).
    pub clr_nulls: Vec<f64>,
    /// A cluster-count rule may switch the hypotheses to the wild cluster bootstrap.
    pub wild_bootstrap: bool,
    /// Resampled tests of hypotheses on this specification.
    pub resample: Vec<ResampleNeed>,
}

/// An estimation error of `spec`.
fn est_err(spec: &Spec, message: impl Into<String>) -> Error {
    Error::Estimation {
        spec: spec.id.clone(),
        message: message.into(),
    }
}

/// The covariance estimator `spec`'s errors ask for, with the design's cluster ids.
fn cov_spec(spec: &Spec, d: &Design) -> Result<CovSpec> {
    let clusters = d.clusters.iter().map(|(ids, _)| ids.clone()).collect();
    crate::data::cov_spec(&spec.errors, clusters).map_err(|gap| est_err(spec, gap.to_string()))
}

/// What resampled tests need from the plan beyond the specification.
pub struct ResampleContext<'a> {
    /// `[assignment]`.
    pub assignment: Option<&'a Assignment>,
    /// `[resampling]`.
    pub resampling: Option<Resampling>,
    /// The plan's `[inference]` alpha (randomization intervals invert the test at it).
    pub alpha: f64,
    /// Whether to invert randomization tests into intervals (a run and its verification do;
    /// a rehearsal, which reports only whether each hypothesis is supported, does not need
    /// them).
    pub intervals: bool,
}

/// One specification's data made ready to fit: the design with absorbed and collinear
/// columns resolved, and the covariance estimator. The fit, every diagnostic and every
/// resampled test read the same one.
struct Prepared<'a> {
    /// The specification.
    spec: &'a Spec,
    /// Its data table.
    table: &'a Table,
    /// The design (fixed effects swept, absorbed controls removed).
    d: Design,
    /// The columns kept after collinearity was resolved.
    p: resolve::Parts,
    /// The covariance estimator of the fit and every diagnostic.
    cov: CovSpec,
    /// The HAC record, for HAC errors.
    hac: Option<HacResult>,
}

/// Estimate `spec` on `table`, computing also what `needs` asks for.
pub fn fit_spec(
    spec: &Spec,
    table: &Table,
    source: &DataSource,
    needs: &Needs,
    rc: &ResampleContext,
    order: DiagnosticOrder,
) -> Result<Fitted> {
    let mut deviations = Vec::new();
    let (mut d, mut p) = resolve::columns(spec, table, source, &mut deviations)?;
    weighted::scale_rows(&mut d, &mut p);
    let (cov, hac) = fit::covariance(spec, table, &d, &p)?;
    let prepared = Prepared {
        spec,
        table,
        d,
        p,
        cov,
        hac,
    };
    let estimated = fit::estimate(&prepared)?;
    let reference = result::reference_for(spec, &estimated.fit);
    let degenerate = super::degenerate::outcome_problem(spec, &prepared.d, estimated.fit.rss);
    result::fit_deviations(&prepared, degenerate.as_ref(), &mut deviations);
    let lpm = fit::lpm_check(spec, source, &estimated.fit, &prepared.d, &mut deviations);
    let mut result = result::spec_result(&prepared, &estimated, &reference, lpm, rc);
    let mut null_tests = match &estimated.iv {
        Some(iv) => diagnostics::IvContext {
            prepared: &prepared,
            iv,
            needs,
            order,
        }
        .diagnostics(&mut result)?,
        None => diagnostics::NullTests::default(),
    };
    if let Some(problem) = &degenerate {
        super::degenerate::withhold(&mut result, problem.constant);
        null_tests = diagnostics::NullTests::default();
    }
    let tests = resample::resampled_tests(&prepared, needs, rc, degenerate.is_some())?;
    let resample_units = resample::units(&prepared, &tests.resampled, &result.cluster_by);
    Ok(Fitted {
        result,
        degenerate: degenerate.map(|p| p.reason),
        reference,
        deviations,
        ar_tests: null_tests.ar,
        clr_tests: null_tests.clr,
        resampled: tests.resampled,
        ri_intervals: tests.ri_intervals,
        resample_units,
    })
}
