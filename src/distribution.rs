//! Reference distributions named by test statistics.
//!
//! Estimation code (`crate::estimate`) reports each statistic together with the
//! distribution it is referred to; `crate::inference` turns the pair into p-values and
//! critical values. Keeping the name of the distribution as data means results.json can
//! state exactly which distribution and degrees of freedom every p-value used.

use serde::Serialize;

/// The distribution a test statistic is compared with under its null hypothesis.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "name", rename_all = "kebab-case")]
pub enum Reference {
    /// Standard normal.
    Normal,
    /// Student's t with `df` degrees of freedom.
    StudentT {
        /// Degrees of freedom (positive).
        df: f64,
    },
    /// Snedecor's F with `df1` numerator and `df2` denominator degrees of freedom.
    F {
        /// Numerator degrees of freedom.
        df1: f64,
        /// Denominator degrees of freedom.
        df2: f64,
    },
    /// Chi-square with `df` degrees of freedom.
    ChiSquare {
        /// Degrees of freedom (positive).
        df: f64,
    },
}

/// A test statistic and the distribution it is referred to.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TestStatistic {
    /// The value of the statistic.
    pub statistic: f64,
    /// Its reference distribution under the null.
    pub reference: Reference,
}
