//! The report model: everything a report shows, already formatted as text.

use super::format::{num, p_is, pval, set_text};
use crate::deviation::DeviationCode;
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
    rehearsal: Option<super::rehearsal::RehearsalModel>,
    contingencies: Vec<RuleRow>,
    indices: Vec<String>,
    balance: Option<BalanceModel>,
    attrition: Vec<String>,
    tables: Vec<TableModel>,
    specs: Vec<SpecModel>,
    apart: Vec<SpecModel>,
    conventions: Vec<String>,
    resampling: Vec<String>,
    figures: Vec<super::plots::Figure>,
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
    /// Significance marks (`*` per plan threshold passed); Markdown escapes them.
    marks: String,
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
    /// Rows the plan asked for beneath the coefficients: a label and one cell per column.
    extra: Vec<(String, Vec<String>)>,
    notes: Vec<String>,
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
    identification: Option<super::identification::Panel>,
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

/// Significance marks: one `*` per plan threshold (largest first) that `p` falls below.
fn stars(p: f64, thresholds: &[f64]) -> String {
    "*".repeat(thresholds.iter().filter(|&&t| p < t).count())
}

/// The legend of a table's marks, from the plan's thresholds.
fn stars_legend(thresholds: &[f64]) -> String {
    let parts: Vec<String> = thresholds
        .iter()
        .enumerate()
        .map(|(i, t)| format!("{} p < {t}", "*".repeat(i + 1)))
        .collect();
    format!(
        "Marks (thresholds set in the plan, two-sided p of each coefficient's own test): {}.",
        parts.join(", ")
    )
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
    let dist = super::identification::dist_text(t.distribution);
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
        let mut conventions: Vec<String> = Vec::new();
        for s in &plan.specifications {
            let res = &r.specifications[&s.id];
            for rule in df_convention(res).1 {
                if !conventions.contains(&rule) {
                    conventions.push(rule);
                }
            }
            let m = spec_model(s, res, plan.inference.alpha);
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
            rehearsal: super::rehearsal::build(r),
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
                    "By `{}` ({} complete rows; {})",
                    b.by,
                    b.n,
                    summary_design(b.errors, &b.clusters, b.blocks.as_ref())
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
                joint: test_line(
                    if b.blocks.is_some() {
                        "joint test (the arm on all covariates and the blocks)"
                    } else {
                        "joint test (the arm on all covariates)"
                    },
                    &b.joint,
                ),
            }),
            attrition: attrition_lines(r),
            tables: plan.tables.iter().map(|t| table_model(t, r)).collect(),
            specs,
            apart,
            conventions,
            resampling: resampling_lines(plan, r),
            figures: super::plots::figures(plan, r),
            deviations: r
                .deviations
                .iter()
                .map(|d| DevRow {
                    severity: d.severity.name().to_string(),
                    code: d.code.as_str().to_string(),
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
    const ORDER: &[(DeviationCode, &str)] = &[
        (
            DeviationCode::LedgerBroken,
            "the ledger's hash chain does not verify",
        ),
        (
            DeviationCode::PlanChanged,
            "the plan changed since its last ledger entry without an amendment",
        ),
        (DeviationCode::DataChanged, "data changed since first read"),
        (DeviationCode::Unsealed, "the plan was never sealed"),
        (
            DeviationCode::RegisteredVersionFailed,
            "the registered version could not be run beside the amended plan",
        ),
        (
            DeviationCode::PlanNotLatest,
            "the plan matches an earlier ledger entry, not the latest",
        ),
        (
            DeviationCode::AmendedAfterData,
            "registered plan amended after the data were read",
        ),
        (
            DeviationCode::AddedAfterData,
            "added after the data were read",
        ),
        (
            DeviationCode::HypothesisAddedAfterData,
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
            DeviationCode::DataChanged => {
                format!("{phrase} ([data.{}])", subjects.join("], [data."))
            }
            DeviationCode::AmendedAfterData => format!(
                "{}: {} change(s) ({})",
                amended_phrase(r),
                subjects.len(),
                subjects.join(", ")
            ),
            DeviationCode::AddedAfterData => format!(
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

/// How a balance or attrition regression was run: the difference (within the registered
/// blocks, when absorbed) and the errors (naming the cluster columns).
fn summary_design(
    errors: &str,
    clusters: &[String],
    blocks: Option<&crate::results::BlocksUsed>,
) -> String {
    let errors = if clusters.is_empty() {
        format!("{errors} errors")
    } else {
        let by: Vec<String> = clusters.iter().map(|c| format!("`{c}`")).collect();
        format!("errors clustered by {}", by.join(" and "))
    };
    match blocks {
        None => format!("differences from OLS on the arm with {errors}"),
        Some(b) => format!(
            "within-block differences from OLS on the arm with the {} registered blocks of `{}` as fixed effects{}, {errors}",
            b.levels,
            b.column,
            match b.singletons_dropped {
                0 => String::new(),
                1 => " (1 row alone in its block left out)".to_string(),
                k => format!(" ({k} rows alone in their block left out)"),
            }
        ),
    }
}

fn attrition_lines(r: &Results) -> Vec<String> {
    let Some(a) = &r.attrition else {
        return Vec::new();
    };
    let d = &a.differential;
    let mut lines = vec![format!(
        "observed (\"{}\"): {} of the comparison arm (n = {}) and {} of the treated arm (n = {}); difference {} (s.e. {}; {}), {}",
        a.observed,
        num(d.mean_comparison),
        d.n_comparison,
        num(d.mean_treated),
        d.n_treated,
        num(d.difference),
        num(d.std_error),
        summary_design(a.errors, &a.clusters, a.blocks.as_ref()),
        p_is(d.test.p_value)
    )];
    if let (Some(b), false) = (&a.blocks, a.bounds.is_empty()) {
        lines.push(format!(
            "The Lee bounds below pool the blocks of `{}`: they are computed on the arms as wholes, not within blocks, which bounds the effect only if every block assigned the same share of units to treatment.",
            b.column
        ));
    }
    for (y, b) in &a.bounds {
        let interval = match (&b.interval, &b.no_interval) {
            (Some([lo, hi]), _) => format!(
                "; {}% interval for the effect (Imbens and Manski 2004, critical value {}): [{}, {}]",
                (1e6 * 100.0 * b.interval_level).round() / 1e6,
                num(b.interval_critical_value.unwrap_or(f64::NAN)),
                num(*lo),
                num(*hi)
            ),
            (None, Some(why)) => format!("; no interval: {why}"),
            (None, None) => String::new(),
        };
        lines.push(format!(
            "Lee (2009) bounds on the effect on `{y}` for units observed in either arm: [{}, {}] (the {} arm trimmed by {}{}){interval}",
            num(b.lower),
            num(b.upper),
            b.trimmed_arm,
            num(b.trim_share),
            match (b.std_error_lower, b.std_error_upper) {
                (Some(l), Some(u)) => format!("; s.e. {} and {}", num(l), num(u)),
                _ => String::new(),
            }
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
        (Some(b), Some(true)) => format!("exact: all {b} draws"),
        (Some(b), _) => format!("{b} draws counting the observed one, sampled"),
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

/// How each resampled test drew its replicates: the procedure, the design it follows, the
/// number of draws and whether the observed one is counted, exact or sampled, the seed and
/// the counting rule, all formatted from the hypothesis's `resampling` record in results.json.
fn resampling_lines(plan: &Plan, r: &Results) -> Vec<String> {
    let mut out = Vec::new();
    for h in &plan.hypotheses {
        let Some(res) = r.hypotheses.get(&h.id) else {
            continue;
        };
        let Some(info) = res.resampling.as_ref() else {
            continue;
        };
        out.push(format!(
            "{}: {}; {}; {}.",
            h.id,
            resampling_procedure(info),
            resampling_count(info),
            resampling_p_value(info)
        ));
        if let Some(i) = &res.randomization_interval {
            out.push(format!(
                "{}: the {}% randomization interval is the set of constant additive effects τ (every unit's outcome moved by τ when treated) that the two-sided test does not reject at {}: {} candidate effects tested, each on the same draws, stepping out from the estimate by its standard error times 1, 2, 4, … (up to 4096) and then bisecting, so each end lies within {} of a rejected effect; an end with no rejection found is shown as unbounded.",
                h.id,
                (1e6 * 100.0 * i.level).round() / 1e6,
                num(1.0 - i.level),
                i.evaluations,
                num(i.tolerance)
            ));
        }
    }
    out
}

/// The procedure and what it re-draws, in words.
fn resampling_procedure(i: &crate::results::ResamplingInfo) -> String {
    let d = &i.redrawn;
    if i.procedure == "randomization" {
        let how = match (&d.blocks, &d.clusters) {
            (Some(b), Some(c)) => {
                format!("whole clusters of `{c}` re-assigned within blocks of `{b}`")
            }
            (Some(b), None) => format!("units re-assigned within blocks of `{b}`"),
            (None, Some(c)) => format!("whole clusters of `{c}` re-assigned"),
            (None, None) => "the observed values permuted among all units".to_string(),
        };
        let statistic = match i.statistic {
            "anderson-rubin" => "the Anderson–Rubin statistic",
            "t" => "the studentized coefficient (t)",
            _ => "the coefficient estimate",
        };
        format!(
            "randomization test: `{}` re-drawn by the registered design ({}: {how}); {statistic} recomputed under the sharp null (coefficient {})",
            d.variable.as_deref().unwrap_or_default(),
            d.design,
            i.null_imposed
        )
    } else {
        let variant = match i.bootstrap {
            Some("wild-restricted-efficient") => "wild restricted efficient bootstrap (2SLS)",
            _ => "restricted wild cluster bootstrap",
        };
        let weights = if i.weights == Some("webb") {
            "Webb six-point"
        } else {
            "Rademacher"
        };
        let clusters = match (&d.clusters, d.cluster_count) {
            (Some(c), Some(g)) => format!(" of `{c}` ({g} clusters)"),
            (Some(c), None) => format!(" of `{c}`"),
            _ => String::new(),
        };
        format!(
            "{variant}: null imposed (coefficient {}), {weights} weights drawn per cluster{clusters}, CR1 t recomputed",
            i.null_imposed
        )
    }
}

/// Exact or sampled, the draws asked for and used, the observed draw and the seed.
fn resampling_count(i: &crate::results::ResamplingInfo) -> String {
    let original = if i.procedure == "randomization" {
        "the observed assignment"
    } else {
        "the original sample (all weights 1)"
    };
    let skipped = match i.draws_skipped {
        0 => String::new(),
        1 => ", 1 draw left out because its statistic could not be computed".to_string(),
        k => format!(", {k} draws left out because their statistic could not be computed"),
    };
    if i.mode == "exact" {
        format!(
            "exact: every possible draw enumerated ({original} among them), {} used{skipped}; the seed is not used",
            i.draws_used
        )
    } else {
        format!(
            "sampled: {} random draws with seed {} plus {original}, {} used{skipped} (the {} one counted)",
            i.draws_requested,
            i.seed,
            i.draws_used,
            if i.procedure == "randomization" { "observed" } else { "original" }
        )
    }
}

/// How the p-value is formed from the draws.
fn resampling_p_value(i: &crate::results::ResamplingInfo) -> String {
    let rule = match i.p_value_counts {
        "|T*| >= |T|" => "|T*| ≥ |T|",
        "T* >= T" => "T* ≥ T",
        "T* <= T" => "T* ≤ T",
        _ => "AR* ≥ AR (p = 1 when the estimate lies on the other side of the null)",
    };
    format!(
        "p-value: the share of the {} draws with {rule}, ties within a relative {:e} counted",
        i.draws_used, i.tie_tolerance
    )
}

/// A randomization interval's text, unbounded ends as ∞.
fn ri_interval_text(i: &crate::results::RandomizationIntervalResult) -> String {
    format!(
        "randomization {}%: [{}, {}]",
        (1e6 * 100.0 * i.level).round() / 1e6,
        i.lower.map_or("−∞".to_string(), num),
        i.upper.map_or("+∞".to_string(), num)
    )
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
        note = format!("as registered; the amended plan's result differs, see Registered and amended analyses. {note}")
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
            _ => match &h.randomization_interval {
                Some(i) => ri_interval_text(i),
                None => h.ci.as_deref().map_or("n/a".to_string(), set_text),
            },
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
                        est: num(v.estimate),
                        marks: stars(v.p_value, &t.stars),
                        se: format!("({})", num(v.std_error)),
                    },
                    None => Cell {
                        est: String::new(),
                        marks: String::new(),
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
        extra: t
            .summary_rows
            .iter()
            .flat_map(|row| super::summary_rows::rows(row, &specs))
            .collect(),
        notes: table_notes(t, &specs),
    }
}

/// What a reader of a table needs beside it: the parentheses, the marks, mixed samples.
fn table_notes(t: &crate::plan::Table, specs: &[&SpecResult]) -> Vec<String> {
    let mut notes =
        vec!["Each estimate has its standard error beneath it, in parentheses.".to_string()];
    if !t.stars.is_empty() {
        notes.push(stars_legend(&t.stars));
    }
    for row in &t.summary_rows {
        notes.extend(super::summary_rows::notes(row, &t.columns, specs));
    }
    let mut ns: Vec<usize> = specs.iter().map(|s| s.n).collect();
    ns.sort_unstable();
    ns.dedup();
    if ns.len() > 1 {
        notes.push(format!(
            "The columns rest on different rows (N = {}): each specification leaves out the rows missing any variable it uses, so differences between columns mix a change of method with a change of sample.",
            ns.iter().map(usize::to_string).collect::<Vec<_>>().join(", ")
        ));
    }
    notes
}

fn errors_text(r: &SpecResult) -> String {
    match (&r.cluster_by, r.clusters) {
        (Some(b), Some(g)) => format!("clustered by {} ({g} clusters)", b.join(" and ")),
        _ => match r.errors {
            "classical" => "classical (homoskedastic)".to_string(),
            "hac" => "HAC".to_string(),
            e => e.to_uppercase(),
        },
    }
}

fn spec_model(s: &crate::plan::Spec, r: &SpecResult, alpha: f64) -> SpecModel {
    let (df_fact, _) = df_convention(r);
    let mut facts = vec![
        format!(
            "{} of `{}` on {} rows ({} in the sample, {} left out for a missing value)",
            r.estimator.to_uppercase(),
            r.outcome,
            r.n,
            r.sample.in_sample,
            r.sample.dropped_missing
        ),
        format!("errors {}; {df_fact}", errors_text(r)),
        format!(
            "R² {} · residual SD {} · {:.0}% intervals",
            num(r.r_squared),
            num(r.residual_sd),
            100.0 * r.confidence
        ),
    ];
    if let Some(h) = &r.hac {
        facts.push(hac_fact(h));
    }
    if !r.fixed_effects.is_empty() {
        facts.push(fixed_effects_fact(r));
    }
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
            title: format!("First stage: `{name}` on the instruments and controls"),
            terms: ordered_terms(&z_order, &fs.terms),
            lines: vec![format!("R² {}", num(fs.r_squared))],
        });
    }
    if let Some(rf) = &r.reduced_form {
        blocks.push(Block {
            title: format!(
                "Reduced form: `{}` on the instruments and controls",
                rf.outcome
            ),
            terms: ordered_terms(&z_order, &rf.terms),
            lines: vec![format!("R² {}", num(rf.r_squared))],
        });
    }
    if let Some(l) = &r.liml {
        blocks.push(Block {
            title: format!("LIML estimate (κ = {}), for a decision rule", num(l.kappa)),
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
        identification: super::identification::panel(s, r, alpha),
        blocks,
    }
}

/// The fixed effects swept out of a specification, in one sentence.
fn fixed_effects_fact(r: &SpecResult) -> String {
    let levels = r
        .fixed_effects
        .iter()
        .map(|(k, v)| format!("`{k}` ({v} levels)"))
        .collect::<Vec<_>>()
        .join(", ");
    let inside = match (r.cluster_by.is_some(), r.absorbed_nested_df) {
        (true, m) if m > 0 => format!(
            "; {m} of these df belong to groups lying wholly inside one cluster and are left out of the CR1 factor's K"
        ),
        _ => String::new(),
    };
    let singletons = if r.singletons_dropped > 0 {
        format!(
            " · {} row(s) alone in their group set aside",
            r.singletons_dropped
        )
    } else {
        String::new()
    };
    format!(
        "group means removed for {levels}, costing {} df in the residual count{inside} · R² within groups {}{singletons}",
        r.absorbed_df,
        r.within_r_squared.map_or("n/a".into(), num),
    )
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

/// A specification's degrees of freedom as numbers, and the general rules they follow (stated
/// once per report, in its conventions section).
fn df_convention(r: &SpecResult) -> (String, Vec<String>) {
    let k = r.n - r.df_resid - r.absorbed_df;
    let resid = if r.absorbed_df > 0 {
        format!(
            "residual df {} = {} − {k} − {} (n − K − absorbed)",
            r.df_resid, r.n, r.absorbed_df
        )
    } else {
        format!("residual df {} = {} − {k} (n − K)", r.df_resid, r.n)
    };
    let coef = match (r.distribution, r.df) {
        ("normal", _) => "N(0, 1)".to_string(),
        (_, Some(df)) => format!("t({df})"),
        _ => "t".to_string(),
    };
    let mut rules = Vec::new();
    match r.errors {
        "hc1" => rules.push("HC1 errors scale the sandwich by n/(n − K − absorbed)".to_string()),
        "hac" => rules.push("HAC errors scale the sandwich by n/(n − K − absorbed)".to_string()),
        "cluster" => rules.push("Clustered (CR1) errors scale the sandwich by G/(G − 1)·(n − 1)/(n − K − a′), G the clusters and a′ the absorbed df of groups not lying wholly inside one cluster; their coefficient tests refer to t(G − 1) and their robust F tests to F(q, G − 1)".to_string()),
        _ => {}
    }
    rules.push("K counts the estimated coefficients and absorbed the df used by swept-out group means (zero without fixed effects); classical F tests refer to F(q, n − L − absorbed), L the regressors of that regression".to_string());
    (format!("{resid}; coefficient tests {coef}"), rules)
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
        if r.hypotheses
            .values()
            .any(|h| h.randomization_interval.is_some())
        {
            c.push("A randomization interval collects the effects the test does not reject if every unit's outcome moves by the same amount when treated; with effects that differ between units it is not an interval for the average effect.".into());
        }
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
        c.push("Lee bounds bound the effect for units whose outcome would be observed in either arm, assuming assignment affects whether an outcome is observed in one direction only. Their interval (Imbens and Manski 2004) covers that effect, not the whole bounded set, and rests on a large-sample normal approximation for independently sampled units.".into());
    }
    c.push("A verified run shows that the registered plan was followed on these data; it does not show that the design is sound or that its assumptions hold. Decisions rest with the study's own review and its registry's rules.".into());
    c
}
