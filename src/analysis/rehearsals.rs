//! The rehearsals a run cites: every `rehearsed` ledger entry, placed against the registration
//! point (the registered version's seal or amendment) and the two data moments, so a report
//! cites only a rehearsal made before registration as evidence of power stated in advance.
//!
//! Invariant: everything comes from the ledger prefix the run was judged against, so `verify`
//! re-derives the same citations.

use crate::ledger::{Event, Ledger, Moment};
use crate::results::RehearsalCitation;

/// Every rehearsal in `ledger`, in ledger order.
pub fn cite(ledger: &Ledger) -> Vec<RehearsalCitation> {
    let registered = ledger.registered();
    let registered_content = registered
        .and_then(|l| l.entry.plan.as_ref())
        .map(|p| p.content_sha256.clone());
    ledger
        .numbered()
        .filter_map(|(number, e)| {
            e.filter(|e| e.event == Event::Rehearsed)
                .map(|e| (number, e))
        })
        .map(|(number, e)| {
            let timing = match registered {
                None => crate::results::RehearsalTiming::NoRegistration,
                Some(r) if e.seq < r.entry.seq => {
                    crate::results::RehearsalTiming::BeforeRegistration
                }
                Some(_) => match ledger.moment_of(e) {
                    None => crate::results::RehearsalTiming::AfterRegistration,
                    Some(Moment::DataInspected) => {
                        crate::results::RehearsalTiming::AfterDataInspected
                    }
                    Some(Moment::ResultsComputed) => {
                        crate::results::RehearsalTiming::AfterResultsComputed
                    }
                },
            };
            let content = e.plan.as_ref().map(|p| p.content_sha256.clone());
            RehearsalCitation {
                ledger_line: number,
                time: e.time.clone(),
                timing,
                assumptions_sha256: e.assumptions.clone(),
                rehearsed_registered_version: content.is_some() && content == registered_content,
                plan_content_sha256: content,
                power: e.power.clone(),
            }
        })
        .collect()
}
