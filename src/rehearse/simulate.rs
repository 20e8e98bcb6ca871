//! One simulated data set: each table's columns evaluated in the generator's order with the
//! random draws of one replication's stream, then built into a [`Table`] through the same
//! ordering, derivation and index code as a file.
//!
//! With a baseline file the table's rows and the file's columns are fixed; only the
//! simulated columns (and the re-drawn assignment) change between replications.
//!
//! Invariants: the values depend only on (seed, replication, effect), the plan and the
//! baseline files; the
//! columns are drawn in the validated order, tables in id order, from one stream per
//! replication (the same stream at every effect size, so effect sizes are compared on the
//! same simulated units).

use super::baseline::Loaded;
use super::rng::Stream;
use crate::data::{table_from_columns, Table};
use crate::error::{Error, Result};
use crate::expr::{Draw, DrawSource, ExprError};
use crate::plan::{Assignment, ColumnKind, GeneratedColumn, Generator, Plan};
use std::cell::RefCell;
use std::collections::{BTreeMap, HashMap};

type Column = Vec<Option<f64>>;

/// The tables of replication `r` at effect size `effect`.
///
/// # Errors
/// A draw's argument outside its domain or a generated value that does not fit its declared
/// kind (an error at the column's expression in the plan), or a table that cannot be built.
pub(crate) fn tables(
    plan: &Plan,
    baselines: &BTreeMap<String, Loaded>,
    seed: u64,
    r: u64,
    effect: f64,
) -> Result<BTreeMap<String, Table>> {
    let Some(reh) = &plan.rehearsal else {
        return Ok(BTreeMap::new());
    };
    let stream = RefCell::new(Stream::new(seed, r));
    let mut out = BTreeMap::new();
    for (id, g) in &reh.generators {
        let base = baselines.get(id);
        let rows = base.map_or(g.rows, |b| b.columns.rows);
        let columns = columns(plan, id, g, base, rows, &stream, effect)?;
        let src = &plan.data[id];
        let t = table_from_columns(plan, src, columns, rows, format!("simulated:{r}"))?;
        out.insert(id.clone(), t);
    }
    Ok(out)
}

fn columns(
    plan: &Plan,
    table: &str,
    g: &Generator,
    base: Option<&Loaded>,
    rows: usize,
    stream: &RefCell<Stream>,
    effect: f64,
) -> Result<BTreeMap<String, Column>> {
    let effect_column = vec![Some(effect); rows];
    // A baseline's columns are there from the start, the same in every replication.
    let mut done: BTreeMap<String, Column> =
        base.map_or_else(BTreeMap::new, |b| b.columns.columns.clone());
    for c in &g.columns {
        let values = {
            let lookup = |name: &str| {
                if name == crate::plan::EFFECT {
                    Some(&effect_column as &dyn crate::expr::Values)
                } else {
                    done.get(name).map(|c| c as &dyn crate::expr::Values)
                }
            };
            let source = Source {
                stream,
                columns: &done,
                assignment: plan.assignment.as_ref(),
            };
            c.expr
                .eval_drawn(rows, &lookup, &source)
                .map_err(|e| at(plan, table, c, effect, &e.message))?
        };
        check_kind(plan, table, c, effect, &values)?;
        done.insert(c.name.clone(), values);
    }
    Ok(done)
}

/// An error at the expression of column `c`.
fn at(plan: &Plan, table: &str, c: &GeneratedColumn, effect: f64, message: &str) -> Error {
    Error::Plan {
        path: plan.path.clone(),
        line: c.place.0,
        column: c.place.1,
        key: format!("rehearsal.data.{table}.columns.{}", c.name),
        message: format!(
            "simulating \"{}\" at effect = {effect}: {message}",
            crate::escape::clip(&c.text, crate::escape::SHOWN)
        ),
    }
}

/// Binary columns must come out 0/1 and integer columns whole, as the run would require.
fn check_kind(
    plan: &Plan,
    table: &str,
    c: &GeneratedColumn,
    effect: f64,
    values: &[Option<f64>],
) -> Result<()> {
    let bad = |v: f64| match c.kind {
        ColumnKind::Binary => v != 0.0 && v != 1.0,
        ColumnKind::Integer => v.fract() != 0.0,
        _ => false,
    };
    if let Some((row, v)) = values
        .iter()
        .enumerate()
        .find_map(|(i, v)| v.filter(|v| bad(*v)).map(|v| (i, v)))
    {
        return Err(at(plan, table, c, effect, &format!(
            "row {} is {v} but `{}` is declared {}; use bernoulli(p) for a 0/1 column, level(k) or group(k) for whole numbers",
            row + 1,
            c.name,
            c.kind.name()
        )));
    }
    Ok(())
}

