//! The plan's field-experiment summaries: summary indices (built with the data, reported
//! here), the balance table of baseline covariates by arm, and attrition with Lee bounds.

use crate::data::{LabelIdsError, Numbers, Table};
use crate::error::{Error, Result};
use crate::estimate::{self, BalanceRow, CovSpec, FixedEffects, TrimmedArm};
use crate::expr::Values;
use crate::inference;
use crate::plan::{Errors, IndexMethod, Plan};
use crate::results::{
    ArmComparison, AttritionResult, BalanceResult, BlocksUsed, IndexResult, LeeResult, TestResult,
};
use std::collections::BTreeMap;

fn err(what: &str, message: impl std::fmt::Display) -> Error {
    Error::Estimation {
        spec: what.to_string(),
        message: message.to_string(),
    }
}

fn comparison(r: &BalanceRow) -> ArmComparison {
    ArmComparison {
        mean_comparison: r.mean_comparison,
        mean_treated: r.mean_treated,
        n_comparison: r.n_comparison,
        n_treated: r.n_treated,
        difference: r.difference,
        std_error: r.std_error,
        test: TestResult {
            statistic: r.t.statistic,
            p_value: inference::test_p_value(&r.t),
            distribution: r.t.reference,
        },
    }
}

/// The covariance for `errors` on `rows` of `table` (cluster ids densified; see
/// [`crate::data::cov_spec`]).
fn cov_for(errors: &Errors, table: &Table, rows: &[usize], what: &str) -> Result<CovSpec> {
    let mut dims = Vec::new();
    for b in errors.cluster_columns() {
        let ids = table.label_ids(b, rows).map_err(|e| match e {
            LabelIdsError::NoColumn => err(what, format!("cluster column `{b}` is not available")),
            LabelIdsError::Missing => err(
                what,
                format!("cluster column `{b}` is missing in a used row"),
            ),
        })?;
        dims.push(ids);
    }
    crate::data::cov_spec(errors, dims).map_err(|gap| err(what, gap.to_string()))
}

/// Rows where the cluster columns of `errors` are present.
fn clusters_present(errors: &Errors, table: &Table, r: usize) -> bool {
    match errors {
        Errors::Cluster(by) => by
            .iter()
            .all(|b| table.labels.get(b).is_some_and(|l| l[r].is_some())),
        _ => true,
    }
}

/// Rows where the block column, when registered, has a label.
fn block_present(blocks: Option<&String>, table: &Table, r: usize) -> bool {
    blocks.is_none_or(|b| table.labels.get(b).is_some_and(|l| l[r].is_some()))
}

/// The registered blocks, absorbed as fixed effects.
struct Blocked {
    fe: FixedEffects,
    used: BlocksUsed,
}

/// The registered blocks on `rows`: the rows kept once those alone in their block are
/// dropped (repeatedly, as for every absorbed fixed effect: a singleton has no within-block
/// comparison) and the blocks on the kept rows. `treated` gives the arm of each of `rows`;
/// an arm that varies within no block is refused (the blocks would absorb it). With a
/// weights column the blocks are swept with weighted means.
fn blocked_rows(
    blocks: Option<&String>,
    table: &Table,
    (rows, weights): (Vec<usize>, Option<&Numbers>),
    treated: impl Fn(usize) -> bool,
    by: &str,
    what: &str,
) -> Result<(Vec<usize>, Option<Blocked>)> {
    let Some(column) = blocks else {
        return Ok((rows, None));
    };
    let ids = |rows: &[usize]| {
        table.label_ids(column, rows).map_err(|_| {
            err(
                what,
                format!("block column `{column}` has no label in a used row"),
            )
        })
    };
    let keep = estimate::drop_singletons(&[ids(&rows)?]);
    let kept: Vec<usize> = rows
        .iter()
        .zip(&keep)
        .filter(|(_, k)| **k)
        .map(|(r, _)| *r)
        .collect();
    let kept_ids = ids(&kept)?;
    let levels = kept_ids.iter().max().map_or(0, |m| m + 1);
    let mut arms = vec![(false, false); levels];
    for (&r, &l) in kept.iter().zip(&kept_ids) {
        if treated(r) {
            arms[l].0 = true;
        } else {
            arms[l].1 = true;
        }
    }
    if !arms.iter().any(|&(t, c)| t && c) {
        return Err(err(
            what,
            format!(
                "no block of `{column}` (the [assignment] blocks) has units in both arms of `{by}`, so the blocks absorb the arm; check the arm and block columns"
            ),
        ));
    }
    let fe = match weights {
        Some(w) => FixedEffects::weighted(vec![kept_ids], &weights_on(w, &kept)),
        None => FixedEffects::new(vec![kept_ids]),
    }
    .map_err(|e| err(what, e))?;
    let used = BlocksUsed {
        column: column.clone(),
        levels,
        singletons_dropped: rows.len() - kept.len(),
    };
    Ok((kept, Some(Blocked { fe, used })))
}

