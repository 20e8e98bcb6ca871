//! Short labels of result enums for a reader (table headers, row labels), each in one place.
//! results.json's own spellings are `as_str` in `results::kinds`.

use crate::inference::Correction;
use crate::results::{ErrorKind, EstimatorKind};

impl EstimatorKind {
    /// The estimator's name in a table header or sentence: OLS, 2SLS, LIML, FULLER.
    pub fn label(self) -> &'static str {
        match self {
            EstimatorKind::Ols => "OLS",
            EstimatorKind::Tsls => "2SLS",
            EstimatorKind::Liml => "LIML",
            EstimatorKind::Fuller => "FULLER",
        }
    }
}

impl ErrorKind {
    /// The error type's name in a table row: CLASSICAL, HC0–HC3, CLUSTER, HAC.
    pub fn label(self) -> &'static str {
        match self {
            ErrorKind::Classical => "CLASSICAL",
            ErrorKind::Hc0 => "HC0",
            ErrorKind::Hc1 => "HC1",
            ErrorKind::Hc2 => "HC2",
            ErrorKind::Hc3 => "HC3",
            ErrorKind::Cluster => "CLUSTER",
            ErrorKind::Hac => "HAC",
        }
    }

    /// The error type in a test's row label: "classical", "clustered", else the label.
    pub fn row_name(self) -> &'static str {
        match self {
            ErrorKind::Classical => "classical",
            ErrorKind::Cluster => "clustered",
            e => e.label(),
        }
    }

    /// The error type in a specification's facts: "classical (homoskedastic)", else the label.
    pub fn fact_name(self) -> &'static str {
        match self {
            ErrorKind::Classical => "classical (homoskedastic)",
            e => e.label(),
        }
    }
}

/// The name of a multiple-testing correction in a report.
pub(super) fn correction_name(c: Correction) -> &'static str {
    match c {
        Correction::None => "none",
        Correction::Bonferroni => "Bonferroni",
        Correction::Holm => "Holm",
        Correction::BenjaminiHochberg => "Benjamini–Hochberg",
        Correction::Bky => "BKY sharpened q-values",
        Correction::RomanoWolf => "Romano–Wolf",
    }
}
