//! rehearsal.tex: the rehearsal model as a LaTeX document (packages from a basic TeX
//! installation only: booktabs, longtable, array, color), with the power curve drawn in
//! LaTeX's own `picture` environment: points with their Wilson intervals, each series joined
//! by dots (the environment draws straight lines only at a few slopes) and the target power as
//! a dashed line. Text passes through [`crate::report::tex`], the project's one LaTeX escape.

use super::figure::PALETTE;
use super::summary::{Rehearsed, Share};
use crate::report::{tex, tex_breakable};
use std::fmt::Write;

fn pct(s: &Share) -> String {
    format!(
        "{:.1}\\% [{:.1}, {:.1}]",
        100.0 * s.share,
        100.0 * s.low,
        100.0 * s.high
    )
}

fn num(x: Option<f64>) -> String {
    x.map_or("--".to_string(), |v| format!("{v:.4}"))
}

/// A ragged-right paragraph column (its width follows).
const P: &str = ">{\\raggedright\\arraybackslash}p";

/// `k` ragged-right columns sharing `share` of the text width.
fn shared_columns(k: usize, share: f64) -> String {
    format!(
        "*{{{k}}}{{{P}{{{:.3}\\textwidth}}}}",
        share / k.max(1) as f64
    )
}

/// Plot size in points.
const W: f64 = 320.0;
const H: f64 = 180.0;

fn put(o: &mut String, x: f64, y: f64, what: &str) {
    let _ = writeln!(o, "\\put({x:.1},{y:.1}){{{what}}}");
}

/// The power curve as a `picture` environment.
fn curve(r: &Rehearsed) -> String {
    let xmax = r.effects.iter().copied().fold(0.0_f64, f64::max).max(1e-9);
    let px = |e: f64| W * e / xmax;
    let py = |p: f64| H * p;
    let mut o = String::new();
    let _ = writeln!(o, "\\setlength{{\\unitlength}}{{1pt}}");
    let _ = writeln!(o, "\\begin{{picture}}({},{})(-40,-30)", W + 60.0, H + 40.0);
    put(&mut o, 0.0, 0.0, &format!("\\line(1,0){{{W}}}"));
    put(&mut o, 0.0, 0.0, &format!("\\line(0,1){{{H}}}"));
    for k in 0..=5 {
        let p = f64::from(k) / 5.0;
        put(&mut o, -4.0, py(p), "\\line(1,0){4}");
        put(
            &mut o,
            -26.0,
            py(p) - 3.0,
            &format!("\\footnotesize {p:.1}"),
        );
    }
    for e in &r.effects {
        put(&mut o, px(*e), -4.0, "\\line(0,1){4}");
        put(&mut o, px(*e) - 6.0, -14.0, &format!("\\footnotesize {e}"));
    }
    put(
        &mut o,
        W / 2.0 - 60.0,
        -28.0,
        "\\footnotesize effect (the plan's effect scale)",
    );
    // The target power, dashed.
    let t = py(r.target_power);
    let dashes = (W / 10.0) as usize;
    let _ = writeln!(
        o,
        "\\multiput(0,{t:.1})(10,0){{{dashes}}}{{\\line(1,0){{6}}}}"
    );
    put(
        &mut o,
        W + 4.0,
        t - 3.0,
        &format!("\\footnotesize target {}", r.target_power),
    );
    for (i, (id, h)) in r.hypotheses.iter().enumerate() {
        let name = format!("s{i}");
        let c = PALETTE[i % PALETTE.len()];
        let _ = writeln!(
            o,
            "\\definecolor{{{name}}}{{rgb}}{{{:.3},{:.3},{:.3}}}\\color{{{name}}}",
            f64::from(c.0) / 255.0,
            f64::from(c.1) / 255.0,
            f64::from(c.2) / 255.0
        );
        for pair in h.curve.windows(2) {
            let (a, b) = (&pair[0], &pair[1]);
            for k in 1..24 {
                let s = f64::from(k) / 24.0;
                let x = px(a.effect + s * (b.effect - a.effect));
                let y = py(a.power.share + s * (b.power.share - a.power.share));
                put(&mut o, x, y, "\\circle*{0.9}");
            }
        }
        for p in &h.curve {
            let (x, lo, hi) = (px(p.effect), py(p.power.low), py(p.power.high));
            put(
                &mut o,
                x,
                lo,
                &format!("\\line(0,1){{{:.1}}}", (hi - lo).max(0.1)),
            );
            put(&mut o, x, py(p.power.share), "\\circle*{3}");
        }
        // The legend, top left, one line per series.
        let ly = H - 12.0 * (i as f64 + 1.0);
        put(&mut o, 8.0, ly + 3.0, "\\circle*{3}");
        put(&mut o, 14.0, ly, &format!("\\footnotesize {}", tex(id)));
    }
    let _ = writeln!(o, "\\color{{black}}");
    let _ = writeln!(o, "\\end{{picture}}");
    o
}

