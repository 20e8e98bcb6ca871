//! Estimating one specification: design → collinearity check → fit → diagnostics → results.

use crate::data::{design, Design, LabelIdsError, Table};
use crate::deviation::{Deviation, DeviationCode};
use crate::distribution::{Reference, TestStatistic};
use crate::error::{Error, Result};
use crate::estimate::{self, CovSpec, EstimateError, LinearFit};
use crate::inference::{self, Direction};
use crate::plan::{
    Assignment, ColumnKind, DataSource, Diagnostic, Distribution, Errors, Estimator, Method,
    Resampling, Spec,
};
use crate::results::{
    AlternativeEstimate, AndersonRubinResult, EndogeneityResult, FirstStageResult, LmClrResult,
    LpmInfo, OveridResult, Regression, SampleInfo, SetPiece, SpecResult, StockYogoValue, Term,
    TestResult, WeakInstrumentResult,
};
use nalgebra::{DMatrix, DVector};
use std::collections::BTreeMap;

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
    /// Resampled tests by (hypothesis id, method name).
    pub resampled: BTreeMap<(String, &'static str), estimate::ResampleResult>,
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

/// The name of a resampling method in results.json.
pub fn method_name(m: &Method) -> &'static str {
    match m {
        Method::Model => "model",
        Method::Randomization { .. } => "randomization",
        Method::WildBootstrap { .. } => "wild-bootstrap",
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
    /// A cluster-count rule may switch the hypotheses to the wild cluster bootstrap.
    pub wild_bootstrap: bool,
    /// Resampled tests of hypotheses on this specification.
    pub resample: Vec<ResampleNeed>,
}

fn est_err(spec: &Spec, message: impl Into<String>) -> Error {
    Error::Estimation {
        spec: spec.id.clone(),
        message: message.into(),
    }
}

/// The covariance of a specification without HAC errors (see [`crate::data::cov_spec`]).
fn cov_spec(spec: &Spec, d: &Design) -> Result<CovSpec> {
    let clusters = d.clusters.iter().map(|(ids, _)| ids.clone()).collect();
    crate::data::cov_spec(&spec.errors, clusters).map_err(|gap| est_err(spec, gap.to_string()))
}

/// Columns of `m` selected by `keep`.
fn select(m: &DMatrix<f64>, keep: &[usize]) -> DMatrix<f64> {
    DMatrix::from_fn(m.nrows(), keep.len(), |i, j| m[(i, keep[j])])
}

fn hstack(blocks: &[&DMatrix<f64>]) -> DMatrix<f64> {
    let n = blocks.iter().map(|b| b.nrows()).max().unwrap_or(0);
    let cols: Vec<DVector<f64>> = blocks
        .iter()
        .flat_map(|b| b.column_iter().map(|c| c.into_owned()))
        .collect();
    if cols.is_empty() {
        DMatrix::zeros(n, 0)
    } else {
        DMatrix::from_columns(&cols)
    }
}

/// Resolve collinearity among `[exog | extra]`: returns the columns of `exog` and of `extra`
/// to keep, recording dropped names, or fails naming the dependent columns.
fn resolve(
    spec: &Spec,
    exog: &DMatrix<f64>,
    exog_names: &[String],
    extra: &DMatrix<f64>,
    extra_names: &[String],
    what: &str,
    dropped: &mut Vec<String>,
) -> Result<(Vec<usize>, Vec<usize>)> {
    let x = hstack(&[exog, extra]);
    let names: Vec<&String> = exog_names.iter().chain(extra_names).collect();
    let dependent = estimate::collinear_columns(&x);
    if dependent.is_empty() {
        return Ok(((0..exog.ncols()).collect(), (0..extra.ncols()).collect()));
    }
    let listed: Vec<String> = dependent
        .iter()
        .map(|&j| format!("`{}`", names[j]))
        .collect();
    if !spec.drop_collinear {
        return Err(est_err(spec, format!(
            "rank-deficient design: {} {} a linear combination of the other {what}; remove the term(s) or set on_collinear = \"drop\" (a dropped term is reported as a deviation)",
            listed.join(", "), if listed.len() == 1 { "is" } else { "are" }
        )));
    }
    dropped.extend(dependent.iter().map(|&j| names[j].clone()));
    let keep_e = (0..exog.ncols())
        .filter(|j| !dependent.contains(j))
        .collect();
    let keep_x = (0..extra.ncols())
        .filter(|j| !dependent.contains(&(j + exog.ncols())))
        .collect();
    Ok((keep_e, keep_x))
}

fn map_estimate_error(spec: &Spec, e: EstimateError) -> Error {
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

/// A term's estimate, standard error, t, two-sided p and interval.
pub fn term(estimate: f64, variance: f64, reference: &Reference, confidence: f64) -> Term {
    let std_error = variance.max(0.0).sqrt();
    let statistic = estimate / std_error;
    Term {
        estimate,
        std_error,
        statistic,
        p_value: inference::p_value(statistic, reference, Direction::TwoSided),
        ci: inference::confidence_interval(estimate, std_error, reference, confidence),
    }
}

fn reference_for(spec: &Spec, fit: &LinearFit) -> Reference {
    match spec.distribution {
        Distribution::Normal => Reference::Normal,
        Distribution::T => fit.coef_reference,
    }
}

/// Terms by name.
fn terms_of(
    fit: &LinearFit,
    names: &[String],
    reference: &Reference,
    confidence: f64,
) -> BTreeMap<String, Term> {
    names
        .iter()
        .enumerate()
        .map(|(j, n)| {
            (
                n.clone(),
                term(fit.coef[j], fit.cov[(j, j)], reference, confidence),
            )
        })
        .collect()
}

fn test(t: &TestStatistic) -> TestResult {
    super::degenerate::in_support(TestResult {
        statistic: t.statistic,
        p_value: inference::test_p_value(t),
        distribution: t.reference,
    })
}

struct Parts {
    exog: DMatrix<f64>,
    exog_names: Vec<String>,
    focal: DMatrix<f64>,
    focal_names: Vec<String>,
    instruments: DMatrix<f64>,
    instrument_names: Vec<String>,
    dropped: Vec<String>,
}

fn pick(names: &[String], keep: &[usize]) -> Vec<String> {
    keep.iter().map(|&j| names[j].clone()).collect()
}

fn parts(spec: &Spec, d: &Design) -> Result<Parts> {
    let mut dropped = Vec::new();
    let (ke, kf) = resolve(
        spec,
        &d.exog,
        &d.exog_names,
        &d.focal,
        &d.focal_names,
        "regressors",
        &mut dropped,
    )?;
    let exog = select(&d.exog, &ke);
    let exog_names = pick(&d.exog_names, &ke);
    let (_, ki) = resolve(
        spec,
        &exog,
        &exog_names,
        &d.instruments,
        &d.instrument_names,
        "instruments and controls",
        &mut dropped,
    )?;
    let p = Parts {
        focal: select(&d.focal, &kf),
        focal_names: pick(&d.focal_names, &kf),
        instruments: select(&d.instruments, &ki),
        instrument_names: pick(&d.instrument_names, &ki),
        exog,
        exog_names,
        dropped,
    };
    if spec.estimator.is_iv() && p.instruments.ncols() < p.focal.ncols() {
        return Err(est_err(spec, "after dropping collinear instruments the specification is under-identified; fix the instrument list"));
    }
    Ok(p)
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
    /// a rehearsal, which reports only whether each hypothesis is supported, does not: the
    /// inversion costs some fifty further tests per hypothesis).
    pub intervals: bool,
}

/// Estimate `spec` on `table`, computing also what `needs` asks for.
pub fn fit_spec(
    spec: &Spec,
    table: &Table,
    source: &DataSource,
    needs: &Needs,
    rc: &ResampleContext,
) -> Result<Fitted> {
    let d = design(table, spec)?;
    if d.n == 0 && d.singletons > 0 {
        return Err(est_err(spec, format!(
            "all {} complete rows of the sample are alone in their level of the fixed effect(s) `{}`, and such rows are dropped (they carry no information), so none is left; use a coarser fixed effect or none",
            d.singletons,
            spec.fixed_effects.join("`, `")
        )));
    }
    if d.n == 0 {
        return Err(est_err(spec, "no row of the sample is complete in every variable used; check the sample restriction and missing values"));
    }
    let mut deviations = Vec::new();
    let d = absorbed_columns(spec, d, &mut deviations)?;
    super::degenerate::check_scales(spec, &d)?;
    let p = parts(spec, &d)?;
    let scores = super::hac::Scores {
        y: &d.y,
        exog: &p.exog,
        exog_names: &p.exog_names,
        focal: &p.focal,
        instruments: &p.instruments,
        has_constant: d.has_constant,
        absorbed: &d.absorbed,
    };
    let (cov, hac) = match super::hac::resolve(spec, table, &d, &scores, spec.estimator.is_iv())? {
        Some((cov, record)) => (cov, Some(record)),
        None => (cov_spec(spec, &d)?, None),
    };
    let has_c = d.has_constant;
    let ab = &d.absorbed;
    let err = |e| map_estimate_error(spec, e);
    let names: Vec<String> = p.focal_names.iter().chain(&p.exog_names).cloned().collect();
    let mut kappa = None;
    // An IV specification's data are validated and its instruments factorised once, for
    // the fit and every diagnostic.
    let iv = if spec.estimator.is_iv() {
        Some(estimate::IvProblem::new(&d.y, &p.exog, &p.focal, &p.instruments).map_err(err)?)
    } else {
        None
    };
    let fit = match (&iv, spec.estimator) {
        (Some(iv), Estimator::Tsls) => iv.tsls(has_c, &cov, ab).map_err(err)?,
        (Some(iv), Estimator::Liml | Estimator::Fuller) => {
            let which = if spec.estimator == Estimator::Liml {
                estimate::KClass::Liml
            } else {
                estimate::KClass::Fuller {
                    alpha: spec.fuller_k,
                }
            };
            let k = iv.kclass(has_c, &cov, which, ab).map_err(err)?;
            kappa = Some(k.kappa);
            k.fit
        }
        _ => {
            let x = hstack(&[&p.focal, &p.exog]);
            estimate::ols(&d.y, &x, has_c, &cov, ab).map_err(err)?
        }
    };
    let reference = reference_for(spec, &fit);
    let degenerate = super::degenerate::outcome_problem(spec, &d, fit.rss);
    if let Some(problem) = &degenerate {
        deviations.push(Deviation::new(
            DeviationCode::OutcomeDegenerate,
            spec.id.clone(),
            format!(
                "{}; its t statistics, p-values and the tests involving the outcome are not reported, and its hypotheses are undetermined",
                problem.reason
            ),
        ));
    }
    for name in &p.dropped {
        deviations.push(Deviation::new(
            DeviationCode::CollinearDropped,
            format!("{}.{}", spec.id, name),
            format!("term dropped as collinear: `{name}`"),
        ));
    }
    if d.singletons > 0 {
        deviations.push(Deviation::new(
            DeviationCode::SingletonsDropped,
            spec.id.clone(),
            format!(
                "{} observation(s) alone in their level of a fixed effect were dropped before estimation (they would be fitted exactly and carry no information on the other coefficients)",
                d.singletons
            ),
        ));
    }
    let lpm = lpm_check(spec, source, &fit, &d, &mut deviations);
    let absorbing = !d.fixed_effects.is_empty();
    let r_squared = if absorbing {
        let mean = d.y_raw.mean();
        let tss: f64 = d.y_raw.iter().map(|v| (v - mean) * (v - mean)).sum();
        1.0 - fit.rss / tss
    } else {
        fit.r_squared
    };
    let mut result = SpecResult {
        title: spec.title.clone(),
        estimator: spec.estimator.name(),
        outcome: spec.outcome.clone(),
        n: fit.n,
        df_resid: fit.df_resid,
        errors: spec.errors.name(),
        cluster_by: match &spec.errors {
            Errors::Cluster(by) => Some(by.clone()),
            _ => None,
        },
        clusters: fit.clusters,
        hac,
        distribution: match spec.distribution {
            Distribution::T => "t",
            Distribution::Normal => "normal",
        },
        df: match reference {
            Reference::StudentT { df } => Some(df),
            _ => None,
        },
        confidence: spec.confidence,
        r_squared,
        within_r_squared: absorbing.then_some(fit.r_squared),
        residual_sd: fit.residual_sd,
        terms: terms_of(&fit, &names, &reference, spec.confidence),
        fixed_effects: d.fixed_effects.iter().cloned().collect(),
        absorbed_df: d.absorbed.df,
        absorbed_nested_df: d.absorbed.nested_df,
        singletons_dropped: d.singletons,
        kappa,
        dropped_terms: p.dropped.clone(),
        sample: SampleInfo {
            table_rows: d.n_table,
            in_sample: d.n_sample,
            dropped_missing: d.n_sample - d.n - d.singletons,
        },
        first_stage: None,
        reduced_form: None,
        endogeneity: None,
        overidentification: None,
        weak_instruments: None,
        anderson_rubin: None,
        lm_clr: None,
        liml: None,
        linear_probability: lpm,
        arms: super::arms::summarise(spec, table, &d, rc.assignment.map(|a| a.variable.as_str())),
        exploratory: spec.exploratory,
        pre_registered: !spec.exploratory,
    };
    let mut ar_tests = Vec::new();
    if let Some(iv) = &iv {
        let ctx = IvContext {
            spec,
            iv,
            p: &p,
            cov: &cov,
            has_constant: d.has_constant,
            absorbed: &d.absorbed,
            needs,
        };
        ar_tests = ctx.diagnostics(&mut result)?;
    }
    if let Some(problem) = &degenerate {
        super::degenerate::withhold(&mut result, problem.constant);
        ar_tests.clear();
    }
    let mut resampled = BTreeMap::new();
    let mut ri_intervals = BTreeMap::new();
    let kept: Vec<&String> = p.focal_names.iter().chain(&p.exog_names).collect();
    for need in &needs.resample {
        let clusters = d.clusters.first().map(|(_, g)| *g);
        if need
            .only_below_clusters
            .is_some_and(|g| clusters.is_some_and(|c| c >= g))
        {
            continue;
        }
        // A dropped term, or an outcome with nothing to test, leaves its hypothesis
        // undetermined (reported by the hypothesis).
        if !kept.contains(&&need.term) || degenerate.is_some() {
            continue;
        }
        let (r, interval) = resample(spec, table, &d, &p, &cov, need, rc)?;
        if let Some(i) = interval {
            ri_intervals.insert(need.hypothesis.clone(), i);
        }
        resampled.insert((need.hypothesis.clone(), method_name(&need.method)), r);
    }
    // Only resampled tests are ever lined up across specifications.
    let resample_units = if resampled.is_empty() {
        String::new()
    } else {
        let rows_bytes: Vec<u8> = d
            .rows
            .iter()
            .flat_map(|r| (*r as u64).to_le_bytes())
            .collect();
        format!(
            "{}:{}:{:?}",
            table.id,
            crate::ledger::sha256_hex(&rows_bytes),
            result.cluster_by
        )
    };
    Ok(Fitted {
        result,
        degenerate: degenerate.map(|p| p.reason),
        reference,
        deviations,
        ar_tests,
        resampled,
        ri_intervals,
        resample_units,
    })
}

/// Group ids of `column` for the design's rows.
fn ids_of(table: &Table, column: &str, d: &Design, spec: &Spec) -> Result<Vec<usize>> {
    table.label_ids(column, &d.rows).map_err(|e| match e {
        LabelIdsError::NoColumn => est_err(
            spec,
            format!(
                "assignment column `{column}` is not available in data table `{}`",
                table.id
            ),
        ),
        LabelIdsError::Missing => est_err(spec, format!("assignment column `{column}` is missing in a row the specification uses; randomization inference needs it in every row")),
    })
}

/// The label with dense id `id` of `column` over `rows` (ids in order of first appearance,
/// as [`Table::label_ids`] gives them).
fn nth_label(table: &Table, column: &str, rows: &[usize], id: usize) -> Option<String> {
    let labels = table.labels.get(column)?;
    let mut seen = std::collections::BTreeSet::new();
    rows.iter()
        .filter_map(|&r| labels.get(r)?.as_deref())
        .filter(|l| seen.insert(*l))
        .nth(id)
        .map(String::from)
}

/// One resampled test of `need` on the fitted design.
fn resample(
    spec: &Spec,
    table: &Table,
    d: &Design,
    p: &Parts,
    cov: &CovSpec,
    need: &ResampleNeed,
    rc: &ResampleContext,
) -> Result<(
    estimate::ResampleResult,
    Option<crate::results::RandomizationIntervalResult>,
)> {
    let r = rc
        .resampling
        .ok_or_else(|| est_err(spec, "resampled inference needs [resampling]"))?;
    let draws = estimate::Draws {
        draws: r.draws,
        seed: r.seed,
        exact_below: r.exact_below,
    };
    let cluster_label = |id: usize| {
        rc.assignment
            .and_then(|a| a.clusters.as_deref())
            .and_then(|c| Some((c, nth_label(table, c, &d.rows, id)?)))
            .map_or(format!("number {}", id + 1), |(c, l)| {
                format!(
                    "`{}` of `{c}`",
                    crate::escape::clip(&l, crate::escape::SHOWN)
                )
            })
    };
    let err = |e: estimate::ResampleError| {
        let what = match &e {
            estimate::ResampleError::VariesWithinCluster { cluster } => format!(
                "the treatment is not constant within cluster {}; a cluster-randomised design assigns whole clusters, so check the data or the [assignment] clusters column",
                cluster_label(*cluster)
            ),
            estimate::ResampleError::ClusterSpansBlocks { cluster } => format!(
                "cluster {} lies in more than one block; in a blocked cluster design each cluster lies in one block",
                cluster_label(*cluster)
            ),
            e => e.to_string(),
        };
        est_err(
            spec,
            format!(
                "{} test of hypothesis `{}`: {what}",
                method_name(&need.method),
                need.hypothesis
            ),
        )
    };
    let x = hstack(&[&p.focal, &p.exog]);
    let names: Vec<&String> = p.focal_names.iter().chain(&p.exog_names).collect();
    let index = names.iter().position(|n| **n == need.term).ok_or_else(|| {
        est_err(
            spec,
            format!(
                "term `{}` was dropped, so hypothesis `{}` cannot be resampled",
                need.term, need.hypothesis
            ),
        )
    })?;
    match need.method {
        Method::Randomization { studentized } => {
            let a = rc
                .assignment
                .ok_or_else(|| est_err(spec, "randomization inference needs [assignment]"))?;
            let design = match (&a.blocks, &a.clusters) {
                (None, None) => estimate::AssignmentDesign::Complete,
                (Some(b), None) => estimate::AssignmentDesign::Blocked {
                    blocks: ids_of(table, b, d, spec)?,
                },
                (None, Some(c)) => estimate::AssignmentDesign::Clustered {
                    clusters: ids_of(table, c, d, spec)?,
                },
                (Some(b), Some(c)) => estimate::AssignmentDesign::BlockedClustered {
                    blocks: ids_of(table, b, d, spec)?,
                    clusters: ids_of(table, c, d, spec)?,
                },
            };
            if spec.estimator == Estimator::Ols {
                let statistic = if studentized {
                    estimate::RiStatistic::T
                } else {
                    estimate::RiStatistic::Estimate
                };
                let test = estimate::randomization_test(
                    &d.y,
                    &x,
                    index,
                    need.null,
                    cov,
                    &d.absorbed,
                    &design,
                    statistic,
                    &draws,
                )
                .map_err(err)?;
                let problem = estimate::IntervalProblem {
                    y: &d.y,
                    x: &x,
                    treatment: index,
                    cov,
                    absorbed: &d.absorbed,
                    design: &design,
                    statistic,
                    plan: &draws,
                };
                let interval = if rc.intervals {
                    ri_interval(&problem, rc.alpha).map_err(err)?
                } else {
                    None
                };
                Ok((test, interval))
            } else {
                estimate::randomization_ar(
                    &d.y,
                    &p.exog,
                    &p.focal,
                    &p.instruments,
                    need.null,
                    cov,
                    &d.absorbed,
                    &design,
                    &draws,
                )
                .map(|t| (t, None))
                .map_err(err)
            }
        }
        Method::WildBootstrap { webb } => {
            let Some((ids, _)) = d.clusters.first() else {
                return Err(est_err(
                    spec,
                    "the wild cluster bootstrap needs clustered errors",
                ));
            };
            if d.absorbed.nested_df < d.absorbed.df {
                return Err(est_err(spec, format!(
                    "hypothesis `{}`: the wild cluster bootstrap with absorbed fixed effects is exact only when every fixed effect is nested in the cluster variable, and `{}` is not; drop the fixed effect (or use one nested in the clusters)",
                    need.hypothesis,
                    spec.fixed_effects.join("`, `")
                )));
            }
            let weights = if webb {
                estimate::Weights::Webb
            } else {
                estimate::Weights::Rademacher
            };
            if spec.estimator == Estimator::Tsls {
                estimate::wild_restricted_efficient(
                    &d.y,
                    &p.exog,
                    &p.focal,
                    &p.instruments,
                    need.null,
                    ids,
                    weights,
                    &draws,
                    &d.absorbed,
                )
                .map(|t| (t, None))
                .map_err(err)
            } else {
                estimate::wild_cluster_bootstrap(
                    &d.y,
                    &x,
                    index,
                    need.null,
                    ids,
                    weights,
                    &draws,
                    &d.absorbed,
                )
                .map(|t| (t, None))
                .map_err(err)
            }
        }
        Method::Model => Err(est_err(spec, "no resampling was asked for")),
    }
}

/// The randomization interval of `problem`'s treatment coefficient at `alpha`, stepping
/// from the OLS estimate by its model standard error (module `estimate::resample::interval`).
fn ri_interval(
    problem: &estimate::IntervalProblem,
    alpha: f64,
) -> std::result::Result<Option<crate::results::RandomizationIntervalResult>, estimate::ResampleError>
{
    let fit = estimate::ols(problem.y, problem.x, true, problem.cov, problem.absorbed)?;
    let j = problem.treatment;
    let found =
        estimate::randomization_interval(problem, fit.coef[j], fit.cov[(j, j)].sqrt(), alpha)?;
    Ok(found.map(|i| crate::results::RandomizationIntervalResult {
        lower: i.lower,
        upper: i.upper,
        level: 1.0 - alpha,
        tolerance: i.tolerance,
        evaluations: i.evaluations,
    }))
}

/// Handle columns the fixed-effect sweep left without variation: an error naming them, or
/// (with on_collinear = "drop") dropping them as deviations. The outcome or an endogenous
/// regressor or instrument without within variation is always an error.
fn absorbed_columns(spec: &Spec, mut d: Design, devs: &mut Vec<Deviation>) -> Result<Design> {
    if d.absorbed_columns.is_empty() {
        return Ok(d);
    }
    let fes = spec.fixed_effects.join("`, `");
    let structural: Vec<&String> = d
        .absorbed_columns
        .iter()
        .filter(|c| !spec.controls.contains(c))
        .collect();
    if !structural.is_empty() || !spec.drop_collinear {
        let names: Vec<String> = d
            .absorbed_columns
            .iter()
            .map(|c| format!("`{c}`"))
            .collect();
        let advice = if structural.is_empty() {
            "remove it or set on_collinear = \"drop\""
        } else {
            "the specification cannot be estimated with these fixed effects; remove the fixed effect or change the specification"
        };
        return Err(est_err(spec, format!(
            "{} {} constant within the fixed effects `{fes}` (no variation left after absorbing them); {advice}",
            names.join(", "),
            if names.len() == 1 { "is" } else { "are" }
        )));
    }
    let keep: Vec<usize> = (0..d.exog.ncols())
        .filter(|&j| !d.absorbed_columns.contains(&d.exog_names[j]))
        .collect();
    for c in &d.absorbed_columns {
        devs.push(Deviation::new(
            DeviationCode::CollinearDropped,
            format!("{}.{}", spec.id, c),
            format!("term dropped: `{c}` is constant within the fixed effects `{fes}`"),
        ));
    }
    d.exog = select(&d.exog, &keep);
    d.exog_names = pick(&d.exog_names, &keep);
    Ok(d)
}

fn lpm_check(
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
        .zip(fit.resid.iter())
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

fn set_pieces(set: &estimate::ConfidenceSet) -> Vec<SetPiece> {
    set.pieces
        .iter()
        .map(|(lo, hi)| SetPiece {
            lower: lo.is_finite().then_some(*lo),
            upper: hi.is_finite().then_some(*hi),
        })
        .collect()
}

/// The name of a confidence set's shape in results.json.
pub fn shape_name(set: &estimate::ConfidenceSet) -> &'static str {
    match set.shape() {
        estimate::SetShape::Empty => "empty",
        estimate::SetShape::Bounded => "bounded",
        estimate::SetShape::TwoRays => "two-rays",
        estimate::SetShape::WholeLine => "whole-line",
        estimate::SetShape::Other => "union",
    }
}

/// Everything the IV diagnostics of one specification share.
struct IvContext<'a> {
    spec: &'a Spec,
    /// The specification's IV problem, prepared once (shared factorisations).
    iv: &'a estimate::IvProblem<'a>,
    p: &'a Parts,
    cov: &'a CovSpec,
    has_constant: bool,
    absorbed: &'a estimate::Absorbed,
    needs: &'a Needs,
}

impl IvContext<'_> {
    fn wants(&self, diag: Diagnostic) -> bool {
        self.spec.diagnostics.contains(&diag) || self.needs.diagnostics.contains(&diag)
    }

    /// Fills the diagnostic blocks of `result`; returns the AR tests at the needed nulls.
    fn diagnostics(&self, result: &mut SpecResult) -> Result<Vec<(f64, TestStatistic)>> {
        let (spec, iv, p, cov) = (self.spec, self.iv, self.p, self.cov);
        let err = |e| map_estimate_error(spec, e);
        let has_c = self.has_constant;
        let ab = self.absorbed;
        let z_names: Vec<String> = p
            .instrument_names
            .iter()
            .chain(&p.exog_names)
            .cloned()
            .collect();
        let weak = self.wants(Diagnostic::WeakInstruments) && p.focal.ncols() == 1;
        if self.wants(Diagnostic::FirstStage) || weak {
            let stages = iv.first_stages(has_c, cov, ab).map_err(err)?;
            let mut out = BTreeMap::new();
            for (name, s) in p.focal_names.iter().zip(&stages) {
                let reference = reference_for(spec, &s.fit);
                out.insert(
                    name.clone(),
                    FirstStageResult {
                        terms: terms_of(&s.fit, &z_names, &reference, spec.confidence),
                        f_statistic: s.f.statistic,
                        f_p_value: inference::test_p_value(&s.f),
                        f_distribution: s.f.reference,
                        robust_f_statistic: s.robust_f.statistic,
                        robust_f_p_value: inference::test_p_value(&s.robust_f),
                        robust_f_distribution: s.robust_f.reference,
                        partial_r_squared: s.partial_r_squared,
                        shea_partial_r_squared: s.shea_partial_r_squared,
                        r_squared: s.fit.r_squared,
                    },
                );
            }
            result.first_stage = Some(out);
        }
        if self.wants(Diagnostic::ReducedForm) {
            let rf = iv.reduced_form(has_c, cov, ab).map_err(err)?;
            let reference = reference_for(spec, &rf);
            result.reduced_form = Some(Regression {
                outcome: spec.outcome.clone(),
                terms: terms_of(&rf, &z_names, &reference, spec.confidence),
                r_squared: rf.r_squared,
                n: rf.n,
            });
        }
        if self.wants(Diagnostic::Endogeneity) {
            let e = iv.endogeneity(has_c, cov, ab).map_err(err)?;
            result.endogeneity = Some(EndogeneityResult {
                control_function: test(&e.control_function),
                durbin: test(&e.durbin),
                wu_hausman: test(&e.wu_hausman),
            });
        }
        if self.wants(Diagnostic::Overidentification) {
            let o = iv.overidentification(ab).map_err(err)?;
            let j = match cov {
                CovSpec::TwoWay { .. } => None,
                _ => iv.hansen_j(cov, ab).map_err(err)?,
            };
            result.overidentification = o.map(|o| OveridResult {
                sargan: test(&o.sargan),
                basmann: test(&o.basmann),
                hansen_j: j.as_ref().map(test),
            });
        }
        if self.needs.liml && spec.estimator == Estimator::Tsls {
            let k = iv
                .kclass(has_c, cov, estimate::KClass::Liml, ab)
                .map_err(err)?;
            let names: Vec<String> = p.focal_names.iter().chain(&p.exog_names).cloned().collect();
            let reference = reference_for(spec, &k.fit);
            result.liml = Some(AlternativeEstimate {
                estimator: "liml",
                kappa: k.kappa,
                terms: terms_of(&k.fit, &names, &reference, spec.confidence),
            });
        }
        let mut ar_tests = Vec::new();
        if weak {
            let w = iv
                .weak_instruments(cov, spec.worst_case_bias, ab)
                .map_err(err)?;
            let tf = if p.instruments.ncols() == 1 {
                result
                    .first_stage
                    .as_ref()
                    .and_then(|fs| fs.values().next())
                    .and_then(|s| estimate::tf_critical_value(s.robust_f_statistic, 0.05))
            } else {
                None
            };
            let (stock_yogo, stock_yogo_note) =
                stock_yogo_for(spec.estimator, p.instruments.ncols());
            result.weak_instruments = Some(WeakInstrumentResult {
                effective_f: w.effective_f,
                critical_value: w.critical_value,
                worst_case_bias: w.tau,
                effective_df: w.effective_df,
                weak: w.weak,
                cragg_donald: w.cragg_donald,
                stock_yogo,
                stock_yogo_note,
                tf_critical_value: tf,
            });
            // One set of AR regressions serves the test at 0 with its set, the curve and
            // the tests at the nulls the decision rules need.
            let ar = iv.anderson_rubin_problem(cov, ab).map_err(err)?;
            let at_zero = ar.at(0.0, spec.confidence).map_err(err)?;
            let set = set_pieces(&at_zero.set);
            let curve = super::ar_curve::curve(
                &ar,
                &set,
                p.focal_names.first().and_then(|x| result.terms.get(x)),
            );
            result.anderson_rubin = Some(AndersonRubinResult {
                null: 0.0,
                statistic: at_zero.test.statistic,
                p_value: inference::test_p_value(&at_zero.test),
                distribution: at_zero.test.reference,
                shape: shape_name(&at_zero.set),
                ci: match at_zero.set.pieces.as_slice() {
                    [(lo, hi)] if lo.is_finite() && hi.is_finite() => Some([*lo, *hi]),
                    _ => None,
                },
                set,
                confidence: spec.confidence,
                critical_value: at_zero.critical_value,
                curve,
            });
            // Undefined statistics (an exact fit, Q_T = 0) leave `lm_clr` null; the
            // identification panel says so.
            if let (CovSpec::Classical, Ok(t)) = (cov, iv.lm_clr(ab, 0.0)) {
                result.lm_clr = Some(LmClrResult {
                    null: t.beta0,
                    errors: "homoskedastic",
                    lm: TestResult {
                        statistic: t.lm.statistic,
                        p_value: inference::test_p_value(&t.lm),
                        distribution: t.lm.reference,
                    },
                    clr_statistic: t.clr.statistic,
                    clr_conditioning: t.clr.conditioning,
                    clr_p_value: t.clr.p_value,
                });
            }
            for &null in &self.needs.ar_nulls {
                ar_tests.push((null, ar.test(null).map_err(err)?));
            }
        }
        Ok(ar_tests)
    }
}

