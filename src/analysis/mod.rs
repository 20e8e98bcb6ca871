//! Running a plan: load data, assess integrity, fit every specification, test every
//! hypothesis and assemble the results model, all in memory.
//!
//! Nothing here renders a report or writes files or the ledger: `app` renders the reports
//! from the results (`app::execute`) and sequences the writing, so `verify` can re-derive a
//! run's outputs byte for byte with the same functions. The layer depends on no report, app
//! or demo module.

mod ar_curve;
mod arms;
mod assignment;
mod contingency;
mod degenerate;
mod hac;
mod hypotheses;
mod integrity;
mod progress;
mod registered;
mod rehearsals;
mod resampled;
mod spec;
mod summaries;

use crate::data::{load_table, Table};
use crate::deviation::{self, Deviation, DeviationCode};
use crate::error::Result;
use crate::ledger::{Ledger, PlanPrint, TOOL_VERSION};
use crate::plan::Plan;
use crate::results::{
    AsRegistered, DataInfo, HypothesisResult, PlanInfo, Results, SpecResult, Tool,
};
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::path::{Component, Path, PathBuf};

pub use spec::term;

/// A run computed in memory: the results model and the plan's fingerprints, not yet rendered
/// or written (`app` renders the reports and writes the run directory).
pub struct Executed {
    /// The results model, digest included.
    pub results: Results,
    /// The plan's fingerprints as used for this run.
    pub print: PlanPrint,
}

/// Read every declared data table (schema deviations included).
pub fn load_tables(plan: &Plan) -> Result<(BTreeMap<String, Table>, Vec<Deviation>)> {
    let mut tables = BTreeMap::new();
    let mut devs = Vec::new();
    for src in plan.data.values() {
        let (t, d) = load_table(plan, src)?;
        tables.insert(src.id.clone(), t);
        devs.extend(d);
    }
    devs.extend(assignment::check(plan, &tables));
    Ok((tables, devs))
}

/// The path of `to` relative to the directory `from` (both absolute).
pub fn relative_path(from: &Path, to: &Path) -> PathBuf {
    let a: Vec<Component> = from.components().collect();
    let b: Vec<Component> = to.components().collect();
    let common = a.iter().zip(&b).take_while(|(x, y)| x == y).count();
    let mut out = PathBuf::new();
    for _ in common..a.len() {
        out.push("..");
    }
    for c in &b[common..] {
        out.push(c.as_os_str());
    }
    out
}

/// Run `plan` against its data, judging integrity by `ledger` as it stood before this run.
/// `source` is the path of the plan file the run read, relative to the run directory (the
/// directory holds its own copy of the plan; `source` says where the data paths start from).
pub fn execute(
    plan: &Plan,
    ledger: &Ledger,
    source: &str,
    tables: &BTreeMap<String, Table>,
    schema_devs: Vec<Deviation>,
) -> Result<Executed> {
    let print = PlanPrint::of(&plan.path, &plan.text)?;
    let hashes: BTreeMap<String, String> = tables
        .iter()
        .map(|(id, t)| (id.clone(), t.sha256.clone()))
        .collect();
    let mut integrity = integrity::assess(ledger, &print, &hashes);
    let mut devs = std::mem::take(&mut integrity.deviations);
    devs.extend(schema_devs);
    let a = analyse(
        plan,
        tables,
        integrity.registered_specs.as_ref(),
        integrity.registered_hypotheses.as_ref(),
        true,
    )?;
    devs.extend(a.deviations);
    let specifications: BTreeMap<_, _> = a.fitted.into_iter().map(|(k, f)| (k, f.result)).collect();
    let mut hypotheses = a.hypotheses;
    let as_registered = beside_registered(
        plan,
        &integrity,
        &specifications,
        &mut hypotheses,
        &mut devs,
    );
    deviation::sort(&mut devs);
    let mut results = Results {
        format: 1,
        tool: Tool {
            name: "sworn",
            version: TOOL_VERSION,
        },
        plan: plan_info(&print, source, &mut integrity),
        data: data_info(plan, tables),
        specifications,
        hypotheses,
        contingencies: a.contingencies,
        indices: summaries::indices(plan, tables),
        balance: summaries::balance(plan, tables)?,
        attrition: summaries::attrition(plan, tables)?,
        deviations: devs,
        registration: integrity.registration,
        as_registered,
        rehearsals: rehearsals::cite(ledger),
        digest: String::new(),
    };
    results.digest = results.compute_digest();
    Ok(Executed { results, print })
}

