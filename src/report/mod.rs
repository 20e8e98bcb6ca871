//! Reports: one serialisable [`ReportModel`], rendered to Markdown, LaTeX and HTML by the
//! templates in `templates/` (compiled into the binary). All numbers are formatted here; the
//! sentences of the parts moved so far are macros of `templates/words.j2`, imported by the
//! three report templates, which place their values raw and return plain text that the
//! calling template escapes whole. The report never depends on the clock. Every string placed in
//! the Markdown report passes through [`crate::escape::markdown`] and every string placed in
//! the HTML report through [`crate::escape::html`] (the environment's formatter does both, so a
//! template cannot forget; only the SVG figures drawn in `plots.rs` and `plots/`, marked safe,
//! pass raw); the LaTeX template escapes with its `tex` filter.

mod format;
mod identification;
mod labels;
mod model;
mod plots;
mod registration;
mod rehearsal;
mod summary_rows;

pub use format::{num, pval, set_text, tex, tex_breakable};
pub use model::{integrity_line, ReportModel};

use crate::error::{Error, Result};
use crate::plan::Plan;
use crate::results::Results;
use minijinja::Environment;

const MD_TEMPLATE: &str = include_str!("../../templates/report.md.j2");
const TEX_TEMPLATE: &str = include_str!("../../templates/report.tex.j2");
const HTML_TEMPLATE: &str = include_str!("../../templates/report.html.j2");
const WORDS_TEMPLATE: &str = include_str!("../../templates/words.j2");

fn environment() -> Result<Environment<'static>> {
    let mut env = Environment::new();
    let syntax = minijinja::syntax::SyntaxConfig::builder()
        .keep_trailing_newline(true)
        .trim_blocks(true)
        .lstrip_blocks(true)
        .build()
        .map_err(|e| Error::Template {
            template: "syntax".to_string(),
            message: e.to_string(),
        })?;
    env.set_syntax(syntax);
    // No auto-escaping: the formatter escapes by template, and a macro of `words.j2` then
    // returns a plain string that the calling template escapes like any other value.
    env.set_auto_escape_callback(|_| minijinja::AutoEscape::None);
    env.add_filter("tex", |s: String| format::tex(&s));
    env.add_filter("tex_breakable", |s: String| format::tex_breakable(&s));
    env.set_formatter(|out, state, value| {
        let fail = |_| minijinja::Error::new(minijinja::ErrorKind::WriteFailure, "report");
        match value.as_str() {
            // The shared sentences emit their values raw: the report template that places
            // the finished sentence escapes it whole, as for any other string.
            Some(text) if state.name() == "words.j2" => out.write_str(text).map_err(fail),
            Some(text) if state.name() == "report.md" => {
                out.write_str(&format::md(text)).map_err(fail)
            }
            Some(text) if state.name() == "report.html" && !value.is_safe() => {
                out.write_str(&format::html(text)).map_err(fail)
            }
            Some(text) if state.name() == "report.html" => out.write_str(text).map_err(fail),
            // Auto-escaping is off, so any other value placed in the HTML report (a number,
            // or a list or map by mistake) is escaped here from its display.
            None if state.name() == "report.html"
                && !value.is_safe()
                && !value.is_undefined()
                && !value.is_none() =>
            {
                out.write_str(&format::html(&value.to_string()))
                    .map_err(fail)
            }
            _ => minijinja::escape_formatter(out, state, value),
        }
    });
    for (name, src) in [
        ("words.j2", WORDS_TEMPLATE),
        ("report.md", MD_TEMPLATE),
        ("report.tex", TEX_TEMPLATE),
        ("report.html", HTML_TEMPLATE),
    ] {
        env.add_template(name, src).map_err(|e| Error::Template {
            template: name.to_string(),
            message: e.to_string(),
        })?;
    }
    Ok(env)
}

/// The reports of a run: Markdown, LaTeX and HTML, in that order.
pub struct Rendered {
    /// report.md
    pub md: String,
    /// report.tex
    pub tex: String,
    /// report.html
    pub html: String,
}

