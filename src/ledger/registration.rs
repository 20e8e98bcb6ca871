//! The registration point and the moments after it.
//!
//! Two moments matter for what counts as registered:
//! - the data were first **inspected**: the first `data-inspected` entry (`sworn check --data`
//!   on a sealed plan) or the first `data-first-read` entry, whichever comes first;
//! - results were first **computed**: the first `data-first-read` entry (written by the first
//!   `sworn run` before it computes anything).
//!
//! The **registered version** is the last seal or amendment before the data were first
//! inspected. Every later amendment happened after the data were seen, and which of the two
//! moments it followed is part of what a report discloses.

use super::{Entry, Event, Ledger};

/// Which moment a post-data amendment followed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Moment {
    /// After the data were inspected, before any results were computed.
    DataInspected,
    /// After results were first computed.
    ResultsComputed,
}

impl Moment {
    /// The name used in results.json.
    pub fn key(self) -> &'static str {
        match self {
            Moment::DataInspected => "data-inspected",
            Moment::ResultsComputed => "results-computed",
        }
    }

    /// The phrase used in reports and messages.
    pub fn phrase(self) -> &'static str {
        match self {
            Moment::DataInspected => "after the data were inspected",
            Moment::ResultsComputed => "after results were computed",
        }
    }
}

/// A ledger entry with its 1-based line number.
#[derive(Debug, Clone, Copy)]
pub struct Line<'a> {
    /// 1-based line number in the ledger file.
    pub number: usize,
    /// The entry.
    pub entry: &'a Entry,
}

/// Whether `e` records a plan version (a seal or amendment with its fingerprints).
pub fn is_version(e: &Entry) -> bool {
    matches!(e.event, Event::Sealed | Event::Amended) && e.plan.is_some()
}

impl Ledger {
    fn first_where(&self, keep: impl Fn(&Entry) -> bool) -> Option<Line<'_>> {
        self.numbered()
            .find_map(|(number, e)| e.filter(|e| keep(e)).map(|entry| Line { number, entry }))
    }

    /// The first entry showing the data were seen (inspected or read by a run).
    pub fn first_data(&self) -> Option<Line<'_>> {
        self.first_where(|e| matches!(e.event, Event::DataInspected | Event::DataFirstRead))
    }

    /// The first entry showing results were computed (the first run's data read).
    pub fn first_results(&self) -> Option<Line<'_>> {
        self.first_where(|e| e.event == Event::DataFirstRead)
    }

    /// The registered version: the last seal or amendment before the data were first seen.
    /// None while the data have not been seen (or when no version precedes them).
    pub fn registered(&self) -> Option<Line<'_>> {
        let cut = self.first_data()?.entry.seq;
        self.versions().take_while(|l| l.entry.seq < cut).last()
    }

    /// Every seal and amendment that records a plan version, in ledger order.
    pub fn versions(&self) -> impl Iterator<Item = Line<'_>> {
        self.numbered().filter_map(|(number, e)| {
            e.filter(|e| is_version(e))
                .map(|entry| Line { number, entry })
        })
    }

    /// The moment an entry made after the data were first seen followed (None: before).
    pub fn moment_of(&self, e: &Entry) -> Option<Moment> {
        let seen = self.first_data()?.entry.seq;
        if e.seq <= seen {
            return None;
        }
        match self.first_results() {
            Some(r) if e.seq > r.entry.seq => Some(Moment::ResultsComputed),
            _ => Some(Moment::DataInspected),
        }
    }

    /// The moment the data are at now: results computed, only inspected, or not yet seen.
    pub fn current_moment(&self) -> Option<Moment> {
        if self.first_results().is_some() {
            Some(Moment::ResultsComputed)
        } else {
            self.first_data().map(|_| Moment::DataInspected)
        }
    }
}
