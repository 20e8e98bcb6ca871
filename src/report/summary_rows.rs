//! The optional rows a table's `summary_rows` adds beneath its coefficients, and the notes
//! that explain them. Every number comes from results.json (`first_stage`,
//! `weak_instruments`, `arms`); this module only formats.

use super::format::num;
use crate::results::{ArmMean, ArmStdError, SpecResult, TakeUpMissing};

/// The rows entry `row` adds: a label and one cell per column (blank where the column has no
/// such value; "n/a" and a short reason where it could have one but does not, the full reason
/// in the notes).
pub fn rows(row: &str, specs: &[&SpecResult]) -> Vec<(String, Vec<String>)> {
    let cells = |f: &dyn Fn(&SpecResult) -> String| specs.iter().map(|s| f(s)).collect();
    match row {
        "first-stage-strength" => {
            let first = |s: &SpecResult| {
                s.first_stage
                    .as_ref()
                    .and_then(|m| m.values().next().cloned())
            };
            vec![
                (
                    "first-stage F, the column's errors".to_string(),
                    cells(&|s| first(s).map_or(String::new(), |f| num(f.robust_f_statistic))),
                ),
                (
                    "effective F (Montiel Olea–Pflueger)".to_string(),
                    cells(&|s| {
                        s.weak_instruments
                            .as_ref()
                            .map_or(String::new(), |w| num(w.effective_f))
                    }),
                ),
            ]
        }
        "comparison-mean" => vec![(
            "outcome mean, comparison arm (s.e.)".to_string(),
            cells(&|s| {
                s.arms
                    .comparison_mean
                    .as_ref()
                    .map_or("n/a".to_string(), mean_cell)
            }),
        )],
        "take-up-by-arm" => take_up_rows(specs),
        _ => Vec::new(),
    }
}

/// The take-up rows: one row per arm of the instrument, or one row of reasons when no
/// column shows take-up; none when every column is OLS.
fn take_up_rows(specs: &[&SpecResult]) -> Vec<(String, Vec<String>)> {
    let cells = |f: &dyn Fn(&SpecResult) -> String| specs.iter().map(|s| f(s)).collect();
    if specs.iter().all(|s| !s.estimator.is_iv()) {
        return Vec::new();
    }
    let why = |s: &SpecResult| match s.arms.take_up_missing {
        Some(TakeUpMissing::Instruments) => "n/a: several instruments",
        Some(TakeUpMissing::Endogenous) => "n/a: several endogenous",
        Some(TakeUpMissing::NotBinary) => "n/a: not 0/1",
        Some(TakeUpMissing::OneArm) => "n/a: one arm only",
        Some(TakeUpMissing::SmallArm) => "n/a: an arm too small",
        Some(TakeUpMissing::Weighted) => "n/a: weighted",
        _ => "n/a",
    };
    let cell = |k: usize| {
        cells(&|s: &SpecResult| match &s.arms.take_up {
            _ if !s.estimator.is_iv() => String::new(),
            Some(t) => mean_cell(&t[k]),
            None => why(s).to_string(),
        })
    };
    if specs.iter().all(|s| s.arms.take_up.is_none()) {
        return vec![("take-up by arm".to_string(), cell(0))];
    }
    (0..2)
        .map(|k| {
            (
                format!("take-up where the instrument is {k} (s.e.)"),
                cell(k),
            )
        })
        .collect()
}

fn mean_cell(m: &ArmMean) -> String {
    format!("{} ({})", num(m.mean), num(m.std_error))
}

/// The notes entry `row` adds beneath the table: what the rows are, per column where the arm
/// variable differs, and why a value is not shown.
pub fn notes(row: &str, columns: &[String], specs: &[&SpecResult]) -> Vec<String> {
    match row {
        "first-stage-strength" => vec!["First-stage strength: how strongly the instruments move the first endogenous regressor, as the first-stage F with the column's own errors and as the effective F where the plan requested the weak-instrument diagnostic; blank for OLS columns.".to_string()],
        "comparison-mean" => comparison_mean_notes(columns, specs),
        "take-up-by-arm" => take_up_notes(columns, specs),
        _ => Vec::new(),
    }
}

/// The comparison-mean note: the arm variable and rows of each column, the standard errors,
/// and why a column shows no mean.
fn comparison_mean_notes(columns: &[String], specs: &[&SpecResult]) -> Vec<String> {
    let arms: Vec<String> = columns
        .iter()
        .zip(specs)
        .filter_map(|(c, s)| {
            let by = s.arms.by.as_ref()?;
            s.arms.comparison_mean.as_ref()?;
            Some(format!(
                "{c}: `{}` = 0, {} rows",
                by,
                s.arms.comparison_mean.as_ref()?.n
            ))
        })
        .collect();
    let mut out = vec![format!(
        "Outcome mean, comparison arm: the mean of the column's outcome over the rows it was estimated on whose arm variable is 0 ({}); {}.",
        arms.join("; "),
        se_text(specs)
    )];
    out.extend(columns.iter().zip(specs).filter_map(|(c, s)| {
        let why = s.arms.comparison_note.as_ref()?;
        Some(format!("Outcome mean not shown for {c}: {why}."))
    }));
    out
}

/// The take-up note: what each column shows, the standard errors, and why an IV column
/// shows no take-up.
fn take_up_notes(columns: &[String], specs: &[&SpecResult]) -> Vec<String> {
    let shown: Vec<String> = columns
        .iter()
        .zip(specs)
        .filter_map(|(c, s)| {
            let t = s.arms.take_up.as_ref()?;
            Some(format!(
                "{c}: share with `{}` in each arm of `{}` ({} and {} rows)",
                t[0].variable,
                s.arms.by.as_deref().unwrap_or_default(),
                t[0].n,
                t[1].n
            ))
        })
        .collect();
    let mut out = Vec::new();
    if !shown.is_empty() {
        out.push(format!(
            "Take-up by arm: the mean of the endogenous regressor in each arm of the column's binary instrument, over the rows it was estimated on ({}); {}; blank for OLS columns.",
            shown.join("; "),
            se_text(specs)
        ));
    }
    out.extend(
        columns
            .iter()
            .zip(specs)
            .filter(|(_, s)| s.estimator.is_iv() && s.arms.take_up.is_none())
            .map(|(c, s)| {
                format!(
                    "Take-up by arm not shown for {c}: {}.",
                    s.arms.take_up_note.as_deref().unwrap_or("not computed")
                )
            }),
    );
    out
}

/// How the arm means' standard errors were computed, once for the table.
fn se_text(specs: &[&SpecResult]) -> String {
    let mut kinds: Vec<String> = specs
        .iter()
        .map(|s| match (&s.arms.cluster_by, s.arms.std_error_kind) {
            (Some(c), ArmStdError::Cluster) => {
                format!("cluster-robust by `{c}` (CR1 over the arm's clusters)")
            }
            _ => "s/√n".to_string(),
        })
        .collect();
    kinds.sort();
    kinds.dedup();
    format!("standard error of the mean {}", kinds.join(" or "))
}
