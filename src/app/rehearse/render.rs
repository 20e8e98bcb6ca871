//! The rehearsal's reports: one [`RehearsalReport`] model rendered to rehearsal.md,
//! rehearsal.tex and rehearsal.html by the templates `templates/rehearsal.*.j2` (compiled into
//! the binary). The model formats every number; the templates hold the wording and layout.
//!
//! Every string placed in rehearsal.md passes through [`crate::escape::markdown`] and every
//! string placed in rehearsal.html through [`crate::escape::html`] (the environment's formatter
//! does both, so a template cannot forget; only the SVG power curve, marked safe, passes raw);
//! rehearsal.tex escapes with its `tex` and `tex_breakable` filters, the project's one LaTeX
//! escape ([`crate::report::tex`]).

use crate::error::{Error, Result};
use crate::rehearse::{RehearsalReport, Rehearsed};
use minijinja::Environment;

const MD: &str = "rehearsal.md";
const TEX: &str = "rehearsal.tex";
const HTML: &str = "rehearsal.html";

const TEMPLATES: [(&str, &str); 3] = [
    (MD, include_str!("../../../templates/rehearsal.md.j2")),
    (TEX, include_str!("../../../templates/rehearsal.tex.j2")),
    (HTML, include_str!("../../../templates/rehearsal.html.j2")),
];

fn template_error(name: &str, e: &impl std::fmt::Display) -> Error {
    Error::Template {
        template: name.to_string(),
        message: e.to_string(),
    }
}

/// Write one value: text escaped for the document it lands in (see the module docs).
fn format_value(
    out: &mut minijinja::Output<'_>,
    state: &mut minijinja::State<'_, '_>,
    value: &minijinja::Value,
) -> std::result::Result<(), minijinja::Error> {
    let fail = |_| minijinja::Error::new(minijinja::ErrorKind::WriteFailure, "rehearsal");
    match value.as_str() {
        Some(text) if state.name() == MD => {
            out.write_str(&crate::escape::markdown(text)).map_err(fail)
        }
        Some(text) if state.name() == HTML && !value.is_safe() => {
            out.write_str(&crate::escape::html(text)).map_err(fail)
        }
        Some(text) if state.name() == HTML => out.write_str(text).map_err(fail),
        _ => minijinja::escape_formatter(out, state, value),
    }
}

fn environment() -> Result<Environment<'static>> {
    let mut env = Environment::new();
    let syntax = minijinja::syntax::SyntaxConfig::builder()
        .keep_trailing_newline(true)
        .trim_blocks(true)
        .lstrip_blocks(true)
        .build()
        .map_err(|e| template_error("syntax", &e))?;
    env.set_syntax(syntax);
    env.add_filter("tex", |s: String| crate::report::tex(&s));
    env.add_filter("tex_breakable", |s: String| {
        crate::report::tex_breakable(&s)
    });
    env.set_formatter(format_value);
    for (name, src) in TEMPLATES {
        env.add_template(name, src)
            .map_err(|e| template_error(name, &e))?;
    }
    Ok(env)
}

/// The reports of a rehearsal, in the order written.
pub struct Rendered {
    /// rehearsal.md
    pub md: String,
    /// rehearsal.tex
    pub tex: String,
    /// rehearsal.html
    pub html: String,
}

/// Render the three reports of rehearsal `r` of the study titled `title`.
///
/// # Errors
/// A template fails to compile or render (a defect of sworn, named by template).
pub fn render(r: &Rehearsed, title: &str) -> Result<Rendered> {
    let env = environment()?;
    let model = RehearsalReport::build(r, title);
    let render = |name: &str| {
        env.get_template(name)
            .and_then(|t| t.render(minijinja::context! { r => minijinja::value::Serde(&model) }))
            .map_err(|e| template_error(name, &e))
    };
    Ok(Rendered {
        md: render(MD)?,
        tex: render(TEX)?,
        html: render(HTML)?,
    })
}
