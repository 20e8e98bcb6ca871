//! The small readings every question of the identification panel shares.

use crate::distribution::Reference;
use crate::results::SpecResult;

/// A reference distribution as text.
pub(in crate::report) fn dist_text(d: Reference) -> String {
    match d {
        Reference::Normal => "N(0, 1)".to_string(),
        Reference::StudentT { df } => format!("t({df})"),
        Reference::F { df1, df2 } => format!("F({df1}, {df2})"),
        Reference::ChiSquare { df } => format!("χ²({df})"),
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
