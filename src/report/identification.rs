//! The identification panel of an instrumental-variable specification: the evidence a reader
//! weighs before trusting the estimate, grouped by the question it answers (are the
//! instruments strong, is inference robust to weakness, is the regressor endogenous, do the
//! instruments agree). Each row gives the published test's name, its statistic, the
//! reference distribution, the p-value or critical value and a one-line reading. A question
//! whose tests the plan did not request says so rather than disappearing.

use super::format::{num, p_is, set_text};
use crate::distribution::Reference;
use crate::plan::{Estimator, Spec};
use crate::results::{SpecResult, StockYogoValue, TestResult};
use serde::Serialize;

/// One identification panel.
#[derive(Debug, Serialize)]
pub(super) struct Panel {
    /// The questions, in reading order.
    pub questions: Vec<Question>,
}

/// One question and the evidence on it.
#[derive(Debug, Serialize)]
pub(super) struct Question {
    pub ask: String,
    pub rows: Vec<Evidence>,
    /// Said when there is no row (not requested, or not testable).
    pub note: String,
}

/// One row of evidence.
#[derive(Debug, Serialize)]
pub(super) struct Evidence {
    pub test: String,
    pub statistic: String,
    pub reference: String,
    pub threshold: String,
    pub reading: String,
}

/// A reference distribution as text.
pub(super) fn dist_text(d: Reference) -> String {
    match d {
        Reference::Normal => "N(0, 1)".to_string(),
        Reference::StudentT { df } => format!("t({df})"),
        Reference::F { df1, df2 } => format!("F({df1}, {df2})"),
        Reference::ChiSquare { df } => format!("χ²({df})"),
    }
}

fn row(test: String, t: &TestResult, reading: String) -> Evidence {
    Evidence {
        test,
        statistic: num(t.statistic),
        reference: dist_text(t.distribution),
        threshold: p_is(t.p_value),
        reading,
    }
}

/// Whether `p` rejects at `alpha` (a p-value that is not a number rejects nothing).
fn rejects(p: f64, alpha: f64) -> bool {
    p.is_finite() && p <= alpha
}

/// The name of a specification's error type in a row label.
fn errors_name(r: &SpecResult) -> String {
    match r.errors {
        "classical" => "classical".to_string(),
        "cluster" => "clustered".to_string(),
        e => e.to_uppercase(),
    }
}

/// Whether the errors are the classical ones (tests that assume them need no remark).
fn homoskedastic_remark(r: &SpecResult) -> &'static str {
    if r.errors == "classical" {
        ""
    } else {
        " (assumes homoskedastic errors)"
    }
}

/// The panel of an IV specification; `None` for OLS.
pub(super) fn panel(s: &Spec, r: &SpecResult, alpha: f64) -> Option<Panel> {
    if s.endogenous.is_empty() {
        return None;
    }
    Some(Panel {
        questions: vec![
            strength(s, r, alpha),
            robust(s, r, alpha),
            endogeneity(s, r, alpha),
            agreement(s, r, alpha),
        ],
    })
}

fn plural<'a>(n: usize, one: &'a str, many: &'a str) -> &'a str {
    if n == 1 {
        one
    } else {
        many
    }
}

