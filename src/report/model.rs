//! The report model: everything a report shows, already formatted as text.

use super::format::{num, p_is, pval, set_text};
use crate::inference::{Correction, Direction};
use crate::plan::{spec_terms, Plan};
use crate::results::{Results, SpecResult, Term, TestResult};
use serde::Serialize;

/// Everything a report shows.
#[derive(Debug, Serialize)]
pub struct ReportModel {
    title: String,
    study_id: Option<String>,
    authors: String,
    registered: Option<String>,
    summary: Option<String>,
    provenance: Vec<(String, String)>,
    integrity: String,
    hypotheses: Vec<HypRow>,
    registration: Option<super::registration::RegistrationModel>,
    contingencies: Vec<RuleRow>,
    indices: Vec<String>,
    balance: Option<BalanceModel>,
    attrition: Vec<String>,
    tables: Vec<TableModel>,
    specs: Vec<SpecModel>,
    apart: Vec<SpecModel>,
    deviations: Vec<DevRow>,
    cautions: Vec<String>,
}

#[derive(Debug, Serialize)]
struct BalanceRowModel {
    covariate: String,
    comparison: String,
    treated: String,
    difference: String,
    se: String,
    p: String,
}

#[derive(Debug, Serialize)]
struct BalanceModel {
    heading: String,
    rows: Vec<BalanceRowModel>,
    joint: String,
}

#[derive(Debug, Serialize)]
struct RuleRow {
    id: String,
    specification: String,
    rule: String,
    invoked: String,
    outcome: String,
}

#[derive(Debug, Serialize)]
struct HypRow {
    id: String,
    claim: String,
    test: String,
    method: String,
    interval: String,
    estimate: String,
    p: String,
    adjusted: String,
    level: String,
    verdict: String,
    note: String,
}

#[derive(Debug, Serialize)]
struct Cell {
    est: String,
    se: String,
}

#[derive(Debug, Serialize)]
struct TableRow {
    term: String,
    cells: Vec<Cell>,
}

#[derive(Debug, Serialize)]
struct TableModel {
    title: String,
    columns: Vec<String>,
    estimators: Vec<String>,
    rows: Vec<TableRow>,
    n: Vec<String>,
    errors: Vec<String>,
    stars: bool,
}

#[derive(Debug, Serialize)]
struct TermRow {
    term: String,
    est: String,
    se: String,
    stat: String,
    p: String,
    ci: String,
}

#[derive(Debug, Serialize)]
struct Block {
    title: String,
    terms: Vec<TermRow>,
    lines: Vec<String>,
}

#[derive(Debug, Serialize)]
struct SpecModel {
    id: String,
    title: String,
    facts: Vec<String>,
    main: Block,
    blocks: Vec<Block>,
}

#[derive(Debug, Serialize)]
struct DevRow {
    severity: String,
    code: String,
    subject: String,
    message: String,
}

fn direction_text(d: Direction, null: f64) -> String {
    match d {
        Direction::TwoSided => format!("≠ {null}"),
        Direction::Greater => format!("> {null}"),
        Direction::Less => format!("< {null}"),
    }
}

pub(super) fn correction_name(c: Correction) -> &'static str {
    match c {
        Correction::None => "none",
        Correction::Bonferroni => "Bonferroni",
        Correction::Holm => "Holm",
        Correction::BenjaminiHochberg => "Benjamini–Hochberg",
        Correction::Bky => "BKY sharpened q-values",
        Correction::RomanoWolf => "Romano–Wolf",
    }
}

fn stars(p: f64) -> &'static str {
    // Conventional thresholds 0.01 / 0.05 / 0.10 (common practice).
    if p < 0.01 {
        "***"
    } else if p < 0.05 {
        "**"
    } else if p < 0.1 {
        "*"
    } else {
        ""
    }
}

fn term_row(name: &str, t: &Term) -> TermRow {
    TermRow {
        term: name.to_string(),
        est: num(t.estimate),
        se: num(t.std_error),
        stat: num(t.statistic),
        p: pval(t.p_value),
        ci: format!("[{}, {}]", num(t.ci[0]), num(t.ci[1])),
    }
}

