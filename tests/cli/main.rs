//! Integration tests: the built binary on generated studies (one test binary).

mod ar_curve;
mod bad_input;
mod blocked_summaries;
mod common;
mod contingency;
mod deviations;
mod dialects;
mod fuzz;
mod guide;
mod hac;
mod happy;
mod history;
mod hostile;
mod init;
mod integrity;
mod intervals;
mod json;
mod nist;
mod readme;
mod reference;
mod registration;
mod rehearse;
mod reports;
mod resampling;
mod summaries;
mod table_rows;