fn strength(s: &Spec, r: &SpecResult, alpha: f64) -> Question {
    let mut rows = Vec::new();
    let several = s.endogenous.len() > 1;
    for (x, fs) in r.first_stage.iter().flatten() {
        let of = if several {
            format!("`{x}`: ")
        } else {
            String::new()
        };
        let what = plural(
            s.instruments.len(),
            "the instrument shifts",
            "the instruments shift",
        );
        let moves = |p: f64| {
            if rejects(p, alpha) {
                format!("{what} `{x}`: the first stage differs from zero at {alpha}")
            } else {
                format!("no clear evidence at {alpha} that {what} `{x}`")
            }
        };
        rows.push(Evidence {
            test: format!("{of}first-stage F, {} errors", errors_name(r)),
            statistic: num(fs.robust_f_statistic),
            reference: dist_text(fs.robust_f_distribution),
            threshold: p_is(fs.robust_f_p_value),
            reading: moves(fs.robust_f_p_value),
        });
        rows.push(Evidence {
            test: format!("{of}first-stage F, classical errors"),
            statistic: num(fs.f_statistic),
            reference: dist_text(fs.f_distribution),
            threshold: p_is(fs.f_p_value),
            reading: if r.errors == "classical" {
                moves(fs.f_p_value)
            } else {
                "for comparison only: assumes homoskedastic, independent errors".to_string()
            },
        });
        rows.push(Evidence {
            test: format!("{of}partial R²"),
            statistic: num(fs.partial_r_squared),
            reference: "—".into(),
            threshold: "—".into(),
            reading: format!(
                "the instruments explain this share of `{x}`'s variation left after the controls"
            ),
        });
        if several {
            rows.push(Evidence {
                test: format!("{of}partial R², Shea (1997)"),
                statistic: num(fs.shea_partial_r_squared),
                reference: "—".into(),
                threshold: "—".into(),
                reading: "the same share, net of what the other endogenous regressors take"
                    .to_string(),
            });
        }
    }
    if let Some(w) = &r.weak_instruments {
        let kclass = matches!(s.estimator, Estimator::Liml | Estimator::Fuller);
        rows.push(Evidence {
            test: format!("Montiel Olea–Pflueger effective F, {} errors", errors_name(r)),
            statistic: num(w.effective_f),
            reference: format!("Patnaik approximation, {} effective df", num(w.effective_df)),
            threshold: format!(
                "critical value {} (worst-case bias {:.0}%, 5% size)",
                num(w.critical_value),
                100.0 * w.worst_case_bias
            ),
            reading: format!(
                "{}{}",
                if w.weak {
                    "WEAK: below the critical value, so 2SLS may be biased toward OLS by more than the stated share"
                } else {
                    "above the critical value: the worst-case bias of 2SLS stays within the stated share of OLS's"
                },
                if kclass { "; this bounds 2SLS, not this specification's estimator" } else { "" }
            ),
        });
        rows.extend(stock_yogo_rows(
            s,
            r,
            w.cragg_donald,
            &w.stock_yogo,
            w.stock_yogo_note.as_deref(),
        ));
    }
    let n = s.instruments.len();
    Question {
        ask: format!(
            "{} strong enough?",
            plural(n, "Is the instrument", "Are the instruments")
        ),
        rows,
        note: "The plan did not request the first-stage diagnostics for this specification.".into(),
    }
}

/// The Cragg–Donald statistic read against each Stock–Yogo table carried for the
/// specification's estimator (2SLS: relative bias and Wald size; LIML: Wald size; Fuller:
/// none): one row per criterion, naming the strictest tabulated level the statistic passes,
/// and a row with the note on what is not given and why.
fn stock_yogo_rows(
    s: &Spec,
    r: &SpecResult,
    cd: f64,
    values: &[StockYogoValue],
    note: Option<&str>,
) -> Vec<Evidence> {
    let remark = homoskedastic_remark(r);
    let mut rows = Vec::new();
    for (criterion, table_name, what) in [
        (
            "wald-size",
            "Table 5.2",
            "size of a nominal 5% Wald test of 2SLS",
        ),
        ("relative-bias", "Table 5.1", "bias of 2SLS relative to OLS"),
        (
            "liml-wald-size",
            "Table 5.4",
            "size of a nominal 5% Wald test of LIML",
        ),
    ] {
        let mut table: Vec<&StockYogoValue> =
            values.iter().filter(|v| v.criterion == criterion).collect();
        if table.is_empty() {
            continue;
        }
        // Strictest level first: the smallest tolerated size or bias has the largest value.
        table.sort_by(|a, b| a.level.total_cmp(&b.level));
        let passed = table.iter().find(|v| cd > v.critical_value);
        let loosest = table[table.len() - 1];
        let (threshold, reading) = match passed {
            Some(v) => (
                format!(
                    "above {} (the {:.0}% row)",
                    num(v.critical_value),
                    100.0 * v.level
                ),
                format!("worst-case {what} at most {:.0}%{remark}", 100.0 * v.level),
            ),
            None => (
                format!(
                    "below every row (the loosest, {:.0}%, is {})",
                    100.0 * loosest.level,
                    num(loosest.critical_value)
                ),
                format!(
                    "worst-case {what} may exceed {:.0}%{remark}",
                    100.0 * loosest.level
                ),
            ),
        };
        rows.push(Evidence {
            test: "Cragg–Donald minimum eigenvalue".into(),
            statistic: num(cd),
            reference: format!(
                "Stock–Yogo (2005) {table_name}, {} instrument(s)",
                s.instruments.len()
            ),
            threshold,
            reading,
        });
    }
    if let Some(note) = note {
        rows.push(Evidence {
            test: "Cragg–Donald minimum eigenvalue".into(),
            statistic: num(cd),
            reference: "—".into(),
            threshold: if rows.is_empty() {
                "no critical value".into()
            } else {
                "—".into()
            },
            reading: note.to_string(),
        });
    } else if rows.is_empty() {
        rows.push(Evidence {
            test: "Cragg–Donald minimum eigenvalue".into(),
            statistic: num(cd),
            reference: "—".into(),
            threshold: "no critical value".into(),
            reading: "no Stock–Yogo value is carried for this number of instruments".into(),
        });
    }
    rows
}

