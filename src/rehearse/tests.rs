//! Rehearsals checked against published closed forms, each within three Monte Carlo
//! standard errors. Normal quantiles and the normal CDF come from statrs (outside this
//! project). Replication counts are kept small so the suite stays fast; the slower, sharper
//! versions are `#[ignore]`d: `cargo test --release rehearse::tests -- --ignored`.

mod baseline;

use super::{rehearse, simulated_tables, Rehearsed};
use crate::plan::{from_text, Plan};
use statrs::distribution::{Continuous, ContinuousCDF, Normal};

fn phi(x: f64) -> f64 {
    Normal::standard().cdf(x)
}

fn z(p: f64) -> f64 {
    Normal::standard().inverse_cdf(p)
}

fn plan(text: &str) -> Plan {
    from_text(
        std::path::Path::new("/nonexistent/check.toml"),
        text.to_string(),
    )
    .unwrap_or_else(|e| panic!("plan: {e}"))
}

fn run(p: &Plan, reps: usize) -> Rehearsed {
    rehearse(p, Some(reps), &|_, _| {}).unwrap_or_else(|e| panic!("rehearse: {e}"))
}

/// Monte Carlo standard error of a share p over n replications.
fn mcse(p: f64, n: usize) -> f64 {
    (p * (1.0 - p) / n as f64).sqrt()
}

const TWO_ARM: &str = r#"format = 1
[study]
title = "Two-arm check"
[data.people]
path = "people.csv"
[data.people.columns]
arm = { kind = "binary" }
y = { kind = "number" }
[assignment]
variable = "arm"
design = "complete"
[[specification]]
id = "itt"
estimator = "ols"
outcome = "y"
regressors = ["arm"]
errors = "hc1"
[[hypothesis]]
id = "H1"
claim = "The arm raises y"
specification = "itt"
term = "arm"
[rehearsal]
replications = 300
seed = 11
effects = [0.2, 0.3, 0.4]
[rehearsal.data.people]
rows = 200
[rehearsal.data.people.columns]
y = "effect * arm + normal(0, 1)"
arm = "assigned(0.5)"
"#;

/// Two-sided normal-approximation power of a difference in means with standard error `se`:
/// Φ(δ/se − z₁₋α/₂) + Φ(−δ/se − z₁₋α/₂) (e.g. Cohen 1988, ch. 2; the standard two-sample
/// z-test power formula).
fn normal_power(delta: f64, se: f64, alpha: f64) -> f64 {
    let c = z(1.0 - alpha / 2.0);
    phi(delta / se - c) + phi(-delta / se - c)
}

fn check_two_arm(reps: usize) {
    let r = run(&plan(TWO_ARM), reps);
    let h = &r.hypotheses["H1"];
    // 100 per arm, unit variance: se = √(1/100 + 1/100).
    let se = (2.0f64 / 100.0).sqrt();
    for c in &h.curve {
        let want = normal_power(c.effect, se, 0.05);
        let tol = 3.0 * mcse(want, reps);
        assert!(
            (c.power.share - want).abs() <= tol,
            "effect {}: power {} vs normal approximation {want} (± {tol})",
            c.effect,
            c.power.share
        );
    }
    // Size at zero effect within Monte Carlo error of alpha.
    assert!(
        (h.size.share - 0.05).abs() <= 3.0 * mcse(0.05, reps),
        "size {}",
        h.size.share
    );
}

#[test]
fn two_arm_ols_power_matches_the_normal_approximation() {
    check_two_arm(300);
}

#[test]
#[ignore = "slow: 4,000 replications per effect"]
fn two_arm_ols_power_matches_the_normal_approximation_closely() {
    check_two_arm(4000);
}