fn test_line(name: &str, t: &TestResult) -> String {
    let dist = match t.distribution {
        crate::distribution::Reference::Normal => "N(0,1)".to_string(),
        crate::distribution::Reference::StudentT { df } => format!("t({df})"),
        crate::distribution::Reference::F { df1, df2 } => format!("F({df1}, {df2})"),
        crate::distribution::Reference::ChiSquare { df } => format!("χ²({df})"),
    };
    format!("{name}: {} ({dist}), {}", num(t.statistic), p_is(t.p_value))
}

fn ordered_terms(
    order: &[String],
    terms: &std::collections::BTreeMap<String, Term>,
) -> Vec<TermRow> {
    let mut rows: Vec<TermRow> = order
        .iter()
        .filter_map(|n| terms.get(n).map(|t| term_row(n, t)))
        .collect();
    rows.extend(
        terms
            .iter()
            .filter(|(n, _)| !order.contains(n))
            .map(|(n, t)| term_row(n, t)),
    );
    rows
}

impl ReportModel {
    /// Build the model from the plan and its results.
    pub fn build(plan: &Plan, r: &Results) -> Self {
        let mut specs = Vec::new();
        let mut apart = Vec::new();
        for s in &plan.specifications {
            let res = &r.specifications[&s.id];
            let m = spec_model(s, res);
            if res.pre_registered {
                specs.push(m)
            } else {
                apart.push(m)
            }
        }
        ReportModel {
            title: crate::escape::line(&plan.study.title),
            study_id: plan.study.id.clone(),
            authors: plan.study.authors.join("; "),
            registered: plan.study.registered.clone(),
            summary: plan.study.summary.clone(),
            provenance: provenance(r),
            integrity: integrity_line(r),
            hypotheses: plan
                .hypotheses
                .iter()
                .map(|h| h.id.as_str())
                .chain(
                    r.hypotheses
                        .iter()
                        .filter(|(_, h)| h.registration == "removed-after-data")
                        .map(|(id, _)| id.as_str()),
                )
                .map(|id| hyp_row(id, r))
                .collect(),
            registration: super::registration::build(r),
            contingencies: plan
                .contingencies
                .iter()
                .zip(&r.contingencies)
                .map(|(c, res)| rule_row(c, res))
                .collect(),
            indices: r
                .indices
                .iter()
                .map(|(id, i)| format!(
                    "`{id}`: {} of [{}], standardised against the reference group \"{}\" ({} rows); {} rows have a value ({})",
                    if i.method == "anderson" { "inverse-covariance-weighted index (Anderson 2008)" } else { "mean of z-scores (Kling, Liebman and Katz 2007)" },
                    i.components.join(", "),
                    i.reference,
                    i.reference_rows,
                    i.rows_with_value,
                    if i.missing == "complete" { "a row missing any component has no value" } else { "components missing in a row are left out of its average" }
                ))
                .collect(),
            balance: r.balance.as_ref().map(|b| BalanceModel {
                heading: format!(
                    "By `{}` ({} complete rows; differences from OLS on the arm with {} errors)",
                    b.by, b.n, b.errors
                ),
                rows: b
                    .covariates
                    .iter()
                    .map(|(c, v)| BalanceRowModel {
                        covariate: c.clone(),
                        comparison: format!("{} (n = {})", num(v.mean_comparison), v.n_comparison),
                        treated: format!("{} (n = {})", num(v.mean_treated), v.n_treated),
                        difference: num(v.difference),
                        se: num(v.std_error),
                        p: pval(v.test.p_value),
                    })
                    .collect(),
                joint: test_line("joint test (the arm on all covariates)", &b.joint),
            }),
            attrition: attrition_lines(r),
            tables: plan.tables.iter().map(|t| table_model(t, r)).collect(),
            specs,
            apart,
            deviations: r
                .deviations
                .iter()
                .map(|d| DevRow {
                    severity: d.severity.name().to_string(),
                    code: d.code.to_string(),
                    subject: d.subject.clone(),
                    message: d.message.clone(),
                })
                .collect(),
            cautions: cautions(r),
        }
    }
}

