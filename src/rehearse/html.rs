//! rehearsal.html: the rehearsal's headline tables and its power curve (inline SVG from
//! [`super::figure`]) in one self-contained page. Every text placed passes through
//! [`crate::escape::html`]; only the SVG, drawn from numbers and escaped labels, passes raw.

use super::summary::{Rehearsed, Share};
use crate::escape::html as h;
use std::fmt::Write;

fn pct(s: &Share) -> String {
    format!(
        "{:.1}% [{:.1}, {:.1}]",
        100.0 * s.share,
        100.0 * s.low,
        100.0 * s.high
    )
}

fn num(x: Option<f64>) -> String {
    x.map_or("—".to_string(), |v| format!("{v:.4}"))
}

const STYLE: &str = "body { font-family: Georgia, \"DejaVu Serif\", serif; max-width: 62rem; margin: 2rem auto; padding: 0 1rem; color: #1b1b1b; line-height: 1.45; }\nh2 { font-size: 1.2rem; border-bottom: 1px solid #bbb; margin-top: 2rem; }\ntable { border-collapse: collapse; font-size: 0.88rem; }\nth, td { padding: 0.2rem 0.55rem; text-align: left; border-bottom: 1px solid #e2e2e2; vertical-align: top; }\nth { border-bottom: 2px solid #888; }\ntd.num { text-align: right; white-space: nowrap; }\nfigure svg { max-width: 100%; height: auto; display: block; }\nfigcaption, p.note { font-size: 0.85rem; color: #444; }";

/// The HTML page of a rehearsal.
pub fn page(r: &Rehearsed, title: &str) -> String {
    let mut o = String::new();
    let _ = writeln!(
        o,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>Rehearsal: {}</title>\n<style>\n{STYLE}\n</style>\n</head>\n<body>\n<h1>Rehearsal: {}</h1>",
        h(title),
        h(title)
    );
    let _ = writeln!(
        o,
        "<p>Simulated before {}: {} data sets at each of {} effect sizes (seed {}), each run through the complete registered analysis. Assumptions fingerprint <code>sha256:{}</code>.</p>",
        h(r.before()),
        r.replications,
        r.effects.len(),
        r.seed,
        h(&r.assumptions_sha256)
    );
    for note in r.baseline_notes() {
        let _ = writeln!(o, "<p>{}</p>", h(&note));
    }
    let _ = writeln!(o, "<h2>Power curve</h2>\n<figure>");
    match super::figure::power_curve(r) {
        Ok(svg) => o.push_str(&svg),
        Err(e) => {
            let _ = write!(o, "<p>The power curve could not be drawn: {}</p>", h(&e));
        }
    }
    let _ = writeln!(
        o,
        "\n<figcaption>Share of simulated data sets in which each claim was supported, by effect size; vertical bars are 95% Wilson intervals for the simulation error only; the dashed line is the target power {}.</figcaption>\n</figure>",
        r.target_power
    );
    let _ = writeln!(
        o,
        "<h2>Minimum detectable effect (target power {})</h2>\n<table>\n<tr><th>hypothesis</th><th>specification · term</th><th>size at effect 0</th><th>MDE</th><th>estimate at the MDE</th><th>note</th></tr>",
        r.target_power
    );
    for (id, x) in &r.hypotheses {
        let _ = writeln!(
            o,
            "<tr><td>{}</td><td>{} · {}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td>{}</td></tr>",
            h(id),
            h(&x.specification),
            h(&x.term),
            pct(&x.size),
            num(x.mde),
            num(x.mde_estimate),
            h(&x.mde_note)
        );
    }
    let _ = writeln!(o, "</table>");
    if !r.rules.is_empty() {
        let head: String = r
            .effects
            .iter()
            .map(|e| format!("<th>effect {e}</th>"))
            .collect();
        let _ = writeln!(
            o,
            "<h2>How often each decision rule fires</h2>\n<table>\n<tr><th>rule</th><th>specification</th>{head}</tr>"
        );
        for (id, rule) in &r.rules {
            let cells: String = rule
                .fired
                .iter()
                .map(|s| format!("<td class=\"num\">{}</td>", pct(s)))
                .collect();
            let _ = writeln!(
                o,
                "<tr><td>{}</td><td>{}</td>{cells}</tr>",
                h(id),
                h(&rule.specification)
            );
        }
        let _ = writeln!(o, "</table>");
    }
    let _ = writeln!(o, "<h2>Read with care</h2>\n<ul>");
    for c in &r.cautions {
        let _ = writeln!(o, "<li>{}</li>", h(c));
    }
    let _ = writeln!(
        o,
        "</ul>\n<p class=\"note\">The full tables are in rehearsal.md and rehearsal.tex; every number in rehearsal.json.</p>\n</body>\n</html>"
    );
    o
}
