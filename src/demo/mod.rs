//! The built-in demo: two invented scenarios, generated deterministically, with their plans.
//! Data only: `sworn demo` (`app/demo.rs`) writes them and runs the plans.
//!
//! 1. `cool-roofs`: a municipal programme offers a subsidy to paint roofs white, randomized
//!    by street block within districts. Households that take it up tend to have hotter homes
//!    (unobserved), so OLS of indoor temperature on painting understates the cooling effect,
//!    while 2SLS with the offer as instrument recovers it. A binary outcome (a heat-related
//!    clinic visit) makes one specification a linear probability model.
//! 2. `grid-demand`: weekly electricity demand of a district grid and its spot price, which
//!    responds to the same demand shocks; last week's price instruments this week's.
//!
//! The data are invented. The generator uses its own seeded SplitMix64 stream and fixed
//! number formatting, so its bytes never depend on a crate version. The committed files in
//! `demo-data/` are its output; a test checks that they match.

mod generate;

pub use generate::{cool_roofs_csv, grid_demand_csv};

/// The demo plans, as committed in `plans/`.
pub const PLANS: [(&str, &str); 2] = [
    (
        "plans/cool-roofs.toml",
        include_str!("../../plans/cool-roofs.toml"),
    ),
    (
        "plans/grid-demand.toml",
        include_str!("../../plans/grid-demand.toml"),
    ),
];

/// The demo data files: path and generated content.
pub fn data_files() -> Vec<(&'static str, String)> {
    vec![
        ("demo-data/cool-roofs/households.csv", cool_roofs_csv()),
        ("demo-data/grid-demand/weekly.csv", grid_demand_csv()),
    ]
}