fn robust(s: &Spec, r: &SpecResult, alpha: f64) -> Question {
    let mut rows = Vec::new();
    let x = s.endogenous.first().cloned().unwrap_or_default();
    if let Some(ar) = &r.anderson_rubin {
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
                format!("does not reject `{x}` = {null} at {alpha}; valid however weak the instruments are")
            },
        ));
        let reading = match ar.shape {
            "bounded" => "a bounded interval: the data bound the effect without relying on instrument strength",
            "whole-line" => "the whole line: the data cannot bound the effect",
            "empty" => "empty: no value fits, so the instruments reject each other at this level",
            _ => "unbounded: the data cannot bound the effect on at least one side",
        };
        rows.push(Evidence {
            test: format!(
                "Anderson–Rubin {:.0}% confidence set",
                100.0 * ar.confidence
            ),
            statistic: "—".into(),
            reference: "inverted test".into(),
            threshold: set_text(&ar.set),
            reading: reading.to_string(),
        });
    }
    if let Some(lc) = &r.lm_clr {
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
    } else if r.anderson_rubin.is_some() {
        let why = if r.errors == "classical" {
            "the statistics are undefined for these data (an exact fit, or no first-stage signal under the null)".to_string()
        } else {
            format!(
                "sworn computes them only with homoskedastic errors, and this specification uses {} errors",
                errors_name(r)
            )
        };
        rows.push(Evidence {
            test: "Kleibergen LM and Moreira conditional LR tests".into(),
            statistic: "—".into(),
            reference: "—".into(),
            threshold: "not computed".into(),
            reading: why,
        });
    }
    if let Some(w) = &r.weak_instruments {
        let t = r.terms.get(&x).map(|t| t.statistic.abs());
        if let Some(c) = w.tf_critical_value {
            rows.push(Evidence {
                test: "tF adjustment, Lee–McCrary–Moreira–Porter (2022)".into(),
                statistic: t.map_or("n/a".into(), |t| format!("|t| = {}", num(t))),
                reference: "tF, given the first-stage F".into(),
                threshold: format!("critical value {} at 5% (in place of 1.96)", num(c)),
                reading: match t {
                    Some(t) if t > c => "the 2SLS t-test rejects at 5% after the adjustment",
                    Some(_) => "the 2SLS t-test does not reject at 5% after the adjustment",
                    None => "the t-ratio is not available",
                }
                .into(),
            });
        } else if s.instruments.len() == 1 {
            rows.push(Evidence {
                test: "tF adjustment, Lee–McCrary–Moreira–Porter (2022)".into(),
                statistic: t.map_or("n/a".into(), |t| format!("|t| = {}", num(t))),
                reference: "tF, given the first-stage F".into(),
                threshold: "no finite critical value".into(),
                reading: "the first stage is too weak for any 2SLS t-ratio to reject at 5%".into(),
            });
        }
    }
    Question {
        ask: "Do the conclusions hold if the instruments are weak?".into(),
        rows,
        note: "Not computed: the tests that stay valid with weak instruments come with the `weak_instruments` diagnostic (one endogenous regressor), which the plan did not request here.".into(),
    }
}

fn endogeneity(s: &Spec, r: &SpecResult, alpha: f64) -> Question {
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

fn agreement(s: &Spec, r: &SpecResult, alpha: f64) -> Question {
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
