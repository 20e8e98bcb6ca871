//! Integration tests: the built binary on generated studies (one test binary).

mod bad_input;
mod common;
mod contingency;
mod deviations;
mod dialects;
mod guide;
mod hac;
mod happy;
mod history;
mod init;
mod integrity;
mod nist;
mod reference;
mod resampling;
mod summaries;
