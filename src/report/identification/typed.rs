//! The identification panel's questions and rows as typed values: which sentence applies and
//! the values it states. The sentences are the `id_words` macro of `templates/words.j2`; a
//! cell that is plain text (a published test's name, a number, a distribution) stays text.

use serde::Serialize;

/// One question and the evidence on it, worded in the templates.
#[derive(Debug, Serialize)]
pub(in crate::report) struct TypedQuestion {
    pub ask: Words,
    pub rows: Vec<TypedEvidence>,
    /// Said when there is no row (not requested, or not testable).
    pub note: Words,
}

/// One row of evidence, worded in the templates.
#[derive(Debug, Serialize)]
pub(in crate::report) struct TypedEvidence {
    pub test: Cell,
    pub statistic: String,
    pub reference: Cell,
    pub threshold: Cell,
    pub reading: Cell,
}

/// A cell: plain text, or a sentence of `id_words`.
#[derive(Debug, Serialize)]
#[serde(untagged)]
pub(in crate::report) enum Cell {
    Text(String),
    Words(Words),
}

impl From<Words> for Cell {
    fn from(w: Words) -> Self {
        Cell::Words(w)
    }
}

impl From<String> for Cell {
    fn from(s: String) -> Self {
        Cell::Text(s)
    }
}

impl From<&str> for Cell {
    fn from(s: &str) -> Self {
        Cell::Text(s.to_string())
    }
}

/// The sentences of the strength, endogeneity and agreement questions. `of` names the
/// endogenous regressor when there are several; `remark` adds that a test assumes
/// homoskedastic errors (when the specification's are not).
#[derive(Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub(in crate::report) enum Words {
    StrengthAsk {
        several: bool,
    },
    StrengthNote,
    FirstStageF {
        of: Option<String>,
        errors: &'static str,
    },
    PartialR2 {
        of: Option<String>,
    },
    SheaR2 {
        of: Option<String>,
    },
    Shifts {
        rejects: bool,
        several: bool,
        x: String,
        alpha: String,
    },
    ComparisonOnly,
    PartialShare {
        x: String,
    },
    SheaShare,
    EffectiveF {
        errors: &'static str,
    },
    Patnaik {
        df: String,
    },
    EffectiveCritical {
        value: String,
        bias: String,
    },
    EffectiveReading {
        weak: bool,
        kclass: bool,
    },
    CraggDonald,
    StockYogo {
        table: &'static str,
        instruments: usize,
    },
    StockYogoAbove {
        value: String,
        level: String,
    },
    StockYogoBelow {
        value: String,
        level: String,
    },
    /// `criterion`: `wald_size`, `relative_bias` or `liml_wald_size`.
    StockYogoReading {
        criterion: &'static str,
        passes: bool,
        level: String,
        remark: bool,
    },
    NoCriticalValue,
    NoStockYogo,
    EndogenousAsk {
        several: bool,
    },
    EndogenousNote,
    ControlFunction {
        errors: &'static str,
    },
    Exogeneity {
        rejects: bool,
        alpha: String,
        remark: bool,
    },
    AgreeAsk,
    AgreeNoteExact,
    AgreeNote,
    HansenJ {
        errors: &'static str,
    },
    Agreement {
        rejects: bool,
        alpha: String,
        remark: bool,
    },
    HansenMissing,
    RobustAsk,
    RobustNote,
    /// `test`: `anderson_rubin`, `lm` or `clr`; `form` (LM and CLR only): `homoskedastic`,
    /// `heteroskedasticity-robust` or `cluster-robust`.
    RobustTest {
        test: &'static str,
        x: String,
        null: String,
        form: Option<&'static str>,
    },
    /// A weak-instrument-robust test's verdict; `homoskedastic`: it assumes so.
    RobustReading {
        rejects: bool,
        x: String,
        null: String,
        alpha: String,
        homoskedastic: bool,
    },
    /// `test`: `anderson_rubin`, `lm` or `clr`; `level` in percent; `form` as for
    /// [`Words::RobustTest`].
    RobustSet {
        test: &'static str,
        level: String,
        form: Option<&'static str>,
    },
    InvertedTest,
    /// `shape`: `bounded`, `whole_line`, `empty`, `several_bounded` or `unbounded`.
    SetReading {
        shape: &'static str,
        stationary: bool,
    },
    ClrReference {
        strength: String,
    },
    LmClrTests,
    NotComputed,
    /// `undefined`: the errors have a form of the tests (classical, HC0–HC3, one-way
    /// clusters), so the statistics were undefined for the data.
    LmClrMissing {
        undefined: bool,
        errors: &'static str,
    },
    TfTest,
    TfReference,
    TfCritical {
        value: String,
    },
    /// `rejects`: `None` when the t-ratio is not available.
    TfReading {
        rejects: Option<bool>,
    },
    TfNoCritical,
    TfTooWeak,
}

/// A row from a test result: its statistic, reference distribution and p-value as text.
pub(in crate::report) fn typed_row(
    test: impl Into<Cell>,
    t: &crate::results::TestResult,
    reading: Words,
) -> TypedEvidence {
    TypedEvidence {
        test: test.into(),
        statistic: super::super::format::num(t.statistic),
        reference: super::evidence::dist_text(t.distribution).into(),
        threshold: super::super::format::p_is(t.p_value).into(),
        reading: reading.into(),
    }
}
