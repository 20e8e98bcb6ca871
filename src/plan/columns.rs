//! Which declared columns of a data table the plan uses: what a run reads and checks, and what
//! a rehearsal's baseline file must supply. A function of the plan alone, so validation, data
//! loading and the rehearsal ask the same question of one place.

use super::{DataSource, Plan};
use std::collections::BTreeSet;

/// Declared columns a run needs: those used by specifications (directly or through derived
/// variables), balance and attrition checks (with their weights), keys, row orders, clusters
/// and the assignment.
pub fn needed_columns(plan: &Plan, src: &DataSource) -> BTreeSet<String> {
    let mut names = BTreeSet::new();
    for s in plan.specifications.iter().filter(|s| s.data == src.id) {
        names.extend(
            s.endogenous
                .iter()
                .chain(&s.instruments)
                .chain(&s.regressors)
                .chain(&s.controls)
                .cloned(),
        );
        names.insert(s.outcome.clone());
        names.extend(s.weights.iter().cloned());
        names.extend(s.fixed_effects.iter().cloned());
        names.extend(s.errors.cluster_columns().iter().cloned());
        if let Some((_, e)) = &s.sample {
            names.extend(e.names());
        }
    }
    for i in plan.indices.iter().filter(|i| i.data == src.id) {
        names.extend(i.components.iter().map(|(c, _)| c.clone()));
        names.extend(i.reference.1.names());
    }
    if let Some(b) = plan.balance.as_ref().filter(|b| b.data == src.id) {
        names.insert(b.by.clone());
        names.extend(b.covariates.iter().cloned());
        names.extend(b.weights.iter().cloned());
        names.extend(b.errors.cluster_columns().iter().cloned());
    }
    if let Some(a) = plan.attrition.as_ref().filter(|a| a.data == src.id) {
        names.insert(a.by.clone());
        names.extend(a.observed.1.names());
        names.extend(a.bounds.iter().cloned());
        names.extend(a.weights.iter().cloned());
        names.extend(a.errors.cluster_columns().iter().cloned());
    }
    if let Some(a) = &plan.assignment {
        names.insert(a.variable.clone());
        names.extend(a.blocks.iter().cloned());
        names.extend(a.clusters.iter().cloned());
    }
    for d in plan.derive.iter().rev() {
        if names.contains(&d.name) {
            names.extend(d.expr.names());
        }
    }
    names.extend(src.key.iter().cloned());
    names.extend(src.order_by.iter().cloned());
    names.retain(|n| src.columns.contains_key(n));
    names
}
