//! "Is the regressor endogenous?" and "Do the instruments agree?": endogeneity and
//! over-identification tests.

use super::evidence::{
    errors_name, homoskedastic_remark, plural, rejects, row, Evidence, Question,
};
use crate::plan::Spec;
use crate::results::SpecResult;

pub(super) fn endogeneity(s: &Spec, r: &SpecResult, alpha: f64) -> Question {
    let n = s.endogenous.len();
    let mut rows = Vec::new();
    if let Some(e) = &r.endogeneity {
        let read = |p: f64, remark: &str| {
            if rejects(p, alpha) {
                format!("exogeneity rejected at {alpha}: OLS and the IV estimate differ by more than chance{remark}")
            } else {
                format!("exogeneity not rejected at {alpha}: OLS and the IV estimate differ by no more than chance{remark}")
            }
        };
        let remark = homoskedastic_remark(r);
        rows.push(row(
            format!("control-function test, {} errors", errors_name(r)),
            &e.control_function,
            read(e.control_function.p_value, ""),
        ));
        rows.push(row(
            "Durbin".into(),
            &e.durbin,
            read(e.durbin.p_value, remark),
        ));
        rows.push(row(
            "Wu–Hausman".into(),
            &e.wu_hausman,
            read(e.wu_hausman.p_value, remark),
        ));
    }
    Question {
        ask: format!(
            "{} endogenous?",
            plural(n, "Is the regressor", "Are the regressors")
        ),
        rows,
        note: "The plan did not request the endogeneity tests for this specification.".into(),
    }
}

pub(super) fn agreement(s: &Spec, r: &SpecResult, alpha: f64) -> Question {
    let mut rows = Vec::new();
    if let Some(o) = &r.overidentification {
        let remark = homoskedastic_remark(r);
        let read = |p: f64, remark: &str| {
            if rejects(p, alpha) {
                format!("the instruments point to different coefficients at {alpha}: one is invalid, or effects differ between the groups each moves{remark}")
            } else {
                format!("no evidence at {alpha} that the instruments disagree; agreement does not show validity{remark}")
            }
        };
        rows.push(row(
            "Sargan".into(),
            &o.sargan,
            read(o.sargan.p_value, remark),
        ));
        rows.push(row(
            "Basmann".into(),
            &o.basmann,
            read(o.basmann.p_value, remark),
        ));
        match &o.hansen_j {
            Some(j) => rows.push(row(
                format!("Hansen J, two-step GMM, {} weight", errors_name(r)),
                j,
                read(j.p_value, ""),
            )),
            None => rows.push(Evidence {
                test: "Hansen J".into(),
                statistic: "n/a".into(),
                reference: "—".into(),
                threshold: "—".into(),
                reading: "not computed with two-way clustering (no positive definite weight is guaranteed)".into(),
            }),
        }
    }
    let exact = s.instruments.len() == s.endogenous.len();
    Question {
        ask: "Do the instruments agree?".into(),
        rows,
        note: if exact {
            "Cannot be tested: there are exactly as many instruments as endogenous regressors."
                .into()
        } else {
            "The plan did not request the over-identification tests for this specification.".into()
        },
    }
}
