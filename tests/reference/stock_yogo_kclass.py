#!/usr/bin/env python3
"""Monte Carlo check of Stock and Yogo's (2005) k-class critical values, one endogenous regressor.

Regenerate from the crate root with

    nice -n 10 python3 tests/reference/stock_yogo_kclass.py

(needs numpy and scipy; about 10 minutes on one core). Output:
tests/reference/fixtures/weak_stock_yogo_kclass.json, read by src/estimate/weak_tests.rs.

What is checked
  * LIML_SIZE below is Stock and Yogo (2005), Table 5.4 (critical values of the Cragg-Donald
    statistic for a maximal size of the nominal 5% LIML Wald test of 10/15/20/25%, one
    endogenous regressor), rows K = 1..10 excluded instruments, ALL TYPED FROM MEMORY, as in
    src/estimate/weak.rs. Each value is checked against a seeded simulation of the published
    definition, computed here independently of sworn.
  * FULLER_BIAS below is what we remember of Stock and Yogo (2005), Table 5.3 (Fuller-k with
    constant 1, relative bias 5/10/20/30%). It is NOT carried by sworn: the same kind of
    simulation does not confirm it (differences of 3-6% in rows K <= 3, always in the same
    direction), so sworn gives Fuller specifications no Stock-Yogo values. The simulated
    values are recorded for the record only.

The weak-instrument limit (Staiger and Stock 1997; Stock and Yogo 2005), one endogenous
regressor, the null beta = 0, errors (u, V) with unit variances and correlation rho, the
exogenous regressors partialled out and Z'Z normalised to the identity:
    z_u = (Z'Z)^{-1/2} Z'u ~ N(0, I_K),   zeta = (Z'Z)^{-1/2} Z'Y = lambda + z_v,
    corr(z_u, z_v) = rho (elementwise), |lambda|^2 = mu2 (the concentration parameter),
and the residual part (y, Y)' M_Z (y, Y) / T tends to Sigma = [[1, rho], [rho, 1]] (fixed K,
T -> infinity), so the Wishart part is replaced by its limit. With the 2 x 2 matrix
S = [z_u, zeta]'[z_u, zeta] (entries s_uu, s_uv, s_vv):
    T (k_LIML - 1) -> kappa = smallest root of det(S - kappa Sigma) = 0,
    beta_hat(k) -> (s_uv - kappa' rho) / (s_vv - kappa'),  kappa' = kappa (LIML) or kappa - 1
                   (Fuller with constant 1: k = k_LIML - 1/(T - K_total)),
    sigma_hat^2 -> 1 - 2 rho beta_hat + beta_hat^2,
    Wald t^2 (conventional k-class variance sigma_hat^2 / Y'(I - k M_Z)Y)
           -> beta_hat^2 (s_vv - kappa) / (1 - 2 rho beta_hat + beta_hat^2),
    OLS bias -> rho, so the Fuller relative bias is E[beta_hat] / rho.
Only scalar statistics of the normal draws enter: with z_u = rho z_v + sqrt(1 - rho^2) xi and
lambda along the first axis, s_uu, s_uv and s_vv are functions of z_v'z_v, z_v'xi, xi'xi,
z_v[0], xi[0], mu2 and rho, so one set of draws (common random numbers) serves every mu2 and
rho.

The Cragg-Donald statistic tends to chi2'_K(mu2)/K, so Stock and Yogo's critical value for a
maximal size r is c = ncx2.ppf(0.95, K, mu2_r)/K with mu2_r the smallest mu2 at which the
worst case over rho of P(t^2 > chi2_1(0.95)) is r. For each remembered c this script
records (a) mu2 implied by c, (b) the simulated worst-case size there (to compare with r),
(c) the critical value solved from the simulation (mu2_r by bisection, then the quantile),
and (d) the worst-case size at the values of the neighbouring rows (same level), to show
what a slip of one row would do to the check. The worst case over rho in [0, 1] takes a grid of 21 points and then a grid of 21
points between the neighbours of the best one (resolution 0.005; the size is flat near its
maximum). The Monte Carlo
standard error of (c) is the binomial standard error of the size at mu2_r divided by the
slope of the worst-case size in c there (a central difference). Fuller: the relative bias
decreases in rho, its supremum is the limit rho -> 0, taken at rho = 0.01 with the
antithetic estimator (beta_hat(rho) - beta_hat(-rho)) / (2 rho) on the same draws (exact in
expectation, beta_hat being odd under (rho, z_u) -> (-rho, -z_u)); the simulation also
records the relative bias on a grid of rho to show the decrease.

The simulator is checked against a closed form: with K = 1, LIML is 2SLS (kappa = 0) and
the worst case is rho = 1, where t^2 = z^2 (lambda + z)^2 / lambda^2 with z standard
normal, so the size is a sum of normal probabilities (exact_one_instrument); the script
asserts agreement within 4 standard errors and records the exact critical values.

This derivation and code are ours; only the definitions (maximal size of the nominal 5%
Wald test, relative bias to OLS, the Cragg-Donald statistic and its limit) are Stock and
Yogo's.
"""
import json
import os
import platform

