//! The identification panel of an instrumental-variable specification: the evidence a reader
//! weighs before trusting the estimate, grouped by the question it answers (are the
//! instruments strong, is inference robust to weakness, is the regressor endogenous, do the
//! instruments agree). Each row gives the published test's name, its statistic, the
//! reference distribution, the p-value or critical value and a one-line reading. A question
//! whose tests the plan did not request says so rather than disappearing.

mod evidence;
mod exogeneity;
mod robust;
mod strength;
mod typed;

pub(super) use evidence::dist_text;
use typed::TypedQuestion;

use crate::plan::Spec;
use crate::results::SpecResult;
use serde::Serialize;

/// One identification panel.
#[derive(Debug, Serialize)]
pub(super) struct Panel {
    /// The questions, in reading order.
    pub questions: Vec<TypedQuestion>,
}

/// The panel of an IV specification; `None` for OLS.
pub(super) fn panel(s: &Spec, r: &SpecResult, alpha: f64) -> Option<Panel> {
    if s.endogenous.is_empty() {
        return None;
    }
    Some(Panel {
        questions: vec![
            strength::strength(s, r, alpha),
            robust::robust(s, r, alpha),
            exogeneity::endogeneity(s, r, alpha),
            exogeneity::agreement(s, r, alpha),
        ],
    })
}
