//! Specifications: the plan's side-by-side tables and one block per specification (its facts,
//! estimates, identification panel, first stages, reduced form and LIML estimate), with the
//! degrees-of-freedom conventions the report states once.

use super::super::format::{num, p_is, pval};
use crate::plan::spec_terms;
use crate::results::{
    BandwidthRule, CoefDistribution, ErrorKind, Results, SpecResult, Term, TestResult,
};
use serde::Serialize;

#[derive(Debug, Serialize)]
pub(super) struct TableModel {
    title: String,
    columns: Vec<String>,
    estimators: Vec<String>,
    rows: Vec<TableRow>,
    n: Vec<String>,
    errors: Vec<String>,
    /// Rows the plan asked for beneath the coefficients: a label and one cell per column.
    extra: Vec<(String, Vec<String>)>,
    notes: Vec<String>,
}

#[derive(Debug, Serialize)]
pub(super) struct TableRow {
    term: String,
    cells: Vec<Cell>,
}

#[derive(Debug, Serialize)]
pub(super) struct Cell {
    est: String,
    /// Significance marks (`*` per plan threshold passed); Markdown escapes them.
    marks: String,
    se: String,
}

#[derive(Debug, Serialize)]
pub(super) struct SpecModel {
    id: String,
    title: String,
    facts: Vec<String>,
    main: Block,
    identification: Option<super::super::identification::Panel>,
    blocks: Vec<Block>,
}

#[derive(Debug, Serialize)]
pub(super) struct Block {
    title: String,
    terms: Vec<TermRow>,
    lines: Vec<String>,
}

#[derive(Debug, Serialize)]
pub(super) struct TermRow {
    term: String,
    est: String,
    se: String,
    stat: String,
    p: String,
    ci: String,
}

pub(super) fn table_model(t: &crate::plan::Table, r: &Results) -> TableModel {
    let specs: Vec<&SpecResult> = t.columns.iter().map(|c| &r.specifications[c]).collect();
    let rows = t
        .rows
        .iter()
        .map(|term| TableRow {
            term: term.clone(),
            cells: specs
                .iter()
                .map(|s| match s.terms.get(term) {
                    Some(v) => Cell {
                        est: num(v.estimate),
                        marks: stars(v.p_value, &t.stars),
                        se: format!("({})", num(v.std_error)),
                    },
                    None => Cell {
                        est: String::new(),
                        marks: String::new(),
                        se: String::new(),
                    },
                })
                .collect(),
        })
        .collect();
    TableModel {
        title: crate::escape::line(&t.title),
        columns: t.columns.clone(),
        estimators: specs
            .iter()
            .map(|s| s.estimator.label().to_string())
            .collect(),
        rows,
        n: specs.iter().map(|s| s.n.to_string()).collect(),
        errors: specs
            .iter()
            .map(|s| match (&s.cluster_by, s.clusters) {
                (Some(by), Some(g)) => format!("cluster {} ({g})", by.join("×")),
                _ => match &s.hac {
                    Some(h) => format!("HAC (b = {})", bandwidth_text(h.bandwidth)),
                    None => s.errors.label().to_string(),
                },
            })
            .collect(),
        extra: t
            .summary_rows
            .iter()
            .flat_map(|row| super::super::summary_rows::rows(row, &specs))
            .collect(),
        notes: table_notes(t, &specs),
    }
}

/// What a reader of a table needs beside it: the parentheses, the marks, mixed samples.
pub(super) fn table_notes(t: &crate::plan::Table, specs: &[&SpecResult]) -> Vec<String> {
    let mut notes =
        vec!["Each estimate has its standard error beneath it, in parentheses.".to_string()];
    if !t.stars.is_empty() {
        notes.push(stars_legend(&t.stars));
    }
    for row in &t.summary_rows {
        notes.extend(super::super::summary_rows::notes(row, &t.columns, specs));
    }
    let mut ns: Vec<usize> = specs.iter().map(|s| s.n).collect();
    ns.sort_unstable();
    ns.dedup();
    if ns.len() > 1 {
        notes.push(format!(
            "The columns rest on different rows (N = {}): each specification leaves out the rows missing any variable it uses, so differences between columns mix a change of method with a change of sample.",
            ns.iter().map(usize::to_string).collect::<Vec<_>>().join(", ")
        ));
    }
    notes
}

/// Significance marks: one `*` per plan threshold (largest first) that `p` falls below.
pub(super) fn stars(p: f64, thresholds: &[f64]) -> String {
    "*".repeat(thresholds.iter().filter(|&&t| p < t).count())
}