import numpy as np
import scipy
from scipy.optimize import brentq
from scipy.stats import chi2, ncx2, norm

SEED = 20261216
DRAWS = 1_000_000
OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "fixtures")
VERSIONS = {"numpy": np.__version__, "scipy": scipy.__version__,
            "python": platform.python_version()}
CHI2_1 = chi2.ppf(0.95, 1)
SIZE_LEVELS = [0.10, 0.15, 0.20, 0.25]
BIAS_LEVELS = [0.05, 0.10, 0.20, 0.30]

# Stock and Yogo (2005) Table 5.4, one endogenous regressor (typed from memory; the same
# numbers as LIML_WALD_SIZE in src/estimate/weak.rs).
LIML_SIZE = {1: [16.38, 8.96, 6.66, 5.53], 2: [8.68, 5.33, 4.42, 3.92], 3: [6.46, 4.36, 3.69, 3.32],
             4: [5.44, 3.87, 3.30, 2.98], 5: [4.84, 3.56, 3.05, 2.77], 6: [4.45, 3.34, 2.87, 2.61],
             7: [4.18, 3.18, 2.73, 2.49], 8: [3.97, 3.04, 2.63, 2.39], 9: [3.81, 2.93, 2.54, 2.32],
             10: [3.68, 2.84, 2.46, 2.25]}

# What we remember of Stock and Yogo (2005) Table 5.3 (Fuller-k, constant 1), for the
# record only: NOT confirmed by the simulation below and not carried by sworn.
FULLER_BIAS = {1: [24.09, 19.36, 15.64, 12.71], 2: [13.46, 10.89, 9.00, 7.49],
               3: [9.61, 7.90, 6.61, 5.60], 4: [7.63, 6.37, 5.38, 4.63], 5: [6.42, 5.44, 4.62, 4.03]}


