//! "Are the instruments strong enough?": first-stage F (robust and classical), partial R²,
//! Shea's partial R², the effective F and Cragg–Donald against Stock–Yogo.

use super::super::format::{num, p_is};
use super::evidence::{
    dist_text, errors_name, homoskedastic_remark, plural, rejects, Evidence, Question,
};
use crate::plan::{Estimator, Spec};
use crate::results::{ErrorKind, SpecResult, StockYogoCriterion, StockYogoValue};

pub(super) fn strength(s: &Spec, r: &SpecResult, alpha: f64) -> Question {
    let mut rows = Vec::new();
    for (x, fs) in r.first_stage.iter().flatten() {
        rows.extend(first_stage_rows(s, r, alpha, x, fs));
    }
    if let Some(w) = &r.weak_instruments {
        rows.push(effective_f_row(s, r, w));
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

/// The rows of one endogenous regressor's first stage: its F with the specification's
/// errors and with classical ones, its partial R² and, with several endogenous regressors,
/// Shea's partial R².
fn first_stage_rows(
    s: &Spec,
    r: &SpecResult,
    alpha: f64,
    x: &str,
    fs: &crate::results::FirstStageResult,
) -> Vec<Evidence> {
    let mut rows = Vec::new();
    let several = s.endogenous.len() > 1;
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
        reading: if r.errors == ErrorKind::Classical {
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
            reading: "the same share, net of what the other endogenous regressors take".to_string(),
        });
    }
    rows
}

/// The effective first-stage F against its critical value.
fn effective_f_row(s: &Spec, r: &SpecResult, w: &crate::results::WeakInstrumentResult) -> Evidence {
    let kclass = matches!(s.estimator, Estimator::Liml | Estimator::Fuller);
    Evidence {
        test: format!(
            "Montiel Olea–Pflueger effective F, {} errors",
            errors_name(r)
        ),
        statistic: num(w.effective_f),
        reference: format!(
            "Patnaik approximation, {} effective df",
            num(w.effective_df)
        ),
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
            if kclass {
                "; this bounds 2SLS, not this specification's estimator"
            } else {
                ""
            }
        ),
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
    let mut rows = Vec::new();
    for (criterion, table_name, what) in STOCK_YOGO_TABLES {
        let mut table: Vec<&StockYogoValue> =
            values.iter().filter(|v| v.criterion == criterion).collect();
        if table.is_empty() {
            continue;
        }
        // Strictest level first: the smallest tolerated size or bias has the largest value.
        table.sort_by(|a, b| a.level.total_cmp(&b.level));
        let (threshold, reading) = stock_yogo_reading(&table, cd, what, homoskedastic_remark(r));
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

/// The Stock–Yogo tables a report reads, in the order it lists them: criterion, the table's
/// number in Stock and Yogo (2005), and what the criterion bounds.
const STOCK_YOGO_TABLES: [(StockYogoCriterion, &str, &str); 3] = [
    (
        StockYogoCriterion::WaldSize,
        "Table 5.2",
        "size of a nominal 5% Wald test of 2SLS",
    ),
    (
        StockYogoCriterion::RelativeBias,
        "Table 5.1",
        "bias of 2SLS relative to OLS",
    ),
    (
        StockYogoCriterion::LimlWaldSize,
        "Table 5.4",
        "size of a nominal 5% Wald test of LIML",
    ),
];

/// The threshold cell and the reading of the Cragg–Donald statistic `cd` against one table's
/// values (sorted strictest first): the strictest row it passes, or the loosest it fails.
fn stock_yogo_reading(
    table: &[&StockYogoValue],
    cd: f64,
    what: &str,
    remark: &str,
) -> (String, String) {
    let loosest = table[table.len() - 1];
    match table.iter().find(|v| cd > v.critical_value) {
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
    }
}
