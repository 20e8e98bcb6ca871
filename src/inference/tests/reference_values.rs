//! Point values against scipy (1.17.1, `scipy.stats`) at full double precision; the call that
//! produced each expected number is written beside it. Where scipy itself is less accurate
//! than this module, the value comes from mpmath 1.3.0 at 60 significant digits instead.

use super::{assert_rel, chi2, f, t, LIBRARY};
use crate::distribution::Reference;
use crate::inference::{lower_tail, quantile, upper_tail};

/// Tail probabilities in the body and moderate tails.
#[test]
fn tails_match_scipy() {
    let z = Reference::Normal;
    let cases = [
        (upper_tail(&z, 1.5), 0.06680720126885807), // stats.norm.sf(1.5)
        (upper_tail(&z, 6.0), 9.865876450376946e-10), // stats.norm.sf(6)
        (upper_tail(&z, 8.0), 6.22096057427174e-16), // stats.norm.sf(8)
        (lower_tail(&z, -3.0), 0.0013498980316300933), // stats.norm.cdf(-3)
        (upper_tail(&z, -3.0), 0.9986501019683699), // stats.norm.sf(-3)
        (upper_tail(&t(10.0), 2.0), 0.03669401738537018), // stats.t.sf(2.0, 10)
        (upper_tail(&t(7.0), -1.2), 0.8654140315863967), // stats.t.sf(-1.2, 7)
        (lower_tail(&t(2385.0), -4.5), 3.560800110996441e-06), // stats.t.cdf(-4.5, 2385)
        (upper_tail(&t(119.0), 40.0), 3.7468400433220695e-71), // stats.t.sf(40, 119)
        (upper_tail(&f(4.0, 50.0), 3.0), 0.026963406052932723), // stats.f.sf(3.0, 4, 50)
        (lower_tail(&f(6.0, 12.0), 0.3), 0.07486798001534646), // stats.f.cdf(0.3, 6, 12)
        (upper_tail(&f(1.0, 2385.0), 185.0), 1.2355601831826235e-40), // stats.f.sf(185.0, 1, 2385)
        (upper_tail(&chi2(5.0), 12.0), 0.03478778050624185), // stats.chi2.sf(12.0, 5)
        (lower_tail(&chi2(7.0), 0.5), 0.000553518609575035), // stats.chi2.cdf(0.5, 7)
        (upper_tail(&chi2(12.0), 900.0), 5.743889192091003e-185), // stats.chi2.sf(900, 12)
    ];
    for (i, (actual, expected)) in cases.into_iter().enumerate() {
        assert_rel(actual, expected, LIBRARY, &format!("case {i}"));
    }
    // mpmath: betainc(5e8, 15, 0, 1e9/(1e9+180), regularized=True) = 2.5403561683454529e-23
    // (a huge denominator df, where scipy was not consulted).
    assert_rel(
        upper_tail(&f(30.0, 1e9), 6.0),
        2.540_356_168_345_452_9e-23,
        LIBRARY,
        "F(30, 1e9) at 6",
    );
    // mpmath: erfc(37/sqrt(2))/2 = 5.7255712225245771e-300 (scipy's norm.sf(37) is off by 1e-13).
    assert_rel(
        upper_tail(&z, 37.0),
        5.725_571_222_524_577e-300,
        LIBRARY,
        "Q(37)",
    );
}

/// Quantiles (critical values) at full precision.
#[test]
fn quantiles_match_scipy() {
    let cases = [
        (quantile(&Reference::Normal, 0.975), 1.959963984540054), // stats.norm.ppf(0.975)
        (quantile(&t(1.0), 0.975), 12.706204736174694),           // stats.t.ppf(0.975, 1)
        (quantile(&t(2.0), 0.975), 4.302652729749462),            // stats.t.ppf(0.975, 2)
        (quantile(&t(5.0), 0.975), 2.5705818356363146),           // stats.t.ppf(0.975, 5)
        (quantile(&t(10.0), 0.975), 2.228138851986274),           // stats.t.ppf(0.975, 10)
        (quantile(&t(120.0), 0.975), 1.9799304050824402),         // stats.t.ppf(0.975, 120)
        (quantile(&t(10000.0), 0.975), 1.960201239890626),        // stats.t.ppf(0.975, 10000)
        (quantile(&t(30.0), 0.995), 2.7499956535672254),          // stats.t.ppf(0.995, 30)
        (quantile(&t(2385.0), 0.975), 1.9609591439183824),        // stats.t.ppf(0.975, 2385)
        (quantile(&f(3.0, 20.0), 0.95), 3.098391212140781),       // stats.f.ppf(0.95, 3, 20)
        (quantile(&f(2.0, 10.0), 0.99), 7.559432157547899),       // stats.f.ppf(0.99, 2, 10)
        (quantile(&f(10.0, 2000.0), 0.95), 1.8354250908518406),   // stats.f.ppf(0.95, 10, 2000)
        (quantile(&chi2(1.0), 0.95), 3.841458820694124),          // stats.chi2.ppf(0.95, 1)
        (quantile(&chi2(10.0), 0.99), 23.209251158954356),        // stats.chi2.ppf(0.99, 10)
        (quantile(&chi2(3.0), 1e-10), 5.20939762143448e-07),      // stats.chi2.ppf(1e-10, 3)
    ];
    for (i, (actual, expected)) in cases.into_iter().enumerate() {
        assert_rel(actual, expected, LIBRARY, &format!("case {i}"));
    }
}
