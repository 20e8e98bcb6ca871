//! The report model: everything a report shows, already formatted as text.
//!
//! One submodule per part of the report: `integrity` (provenance and the integrity line),
//! `hypotheses` (the hypotheses and decision-rule rows), `specs` (tables and specification
//! blocks), `summaries` (indices, balance, attrition), `resampling` and `cautions`. This file
//! only assembles them.

mod cautions;
mod hypotheses;
mod integrity;
mod resampling;
mod specs;
mod summaries;

pub use integrity::integrity_line;

use crate::plan::Plan;
use crate::results::{HypothesisRegistration, Results};
use hypotheses::{HypRow, RuleRow};
use serde::Serialize;
use specs::{SpecModel, TableModel};
use summaries::BalanceModel;

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
    indices: Vec<summaries::IndexLine>,
    balance: Option<BalanceModel>,
    attrition: Vec<summaries::AttritionLine>,
    tables: Vec<TableModel>,
    specs: Vec<SpecModel>,
    apart: Vec<SpecModel>,
    conventions: Vec<specs::Convention>,
    resampling: Vec<resampling::ResamplingItem>,
    figures: Vec<super::plots::Figure>,
    deviations: Vec<DevRow>,
    cautions: Vec<cautions::Caution>,
}

#[derive(Debug, Serialize)]
struct DevRow {
    severity: String,
    code: String,
    subject: String,
    message: String,
}

impl ReportModel {
    /// Build the model from the plan and its results.
    pub fn build(plan: &Plan, r: &Results) -> Self {
        let (specs, apart, conventions) = spec_models(plan, r);
        ReportModel {
            title: crate::escape::line(&plan.study.title),
            study_id: plan.study.id.clone(),
            authors: plan.study.authors.join("; "),
            registered: plan.study.registered.clone(),
            summary: plan.study.summary.clone(),
            provenance: integrity::provenance(r),
            integrity: integrity_line(r),
            hypotheses: hypothesis_rows(plan, r),
            registration: super::registration::build(r),
            rehearsal: super::rehearsal::build(r),
            contingencies: plan
                .contingencies
                .iter()
                .zip(&r.contingencies)
                .map(|(c, res)| hypotheses::rule_row(c, res))
                .collect(),
            indices: summaries::index_lines(r),
            balance: summaries::balance_model(r),
            attrition: summaries::attrition_lines(r),
            tables: plan
                .tables
                .iter()
                .map(|t| specs::table_model(t, r))
                .collect(),
            specs,
            apart,
            conventions,
            resampling: resampling::resampling_lines(plan, r),
            figures: super::plots::figures(plan, r),
            deviations: deviation_rows(r),
            cautions: cautions::cautions(r),
        }
    }
}

/// The specification blocks, pre-registered ones first and the rest apart, with the
/// degrees-of-freedom rules they follow (each stated once).
fn spec_models(
    plan: &Plan,
    r: &Results,
) -> (Vec<SpecModel>, Vec<SpecModel>, Vec<specs::Convention>) {
    let mut specs = Vec::new();
    let mut apart = Vec::new();
    let mut conventions = Vec::new();
    for s in &plan.specifications {
        let res = &r.specifications[&s.id];
        for rule in specs::df_conventions(res) {
            if !conventions.contains(&rule) {
                conventions.push(rule);
            }
        }
        let m = specs::spec_model(s, res, plan.inference.alpha);
        if res.pre_registered {
            specs.push(m)
        } else {
            apart.push(m)
        }
    }
    (specs, apart, conventions)
}

/// One row per hypothesis of the plan, then the registered ones removed after the data.
fn hypothesis_rows(plan: &Plan, r: &Results) -> Vec<HypRow> {
    plan.hypotheses
        .iter()
        .map(|h| h.id.as_str())
        .chain(
            r.hypotheses
                .iter()
                .filter(|(_, h)| h.registration == HypothesisRegistration::RemovedAfterData)
                .map(|(id, _)| id.as_str()),
        )
        .map(|id| hypotheses::hyp_row(id, r))
        .collect()
}

/// The deviations and notes as rows, in results.json's order.
fn deviation_rows(r: &Results) -> Vec<DevRow> {
    r.deviations
        .iter()
        .map(|d| DevRow {
            severity: d.severity.name().to_string(),
            code: d.code.as_str().to_string(),
            subject: d.subject.clone(),
            message: d.message.clone(),
        })
        .collect()
}
