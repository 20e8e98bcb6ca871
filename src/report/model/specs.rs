//! Specifications: the plan's side-by-side tables and one block per specification (its facts,
//! estimates, identification panel, first stages, reduced form and LIML estimate), with the
//! degrees-of-freedom conventions the report states once. The model carries typed values;
//! the sentences are the macros of `templates/words.j2` (`fact`, `table_errors`, `table_note`,
//! `block_title`, `block_line`, `convention`).

use super::super::format::{num, pval};
use super::super::summary_rows::{RowCell, RowLabel, SummaryNote};
use crate::plan::spec_terms;
use crate::results::{BandwidthRule, CoefDistribution, ErrorKind, Results, SpecResult, Term};
use serde::Serialize;

#[derive(Debug, Serialize)]
pub(super) struct TableModel {
    title: String,
    columns: Vec<String>,
    estimators: Vec<String>,
    rows: Vec<TableRow>,
    n: Vec<String>,
    errors: Vec<ErrorsCell>,
    /// Rows the plan asked for beneath the coefficients: a label and one cell per column.
    extra: Vec<(RowLabel, Vec<RowCell>)>,
    notes: Vec<TableNote>,
}

/// A table's errors cell: clustered, HAC, or the kind's label.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(super) enum ErrorsCell {
    Cluster { by: Vec<String>, clusters: usize },
    Hac { bandwidth: String },
    Label { label: &'static str },
}

/// A note beneath a table.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(super) enum TableNote {
    /// Standard errors in parentheses.
    Parentheses,
    /// The legend of the marks: each mark with its threshold.
    Marks { marks: Vec<(String, String)> },
    /// A note of a summary row.
    Summary { note: SummaryNote },
    /// The columns rest on different numbers of rows.
    MixedRows { ns: Vec<usize> },
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
    facts: Vec<Fact>,
    main: Block,
    identification: Option<super::super::identification::Panel>,
    blocks: Vec<Block>,
}

#[derive(Debug, Serialize)]
pub(super) struct Block {
    title: BlockTitle,
    terms: Vec<TermRow>,
    lines: Vec<BlockLine>,
}

/// Which block: the estimates, a first stage, the reduced form or the LIML estimate.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(super) enum BlockTitle {
    Estimates,
    FirstStage { name: String },
    ReducedForm { outcome: String },
    Liml { kappa: String },
}

/// A line beneath a block's terms.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(super) enum BlockLine {
    RSquared { value: String },
}

/// A fact listed under a specification's title.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(super) enum Fact {
    Rows {
        estimator: &'static str,
        outcome: String,
        n: usize,
        in_sample: usize,
        dropped: usize,
    },
    Errors {
        errors: ErrorsText,
        df: DfFact,
    },
    Fit {
        r_squared: String,
        residual_sd: String,
        level: String,
    },
    Weighted {
        column: String,
        zero_weight: usize,
        /// Classical errors: their variance model (error variance ∝ 1/w) is not that of
        /// sampling weights, which the sentence says.
        classical: bool,
    },
    Hac(HacFact),
    FixedEffects(FixedEffectsFact),
    Kappa {
        value: String,
    },
    Sample {
        text: String,
    },
    Dropped {
        terms: Vec<String>,
    },
    LinearProbability {
        outside: usize,
    },
}

/// A specification's errors: clustered (by which columns, how many clusters) or the kind.
#[derive(Debug, Serialize)]
pub(super) struct ErrorsText {
    cluster_by: Option<Vec<String>>,
    clusters: Option<usize>,
    name: &'static str,
}

/// A specification's residual df as numbers, and the reference of its coefficient tests.
#[derive(Debug, Serialize)]
pub(super) struct DfFact {
    df_resid: usize,
    n: usize,
    k: usize,
    absorbed: usize,
    /// Coefficient tests refer to N(0, 1) (else to t, with `t_df` if known).
    normal: bool,
    t_df: Option<String>,
}

/// How HAC errors were computed.
#[derive(Debug, Serialize)]
pub(super) struct HacFact {
    order_by: String,
    bandwidth: String,
    /// The bandwidth was chosen from the data (else stated in the plan).
    chosen: bool,
    lags: usize,
    factor: String,
}

