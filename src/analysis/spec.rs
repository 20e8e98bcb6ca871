//! Estimating one specification: design → collinearity check → fit → diagnostics → results.

use crate::data::{design, Design, Table, FE_PREFIX};
use crate::deviation::{Deviation, Severity};
use crate::distribution::{Reference, TestStatistic};
use crate::error::{Error, Result};
use crate::estimate::{self, CovSpec, EstimateError, LinearFit};
use crate::inference::{self, Direction};
use crate::plan::{ColumnKind, DataSource, Diagnostic, Distribution, Errors, Estimator, Spec};
use crate::results::{
    EndogeneityResult, FirstStageResult, LpmInfo, OveridResult, Regression, SampleInfo, SpecResult,
    Term, TestResult,
};
use nalgebra::{DMatrix, DVector};
use std::collections::BTreeMap;

/// A fitted specification: its results, coefficient references and what it found.
pub struct Fitted {
    /// The results as written.
    pub result: SpecResult,
    /// The reference distribution of single-coefficient tests.
    pub reference: Reference,
    /// Deviations and notes raised while estimating.
    pub deviations: Vec<Deviation>,
}

fn est_err(spec: &Spec, message: impl Into<String>) -> Error {
    Error::Estimation {
        spec: spec.id.clone(),
        message: message.into(),
    }
}