/// Render the Markdown, LaTeX and HTML reports of a run.
pub fn render(plan: &Plan, results: &Results) -> Result<Rendered> {
    let env = environment()?;
    let model = ReportModel::build(plan, results);
    let render = |name: &str| {
        env.get_template(name)
            .and_then(|t| t.render(minijinja::context! { r => minijinja::value::Serde(&model) }))
            .map_err(|e| Error::Template {
                template: name.to_string(),
                message: e.to_string(),
            })
    };
    Ok(Rendered {
        md: render("report.md")?,
        tex: render("report.tex")?,
        html: render("report.html")?,
    })
}

#[cfg(test)]
mod tests {
    //! The sentences of `templates/words.j2` in variants the demo reports do not show, each
    //! checked against the text the Rust model wrote before the wording moved to the
    //! templates (the expected strings follow those former `format!` calls).

    const CASES: &str = r#"{% import "words.j2" as w %}
{{ w.fact({"kind": "dropped", "terms": ["a", "b"]}) }}
{{ w.fact({"kind": "errors", "errors": {"cluster_by": ["a", "b"], "clusters": 12, "name": "CLUSTER"}, "df": {"df_resid": 80, "n": 100, "k": 5, "absorbed": 15, "normal": false, "t_df": "11"}}) }}
{{ w.table_note({"kind": "marks", "marks": [["*", "0.1"], ["**", "0.05"]]}) }}
{{ w.hyp_note({"reason": "r", "pre_registered": false, "registration": "removed"}) }}
{{ w.hyp_note({"reason": none, "pre_registered": false, "registration": none}) }}
{{ w.hyp_note({"reason": none, "pre_registered": true, "registration": "amended"}) }}
{{ w.hyp_method({"kind": "t", "estimator": "2SLS", "df": none, "draws": none, "exact": false, "tested_in": "s2", "contingency": "c1"}) }}
{{ w.hyp_method({"kind": "randomization_ar", "estimator": "2SLS", "df": none, "draws": 500, "exact": true, "tested_in": none, "contingency": none}) }}
{{ w.rule({"description": "d", "trigger": "clusters", "threshold": "30", "action": "use_specification", "specification": "s2"}) }}
{{ w.resampling_count({"randomization": true, "count": {"exact": true, "requested": 0, "used": 120, "skipped": 1, "seed": "7"}}) }}
{{ w.resampling_count({"randomization": false, "count": {"exact": false, "requested": 999, "used": 1000, "skipped": 3, "seed": "7"}}) }}
{{ w.id_words({"kind": "shea_r2", "of": "x"}) }}
{{ w.id_words({"kind": "shifts", "rejects": false, "several": false, "x": "d", "alpha": "0.05"}) }}
{{ w.index_line({"id": "i", "anderson": false, "components": ["a", "b"], "reference": "control", "reference_rows": 10, "rows_with_value": 20, "complete": true}) }}
{{ w.id_words({"kind": "set_reading", "shape": "empty", "stationary": false}) }}
{{ w.id_words({"kind": "set_reading", "shape": "several_bounded", "stationary": true}) }}
{{ w.id_words({"kind": "set_reading", "shape": "unbounded", "stationary": false}) }}
{{ w.id_words({"kind": "robust_test", "test": "lm", "x": "d", "null": "0", "form": "homoskedastic"}) }}
{{ w.id_words({"kind": "robust_test", "test": "clr", "x": "d", "null": "0.5", "form": "homoskedastic"}) }}
{{ w.id_words({"kind": "robust_set", "test": "clr", "level": "90", "form": "homoskedastic"}) }}
{{ w.id_words({"kind": "robust_test", "test": "lm", "x": "d", "null": "0", "form": "heteroskedasticity-robust"}) }}
{{ w.id_words({"kind": "robust_set", "test": "clr", "level": "95", "form": "cluster-robust"}) }}
{{ w.id_words({"kind": "robust_reading", "rejects": true, "x": "d", "null": "0", "alpha": "0.05", "homoskedastic": true}) }}
{{ w.id_words({"kind": "robust_reading", "rejects": false, "x": "d", "null": "0", "alpha": "0.05", "homoskedastic": true}) }}
{{ w.id_words({"kind": "robust_reading", "rejects": false, "x": "d", "null": "0", "alpha": "0.05", "homoskedastic": false}) }}
{{ w.id_words({"kind": "clr_reference", "strength": "3.2"}) }}
{{ w.id_words({"kind": "lm_clr_missing", "undefined": true, "errors": "classical"}) }}
{{ w.id_words({"kind": "lm_clr_missing", "undefined": false, "errors": "two-way clustered"}) }}
{{ w.hyp_method({"kind": "clr_robust", "estimator": "2SLS", "df": none, "draws": none, "exact": false, "tested_in": none, "contingency": "c1"}) }}
{{ w.rule({"description": "d", "trigger": "weak_instruments", "threshold": "10", "action": "clr", "specification": none}) }}
{{ w.id_words({"kind": "tf_critical", "value": "2.5"}) }}
{{ w.id_words({"kind": "tf_reading", "rejects": true}) }}
{{ w.id_words({"kind": "tf_reading", "rejects": false}) }}
{{ w.id_words({"kind": "tf_reading", "rejects": none}) }}
{{ w.reg_point({"recorded_as": "sealed", "ledger_line": 1, "content_sha256": "ab", "data_inspected": none, "results_computed": [3, "t"]}) }}
{{ w.reg_cell({"kind": "added_after_data"}) }}
{{ w.reg_cell({"kind": "the_same"}) }}
{{ w.reg_change({"element": "specification[a]", "status": "changed", "after": "data_inspected", "amendment_line": 3, "reason": none, "keys": ["errors: x", "y"]}) }}
{{ w.reg_change({"element": "hypothesis[H3]", "status": "added", "after": "data_seen", "amendment_line": none, "reason": none, "keys": none}) }}
{{ w.reh_heading(false) }}
{{ w.reh_lead(none) }}
{{ w.reh_lead({"ledger_line": 2, "time": "t", "registered_at": none, "assumptions": none, "replications": none, "earlier_plan": [none]}) }}
{{ w.reh_other({"ledger_line": 5, "time": "t", "timing": "after_registration", "assumptions": "ab", "power": none}) }}
{{ w.reh_other({"ledger_line": 5, "time": "t", "timing": "after_data_inspected", "assumptions": "ab", "power": [10, []]}) }}
{{ w.reh_other({"ledger_line": 5, "time": "t", "timing": "no_registration", "assumptions": none, "power": none}) }}
{{ w.sr_label({"kind": "take_up_where", "arm": 1}) }}|{{ w.sr_label({"kind": "first_stage_f"}) }}|{{ w.sr_label({"kind": "effective_f"}) }}
{{ w.sr_cell({"kind": "not_available", "why": none}) }}|{{ w.sr_cell({"kind": "not_available", "why": "endogenous"}) }}|{{ w.sr_cell({"kind": "not_available", "why": "one_arm"}) }}|{{ w.sr_cell({"kind": "not_available", "why": "small_arm"}) }}|{{ w.sr_cell({"kind": "not_available", "why": "weighted"}) }}
{{ w.sr_note({"kind": "comparison_mean", "arms": [["c1", "z", 10]], "errors": {"clusters": ["a", "b"], "plain": true}}) }}
{{ w.sr_note({"kind": "take_up", "shown": [["c1", "d", "z", 4, 5], ["c2", "d", "z", 6, 7]], "errors": {"clusters": ["a"], "plain": false}}) }}
{{ w.sr_note({"kind": "comparison_missing", "column": "c2", "why": "no rows in the arm"}) }}
{{ w.sr_note({"kind": "take_up_missing", "column": "c3", "why": none}) }}
{{ w.fig_caption({"kind": "anderson_rubin", "curve": none, "set": "∅ (empty)", "shape": "empty", "reading": "empty", "estimator": "LIML"}) }}
{{ w.fig_caption({"kind": "anderson_rubin", "curve": [9, "12.5"], "set": "(−∞, 1]", "shape": "two-rays", "reading": "unbounded", "estimator": "2SLS"}) }}
{{ w.fig_caption({"kind": "failed", "error": "e"}) }}|{{ w.fig_title({"kind": "anderson_rubin", "level": "90", "id": "s"}) }}
{{ w.summary_design({"errors": "hc1", "clusters": [], "blocks": none, "weights": {"column": "w", "zero": 0}}) }}
{{ w.summary_design({"errors": "hc1", "clusters": ["c"], "blocks": {"levels": 4, "column": "b", "singletons": 2}, "weights": {"column": "w", "zero": 3}}) }}
{{ w.balance_heading({"by": "arm", "n": 9, "design": {"errors": "hc0", "clusters": [], "blocks": none, "weights": {"column": "w", "zero": 1}}}) }}
"#;

