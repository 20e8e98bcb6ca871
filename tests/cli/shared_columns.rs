//! Specifications that read the same columns at the same rows share the blocks read from the
//! table (module `data::shared_columns`); weighted and fixed-effect specifications read and
//! change their own. Every specification's results must be the bits it gets when it is the
//! plan's only specification: a scaled or swept block handed to a later specification, or a
//! block read at other rows (the subsample's), would change them.

use crate::common::Study;
use crate::reference::fixture;
use crate::weighted_fixed_effects::{csv, head};
use std::fmt::Write;

/// Interleaved so that each plain specification follows one that changes its blocks.
const SPECS: [(&str, &str); 9] = [
    ("ols_plain", "estimator = \"ols\"\nregressors = [\"x\"]\ncontrols = [\"c\"]\nerrors = \"hc1\""),
    ("ols_weighted", "estimator = \"ols\"\nregressors = [\"x\"]\ncontrols = [\"c\"]\nweights = \"w\"\nerrors = \"hc1\""),
    ("ols_plain_cluster", "estimator = \"ols\"\nregressors = [\"x\"]\ncontrols = [\"c\"]\nerrors = { kind = \"cluster\", by = \"g\" }"),
    ("ols_fe", "estimator = \"ols\"\nregressors = [\"x\"]\ncontrols = [\"c\"]\nfixed_effects = [\"r\"]\nerrors = \"hc1\""),
    ("tsls_plain", "estimator = \"2sls\"\nendogenous = [\"x\"]\ninstruments = [\"z1\", \"z2\"]\ncontrols = [\"c\"]\nerrors = \"hc1\""),
    ("tsls_weighted", "estimator = \"2sls\"\nendogenous = [\"x\"]\ninstruments = [\"z1\", \"z2\"]\ncontrols = [\"c\"]\nweights = \"w\"\nerrors = \"hc1\""),
    ("tsls_plain_cluster", "estimator = \"2sls\"\nendogenous = [\"x\"]\ninstruments = [\"z1\", \"z2\"]\ncontrols = [\"c\"]\nerrors = { kind = \"cluster\", by = \"g\" }"),
    ("ols_subsample", "estimator = \"ols\"\nregressors = [\"x\"]\ncontrols = [\"c\"]\nsample = \"c > 0\"\nerrors = \"hc1\""),
    ("tsls_fe", "estimator = \"2sls\"\nendogenous = [\"x\"]\ninstruments = [\"z1\", \"z2\"]\ncontrols = [\"c\"]\nfixed_effects = [\"r\"]\nerrors = \"hc1\""),
];

fn plan(specs: &[(&str, &str)]) -> String {
    let mut out = head("Shared column blocks");
    for (id, body) in specs {
        let _ = write!(
            out,
            "\n[[specification]]\nid = \"{id}\"\noutcome = \"y\"\n{body}\n"
        );
    }
    out
}

#[test]
fn shared_blocks_give_each_specification_its_own_bits() {
    let f = fixture("weights_fe.json");
    let data = csv(&f["data"], &["g", "r", "s", "y", "x", "c", "z1", "z2", "w"]);
    let together = Study::with(&plan(&SPECS), &data).seal_and_run();
    for spec in &SPECS {
        let alone = Study::with(&plan(std::slice::from_ref(spec)), &data).seal_and_run();
        let (a, b) = (
            &together["specifications"][spec.0],
            &alone["specifications"][spec.0],
        );
        assert!(a.is_object(), "{} has results", spec.0);
        assert_eq!(a, b, "{} with the other specifications and alone", spec.0);
    }
    // The weighted and plain fits differ, so a leak would show.
    assert_ne!(
        together["specifications"]["ols_plain"]["terms"],
        together["specifications"]["ols_weighted"]["terms"]
    );
}
