//! Error-free transformations of floating-point sums and products: the exact rounding error
//! of one `+` or `×`, returned beside the rounded result (Knuth, TAOCP vol. 2, 4.2.2; Dekker
//! 1971). The compensated dot products of `estimate::refine` and the double-double numbers
//! of `inference::special::extended` are built on these three functions.

/// a + b = s + e exactly, with s = fl(a + b) (Knuth's TwoSum; no condition on a and b).
#[inline(always)]
pub fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let z = s - a;
    (s, (a - (s - z)) + (b - z))
}

/// a + b = s + e exactly, with s = fl(a + b), provided |a| ≥ |b| (Dekker's fast TwoSum).
#[inline(always)]
pub fn quick_two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    (s, b - (s - a))
}

/// a · b = p + e exactly, with p = fl(a · b) (one fused multiply-add).
#[inline(always)]
pub fn two_prod(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    (p, a.mul_add(b, -p))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 1 + 2⁻⁶⁰ rounds to 1; the error term holds the lost 2⁻⁶⁰ exactly.
    #[test]
    fn sums_keep_what_rounding_drops() {
        let tiny = 2f64.powi(-60);
        assert_eq!(two_sum(1.0, tiny), (1.0, tiny));
        assert_eq!(two_sum(tiny, 1.0), (1.0, tiny));
        assert_eq!(quick_two_sum(1.0, tiny), (1.0, tiny));
        assert_eq!(two_sum(1.0, -1.0), (0.0, 0.0));
    }

    /// (1 + 2⁻³⁰)² = 1 + 2⁻²⁹ + 2⁻⁶⁰: the product rounds away 2⁻⁶⁰, the error term keeps it.
    #[test]
    fn products_keep_what_rounding_drops() {
        let a = 1.0 + 2f64.powi(-30);
        assert_eq!(two_prod(a, a), (1.0 + 2f64.powi(-29), 2f64.powi(-60)));
    }
}
