//! Deterministic generators of the invented demo data.

use std::fmt::Write;

use crate::random::SplitMix64 as Stream;

const DISTRICTS: [&str; 6] = [
    "harbour",
    "hillside",
    "market",
    "orchard",
    "riverside",
    "station",
];
const BLOCKS_PER_DISTRICT: usize = 12;
const HOUSEHOLDS_PER_BLOCK: usize = 32;

/// The cool-roof households: 6 districts × 12 blocks × 32 households = 2,304 rows.
///
/// Half of each district's blocks are offered the subsidy. Take-up depends on the offer and
/// on an unobserved heat burden `u` that also raises indoor temperature and clinic visits,
/// so painting is endogenous. True effect of painting: −1.8 °C; on a clinic visit: −0.06.
pub fn cool_roofs_csv() -> String {
    let mut s = Stream::new(20_260_501);
    // A second, independent stream for the household-level reminder call, so that adding it
    // left every other draw where it was.
    let mut calls = Stream::new(20_260_503);
    let mut out = String::from(
        "hh_id,district,block,offer,painted,temp_c,clinic_visit,kwh,roof_m2,storeys,reminder\n",
    );
    let mut hh = 0;
    for (d, district) in DISTRICTS.iter().enumerate() {
        let district_effect = [0.0, -0.6, 0.9, -0.3, 0.4, 0.7][d];
        let mut order: Vec<(f64, usize)> =
            (0..BLOCKS_PER_DISTRICT).map(|b| (s.uniform(), b)).collect();
        order.sort_by(|a, b| a.0.total_cmp(&b.0));
        let offered: Vec<usize> = order[..BLOCKS_PER_DISTRICT / 2]
            .iter()
            .map(|x| x.1)
            .collect();
        for b in 0..BLOCKS_PER_DISTRICT {
            let block = format!("{}-{:02}", &district[..3], b + 1);
            let offer = u8::from(offered.contains(&b));
            let block_effect = 0.5 * s.normal();
            for _ in 0..HOUSEHOLDS_PER_BLOCK {
                hh += 1;
                let u = s.normal();
                let roof = (85.0 + 22.0 * s.normal()).max(20.0);
                let storeys = 1 + (s.uniform() * 3.0) as u32 + u32::from(s.uniform() < 0.08);
                // The reminder call is randomized by household and barely moves take-up: a
                // deliberately weak instrument.
                let reminder = u8::from(calls.uniform() < 0.5);
                let take_up = -1.1
                    + 1.5 * f64::from(offer)
                    + 0.12 * f64::from(reminder)
                    + 0.8 * u
                    + 0.004 * (roof - 85.0);
                let painted = u8::from(take_up + s.normal() > 0.0);
                let p = f64::from(painted);
                let temp = 30.0 + district_effect + block_effect + 1.4 * u - 1.8 * p
                    + 0.012 * (roof - 85.0)
                    + 0.35 * f64::from(storeys)
                    + 1.1 * s.normal();
                let visit_p = (0.22 + 0.07 * u - 0.06 * p + 0.02 * (temp - 31.0)).clamp(0.01, 0.95);
                let visit = u8::from(s.uniform() < visit_p);
                let kwh = (410.0 + 3.1 * (roof - 85.0) + 25.0 * u - 30.0 * p + 40.0 * s.normal())
                    .max(40.0);
                let temp_text = if s.uniform() < 0.02 {
                    String::new()
                } else {
                    format!("{temp:.2}")
                };
                let _ = writeln!(out, "H{hh:05},{district},{block},{offer},{painted},{temp_text},{visit},{kwh:.1},{roof:.1},{storeys},{reminder}");
            }
        }
    }
    out
}

/// Weekly grid demand over 156 weeks. The price responds to the same week's demand shock,
/// so it is endogenous; last week's price is predetermined. True price slope: −2.5.
pub fn grid_demand_csv() -> String {
    let mut s = Stream::new(20_260_502);
    let mut out = String::from("week,price,demand_mwh,cooling_days\n");
    let mut price = 60.0;
    for week in 1..=156 {
        let season = (std::f64::consts::TAU * f64::from(week) / 52.0).sin();
        let cooling_days = (3.5 + 3.0 * season + 0.8 * s.normal())
            .clamp(0.0, 7.0)
            .round();
        let shock = 9.0 * s.normal();
        price = 18.0 + 0.7 * price + 0.35 * shock + 2.5 * s.normal();
        let demand = 900.0 - 2.5 * price + 14.0 * cooling_days + shock;
        let _ = writeln!(out, "{week},{price:.2},{demand:.1},{cooling_days:.0}");
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splitmix64_reference_values() {
        // First outputs of SplitMix64 seeded with 0 (the reference C implementation by
        // Vigna, splitmix64.c; from memory).
        let mut s = Stream::new(0);
        assert_eq!(s.next_u64(), 0xE220_A839_7B1D_CDAF);
        assert_eq!(s.next_u64(), 0x6E78_9E6A_A1B9_65F4);
    }

    #[test]
    fn committed_demo_data_match_the_generator() {
        for (rel, text) in super::super::data_files() {
            let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join(rel);
            let committed = std::fs::read_to_string(&path).expect("committed demo data");
            assert!(committed == text, "{rel} differs from the generator; regenerate with `cargo run --release --example gen_demo_data`");
        }
    }
}
