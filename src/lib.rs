//! sworn: execute pre-registered statistical analysis plans.
//!
//! The pipeline a plan travels through: [`plan`] (TOML → validated plan) → [`ledger`]
//! (fingerprints, seal) → [`data`] (read, check, derive, design matrices) → [`estimate`]
//! (pure numerics) and [`inference`] (distributions, corrections) → [`analysis`] (the run in
//! memory) → [`results`] and [`report`] (outputs). [`app`] sequences the I/O of each command.

pub mod analysis;
pub mod app;
pub mod cli;
pub mod data;
pub mod demo;
pub mod deviation;
pub mod distribution;
pub mod error;
pub mod escape;
pub mod estimate;
pub mod exact;
pub mod expr;
pub mod files;
pub mod format;
pub mod guide;
pub mod inference;
pub mod layout;
pub mod ledger;
pub mod memory;
pub mod plan;
pub mod random;
pub mod rehearse;
pub mod report;
pub mod results;
pub mod starter;
pub mod suggest;
pub mod terminal;
#[cfg(test)]
pub(crate) mod testing;
