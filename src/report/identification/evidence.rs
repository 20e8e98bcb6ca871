//! The rows of the identification panel and the small readings every question shares.

use super::super::format::{num, p_is};
use crate::distribution::Reference;
use crate::results::{SpecResult, TestResult};
use serde::Serialize;

/// One question and the evidence on it.
#[derive(Debug, Serialize)]
pub(in crate::report) struct Question {
    pub ask: String,
    pub rows: Vec<Evidence>,
    /// Said when there is no row (not requested, or not testable).
    pub note: String,
}

/// One row of evidence.
#[derive(Debug, Serialize)]
pub(in crate::report) struct Evidence {
    pub test: String,
    pub statistic: String,
    pub reference: String,
    pub threshold: String,
    pub reading: String,
}

/// A reference distribution as text.
pub(in crate::report) fn dist_text(d: Reference) -> String {
    match d {
        Reference::Normal => "N(0, 1)".to_string(),
        Reference::StudentT { df } => format!("t({df})"),
        Reference::F { df1, df2 } => format!("F({df1}, {df2})"),
        Reference::ChiSquare { df } => format!("χ²({df})"),
    }
}

pub(in crate::report) fn row(test: String, t: &TestResult, reading: String) -> Evidence {
    Evidence {
        test,
        statistic: num(t.statistic),
        reference: dist_text(t.distribution),
        threshold: p_is(t.p_value),
        reading,
    }
}

/// Whether `p` rejects at `alpha` (a p-value that is not a number rejects nothing).
pub(in crate::report) fn rejects(p: f64, alpha: f64) -> bool {
    p.is_finite() && p <= alpha
}

/// The name of a specification's error type in a row label.
pub(in crate::report) fn errors_name(r: &SpecResult) -> &'static str {
    r.errors.row_name()
}
