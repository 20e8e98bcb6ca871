//! The diagnostics of an IV specification: first stages, reduced form, endogeneity,
//! over-identification, a LIML estimate beside 2SLS, weak-instrument diagnostics with the
//! Stock–Yogo values, and the Anderson–Rubin test and set (with the Kleibergen LM and CLR
//! tests: homoskedastic with classical errors, robust with HC0–HC3 and one-way clusters).

use super::fit::map_estimate_error;
use super::result::{reference_for, terms_of, test};
use super::{Needs, Prepared};
use crate::distribution::TestStatistic;
use crate::error::{Error, Result};
use crate::estimate::{self, CovSpec, EstimateError};
use crate::inference;
use crate::plan::{Diagnostic, Estimator};
use crate::results::{
    AlternativeEstimate, AndersonRubinResult, ArShape, EndogeneityResult, EstimatorKind,
    FirstStageResult, LmClrErrors, LmClrResult, OveridResult, Regression, SetPiece, SpecResult,
    StockYogoCriterion, StockYogoValue, TestResult, WeakInstrumentResult,
};
use std::collections::BTreeMap;

/// Everything the IV diagnostics of one specification share.
pub(super) struct IvContext<'a> {
    /// The specification's data, columns and covariance.
    pub(super) prepared: &'a Prepared<'a>,
    /// The specification's IV problem, prepared once (shared factorisations).
    pub(super) iv: &'a estimate::IvProblem<'a>,
    /// What decision rules and hypotheses need beyond the plan's own diagnostics.
    pub(super) needs: &'a Needs,
    /// Which diagnostics are computed first.
    pub(super) order: DiagnosticOrder,
}

/// Which of an instrumental specification's diagnostics are computed first. The results and
/// the error reported (the first in the canonical order) do not depend on it: every
/// diagnostic comes from the same shared factorisations whatever the order. It decides which
/// shared pieces a thread computes first, so that two threads fitting instrumental
/// specifications of one sample at once compute different pieces (the first stages on one,
/// the control-function and Durbin regressions on the other) instead of one waiting for the
/// other's.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum DiagnosticOrder {
    /// First stages and reduced form, then endogeneity and over-identification.
    #[default]
    FirstStageFirst,
    /// Endogeneity and over-identification, then first stages and reduced form.
    EndogeneityFirst,
}