/// What results.json records of the plan: its copy in the run directory, where the run read
/// it, its fingerprints and its integrity state (the ledger head is taken from `integrity`).
fn plan_info(print: &PlanPrint, source: &str, integrity: &mut integrity::Integrity) -> PlanInfo {
    PlanInfo {
        path: crate::layout::PLAN_FILE.to_string(),
        source: source.to_string(),
        bytes_sha256: print.bytes_sha256.clone(),
        content_sha256: print.content_sha256.clone(),
        sealed: integrity.sealed,
        ledger_head: integrity.ledger_head.take(),
        integrity: integrity.state,
    }
}

/// Each declared table's path, SHA-256 and row count, by table id.
fn data_info(plan: &Plan, tables: &BTreeMap<String, Table>) -> BTreeMap<String, DataInfo> {
    plan.data
        .values()
        .map(|d| {
            (
                d.id.clone(),
                DataInfo {
                    path: d.path_text.clone(),
                    sha256: tables[&d.id].sha256.clone(),
                    rows: tables[&d.id].rows,
                },
            )
        })
        .collect()
}

/// For a plan amended after the data were seen, run its registered version beside it: the
/// registered hypotheses replace the amended ones (which stay attached as `as_amended`), and
/// the registered specifications that differ are kept for the report. When the registered
/// version cannot be run, or there is none to run, the hypotheses are marked as they stand
/// and a failure is disclosed as a deviation.
fn beside_registered(
    plan: &Plan,
    integrity: &integrity::Integrity,
    specifications: &BTreeMap<String, SpecResult>,
    hypotheses: &mut BTreeMap<String, HypothesisResult>,
    devs: &mut Vec<Deviation>,
) -> Option<AsRegistered> {
    let registered_hypotheses = integrity.registered_hypotheses.as_ref();
    let (Some(canonical), Some(point)) = (&integrity.registered_text, &integrity.registration)
    else {
        registered::mark(
            hypotheses,
            integrity.registration.is_some(),
            registered_hypotheses,
        );
        return None;
    };
    let mut rerun = registered::rerun(plan, canonical, &point.content_sha256);
    rerun.keep_differing(specifications);
    match rerun.hypotheses.take() {
        Some(reg) => *hypotheses = registered::merge(reg, std::mem::take(hypotheses)),
        None => {
            registered::mark(hypotheses, true, registered_hypotheses);
            devs.push(Deviation::new(
                DeviationCode::RegisteredVersionFailed,
                "plan",
                format!(
                    "the plan was amended after the data were seen, and its registered version (ledger line {}) could not be run beside it: {}; only the amended analysis is reported",
                    point.ledger_line,
                    rerun.report.error.as_deref().unwrap_or("unknown reason")
                ),
            ));
        }
    }
    Some(rerun.report)
}

/// Set while a caller that draws its own progress (a rehearsal) runs [`analyse`] many times.
static QUIET: std::sync::atomic::AtomicBool = std::sync::atomic::AtomicBool::new(false);

/// Run `f` with [`analyse`]'s resampling progress line switched off.
pub fn quietly<T>(f: impl FnOnce() -> T) -> T {
    QUIET.store(true, std::sync::atomic::Ordering::Relaxed);
    let out = f();
    QUIET.store(false, std::sync::atomic::Ordering::Relaxed);
    out
}

/// What [`analyse`] computes: every specification, decision rule and hypothesis of a plan.
pub(crate) struct Analysed {
    /// Fitted specifications by id.
    pub fitted: BTreeMap<String, spec::Fitted>,
    /// Decision rules as evaluated.
    pub contingencies: Vec<crate::results::ContingencyResult>,
    /// Hypotheses by id.
    pub hypotheses: BTreeMap<String, crate::results::HypothesisResult>,
    /// Deviations found while fitting and testing (not integrity or schema findings).
    pub deviations: Vec<Deviation>,
}

