//! Data checks of the declared assignment that need no fitted model, run when the tables are
//! loaded, so that `sworn check --data` finds what `sworn run` would stop on.
//!
//! In a cluster-randomised design the treatment is assigned to whole clusters: it must be
//! constant within each cluster; with blocks too, each cluster lies in one block. A breach in
//! the rows of a table is a deviation naming the cluster by its label (a specification whose
//! sample holds the breach cannot be randomization-tested and stops the run).

use crate::data::Table;
use crate::deviation::{Deviation, DeviationCode};
use crate::plan::Plan;
use std::collections::BTreeMap;

fn shown(label: &str) -> String {
    crate::escape::clip(label, crate::escape::SHOWN)
}

/// The first label of `within` whose rows hold two different labels of `of`.
fn first_varying(t: &Table, within: &str, of: &str) -> Option<(String, String, String)> {
    let (groups, values) = (t.labels.get(within)?, t.labels.get(of)?);
    let mut seen: BTreeMap<&str, &str> = BTreeMap::new();
    for (g, v) in groups.iter().zip(values) {
        let (Some(g), Some(v)) = (g.as_deref(), v.as_deref()) else {
            continue;
        };
        match seen.get(g) {
            Some(first) if *first != v => return Some((shown(g), shown(first), shown(v))),
            Some(_) => {}
            None => {
                seen.insert(g, v);
            }
        }
    }
    None
}

/// Deviations for assignment columns that break the declared cluster design.
pub fn check(plan: &Plan, tables: &BTreeMap<String, Table>) -> Vec<Deviation> {
    let Some(a) = &plan.assignment else {
        return Vec::new();
    };
    let Some(c) = &a.clusters else {
        return Vec::new();
    };
    let mut devs = Vec::new();
    for t in tables.values() {
        if let Some((g, x, y)) = first_varying(t, c, &a.variable) {
            devs.push(Deviation::new(
                DeviationCode::AssignmentVariesInCluster,
                format!("{}.{}", t.id, a.variable),
                format!(
                    "the assignment is declared clustered by `{c}`, but `{}` takes both {x} and {y} within cluster `{g}`; check the data or the [assignment] clusters column (randomization inference on rows holding this cluster will stop)",
                    a.variable
                ),
            ));
        }
        if let Some(b) = &a.blocks {
            if let Some((g, x, y)) = first_varying(t, c, b) {
                devs.push(Deviation::new(
                    DeviationCode::AssignmentClusterSpansBlocks,
                    format!("{}.{c}", t.id),
                    format!(
                        "cluster `{g}` of `{c}` lies in blocks {x} and {y} of `{b}`; in a blocked cluster design each cluster lies in one block"
                    ),
                ));
            }
        }
    }
    devs
}
