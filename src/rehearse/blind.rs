//! A blinded run: the registered analysis on the real data with the assignment re-drawn by
//! the registered `[assignment]` design, so no true effect of the assignment can show, and a
//! model that holds only what ran (shapes, counts, which rules fired), never an estimate,
//! statistic, p-value or verdict.
//!
//! The re-draw permutes the observed assignment values of the randomization units (whole
//! clusters, or rows) within each block by Fisher–Yates (Durstenfeld 1964, CACM 7), as a
//! randomization test's draw does: arm sizes per block are kept, and the new assignment is
//! independent of every outcome. Rows missing the assignment, its block or its cluster keep
//! their value and are counted. Derived variables and indices are recomputed from the
//! re-drawn column. Deterministic from the seed (each table has its own stream).
//!
//! Invariant: nothing here reads a file or writes anything; [`Blinded`] carries no number
//! computed from an outcome.

use super::rng::Stream;
use crate::data::Table;
use crate::error::{Error, Result};
use crate::plan::{Assignment, Plan};
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};

/// What a blinded run shows: counts and which rules fired, estimates masked.
#[derive(Debug, Clone, Serialize)]
pub struct Blinded {
    /// The seed of the re-draw.
    pub seed: u64,
    /// The re-drawn assignment variable.
    pub assignment: String,
    /// Per table holding it: what was re-drawn.
    pub tables: BTreeMap<String, Redrawn>,
    /// Per specification: observations used (null when it failed) and why it failed.
    pub specifications: BTreeMap<String, BlindSpec>,
    /// Per hypothesis: `tested` (a test ran; its result is masked) or `not-tested`.
    pub hypotheses: BTreeMap<String, BlindTest>,
    /// Per decision rule: whether it fired on the re-drawn data.
    pub rules: BTreeMap<String, bool>,
    /// Codes of the deviations the analysis found (messages, which may quote numbers, are
    /// left out).
    pub deviation_codes: Vec<String>,
    /// Why the analysis stopped, when it did (the first error, with its place).
    pub error: Option<String>,
    /// What the run shows and what it does not.
    pub cautions: Vec<&'static str>,
}

/// Whether a blinded run tested a hypothesis (its result is masked either way).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum BlindTest {
    /// A test ran (it gave an estimate or a p-value); its result is masked.
    Tested,
    /// No test result.
    NotTested,
}

/// The re-draw in one table.
#[derive(Debug, Clone, Serialize)]
pub struct Redrawn {
    /// Rows in the table.
    pub rows: usize,
    /// Randomization units re-drawn (clusters, or rows).
    pub units: usize,
    /// Blocks (1 without blocks).
    pub blocks: usize,
    /// Rows that kept their value (missing assignment, block or cluster).
    pub kept: usize,
}

/// One specification in a blinded run.
#[derive(Debug, Clone, Serialize)]
pub struct BlindSpec {
    /// Observations used (null when the specification failed).
    pub used: Option<usize>,
    /// Clusters, when errors are clustered.
    pub clusters: Option<usize>,
}

const CAUTIONS: [&str; 3] = [
    "The assignment was re-drawn by the registered design, so any effect of the real assignment is gone; relationships that do not involve the assignment are still the real data's, which is why no estimate, statistic, p-value or verdict is shown.",
    "A blinded run shows that the registered analysis runs end to end on the real data; it is not a result, and a pipeline that runs is not a valid design.",
    "The ledger records it as the data inspected: a later amendment is disclosed as made after the data were seen; results are computed only by `sworn run`.",
];

/// The seed a blinded run re-draws with: the rehearsal's, else the resampling's, else 0.
pub fn seed(plan: &Plan) -> u64 {
    plan.rehearsal
        .as_ref()
        .map(|r| r.seed)
        .or(plan.resampling.map(|r| r.seed))
        .unwrap_or(0)
}

fn label<'a>(t: &'a Table, column: &str, row: usize) -> Option<&'a str> {
    t.labels.get(column)?.get(row)?.as_deref()
}

