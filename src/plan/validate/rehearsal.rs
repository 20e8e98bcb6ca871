//! `[rehearsal]` → [`Rehearsal`]: the simulated study, checked before anything is drawn.
//!
//! Invariants of the result: every data table has a generator; every generated column is a
//! declared column of its table and every declared column the analysis uses is generated;
//! each expression uses only `effect` and columns generated before it (the order is
//! resolved here, so the plan's key order does not matter); `assigned(share)` appears only
//! in the column `[assignment]` randomizes, after its blocks and clusters.

use super::scope::{expr_error, is_identifier, Ctx};
use crate::error::Result;
use crate::expr::{self, Draw};
use crate::plan::raw::{RawGenerator, RawPlan, RawRehearsal};
use crate::plan::{BaselineFile, GeneratedColumn, Generator, Plan, Rehearsal};
use crate::suggest::hint;
use std::collections::{BTreeMap, BTreeSet};
use toml::Spanned;

/// The name through which a data-generating process reads the effect size being simulated.
pub const EFFECT: &str = "effect";

/// Largest number of replications accepted.
const MAX_REPLICATIONS: i64 = 1_000_000;

/// Largest simulated table.
const MAX_ROWS: i64 = 10_000_000;

/// Validate `[rehearsal]`, when present.
pub(super) fn rehearsal(ctx: &Ctx, raw: &RawPlan, plan: &Plan) -> Result<Option<Rehearsal>> {
    let Some(r) = &raw.rehearsal else {
        return Ok(None);
    };
    let spanned = r;
    refuse_weights(ctx, plan, spanned)?;
    let r = r.get_ref();
    let replications = whole_in(
        ctx,
        &r.replications,
        "rehearsal.replications",
        1..=MAX_REPLICATIONS,
        &format!("replications must be a whole number from 1 to {MAX_REPLICATIONS}; 500 to 2,000 give power to about ±0.02"),
    )?
    .unwrap_or(500);
    if *r.seed.get_ref() < 0 {
        return Err(ctx.at(
            &r.seed,
            "rehearsal.seed",
            "seed must be a whole number of at least 0",
        ));
    }
    let target_power = match &r.target_power {
        Some(v) => ctx.unit_open(v, "rehearsal.target_power")?,
        None => 0.80,
    };
    let effects = effects(ctx, r)?;
    let resampling_draws = whole_in(
        ctx,
        &r.resampling_draws,
        "rehearsal.resampling_draws",
        99..=10_000_000,
        "resampling_draws must be a whole number from 99 to 10000000",
    )?;
    let mde_steps = whole_in(
        ctx,
        &r.mde_steps,
        "rehearsal.mde_steps",
        0..=20,
        "mde_steps must be a whole number from 0 (interpolate between the simulated effects) to 20",
    )?
    .unwrap_or(4);
    let generators = generators(ctx, plan, spanned)?;
    Ok(Some(Rehearsal {
        replications,
        seed: *r.seed.get_ref() as u64,
        target_power,
        effects,
        resampling_draws,
        mde_steps,
        generators,
    }))
}

/// A rehearsal simulates unweighted data sets only: refuse it beside a weighted
/// specification or a weighted balance or attrition check.
fn refuse_weights<T>(ctx: &Ctx, plan: &Plan, at: &Spanned<T>) -> Result<()> {
    if let Some(s) = plan.specifications.iter().find(|s| s.weights.is_some()) {
        return Err(ctx.at(at, "rehearsal", format!(
            "specification `{}` is weighted, and a rehearsal simulates unweighted data sets only; remove [rehearsal] or the specification's weights",
            s.id
        )));
    }
    let weighted_check = [
        (
            "[balance]",
            plan.balance.as_ref().and_then(|b| b.weights.as_ref()),
        ),
        (
            "[attrition]",
            plan.attrition.as_ref().and_then(|a| a.weights.as_ref()),
        ),
    ];
    if let Some((section, Some(w))) = weighted_check.iter().find(|(_, w)| w.is_some()) {
        return Err(ctx.at(at, "rehearsal", format!(
            "{section} is weighted by `{w}`, and a rehearsal simulates unweighted data sets only; remove [rehearsal] or the check's weights"
        )));
    }
    Ok(())
}