/// The random numbers of one replication, and the columns drawn so far (for `assigned`).
struct Source<'a> {
    stream: &'a RefCell<Stream>,
    columns: &'a BTreeMap<String, Column>,
    assignment: Option<&'a Assignment>,
}

fn domain(draw: Draw, row: usize, what: &str) -> ExprError {
    ExprError::eval(format!("{} in row {}: {what}", draw.usage(), row + 1))
}

/// The first row's value of a constant argument.
fn constant(draw: Draw, arg: &[Option<f64>], what: &str) -> std::result::Result<f64, ExprError> {
    arg.first()
        .copied()
        .flatten()
        .ok_or_else(|| domain(draw, 0, &format!("{what} is missing")))
}

fn whole(draw: Draw, k: f64, max: f64) -> std::result::Result<u64, ExprError> {
    if k >= 1.0 && k.fract() == 0.0 && k <= max {
        Ok(k as u64)
    } else {
        Err(domain(
            draw,
            0,
            &format!("k = {k} must be a whole number from 1 to {max}"),
        ))
    }
}

/// The column a draw gives, or why it cannot.
type Drawn = std::result::Result<Column, ExprError>;

/// Argument `i` of a draw at row `row` (none when missing).
fn arg(args: &[Column], i: usize, row: usize) -> Option<f64> {
    args.get(i).and_then(|a| a.get(row).copied().flatten())
}

impl DrawSource for Source<'_> {
    fn draw(&self, draw: Draw, args: &[Column], n: usize) -> Drawn {
        let mut s = self.stream.borrow_mut();
        match draw {
            Draw::Normal => normal(&mut s, args, n),
            Draw::Uniform => uniform(&mut s, args, n),
            Draw::Bernoulli => bernoulli(&mut s, args, n),
            Draw::Level => {
                let k = whole(draw, constant(draw, &args[0], "k")?, 1e9)?;
                Ok((0..n).map(|_| Some((1 + s.below(k)) as f64)).collect())
            }
            Draw::Group => group(args, n),
            Draw::GroupNormal => group_normal(&mut s, args, n),
            Draw::Assigned => {
                let share = constant(draw, &args[0], "share")?;
                if !(share > 0.0 && share < 1.0) {
                    return Err(domain(
                        draw,
                        0,
                        &format!("share = {share} must lie strictly between 0 and 1"),
                    ));
                }
                assign(&mut s, self.assignment, self.columns, share, n)
            }
        }
    }
}

/// `normal(mean, sd)`: one standard normal per row, drawn whether or not the row's
/// arguments are present.
fn normal(s: &mut Stream, args: &[Column], n: usize) -> Drawn {
    (0..n)
        .map(|i| {
            let z = s.normal();
            match (arg(args, 0, i), arg(args, 1, i)) {
                (Some(_), Some(sd)) if sd < 0.0 => {
                    Err(domain(Draw::Normal, i, &format!("sd = {sd} is negative")))
                }
                (Some(m), Some(sd)) => Ok(Some(m + sd * z)),
                _ => Ok(None),
            }
        })
        .collect()
}

/// `uniform(low, high)`: one uniform per row.
fn uniform(s: &mut Stream, args: &[Column], n: usize) -> Drawn {
    (0..n)
        .map(|i| {
            let u = s.uniform();
            match (arg(args, 0, i), arg(args, 1, i)) {
                (Some(a), Some(b)) if b < a => Err(domain(
                    Draw::Uniform,
                    i,
                    &format!("high = {b} is below low = {a}"),
                )),
                (Some(a), Some(b)) => Ok(Some(a + (b - a) * u)),
                _ => Ok(None),
            }
        })
        .collect()
}

/// `bernoulli(p)`: 1 when the row's uniform falls below p.
fn bernoulli(s: &mut Stream, args: &[Column], n: usize) -> Drawn {
    (0..n)
        .map(|i| {
            let u = s.uniform();
            match arg(args, 0, i) {
                Some(p) if !(0.0..=1.0).contains(&p) => Err(domain(
                    Draw::Bernoulli,
                    i,
                    &format!(
                    "p = {p} is not a probability (from 0 to 1); check how the effect enters it"
                ),
                )),
                Some(p) => Ok(Some(if u < p { 1.0 } else { 0.0 })),
                None => Ok(None),
            }
        })
        .collect()
}