const CLUSTERED: &str = r#"format = 1
[study]
title = "Cluster-randomized check"
[data.pupils]
path = "pupils.csv"
[data.pupils.columns]
school = { kind = "category" }
treated = { kind = "binary" }
score = { kind = "number" }
[assignment]
variable = "treated"
design = "clustered"
clusters = "school"
[[specification]]
id = "itt"
estimator = "ols"
outcome = "score"
regressors = ["treated"]
errors = { kind = "cluster", by = "school" }
[[hypothesis]]
id = "H1"
claim = "Treated schools score differently"
specification = "itt"
term = "treated"
[rehearsal]
replications = 300
seed = 5
effects = [MDE]
[rehearsal.data.pupils]
rows = 400
[rehearsal.data.pupils.columns]
school = "group(40)"
treated = "assigned(0.5)"
score = "effect * treated + group_normal(school, sqrt(0.1)) + normal(0, sqrt(0.9))"
"#;

/// J = 40 schools of m = 10 pupils, ICC ρ = 0.1, unit total variance, half the schools
/// treated. The standard cluster-randomized MDE (Bloom 1995, Evaluation Review 19(5);
/// Bloom 2005, "Learning more from social experiments", ch. 4): MDE = (t₁₋α/₂ + t_power)
/// · √(4 σ² (1 + (m − 1)ρ) / (J m)), t with J − 2 degrees of freedom; the factor
/// 1 + (m − 1)ρ is the design effect (Kish 1965). Power at that effect is the target, 0.80.
fn check_clustered(reps: usize) {
    let (j, m, rho): (f64, f64, f64) = (40.0, 10.0, 0.1);
    let de = 1.0 + (m - 1.0) * rho;
    let se = (4.0 * de / (j * m)).sqrt();
    let t = statrs::distribution::StudentsT::new(0.0, 1.0, j - 2.0).expect("df > 0");
    let mde = (t.inverse_cdf(0.975) + t.inverse_cdf(0.80)) * se;
    let text = CLUSTERED.replace("MDE", &format!("{mde}"));
    let r = run(&plan(&text), reps);
    let h = &r.hypotheses["H1"];
    let p = h.curve[1].power.share;
    assert!(
        (p - 0.80).abs() <= 3.0 * mcse(0.80, reps),
        "power {p} at the closed-form MDE {mde} (design effect {de})"
    );
    // Ignoring the clustering would claim the much smaller MDE 2.8·√(4/400) ≈ 0.28; at it
    // the simulated power must be far below 0.80 (the design effect matters).
    let naive = (z(0.975) + z(0.80)) * (4.0f64 / (j * m)).sqrt();
    assert!(naive < 0.75 * mde, "naive {naive} vs {mde}");
    assert!(
        (h.size.share - 0.05).abs() <= 3.0 * mcse(0.05, reps),
        "size {}",
        h.size.share
    );
}

#[test]
fn cluster_randomized_power_matches_the_design_effect_formula() {
    check_clustered(300);
}

#[test]
#[ignore = "slow: 3,000 replications per effect"]
fn cluster_randomized_power_matches_the_design_effect_formula_closely() {
    check_clustered(3000);
}

const ENCOURAGEMENT: &str = r#"format = 1
[study]
title = "Encouragement check"
[data.homes]
path = "homes.csv"
[data.homes.columns]
letter = { kind = "binary" }
joined = { kind = "binary" }
use = { kind = "number" }
[assignment]
variable = "letter"
design = "complete"
[[specification]]
id = "itt"
estimator = "ols"
outcome = "use"
regressors = ["letter"]
errors = "hc1"
[[specification]]
id = "late"
estimator = "2sls"
outcome = "use"
endogenous = ["joined"]
instruments = ["letter"]
errors = "hc1"
[[hypothesis]]
id = "ITT"
claim = "The letter changes use"
specification = "itt"
term = "letter"
[[hypothesis]]
id = "LATE"
claim = "Joining changes use"
specification = "late"
term = "joined"
[rehearsal]
replications = 300
seed = 3
effects = [0.3, 0.5, 0.7, 0.9]
[rehearsal.data.homes]
rows = 400
[rehearsal.data.homes.columns]
letter = "assigned(0.5)"
joined = "bernoulli(if(letter, 0.6, 0.1))"
use = "effect * joined + normal(0, 1)"
"#;