/// The legend of a table's marks, from the plan's thresholds.
pub(super) fn stars_legend(thresholds: &[f64]) -> String {
    let parts: Vec<String> = thresholds
        .iter()
        .enumerate()
        .map(|(i, t)| format!("{} p < {t}", "*".repeat(i + 1)))
        .collect();
    format!(
        "Marks (thresholds set in the plan, two-sided p of each coefficient's own test): {}.",
        parts.join(", ")
    )
}

pub(super) fn spec_model(s: &crate::plan::Spec, r: &SpecResult, alpha: f64) -> SpecModel {
    SpecModel {
        id: s.id.clone(),
        title: crate::escape::line(&r.title),
        facts: spec_facts(s, r),
        main: Block {
            title: "Estimates".into(),
            terms: ordered_terms(&spec_terms(s), &r.terms),
            lines: vec![],
        },
        identification: super::super::identification::panel(s, r, alpha),
        blocks: side_blocks(s, r),
    }
}

/// The facts listed under a specification's title: estimator and rows, errors and df, fit,
/// and whatever applies of HAC, fixed effects, κ, sample, dropped terms and the LPM check.
fn spec_facts(s: &crate::plan::Spec, r: &SpecResult) -> Vec<String> {
    let (df_fact, _) = df_convention(r);
    let mut facts = vec![
        format!(
            "{} of `{}` on {} rows ({} in the sample, {} left out for a missing value)",
            r.estimator.label(),
            r.outcome,
            r.n,
            r.sample.in_sample,
            r.sample.dropped_missing
        ),
        format!("errors {}; {df_fact}", errors_text(r)),
        format!(
            "R² {} · residual SD {} · {:.0}% intervals",
            num(r.r_squared),
            num(r.residual_sd),
            100.0 * r.confidence
        ),
    ];
    if let Some(w) = &r.weights {
        facts.push(format!(
            "weighted by `{w}` (probability weights: weighted least squares, sandwich errors on weighted scores; {} row(s) of weight zero left out)",
            r.sample.dropped_zero_weight.unwrap_or(0)
        ));
    }
    if let Some(h) = &r.hac {
        facts.push(hac_fact(h));
    }
    if !r.fixed_effects.is_empty() {
        facts.push(fixed_effects_fact(r));
    }
    if let Some(k) = r.kappa {
        facts.push(format!("k-class κ = {}", num(k)));
    }
    if let Some((text, _)) = &s.sample {
        facts.push(format!("sample: {text}"));
    }
    if !r.dropped_terms.is_empty() {
        facts.push(format!(
            "dropped as collinear: {}",
            r.dropped_terms.join(", ")
        ));
    }
    if let Some(l) = &r.linear_probability {
        facts.push(format!(
            "binary outcome (linear probability model): {} fitted value(s) outside [0, 1]",
            l.fitted_outside_unit_interval
        ));
    }
    facts
}

/// The blocks after a specification's estimates: first stages, reduced form, LIML estimate.
fn side_blocks(s: &crate::plan::Spec, r: &SpecResult) -> Vec<Block> {
    let order = spec_terms(s);
    // First stage and reduced form share the regressors [instruments | exogenous terms].
    let mut z_order = s.instruments.clone();
    z_order.extend(order.iter().filter(|t| !s.endogenous.contains(t)).cloned());
    let mut blocks = Vec::new();
    for (name, fs) in r.first_stage.iter().flatten() {
        blocks.push(Block {
            title: format!("First stage: `{name}` on the instruments and controls"),
            terms: ordered_terms(&z_order, &fs.terms),
            lines: vec![format!("R² {}", num(fs.r_squared))],
        });
    }
    if let Some(rf) = &r.reduced_form {
        blocks.push(Block {
            title: format!(
                "Reduced form: `{}` on the instruments and controls",
                rf.outcome
            ),
            terms: ordered_terms(&z_order, &rf.terms),
            lines: vec![format!("R² {}", num(rf.r_squared))],
        });
    }
    if let Some(l) = &r.liml {
        blocks.push(Block {
            title: format!("LIML estimate (κ = {}), for a decision rule", num(l.kappa)),
            terms: ordered_terms(&order, &l.terms),
            lines: vec![],
        });
    }
    blocks
}

pub(super) fn errors_text(r: &SpecResult) -> String {
    match (&r.cluster_by, r.clusters) {
        (Some(b), Some(g)) => format!("clustered by {} ({g} clusters)", b.join(" and ")),
        _ => r.errors.fact_name().to_string(),
    }
}

