//! rehearsal.md: the rehearsal model as Markdown tables. Untrusted text (claims, ids) is
//! escaped with [`crate::escape::markdown`]; numbers are rounded for reading, the JSON keeps
//! them whole.

use super::summary::{Rehearsed, Share};
use crate::escape::markdown as md;
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

/// The Markdown report of a rehearsal.
pub fn markdown(r: &Rehearsed, title: &str) -> String {
    let mut o = String::new();
    let _ = writeln!(o, "# Rehearsal: {}\n", md(title));
    let _ = writeln!(
        o,
        "Simulated before {}: {} data sets at each of {} effect sizes (seed {}), each run through the complete registered analysis. Plan content fingerprint `sha256:{}`; assumptions fingerprint `sha256:{}`.\n",
        r.before(),
        r.replications,
        r.effects.len(),
        r.seed,
        r.plan_content_sha256,
        r.assumptions_sha256
    );
    for (id, b) in &r.baselines {
        let _ = writeln!(
            o,
            "The rows of `{}` are those of the baseline file `{}` ({} rows, `sha256:{}`), the same in every data set; the assignment and the other simulated columns are drawn anew on them each time. Power here is for the units of the baseline, under the effect and take-up the plan states.\n",
            md(id),
            md(&b.path),
            b.rows,
            b.sha256
        );
    }
    if let Some((used, registered)) = r.resampling_draws {
        let _ = writeln!(
            o,
            "Resampled tests used {used} draws each in this rehearsal (`resampling_draws`); the registered analysis uses {registered}. Their power is estimated with the coarser p-values.\n"
        );
    }
    let _ = writeln!(
        o,
        "## Power and minimum detectable effect (target power {})\n",
        r.target_power
    );
    let _ = writeln!(o, "| hypothesis | specification · term | size at effect 0 | MDE (effect scale) | estimate at the MDE | note |");
    let _ = writeln!(o, "| --- | --- | --- | --- | --- | --- |");
    for (id, h) in &r.hypotheses {
        let _ = writeln!(
            o,
            "| {} | {} · {} | {} | {} | {} | {} |",
            md(id),
            md(&h.specification),
            md(&h.term),
            pct(&h.size),
            num(h.mde),
            num(h.mde_estimate),
            md(&h.mde_note)
        );
    }
    let _ = writeln!(o, "\n## Power at each effect size\n");
    let head: Vec<String> = r.effects.iter().map(|e| format!("effect = {e}")).collect();
    let _ = writeln!(o, "| hypothesis | {} |", head.join(" | "));
    let _ = writeln!(o, "| --- |{}", " --- |".repeat(r.effects.len()));
    for (id, h) in &r.hypotheses {
        let cells: Vec<String> = h.curve.iter().map(|c| pct(&c.power)).collect();
        let _ = writeln!(o, "| {} | {} |", md(id), cells.join(" | "));
    }
    if !r.rules.is_empty() {
        let _ = writeln!(o, "\n## How often each decision rule fires\n");
        let _ = writeln!(o, "| rule | specification | {} |", head.join(" | "));
        let _ = writeln!(o, "| --- | --- |{}", " --- |".repeat(r.effects.len()));
        for (id, rule) in &r.rules {
            let cells: Vec<String> = rule.fired.iter().map(pct).collect();
            let _ = writeln!(
                o,
                "| {} | {} | {} |",
                md(id),
                md(&rule.specification),
                cells.join(" | ")
            );
        }
    }
    if !r.first_stage.is_empty() {
        let _ = writeln!(
            o,
            "\n## First-stage F (quantiles 5% · 25% · 50% · 75% · 95%, at effect 0)\n"
        );
        let _ = writeln!(o, "| specification | statistic | quantiles |");
        let _ = writeln!(o, "| --- | --- | --- |");
        for (id, f) in &r.first_stage {
            let q = f.quantiles.first().map_or("—".to_string(), |q| {
                q.iter()
                    .map(|v| format!("{v:.1}"))
                    .collect::<Vec<_>>()
                    .join(" · ")
            });
            let _ = writeln!(o, "| {} | {} | {} |", md(id), f.statistic, q);
        }
    }
    let _ = writeln!(
        o,
        "\n## Observations used after the sample rule and deletions\n"
    );
    let _ = writeln!(o, "| specification | mean | min | max |");
    let _ = writeln!(o, "| --- | --- | --- | --- |");
    for (id, s) in &r.samples {
        let _ = writeln!(o, "| {} | {:.1} | {} | {} |", md(id), s.mean, s.min, s.max);
    }
    let failed: usize = r.failed.iter().sum();
    if failed > 0 {
        let _ = writeln!(
            o,
            "\nThe analysis stopped with an error on {failed} simulated data set(s), counted as not supporting any claim; the first: {}",
            md(r.first_failure.as_deref().unwrap_or(""))
        );
    }
    let _ = writeln!(o, "\n## Read with care\n");
    for c in &r.cautions {
        let _ = writeln!(o, "- {}", md(c));
    }
    o
}
