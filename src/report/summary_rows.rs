//! The optional rows a table's `summary_rows` adds beneath its coefficients, and the notes
//! that explain them. Every number comes from results.json (`first_stage`,
//! `weak_instruments`, `arms`); this module formats the numbers and types the rest. The
//! labels, cells and notes are worded by the `sr_label`, `sr_cell` and `sr_note` macros of
//! `templates/words.j2`.

use super::format::num;
use crate::results::{ArmMean, ArmStdError, SpecResult, TakeUpMissing};
use serde::Serialize;

/// A summary row's label.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum RowLabel {
    FirstStageF,
    EffectiveF,
    ComparisonMean,
    TakeUpByArm,
    /// Take-up where the instrument is `arm` (0 or 1).
    TakeUpWhere {
        arm: usize,
    },
}

/// A summary row's cell: a value (blank where the column has no such value), or "n/a" with
/// a short reason where it could have one but does not (the full reason in the notes).
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum RowCell {
    Value {
        text: String,
    },
    /// `why`: `instruments`, `endogenous`, `not_binary`, `one_arm`, `small_arm`, `weighted`,
    /// or none.
    NotAvailable {
        why: Option<&'static str>,
    },
}

/// A note beneath the table about its summary rows.
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum SummaryNote {
    FirstStageStrength,
    /// Per column showing a mean: (column, arm variable, rows in the comparison arm).
    ComparisonMean {
        arms: Vec<(String, String, usize)>,
        errors: StdErrors,
    },
    /// A column whose comparison mean is not shown, and why.
    ComparisonMissing {
        column: String,
        why: String,
    },
    /// Per column showing take-up: (column, endogenous variable, arm variable, rows in
    /// arms 0 and 1).
    TakeUp {
        shown: Vec<(String, String, String, usize, usize)>,
        errors: StdErrors,
    },
    /// An IV column whose take-up is not shown, and why (`None`: not computed).
    TakeUpMissing {
        column: String,
        why: Option<String>,
    },
}

/// How the arm means' standard errors were computed, once for the table: the cluster
/// columns of cluster-robust ones, and whether any column uses s/√n.
#[derive(Debug, Serialize)]
pub struct StdErrors {
    clusters: Vec<String>,
    plain: bool,
}

type Row = (RowLabel, Vec<RowCell>);

fn value(text: String) -> RowCell {
    RowCell::Value { text }
}

/// The rows entry `row` adds: a label and one cell per column.
pub fn rows(row: &str, specs: &[&SpecResult]) -> Vec<Row> {
    let cells = |f: &dyn Fn(&SpecResult) -> RowCell| specs.iter().map(|s| f(s)).collect();
    match row {
        "first-stage-strength" => {
            let first = |s: &SpecResult| {
                s.first_stage
                    .as_ref()
                    .and_then(|m| m.values().next().cloned())
            };
            vec![
                (
                    RowLabel::FirstStageF,
                    cells(&|s| {
                        value(first(s).map_or(String::new(), |f| num(f.robust_f_statistic)))
                    }),
                ),
                (
                    RowLabel::EffectiveF,
                    cells(&|s| {
                        value(
                            s.weak_instruments
                                .as_ref()
                                .map_or(String::new(), |w| num(w.effective_f)),
                        )
                    }),
                ),
            ]
        }
        "comparison-mean" => vec![(
            RowLabel::ComparisonMean,
            cells(&|s| match &s.arms.comparison_mean {
                Some(m) => mean_cell(m),
                None => RowCell::NotAvailable { why: None },
            }),
        )],
        "take-up-by-arm" => take_up_rows(specs),
        _ => Vec::new(),
    }
}

/// The take-up rows: one row per arm of the instrument, or one row of reasons when no
/// column shows take-up; none when every column is OLS.
fn take_up_rows(specs: &[&SpecResult]) -> Vec<Row> {
    if specs.iter().all(|s| !s.estimator.is_iv()) {
        return Vec::new();
    }
    let why = |s: &SpecResult| match s.arms.take_up_missing {
        Some(TakeUpMissing::Instruments) => Some("instruments"),
        Some(TakeUpMissing::Endogenous) => Some("endogenous"),
        Some(TakeUpMissing::NotBinary) => Some("not_binary"),
        Some(TakeUpMissing::OneArm) => Some("one_arm"),
        Some(TakeUpMissing::SmallArm) => Some("small_arm"),
        Some(TakeUpMissing::Weighted) => Some("weighted"),
        _ => None,
    };
    let cell = |k: usize| {
        specs
            .iter()
            .map(|s| match &s.arms.take_up {
                _ if !s.estimator.is_iv() => value(String::new()),
                Some(t) => mean_cell(&t[k]),
                None => RowCell::NotAvailable { why: why(s) },
            })
            .collect()
    };
    if specs.iter().all(|s| s.arms.take_up.is_none()) {
        return vec![(RowLabel::TakeUpByArm, cell(0))];
    }
    (0..2)
        .map(|arm| (RowLabel::TakeUpWhere { arm }, cell(arm)))
        .collect()
}