/// Complier share π = 0.6 − 0.1 = 0.5. The ITT is π·effect, so the 2SLS MDE on the effect
/// scale is the ITT MDE (in the ITT's units) divided by π (Bloom 1984, Evaluation Review
/// 8(2), the no-show adjustment; Bloom 2005 ch. 4). Both MDEs come from the same simulation;
/// their Monte Carlo error follows from the power error over the local slope of the curve
/// (delta method).
fn check_encouragement(reps: usize) {
    let r = run(&plan(ENCOURAGEMENT), reps);
    let (itt, late) = (&r.hypotheses["ITT"], &r.hypotheses["LATE"]);
    let itt_mde = itt.mde_estimate.expect("the ITT reaches 80% power");
    let late_mde = late.mde.expect("the 2SLS estimate reaches 80% power");
    let pi = 0.5;
    let slope = |h: &super::summary::HypothesisPower| {
        let (a, b) = h
            .curve
            .windows(2)
            .map(|w| (&w[0], &w[1]))
            .find(|(_, b)| b.power.share >= 0.8)
            .expect("bracketed");
        (b.power.share - a.power.share) / (b.effect - a.effect)
    };
    let se_late = mcse(0.8, reps) / slope(late);
    let se_itt = mcse(0.8, reps) / slope(itt);
    let tol = 3.0 * (se_late * se_late + se_itt * se_itt).sqrt();
    assert!(
        (late_mde - itt_mde / pi).abs() <= tol,
        "2SLS MDE {late_mde} vs ITT MDE {itt_mde} / {pi} (± {tol})"
    );
    // The ITT MDE itself against the normal approximation with σ ≈ 1: 2.80 · 2/√400.
    let closed = (z(0.975) + z(0.80)) * 2.0 / 20.0;
    assert!(
        (itt_mde - closed).abs() <= 3.0 * se_itt * pi + 0.02,
        "ITT MDE {itt_mde} vs {closed}"
    );
}

#[test]
fn encouragement_2sls_mde_is_the_itt_mde_over_the_complier_share() {
    check_encouragement(300);
}

#[test]
fn the_same_seed_gives_the_same_rehearsal_and_streams_differ_by_replication() {
    let p = plan(TWO_ARM);
    let a = serde_json::to_string(&run(&p, 20)).expect("json");
    let b = serde_json::to_string(&run(&p, 20)).expect("json");
    assert_eq!(a, b);
    let t0 = simulated_tables(&p, 0, 0.3).expect("tables");
    let t1 = simulated_tables(&p, 1, 0.3).expect("tables");
    assert_ne!(t0["people"].numeric["y"], t1["people"].numeric["y"]);
    // Half the people are assigned, exactly (complete randomization).
    let arm = &t0["people"].numeric["arm"];
    assert_eq!(arm.iter().flatten().sum::<f64>(), 100.0);
}

#[test]
fn clusters_are_assigned_whole() {
    let text = CLUSTERED.replace("MDE", "0.5");
    let t = simulated_tables(&plan(&text), 2, 0.5).expect("tables");
    let (school, treated) = (
        &t["pupils"].labels["school"],
        &t["pupils"].numeric["treated"],
    );
    for s in 1..=40 {
        let arms: std::collections::BTreeSet<u64> = (0..400)
            .filter(|&i| school[i].as_deref() == Some(s.to_string().as_str()))
            .map(|i| treated.get(i).expect("drawn") as u64)
            .collect();
        assert_eq!(arms.len(), 1, "school {s} split across arms");
    }
    let n_treated = treated.iter().flatten().sum::<f64>();
    assert_eq!(n_treated, 200.0, "20 of 40 schools treated");
}