/// Fit every specification, evaluate the decision rules and test every hypothesis of `plan`
/// on `tables`. `registered_specs` / `registered_hypotheses` are the ids registered before the
/// data were first read (None: no restriction known); the others are disclosed as added.
/// `intervals`: invert randomization tests into intervals (a run; not a rehearsal).
/// No I/O; the same call serves a run, its verification and a rehearsal.
pub(crate) fn analyse(
    plan: &Plan,
    tables: &BTreeMap<String, Table>,
    registered_specs: Option<&std::collections::BTreeSet<String>>,
    registered_hypotheses: Option<&std::collections::BTreeSet<String>>,
    intervals: bool,
) -> Result<Analysed> {
    let mut devs = Vec::new();
    let mut fitted = BTreeMap::new();
    let needs = contingency::needs(plan);
    let resampling = needs.values().any(|n| !n.resample.is_empty());
    let _progress = (resampling
        && !QUIET.load(std::sync::atomic::Ordering::Relaxed)
        && std::io::IsTerminal::is_terminal(&std::io::stderr()))
    .then(progress::Progress::start);
    let none = spec::Needs::default();
    // Specifications are independent: fit them on all cores, then take the results (and the
    // first error) in plan order, so the output does not depend on which finished first.
    // Those that factorise the same outcome-free matrices share the factorisations (module
    // `estimate::shared`; the same bits as fitting each alone).
    let sharing = crate::estimate::Sharing::begin();
    let instrumental: Vec<bool> = plan
        .specifications
        .iter()
        .map(|s| s.estimator.is_iv())
        .collect();
    let order = fitting_order(&instrumental);
    // The second instrumental specification to start, and every other one after it,
    // computes its endogeneity diagnostics before its first stages: two threads starting
    // instrumental specifications of one sample then compute different shared pieces
    // (spec::DiagnosticOrder; the results do not depend on it).
    let iv_started = std::sync::atomic::AtomicUsize::new(0);
    let mut fits: Vec<(usize, Result<spec::Fitted>)> = order
        .par_iter()
        .map(|&at| {
            let s = &plan.specifications[at];
            let diagnostic_order = if instrumental[at]
                && iv_started.fetch_add(1, std::sync::atomic::Ordering::Relaxed) % 2 == 1
            {
                spec::DiagnosticOrder::EndogeneityFirst
            } else {
                spec::DiagnosticOrder::FirstStageFirst
            };
            let source = &plan.data[&s.data];
            let need = needs.get(&s.id).unwrap_or(&none);
            let rc = spec::ResampleContext {
                assignment: plan.assignment.as_ref(),
                resampling: plan.resampling,
                alpha: plan.inference.alpha,
                intervals,
            };
            (
                at,
                spec::fit_spec(s, &tables[&s.data], source, need, &rc, diagnostic_order),
            )
        })
        .collect();
    drop(sharing);
    fits.sort_by_key(|(at, _)| *at);
    let fits = fits.into_iter().map(|(_, f)| f);
    for (s, f) in plan.specifications.iter().zip(fits) {
        let mut f = f?;
        spec_deviations(plan, s, &mut f, registered_specs, &mut devs);
        fitted.insert(s.id.clone(), f);
    }
    let (contingencies, subs) = contingency::evaluate(plan, &fitted);
    let hypotheses = hypotheses::test_all(plan, &fitted, &subs, registered_hypotheses);
    for (id, h) in &hypotheses {
        if registered_hypotheses.is_some_and(|r| !r.contains(id)) {
            devs.push(Deviation::new(DeviationCode::HypothesisAddedAfterData, id.clone(), format!("this hypothesis was added by an amendment after the data were first read: it is not pre-registered and is corrected apart from the registered members of its family{}", h.family.as_deref().map_or(String::new(), |f| format!(" `{f}`")))));
        }
    }
    Ok(Analysed {
        fitted,
        contingencies,
        hypotheses,
        deviations: devs,
    })
}

/// The order in which the specifications are handed to the threads: the instrumental ones
/// first, then the others, each group in plan order. rayon gives each thread a contiguous
/// half of the list, so the two threads start on work that shares fewer factorisations and
/// wait less for each other. Results are taken back in plan order; the bits do not depend on
/// the order (shared results are the same bits as computing them alone).
fn fitting_order(instrumental: &[bool]) -> Vec<usize> {
    let (mut first, rest): (Vec<usize>, Vec<usize>) =
        (0..instrumental.len()).partition(|&i| instrumental[i]);
    first.extend(rest);
    first
}