/// An optional whole number that must lie in `range`; `message` (naming the range) when not.
fn whole_in(
    ctx: &Ctx,
    value: &Option<Spanned<i64>>,
    key: &str,
    range: std::ops::RangeInclusive<i64>,
    message: &str,
) -> Result<Option<usize>> {
    match value {
        Some(v) if !range.contains(v.get_ref()) => Err(ctx.at(v, key, message)),
        Some(v) => Ok(Some(*v.get_ref() as usize)),
        None => Ok(None),
    }
}

/// One data-generating process per data table, each named by a table of the plan.
fn generators(
    ctx: &Ctx,
    plan: &Plan,
    spanned: &Spanned<RawRehearsal>,
) -> Result<BTreeMap<String, Generator>> {
    let mut generators = BTreeMap::new();
    for (id, g) in &spanned.get_ref().data {
        let key = format!("rehearsal.data.{}", id.get_ref());
        let Some(src) = plan.data.get(id.get_ref()) else {
            return Err(ctx.at(
                id,
                key,
                format!(
                    "there is no data table `{}` to simulate{}; use the id of a [data.NAME] table",
                    id.get_ref(),
                    hint(id.get_ref(), plan.data.keys().map(String::as_str))
                ),
            ));
        };
        generators.insert(src.id.clone(), generator(ctx, plan, &src.id, g, &key)?);
    }
    if let Some(missing) = plan.data.keys().find(|k| !generators.contains_key(*k)) {
        return Err(ctx.at(
            spanned,
            "rehearsal.data",
            format!("[data.{missing}] has no data-generating process; add [rehearsal.data.{missing}] with rows and columns"),
        ));
    }
    Ok(generators)
}

/// The effect sizes: finite, non-negative, strictly increasing; 0 added in front.
fn effects(ctx: &Ctx, r: &RawRehearsal) -> Result<Vec<f64>> {
    let mut out = vec![0.0];
    if r.effects.get_ref().is_empty() {
        return Err(ctx.at(
            &r.effects,
            "rehearsal.effects",
            "list at least one effect size to simulate, such as effects = [0.5, 1.0, 1.5]",
        ));
    }
    for v in r.effects.get_ref() {
        let x = *v.get_ref();
        if !x.is_finite() || x < 0.0 {
            return Err(ctx.at(v, "rehearsal.effects", format!("{x} is not a size: effects are finite and at least 0 (write the effect's sign into the data-generating process)")));
        }
        let last = out[out.len() - 1];
        if x == 0.0 && out.len() == 1 {
            continue;
        }
        if x <= last {
            return Err(ctx.at(
                v,
                "rehearsal.effects",
                format!("effects must increase from left to right; {x} follows {last}"),
            ));
        }
        out.push(x);
    }
    if out.len() < 2 {
        return Err(ctx.at(
            &r.effects,
            "rehearsal.effects",
            "list at least one effect size above 0 (0 is always simulated, for the size of each test)",
        ));
    }
    Ok(out)
}

fn generator(
    ctx: &Ctx,
    plan: &Plan,
    table: &str,
    g: &Spanned<RawGenerator>,
    key: &str,
) -> Result<Generator> {
    let src = &plan.data[table];
    let raw = g.get_ref();
    let (rows, baseline) = size(ctx, g, key)?;
    let mut parsed: BTreeMap<String, (Spanned<String>, GeneratedColumn)> = BTreeMap::new();
    let all = g
        .get_ref()
        .columns
        .iter()
        .map(|p| (p, false))
        .chain(raw.latent.iter().map(|p| (p, true)));
    for ((name, text), latent) in all {
        let column = generated_column(ctx, plan, table, key, (name, text), latent, &parsed)?;
        parsed.insert(name.get_ref().clone(), (text.clone(), column));
    }
    // With a baseline, the columns not simulated come from the file: they are checked
    // against its header when it is read (crate::rehearse), not here.
    let needed = crate::plan::needed_columns(plan, src);
    if let Some(n) = needed
        .iter()
        .find(|n| baseline.is_none() && !parsed.contains_key(*n))
    {
        return Err(ctx.at(
            g,
            format!("{key}.columns"),
            format!("the analysis uses column `{n}` of [data.{table}], which the rehearsal does not simulate; add `{n} = \"...\"` under [{key}.columns]"),
        ));
    }
    let columns = order(ctx, plan, parsed, key, baseline.is_some())?;
    Ok(Generator {
        rows,
        baseline,
        columns,
    })
}