/// The fixed effects swept out of a specification.
#[derive(Debug, Serialize)]
pub(super) struct FixedEffectsFact {
    levels: Vec<(String, usize)>,
    absorbed_df: usize,
    /// Absorbed df of groups wholly inside one cluster (only when clustered and positive).
    nested: Option<usize>,
    within_r_squared: Option<String>,
    singletons: usize,
}

/// A rule the report's degrees of freedom follow, stated once in its conventions.
#[derive(Debug, Serialize, PartialEq, Clone, Copy)]
#[serde(rename_all = "snake_case")]
pub(super) enum Convention {
    Hc1,
    Hac,
    Cluster,
    Classical,
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
                        se: format!("({})", num(v.std_error)), // a number's display
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
                (Some(by), Some(g)) => ErrorsCell::Cluster {
                    by: by.clone(),
                    clusters: g,
                },
                _ => match &s.hac {
                    Some(h) => ErrorsCell::Hac {
                        bandwidth: bandwidth_text(h.bandwidth),
                    },
                    None => ErrorsCell::Label {
                        label: s.errors.label(),
                    },
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
pub(super) fn table_notes(t: &crate::plan::Table, specs: &[&SpecResult]) -> Vec<TableNote> {
    let mut notes = vec![TableNote::Parentheses];
    if !t.stars.is_empty() {
        notes.push(stars_legend(&t.stars));
    }
    for row in &t.summary_rows {
        notes.extend(
            super::super::summary_rows::notes(row, &t.columns, specs)
                .into_iter()
                .map(|note| TableNote::Summary { note }),
        );
    }
    let mut ns: Vec<usize> = specs.iter().map(|s| s.n).collect();
    ns.sort_unstable();
    ns.dedup();
    if ns.len() > 1 {
        notes.push(TableNote::MixedRows { ns });
    }
    notes
}

/// Significance marks: one `*` per plan threshold (largest first) that `p` falls below.
pub(super) fn stars(p: f64, thresholds: &[f64]) -> String {
    "*".repeat(thresholds.iter().filter(|&&t| p < t).count())
}

/// The legend of a table's marks, from the plan's thresholds.
pub(super) fn stars_legend(thresholds: &[f64]) -> TableNote {
    TableNote::Marks {
        marks: thresholds
            .iter()
            .enumerate()
            .map(|(i, t)| ("*".repeat(i + 1), t.to_string()))
            .collect(),
    }
}

pub(super) fn spec_model(s: &crate::plan::Spec, r: &SpecResult, alpha: f64) -> SpecModel {
    SpecModel {
        id: s.id.clone(),
        title: crate::escape::line(&r.title),
        facts: spec_facts(s, r),
        main: Block {
            title: BlockTitle::Estimates,
            terms: ordered_terms(&spec_terms(s), &r.terms),
            lines: vec![],
        },
        identification: super::super::identification::panel(s, r, alpha),
        blocks: side_blocks(s, r),
    }
}

/// The facts listed under a specification's title: estimator and rows, errors and df, fit,
/// and whatever applies of HAC, fixed effects, κ, sample, dropped terms and the LPM check.
fn spec_facts(s: &crate::plan::Spec, r: &SpecResult) -> Vec<Fact> {
    let mut facts = vec![
        Fact::Rows {
            estimator: r.estimator.label(),
            outcome: r.outcome.clone(),
            n: r.n,
            in_sample: r.sample.in_sample,
            dropped: r.sample.dropped_missing,
        },
        Fact::Errors {
            errors: errors_text(r),
            df: df_fact(r),
        },
        Fact::Fit {
            r_squared: num(r.r_squared),
            residual_sd: num(r.residual_sd),
            level: format!("{:.0}", 100.0 * r.confidence),
        },
    ];
    if let Some(w) = &r.weights {
        facts.push(Fact::Weighted {
            column: w.clone(),
            zero_weight: r.sample.dropped_zero_weight.unwrap_or(0),
            classical: matches!(r.errors, ErrorKind::Classical),
        });
    }
    if let Some(h) = &r.hac {
        facts.push(Fact::Hac(hac_fact(h)));
    }
    if !r.fixed_effects.is_empty() {
        facts.push(Fact::FixedEffects(fixed_effects_fact(r)));
    }
    if let Some(k) = r.kappa {
        facts.push(Fact::Kappa { value: num(k) });
    }
    if let Some((text, _)) = &s.sample {
        facts.push(Fact::Sample { text: text.clone() });
    }
    if !r.dropped_terms.is_empty() {
        facts.push(Fact::Dropped {
            terms: r.dropped_terms.clone(),
        });
    }
    if let Some(l) = &r.linear_probability {
        facts.push(Fact::LinearProbability {
            outside: l.fitted_outside_unit_interval,
        });
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
            title: BlockTitle::FirstStage { name: name.clone() },
            terms: ordered_terms(&z_order, &fs.terms),
            lines: vec![BlockLine::RSquared {
                value: num(fs.r_squared),
            }],
        });
    }
    if let Some(rf) = &r.reduced_form {
        blocks.push(Block {
            title: BlockTitle::ReducedForm {
                outcome: rf.outcome.clone(),
            },
            terms: ordered_terms(&z_order, &rf.terms),
            lines: vec![BlockLine::RSquared {
                value: num(rf.r_squared),
            }],
        });
    }
    if let Some(l) = &r.liml {
        blocks.push(Block {
            title: BlockTitle::Liml {
                kappa: num(l.kappa),
            },
            terms: ordered_terms(&order, &l.terms),
            lines: vec![],
        });
    }
    blocks
}

