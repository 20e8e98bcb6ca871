//! Summary indices, the balance table and the attrition lines.

use super::super::format::{num, p_is, pval};
use super::specs::test_line;
use crate::results::{ErrorKind, IndexMethod, IndexMissing, Results};
use serde::Serialize;

#[derive(Debug, Serialize)]
pub(super) struct BalanceModel {
    heading: String,
    rows: Vec<BalanceRowModel>,
    joint: String,
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

/// How a balance or attrition regression was run: the difference (within the registered
/// blocks, when absorbed) and the errors (naming the cluster columns).
pub(super) fn summary_design(
    errors: ErrorKind,
    clusters: &[String],
    blocks: Option<&crate::results::BlocksUsed>,
) -> String {
    let errors = if clusters.is_empty() {
        format!("{errors} errors")
    } else {
        let by: Vec<String> = clusters.iter().map(|c| format!("`{c}`")).collect();
        format!("errors clustered by {}", by.join(" and "))
    };
    match blocks {
        None => format!("differences from OLS on the arm with {errors}"),
        Some(b) => format!(
            "within-block differences from OLS on the arm with the {} registered blocks of `{}` as fixed effects{}, {errors}",
            b.levels,
            b.column,
            match b.singletons_dropped {
                0 => String::new(),
                1 => " (1 row alone in its block left out)".to_string(),
                k => format!(" ({k} rows alone in their block left out)"),
            }
        ),
    }
}

pub(super) fn attrition_lines(r: &Results) -> Vec<String> {
    let Some(a) = &r.attrition else {
        return Vec::new();
    };
    let d = &a.differential;
    let mut lines = vec![format!(
        "observed (\"{}\"): {} of the comparison arm (n = {}) and {} of the treated arm (n = {}); difference {} (s.e. {}; {}), {}",
        a.observed,
        num(d.mean_comparison),
        d.n_comparison,
        num(d.mean_treated),
        d.n_treated,
        num(d.difference),
        num(d.std_error),
        summary_design(a.errors, &a.clusters, a.blocks.as_ref()),
        p_is(d.test.p_value)
    )];
    if let (Some(b), false) = (&a.blocks, a.bounds.is_empty()) {
        lines.push(format!(
            "The Lee bounds below pool the blocks of `{}`: they are computed on the arms as wholes, not within blocks, which bounds the effect only if every block assigned the same share of units to treatment.",
            b.column
        ));
    }
    for (y, b) in &a.bounds {
        let interval = match (&b.interval, &b.no_interval) {
            (Some([lo, hi]), _) => format!(
                "; {}% interval for the effect (Imbens and Manski 2004, critical value {}): [{}, {}]",
                (1e6 * 100.0 * b.interval_level).round() / 1e6,
                num(b.interval_critical_value.unwrap_or(f64::NAN)),
                num(*lo),
                num(*hi)
            ),
            (None, Some(why)) => format!("; no interval: {why}"),
            (None, None) => String::new(),
        };
        lines.push(format!(
            "Lee (2009) bounds on the effect on `{y}` for units observed in either arm: [{}, {}] (the {} arm trimmed by {}{}){interval}",
            num(b.lower),
            num(b.upper),
            b.trimmed_arm,
            num(b.trim_share),
            match (b.std_error_lower, b.std_error_upper) {
                (Some(l), Some(u)) => format!("; s.e. {} and {}", num(l), num(u)),
                _ => String::new(),
            }
        ));
    }
    lines
}

/// One line per summary index: how it is built and how many rows have a value.
pub(super) fn index_lines(r: &Results) -> Vec<String> {
    r.indices
        .iter()
        .map(|(id, i)| format!(
            "`{id}`: {} of [{}], standardised against the reference group \"{}\" ({} rows); {} rows have a value ({})",
            if i.method == IndexMethod::Anderson { "inverse-covariance-weighted index (Anderson 2008)" } else { "mean of z-scores (Kling, Liebman and Katz 2007)" },
            i.components.join(", "),
            i.reference,
            i.reference_rows,
            i.rows_with_value,
            if i.missing == IndexMissing::Complete { "a row missing any component has no value" } else { "components missing in a row are left out of its average" }
        ))
        .collect()
}

/// The balance table, when the run has one.
pub(super) fn balance_model(r: &Results) -> Option<BalanceModel> {
    let b = r.balance.as_ref()?;
    Some(BalanceModel {
        heading: format!(
            "By `{}` ({} complete rows; {})",
            b.by,
            b.n,
            summary_design(b.errors, &b.clusters, b.blocks.as_ref())
        ),
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
        joint: test_line(
            if b.blocks.is_some() {
                "joint test (the arm on all covariates and the blocks)"
            } else {
                "joint test (the arm on all covariates)"
            },
            &b.joint,
        ),
    })
}
