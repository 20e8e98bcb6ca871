//! Baseline files of a rehearsal (`[rehearsal.data.NAME] baseline`): read once, before any
//! replication, and checked against the data-generating process.
//!
//! Invariants: a baseline is never a file the plan declares as study data, nor a file whose
//! hash the ledger records as study data (so a rehearsal never reads the study's data); no name is both a baseline column and a simulated one;
//! every name an expression uses and every column the analysis needs is either simulated
//! or a column of the file.

use crate::data::{read_baseline, BaselineColumns};
use crate::error::{Error, Result};
use crate::plan::{BaselineFile, DataSource, Generator, Plan};
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};

/// A baseline file as read, per table id.
#[derive(Debug, Clone)]
pub(crate) struct Loaded {
    /// The file as recorded.
    pub record: BaselineRecord,
    /// Its columns (those the rehearsal uses or the table declares).
    pub columns: BaselineColumns,
}

/// What rehearsal.json and the ledger record of a baseline file.
#[derive(Debug, Clone, Serialize)]
pub struct BaselineRecord {
    /// The path as written in the plan (relative to the plan file).
    pub path: String,
    /// SHA-256 of the file's bytes.
    pub sha256: String,
    /// Rows of the file (the rows of every simulated table).
    pub rows: usize,
}

fn at(plan: &Plan, table: &str, place: (usize, usize), key: &str, message: String) -> Error {
    Error::Plan {
        path: plan.path.clone(),
        line: place.0,
        column: place.1,
        key: format!("rehearsal.data.{table}.{key}"),
        message,
    }
}

/// Read every baseline file the plan's rehearsal names.
///
/// # Errors
/// A file is missing, is a study data file, cannot be read, or does not fit the
/// data-generating process (a name clash, a name used but neither simulated nor in the file).
pub(crate) fn load(plan: &Plan) -> Result<BTreeMap<String, Loaded>> {
    let mut out = BTreeMap::new();
    let Some(reh) = &plan.rehearsal else {
        return Ok(out);
    };
    for (id, g) in &reh.generators {
        if let Some(b) = &g.baseline {
            out.insert(id.clone(), one(plan, id, g, b)?);
        }
    }
    Ok(out)
}

/// Read table `table`'s baseline file `b` and check it against the generator `g`.
fn one(plan: &Plan, table: &str, g: &Generator, b: &BaselineFile) -> Result<Loaded> {
    let src = &plan.data[table];
    refuse_missing_or_study_file(plan, table, b)?;
    let simulated: BTreeSet<&str> = g.columns.iter().map(|c| c.name.as_str()).collect();
    let columns = read_baseline(src, &b.path, &wanted(src, g, &simulated))?;
    refuse_ledger_copy(plan, table, b, &columns.sha256)?;
    refuse_clash(plan, table, g, b, &columns)?;
    refuse_unknown_names(plan, table, g, b, &columns, &simulated)?;
    let needed = crate::plan::needed_columns(plan, src);
    if let Some(n) = needed
        .iter()
        .find(|n| !simulated.contains(n.as_str()) && !columns.columns.contains_key(n.as_str()))
    {
        return Err(at(plan, table, b.place, "baseline", format!(
            "the analysis uses column `{n}` of [data.{table}], which is neither in the baseline file nor simulated; add `{n} = \"...\"` under [rehearsal.data.{table}.columns]"
        )));
    }
    if columns.rows < 2 {
        return Err(at(
            plan,
            table,
            b.place,
            "baseline",
            format!(
                "the baseline file has {} row; a rehearsal needs at least 2",
                columns.rows
            ),
        ));
    }
    Ok(Loaded {
        record: BaselineRecord {
            path: b.text.clone(),
            sha256: columns.sha256.clone(),
            rows: columns.rows,
        },
        columns,
    })
}