fn cov_spec(spec: &Spec, d: &Design) -> CovSpec {
    match (&spec.errors, &d.clusters) {
        (Errors::Classical, _) => CovSpec::Classical,
        (Errors::Hc0, _) => CovSpec::Hc0,
        (Errors::Hc2, _) => CovSpec::Hc2,
        (Errors::Hc3, _) => CovSpec::Hc3,
        (Errors::Cluster(_), Some((ids, _))) => CovSpec::Cluster { ids: ids.clone() },
        _ => CovSpec::Hc1,
    }
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

fn display(name: &str) -> String {
    match name.strip_prefix(FE_PREFIX) {
        Some(rest) => format!(
            "a `{}` fixed-effect indicator",
            rest.split('#').next().unwrap_or(rest)
        ),
        None => format!("`{name}`"),
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
    let listed: Vec<String> = dependent.iter().map(|&j| display(names[j])).collect();
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

/// Terms by name; fixed-effect indicators, and the intercept when fixed effects absorb it,
/// are not shown.
fn terms_of(
    fit: &LinearFit,
    names: &[String],
    reference: &Reference,
    confidence: f64,
) -> BTreeMap<String, Term> {
    let absorbed = names.iter().any(|n| n.starts_with(FE_PREFIX));
    names
        .iter()
        .enumerate()
        .filter(|(_, n)| !(n.starts_with(FE_PREFIX) || absorbed && n.as_str() == "intercept"))
        .map(|(j, n)| {
            (
                n.clone(),
                term(fit.coef[j], fit.cov[(j, j)], reference, confidence),
            )
        })
        .collect()
}

fn test(t: &TestStatistic) -> TestResult {
    TestResult {
        statistic: t.statistic,
        p_value: inference::test_p_value(t),
        distribution: t.reference,
    }
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
    if spec.estimator == Estimator::Tsls && p.instruments.ncols() < p.focal.ncols() {
        return Err(est_err(spec, "after dropping collinear instruments the specification is under-identified; fix the instrument list"));
    }
    Ok(p)
}

/// Estimate `spec` on `table`.
pub fn fit_spec(spec: &Spec, table: &Table, source: &DataSource) -> Result<Fitted> {
    let d = design(table, spec)?;
    if d.n == 0 {
        return Err(est_err(spec, "no row of the sample is complete in every variable used; check the sample restriction and missing values"));
    }
    let p = parts(spec, &d)?;
    let cov = cov_spec(spec, &d);
    let has_c = d.has_constant;
    let (fit, names) = match spec.estimator {
        Estimator::Ols => {
            let x = hstack(&[&p.focal, &p.exog]);
            let names: Vec<String> = p.focal_names.iter().chain(&p.exog_names).cloned().collect();
            (
                estimate::ols(&d.y, &x, has_c, &cov).map_err(|e| map_estimate_error(spec, e))?,
                names,
            )
        }
        Estimator::Tsls => {
            let names: Vec<String> = p.focal_names.iter().chain(&p.exog_names).cloned().collect();
            (
                estimate::tsls(&d.y, &p.exog, &p.focal, &p.instruments, has_c, &cov)
                    .map_err(|e| map_estimate_error(spec, e))?,
                names,
            )
        }
    };
    let reference = reference_for(spec, &fit);
    let mut deviations = Vec::new();
    for name in &p.dropped {
        let (sev, what) = if name.starts_with(FE_PREFIX) {
            (
                Severity::Note,
                "a redundant fixed-effect indicator was dropped",
            )
        } else {
            (Severity::Deviation, "term dropped as collinear")
        };
        deviations.push(Deviation::new(
            "collinear-dropped",
            sev,
            format!("{}.{}", spec.id, name),
            format!("{what}: {}", display(name)),
        ));
    }
    let lpm = lpm_check(spec, source, &fit, &mut deviations);
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
        distribution: match spec.distribution {
            Distribution::T => "t",
            Distribution::Normal => "normal",
        },
        df: match reference {
            Reference::StudentT { df } => Some(df),
            _ => None,
        },
        confidence: spec.confidence,
        r_squared: fit.r_squared,
        residual_sd: fit.residual_sd,
        terms: terms_of(&fit, &names, &reference, spec.confidence),
        fixed_effects: d.fixed_effects.iter().cloned().collect(),
        dropped_terms: p
            .dropped
            .iter()
            .filter(|n| !n.starts_with(FE_PREFIX))
            .cloned()
            .collect(),
        sample: SampleInfo {
            table_rows: d.n_table,
            in_sample: d.n_sample,
            dropped_missing: d.n_sample - d.n,
        },
        first_stage: None,
        reduced_form: None,
        endogeneity: None,
        overidentification: None,
        linear_probability: lpm,
        exploratory: spec.exploratory,
        pre_registered: !spec.exploratory,
    };
    if spec.estimator == Estimator::Tsls {
        diagnostics(spec, &d, &p, &cov, &mut result)?;
    }
    Ok(Fitted {
        result,
        reference,
        deviations,
    })
}

fn lpm_check(
    spec: &Spec,
    source: &DataSource,
    fit: &LinearFit,
    devs: &mut Vec<Deviation>,
) -> Option<LpmInfo> {
    let binary = source
        .columns
        .get(&spec.outcome)
        .is_some_and(|c| c.kind == ColumnKind::Binary);
    if !binary {
        return None;
    }
    let outside = fit.fitted.iter().filter(|v| **v < 0.0 || **v > 1.0).count();
    if spec.errors == Errors::Classical {
        devs.push(Deviation::new("lpm-classical-errors", Severity::Note, spec.id.clone(), "the outcome is binary (a linear probability model), whose errors are heteroskedastic by construction; classical standard errors are not valid here, robust ones (hc1 or cluster) are recommended"));
    }
    Some(LpmInfo {
        fitted_outside_unit_interval: outside,
    })
}

fn diagnostics(
    spec: &Spec,
    d: &Design,
    p: &Parts,
    cov: &CovSpec,
    result: &mut SpecResult,
) -> Result<()> {
    let err = |e| map_estimate_error(spec, e);
    let has_c = d.has_constant;
    let z_names: Vec<String> = p
        .instrument_names
        .iter()
        .chain(&p.exog_names)
        .cloned()
        .collect();
    if spec.diagnostics.contains(&Diagnostic::FirstStage) {
        let stages =
            estimate::first_stages(&p.exog, &p.focal, &p.instruments, has_c, cov).map_err(err)?;
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
                    r_squared: s.fit.r_squared,
                },
            );
        }
        result.first_stage = Some(out);
    }
    if spec.diagnostics.contains(&Diagnostic::ReducedForm) {
        let rf = estimate::reduced_form(&d.y, &p.exog, &p.instruments, has_c, cov).map_err(err)?;
        let reference = reference_for(spec, &rf);
        result.reduced_form = Some(Regression {
            outcome: spec.outcome.clone(),
            terms: terms_of(&rf, &z_names, &reference, spec.confidence),
            r_squared: rf.r_squared,
            n: rf.n,
        });
    }
    if spec.diagnostics.contains(&Diagnostic::Endogeneity) {
        let e = estimate::endogeneity(&d.y, &p.exog, &p.focal, &p.instruments, has_c, cov)
            .map_err(err)?;
        result.endogeneity = Some(EndogeneityResult {
            control_function: test(&e.control_function),
            durbin: test(&e.durbin),
            wu_hausman: test(&e.wu_hausman),
        });
    }
    if spec.diagnostics.contains(&Diagnostic::Overidentification) {
        let o =
            estimate::overidentification(&d.y, &p.exog, &p.focal, &p.instruments).map_err(err)?;
        result.overidentification = o.map(|o| OveridResult {
            sargan: test(&o.sargan),
            basmann: test(&o.basmann),
        });
    }
    Ok(())
}