/// The weights column's values on `rows` (each present: the rows were chosen so).
fn weights_on(column: &Numbers, rows: &[usize]) -> Vec<f64> {
    rows.iter()
        .map(|&r| column.get(r).unwrap_or(f64::NAN))
        .collect()
}

/// A weights column's cells and the number of zero-weight rows left out.
type WeightsIn<'t> = (&'t Numbers, usize);

/// A weighted check's weights column, its rows without a weight and without a positive
/// weight left out of `rows` (a negative weight is refused naming its place); returns the
/// column and the number of zero weights dropped (`None` unweighted).
fn weighted_rows<'t>(
    plan: &Plan,
    t: &'t Table,
    (data, weights): (&str, Option<&String>),
    rows: &mut Vec<usize>,
    what: &str,
) -> Result<Option<WeightsIn<'t>>> {
    let Some(name) = weights else {
        return Ok(None);
    };
    let column = t
        .numeric
        .get(name)
        .ok_or_else(|| err(what, format!("weights column `{name}` is not available")))?;
    rows.retain(|&r| column.get(r).is_some());
    let (_, zero) = crate::data::check_summary_weights(t, &plan.data[data], what, name, rows)?;
    Ok(Some((column, zero)))
}

/// The cluster columns of `errors` (empty unless clustered).
fn cluster_columns(errors: &Errors) -> Vec<String> {
    match errors {
        Errors::Cluster(by) => by.clone(),
        _ => Vec::new(),
    }
}

/// Index metadata for results.json.
pub fn indices(plan: &Plan, tables: &BTreeMap<String, Table>) -> BTreeMap<String, IndexResult> {
    plan.indices
        .iter()
        .map(|i| {
            let t = &tables[&i.data];
            let lookup = |name: &str| t.numeric.get(name).map(|c| c as &dyn Values);
            let reference_rows = i
                .reference
                .1
                .eval(t.rows, &lookup)
                .map(|v| v.iter().filter(|x| x.is_some_and(|x| x != 0.0)).count())
                .unwrap_or(0);
            let rows_with_value = t
                .numeric
                .get(&i.id)
                .map_or(0, |v| v.iter().filter(|x| x.is_some()).count());
            (
                i.id.clone(),
                IndexResult {
                    method: match i.method {
                        IndexMethod::MeanZ => crate::results::IndexMethod::MeanZ,
                        IndexMethod::InverseCovariance => crate::results::IndexMethod::Anderson,
                    },
                    components: i
                        .components
                        .iter()
                        .map(|(c, f)| if *f { format!("-{c}") } else { c.clone() })
                        .collect(),
                    reference: i.reference.0.clone(),
                    missing: if i.complete_cases {
                        crate::results::IndexMissing::Complete
                    } else {
                        crate::results::IndexMissing::Available
                    },
                    reference_rows,
                    rows_with_value,
                },
            )
        })
        .collect()
}

/// The balance table, when declared: complete cases in the arm, every covariate and the
/// cluster columns.
pub fn balance(plan: &Plan, tables: &BTreeMap<String, Table>) -> Result<Option<BalanceResult>> {
    let Some(b) = &plan.balance else {
        return Ok(None);
    };
    let what = "balance";
    let t = &tables[&b.data];
    let col = |name: &str| {
        t.numeric.get(name).ok_or_else(|| {
            err(
                what,
                format!("`{name}` is not available in data table `{}`", t.id),
            )
        })
    };
    let arm = col(&b.by)?;
    let covs: Vec<&Numbers> = b.covariates.iter().map(|c| col(c)).collect::<Result<_>>()?;
    let mut rows = balance_rows(b, t, arm, &covs);
    let weighted = weighted_rows(plan, t, (&b.data, b.weights.as_ref()), &mut rows, what)?;
    let (rows, blocks) = blocked_rows(
        b.blocks.as_ref(),
        t,
        (rows, weighted.map(|w| w.0)),
        |r| arm.get(r) == Some(1.0),
        &b.by,
        what,
    )?;
    let w = weighted.map(|w| weights_on(w.0, &rows));
    let m = nalgebra::DMatrix::from_fn(rows.len(), covs.len(), |i, j| {
        covs[j].get(rows[i]).unwrap_or(f64::NAN)
    });
    let treated: Vec<bool> = rows.iter().map(|&r| arm.get(r) == Some(1.0)).collect();
    let cov = cov_for(&b.errors, t, &rows, what)?;
    // Without blocks the joint regression is of the arm on [intercept | covariates]; with
    // them, on [covariates] with the blocks absorbed.
    let first = usize::from(blocks.is_none());
    let fe = blocks.as_ref().map(|b| &b.fe);
    let table = estimate::balance(&m, &treated, &cov, fe, w.as_deref())
        .map_err(|e| balance_error(b, first, e))?;
    Ok(Some(BalanceResult {
        by: b.by.clone(),
        errors: (&b.errors).into(),
        clusters: cluster_columns(&b.errors),
        blocks: blocks.map(|b| b.used),
        weights: b.weights.clone(),
        dropped_zero_weight: weighted.map(|w| w.1),
        n: rows.len(),
        covariates: b
            .covariates
            .iter()
            .cloned()
            .zip(table.rows.iter().map(comparison))
            .collect(),
        joint: TestResult {
            statistic: table.joint.statistic,
            p_value: inference::test_p_value(&table.joint),
            distribution: table.joint.reference,
        },
    }))
}

