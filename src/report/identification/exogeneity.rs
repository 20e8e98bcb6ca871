//! "Is the regressor endogenous?" and "Do the instruments agree?": endogeneity and
//! over-identification tests. Typed values; the sentences are the `id_words` macro of
//! `templates/words.j2`.

use super::evidence::{errors_name, rejects};
use super::typed::{typed_row, TypedEvidence, TypedQuestion, Words};
use crate::plan::Spec;
use crate::results::{ErrorKind, SpecResult};

pub(super) fn endogeneity(s: &Spec, r: &SpecResult, alpha: f64) -> TypedQuestion {
    let mut rows = Vec::new();
    if let Some(e) = &r.endogeneity {
        let remark = r.errors != ErrorKind::Classical;
        let read = |p: f64, remark: bool| Words::Exogeneity {
            rejects: rejects(p, alpha),
            alpha: alpha.to_string(),
            remark,
        };
        rows.push(typed_row(
            Words::ControlFunction {
                errors: errors_name(r),
            },
            &e.control_function,
            read(e.control_function.p_value, false),
        ));
        rows.push(typed_row(
            "Durbin",
            &e.durbin,
            read(e.durbin.p_value, remark),
        ));
        rows.push(typed_row(
            "Wu–Hausman",
            &e.wu_hausman,
            read(e.wu_hausman.p_value, remark),
        ));
    }
    TypedQuestion {
        ask: Words::EndogenousAsk {
            several: s.endogenous.len() != 1,
        },
        rows,
        note: Words::EndogenousNote,
    }
}

pub(super) fn agreement(s: &Spec, r: &SpecResult, alpha: f64) -> TypedQuestion {
    let mut rows = Vec::new();
    if let Some(o) = &r.overidentification {
        let remark = r.errors != ErrorKind::Classical;
        let read = |p: f64, remark: bool| Words::Agreement {
            rejects: rejects(p, alpha),
            alpha: alpha.to_string(),
            remark,
        };
        rows.push(typed_row(
            "Sargan",
            &o.sargan,
            read(o.sargan.p_value, remark),
        ));
        rows.push(typed_row(
            "Basmann",
            &o.basmann,
            read(o.basmann.p_value, remark),
        ));
        match &o.hansen_j {
            Some(j) => rows.push(typed_row(
                Words::HansenJ {
                    errors: errors_name(r),
                },
                j,
                read(j.p_value, false),
            )),
            None => rows.push(TypedEvidence {
                test: "Hansen J".into(),
                statistic: "n/a".into(),
                reference: "—".into(),
                threshold: "—".into(),
                reading: Words::HansenMissing.into(),
            }),
        }
    }
    TypedQuestion {
        ask: Words::AgreeAsk,
        rows,
        note: if s.instruments.len() == s.endogenous.len() {
            Words::AgreeNoteExact
        } else {
            Words::AgreeNote
        },
    }
}