impl IvContext<'_> {
    fn wants(&self, diag: Diagnostic) -> bool {
        self.prepared.spec.diagnostics.contains(&diag) || self.needs.diagnostics.contains(&diag)
    }

    fn err(&self, e: EstimateError) -> Error {
        map_estimate_error(self.prepared.spec, e)
    }

    /// Names of the first-stage and reduced-form regressors: instruments, then controls.
    fn z_names(&self) -> Vec<String> {
        let p = &self.prepared.p;
        p.instrument_names
            .iter()
            .chain(&p.exog_names)
            .cloned()
            .collect()
    }

    /// Fills the diagnostic blocks of `result`; returns the AR and CLR tests at the needed
    /// nulls.
    pub(super) fn diagnostics(&self, result: &mut SpecResult) -> Result<NullTests> {
        let weak = self.wants(Diagnostic::WeakInstruments) && self.prepared.p.focal.ncols() == 1;
        let wants_en = self.wants(Diagnostic::Endogeneity);
        let wants_ov = self.wants(Diagnostic::Overidentification);
        // Endogeneity first: computed ahead and kept. The results are then taken in the
        // canonical order, stopping at the first error, so the error reported (and, in the
        // canonical order, the work done before it) does not depend on `order`.
        let (mut en, mut ov) = (None, None);
        if self.order == DiagnosticOrder::EndogeneityFirst {
            en = wants_en.then(|| self.endogeneity());
            ov = wants_ov.then(|| self.overidentification());
        }
        if self.wants(Diagnostic::FirstStage) || weak {
            result.first_stage = Some(self.first_stages()?);
        }
        if self.wants(Diagnostic::ReducedForm) {
            result.reduced_form = Some(self.reduced_form()?);
        }
        if wants_en {
            result.endogeneity = Some(en.take().unwrap_or_else(|| self.endogeneity())?);
        }
        if wants_ov {
            result.overidentification = ov.take().unwrap_or_else(|| self.overidentification())?;
        }
        if self.needs.liml && self.prepared.spec.estimator == Estimator::Tsls {
            result.liml = Some(self.liml()?);
        }
        if !weak {
            return Ok(NullTests::default());
        }
        result.weak_instruments = Some(self.weak_instruments(result)?);
        self.anderson_rubin(result)
    }

    /// Each endogenous regressor's first stage, with its F statistics and partial R².
    fn first_stages(&self) -> Result<BTreeMap<String, FirstStageResult>> {
        let Prepared {
            spec, d, p, cov, ..
        } = self.prepared;
        let stages = self
            .iv
            .first_stages(d.has_constant, cov, &d.absorbed)
            .map_err(|e| self.err(e))?;
        let z_names = self.z_names();
        let mut out = BTreeMap::new();
        for (j, (name, s)) in p.focal_names.iter().zip(&stages).enumerate() {
            let reference = reference_for(spec, &s.fit);
            out.insert(
                name.clone(),
                FirstStageResult {
                    terms: terms_of(&s.fit, &z_names, &reference, spec.confidence),
                    f_statistic: s.f.statistic,
                    f_p_value: inference::test_p_value(&s.f),
                    f_distribution: s.f.reference,
                    robust_f_statistic: s.robust_f.statistic,
                    robust_f_p_value: inference::test_p_value(&s.robust_f),
                    robust_f_distribution: s.robust_f.reference,
                    partial_r_squared: s.partial_r_squared,
                    shea_partial_r_squared: s.shea_partial_r_squared,
                    r_squared: super::weighted::r_squared(&s.fit, p.focal.column(j), d),
                },
            );
        }
        Ok(out)
    }

    /// The reduced form: the outcome on the instruments and controls.
    fn reduced_form(&self) -> Result<Regression> {
        let Prepared { spec, d, cov, .. } = self.prepared;
        let rf = self
            .iv
            .reduced_form(d.has_constant, cov, &d.absorbed)
            .map_err(|e| self.err(e))?;
        let reference = reference_for(spec, &rf);
        Ok(Regression {
            outcome: spec.outcome.clone(),
            terms: terms_of(&rf, &self.z_names(), &reference, spec.confidence),
            r_squared: super::weighted::r_squared(&rf, d.y.column(0), d),
            n: rf.n,
        })
    }

    /// The control-function, Durbin and Wu–Hausman endogeneity tests.
    fn endogeneity(&self) -> Result<EndogeneityResult> {
        let Prepared { d, cov, .. } = self.prepared;
        let e = self
            .iv
            .endogeneity(d.has_constant, cov, &d.absorbed)
            .map_err(|e| self.err(e))?;
        Ok(EndogeneityResult {
            control_function: test(&e.control_function),
            durbin: test(&e.durbin),
            wu_hausman: test(&e.wu_hausman),
        })
    }

    /// Sargan and Basmann, and Hansen's J (not under two-way clustering); `None` when the
    /// specification is exactly identified.
    fn overidentification(&self) -> Result<Option<OveridResult>> {
        let Prepared { d, cov, .. } = self.prepared;
        let ab = &d.absorbed;
        let o = self.iv.overidentification(ab).map_err(|e| self.err(e))?;
        let j = match cov {
            CovSpec::TwoWay { .. } => None,
            _ => self.iv.hansen_j(cov, ab).map_err(|e| self.err(e))?,
        };
        Ok(o.map(|o| OveridResult {
            sargan: test(&o.sargan),
            basmann: test(&o.basmann),
            hansen_j: j.as_ref().map(test),
        }))
    }

    /// A LIML estimate beside the specification's 2SLS one.
    fn liml(&self) -> Result<AlternativeEstimate> {
        let Prepared {
            spec, d, p, cov, ..
        } = self.prepared;
        let k = self
            .iv
            .kclass(d.has_constant, cov, estimate::KClass::Liml, &d.absorbed)
            .map_err(|e| self.err(e))?;
        let names: Vec<String> = p.focal_names.iter().chain(&p.exog_names).cloned().collect();
        let reference = reference_for(spec, &k.fit);
        Ok(AlternativeEstimate {
            estimator: EstimatorKind::Liml,
            kappa: k.kappa,
            terms: terms_of(&k.fit, &names, &reference, spec.confidence),
        })
    }

    /// The effective F with its critical value, Cragg–Donald, the Stock–Yogo values of the
    /// specification's estimator and (one instrument) the tF critical value of its robust
    /// first-stage F, read from `result.first_stage`.
    fn weak_instruments(&self, result: &SpecResult) -> Result<WeakInstrumentResult> {
        let Prepared {
            spec, d, p, cov, ..
        } = self.prepared;
        let w = self
            .iv
            .weak_instruments(cov, spec.worst_case_bias, &d.absorbed)
            .map_err(|e| self.err(e))?;
        let tf = if p.instruments.ncols() == 1 {
            result
                .first_stage
                .as_ref()
                .and_then(|fs| fs.values().next())
                .and_then(|s| estimate::tf_critical_value(s.robust_f_statistic, 0.05))
        } else {
            None
        };
        let (stock_yogo, stock_yogo_note) = stock_yogo_for(spec.estimator, p.instruments.ncols());
        Ok(WeakInstrumentResult {
            effective_f: w.effective_f,
            critical_value: w.critical_value,
            worst_case_bias: w.tau,
            effective_df: w.effective_df,
            weak: w.weak,
            cragg_donald: w.cragg_donald,
            stock_yogo,
            stock_yogo_note,
            tf_critical_value: tf,
        })
    }

    /// The Anderson–Rubin test at 0 with its set and curve, the LM and CLR tests, and the AR tests at the nulls the decision rules need, which
    /// are returned.
    fn anderson_rubin(&self, result: &mut SpecResult) -> Result<NullTests> {
        let Prepared {
            spec, d, p, cov, ..
        } = self.prepared;
        let ab = &d.absorbed;
        // One set of AR regressions serves the test at 0 with its set, the curve and the
        // tests at the nulls the decision rules need.
        let ar = self
            .iv
            .anderson_rubin_problem(cov, ab)
            .map_err(|e| self.err(e))?;
        let at_zero = ar.at(0.0, spec.confidence).map_err(|e| self.err(e))?;
        let set = set_pieces(&at_zero.set);
        let curve = crate::analysis::ar_curve::curve(
            &ar,
            &set,
            p.focal_names.first().and_then(|x| result.terms.get(x)),
        );
        result.anderson_rubin = Some(AndersonRubinResult {
            null: 0.0,
            statistic: at_zero.test.statistic,
            p_value: inference::test_p_value(&at_zero.test),
            distribution: at_zero.test.reference,
            shape: shape_name(&at_zero.set),
            ci: match at_zero.set.pieces.as_slice() {
                [(lo, hi)] if lo.is_finite() && hi.is_finite() => Some([*lo, *hi]),
                _ => None,
            },
            set,
            confidence: spec.confidence,
            critical_value: at_zero.critical_value,
            curve,
        });
        result.lm_clr = self.lm_clr();
        let ar = self
            .needs
            .ar_nulls
            .iter()
            .map(|&null| Ok((null, ar.test(null).map_err(|e| self.err(e))?)))
            .collect::<Result<Vec<_>>>()?;
        let clr = self.clr_at_nulls(result.lm_clr.is_some());
        Ok(NullTests { ar, clr })
    }

    /// The CLR tests at the nulls the decision rules need, when the LM/CLR tests were
    /// computed (`computed`). Classical errors: the homoskedastic tests; HC0–HC3 and one-way
    /// clusters: the robust ones (plan validation refuses a `clr` rule otherwise). A null
    /// where the statistics are undefined is left out, and the hypothesis says so.
    fn clr_at_nulls(&self, computed: bool) -> Vec<(f64, estimate::ConditionalLr)> {
        let Prepared { d, cov, .. } = self.prepared;
        let (ab, nulls) = (&d.absorbed, &self.needs.clr_nulls);
        if !computed || nulls.is_empty() {
            return Vec::new();
        }
        match cov {
            CovSpec::Classical => nulls
                .iter()
                .filter_map(|&null| self.iv.lm_clr(ab, null).ok().map(|t| (null, t.clr)))
                .collect(),
            _ => match self.iv.lm_clr_robust(cov, ab) {
                Ok(robust) => nulls
                    .iter()
                    .filter_map(|&null| robust.test(null).ok().map(|t| (null, t.clr)))
                    .collect(),
                Err(_) => Vec::new(),
            },
        }
    }

    /// The Kleibergen LM and CLR tests of 0 with their sets: the homoskedastic forms with
    /// classical errors, the robust forms (Kleibergen 2005) with HC0–HC3 and one-way
    /// clusters, none with two-way clusters or HAC. Undefined statistics (an exact fit, no
    /// first-stage signal under the null) leave them null; the identification panel says so.
    fn lm_clr(&self) -> Option<LmClrResult> {
        let Prepared { spec, d, cov, .. } = self.prepared;
        let ab = &d.absorbed;
        let (errors, t, sets) = match cov {
            CovSpec::Classical => (
                LmClrErrors::Homoskedastic,
                self.iv.lm_clr(ab, 0.0).ok()?,
                self.iv.lm_clr_sets(ab, spec.confidence).ok()?,
            ),
            CovSpec::TwoWay { .. } | CovSpec::Hac { .. } => return None,
            _ => {
                let robust = self.iv.lm_clr_robust(cov, ab).ok()?;
                let errors = if matches!(cov, CovSpec::Cluster { .. }) {
                    LmClrErrors::ClusterRobust
                } else {
                    LmClrErrors::HeteroskedasticityRobust
                };
                (
                    errors,
                    robust.test(0.0).ok()?,
                    robust.sets(spec.confidence).ok()?,
                )
            }
        };
        Some(LmClrResult {
            null: t.beta0,
            errors,
            lm: TestResult {
                statistic: t.lm.statistic,
                p_value: inference::test_p_value(&t.lm),
                distribution: t.lm.reference,
            },
            clr_statistic: t.clr.statistic,
            clr_conditioning: t.clr.conditioning,
            clr_p_value: t.clr.p_value,
            confidence: spec.confidence,
            lm_shape: shape_name(&sets.lm),
            lm_set: set_pieces(&sets.lm),
            clr_shape: shape_name(&sets.clr),
            clr_set: set_pieces(&sets.clr),
        })
    }
}