fn spec_deviations(
    plan: &Plan,
    s: &crate::plan::Spec,
    f: &mut spec::Fitted,
    registered: Option<&std::collections::BTreeSet<String>>,
    devs: &mut Vec<Deviation>,
) {
    devs.append(&mut f.deviations);
    if s.exploratory {
        devs.push(Deviation::new(
            DeviationCode::Exploratory,
            s.id.clone(),
            "marked exploratory in the plan: reported apart, not pre-registered",
        ));
    }
    if registered.is_some_and(|r| !r.contains(&s.id)) {
        f.result.pre_registered = false;
        devs.push(Deviation::new(DeviationCode::AddedAfterData, s.id.clone(), "this specification was added by an amendment after the data were first read: it is not pre-registered"));
    }
    let sample = &f.result.sample;
    let share = if sample.in_sample == 0 {
        0.0
    } else {
        sample.dropped_missing as f64 / sample.in_sample as f64
    };
    if let Some(max) = plan.data[&s.data].max_missing_share {
        if share > max {
            devs.push(Deviation::new(DeviationCode::MissingShare, s.id.clone(), format!(
                "listwise deletion dropped {} of {} sample rows ({:.1}%), above the declared max_missing_share of {:.1}%",
                sample.dropped_missing, sample.in_sample, 100.0 * share, 100.0 * max
            )));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn instrumental_specifications_are_handed_out_first_in_plan_order() {
        assert_eq!(
            fitting_order(&[false, true, false, true, true]),
            vec![1, 3, 4, 0, 2]
        );
        assert_eq!(fitting_order(&[false, false]), vec![0, 1]);
        assert!(fitting_order(&[]).is_empty());
    }

    /// The diagnostics of every instrumental specification of the demo plan computed in
    /// either order give the same result, to the bit (the order only decides which shared
    /// pieces a thread computes first).
    #[test]
    fn the_diagnostic_order_does_not_change_a_result() {
        let mut compared = 0;
        for name in ["cool-roofs", "grid-demand"] {
            let path = Path::new(env!("CARGO_MANIFEST_DIR")).join(format!("plans/{name}.toml"));
            let plan = crate::plan::load(&path).expect("demo plan");
            let (tables, _) = load_tables(&plan).expect("demo data");
            let needs = contingency::needs(&plan);
            let none = spec::Needs::default();
            let rc = spec::ResampleContext {
                assignment: plan.assignment.as_ref(),
                resampling: plan.resampling,
                alpha: plan.inference.alpha,
                intervals: false,
            };
            for s in plan.specifications.iter().filter(|s| s.estimator.is_iv()) {
                let need = needs.get(&s.id).unwrap_or(&none);
                let fit = |order| {
                    let fitted =
                        spec::fit_spec(s, &tables[&s.data], &plan.data[&s.data], need, &rc, order)
                            .expect("fit");
                    serde_json::to_string(&fitted.result).expect("json")
                };
                let (first, second) = (
                    spec::DiagnosticOrder::FirstStageFirst,
                    spec::DiagnosticOrder::EndogeneityFirst,
                );
                // Each order apart (neither finds the other's shared results), then each
                // after the other in one sharing session (the second reuses what the first
                // built, as a thread does in a run).
                let [a, b] = [first, second].map(|order| {
                    let _sharing = crate::estimate::Sharing::begin();
                    fit(order)
                });
                assert_eq!(a, b, "{name}: {}", s.id);
                for (one, other) in [(first, second), (second, first)] {
                    let _sharing = crate::estimate::Sharing::begin();
                    assert_eq!(fit(one), a, "{name}: {} {one:?} first", s.id);
                    assert_eq!(fit(other), a, "{name}: {} {other:?} after", s.id);
                }
                compared +=
                    usize::from(a.contains("\"endogeneity\":{") && a.contains("\"first_stage\":{"));
            }
        }
        assert!(
            compared >= 2,
            "{compared} instrumental specifications with first stages and endogeneity tests"
        );
    }

    #[test]
    fn relative_paths() {
        assert_eq!(
            relative_path(Path::new("/a/b/out/x"), Path::new("/a/b/plans/p.toml")),
            PathBuf::from("../../plans/p.toml")
        );
        assert_eq!(
            relative_path(Path::new("/a"), Path::new("/a/p.toml")),
            PathBuf::from("p.toml")
        );
    }
}
