//! "Do the conclusions hold if the instruments are weak?": Anderson–Rubin test and set,
//! Kleibergen LM and Moreira CLR, tF.

use super::super::format::{num, p_is, set_text};
use super::evidence::{errors_name, rejects, row, Evidence, Question};
use crate::plan::Spec;
use crate::results::{ArShape, ErrorKind, SetPiece, SpecResult, TestResult};

pub(super) fn robust(s: &Spec, r: &SpecResult, alpha: f64) -> Question {
    let mut rows = Vec::new();
    let x = s.endogenous.first().cloned().unwrap_or_default();
    if let Some(ar) = &r.anderson_rubin {
        rows.extend(anderson_rubin_rows(&x, ar, alpha));
    }
    if let Some(lc) = &r.lm_clr {
        rows.extend(lm_clr_rows(&x, lc, alpha));
    } else if r.anderson_rubin.is_some() {
        rows.push(lm_clr_missing_row(r));
    }
    if let Some(w) = &r.weak_instruments {
        rows.extend(tf_row(s, r, &x, w));
    }
    Question {
        ask: "Do the conclusions hold if the instruments are weak?".into(),
        rows,
        note: "Not computed: the tests that stay valid with weak instruments come with the `weak_instruments` diagnostic (one endogenous regressor), which the plan did not request here.".into(),
    }
}

/// The Anderson–Rubin test of `x` = its null and the confidence set it inverts into.
fn anderson_rubin_rows(
    x: &str,
    ar: &crate::results::AndersonRubinResult,
    alpha: f64,
) -> Vec<Evidence> {
    let mut rows = Vec::new();
    let t = TestResult {
        statistic: ar.statistic,
        p_value: ar.p_value,
        distribution: ar.distribution,
    };
    let null = ar.null.to_string();
    rows.push(row(
        format!("Anderson–Rubin test of `{x}` = {null}"),
        &t,
        if rejects(ar.p_value, alpha) {
            format!("rejects `{x}` = {null} at {alpha} however weak the instruments are")
        } else {
            format!(
                "does not reject `{x}` = {null} at {alpha}; valid however weak the instruments are"
            )
        },
    ));
    rows.push(set_row(
        format!(
            "Anderson–Rubin {:.0}% confidence set",
            100.0 * ar.confidence
        ),
        ar.shape,
        &ar.set,
    ));
    rows
}

/// A confidence set from an inverted test: its pieces and what its shape says.
fn set_row(test: String, shape: ArShape, set: &[SetPiece]) -> Evidence {
    let reading = match shape {
        ArShape::Bounded => {
            "a bounded interval: the data bound the effect without relying on instrument strength"
        }
        ArShape::WholeLine => "the whole line: the data cannot bound the effect",
        ArShape::Empty => {
            "empty: no value fits, so the instruments reject each other at this level"
        }
        ArShape::Union if set.iter().all(|p| p.lower.is_some() && p.upper.is_some()) => {
            "several bounded intervals: the effect is bounded, but the set is not one interval"
        }
        _ => "unbounded: the data cannot bound the effect on at least one side",
    };
    Evidence {
        test,
        statistic: "—".into(),
        reference: "inverted test".into(),
        threshold: set_text(set),
        reading: reading.to_string(),
    }
}

/// Kleibergen's LM and Moreira's conditional LR tests of `x` = their null.
fn lm_clr_rows(x: &str, lc: &crate::results::LmClrResult, alpha: f64) -> Vec<Evidence> {
    let mut rows = Vec::new();
    let null = lc.null.to_string();
    let verdict = |p: f64| {
        if rejects(p, alpha) {
            format!("rejects `{x}` = {null} at {alpha}; valid however weak the instruments are, if the errors are homoskedastic")
        } else {
            format!("does not reject `{x}` = {null} at {alpha}; valid however weak the instruments are, if the errors are homoskedastic")
        }
    };
    rows.push(row(
        format!("Kleibergen LM test of `{x}` = {null}, homoskedastic errors"),
        &lc.lm,
        verdict(lc.lm.p_value),
    ));
    rows.push(Evidence {
        test: format!("Moreira conditional LR test of `{x}` = {null}, homoskedastic errors"),
        statistic: num(lc.clr_statistic),
        reference: format!(
            "conditional law given first-stage strength {}",
            num(lc.clr_conditioning)
        ),
        threshold: p_is(lc.clr_p_value),
        reading: verdict(lc.clr_p_value),
    });
    let level = 100.0 * lc.confidence;
    let mut lm_row = set_row(
        format!("Kleibergen LM {level:.0}% confidence set, homoskedastic errors"),
        lc.lm_shape,
        &lc.lm_set,
    );
    if lc.lm_set.len() > 1 {
        // LM is the squared score of the AR objective: zero at every stationary point.
        lm_row.reading.push_str("; the LM test also accepts values where the Anderson–Rubin statistic is at a local maximum, so a piece away from the estimate may come from that rather than from the data");
    }
    rows.push(lm_row);
    rows.push(set_row(
        format!("Moreira conditional LR {level:.0}% confidence set, homoskedastic errors"),
        lc.clr_shape,
        &lc.clr_set,
    ));
    rows
}

/// Why the LM and CLR tests are absent where the Anderson–Rubin test is shown.
fn lm_clr_missing_row(r: &SpecResult) -> Evidence {
    let why = if r.errors == ErrorKind::Classical {
        "the statistics are undefined for these data (an exact fit, or no first-stage signal under the null)".to_string()
    } else {
        format!(
            "sworn computes them only with homoskedastic errors, and this specification uses {} errors",
            errors_name(r)
        )
    };
    Evidence {
        test: "Kleibergen LM and Moreira conditional LR tests".into(),
        statistic: "—".into(),
        reference: "—".into(),
        threshold: "not computed".into(),
        reading: why,
    }
}

/// The tF adjustment of the 2SLS t-test, when the first-stage F gives one (or, with one
/// instrument, says that none exists).
fn tf_row(
    s: &Spec,
    r: &SpecResult,
    x: &str,
    w: &crate::results::WeakInstrumentResult,
) -> Option<Evidence> {
    let t = r.terms.get(x).map(|t| t.statistic.abs());
    let statistic = t.map_or("n/a".into(), |t| format!("|t| = {}", num(t)));
    let test = "tF adjustment, Lee–McCrary–Moreira–Porter (2022)".to_string();
    let reference = "tF, given the first-stage F".to_string();
    if let Some(c) = w.tf_critical_value {
        Some(Evidence {
            test,
            statistic,
            reference,
            threshold: format!("critical value {} at 5% (in place of 1.96)", num(c)),
            reading: match t {
                Some(t) if t > c => "the 2SLS t-test rejects at 5% after the adjustment",
                Some(_) => "the 2SLS t-test does not reject at 5% after the adjustment",
                None => "the t-ratio is not available",
            }
            .into(),
        })
    } else if s.instruments.len() == 1 {
        Some(Evidence {
            test,
            statistic,
            reference,
            threshold: "no finite critical value".into(),
            reading: "the first stage is too weak for any 2SLS t-ratio to reject at 5%".into(),
        })
    } else {
        None
    }
}