class Draws:
    """Scalar statistics of DRAWS pairs of independent N(0, I_K) vectors z_v and xi."""

    def __init__(self, rng, k):
        self.k = k
        self.a, self.b, self.c = np.zeros(DRAWS), np.zeros(DRAWS), np.zeros(DRAWS)
        for j in range(k):
            zv, xi = rng.normal(size=DRAWS), rng.normal(size=DRAWS)
            self.a += zv * zv
            self.b += zv * xi
            self.c += xi * xi
            if j == 0:
                self.v1, self.x1 = zv, xi

    def limit(self, mu2, rho):
        """(s_uv, s_vv, kappa_LIML) of the weak-instrument limit for every draw."""
        m, s = np.sqrt(mu2), np.sqrt(max(1.0 - rho * rho, 0.0))
        s_uu = rho * rho * self.a + 2 * rho * s * self.b + s * s * self.c
        s_uv = rho * (self.a + m * self.v1) + s * (self.b + m * self.x1)
        s_vv = self.a + 2 * m * self.v1 + mu2
        # det(S - kappa Sigma) = (1 - rho^2) kappa^2 - q1 kappa + q0; the smaller root in the
        # form that stays accurate as 1 - rho^2 -> 0.
        q2 = 1.0 - rho * rho
        q1 = s_uu + s_vv - 2 * rho * s_uv
        q0 = np.maximum(s_uu * s_vv - s_uv * s_uv, 0.0)
        kappa = 2 * q0 / (q1 + np.sqrt(np.maximum(q1 * q1 - 4 * q2 * q0, 0.0)))
        return s_uv, s_vv, kappa

    def liml_size(self, mu2, rho):
        """P(t^2 > chi2_1(0.95)) for the LIML Wald test of the true null."""
        s_uv, s_vv, kappa = self.limit(mu2, rho)
        # At rho = 1, s_vv - kappa = (|lambda| + z_v[0])^2 can round to 0; t^2 tends to 0
        # there (no rejection), and the NaN it gives compares False, which is the same.
        with np.errstate(divide="ignore", invalid="ignore"):
            beta = (s_uv - kappa * rho) / (s_vv - kappa)
            t2 = beta * beta * (s_vv - kappa) / (1 - 2 * rho * beta + beta * beta)
        return float(np.mean(t2 > CHI2_1))

    def fuller_relative_bias(self, mu2, rho):
        """E[beta_hat_Fuller] / rho by the antithetic estimator; (mean, standard error)."""
        def beta(r):
            s_uv, s_vv, kappa = self.limit(mu2, r)
            return (s_uv - (kappa - 1) * r) / (s_vv - (kappa - 1))
        d = (beta(rho) - beta(-rho)) / (2 * rho)
        return float(d.mean()), float(d.std() / np.sqrt(DRAWS))


def worst_size(draws, mu2):
    """(max over rho in [0, 1] of the LIML size, the maximising rho); two-stage grid."""
    coarse = np.linspace(0.0, 1.0, 21)
    sizes = [draws.liml_size(mu2, r) for r in coarse]
    i = int(np.argmax(sizes))
    fine = np.linspace(coarse[max(i - 1, 0)], coarse[min(i + 1, 20)], 21)
    sizes = [draws.liml_size(mu2, r) for r in fine]
    j = int(np.argmax(sizes))
    return sizes[j], float(fine[j])


def implied_mu2(c, k):
    """mu2 with ncx2.ppf(0.95, K, mu2)/K = c (0 when c is at or below the central quantile)."""
    if c * k <= chi2.ppf(0.95, k):
        return 0.0
    return brentq(lambda m: ncx2.ppf(0.95, k, m) / k - c, 1e-10, 1e4, xtol=1e-12)


def solve(f, start):
    """The root of f, decreasing in mu2, by bisection from a bracket grown around start."""
    lo, hi = start * 0.85, start * 1.15 + 0.05
    while f(lo) < 0:
        lo *= 0.7
    while f(hi) > 0:
        hi = hi * 1.4 + 0.1
    return brentq(f, lo, hi, xtol=1e-3 * start + 1e-4)


def critical(mu2, k):
    return float(ncx2.ppf(0.95, k, mu2) / k) if mu2 > 0 else float(chi2.ppf(0.95, k) / k)


def check_liml(rng):
    rows = {}
    for k, row in LIML_SIZE.items():
        draws = Draws(rng, k)
        cells = []
        for level, remembered in zip(SIZE_LEVELS, row):
            mu2_c = implied_mu2(remembered, k)
            size_c, rho_c = worst_size(draws, mu2_c)
            mu2_r = solve(lambda m: worst_size(draws, m)[0] - level, mu2_c)
            c_sim = critical(mu2_r, k)
            h = 0.02 * c_sim
            up, down = worst_size(draws, implied_mu2(c_sim + h, k))[0], worst_size(
                draws, implied_mu2(c_sim - h, k))[0]
            slope = (up - down) / (2 * h)
            se = np.sqrt(level * (1 - level) / DRAWS) / abs(slope)
            column = SIZE_LEVELS.index(level)
            neighbours = {str(j): worst_size(draws, implied_mu2(LIML_SIZE[j][column], k))[0]
                          for j in (k - 1, k + 1) if j in LIML_SIZE}
            cells.append({"level": level, "remembered": remembered, "implied_mu2": mu2_c,
                          "size_at_remembered": size_c, "worst_rho_at_remembered": rho_c,
                          "simulated": c_sim, "simulated_mu2": mu2_r, "mc_se": float(se),
                          "size_slope": float(slope),
                          "size_at_neighbouring_rows": neighbours,
                          "relative_difference": c_sim / remembered - 1})
            print(f"LIML K={k} r={level}: remembered {remembered}, simulated {c_sim:.3f} "
                  f"(se {se:.3f}), size at remembered {size_c:.4f} (rho {rho_c:.4f})", flush=True)
        rows[str(k)] = cells
    return rows