/// The rows of the balance table: complete cases in the arm (0 or 1), every covariate, the
/// cluster columns and the block column.
fn balance_rows(
    b: &crate::plan::Balance,
    t: &Table,
    arm: &Numbers,
    covs: &[&Numbers],
) -> Vec<usize> {
    (0..t.rows)
        .filter(|&r| {
            matches!(arm.get(r), Some(v) if v == 0.0 || v == 1.0)
                && covs.iter().all(|c| c.get(r).is_some())
                && clusters_present(&b.errors, t, r)
                && block_present(b.blocks.as_ref(), t, r)
        })
        .collect()
}

/// A failed balance regression in the user's terms: a covariate that is a linear
/// combination of those before it (and the constant, or the blocks when `first` is 0) is
/// named, with the fix.
fn balance_error(b: &crate::plan::Balance, first: usize, e: estimate::SummaryError) -> Error {
    let what = "balance";
    match e {
        estimate::SummaryError::Estimate(estimate::EstimateError::RankDeficient { dependent }) => {
            err(
                what,
                format!(
                    "covariate(s) {} are linear combinations of the covariates listed before them ({}); remove them from [balance] covariates",
                    dependent
                        .iter()
                        .filter_map(|&j| b.covariates.get(j.checked_sub(first)?))
                        .map(|c| format!("`{c}`"))
                        .collect::<Vec<_>>()
                        .join(", "),
                    if first == 1 {
                        "and a constant"
                    } else {
                        "and the registered blocks: a covariate constant within each block is absorbed by them"
                    }
                ),
            )
        }
        e => err(what, e),
    }
}

/// Attrition checks, when declared: rows with a known arm (and cluster ids); an observed
/// row must have every bounded outcome.
pub fn attrition(plan: &Plan, tables: &BTreeMap<String, Table>) -> Result<Option<AttritionResult>> {
    let Some(a) = &plan.attrition else {
        return Ok(None);
    };
    let what = "attrition";
    let t = &tables[&a.data];
    let arm = t
        .numeric
        .get(&a.by)
        .ok_or_else(|| err(what, format!("`{}` is not available", a.by)))?;
    let observed_all = {
        let lookup = |name: &str| t.numeric.get(name).map(|c| c as &dyn Values);
        a.observed.1.eval(t.rows, &lookup).map_err(|e| {
            err(
                what,
                format!("observed \"{}\": {}", a.observed.0, e.message),
            )
        })?
    };
    let mut rows: Vec<usize> = (0..t.rows)
        .filter(|&r| {
            matches!(arm.get(r), Some(v) if v == 0.0 || v == 1.0)
                && clusters_present(&a.errors, t, r)
                && block_present(a.blocks.as_ref(), t, r)
        })
        .collect();
    let weighted = weighted_rows(plan, t, (&a.data, a.weights.as_ref()), &mut rows, what)?;
    let treated: Vec<bool> = rows.iter().map(|&r| arm.get(r) == Some(1.0)).collect();
    let observed: Vec<bool> = rows
        .iter()
        .map(|&r| observed_all[r].is_some_and(|v| v != 0.0))
        .collect();
    let weights = weighted.map(|w| w.0);
    let differential = attrition_test(a, t, (&rows, weights), &treated, &observed, what)?;
    let mut bounds = BTreeMap::new();
    for name in &a.bounds {
        let values = bounded_values(a, t, name, &rows, &observed)?;
        let lee = estimate::lee_bounds(&values, &observed, &treated).map_err(|e| err(what, e))?;
        bounds.insert(name.clone(), lee_result(&lee, a, plan.inference.confidence));
    }
    let differential = (comparison(&differential.0), differential.1);
    let alpha = plan.inference.alpha;
    let significant = differential.0.test.p_value <= alpha;
    let hypotheses_on_table = hypotheses_on(plan, &a.data);
    Ok(Some(AttritionResult {
        data: a.data.clone(),
        alpha,
        significant,
        hypotheses_on_table,
        by: a.by.clone(),
        observed: a.observed.0.clone(),
        errors: (&a.errors).into(),
        clusters: cluster_columns(&a.errors),
        blocks: differential.1,
        weights: a.weights.clone(),
        dropped_zero_weight: weighted.map(|w| w.1),
        differential: differential.0,
        bounds,
    }))
}

