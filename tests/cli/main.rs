//! Integration tests: the built binary on generated studies (one test binary).

mod bad_input;
mod common;
mod contingency;
mod deviations;
mod fuzz;
mod happy;
mod hostile;
mod nist;
mod reference;
mod resampling;
mod summaries;