fn mean_cell(m: &ArmMean) -> RowCell {
    value(format!("{} ({})", num(m.mean), num(m.std_error)))
}

/// The notes entry `row` adds beneath the table: what the rows are, per column where the arm
/// variable differs, and why a value is not shown.
pub fn notes(row: &str, columns: &[String], specs: &[&SpecResult]) -> Vec<SummaryNote> {
    match row {
        "first-stage-strength" => vec![SummaryNote::FirstStageStrength],
        "comparison-mean" => comparison_mean_notes(columns, specs),
        "take-up-by-arm" => take_up_notes(columns, specs),
        _ => Vec::new(),
    }
}

/// The comparison-mean note: the arm variable and rows of each column, the standard errors,
/// and why a column shows no mean.
fn comparison_mean_notes(columns: &[String], specs: &[&SpecResult]) -> Vec<SummaryNote> {
    let arms = columns
        .iter()
        .zip(specs)
        .filter_map(|(c, s)| {
            let by = s.arms.by.as_ref()?;
            let mean = s.arms.comparison_mean.as_ref()?;
            Some((c.clone(), by.clone(), mean.n))
        })
        .collect();
    let mut out = vec![SummaryNote::ComparisonMean {
        arms,
        errors: std_errors(specs),
    }];
    out.extend(columns.iter().zip(specs).filter_map(|(c, s)| {
        let why = s.arms.comparison_note.as_ref()?;
        Some(SummaryNote::ComparisonMissing {
            column: c.clone(),
            why: why.clone(),
        })
    }));
    out
}

/// The take-up note: what each column shows, the standard errors, and why an IV column
/// shows no take-up.
fn take_up_notes(columns: &[String], specs: &[&SpecResult]) -> Vec<SummaryNote> {
    let shown: Vec<(String, String, String, usize, usize)> = columns
        .iter()
        .zip(specs)
        .filter_map(|(c, s)| {
            let t = s.arms.take_up.as_ref()?;
            let by = s.arms.by.clone().unwrap_or_default();
            Some((c.clone(), t[0].variable.clone(), by, t[0].n, t[1].n))
        })
        .collect();
    let mut out = Vec::new();
    if !shown.is_empty() {
        out.push(SummaryNote::TakeUp {
            shown,
            errors: std_errors(specs),
        });
    }
    out.extend(
        columns
            .iter()
            .zip(specs)
            .filter(|(_, s)| s.estimator.is_iv() && s.arms.take_up.is_none())
            .map(|(c, s)| SummaryNote::TakeUpMissing {
                column: c.clone(),
                why: s.arms.take_up_note.clone(),
            }),
    );
    out
}

/// The standard errors' kinds over the columns, each once: cluster columns in the order
/// their sentences sort (a column name followed by the backtick that closes it in the
/// sentence), then s/√n, which sorts after every "cluster-robust" sentence.
fn std_errors(specs: &[&SpecResult]) -> StdErrors {
    let mut clusters = Vec::new();
    let mut plain = false;
    for s in specs {
        match (&s.arms.cluster_by, s.arms.std_error_kind) {
            (Some(c), ArmStdError::Cluster) => clusters.push(c.clone()),
            _ => plain = true,
        }
    }
    StdErrors {
        clusters: sentence_order(clusters),
        plain,
    }
}

/// Cluster columns sorted and deduplicated as the sentences naming them would sort.
fn sentence_order(mut clusters: Vec<String>) -> Vec<String> {
    clusters.sort_by_key(|c| format!("{c}`"));
    clusters.dedup();
    clusters
}

#[cfg(test)]
mod tests {
    #[test]
    fn cluster_columns_sort_as_their_sentences_did() {
        let names = ["b", "a_", "a", "ab", "a", "A", "a-b"];
        let sentence = |c: &str| format!("cluster-robust by `{c}` (CR1 over the arm's clusters)");
        let mut sentences: Vec<String> = names.iter().map(|c| sentence(c)).collect();
        sentences.sort();
        sentences.dedup();
        let typed: Vec<String> =
            super::sentence_order(names.iter().map(|c| c.to_string()).collect())
                .iter()
                .map(|c| sentence(c))
                .collect();
        assert_eq!(typed, sentences);
        // Plain errors come last: every cluster sentence sorts before "s/√n".
        assert!(sentences.iter().all(|s| s.as_str() < "s/√n"));
    }
}
