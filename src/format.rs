//! Numbers as text: the one spelling of an estimate and of a p-value, shared by the report and
//! by the messages the analysis writes (decision rules, degenerate data).
//!
//! A leaf module: it uses nothing else in the crate, so any layer may depend on it.

/// A number for display: fixed with 3 decimals in the usual range, scientific outside it.
/// A value that is not finite is not a number the data support: it shows as "n/a".
pub fn num(x: f64) -> String {
    if !x.is_finite() {
        return "n/a".to_string();
    }
    let a = x.abs();
    if x == 0.0 {
        "0.000".to_string()
    } else if (1e-6..1e-3).contains(&a) {
        // Three significant digits without an exponent (0.000477, not 4.770e-4).
        let decimals = (2.0 - a.log10().floor()) as usize;
        format!("{x:.decimals$}")
    } else if !(1e-3..1e6).contains(&a) {
        format!("{x:.3e}")
    } else {
        format!("{x:.3}")
    }
}

/// A p-value for display; values below 1e-300 (or underflowing to 0) print as such.
pub fn pval(p: f64) -> String {
    if !(0.0..=1.0).contains(&p) {
        "n/a".to_string()
    } else if p < 1e-300 {
        "< 1e-300".to_string()
    } else if p < 1e-4 {
        format!("{p:.2e}")
    } else {
        format!("{p:.4}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_and_p_values() {
        assert_eq!(num(0.0), "0.000");
        assert_eq!(num(-1.90123), "-1.901");
        assert_eq!(num(0.000431), "0.000431");
        assert_eq!(num(4.2e-7), "4.200e-7");
        assert_eq!(num(2.5e7), "2.500e7");
        assert_eq!(num(f64::INFINITY), "n/a");
        assert_eq!(pval(f64::NAN), "n/a");
        assert_eq!(pval(1.5), "n/a");
        assert_eq!(pval(1e-310), "< 1e-300");
        assert_eq!(pval(3.2e-7), "3.20e-7");
        assert_eq!(pval(0.01234), "0.0123");
    }
}