    const EXPECTED: [&str; 57] = [
        "dropped as collinear: a, b",
        "errors clustered by a and b (12 clusters); residual df 80 = 100 − 5 − 15 (n − K − absorbed); coefficient tests t(11)",
        "Marks (thresholds set in the plan, two-sided p of each coefficient's own test): * p < 0.1, ** p < 0.05.",
        "removed from the plan after the data were seen; result as registered. not pre-registered. r",
        "not pre-registered.",
        "as registered; the amended plan's result differs, see Registered and amended analyses.",
        "2SLS t in s2, by contingency c1",
        "randomization inference on the AR statistic (exact: all 500 draws)",
        "d (if there are fewer than 30 clusters, report `s2` as primary)",
        "exact: every possible draw enumerated (the observed assignment among them), 120 used, 1 draw left out because its statistic could not be computed; the seed is not used",
        "sampled: 999 random draws with seed 7 plus the original sample (all weights 1), 1000 used, 3 draws left out because their statistic could not be computed (the original one counted)",
        "`x`: partial R², Shea (1997)",
        "no clear evidence at 0.05 that the instrument shifts `d`",
        "`i`: mean of z-scores (Kling, Liebman and Katz 2007) of [a, b], standardised against the reference group \"control\" (10 rows); 20 rows have a value (a row missing any component has no value)",
        "empty: no value fits, so the instruments reject each other at this level",
        "several bounded intervals: the effect is bounded, but the set is not one interval; the LM test also accepts values where the Anderson–Rubin statistic is at a local maximum, so a piece away from the estimate may come from that rather than from the data",
        "unbounded: the data cannot bound the effect on at least one side",
        "Kleibergen LM test of `d` = 0, homoskedastic errors",
        "Moreira conditional LR test of `d` = 0.5, homoskedastic errors",
        "Moreira conditional LR 90% confidence set, homoskedastic errors",
        "Kleibergen LM test of `d` = 0, robust to heteroskedasticity (Kleibergen 2005)",
        "Moreira conditional LR 95% confidence set, robust to clustering (Kleibergen 2005)",
        "rejects `d` = 0 at 0.05; valid however weak the instruments are, if the errors are homoskedastic",
        "does not reject `d` = 0 at 0.05; valid however weak the instruments are, if the errors are homoskedastic",
        "does not reject `d` = 0 at 0.05; valid however weak the instruments are",
        "conditional law given first-stage strength 3.2",
        "the statistics are undefined for these data (an exact fit, or no first-stage signal under the null)",
        "sworn has no form of them for two-way clustered errors (it has one for classical, HC0–HC3 and one-way clustered errors)",
        "conditional LR, robust form (Kleibergen 2005) with the specification's errors, by contingency c1",
        "d (if the effective first-stage F is below 10, use conditional LR inference (homoskedastic, or robust to the specification's errors))",
        "critical value 2.5 at 5% (in place of 1.96)",
        "the 2SLS t-test rejects at 5% after the adjustment",
        "the 2SLS t-test does not reject at 5% after the adjustment",
        "the t-ratio is not available",
        "The registered version is the plan sealed at ledger line 1 (content sha256:ab). The data were first seen at not recorded; results were first computed at ledger line 3 (t). Each registered hypothesis is reported as registered (its family corrected as registered), with the amended plan's result beside it; hypotheses added after the data are not pre-registered and never enter a registered family's correction.",
        "none: added after the data were seen",
        "the same",
        "specification[a] changed after the data were inspected (amendment at ledger line 3): errors: x; y",
        "hypothesis[H3] added after the data were seen (no amendment records it)",
        "Power as rehearsed",
        "No rehearsal precedes the registered version: none of the rehearsals below is evidence of power stated before registration.",
        "Power as rehearsed before the data, by the rehearsal at ledger line 2 (t), made before the registered version; assumptions not recorded; its ledger entry records no power (written by an earlier version of sworn): see its rehearsal.json. It rehearsed an earlier version of the plan (content not recorded), not the registered version: the analysis it simulated may differ from the registered one.",
        "Rehearsal at ledger line 5 (t), after registration, before the data were seen: cited as such, not as evidence of power stated before registration; assumptions sha256:ab; its ledger entry records no power (written by an earlier version of sworn); see its rehearsal.json.",
        "Rehearsal at ledger line 5 (t), after the data were inspected: its assumptions could have been chosen knowing the data, so it is not evidence of power stated in advance; assumptions sha256:ab; 10 simulated data sets per effect size; .",
        "Rehearsal at ledger line 5 (t), the run has no registered version (the plan was never sealed before the data), so no rehearsal is evidence of power stated before registration; assumptions not recorded; its ledger entry records no power (written by an earlier version of sworn); see its rehearsal.json.",
        "take-up where the instrument is 1 (s.e.)|first-stage F, the column's errors|effective F (Montiel Olea–Pflueger)",
        "n/a|n/a: several endogenous|n/a: one arm only|n/a: an arm too small|n/a: weighted",
        "Outcome mean, comparison arm: the mean of the column's outcome over the rows it was estimated on whose arm variable is 0 (c1: `z` = 0, 10 rows); standard error of the mean cluster-robust by `a` (CR1 over the arm's clusters) or cluster-robust by `b` (CR1 over the arm's clusters) or s/√n.",
        "Take-up by arm: the mean of the endogenous regressor in each arm of the column's binary instrument, over the rows it was estimated on (c1: share with `d` in each arm of `z` (4 and 5 rows); c2: share with `d` in each arm of `z` (6 and 7 rows)); standard error of the mean cluster-robust by `a` (CR1 over the arm's clusters); blank for OLS columns.",
        "Outcome mean not shown for c2: no rows in the arm.",
        "Take-up by arm not shown for c3: not computed.",
        "The thick bar is the set of coefficient values the Anderson–Rubin test does not reject (∅ (empty), shape: empty); a bar reaching an edge continues without end. Beneath it the LIML estimate and its Wald interval, which rely on strong instruments. The set is empty: the instruments reject each other at this level.",
        "Above, the Anderson–Rubin statistic at 9 coefficient values, as computed in the run (results.json), and the dashed critical value: the set is every value where the curve lies on or under the line, so a curve still under it at an edge means the set goes on past that edge; values above 12.5 are cut at the top. The thick bar is the set of coefficient values the Anderson–Rubin test does not reject ((−∞, 1], shape: two-rays); a bar reaching an edge continues without end. Beneath it the 2SLS estimate and its Wald interval, which rely on strong instruments. The set is unbounded: the data cannot bound the effect on at least one side.",
        "The figure could not be drawn: e|Anderson–Rubin 90% set, s",
        "differences from weighted least squares on the arm with hc1 errors, arm means and differences weighted by `w`",
        "within-block differences from weighted least squares on the arm with the 4 registered blocks of `b` as fixed effects (2 rows alone in their block left out), errors clustered by `c`, arm means and differences weighted by `w` (3 rows of weight zero left out)",
        "By `arm` (9 complete rows; differences from weighted least squares on the arm with hc0 errors, arm means and differences weighted by `w` (1 row of weight zero left out))",
    ];

    #[test]
    fn shared_sentences_read_as_the_model_used_to_write_them() {
        let mut env = super::environment().expect("the report environment builds");
        env.add_template("cases.txt", CASES)
            .expect("the cases parse");
        let out = env
            .get_template("cases.txt")
            .and_then(|t| t.render(()))
            .expect("the cases render");
        let lines: Vec<&str> = out.lines().collect();
        assert_eq!(lines, EXPECTED);
    }
}