fn provenance(r: &Results) -> Vec<(String, String)> {
    let mut v = vec![
        ("Plan".to_string(), r.plan.path.clone()),
        (
            "Plan content SHA-256".to_string(),
            r.plan.content_sha256.clone(),
        ),
        ("Plan file SHA-256".to_string(), r.plan.bytes_sha256.clone()),
        (
            "Ledger head".to_string(),
            r.plan
                .ledger_head
                .clone()
                .unwrap_or_else(|| "none (no seal)".into()),
        ),
    ];
    for (id, d) in &r.data {
        v.push((
            format!("Data `{id}` ({} rows)", d.rows),
            format!("{} sha256:{}", d.path, d.sha256),
        ));
    }
    v.push((
        "Tool".to_string(),
        format!("{} {}", r.tool.name, r.tool.version),
    ));
    v.push(("Results digest".to_string(), r.digest.clone()));
    v
}

/// The integrity banner: every integrity finding, worst first; the seal state when none.
pub fn integrity_line(r: &Results) -> String {
    let findings = integrity_findings(r);
    if findings.is_empty() {
        return seal_state_line(r);
    }
    format!(
        "NOT AS REGISTERED: {} (see deviations).",
        findings.join("; ")
    )
}

/// Short phrases for the integrity findings of a run, worst first.
fn integrity_findings(r: &Results) -> Vec<String> {
    const ORDER: &[(&str, &str)] = &[
        ("ledger-broken", "the ledger's hash chain does not verify"),
        (
            "plan-changed",
            "the plan changed since its last ledger entry without an amendment",
        ),
        ("data-changed", "data changed since first read"),
        ("unsealed", "the plan was never sealed"),
        (
            "registered-version-failed",
            "the registered version could not be run beside the amended plan",
        ),
        (
            "plan-not-latest",
            "the plan matches an earlier ledger entry, not the latest",
        ),
        (
            "amended-after-data",
            "registered plan amended after the data were read",
        ),
        ("added-after-data", "added after the data were read"),
        (
            "hypothesis-added-after-data",
            "added after the data were read",
        ),
    ];
    let mut out = Vec::new();
    for (code, phrase) in ORDER {
        let subjects: Vec<&str> = r
            .deviations
            .iter()
            .filter(|d| d.code == *code)
            .map(|d| d.subject.as_str())
            .collect();
        if subjects.is_empty() {
            continue;
        }
        out.push(match *code {
            "data-changed" => format!("{phrase} ([data.{}])", subjects.join("], [data.")),
            "amended-after-data" => format!(
                "{}: {} change(s) ({})",
                amended_phrase(r),
                subjects.len(),
                subjects.join(", ")
            ),
            "added-after-data" => format!(
                "{} specification(s) {phrase}: {}",
                subjects.len(),
                subjects.join(", ")
            ),
            _ => (*phrase).to_string(),
        });
    }
    out
}

/// "registered plan amended after …", naming the later of the two moments any change followed.
fn amended_phrase(r: &Results) -> &'static str {
    let after_results = r.registration.as_ref().is_some_and(|p| {
        p.elements
            .iter()
            .any(|e| e.after == Some("results-computed"))
    });
    if after_results {
        "registered plan amended after results were computed"
    } else {
        "registered plan amended after the data were inspected"
    }
}

fn seal_state_line(r: &Results) -> String {
    match r.plan.integrity {
        "sealed-unchanged" => {
            "Sealed and unchanged: the plan matches its last ledger entry.".to_string()
        }
        "sealed-cosmetic-change" => {
            "Sealed; changed in comments or layout only since its last ledger entry.".to_string()
        }
        "changed" => {
            "CHANGED: the plan's content differs from its last ledger entry (see deviations)."
                .to_string()
        }
        "ledger-broken" => {
            "BROKEN: the ledger's hash chain does not verify (see deviations).".to_string()
        }
        _ => "NOT SEALED: there is no ledger seal for this plan.".to_string(),
    }
}

