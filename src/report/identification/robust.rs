//! "Do the conclusions hold if the instruments are weak?": Anderson–Rubin test and set,
//! Kleibergen LM and CLR (homoskedastic or robust), tF. Typed values; the sentences are the `id_words` macro
//! of `templates/words.j2`.

use super::super::format::{num, p_is, set_text};
use super::evidence::{errors_name, rejects};
use super::typed::{typed_row, Cell, TypedEvidence, TypedQuestion, Words};
use crate::plan::{Errors, Spec};
use crate::results::{ArShape, ErrorKind, LmClrErrors, SetPiece, SpecResult, TestResult};

pub(super) fn robust(s: &Spec, r: &SpecResult, alpha: f64) -> TypedQuestion {
    let mut rows = Vec::new();
    let x = s.endogenous.first().cloned().unwrap_or_default();
    if let Some(ar) = &r.anderson_rubin {
        rows.extend(anderson_rubin_rows(&x, ar, alpha));
    }
    if let Some(lc) = &r.lm_clr {
        rows.extend(lm_clr_rows(&x, lc, alpha));
    } else if r.anderson_rubin.is_some() {
        rows.push(lm_clr_missing_row(s, r));
    }
    if let Some(w) = &r.weak_instruments {
        rows.extend(tf_row(s, r, &x, w));
    }
    TypedQuestion {
        ask: Words::RobustAsk,
        rows,
        note: Words::RobustNote,
    }
}

/// The test of `x` = `null` and what its p-value says (`homoskedastic`: the test assumes it).
fn reading(x: &str, null: &str, p: f64, alpha: f64, homoskedastic: bool) -> Words {
    Words::RobustReading {
        rejects: rejects(p, alpha),
        x: x.to_string(),
        null: null.to_string(),
        alpha: alpha.to_string(),
        homoskedastic,
    }
}

/// The Anderson–Rubin test of `x` = its null and the confidence set it inverts into.
fn anderson_rubin_rows(
    x: &str,
    ar: &crate::results::AndersonRubinResult,
    alpha: f64,
) -> Vec<TypedEvidence> {
    let t = TestResult {
        statistic: ar.statistic,
        p_value: ar.p_value,
        distribution: ar.distribution,
    };
    let null = ar.null.to_string();
    let test = Words::RobustTest {
        test: "anderson_rubin",
        x: x.to_string(),
        null: null.clone(),
        form: None,
    };
    vec![
        typed_row(test, &t, reading(x, &null, ar.p_value, alpha, false)),
        set_row(
            Words::RobustSet {
                test: "anderson_rubin",
                level: format!("{:.0}", 100.0 * ar.confidence),
                form: None,
            },
            ar.shape,
            &ar.set,
            false,
        ),
    ]
}

/// A confidence set from an inverted test: its pieces and what its shape says
/// (`stationary`: an LM set in several pieces, which may come from stationary points).
fn set_row(test: Words, shape: ArShape, set: &[SetPiece], stationary: bool) -> TypedEvidence {
    let shape = match shape {
        ArShape::Bounded => "bounded",
        ArShape::WholeLine => "whole_line",
        ArShape::Empty => "empty",
        ArShape::Union if set.iter().all(|p| p.lower.is_some() && p.upper.is_some()) => {
            "several_bounded"
        }
        _ => "unbounded",
    };
    TypedEvidence {
        test: test.into(),
        statistic: "—".into(),
        reference: Words::InvertedTest.into(),
        threshold: Cell::Text(set_text(set)),
        reading: Words::SetReading { shape, stationary }.into(),
    }
}

/// Kleibergen's LM and the conditional LR tests of `x` = their null, in the form the errors
/// give (homoskedastic, or robust: Kleibergen 2005).
fn lm_clr_rows(x: &str, lc: &crate::results::LmClrResult, alpha: f64) -> Vec<TypedEvidence> {
    let null = lc.null.to_string();
    let form = Some(lc.errors.as_str());
    let homoskedastic = lc.errors == LmClrErrors::Homoskedastic;
    let test = |test: &'static str| Words::RobustTest {
        test,
        x: x.to_string(),
        null: null.clone(),
        form,
    };
    let level = format!("{:.0}", 100.0 * lc.confidence);
    let set = |test: &'static str| Words::RobustSet {
        test,
        level: level.clone(),
        form,
    };
    vec![
        typed_row(
            test("lm"),
            &lc.lm,
            reading(x, &null, lc.lm.p_value, alpha, homoskedastic),
        ),
        TypedEvidence {
            test: test("clr").into(),
            statistic: num(lc.clr_statistic),
            reference: Words::ClrReference {
                strength: num(lc.clr_conditioning),
            }
            .into(),
            threshold: p_is(lc.clr_p_value).into(),
            reading: reading(x, &null, lc.clr_p_value, alpha, homoskedastic).into(),
        },
        // LM is the squared score of the AR objective: zero at every stationary point.
        set_row(set("lm"), lc.lm_shape, &lc.lm_set, lc.lm_set.len() > 1),
        set_row(set("clr"), lc.clr_shape, &lc.clr_set, false),
    ]
}

/// Why the LM and CLR tests are absent where the Anderson–Rubin test is shown: no form for
/// the errors (two-way clusters, HAC), or undefined for the data.
fn lm_clr_missing_row(s: &Spec, r: &SpecResult) -> TypedEvidence {
    let two_way = matches!(&s.errors, Errors::Cluster(by) if by.len() > 1);
    TypedEvidence {
        test: Words::LmClrTests.into(),
        statistic: "—".into(),
        reference: "—".into(),
        threshold: Words::NotComputed.into(),
        reading: Words::LmClrMissing {
            undefined: !(two_way || r.errors == ErrorKind::Hac),
            errors: if two_way {
                "two-way clustered"
            } else {
                errors_name(r)
            },
        }
        .into(),
    }
}

/// The tF adjustment of the 2SLS t-test, when the first-stage F gives one (or, with one
/// instrument, says that none exists).
fn tf_row(
    s: &Spec,
    r: &SpecResult,
    x: &str,
    w: &crate::results::WeakInstrumentResult,
) -> Option<TypedEvidence> {
    let t = r.terms.get(x).map(|t| t.statistic.abs());
    let statistic = t.map_or("n/a".into(), |t| format!("|t| = {}", num(t)));
    let (threshold, reading) = match w.tf_critical_value {
        Some(c) => (
            Words::TfCritical { value: num(c) },
            Words::TfReading {
                rejects: t.map(|t| t > c),
            },
        ),
        None if s.instruments.len() == 1 => (Words::TfNoCritical, Words::TfTooWeak),
        None => return None,
    };
    Some(TypedEvidence {
        test: Words::TfTest.into(),
        statistic,
        reference: Words::TfReference.into(),
        threshold: threshold.into(),
        reading: reading.into(),
    })
}
