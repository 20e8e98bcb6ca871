//! "Are the instruments strong enough?": first-stage F (robust and classical), partial R²,
//! Shea's partial R², the effective F and Cragg–Donald against Stock–Yogo. Typed values;
//! the sentences are the `id_words` macro of `templates/words.j2`.

use super::super::format::{num, p_is};
use super::evidence::{dist_text, errors_name, rejects};
use super::typed::{Cell, TypedEvidence, TypedQuestion, Words};
use crate::plan::{Estimator, Spec};
use crate::results::{ErrorKind, SpecResult, StockYogoCriterion, StockYogoValue};

pub(super) fn strength(s: &Spec, r: &SpecResult, alpha: f64) -> TypedQuestion {
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
    TypedQuestion {
        ask: Words::StrengthAsk {
            several: s.instruments.len() != 1,
        },
        rows,
        note: Words::StrengthNote,
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
) -> Vec<TypedEvidence> {
    let mut rows = Vec::new();
    let several = s.endogenous.len() > 1;
    let of = || several.then(|| x.to_string());
    let shifts = |p: f64| Words::Shifts {
        rejects: rejects(p, alpha),
        several: s.instruments.len() != 1,
        x: x.to_string(),
        alpha: alpha.to_string(),
    };
    rows.push(TypedEvidence {
        test: Words::FirstStageF {
            of: of(),
            errors: errors_name(r),
        }
        .into(),
        statistic: num(fs.robust_f_statistic),
        reference: dist_text(fs.robust_f_distribution).into(),
        threshold: p_is(fs.robust_f_p_value).into(),
        reading: shifts(fs.robust_f_p_value).into(),
    });
    rows.push(TypedEvidence {
        test: Words::FirstStageF {
            of: of(),
            errors: ErrorKind::Classical.row_name(),
        }
        .into(),
        statistic: num(fs.f_statistic),
        reference: dist_text(fs.f_distribution).into(),
        threshold: p_is(fs.f_p_value).into(),
        reading: if r.errors == ErrorKind::Classical {
            shifts(fs.f_p_value)
        } else {
            Words::ComparisonOnly
        }
        .into(),
    });
    rows.push(share_row(
        Words::PartialR2 { of: of() },
        fs.partial_r_squared,
        Words::PartialShare { x: x.to_string() },
    ));
    if several {
        rows.push(share_row(
            Words::SheaR2 { of: of() },
            fs.shea_partial_r_squared,
            Words::SheaShare,
        ));
    }
    rows
}

/// A row stating a share (a partial R²), which has no reference distribution or p-value.
fn share_row(test: Words, value: f64, reading: Words) -> TypedEvidence {
    TypedEvidence {
        test: test.into(),
        statistic: num(value),
        reference: "—".into(),
        threshold: "—".into(),
        reading: reading.into(),
    }
}

/// The effective first-stage F against its critical value.
fn effective_f_row(
    s: &Spec,
    r: &SpecResult,
    w: &crate::results::WeakInstrumentResult,
) -> TypedEvidence {
    TypedEvidence {
        test: Words::EffectiveF {
            errors: errors_name(r),
        }
        .into(),
        statistic: num(w.effective_f),
        reference: Words::Patnaik {
            df: num(w.effective_df),
        }
        .into(),
        threshold: Words::EffectiveCritical {
            value: num(w.critical_value),
            bias: format!("{:.0}", 100.0 * w.worst_case_bias),
        }
        .into(),
        reading: Words::EffectiveReading {
            weak: w.weak,
            kclass: matches!(s.estimator, Estimator::Liml | Estimator::Fuller),
        }
        .into(),
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
) -> Vec<TypedEvidence> {
    let mut rows = Vec::new();
    for (criterion, table_name, key) in STOCK_YOGO_TABLES {
        let mut table: Vec<&StockYogoValue> =
            values.iter().filter(|v| v.criterion == criterion).collect();
        if table.is_empty() {
            continue;
        }
        // Strictest level first: the smallest tolerated size or bias has the largest value.
        table.sort_by(|a, b| a.level.total_cmp(&b.level));
        let (threshold, reading) = stock_yogo_reading(&table, cd, key, r.errors);
        rows.push(TypedEvidence {
            test: Words::CraggDonald.into(),
            statistic: num(cd),
            reference: Words::StockYogo {
                table: table_name,
                instruments: s.instruments.len(),
            }
            .into(),
            threshold: threshold.into(),
            reading: reading.into(),
        });
    }
    if let Some(note) = note {
        let threshold: Cell = if rows.is_empty() {
            Words::NoCriticalValue.into()
        } else {
            "—".into()
        };
        rows.push(cragg_donald_row(cd, threshold, note.into()));
    } else if rows.is_empty() {
        rows.push(cragg_donald_row(
            cd,
            Words::NoCriticalValue.into(),
            Words::NoStockYogo.into(),
        ));
    }
    rows
}

/// A Cragg–Donald row without a Stock–Yogo table.
fn cragg_donald_row(cd: f64, threshold: Cell, reading: Cell) -> TypedEvidence {
    TypedEvidence {
        test: Words::CraggDonald.into(),
        statistic: num(cd),
        reference: "—".into(),
        threshold,
        reading,
    }
}

/// The Stock–Yogo tables a report reads, in the order it lists them: criterion, the table's
/// number in Stock and Yogo (2005), and the key of what the criterion bounds in `id_words`.
const STOCK_YOGO_TABLES: [(StockYogoCriterion, &str, &str); 3] = [
    (StockYogoCriterion::WaldSize, "Table 5.2", "wald_size"),
    (
        StockYogoCriterion::RelativeBias,
        "Table 5.1",
        "relative_bias",
    ),
    (
        StockYogoCriterion::LimlWaldSize,
        "Table 5.4",
        "liml_wald_size",
    ),
];

/// The threshold cell and the reading of the Cragg–Donald statistic `cd` against one table's
/// values (sorted strictest first): the strictest row it passes, or the loosest it fails.
fn stock_yogo_reading(
    table: &[&StockYogoValue],
    cd: f64,
    criterion: &'static str,
    errors: ErrorKind,
) -> (Words, Words) {
    let loosest = table[table.len() - 1];
    let remark = errors != ErrorKind::Classical;
    let level = |v: &StockYogoValue| format!("{:.0}", 100.0 * v.level);
    match table.iter().find(|v| cd > v.critical_value) {
        Some(v) => (
            Words::StockYogoAbove {
                value: num(v.critical_value),
                level: level(v),
            },
            Words::StockYogoReading {
                criterion,
                passes: true,
                level: level(v),
                remark,
            },
        ),
        None => (
            Words::StockYogoBelow {
                value: num(loosest.critical_value),
                level: level(loosest),
            },
            Words::StockYogoReading {
                criterion,
                passes: false,
                level: level(loosest),
                remark,
            },
        ),
    }
}
