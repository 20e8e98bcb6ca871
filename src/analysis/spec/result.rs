//! What results.json records of a specification: its terms, its sample, the deviations its
//! fit raised and the model-based blocks every specification carries.

use super::fit::Estimated;
use super::{Prepared, ResampleContext};
use crate::analysis::degenerate::{self, OutcomeProblem};
use crate::deviation::{Deviation, DeviationCode};
use crate::distribution::{Reference, TestStatistic};
use crate::estimate::LinearFit;
use crate::inference::{self, Direction};
use crate::plan::{Distribution, Errors, Spec};
use crate::results::{CoefDistribution, LpmInfo, SampleInfo, SpecResult, Term, TestResult};
use std::collections::BTreeMap;

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

/// The reference distribution of `fit`'s single-coefficient tests under `spec`.
pub(super) fn reference_for(spec: &Spec, fit: &LinearFit) -> Reference {
    match spec.distribution {
        Distribution::Normal => Reference::Normal,
        Distribution::T => fit.coef_reference,
    }
}

/// Terms by name.
pub(super) fn terms_of(
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

/// A test as results.json records it (a statistic outside its support withheld).
pub(super) fn test(t: &TestStatistic) -> TestResult {
    degenerate::in_support(TestResult {
        statistic: t.statistic,
        p_value: inference::test_p_value(t),
        distribution: t.reference,
    })
}

/// The deviations a fit raises: a degenerate outcome, terms dropped as collinear, singleton
/// rows dropped.
pub(super) fn fit_deviations(
    prepared: &Prepared,
    degenerate: Option<&OutcomeProblem>,
    deviations: &mut Vec<Deviation>,
) {
    let (spec, d) = (prepared.spec, &prepared.d);
    if let Some(problem) = degenerate {
        deviations.push(Deviation::new(
            DeviationCode::OutcomeDegenerate,
            spec.id.clone(),
            format!(
                "{}; its t statistics, p-values and the tests involving the outcome are not reported, and its hypotheses are undetermined",
                problem.reason
            ),
        ));
    }
    for name in &prepared.p.dropped {
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
}

/// The R² of the fit in levels: with absorbed fixed effects, against the outcome before
/// sweeping (the fit's own R² is then the within R²).
fn r_squared(prepared: &Prepared, fit: &LinearFit) -> f64 {
    let d = &prepared.d;
    if d.fixed_effects.is_empty() {
        return super::weighted::r_squared(fit, d.y.column(0), d);
    }
    super::weighted::levels_r_squared(fit, d)
}

/// The specification's results before the IV diagnostics are added.
// Long: one struct literal, one line per results.json field, read top to bottom.
pub(super) fn spec_result(
    prepared: &Prepared,
    estimated: &Estimated,
    reference: &Reference,
    lpm: Option<LpmInfo>,
    rc: &ResampleContext,
) -> SpecResult {
    let (spec, d, p, fit) = (prepared.spec, &prepared.d, &prepared.p, &estimated.fit);
    let names: Vec<String> = p.focal_names.iter().chain(&p.exog_names).cloned().collect();
    let absorbing = !d.fixed_effects.is_empty();
    SpecResult {
        title: spec.title.clone(),
        estimator: spec.estimator.into(),
        outcome: spec.outcome.clone(),
        n: fit.n,
        df_resid: fit.df_resid,
        errors: (&spec.errors).into(),
        cluster_by: match &spec.errors {
            Errors::Cluster(by) => Some(by.clone()),
            _ => None,
        },
        clusters: fit.clusters,
        hac: prepared.hac.clone(),
        distribution: match spec.distribution {
            Distribution::T => CoefDistribution::T,
            Distribution::Normal => CoefDistribution::Normal,
        },
        df: match reference {
            Reference::StudentT { df } => Some(*df),
            _ => None,
        },
        confidence: spec.confidence,
        r_squared: r_squared(prepared, fit),
        within_r_squared: absorbing.then(|| super::weighted::r_squared(fit, d.y.column(0), d)),
        residual_sd: fit.residual_sd,
        terms: terms_of(fit, &names, reference, spec.confidence),
        fixed_effects: d.fixed_effects.iter().cloned().collect(),
        absorbed_df: d.absorbed.df,
        absorbed_nested_df: d.absorbed.nested_df,
        singletons_dropped: d.singletons,
        kappa: estimated.kappa,
        dropped_terms: p.dropped.clone(),
        sample: SampleInfo {
            table_rows: d.n_table,
            in_sample: d.n_sample,
            dropped_missing: d.n_sample - d.n - d.singletons - d.zero_weights,
            dropped_zero_weight: d.weights.as_ref().map(|_| d.zero_weights),
        },
        weights: spec.weights.clone(),
        first_stage: None,
        reduced_form: None,
        endogeneity: None,
        overidentification: None,
        weak_instruments: None,
        anderson_rubin: None,
        lm_clr: None,
        liml: None,
        linear_probability: lpm,
        arms: crate::analysis::arms::summarise(
            spec,
            prepared.table,
            d,
            rc.assignment.map(|a| a.variable.as_str()),
        ),
        exploratory: spec.exploratory,
        pre_registered: !spec.exploratory,
    }
}