/// How big the simulated table is: `rows`, or the rows of the `baseline` file (exactly one of
/// the two).
fn size(ctx: &Ctx, g: &Spanned<RawGenerator>, key: &str) -> Result<(usize, Option<BaselineFile>)> {
    let raw = g.get_ref();
    Ok(match (&raw.rows, &raw.baseline) {
        (Some(rows), Some(_)) => {
            return Err(ctx.at(
                rows,
                format!("{key}.rows"),
                "rows cannot be given with baseline: the simulated table has the baseline file's rows; remove rows, or remove baseline to simulate a table of that many rows",
            ))
        }
        (None, None) => {
            return Err(ctx.at(
                g,
                key.to_string(),
                "say how many rows to simulate with rows = N, or start from a baseline file with baseline = \"path\" (relative to the plan file)",
            ))
        }
        (Some(rows), None) => {
            let n = *rows.get_ref();
            if !(2..=MAX_ROWS).contains(&n) {
                return Err(ctx.at(
                    rows,
                    format!("{key}.rows"),
                    format!("rows must be a whole number from 2 to {MAX_ROWS}"),
                ));
            }
            (n as usize, None)
        }
        (None, Some(b)) => {
            if b.get_ref().trim().is_empty() {
                return Err(ctx.at(
                    b,
                    format!("{key}.baseline"),
                    "baseline is empty; name the baseline file, relative to the plan file",
                ));
            }
            let base = ctx.path.parent().map(std::path::Path::to_path_buf).unwrap_or_default();
            let (line, column) = ctx.map.position(b.span().start + 1);
            (
                0,
                Some(BaselineFile {
                    text: b.get_ref().clone(),
                    path: base.join(b.get_ref()),
                    place: (line, column),
                }),
            )
        }
    })
}

/// One simulated column (`latent` for an unobserved variable): a new name, declared in the
/// table unless latent, its expression parsed with the random draws, `assigned(share)` only
/// in the column `[assignment]` randomizes.
fn generated_column(
    ctx: &Ctx,
    plan: &Plan,
    table: &str,
    key: &str,
    (name, text): (&Spanned<String>, &Spanned<String>),
    latent: bool,
    parsed: &BTreeMap<String, (Spanned<String>, GeneratedColumn)>,
) -> Result<GeneratedColumn> {
    let n = name.get_ref();
    let (kind, ckey) = simulated_kind(ctx, plan, (table, key), name, latent, parsed)?;
    if n == EFFECT {
        return Err(ctx.at(
            name,
            ckey,
            format!("`{EFFECT}` is the name through which a rehearsal reads the effect size simulated; rename the column in [data.{table}] to rehearse this plan"),
        ));
    }
    let e = expr::parse_random(text.get_ref()).map_err(|e| expr_error(ctx, text, &ckey, &e))?;
    assigned_only_where_randomized(ctx, plan, n, text, &ckey, &e)?;
    let (line, column) = ctx.map.position(text.span().start + 1);
    Ok(GeneratedColumn {
        name: n.clone(),
        text: text.get_ref().clone(),
        expr: e,
        kind,
        latent,
        place: (line, column),
    })
}