/// The LaTeX report of a rehearsal.
pub fn latex(r: &Rehearsed, title: &str) -> String {
    let mut o = String::new();
    let _ = writeln!(
        o,
        "\\documentclass[10pt]{{article}}\n\\usepackage[utf8]{{inputenc}}\n\\usepackage[T1]{{fontenc}}\n\\usepackage[margin=2cm]{{geometry}}\n\\usepackage{{booktabs}}\n\\usepackage{{longtable}}\n\\usepackage{{array}}\n\\usepackage{{color}}\n\\setlength{{\\parindent}}{{0pt}}\n\\setlength{{\\parskip}}{{4pt}}\n\\begin{{document}}\n\\raggedright"
    );
    let _ = writeln!(o, "\\section*{{Rehearsal: {}}}", tex(title));
    let _ = writeln!(
        o,
        "Simulated before {}: {} data sets at each of {} effect sizes (seed {}), each run through the complete registered analysis. Plan content fingerprint {}; assumptions fingerprint {}.\n",
        r.before(),
        r.replications,
        r.effects.len(),
        r.seed,
        tex_breakable(&format!("sha256:{}", r.plan_content_sha256)),
        tex_breakable(&format!("sha256:{}", r.assumptions_sha256))
    );
    for note in r.baseline_notes() {
        let _ = writeln!(o, "{}\n", tex_breakable(&note));
    }
    if let Some((used, registered)) = r.resampling_draws {
        let _ = writeln!(
            o,
            "Resampled tests used {used} draws each in this rehearsal (resampling\\_draws); the registered analysis uses {registered}. Their power is estimated with the coarser p-values.\n"
        );
    }
    let _ = writeln!(
        o,
        "\\subsection*{{Power and minimum detectable effect (target power {})}}",
        r.target_power
    );
    let _ = writeln!(o, "\\begin{{longtable}}{{@{{}}{P}{{0.09\\textwidth}}{P}{{0.18\\textwidth}}{P}{{0.13\\textwidth}}rr{P}{{0.22\\textwidth}}@{{}}}}\n\\toprule\nhypothesis & specification, term & size at effect 0 & MDE & MDE estimate & note \\\\\n\\midrule");
    for (id, h) in &r.hypotheses {
        let _ = writeln!(
            o,
            "{} & {}, {} & {} & {} & {} & {} \\\\",
            tex(id),
            tex(&h.specification),
            tex(&h.term),
            pct(&h.size),
            num(h.mde),
            num(h.mde_estimate),
            tex(&h.mde_note)
        );
    }
    let _ = writeln!(o, "\\bottomrule\n\\end{{longtable}}");
    let _ = writeln!(o, "\\subsection*{{Power curve}}");
    o.push_str(&curve(r));
    let _ = writeln!(
        o,
        "\n\\smallskip\nShare of simulated data sets in which each claim was supported, by effect size; the vertical bars are 95\\% Wilson intervals for the simulation error only; the dashed line is the target power.\n"
    );
    let _ = writeln!(o, "\\subsection*{{Power at each effect size}}");
    let k = r.effects.len();
    let head: Vec<String> = r.effects.iter().map(|e| format!("effect {e}")).collect();
    let _ = writeln!(
        o,
        "\\begingroup\\footnotesize\n\\begin{{longtable}}{{@{{}}l{}@{{}}}}\n\\toprule\nhypothesis & {} \\\\\n\\midrule",
        shared_columns(k, 0.8),
        head.join(" & ")
    );
    for (id, h) in &r.hypotheses {
        let cells: Vec<String> = h.curve.iter().map(|c| pct(&c.power)).collect();
        let _ = writeln!(o, "{} & {} \\\\", tex(id), cells.join(" & "));
    }
    let _ = writeln!(o, "\\bottomrule\n\\end{{longtable}}\n\\endgroup");
    if !r.rules.is_empty() {
        let _ = writeln!(o, "\\subsection*{{How often each decision rule fires}}");
        let _ = writeln!(
            o,
            "\\begingroup\\footnotesize\n\\begin{{longtable}}{{@{{}}ll{}@{{}}}}\n\\toprule\nrule & specification & {} \\\\\n\\midrule",
            shared_columns(k, 0.6),
            head.join(" & ")
        );
        for (id, rule) in &r.rules {
            let cells: Vec<String> = rule.fired.iter().map(pct).collect();
            let _ = writeln!(
                o,
                "{} & {} & {} \\\\",
                tex(id),
                tex(&rule.specification),
                cells.join(" & ")
            );
        }
        let _ = writeln!(o, "\\bottomrule\n\\end{{longtable}}\n\\endgroup");
    }
    if !r.first_stage.is_empty() {
        let _ = writeln!(
            o,
            "\\subsection*{{First-stage F at effect 0 (quantiles 5\\%, 25\\%, 50\\%, 75\\%, 95\\%)}}"
        );
        let _ = writeln!(o, "\\begin{{longtable}}{{@{{}}llrrrrr@{{}}}}\n\\toprule\nspecification & statistic & 5\\% & 25\\% & 50\\% & 75\\% & 95\\% \\\\\n\\midrule");
        for (id, f) in &r.first_stage {
            let q = f.quantiles.first().map_or(vec!["--".to_string(); 5], |q| {
                q.iter().map(|v| format!("{v:.1}")).collect()
            });
            let _ = writeln!(o, "{} & {} & {} \\\\", tex(id), f.statistic, q.join(" & "));
        }
        let _ = writeln!(o, "\\bottomrule\n\\end{{longtable}}");
    }
    let _ = writeln!(
        o,
        "\\subsection*{{Observations used after the sample rule and deletions}}"
    );
    let _ = writeln!(o, "\\begin{{longtable}}{{@{{}}lrrr@{{}}}}\n\\toprule\nspecification & mean & min & max \\\\\n\\midrule");
    for (id, s) in &r.samples {
        let _ = writeln!(
            o,
            "{} & {:.1} & {} & {} \\\\",
            tex(id),
            s.mean,
            s.min,
            s.max
        );
    }
    let _ = writeln!(o, "\\bottomrule\n\\end{{longtable}}");
    let failed: usize = r.failed.iter().sum();
    if failed > 0 {
        let _ = writeln!(
            o,
            "The analysis stopped with an error on {failed} simulated data set(s), counted as not supporting any claim; the first: {}\n",
            tex(r.first_failure.as_deref().unwrap_or(""))
        );
    }
    let _ = writeln!(o, "\\subsection*{{Read with care}}\n\\begin{{itemize}}");
    for c in &r.cautions {
        let _ = writeln!(o, "\\item {}", tex(c));
    }
    let _ = writeln!(o, "\\end{{itemize}}\n\\end{{document}}");
    o
}
