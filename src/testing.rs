//! What the unit tests share: the committed reference fixtures and the tolerances every
//! comparison with them uses. Compiled for tests only.

use serde_json::Value;

/// Relative tolerance for values a reference library computes the same way (coefficients,
/// covariances, statistics from closed forms): agreement to about eight digits.
pub const FIXTURE_TOL: f64 = 1e-8;

/// The text of `tests/reference/fixtures/NAME` (NAME with its extension). A missing fixture
/// is a failure naming the file: fixtures are committed with the crate.
pub fn fixture_text(name: &str) -> String {
    let path = format!(
        "{}/tests/reference/fixtures/{name}",
        env!("CARGO_MANIFEST_DIR")
    );
    std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("fixture {path}: {e}"))
}

/// `tests/reference/fixtures/NAME` parsed as JSON (NAME with its extension).
pub fn fixture(name: &str) -> Value {
    serde_json::from_str(&fixture_text(name))
        .unwrap_or_else(|e| panic!("fixture {name} is not JSON: {e}"))
}

/// |a − b| relative to the larger of |b| and 1 (so values near zero compare absolutely).
pub fn rel_diff(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1.0)
}