/// The assignment column of `t` re-drawn within blocks at the unit of randomization.
fn redraw_column(t: &Table, a: &Assignment, stream: &mut Stream) -> (Vec<Option<f64>>, Redrawn) {
    let old = &t.numeric[&a.variable];
    let mut unit_of_row = vec![None; t.rows];
    let mut units: Vec<f64> = Vec::new();
    let mut strata: BTreeMap<&str, Vec<usize>> = BTreeMap::new();
    let mut cluster_unit: HashMap<&str, usize> = HashMap::new();
    for (r, v) in old.iter().enumerate() {
        let Some(v) = v else { continue };
        let block = match &a.blocks {
            Some(b) => match label(t, b, r) {
                Some(l) => l,
                None => continue,
            },
            None => "",
        };
        let unit = match &a.clusters {
            Some(c) => {
                let Some(l) = label(t, c, r) else { continue };
                *cluster_unit.entry(l).or_insert_with(|| {
                    units.push(v);
                    strata.entry(block).or_default().push(units.len() - 1);
                    units.len() - 1
                })
            }
            None => {
                units.push(v);
                strata.entry(block).or_default().push(units.len() - 1);
                units.len() - 1
            }
        };
        unit_of_row[r] = Some(unit);
    }
    let mut drawn = units.clone();
    for members in strata.values() {
        let mut vals: Vec<f64> = members.iter().map(|&u| units[u]).collect();
        for i in (1..vals.len()).rev() {
            let j = stream.below(i as u64 + 1) as usize;
            vals.swap(i, j);
        }
        for (&u, v) in members.iter().zip(vals) {
            drawn[u] = v;
        }
    }
    let values = old
        .iter()
        .zip(&unit_of_row)
        .map(|(v, u)| u.map_or(v, |u| Some(drawn[u])))
        .collect();
    let kept = unit_of_row.iter().filter(|u| u.is_none()).count();
    (
        values,
        Redrawn {
            rows: t.rows,
            units: units.len(),
            blocks: strata.len(),
            kept,
        },
    )
}

/// `tables` with the assignment re-drawn in every table that holds it.
///
/// # Errors
/// The plan has no `[assignment]`, no table holds the variable, or recomputing a derived
/// variable fails.
pub fn redraw(
    plan: &Plan,
    tables: &BTreeMap<String, Table>,
    seed: u64,
) -> Result<(BTreeMap<String, Table>, BTreeMap<String, Redrawn>)> {
    let Some(a) = &plan.assignment else {
        return Err(Error::Plan {
            path: plan.path.clone(),
            line: 1,
            column: 1,
            key: "assignment".into(),
            message: "a blinded run re-draws the assignment by the registered design, and the plan has no [assignment] section: declare `variable` (and `blocks`, `clusters` when the design has them; docs/plan-reference.md)".into(),
        });
    };
    let mut out = BTreeMap::new();
    let mut drawn = BTreeMap::new();
    for (i, (id, t)) in tables.iter().enumerate() {
        if !t.numeric.contains_key(&a.variable) {
            out.insert(id.clone(), t.clone());
            continue;
        }
        let mut stream = Stream::new(seed, u64::MAX - i as u64);
        let (values, info) = redraw_column(t, a, &mut stream);
        let src = &plan.data[id];
        out.insert(
            id.clone(),
            crate::data::with_column(plan, src, t, &a.variable, values)?,
        );
        drawn.insert(id.clone(), info);
    }
    if drawn.is_empty() {
        return Err(Error::Plan {
            path: plan.path.clone(),
            line: 1,
            column: 1,
            key: "assignment.variable".into(),
            message: format!(
                "no data table has a numeric column `{}` to re-draw: declare it in a [data] table's columns",
                a.variable
            ),
        });
    }
    Ok((out, drawn))
}