fn attrition_lines(r: &Results) -> Vec<String> {
    let Some(a) = &r.attrition else {
        return Vec::new();
    };
    let d = &a.differential;
    let mut lines = vec![format!(
        "observed (\"{}\"): {} of the comparison arm (n = {}) and {} of the treated arm (n = {}); difference {} (s.e. {}, {} errors), {}",
        a.observed,
        num(d.mean_comparison),
        d.n_comparison,
        num(d.mean_treated),
        d.n_treated,
        num(d.difference),
        num(d.std_error),
        a.errors,
        p_is(d.test.p_value)
    )];
    for (y, b) in &a.bounds {
        lines.push(format!(
            "Lee (2009) bounds on the effect on `{y}` for units observed in either arm: [{}, {}] (the {} arm trimmed by {})",
            num(b.lower),
            num(b.upper),
            b.trimmed_arm,
            num(b.trim_share)
        ));
    }
    lines
}

fn rule_row(c: &crate::plan::Contingency, r: &crate::results::ContingencyResult) -> RuleRow {
    let trigger = match &c.trigger {
        crate::plan::Trigger::WeakInstruments { below } => {
            format!("if the effective first-stage F is below {below}")
        }
        crate::plan::Trigger::Endogeneity { not_rejected_at } => {
            format!("if exogeneity is not rejected at {not_rejected_at}")
        }
        crate::plan::Trigger::Clusters { fewer_than } => {
            format!("if there are fewer than {fewer_than} clusters")
        }
    };
    let action = match &c.action {
        crate::plan::Action::AndersonRubin => "use Anderson–Rubin inference".to_string(),
        crate::plan::Action::Liml => "use the LIML estimate".to_string(),
        crate::plan::Action::Tf => "use the tF critical value".to_string(),
        crate::plan::Action::UseSpecification(s) => format!("report `{s}` as primary"),
        crate::plan::Action::WildBootstrap => {
            "use the restricted wild cluster bootstrap".to_string()
        }
    };
    let mut rule = format!("{trigger}, {action}");
    if let Some(d) = &c.description {
        rule = format!("{d} ({rule})");
    }
    RuleRow {
        id: c.id.clone(),
        specification: c.specification.clone(),
        rule,
        invoked: if r.invoked { "yes" } else { "no" }.to_string(),
        outcome: if r.hypotheses.is_empty() {
            r.reason.clone()
        } else {
            format!("{} (hypotheses {})", r.reason, r.hypotheses.join(", "))
        },
    }
}

fn method_text(h: &crate::results::HypothesisResult) -> String {
    let draws = match (h.draws, h.exact) {
        (Some(b), Some(true)) => format!("exact, all {b} draws"),
        (Some(b), _) => format!("{b} draws"),
        _ => String::new(),
    };
    let base = match h.method {
        "anderson-rubin" => "Anderson–Rubin".to_string(),
        "tf" => "tF".to_string(),
        "randomization" if h.estimator != "ols" => {
            format!("randomization inference on the AR statistic ({draws})")
        }
        "randomization" => format!("randomization inference ({draws})"),
        "wild-bootstrap" => format!("restricted wild cluster bootstrap ({draws})"),
        "normal" => format!("{} z", h.estimator.to_uppercase()),
        _ => format!(
            "{} t{}",
            h.estimator.to_uppercase(),
            h.df.map_or(String::new(), |d| format!("({d})"))
        ),
    };
    let mut text = base;
    if h.tested_specification != h.specification {
        text = format!("{text} in {}", h.tested_specification);
    }
    if let Some(c) = &h.contingency {
        text = format!("{text}, by contingency {c}");
    }
    text
}