/// A baseline file must exist and must not be one of the plan's study data files.
fn refuse_missing_or_study_file(plan: &Plan, table: &str, b: &BaselineFile) -> Result<()> {
    if !b.path.is_file() {
        return Err(at(plan, table, b.place, "baseline", format!(
            "the baseline file \"{}\" does not exist (paths are relative to the plan file); correct the path, or simulate the table with rows = N instead",
            crate::escape::clip(&b.text, crate::escape::SHOWN)
        )));
    }
    let same = |p: &std::path::Path| match (p.canonicalize(), b.path.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    };
    if let Some(d) = plan.data.values().find(|d| same(&d.path)) {
        return Err(at(plan, table, b.place, "baseline", format!(
            "the baseline file is the study's data file of [data.{}]; a rehearsal never reads the study's data (that would be a look at the data before registration). Name a baseline survey file, or use `sworn rehearse --blind` on the real data",
            d.id
        )));
    }
    Ok(())
}

/// The columns to read from the file: the table's declared columns that are not simulated,
/// and every name an expression uses that is neither simulated nor `effect`.
fn wanted(src: &DataSource, g: &Generator, simulated: &BTreeSet<&str>) -> BTreeSet<String> {
    let mut wanted: BTreeSet<String> = src
        .columns
        .keys()
        .filter(|n| !simulated.contains(n.as_str()))
        .cloned()
        .collect();
    for c in &g.columns {
        wanted.extend(
            c.expr
                .names()
                .into_iter()
                .filter(|n| n != crate::plan::EFFECT && !simulated.contains(n.as_str())),
        );
    }
    wanted
}

/// A copy of the study's data under another name: caught when the ledger has its hash.
fn refuse_ledger_copy(plan: &Plan, table: &str, b: &BaselineFile, sha256: &str) -> Result<()> {
    let ledger = crate::ledger::ledger_path(&plan.path);
    if let Ok(Some(l)) = crate::ledger::Ledger::read(&ledger) {
        if let Some((t, _)) = l
            .entries()
            .filter_map(|e| e.data.as_ref())
            .flat_map(|d| d.iter())
            .find(|(_, sha)| **sha == sha256)
        {
            return Err(at(plan, table, b.place, "baseline", format!(
                "the baseline file has the same bytes (SHA-256) as the data of [data.{t}] recorded in the ledger; a rehearsal never reads the study's data. Name a baseline survey file, or use `sworn rehearse --blind` on the real data"
            )));
        }
    }
    Ok(())
}

/// No name may be both a column of the file and simulated.
fn refuse_clash(
    plan: &Plan,
    table: &str,
    g: &Generator,
    b: &BaselineFile,
    columns: &BaselineColumns,
) -> Result<()> {
    if let Some(c) = g
        .columns
        .iter()
        .find(|c| columns.header.iter().any(|h| h == &c.name))
    {
        let kind = if c.latent { "latent" } else { "columns" };
        return Err(at(plan, table, c.place, &format!("{kind}.{}", c.name), format!(
            "`{}` is both a column of the baseline file (rehearsal.data.{table}.baseline = \"{}\") and simulated here (rehearsal.data.{table}.{kind}.{}); keep the file's column and remove this line, or rename one of them",
            c.name,
            crate::escape::clip(&b.text, crate::escape::SHOWN),
            c.name
        )));
    }
    Ok(())
}

/// Every name an expression uses is `effect`, simulated, or a column of the file.
fn refuse_unknown_names(
    plan: &Plan,
    table: &str,
    g: &Generator,
    b: &BaselineFile,
    columns: &BaselineColumns,
    simulated: &BTreeSet<&str>,
) -> Result<()> {
    for c in &g.columns {
        let mut names: Vec<String> = c.expr.names().into_iter().collect();
        names.sort();
        if let Some(n) = names.iter().find(|n| {
            n.as_str() != crate::plan::EFFECT
                && !simulated.contains(n.as_str())
                && !columns.columns.contains_key(n.as_str())
        }) {
            let kind = if c.latent { "latent" } else { "columns" };
            return Err(at(plan, table, c.place, &format!("{kind}.{}", c.name), format!(
                "`{n}` is neither simulated in this table nor a column of the baseline file \"{}\"{}; simulate it or add it to the file",
                crate::escape::clip(&b.text, crate::escape::SHOWN),
                crate::plan::suggest_hint(n, columns.header.iter().map(String::as_str).chain(simulated.iter().copied()))
            )));
        }
    }
    Ok(())
}
