//! Summary indices, the balance table and the attrition lines. The model carries the values;
//! the sentences are the summary macros of `templates/words.j2`.

use super::super::format::{num, p_is, pval};
use super::super::identification::dist_text;
use crate::results::{ErrorKind, IndexMethod, IndexMissing, Results};
use serde::Serialize;

#[derive(Debug, Serialize)]
pub(super) struct BalanceModel {
    heading: BalanceHeading,
    rows: Vec<BalanceRowModel>,
    joint: JointTest,
}

/// The balance table's heading: the arm column, the complete rows and the design.
#[derive(Debug, Serialize)]
pub(super) struct BalanceHeading {
    by: String,
    n: usize,
    design: SummaryDesign,
}

/// The joint test of balance (with the blocks as regressors when absorbed).
#[derive(Debug, Serialize)]
pub(super) struct JointTest {
    blocks: bool,
    statistic: String,
    reference: String,
    p: String,
}

#[derive(Debug, Serialize)]
pub(super) struct BalanceRowModel {
    covariate: String,
    comparison: String,
    treated: String,
    difference: String,
    se: String,
    p: String,
}

/// How a balance or attrition regression was run: the errors (naming the cluster columns)
/// and, when absorbed, the registered blocks; when weighted, the weights column.
#[derive(Debug, Serialize)]
pub(super) struct SummaryDesign {
    errors: String,
    clusters: Vec<String>,
    blocks: Option<Blocks>,
    weights: Option<Weighted>,
}

/// The probability weights of a weighted check and the zero-weight rows left out.
#[derive(Debug, Serialize)]
pub(super) struct Weighted {
    column: String,
    zero: usize,
}

#[derive(Debug, Serialize)]
pub(super) struct Blocks {
    levels: usize,
    column: String,
    singletons: usize,
}

/// One line of the Attrition section.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(super) enum AttritionLine {
    /// The observed shares of the two arms and their difference.
    Observed {
        observed: String,
        mean_comparison: String,
        n_comparison: usize,
        mean_treated: String,
        n_treated: usize,
        difference: String,
        std_error: String,
        design: SummaryDesign,
        p: String,
    },
    /// The Lee bounds pool the registered blocks.
    Pooled { column: String },
    /// Lee bounds on one outcome.
    Lee {
        outcome: String,
        lower: String,
        upper: String,
        trimmed_arm: String,
        trim_share: String,
        std_errors: Option<(String, String)>,
        interval: Option<LeeInterval>,
        no_interval: Option<String>,
    },
}

#[derive(Debug, Serialize)]
pub(super) struct LeeInterval {
    level: String,
    critical_value: String,
    lower: String,
    upper: String,
}

/// One summary index: how it is built and how many rows have a value.
#[derive(Debug, Serialize)]
pub(super) struct IndexLine {
    id: String,
    anderson: bool,
    components: Vec<String>,
    reference: String,
    reference_rows: usize,
    rows_with_value: usize,
    complete: bool,
}

fn summary_design(
    errors: ErrorKind,
    clusters: &[String],
    blocks: Option<&crate::results::BlocksUsed>,
    (weights, zero): (Option<&String>, Option<usize>),
) -> SummaryDesign {
    SummaryDesign {
        weights: weights.map(|w| Weighted {
            column: w.clone(),
            zero: zero.unwrap_or(0),
        }),
        errors: errors.to_string(),
        clusters: clusters.to_vec(),
        blocks: blocks.map(|b| Blocks {
            levels: b.levels,
            column: b.column.clone(),
            singletons: b.singletons_dropped,
        }),
    }
}

pub(super) fn attrition_lines(r: &Results) -> Vec<AttritionLine> {
    let Some(a) = &r.attrition else {
        return Vec::new();
    };
    let d = &a.differential;
    let mut lines = vec![AttritionLine::Observed {
        observed: a.observed.clone(),
        mean_comparison: num(d.mean_comparison),
        n_comparison: d.n_comparison,
        mean_treated: num(d.mean_treated),
        n_treated: d.n_treated,
        difference: num(d.difference),
        std_error: num(d.std_error),
        design: summary_design(
            a.errors,
            &a.clusters,
            a.blocks.as_ref(),
            (a.weights.as_ref(), a.dropped_zero_weight),
        ),
        p: p_is(d.test.p_value),
    }];
    if let (Some(b), false) = (&a.blocks, a.bounds.is_empty()) {
        lines.push(AttritionLine::Pooled {
            column: b.column.clone(),
        });
    }
    for (y, b) in &a.bounds {
        let interval = b.interval.map(|[lo, hi]| LeeInterval {
            level: ((1e6 * 100.0 * b.interval_level).round() / 1e6).to_string(),
            critical_value: num(b.interval_critical_value.unwrap_or(f64::NAN)),
            lower: num(lo),
            upper: num(hi),
        });
        lines.push(AttritionLine::Lee {
            outcome: y.clone(),
            lower: num(b.lower),
            upper: num(b.upper),
            trimmed_arm: b.trimmed_arm.to_string(),
            trim_share: num(b.trim_share),
            std_errors: match (b.std_error_lower, b.std_error_upper) {
                (Some(l), Some(u)) => Some((num(l), num(u))),
                _ => None,
            },
            no_interval: b.no_interval.clone().filter(|_| interval.is_none()),
            interval,
        });
    }
    lines
}

/// One line per summary index.
pub(super) fn index_lines(r: &Results) -> Vec<IndexLine> {
    r.indices
        .iter()
        .map(|(id, i)| IndexLine {
            id: id.clone(),
            anderson: i.method == IndexMethod::Anderson,
            components: i.components.clone(),
            reference: i.reference.clone(),
            reference_rows: i.reference_rows,
            rows_with_value: i.rows_with_value,
            complete: i.missing == IndexMissing::Complete,
        })
        .collect()
}

/// The balance table, when the run has one.
pub(super) fn balance_model(r: &Results) -> Option<BalanceModel> {
    let b = r.balance.as_ref()?;
    Some(BalanceModel {
        heading: BalanceHeading {
            by: b.by.clone(),
            n: b.n,
            design: summary_design(
                b.errors,
                &b.clusters,
                b.blocks.as_ref(),
                (b.weights.as_ref(), b.dropped_zero_weight),
            ),
        },
        rows: b
            .covariates
            .iter()
            .map(|(c, v)| BalanceRowModel {
                covariate: c.clone(),
                comparison: format!("{} (n = {})", num(v.mean_comparison), v.n_comparison),
                treated: format!("{} (n = {})", num(v.mean_treated), v.n_treated),
                difference: num(v.difference),
                se: num(v.std_error),
                p: pval(v.test.p_value),
            })
            .collect(),
        joint: JointTest {
            blocks: b.blocks.is_some(),
            statistic: num(b.joint.statistic),
            reference: dist_text(b.joint.distribution),
            p: p_is(b.joint.p_value),
        },
    })
}