/// The kind of a simulated column and its key: its declared kind, or a number for a latent
/// variable, which needs a new name (not a declared column or derived variable); a column
/// is simulated once.
fn simulated_kind(
    ctx: &Ctx,
    plan: &Plan,
    (table, key): (&str, &str),
    name: &Spanned<String>,
    latent: bool,
    parsed: &BTreeMap<String, (Spanned<String>, GeneratedColumn)>,
) -> Result<(crate::plan::ColumnKind, String)> {
    let src = &plan.data[table];
    let n = name.get_ref();
    let ckey = format!("{key}.{}.{n}", if latent { "latent" } else { "columns" });
    let declared = src.columns.get(n);
    if latent
        && (declared.is_some() || plan.derive.iter().any(|d| &d.name == n) || !is_identifier(n))
    {
        return Err(ctx.at(
            name,
            ckey,
            format!("a latent variable needs a new name (letters, digits, underscores), not a declared column or derived variable; `{n}` is taken or not a name"),
        ));
    }
    if parsed.contains_key(n) {
        return Err(ctx.at(
            name,
            ckey,
            format!("`{n}` is simulated twice; keep one of its definitions"),
        ));
    }
    let kind = match declared {
        Some(c) => c.kind,
        None if latent => crate::plan::ColumnKind::Number,
        None => return Err(ctx.at(
            name,
            ckey,
            format!(
                "`{n}` is not a declared column of [data.{table}]{}; simulate declared columns (derived variables and indices are computed from them as in a run) and put unobserved variables under [{key}.latent]",
                hint(n, src.columns.keys().map(String::as_str))
            ),
        )),
    };
    Ok((kind, ckey))
}

/// `assigned(share)` draws only the column `[assignment]` randomizes (`column`).
fn assigned_only_where_randomized(
    ctx: &Ctx,
    plan: &Plan,
    column: &str,
    text: &Spanned<String>,
    ckey: &str,
    e: &expr::Expr,
) -> Result<()> {
    let uses_assigned = e.draws().contains(&Draw::Assigned);
    let assigned_here = plan
        .assignment
        .as_ref()
        .is_some_and(|a| a.variable == column);
    if uses_assigned && !assigned_here {
        return Err(ctx.at(text, ckey.to_string(), match &plan.assignment {
            Some(a) => format!("`assigned(share)` draws the variable [assignment] randomizes, `{}`; use bernoulli(p) here", a.variable),
            None => "`assigned(share)` needs an [assignment] section saying how the treatment is randomized; declare one, or use bernoulli(p)".to_string(),
        }));
    }
    Ok(())
}

/// What column `c` needs before it: the names it uses, and for `assigned` the design's
/// blocks and clusters.
fn dependencies(plan: &Plan, c: &GeneratedColumn) -> BTreeSet<String> {
    let mut deps = c.expr.names();
    deps.remove(EFFECT);
    if c.expr.draws().contains(&Draw::Assigned) {
        if let Some(a) = &plan.assignment {
            deps.extend(a.blocks.iter().cloned());
            deps.extend(a.clusters.iter().cloned());
        }
    }
    deps
}

/// Columns in evaluation order: repeatedly the first (by name) whose inputs are all ready.
/// With a baseline (`from_file`), a name that is not simulated is read from the file, so it
/// is ready from the start.
fn order(
    ctx: &Ctx,
    plan: &Plan,
    mut parsed: BTreeMap<String, (Spanned<String>, GeneratedColumn)>,
    key: &str,
    from_file: bool,
) -> Result<Vec<GeneratedColumn>> {
    for (name, (text, c)) in &parsed {
        for d in dependencies(plan, c) {
            if !from_file && !parsed.contains_key(&d) {
                let known = parsed.keys().map(String::as_str).chain([EFFECT]);
                return Err(ctx.at(text, format!("{key}.columns.{name}"), format!(
                    "`{d}` is not simulated in this table{}; a data-generating process may use `{EFFECT}` and the table's other simulated columns",
                    hint(&d, known)
                )));
            }
        }
    }
    let names: BTreeSet<String> = parsed.keys().cloned().collect();
    let mut out: Vec<GeneratedColumn> = Vec::new();
    while !parsed.is_empty() {
        let ready = parsed
            .iter()
            .find(|(_, (_, c))| {
                dependencies(plan, c)
                    .iter()
                    .all(|d| out.iter().any(|o| &o.name == d) || (from_file && !names.contains(d)))
            })
            .map(|(n, _)| n.clone());
        let Some(name) = ready else {
            let Some((first, (text, _))) = parsed.iter().next() else {
                break;
            };
            let names: Vec<&str> = parsed.keys().map(String::as_str).collect();
            return Err(ctx.at(
                text,
                format!("{key}.columns.{first}"),
                format!(
                    "these columns depend on each other in a circle: {}; simulate one of them without the others",
                    names.join(", ")
                ),
            ));
        };
        if let Some((_, c)) = parsed.remove(&name) {
            out.push(c);
        }
    }
    Ok(out)
}