#[test]
fn draws_parse_only_for_rehearsals_and_print_back() {
    let src = "effect * arm + group_normal(school, sqrt(0.1)) + normal(0, 1)";
    let e = crate::expr::parse_random(src).expect("parses");
    assert_eq!(crate::expr::parse_random(&e.to_string()).as_ref(), Ok(&e));
    assert!(e.uses_draws());
    let refused = crate::expr::parse(src).expect_err("draws refused in [derive]");
    assert!(
        refused.message.contains("only a [rehearsal]"),
        "{}",
        refused.message
    );
    let err = crate::expr::parse_random("normal(1)").expect_err("arity");
    assert!(err.message.contains("normal(mean, sd)"), "{}", err.message);
    // Evaluating a draw without a rehearsal's stream is an error, never a number.
    let col = [Some(1.0)];
    let e = crate::expr::parse_random("bernoulli(0.5)").expect("parses");
    assert!(e
        .eval(1, &|_| Some(&col as &dyn crate::expr::Values))
        .is_err());
}

#[test]
fn latent_variables_drive_columns_but_stay_out_of_the_table() {
    let text = TWO_ARM
        .replace(
            "y = \"effect * arm + normal(0, 1)\"",
            "y = \"effect * arm + grit\"",
        )
        .replace(
            "arm = \"assigned(0.5)\"",
            "arm = \"assigned(0.5)\"\n[rehearsal.data.people.latent]\ngrit = \"normal(0, 1)\"",
        );
    let p = plan(&text);
    let t = simulated_tables(&p, 0, 0.0).expect("tables");
    assert!(!t["people"].numeric.contains_key("grit"));
    assert!(t["people"].numeric["y"].iter().all(|v| v.is_some()));
    // A latent variable may not reuse a declared column's name.
    let clash = TWO_ARM.replace(
        "arm = \"assigned(0.5)\"",
        "arm = \"assigned(0.5)\"\n[rehearsal.data.people.latent]\ny = \"normal(0, 1)\"",
    );
    let e = from_text(std::path::Path::new("/nonexistent/check.toml"), clash).expect_err("refused");
    assert!(
        e.to_string().contains("latent variable needs a new name"),
        "{e}"
    );
}

/// The MDE search against the closed form: for a two-sided test at level α with power 1 − β
/// and standard error se, MDE = (z₁₋α/₂ + z₁₋β)·se (Bloom 1995, Evaluation Review 19(5),
/// "Minimum detectable effects"; the normal approximation). Its Monte Carlo error is the power's
/// error at the target over the curve's slope there, φ(MDE/se − z₁₋α/₂)/se (delta method); the
/// search's stated tolerance comes on top.
fn check_mde_search(reps: usize) {
    let r = run(&plan(TWO_ARM), reps);
    let h = &r.hypotheses["H1"];
    let se = (2.0f64 / 100.0).sqrt();
    let closed = (z(0.975) + z(0.80)) * se;
    let s = h
        .mde_search
        .as_ref()
        .expect("the target is bracketed, so the MDE is searched");
    assert_eq!(s.steps, 4);
    assert!(
        s.low < s.high && s.high - s.low <= 0.1 / 16.0 + 1e-12,
        "{s:?}"
    );
    assert_eq!(s.points.len(), 4);
    let mde = h.mde.expect("mde");
    assert!(s.low <= mde && mde <= s.high, "{mde} outside {s:?}");
    let slope = Normal::standard().pdf(closed / se - z(0.975)) / se;
    let tol = 3.0 * mcse(0.8, reps) / slope + s.tolerance;
    assert!(
        (mde - closed).abs() <= tol,
        "searched MDE {mde} vs closed form {closed} (± {tol})"
    );
    // Without steps the MDE is the grid interpolation, and no search is reported.
    let grid = run(
        &plan(&TWO_ARM.replace("seed = 11", "seed = 11\nmde_steps = 0")),
        reps,
    );
    let g = &grid.hypotheses["H1"];
    assert!(g.mde_search.is_none());
    assert!(g.mde.is_some_and(|m| (0.3..=0.4).contains(&m)));
    assert!(grid.cautions.iter().any(|c| c.contains("interpolated")));
    assert!(r.cautions.iter().any(|c| c.contains("bisection")));
}