fn errors_text(r: &SpecResult) -> ErrorsText {
    let clustered = r.cluster_by.is_some() && r.clusters.is_some();
    ErrorsText {
        cluster_by: r.cluster_by.clone().filter(|_| clustered),
        clusters: r.clusters.filter(|_| clustered),
        name: r.errors.fact_name(),
    }
}

/// The fixed effects swept out of a specification.
fn fixed_effects_fact(r: &SpecResult) -> FixedEffectsFact {
    FixedEffectsFact {
        levels: r
            .fixed_effects
            .iter()
            .map(|(k, v)| (k.clone(), *v))
            .collect(),
        absorbed_df: r.absorbed_df,
        nested: Some(r.absorbed_nested_df).filter(|&m| r.cluster_by.is_some() && m > 0),
        within_r_squared: r.within_r_squared.map(num),
        singletons: r.singletons_dropped,
    }
}

/// A HAC bandwidth: whole numbers as stated, others to the usual precision.
pub(super) fn bandwidth_text(b: f64) -> String {
    if b.fract() == 0.0 && b < 1e9 {
        format!("{}", b as u64)
    } else {
        num(b)
    }
}

/// How HAC errors were computed.
fn hac_fact(h: &crate::results::HacResult) -> HacFact {
    HacFact {
        order_by: h.order_by.clone(),
        bandwidth: bandwidth_text(h.bandwidth),
        chosen: h.bandwidth_rule == BandwidthRule::NeweyWest1994,
        lags: h.lags,
        factor: h.small_sample_factor.to_string(),
    }
}

/// A specification's degrees of freedom as numbers.
fn df_fact(r: &SpecResult) -> DfFact {
    DfFact {
        df_resid: r.df_resid,
        n: r.n,
        k: r.n - r.df_resid - r.absorbed_df,
        absorbed: r.absorbed_df,
        normal: r.distribution == CoefDistribution::Normal,
        t_df: r.df.map(|d| d.to_string()),
    }
}

/// The general rules a specification's degrees of freedom follow (stated once per report,
/// in its conventions section).
pub(super) fn df_conventions(r: &SpecResult) -> Vec<Convention> {
    let mut rules = Vec::new();
    match r.errors {
        ErrorKind::Hc1 => rules.push(Convention::Hc1),
        ErrorKind::Hac => rules.push(Convention::Hac),
        ErrorKind::Cluster => rules.push(Convention::Cluster),
        _ => {}
    }
    rules.push(Convention::Classical);
    rules
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