/// Run the registered analysis on `tables` with the assignment re-drawn, keeping only what
/// cannot reveal an estimate.
///
/// # Errors
/// As [`redraw`]. An analysis that stops is reported in [`Blinded::error`], not as an error.
pub fn blinded(plan: &Plan, tables: &BTreeMap<String, Table>, seed: u64) -> Result<Blinded> {
    let (redrawn, info) = redraw(plan, tables, seed)?;
    let mut b = Blinded {
        seed,
        assignment: plan
            .assignment
            .as_ref()
            .map_or(String::new(), |a| a.variable.clone()),
        tables: info,
        specifications: BTreeMap::new(),
        hypotheses: BTreeMap::new(),
        rules: BTreeMap::new(),
        deviation_codes: Vec::new(),
        error: None,
        cautions: CAUTIONS.to_vec(),
    };
    match crate::analysis::analyse(plan, &redrawn, None, None, false) {
        Ok(a) => {
            for (id, f) in &a.fitted {
                let spec = BlindSpec {
                    used: Some(f.result.n),
                    clusters: f.result.clusters,
                };
                b.specifications.insert(id.clone(), spec);
            }
            for (id, h) in &a.hypotheses {
                let tested = if h.p_value.is_some() || h.estimate.is_some() {
                    BlindTest::Tested
                } else {
                    BlindTest::NotTested
                };
                b.hypotheses.insert(id.clone(), tested);
            }
            for c in &a.contingencies {
                b.rules.insert(c.id.clone(), c.invoked);
            }
            let mut codes: Vec<String> = a
                .deviations
                .iter()
                .map(|d| d.code.as_str().to_string())
                .collect();
            codes.sort();
            codes.dedup();
            b.deviation_codes = codes;
        }
        Err(e) => b.error = Some(e.to_string()),
    }
    Ok(b)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::Labels;

    /// The JSON spelling of a blinded test is the one `sworn rehearse --blind --json` has
    /// always printed.
    #[test]
    fn blinded_tests_keep_their_json_spelling() {
        let json = |t: BlindTest| serde_json::to_string(&t).expect("json");
        assert_eq!(json(BlindTest::Tested), "\"tested\"");
        assert_eq!(json(BlindTest::NotTested), "\"not-tested\"");
    }

    /// 4 blocks × 5 clusters × 3 rows; in each block 2 clusters treated; one row has no block.
    fn table() -> Table {
        let rows = 60;
        let block = |r: usize| format!("b{}", r / 15);
        let cluster = |r: usize| format!("c{}", r / 3);
        let treated = |r: usize| f64::from(u8::from((r / 3) % 5 < 2));
        let mut blocks: Vec<Option<String>> = (0..rows).map(|r| Some(block(r))).collect();
        blocks[59] = None;
        let mut t = Table {
            id: "t".into(),
            path: "t.csv".into(),
            sha256: String::new(),
            rows,
            numeric: BTreeMap::new(),
            labels: BTreeMap::new(),
            shared: Default::default(),
        };
        t.numeric
            .insert("a".into(), (0..rows).map(|r| Some(treated(r))).collect());
        t.labels
            .insert("blk".into(), Labels::from_text(blocks).expect("labels"));
        t.labels.insert(
            "cl".into(),
            Labels::from_text((0..rows).map(|r| Some(cluster(r))).collect()).expect("labels"),
        );
        t
    }

    #[test]
    fn a_redraw_keeps_arm_sizes_per_block_and_clusters_whole_and_depends_only_on_the_seed() {
        let t = table();
        let a = Assignment {
            variable: "a".into(),
            design: "blocked-clustered".into(),
            blocks: Some("blk".into()),
            clusters: Some("cl".into()),
        };
        let draw = |seed| redraw_column(&t, &a, &mut Stream::new(seed, 0));
        let (v, info) = draw(1);
        assert_eq!((info.units, info.blocks, info.kept), (20, 4, 1));
        // The row without a block keeps its value.
        assert_eq!(v[59], t.numeric["a"].get(59));
        for b in 0..4 {
            let treated: f64 = (b * 15..b * 15 + 15).map(|r| v[r].unwrap_or(0.0)).sum();
            assert_eq!(treated, 6.0, "block {b}: 2 of 5 clusters of 3 rows");
        }
        for c in 0..19 {
            assert!(v[3 * c] == v[3 * c + 1] && v[3 * c + 1] == v[3 * c + 2]);
        }
        assert_eq!(draw(1).0, v, "same seed, same draw");
        let moved = (2..40).any(|s| draw(s).0 != v);
        assert!(moved, "other seeds give other assignments");
    }
}