/// `group(k)`: rows split into k consecutive groups of (nearly) equal size; no draw.
fn group(args: &[Column], n: usize) -> Drawn {
    let draw = Draw::Group;
    let k = whole(draw, constant(draw, &args[0], "k")?, n as f64)?;
    Ok((0..n)
        .map(|i| Some((1 + (i as u128 * u128::from(k) / n as u128)) as f64))
        .collect())
}

/// `group_normal(group, sd)`: one normal shock per distinct group value, drawn when the
/// value first appears.
fn group_normal(s: &mut Stream, args: &[Column], n: usize) -> Drawn {
    let mut shocks: HashMap<u64, f64> = HashMap::new();
    (0..n)
        .map(|i| match (arg(args, 0, i), arg(args, 1, i)) {
            (Some(_), Some(sd)) if sd < 0.0 => Err(domain(
                Draw::GroupNormal,
                i,
                &format!("sd = {sd} is negative"),
            )),
            (Some(g), Some(sd)) => {
                let z = *shocks.entry(g.to_bits()).or_insert_with(|| s.normal());
                Ok(Some(sd * z))
            }
            _ => Ok(None),
        })
        .collect()
}

/// The treatment drawn as `[assignment]` declares: in each block (or overall), `share` of
/// the clusters (or units), rounded to the nearest whole number, get 1, chosen by a
/// Fisher–Yates shuffle (Durstenfeld 1964, CACM 7(7)).
fn assign(
    s: &mut Stream,
    a: Option<&Assignment>,
    columns: &BTreeMap<String, Column>,
    share: f64,
    n: usize,
) -> Drawn {
    let clusters = unit_ids(columns, a.and_then(|a| a.clusters.as_ref()), n)?;
    let blocks = match a.and_then(|a| a.blocks.as_ref()) {
        Some(b) => unit_ids(columns, Some(b), n)?,
        None => vec![0; n],
    };
    let treated = shuffle(s, strata(&clusters, &blocks)?, share);
    Ok(clusters
        .iter()
        .map(|c| {
            Some(if treated.get(c).copied().unwrap_or(false) {
                1.0
            } else {
                0.0
            })
        })
        .collect())
}

/// Each row's unit of assignment: the value of column `name` (as bits), or the row itself.
fn unit_ids(
    columns: &BTreeMap<String, Column>,
    name: Option<&String>,
    n: usize,
) -> std::result::Result<Vec<u64>, ExprError> {
    let draw = Draw::Assigned;
    let Some(c) = name else {
        return Ok((0..n as u64).collect());
    };
    let col = columns.get(c).ok_or_else(|| {
        domain(
            draw,
            0,
            &format!("`{c}` is not simulated before the assignment"),
        )
    })?;
    col.iter()
        .enumerate()
        .map(|(i, v)| {
            v.map(f64::to_bits)
                .ok_or_else(|| domain(draw, i, &format!("`{c}` is missing")))
        })
        .collect()
}

/// The clusters of each block, blocks and clusters in order of first appearance.
///
/// # Errors
/// A cluster lies in two blocks.
fn strata(clusters: &[u64], blocks: &[u64]) -> std::result::Result<Vec<Vec<u64>>, ExprError> {
    let mut block_of: HashMap<u64, u64> = HashMap::new();
    let mut strata: Vec<Vec<u64>> = Vec::new();
    let mut stratum_of: HashMap<u64, usize> = HashMap::new();
    for (i, (&cluster, &block)) in clusters.iter().zip(blocks).enumerate() {
        match block_of.get(&cluster) {
            Some(b) if *b != block => {
                return Err(domain(Draw::Assigned, i, "a cluster lies in two blocks; simulate the clusters nested in the blocks (e.g. group(k) for both, with the block count dividing the cluster count)"));
            }
            Some(_) => {}
            None => {
                block_of.insert(cluster, block);
                let next = strata.len();
                let at = *stratum_of.entry(block).or_insert(next);
                if at == next {
                    strata.push(Vec::new());
                }
                strata[at].push(cluster);
            }
        }
    }
    Ok(strata)
}

/// Treat `share` of each stratum's clusters (rounded), chosen by a partial Fisher–Yates
/// shuffle, strata in order.
fn shuffle(s: &mut Stream, strata: Vec<Vec<u64>>, share: f64) -> HashMap<u64, bool> {
    let mut treated: HashMap<u64, bool> = HashMap::new();
    for mut list in strata {
        let m = list.len();
        let k = ((m as f64) * share).round() as usize;
        for i in 0..k.min(m) {
            let j = i + s.below((m - i) as u64) as usize;
            list.swap(i, j);
        }
        for (i, c) in list.into_iter().enumerate() {
            treated.insert(c, i < k);
        }
    }
    treated
}
