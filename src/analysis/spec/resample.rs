//! The resampled tests a specification's hypotheses ask for: randomization tests (with
//! their intervals by test inversion for OLS, Anderson–Rubin statistics for IV) and the wild
//! cluster bootstrap (restricted efficient for 2SLS).

use super::{est_err, procedure, Needs, Prepared, ResampleContext, ResampleNeed};
use crate::data::{LabelIdsError, Table};
use crate::error::{Error, Result};
use crate::estimate::{self, AssignmentDesign, ResampleError, ResampleResult};
use crate::plan::{Assignment, Estimator, Method};
use crate::results::{Procedure, RandomizationIntervalResult};
use nalgebra::DMatrix;
use std::collections::BTreeMap;

/// The resampled tests of one specification.
pub(super) struct Tests {
    /// Tests by (hypothesis id, method name).
    pub(super) resampled: BTreeMap<(String, Procedure), ResampleResult>,
    /// Randomization intervals by hypothesis id.
    pub(super) ri_intervals: BTreeMap<String, RandomizationIntervalResult>,
}

/// Run every resampled test in `needs.resample` that applies: a cluster-count rule's test
/// only below its cluster count, and none for a dropped term or (`degenerate`) an outcome
/// with nothing to test, whose hypotheses are undetermined.
pub(super) fn resampled_tests(
    prepared: &Prepared,
    needs: &Needs,
    rc: &ResampleContext,
    degenerate: bool,
) -> Result<Tests> {
    let mut tests = Tests {
        resampled: BTreeMap::new(),
        ri_intervals: BTreeMap::new(),
    };
    let spec = prepared.spec;
    let unweighable = |n: &&ResampleNeed| {
        matches!(n.method, Method::Randomization { .. }) && !spec.fixed_effects.is_empty()
    };
    if let (Some(w), Some(need)) = (&spec.weights, needs.resample.iter().find(unweighable)) {
        // Refused at `check` (plan/validate); never resample a weighted fit unweighted.
        return Err(super::est_err(spec, format!(
            "hypothesis `{}` asks for a randomization test, which is not available for a specification weighted by `{w}` with fixed effects",
            need.hypothesis
        )));
    }
    let p = &prepared.p;
    let kept: Vec<&String> = p.focal_names.iter().chain(&p.exog_names).collect();
    for need in &needs.resample {
        let clusters = prepared.d.clusters.first().map(|(_, g)| *g);
        if need
            .only_below_clusters
            .is_some_and(|g| clusters.is_some_and(|c| c >= g))
        {
            continue;
        }
        // A dropped term, or an outcome with nothing to test, leaves its hypothesis
        // undetermined (reported by the hypothesis).
        if !kept.contains(&&need.term) || degenerate {
            continue;
        }
        let (r, interval) = resample(prepared, need, rc)?;
        if let Some(i) = interval {
            tests.ri_intervals.insert(need.hypothesis.clone(), i);
        }
        if let Some(p) = procedure(&need.method) {
            tests.resampled.insert((need.hypothesis.clone(), p), r);
        }
    }
    Ok(tests)
}

/// What the resampled draws are draws of (see [`super::Fitted::resample_units`]); empty
/// when nothing was resampled, since only resampled tests are ever lined up across
/// specifications.
pub(super) fn units(
    prepared: &Prepared,
    resampled: &BTreeMap<(String, Procedure), ResampleResult>,
    cluster_by: &Option<Vec<String>>,
) -> String {
    if resampled.is_empty() {
        return String::new();
    }
    let rows_bytes: Vec<u8> = prepared
        .d
        .rows
        .iter()
        .flat_map(|r| (*r as u64).to_le_bytes())
        .collect();
    format!(
        "{}:{}:{:?}",
        prepared.table.id,
        crate::ledger::sha256_hex(&rows_bytes),
        cluster_by
    )
}

/// One resampled test of `need`, ready to run: the regressors `[focal | exog]`, the tested
/// column among them and the draws.
struct Test<'a> {
    prepared: &'a Prepared<'a>,
    need: &'a ResampleNeed,
    rc: &'a ResampleContext<'a>,
    /// The regressors `[focal | exog]`.
    x: std::sync::Arc<DMatrix<f64>>,
    /// The tested term's column in `x`.
    index: usize,
    /// How many draws, from which seed.
    draws: estimate::Draws,
}