#[test]
fn the_mde_search_finds_the_closed_form_mde_of_a_two_arm_design() {
    check_mde_search(300);
}

#[test]
#[ignore = "slow: 4,000 replications per effect"]
fn the_mde_search_finds_the_closed_form_mde_of_a_two_arm_design_closely() {
    check_mde_search(4000);
}

/// Each message of `[rehearsal]`'s validation (`plan/validate/rehearsal.rs`) names its key
/// and says what is valid: the counts, the seed, the effects, each table's rows or baseline,
/// the columns the analysis needs and the tables that exist.
#[test]
fn rehearsal_messages_name_their_key_and_the_fix() {
    let cases = [
        (
            "replications = 300",
            "replications = 0",
            "rehearsal.replications",
            "from 1 to 1000000",
        ),
        (
            "seed = 11",
            "seed = 11\nresampling_draws = 10",
            "rehearsal.resampling_draws",
            "from 99 to 10000000",
        ),
        (
            "seed = 11",
            "seed = 11\nmde_steps = 21",
            "rehearsal.mde_steps",
            "from 0 (interpolate",
        ),
        (
            "arm = \"assigned(0.5)\"",
            "arm = \"assigned(0.5)\"\nmood = \"normal(0, 1)\"",
            "rehearsal.data.people.columns.mood",
            "is not a declared column of [data.people]",
        ),
        ("seed = 11", "seed = -1", "rehearsal.seed", "at least 0"),
        (
            "effects = [0.2, 0.3, 0.4]",
            "effects = []",
            "rehearsal.effects",
            "list at least one effect size to simulate",
        ),
        (
            "effects = [0.2, 0.3, 0.4]",
            "effects = [0.0]",
            "rehearsal.effects",
            "at least one effect size above 0",
        ),
        (
            "effects = [0.2, 0.3, 0.4]",
            "effects = [0.3, 0.2]",
            "rehearsal.effects",
            "effects must increase from left to right; 0.2 follows 0.3",
        ),
        (
            "rows = 200",
            "rows = 1",
            "rehearsal.data.people.rows",
            "from 2 to 10000000",
        ),
        (
            "rows = 200",
            "rows = 200\nbaseline = \"b.csv\"",
            "rehearsal.data.people.rows",
            "rows cannot be given with baseline",
        ),
        (
            "rows = 200",
            "baseline = \" \"",
            "rehearsal.data.people.baseline",
            "baseline is empty",
        ),
        (
            "rows = 200\n",
            "",
            "rehearsal.data.people",
            "say how many rows to simulate",
        ),
        (
            "y = \"effect * arm + normal(0, 1)\"\n",
            "",
            "rehearsal.data.people.columns",
            "the analysis uses column `y` of [data.people]",
        ),
        (
            "[rehearsal.data.people]\nrows = 200",
            "[rehearsal.data.people]\nrows = 200\n[rehearsal.data.others]\nrows = 5\n[rehearsal.data.others.columns]\nq = \"normal(0, 1)\"",
            "rehearsal.data.others",
            "there is no data table `others` to simulate",
        ),
    ];
    for (anchor, with, key, says) in cases {
        assert!(
            TWO_ARM.contains(anchor),
            "anchor `{anchor}` is not in the plan"
        );
        let text = TWO_ARM.replacen(anchor, with, 1);
        let e = from_text(std::path::Path::new("/nonexistent/check.toml"), text)
            .expect_err("refused")
            .to_string();
        assert!(
            e.contains(&format!("`{key}`")) && e.contains(says),
            "{key}: {e}"
        );
    }
}