fn hyp_row(id: &str, r: &Results) -> HypRow {
    let h = &r.hypotheses[id];
    let opt = |v: Option<f64>, f: fn(f64) -> String| v.map_or("n/a".to_string(), f);
    let mut note = h.reason.clone().unwrap_or_default();
    if !h.pre_registered {
        note = format!("not pre-registered. {note}").trim().to_string();
    }
    if h.registration == "removed-after-data" {
        note =
            format!("removed from the plan after the data were seen; result as registered. {note}")
                .trim()
                .to_string();
    } else if h.as_amended.is_some() {
        note = format!("as registered; the amended plan gives a different result (see Registered and amended analyses). {note}")
            .trim()
            .to_string();
    }
    HypRow {
        id: id.to_string(),
        claim: h.claim.clone(),
        test: format!(
            "`{}` in {}: {}",
            h.term,
            h.specification,
            direction_text(h.direction, h.null)
        ),
        method: method_text(h),
        interval: match (h.one_sided_bound, h.direction) {
            (Some(b), crate::inference::Direction::Greater) => format!(
                "lower bound {} (one-sided {:.0}%); two-sided {}",
                num(b),
                100.0 * (1.0 - h.alpha),
                h.ci.as_deref().map_or("n/a".to_string(), set_text)
            ),
            (Some(b), crate::inference::Direction::Less) => format!(
                "upper bound {} (one-sided {:.0}%); two-sided {}",
                num(b),
                100.0 * (1.0 - h.alpha),
                h.ci.as_deref().map_or("n/a".to_string(), set_text)
            ),
            _ => h.ci.as_deref().map_or("n/a".to_string(), set_text),
        },
        estimate: opt(h.estimate, num),
        p: opt(h.p_value, pval),
        adjusted: format!(
            "{} ({})",
            opt(h.adjusted_p_value, pval),
            correction_name(h.correction)
        ),
        level: num(h.alpha),
        verdict: h.verdict.to_string(),
        note,
    }
}

fn table_model(t: &crate::plan::Table, r: &Results) -> TableModel {
    let specs: Vec<&SpecResult> = t.columns.iter().map(|c| &r.specifications[c]).collect();
    let rows = t
        .rows
        .iter()
        .map(|term| TableRow {
            term: term.clone(),
            cells: specs
                .iter()
                .map(|s| match s.terms.get(term) {
                    Some(v) => Cell {
                        est: format!(
                            "{}{}",
                            num(v.estimate),
                            if t.stars { stars(v.p_value) } else { "" }
                        ),
                        se: format!("({})", num(v.std_error)),
                    },
                    None => Cell {
                        est: String::new(),
                        se: String::new(),
                    },
                })
                .collect(),
        })
        .collect();
    TableModel {
        title: crate::escape::line(&t.title),
        columns: t.columns.clone(),
        estimators: specs.iter().map(|s| s.estimator.to_uppercase()).collect(),
        rows,
        n: specs.iter().map(|s| s.n.to_string()).collect(),
        errors: specs
            .iter()
            .map(|s| match (&s.cluster_by, s.clusters) {
                (Some(by), Some(g)) => format!("cluster {} ({g})", by.join("×")),
                _ => match &s.hac {
                    Some(h) => format!("HAC (b = {})", bandwidth_text(h.bandwidth)),
                    None => s.errors.to_uppercase(),
                },
            })
            .collect(),
        stars: t.stars,
    }
}