/// The tests at the nulls the decision rules need.
#[derive(Debug, Clone, Default)]
pub(super) struct NullTests {
    /// Anderson–Rubin.
    pub ar: Vec<(f64, TestStatistic)>,
    /// Conditional LR.
    pub clr: Vec<(f64, estimate::ConditionalLr)>,
}

/// The pieces of a confidence set as results.json records them (infinite ends as null).
fn set_pieces(set: &estimate::ConfidenceSet) -> Vec<SetPiece> {
    set.pieces
        .iter()
        .map(|(lo, hi)| SetPiece {
            lower: lo.is_finite().then_some(*lo),
            upper: hi.is_finite().then_some(*hi),
        })
        .collect()
}

/// The name of a confidence set's shape in results.json.
fn shape_name(set: &estimate::ConfidenceSet) -> ArShape {
    match set.shape() {
        estimate::SetShape::Empty => ArShape::Empty,
        estimate::SetShape::Bounded => ArShape::Bounded,
        estimate::SetShape::TwoRays => ArShape::TwoRays,
        estimate::SetShape::WholeLine => ArShape::WholeLine,
        estimate::SetShape::Other => ArShape::Union,
    }
}

/// The Stock–Yogo (2005) critical values of `estimator`'s own tables at `excluded`
/// instruments, and a note on what is not given and why (`None` when nothing is lacking).
/// Stock and Yogo's tables differ by estimator, so a specification never gets another
/// estimator's values: 2SLS gets the 2SLS tables, LIML the LIML table, Fuller none (the
/// Fuller values were not confirmed, see `estimate::StockYogoTable`).
fn stock_yogo_for(
    estimator: crate::plan::Estimator,
    excluded: usize,
) -> (Vec<StockYogoValue>, Option<String>) {
    use crate::plan::Estimator;
    let table = match estimator {
        Estimator::Tsls => estimate::StockYogoTable::Tsls,
        Estimator::Liml => estimate::StockYogoTable::Liml,
        Estimator::Fuller => return (Vec::new(), Some(FULLER_STOCK_YOGO_NOTE.to_string())),
        Estimator::Ols => return (Vec::new(), None),
    };
    let values: Vec<StockYogoValue> = estimate::stock_yogo(table, excluded)
        .into_iter()
        .filter_map(|s| {
            Some(StockYogoValue {
                criterion: StockYogoCriterion::from_table_name(s.criterion)?,
                level: s.level,
                critical_value: s.critical_value,
            })
        })
        .collect();
    let lacking: Vec<String> = table
        .criteria()
        .iter()
        .filter(|&&c| !values.iter().any(|v| v.criterion.as_str() == c))
        .filter_map(|&c| {
            let rows = estimate::stock_yogo_rows(c)?;
            Some(if excluded < *rows.start() {
                format!(
                    "Stock and Yogo's {} table starts at {} excluded instruments; this specification has {excluded}",
                    stock_yogo_label(c),
                    rows.start()
                )
            } else {
                format!(
                    "{} values are carried for {} to {} excluded instruments, not for {excluded}",
                    stock_yogo_label(c),
                    rows.start(),
                    rows.end()
                )
            })
        })
        .collect();
    let note = match (values.is_empty(), lacking.is_empty()) {
        (_, true) => None,
        (true, false) => Some(format!("none given: {}", lacking.join("; "))),
        (false, false) => Some(lacking.join("; ")),
    };
    (values, note)
}

/// Why a Fuller specification gets no Stock–Yogo values (results.json and the report).
const FULLER_STOCK_YOGO_NOTE: &str = "none given for Fuller's estimator: the Stock and Yogo \
(2005) Fuller values known to this version were not confirmed by the project's simulation check, \
so none are shown, and the 2SLS and LIML values do not apply to a Fuller estimate";

/// A short name for a Stock–Yogo criterion, used in notes.
fn stock_yogo_label(criterion: &str) -> &'static str {
    match criterion {
        "relative-bias" => "2SLS relative-bias",
        "wald-size" => "2SLS Wald-size",
        "liml-wald-size" => "LIML Wald-size",
        _ => "Stock–Yogo",
    }
}
