//! The plan's field-experiment summaries: summary indices (built with the data, reported
//! here), the balance table of baseline covariates by arm, and attrition with Lee bounds.

use crate::data::{LabelIdsError, Table};
use crate::error::{Error, Result};
use crate::estimate::{self, BalanceRow, CovSpec, TrimmedArm};
use crate::inference;
use crate::plan::{Errors, IndexMethod, Plan};
use crate::results::{
    ArmComparison, AttritionResult, BalanceResult, IndexResult, LeeResult, TestResult,
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

/// The covariance for `errors` on `rows` of `table` (cluster ids densified).
fn cov_for(errors: &Errors, table: &Table, rows: &[usize], what: &str) -> Result<CovSpec> {
    Ok(match errors {
        Errors::Classical => CovSpec::Classical,
        Errors::Hc0 => CovSpec::Hc0,
        Errors::Hc1 => CovSpec::Hc1,
        Errors::Hc2 => CovSpec::Hc2,
        Errors::Hc3 => CovSpec::Hc3,
        Errors::Hac { .. } => {
            return Err(err(
                what,
                "hac errors are offered for specifications only".to_string(),
            ))
        }
        Errors::Cluster(by) => {
            let mut dims = Vec::new();
            for b in by {
                let ids = table.label_ids(b, rows).map_err(|e| match e {
                    LabelIdsError::NoColumn => {
                        err(what, format!("cluster column `{b}` is not available"))
                    }
                    LabelIdsError::Missing => err(
                        what,
                        format!("cluster column `{b}` is missing in a used row"),
                    ),
                })?;
                dims.push(ids);
            }
            match dims.len() {
                1 => CovSpec::Cluster {
                    ids: dims.remove(0),
                },
                _ => CovSpec::TwoWay {
                    second: dims.remove(1),
                    first: dims.remove(0),
                },
            }
        }
    })
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

/// Index metadata for results.json.
pub fn indices(plan: &Plan, tables: &BTreeMap<String, Table>) -> BTreeMap<String, IndexResult> {
    plan.indices
        .iter()
        .map(|i| {
            let t = &tables[&i.data];
            let lookup = |name: &str| t.numeric.get(name).map(Vec::as_slice);
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
                        IndexMethod::MeanZ => "mean-z",
                        IndexMethod::InverseCovariance => "anderson",
                    },
                    components: i
                        .components
                        .iter()
                        .map(|(c, f)| if *f { format!("-{c}") } else { c.clone() })
                        .collect(),
                    reference: i.reference.0.clone(),
                    missing: if i.complete_cases {
                        "complete"
                    } else {
                        "available"
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
    let covs: Vec<&Vec<Option<f64>>> =
        b.covariates.iter().map(|c| col(c)).collect::<Result<_>>()?;
    let rows: Vec<usize> = (0..t.rows)
        .filter(|&r| {
            matches!(arm[r], Some(v) if v == 0.0 || v == 1.0)
                && covs.iter().all(|c| c[r].is_some())
                && clusters_present(&b.errors, t, r)
        })
        .collect();
    let m = nalgebra::DMatrix::from_fn(rows.len(), covs.len(), |i, j| {
        covs[j][rows[i]].unwrap_or(f64::NAN)
    });
    let treated: Vec<bool> = rows.iter().map(|&r| arm[r] == Some(1.0)).collect();
    let cov = cov_for(&b.errors, t, &rows, what)?;
    let table = estimate::balance(&m, &treated, &cov).map_err(|e| match e {
        // The balance regression is of the arm on [intercept | covariates].
        estimate::SummaryError::Estimate(estimate::EstimateError::RankDeficient { dependent }) => err(
            what,
            format!(
                "covariate(s) {} are linear combinations of the covariates listed before them (and a constant); remove them from [balance] covariates",
                dependent
                    .iter()
                    .filter_map(|&j| b.covariates.get(j.checked_sub(1)?))
                    .map(|c| format!("`{c}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        ),
        e => err(what, e),
    })?;
    Ok(Some(BalanceResult {
        by: b.by.clone(),
        errors: b.errors.name(),
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
        let lookup = |name: &str| t.numeric.get(name).map(Vec::as_slice);
        a.observed.1.eval(t.rows, &lookup).map_err(|e| {
            err(
                what,
                format!("observed \"{}\": {}", a.observed.0, e.message),
            )
        })?
    };
    let rows: Vec<usize> = (0..t.rows)
        .filter(|&r| {
            matches!(arm[r], Some(v) if v == 0.0 || v == 1.0) && clusters_present(&a.errors, t, r)
        })
        .collect();
    let treated: Vec<bool> = rows.iter().map(|&r| arm[r] == Some(1.0)).collect();
    let observed: Vec<bool> = rows
        .iter()
        .map(|&r| observed_all[r].is_some_and(|v| v != 0.0))
        .collect();
    let cov = cov_for(&a.errors, t, &rows, what)?;
    let differential =
        estimate::differential_attrition(&observed, &treated, &cov).map_err(|e| err(what, e))?;
    let mut bounds = BTreeMap::new();
    for name in &a.bounds {
        let y = t
            .numeric
            .get(name)
            .ok_or_else(|| err(what, format!("`{name}` is not available")))?;
        let mut values = Vec::with_capacity(rows.len());
        for (&r, &o) in rows.iter().zip(&observed) {
            match (o, y[r]) {
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
        let lee = estimate::lee_bounds(&values, &observed, &treated).map_err(|e| err(what, e))?;
        bounds.insert(
            name.clone(),
            LeeResult {
                lower: lee.lower,
                upper: lee.upper,
                trim_share: lee.trim_share,
                trimmed_arm: match lee.trimmed_arm {
                    TrimmedArm::Treated => "treated",
                    TrimmedArm::Comparison => "comparison",
                },
            },
        );
    }
    let differential = comparison(&differential);
    let alpha = plan.inference.alpha;
    let significant = differential.test.p_value <= alpha;
    let hypotheses_on_table = plan
        .hypotheses
        .iter()
        .filter(|h| {
            plan.specifications
                .iter()
                .any(|s| s.id == h.specification && s.data == a.data)
        })
        .map(|h| h.id.clone())
        .collect();
    Ok(Some(AttritionResult {
        data: a.data.clone(),
        alpha,
        significant,
        hypotheses_on_table,
        by: a.by.clone(),
        observed: a.observed.0.clone(),
        errors: a.errors.name(),
        differential,
        bounds,
    }))
}