fn spec_model(s: &crate::plan::Spec, r: &SpecResult) -> SpecModel {
    let mut facts = vec![
        format!("estimator {}, outcome `{}`, {} observations ({} in sample, {} dropped for missing values)", r.estimator.to_uppercase(), r.outcome, r.n, r.sample.in_sample, r.sample.dropped_missing),
        format!("standard errors: {}{}; tests use {}{}", r.errors, match (&r.cluster_by, r.clusters) { (Some(b), Some(g)) => format!(" by {} ({g} clusters)", b.join(", ")), _ => String::new() }, r.distribution, r.df.map_or(String::new(), |d| format!(" with {d} df"))),
        format!("R² {} · residual SD {} · {:.0}% intervals", num(r.r_squared), num(r.residual_sd), 100.0 * r.confidence),
    ];
    if let Some(h) = &r.hac {
        facts.push(hac_fact(h));
    }
    if !r.fixed_effects.is_empty() {
        facts.push(format!(
            "absorbed fixed effects (alternating projections): {}; they use {} degrees of freedom, counted in the residual df{} · within R² {}{}",
            r.fixed_effects
                .iter()
                .map(|(k, v)| format!("{k} ({v} levels)"))
                .collect::<Vec<_>>()
                .join(", "),
            r.absorbed_df,
            match (r.cluster_by.is_some(), r.absorbed_nested_df) {
                (false, _) => String::new(),
                (true, 0) => " (none nested in a cluster variable)".to_string(),
                (true, m) => format!(" ({m} of them from fixed effects nested in a cluster variable, not counted in the CR1 factor's K)"),
            },
            r.within_r_squared.map_or("n/a".into(), num),
            if r.singletons_dropped > 0 { format!(" · {} singleton row(s) dropped", r.singletons_dropped) } else { String::new() }
        ));
    }
    facts.push(df_convention(r));
    if let Some(k) = r.kappa {
        facts.push(format!("k-class κ = {}", num(k)));
    }
    if let Some((text, _)) = &s.sample {
        facts.push(format!("sample: {text}"));
    }
    if !r.dropped_terms.is_empty() {
        facts.push(format!(
            "dropped as collinear: {}",
            r.dropped_terms.join(", ")
        ));
    }
    if let Some(l) = &r.linear_probability {
        facts.push(format!(
            "binary outcome (linear probability model): {} fitted value(s) outside [0, 1]",
            l.fitted_outside_unit_interval
        ));
    }
    let order = spec_terms(s);
    // First stage and reduced form share the regressors [instruments | exogenous terms].
    let mut z_order = s.instruments.clone();
    z_order.extend(order.iter().filter(|t| !s.endogenous.contains(t)).cloned());
    let mut blocks = Vec::new();
    for (name, fs) in r.first_stage.iter().flatten() {
        blocks.push(Block {
            title: format!("First stage for `{name}`"),
            terms: ordered_terms(&z_order, &fs.terms),
            lines: vec![
                format!(
                    "F on excluded instruments (classical): {}, {}",
                    num(fs.f_statistic),
                    p_is(fs.f_p_value)
                ),
                format!(
                    "F on excluded instruments ({}): {}, {}",
                    r.errors,
                    num(fs.robust_f_statistic),
                    p_is(fs.robust_f_p_value)
                ),
                format!(
                    "partial R² of excluded instruments: {} · Shea's partial R² {} · first-stage R² {}",
                    num(fs.partial_r_squared),
                    num(fs.shea_partial_r_squared),
                    num(fs.r_squared)
                ),
            ],
        });
    }
    if let Some(rf) = &r.reduced_form {
        blocks.push(Block {
            title: format!(
                "Reduced form (`{}` on instruments and controls)",
                rf.outcome
            ),
            terms: ordered_terms(&z_order, &rf.terms),
            lines: vec![format!("R² {}", num(rf.r_squared))],
        });
    }
    if let Some(e) = &r.endogeneity {
        blocks.push(Block {
            title: "Endogeneity tests (null: the endogenous regressors are exogenous)".into(),
            terms: vec![],
            lines: vec![
                test_line(
                    &format!("control function ({})", r.errors),
                    &e.control_function,
                ),
                test_line("Durbin", &e.durbin),
                test_line("Wu–Hausman", &e.wu_hausman),
            ],
        });
    }
    if let Some(o) = &r.overidentification {
        blocks.push(Block {
            title: "Over-identification tests (null: all instruments valid)".into(),
            terms: vec![],
            lines: vec![
                test_line("Sargan (homoskedastic)", &o.sargan),
                test_line("Basmann (homoskedastic)", &o.basmann),
                match &o.hansen_j {
                    Some(j) => test_line(
                        &format!("Hansen's J (two-step GMM, {} weight)", robust_name(r)),
                        j,
                    ),
                    None => "Hansen's J: not computed with two-way clustering (no positive definite weight is guaranteed)".to_string(),
                },
            ],
        });
    }
    if let Some(w) = &r.weak_instruments {
        let mut lines = vec![
            format!(
                "effective first-stage F (Montiel Olea–Pflueger, {} errors): {} against the critical value {} for a worst-case bias of {:.0}% at 5% size (Patnaik approximation, {} effective df): {}",
                r.errors,
                num(w.effective_f),
                num(w.critical_value),
                100.0 * w.worst_case_bias,
                num(w.effective_df),
                if w.weak { "WEAK" } else { "not weak by this test" }
            ),
            format!("Cragg–Donald statistic (homoskedastic): {}", num(w.cragg_donald)),
        ];
        let kclass = matches!(
            s.estimator,
            crate::plan::Estimator::Liml | crate::plan::Estimator::Fuller
        );
        if kclass {
            lines[0].push_str(
                "; this critical value bounds the bias of 2SLS, not of this specification's estimator",
            );
        }
        if let Some(note) = &w.stock_yogo_note {
            lines.push(format!("Stock–Yogo critical values: {note}"));
        }
        for v in &w.stock_yogo {
            lines.push(format!(
                "Stock–Yogo critical value, {} {:.0}%: {}",
                match v.criterion {
                    "relative-bias" => "2SLS relative bias",
                    "wald-size" => "maximal size of a 5% 2SLS Wald test",
                    "liml-wald-size" => "maximal size of a 5% LIML Wald test",
                    other => other,
                },
                100.0 * v.level,
                num(v.critical_value)
            ));
        }
        if let Some(c) = w.tf_critical_value {
            lines.push(format!(
                "tF critical value for the 2SLS t-ratio at 5% given the first-stage F: {} (instead of 1.96)",
                num(c)
            ));
        }
        blocks.push(Block {
            title: "Weak-instrument diagnostics".into(),
            terms: vec![],
            lines,
        });
    }
    if let Some(ar) = &r.anderson_rubin {
        blocks.push(Block {
            title: "Anderson–Rubin inference (robust to weak instruments)".into(),
            terms: vec![],
            lines: vec![
                format!(
                    "test of a zero coefficient: {}",
                    test_line(
                        "AR",
                        &TestResult {
                            statistic: ar.statistic,
                            p_value: ar.p_value,
                            distribution: ar.distribution,
                        }
                    )
                ),
                format!(
                    "{:.0}% confidence set ({}): {}",
                    100.0 * ar.confidence,
                    ar.shape,
                    set_text(&ar.set)
                ),
            ],
        });
    }
    if let Some(l) = &r.liml {
        blocks.push(Block {
            title: format!("LIML estimate (κ = {}), for a contingency", num(l.kappa)),
            terms: ordered_terms(&order, &l.terms),
            lines: vec![],
        });
    }
    SpecModel {
        id: s.id.clone(),
        title: crate::escape::line(&r.title),
        facts,
        main: Block {
            title: "Estimates".into(),
            terms: ordered_terms(&order, &r.terms),
            lines: vec![],
        },
        blocks,
    }
}