/// The values of the bounded outcome `name` on `rows`: NaN where the row is not observed;
/// an observed row missing the outcome is refused (the observed expression must imply it).
fn bounded_values(
    a: &crate::plan::Attrition,
    t: &Table,
    name: &str,
    rows: &[usize],
    observed: &[bool],
) -> Result<Vec<f64>> {
    let what = "attrition";
    let y = t
        .numeric
        .get(name)
        .ok_or_else(|| err(what, format!("`{name}` is not available")))?;
    let mut values = Vec::with_capacity(rows.len());
    for (&r, &o) in rows.iter().zip(observed) {
        match (o, y.get(r)) {
            (true, Some(v)) => values.push(v),
            (true, None) => {
                return Err(err(what, format!(
                    "`{name}` is missing in a row that \"{}\" counts as observed; make the observed expression imply the outcome is present",
                    a.observed.0
                )))
            }
            (false, _) => values.push(f64::NAN),
        }
    }
    Ok(values)
}

/// The hypotheses whose specifications use the data table `data`.
fn hypotheses_on(plan: &Plan, data: &str) -> Vec<String> {
    plan.hypotheses
        .iter()
        .filter(|h| {
            plan.specifications
                .iter()
                .any(|s| s.id == h.specification && s.data == data)
        })
        .map(|h| h.id.clone())
        .collect()
}

/// The differential-attrition regression on `rows` (blocks absorbed when registered, on the
/// rows left once singleton blocks are dropped; weighted least squares with a weights column).
fn attrition_test(
    a: &crate::plan::Attrition,
    t: &Table,
    (rows, weights): (&[usize], Option<&Numbers>),
    treated: &[bool],
    observed: &[bool],
    what: &str,
) -> Result<(BalanceRow, Option<BlocksUsed>)> {
    let position: BTreeMap<usize, usize> = rows.iter().enumerate().map(|(i, &r)| (r, i)).collect();
    let (kept, blocks) = blocked_rows(
        a.blocks.as_ref(),
        t,
        (rows.to_vec(), weights),
        |r| treated[position[&r]],
        &a.by,
        what,
    )?;
    let pick = |v: &[bool]| -> Vec<bool> { kept.iter().map(|r| v[position[r]]).collect() };
    let cov = cov_for(&a.errors, t, &kept, what)?;
    let w = weights.map(|w| weights_on(w, &kept));
    let row = estimate::differential_attrition(
        &pick(observed),
        &pick(treated),
        &cov,
        blocks.as_ref().map(|b| &b.fe),
        w.as_deref(),
    )
    .map_err(|e| err(what, e))?;
    Ok((row, blocks.map(|b| b.used)))
}

/// Lee bounds with their Imbens–Manski (2004) interval. No interval when the attrition
/// errors are clustered (the bounds' standard errors assume independently sampled units) or
/// when the standard errors cannot support one.
fn lee_result(lee: &estimate::LeeBounds, a: &crate::plan::Attrition, level: f64) -> LeeResult {
    let im =
        inference::imbens_manski_interval(lee.lower, lee.upper, lee.se_lower, lee.se_upper, level);
    let no_interval = match (&a.errors, im) {
        (Errors::Cluster(by), _) => Some(format!(
            "the standard errors of Lee bounds assume independently sampled units, and this table's units are clustered by {}",
            by.iter().map(|c| format!("`{c}`")).collect::<Vec<_>>().join(" and ")
        )),
        (_, None) => Some("the bounds' standard errors are zero or not finite (too few observed outcomes, or no spread)".to_string()),
        (_, Some(_)) => None,
    };
    let im = im.filter(|_| no_interval.is_none());
    let independent = !matches!(a.errors, Errors::Cluster(_));
    LeeResult {
        lower: lee.lower,
        upper: lee.upper,
        trim_share: lee.trim_share,
        trimmed_arm: match lee.trimmed_arm {
            TrimmedArm::Treated => crate::results::TrimmedArm::Treated,
            TrimmedArm::Comparison => crate::results::TrimmedArm::Comparison,
        },
        std_error_lower: independent.then_some(lee.se_lower),
        std_error_upper: independent.then_some(lee.se_upper),
        interval: im.map(|i| i.interval),
        interval_critical_value: im.map(|i| i.critical_value),
        interval_level: level,
        no_interval,
    }
}