def exact_one_instrument(mu2):
    """Size of the K = 1 Wald test at rho = 1 in closed form (a check of the simulator).

    With one instrument LIML is 2SLS (kappa = 0) and at rho = 1, z_u = z_v = z:
    t^2 = z^2 (lambda + z)^2 / lambda^2, so the test rejects when |z^2 + lambda z| > 1.96
    lambda, a union of intervals of the standard normal z.
    """
    lam = np.sqrt(mu2)
    k = np.sqrt(CHI2_1) * lam
    r1, r2 = (-lam - np.sqrt(lam * lam + 4 * k)) / 2, (-lam + np.sqrt(lam * lam + 4 * k)) / 2
    p = norm.cdf(r1) + norm.sf(r2)
    d = lam * lam - 4 * k
    if d > 0:
        p += norm.cdf((-lam + np.sqrt(d)) / 2) - norm.cdf((-lam - np.sqrt(d)) / 2)
    return float(p)


def check_simulator(rng):
    """The simulated size at rho = 1 against the closed form, K = 1, at each row-1 value;
    also the critical values the closed form gives for each level (exact_critical_value)."""
    draws = Draws(rng, 1)
    out = []
    for level, c in zip(SIZE_LEVELS, LIML_SIZE[1]):
        mu2 = implied_mu2(c, 1)
        simulated, exact = draws.liml_size(mu2, 1.0), exact_one_instrument(mu2)
        se = np.sqrt(exact * (1 - exact) / DRAWS)
        assert abs(simulated - exact) < 4 * se, (c, simulated, exact)
        mu2_exact = brentq(lambda m: exact_one_instrument(m) - level, 1e-8, 100, xtol=1e-14)
        out.append({"level": level, "critical_value": c, "mu2": mu2, "simulated": simulated,
                    "exact": exact, "exact_critical_value": critical(mu2_exact, 1)})
    return out


def check_fuller(rng):
    rows = {}
    for k, row in FULLER_BIAS.items():
        draws = Draws(rng, k)
        cells = []
        for level, remembered in zip(BIAS_LEVELS, row):
            mu2_c = implied_mu2(remembered, k)
            bias_c = draws.fuller_relative_bias(mu2_c, 0.01)
            by_rho = {str(r): draws.fuller_relative_bias(mu2_c, r)[0] for r in [0.01, 0.25, 0.5, 0.75, 0.99]}
            mu2_b = solve(lambda m: draws.fuller_relative_bias(m, 0.01)[0] - level, mu2_c)
            c_sim = critical(mu2_b, k)
            cells.append({"level": level, "remembered": remembered, "implied_mu2": mu2_c,
                          "relative_bias_at_remembered": bias_c[0], "its_se": bias_c[1],
                          "relative_bias_by_rho": by_rho, "simulated": c_sim,
                          "relative_difference": c_sim / remembered - 1})
            print(f"Fuller K={k} b={level}: remembered {remembered}, simulated {c_sim:.3f}, "
                  f"relative bias at remembered {bias_c[0]:.4f}", flush=True)
        rows[str(k)] = cells
    return rows


def main():
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(SEED)
    expected = {"draws": DRAWS, "simulator_one_instrument": check_simulator(rng),
                "liml_wald_size": check_liml(rng),
                "fuller_relative_bias_unconfirmed": check_fuller(rng)}
    doc = {"case": "weak_stock_yogo_kclass",
           "description": "Stock-Yogo k-class critical values against a seeded simulation of the "
                          "weak-instrument limit (numpy, scipy.stats.ncx2)",
           "seed": SEED, "versions": VERSIONS, "data": {"unused": [0.0]}, "setup": {},
           "expected": expected}
    with open(os.path.join(OUT, "weak_stock_yogo_kclass.json"), "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