/// A HAC bandwidth: whole numbers as stated, others to the usual precision.
fn bandwidth_text(b: f64) -> String {
    if b.fract() == 0.0 && b < 1e9 {
        format!("{}", b as u64)
    } else {
        num(b)
    }
}

/// How HAC errors were computed, in one sentence.
fn hac_fact(h: &crate::results::HacResult) -> String {
    let rule = match h.bandwidth_rule {
        "stated" => "stated in the plan",
        _ => {
            "chosen from the data by the Newey–West (1994) rule, on the scores of a preliminary fit"
        }
    };
    format!(
        "autocorrelation: Bartlett kernel over the rows in `{}` order with bandwidth b = {} ({rule}), so rows d ≤ {} apart are weighted 1 − d/b; a row missing from the sample keeps its place; sandwich scaled by {}",
        h.order_by, bandwidth_text(h.bandwidth), h.lags, h.small_sample_factor
    )
}

fn robust_name(r: &SpecResult) -> &'static str {
    match r.errors {
        "cluster" => "cluster-robust",
        "hac" => "heteroskedasticity-and-autocorrelation-robust",
        _ => "heteroskedasticity-robust",
    }
}

/// The degrees-of-freedom conventions a specification's numbers use.
fn df_convention(r: &SpecResult) -> String {
    let k = r.n - r.df_resid - r.absorbed_df;
    let resid = if r.absorbed_df > 0 {
        format!(
            "residual df {} = n − K − absorbed = {} − {k} − {}",
            r.df_resid, r.n, r.absorbed_df
        )
    } else {
        format!("residual df {} = n − K = {} − {k}", r.df_resid, r.n)
    };
    let factor = match r.errors {
        "hc1" if r.absorbed_df > 0 => " · HC1 factor n/(n − K − absorbed)".to_string(),
        "hc1" => " · HC1 factor n/(n − K)".to_string(),
        "cluster" if r.absorbed_df > 0 => format!(
            " · CR1 factor G/(G − 1)·(n − 1)/(n − K − a′) with a′ = {} (absorbed df not nested in a cluster variable)",
            r.absorbed_df - r.absorbed_nested_df
        ),
        "cluster" => " · CR1 factor G/(G − 1)·(n − 1)/(n − K)".to_string(),
        "hac" if r.absorbed_df > 0 => " · HAC factor n/(n − K − absorbed)".to_string(),
        "hac" => " · HAC factor n/(n − K)".to_string(),
        _ => String::new(),
    };
    let coef = match (r.distribution, r.df) {
        ("normal", _) => "N(0, 1)".to_string(),
        (_, Some(df)) if r.clusters.is_some() => format!("t(G − 1) = t({df})"),
        (_, Some(df)) => format!("t({df})"),
        _ => "t".to_string(),
    };
    let joint = if r.clusters.is_some() {
        "robust F tests refer to F(q, G − 1), classical ones to F(q, n − L − absorbed)"
    } else {
        "F tests refer to F(q, n − L − absorbed), L the regressors of that regression"
    };
    let tests = format!("coefficient tests use {coef}; {joint}");
    format!("degrees of freedom: {resid}{factor}; {tests}")
}

