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
pub use summary_rows::NAMES as SUMMARY_ROWS;

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