/// A resampled test and, for a randomization test of OLS in a run, its interval.
type Resampled = (ResampleResult, Option<RandomizationIntervalResult>);

/// One resampled test of `need` on the fitted design.
fn resample(prepared: &Prepared, need: &ResampleNeed, rc: &ResampleContext) -> Result<Resampled> {
    let spec = prepared.spec;
    let r = rc
        .resampling
        .ok_or_else(|| est_err(spec, "resampled inference needs [resampling]"))?;
    let draws = estimate::Draws {
        draws: r.draws,
        seed: r.seed,
        exact_below: r.exact_below,
    };
    let p = &prepared.p;
    let x = prepared.table.shared.joined(&[&p.focal, &p.exog]);
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
    let test = Test {
        prepared,
        need,
        rc,
        x,
        index,
        draws,
    };
    match need.method {
        Method::Randomization { studentized } => test.randomization(studentized),
        Method::WildBootstrap { webb } => test.wild_bootstrap(webb),
        Method::Model => Err(est_err(spec, "no resampling was asked for")),
    }
}

impl Test<'_> {
    /// A randomization test: of the coefficient (estimate or t) for OLS, with its interval
    /// in a run; of the Anderson–Rubin statistic for IV.
    fn randomization(&self, studentized: bool) -> Result<Resampled> {
        let Prepared { spec, d, cov, .. } = self.prepared;
        let a = self
            .rc
            .assignment
            .ok_or_else(|| est_err(spec, "randomization inference needs [assignment]"))?;
        let design = self.assignment_design(a)?;
        let err = |e| self.error(e);
        if spec.estimator != Estimator::Ols {
            return self.randomization_ar(&design);
        }
        let statistic = if studentized {
            estimate::RiStatistic::T
        } else {
            estimate::RiStatistic::Estimate
        };
        // Weighted: the columns in the data's units with their weights (the test scales the
        // rows itself, so the re-drawn treatment takes the weights of the units it lands on).
        let raw = super::weighted::unscaled_regressors(self.prepared, &self.x, &self.need.term)?;
        let (y, x) = raw.as_ref().map_or((&d.y, &*self.x), |x| (&d.y_raw, x));
        let weights = d.weights.as_ref();
        let cols = crate::estimate::OlsColumns { y, x, weights };
        let test = estimate::randomization_test(
            cols,
            crate::estimate::Tested::new(self.index, self.need.null),
            cov,
            &d.absorbed,
            &design,
            statistic,
            &self.draws,
        )
        .map_err(err)?;
        let problem = estimate::IntervalProblem {
            y,
            x,
            weights,
            treatment: self.index,
            cov,
            absorbed: &d.absorbed,
            design: &design,
            statistic,
            plan: &self.draws,
        };
        let interval = if self.rc.intervals {
            let fitted = crate::estimate::OlsColumns::new(&d.y, &self.x);
            ri_interval(&problem, fitted, self.rc.alpha).map_err(err)?
        } else {
            None
        };
        Ok((test, interval))
    }

    /// The randomization test of an IV specification: of its Anderson–Rubin statistic (a
    /// weighted one re-draws the instruments in the data's units, each unit keeping its
    /// weight).
    fn randomization_ar(&self, design: &AssignmentDesign) -> Result<Resampled> {
        let Prepared { d, p, cov, .. } = self.prepared;
        let raw = super::weighted::unscaled_instruments(self.prepared)?;
        let redraw = raw
            .as_ref()
            .zip(d.weights.as_ref())
            .map(|(instruments, weights)| estimate::WeightedRedraw {
                instruments,
                weights,
            });
        estimate::randomization_ar(
            crate::estimate::IvColumns::new(&d.y, &p.exog, &p.focal, &p.instruments),
            redraw,
            self.need.null,
            cov,
            &d.absorbed,
            design,
            &self.draws,
        )
        .map(|t| (t, None))
        .map_err(|e| self.error(e))
    }

    /// How `[assignment]` re-draws the treatment: completely, within blocks, by cluster, or
    /// by cluster within blocks.
    fn assignment_design(&self, a: &Assignment) -> Result<AssignmentDesign> {
        let ids = |column: &str| ids_of(self.prepared, column);
        Ok(match (&a.blocks, &a.clusters) {
            (None, None) => AssignmentDesign::Complete,
            (Some(b), None) => AssignmentDesign::Blocked { blocks: ids(b)? },
            (None, Some(c)) => AssignmentDesign::Clustered { clusters: ids(c)? },
            (Some(b), Some(c)) => AssignmentDesign::BlockedClustered {
                blocks: ids(b)?,
                clusters: ids(c)?,
            },
        })
    }

    /// The wild cluster bootstrap: restricted efficient for 2SLS, of the coefficient
    /// otherwise.
    fn wild_bootstrap(&self, webb: bool) -> Result<Resampled> {
        let Prepared { spec, d, p, .. } = self.prepared;
        let Some((ids, _)) = d.clusters.first() else {
            return Err(est_err(
                spec,
                "the wild cluster bootstrap needs clustered errors",
            ));
        };
        if d.absorbed.nested_df < d.absorbed.df {
            return Err(est_err(spec, format!(
                "hypothesis `{}`: the wild cluster bootstrap with absorbed fixed effects is exact only when every fixed effect is nested in the cluster variable, and `{}` is not; drop the fixed effect (or use one nested in the clusters)",
                self.need.hypothesis,
                spec.fixed_effects.join("`, `")
            )));
        }
        let weights = if webb {
            estimate::Weights::Webb
        } else {
            estimate::Weights::Rademacher
        };
        let test = if spec.estimator == Estimator::Tsls {
            estimate::wild_restricted_efficient(
                crate::estimate::IvColumns::new(&d.y, &p.exog, &p.focal, &p.instruments),
                self.need.null,
                ids,
                weights,
                &self.draws,
                &d.absorbed,
            )
        } else {
            estimate::wild_cluster_bootstrap(
                crate::estimate::OlsColumns::new(&d.y, &self.x),
                crate::estimate::Tested::new(self.index, self.need.null),
                ids,
                weights,
                &self.draws,
                &d.absorbed,
            )
        };
        test.map(|t| (t, None)).map_err(|e| self.error(e))
    }

    /// A resampling error in the user's terms, naming the hypothesis, the method and (for
    /// a cluster problem) the cluster's label.
    fn error(&self, e: ResampleError) -> Error {
        let what = match &e {
            ResampleError::VariesWithinCluster { cluster } => format!(
                "the treatment is not constant within cluster {}; a cluster-randomised design assigns whole clusters, so check the data or the [assignment] clusters column",
                self.cluster_label(*cluster)
            ),
            ResampleError::ClusterSpansBlocks { cluster } => format!(
                "cluster {} lies in more than one block; in a blocked cluster design each cluster lies in one block",
                self.cluster_label(*cluster)
            ),
            e => e.to_string(),
        };
        est_err(
            self.prepared.spec,
            format!(
                "{} test of hypothesis `{}`: {what}",
                procedure(&self.need.method).map_or("model-based", Procedure::as_str),
                self.need.hypothesis
            ),
        )
    }

    /// A cluster named by its label in `[assignment]`'s clusters column, or by its number.
    fn cluster_label(&self, id: usize) -> String {
        let (table, rows) = (self.prepared.table, &self.prepared.d.rows);
        self.rc
            .assignment
            .and_then(|a| a.clusters.as_deref())
            .and_then(|c| Some((c, nth_label(table, c, rows, id)?)))
            .map_or(format!("number {}", id + 1), |(c, l)| {
                format!(
                    "`{}` of `{c}`",
                    crate::escape::clip(&l, crate::escape::SHOWN)
                )
            })
    }
}

/// Group ids of `column` for the design's rows.
fn ids_of(prepared: &Prepared, column: &str) -> Result<Vec<usize>> {
    let (spec, table) = (prepared.spec, prepared.table);
    table.label_ids(column, &prepared.d.rows).map_err(|e| match e {
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

/// The randomization interval of `problem`'s treatment coefficient at `alpha`, stepping
/// from the estimate of the specification's fit (`fitted`: its columns as fitted, rows
/// scaled by √w when weighted) by its model standard error (module
/// `estimate::resample::interval`).
fn ri_interval(
    problem: &estimate::IntervalProblem,
    fitted: estimate::OlsColumns,
    alpha: f64,
) -> std::result::Result<Option<crate::results::RandomizationIntervalResult>, estimate::ResampleError>
{
    let fit = estimate::ols(fitted.y, fitted.x, true, problem.cov, problem.absorbed)?;
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