fn cautions(r: &Results) -> Vec<String> {
    let mut c = Vec::new();
    let has_iv = r.specifications.values().any(|s| s.estimator != "ols");
    if has_iv {
        c.push("Instrumental-variable estimates rest on the exclusion restriction (the instrument affects the outcome only through the endogenous regressor) and on instrument exogeneity. These assumptions cannot be tested with the data; over-identification tests only check instruments against each other.".into());
        c.push("With a binary instrument and a binary treatment, 2SLS estimates a local average treatment effect: the effect for compliers, whose take-up the instrument changes, which need not equal the effect for everyone.".into());
    }
    if r.specifications
        .values()
        .any(|s| s.weak_instruments.as_ref().is_some_and(|w| w.weak))
    {
        c.push("At least one specification has weak instruments by the effective-F test: its 2SLS estimate may be biased toward OLS and its t-test may over-reject. The Anderson–Rubin test and set stay valid however weak the instruments are; an unbounded set means the data cannot bound the effect.".into());
    }
    if r.specifications
        .values()
        .any(|s| s.linear_probability.is_some())
    {
        c.push("Linear probability models can predict outside [0, 1]; their coefficients are average marginal effects on the probability, and their errors are heteroskedastic by construction.".into());
    }
    if r.hypotheses.values().any(|h| h.method == "randomization") {
        c.push("Randomization p-values test the sharp null that the assignment changed no unit's outcome beyond the stated null value, a stronger hypothesis than a zero average effect; they are exact given the registered assignment design, so they are only as good as the record of how the assignment was actually drawn.".into());
    }
    if r.hypotheses.values().any(|h| h.method == "wild-bootstrap") {
        c.push("Wild cluster bootstrap p-values are more reliable than cluster-robust t-tests when clusters are few, but remain approximations; with very few treated clusters they can mislead as well.".into());
    }
    if r.hypotheses
        .values()
        .any(|h| h.correction == Correction::Bky)
    {
        c.push("BKY q-values control the false discovery rate (the expected share of false claims among those made), not the chance of any false claim; a q-value can be below its raw p-value when most hypotheses of the family appear false.".into());
    }
    if let Some(a) = r.attrition.as_ref().filter(|a| a.significant) {
        let named = if a.hypotheses_on_table.is_empty() {
            "no hypothesis uses it".to_string()
        } else {
            format!("this affects {}", a.hypotheses_on_table.join(", "))
        };
        c.push(format!(
            "Outcomes are observed at different rates in the two arms of table `{}` (differential attrition test p = {} at level {}): the arms' observed units may no longer be comparable, so estimates on this table can be biased whatever their p-values say; {named}. Lee bounds, where reported, bound the effect under their own assumption.",
            a.data,
            pval(a.differential.test.p_value),
            num(a.alpha)
        ));
    }
    if r.attrition.as_ref().is_some_and(|a| !a.bounds.is_empty()) {
        c.push("Lee bounds bound the effect for units whose outcome would be observed in either arm, assuming assignment affects whether an outcome is observed in one direction only.".into());
    }
    c.push("A verified run shows that the registered plan was followed on these data; it does not show that the design is sound or that its assumptions hold. Decisions rest with the study's own review and its registry's rules.".into());
    c
}