/// The fixed effects swept out of a specification, in one sentence.
pub(super) fn fixed_effects_fact(r: &SpecResult) -> String {
    let levels = r
        .fixed_effects
        .iter()
        .map(|(k, v)| format!("`{k}` ({v} levels)"))
        .collect::<Vec<_>>()
        .join(", ");
    let inside = match (r.cluster_by.is_some(), r.absorbed_nested_df) {
        (true, m) if m > 0 => format!(
            "; {m} of these df belong to groups lying wholly inside one cluster and are left out of the CR1 factor's K"
        ),
        _ => String::new(),
    };
    let singletons = if r.singletons_dropped > 0 {
        format!(
            " · {} row(s) alone in their group set aside",
            r.singletons_dropped
        )
    } else {
        String::new()
    };
    format!(
        "group means removed for {levels}, costing {} df in the residual count{inside} · R² within groups {}{singletons}",
        r.absorbed_df,
        r.within_r_squared.map_or("n/a".into(), num),
    )
}

/// A HAC bandwidth: whole numbers as stated, others to the usual precision.
pub(super) fn bandwidth_text(b: f64) -> String {
    if b.fract() == 0.0 && b < 1e9 {
        format!("{}", b as u64)
    } else {
        num(b)
    }
}

/// How HAC errors were computed, in one sentence.
pub(super) fn hac_fact(h: &crate::results::HacResult) -> String {
    let rule = match h.bandwidth_rule {
        BandwidthRule::Stated => "stated in the plan",
        BandwidthRule::NeweyWest1994 => {
            "chosen from the data by the Newey–West (1994) rule, on the scores of a preliminary fit"
        }
    };
    format!(
        "autocorrelation: Bartlett kernel over the rows in `{}` order with bandwidth b = {} ({rule}), so rows d ≤ {} apart are weighted 1 − d/b; a row missing from the sample keeps its place; sandwich scaled by {}",
        h.order_by, bandwidth_text(h.bandwidth), h.lags, h.small_sample_factor
    )
}

/// A specification's degrees of freedom as numbers, and the general rules they follow (stated
/// once per report, in its conventions section).
pub(super) fn df_convention(r: &SpecResult) -> (String, Vec<String>) {
    let k = r.n - r.df_resid - r.absorbed_df;
    let resid = if r.absorbed_df > 0 {
        format!(
            "residual df {} = {} − {k} − {} (n − K − absorbed)",
            r.df_resid, r.n, r.absorbed_df
        )
    } else {
        format!("residual df {} = {} − {k} (n − K)", r.df_resid, r.n)
    };
    let coef = match (r.distribution, r.df) {
        (CoefDistribution::Normal, _) => "N(0, 1)".to_string(),
        (_, Some(df)) => format!("t({df})"),
        _ => "t".to_string(),
    };
    let mut rules = Vec::new();
    match r.errors {
        ErrorKind::Hc1 => rules.push("HC1 errors scale the sandwich by n/(n − K − absorbed)".to_string()),
        ErrorKind::Hac => rules.push("HAC errors scale the sandwich by n/(n − K − absorbed)".to_string()),
        ErrorKind::Cluster => rules.push("Clustered (CR1) errors scale the sandwich by G/(G − 1)·(n − 1)/(n − K − a′), G the clusters and a′ the absorbed df of groups not lying wholly inside one cluster; their coefficient tests refer to t(G − 1) and their robust F tests to F(q, G − 1)".to_string()),
        _ => {}
    }
    rules.push("K counts the estimated coefficients and absorbed the df used by swept-out group means (zero without fixed effects); classical F tests refer to F(q, n − L − absorbed), L the regressors of that regression".to_string());
    (format!("{resid}; coefficient tests {coef}"), rules)
}

pub(super) fn term_row(name: &str, t: &Term) -> TermRow {
    TermRow {
        term: name.to_string(),
        est: num(t.estimate),
        se: num(t.std_error),
        stat: num(t.statistic),
        p: pval(t.p_value),
        ci: format!("[{}, {}]", num(t.ci[0]), num(t.ci[1])),
    }
}

pub(super) fn test_line(name: &str, t: &TestResult) -> String {
    let dist = super::super::identification::dist_text(t.distribution);
    format!("{name}: {} ({dist}), {}", num(t.statistic), p_is(t.p_value))
}

pub(super) fn ordered_terms(
    order: &[String],
    terms: &std::collections::BTreeMap<String, Term>,
) -> Vec<TermRow> {
    let mut rows: Vec<TermRow> = order
        .iter()
        .filter_map(|n| terms.get(n).map(|t| term_row(n, t)))
        .collect();
    rows.extend(
        terms
            .iter()
            .filter(|(n, _)| !order.contains(n))
            .map(|(n, t)| term_row(n, t)),
    );
    rows
}