/// The Stock–Yogo (2005) critical values of `estimator`'s own tables at `excluded`
/// instruments, and a note on what is not given and why (`None` when nothing is lacking).
/// Stock and Yogo's tables differ by estimator, so a specification never gets another
/// estimator's values: 2SLS gets the 2SLS tables, LIML the LIML table, Fuller none (the
/// Fuller values were not confirmed, see `estimate::StockYogoTable`).
fn stock_yogo_for(
    estimator: crate::plan::Estimator,
    excluded: usize,
) -> (Vec<StockYogoValue>, Option<String>) {
    use crate::plan::Estimator;
    let table = match estimator {
        Estimator::Tsls => estimate::StockYogoTable::Tsls,
        Estimator::Liml => estimate::StockYogoTable::Liml,
        Estimator::Fuller => return (Vec::new(), Some(FULLER_STOCK_YOGO_NOTE.to_string())),
        Estimator::Ols => return (Vec::new(), None),
    };
    let values: Vec<StockYogoValue> = estimate::stock_yogo(table, excluded)
        .into_iter()
        .map(|s| StockYogoValue {
            criterion: s.criterion,
            level: s.level,
            critical_value: s.critical_value,
        })
        .collect();
    let lacking: Vec<String> = table
        .criteria()
        .iter()
        .filter(|&&c| !values.iter().any(|v| v.criterion == c))
        .filter_map(|&c| {
            let rows = estimate::stock_yogo_rows(c)?;
            Some(if excluded < *rows.start() {
                format!(
                    "Stock and Yogo's {} table starts at {} excluded instruments; this specification has {excluded}",
                    stock_yogo_label(c),
                    rows.start()
                )
            } else {
                format!(
                    "{} values are carried for {} to {} excluded instruments, not for {excluded}",
                    stock_yogo_label(c),
                    rows.start(),
                    rows.end()
                )
            })
        })
        .collect();
    let note = match (values.is_empty(), lacking.is_empty()) {
        (_, true) => None,
        (true, false) => Some(format!("none given: {}", lacking.join("; "))),
        (false, false) => Some(lacking.join("; ")),
    };
    (values, note)
}

/// Why a Fuller specification gets no Stock–Yogo values (results.json and the report).
const FULLER_STOCK_YOGO_NOTE: &str = "none given for Fuller's estimator: the Stock and Yogo \
(2005) Fuller values known to this version were not confirmed by the project's simulation check, \
so none are shown, and the 2SLS and LIML values do not apply to a Fuller estimate";

/// A short name for a Stock–Yogo criterion, used in notes.
fn stock_yogo_label(criterion: &str) -> &'static str {
    match criterion {
        "relative-bias" => "2SLS relative-bias",
        "wald-size" => "2SLS Wald-size",
        "liml-wald-size" => "LIML Wald-size",
        _ => "Stock–Yogo",
    }
}
