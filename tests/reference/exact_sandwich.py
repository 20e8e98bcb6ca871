#!/usr/bin/env python3
"""Exact reference for OLS and 2SLS coefficients with HC1 and CR1 standard errors, and for
the endogeneity and over-identification statistics of the 2SLS fit.

Regenerate from the crate root with

    python3 tests/reference/exact_sandwich.py

(needs numpy and mpmath). Writes tests/reference/fixtures/exact_sandwich.json, read by
src/estimate/reference_tests_exact.rs, which compares to 1e-14 relative.

Source of every expected value: exact rational arithmetic (Python ints and
fractions.Fraction) on the exact binary values of the f64 data; square roots in mpmath at
50 digits. No statistics package is used.

The data are not stored. Both this script and the Rust test build them from the integer
formulas in `row` below: every value is an integer numerator divided once by 100.0 or
1000.0, a correctly rounded IEEE division that gives the same f64 in Python
(`float(k) / 1000.0`) and in Rust (`k as f64 / 1000.0`). The reference then works on
Fraction(that f64), the exact binary value, so the expected numbers are the exact values
for the very matrices the Rust side fits. An FNV-1a digest of the f64 bit patterns is stored
so the Rust test can confirm it regenerated the same data. Every `%` has a non-negative
left operand, so Python's and Rust's remainders agree.

Definitions (k = 5 coefficients, n rows, G clusters):
  * OLS of y on X = [d, 1, w1, w2, w3] (this order): b = (X'X)^-1 X'y, u = y - X b.
  * 2SLS: Z = [z, z2, 1, w1, w2, w3], Xh = P_Z X, b = (Xh'Xh)^-1 Xh'y, u = y - X b
    (structural residuals), and Xh in place of X in the sandwich below.
  * HC1: V = n/(n-k) (X'X)^-1 (sum_i u_i^2 x_i x_i') (X'X)^-1.
  * CR1: V = G/(G-1) (n-1)/(n-k) (X'X)^-1 (sum_g s_g s_g') (X'X)^-1, s_g = sum_{i in g} x_i u_i.

Statistics of the 2SLS fit (p = 1 endogenous column d, Z as above with L = 6 columns; none
needs a square root, so every one is an exact rational before it is printed):
  * First-stage residuals Vh = M_Z d = d - Z (Z'Z)^-1 Z'd, exact.
  * Control function: OLS of y on R = [X | Vh] (k + p = 6 columns, this order) and the
    Wald statistic of the Vh coefficient divided by p, b_v^2 / V_vv, with V the HC1 or the
    CR1 sandwich of that regression as defined above, its own k + p in the factors.
  * delta = e_o'e_o - e_r'e_r, the drop in the residual sum of squares from the OLS of y on X
    (residuals e_o) to the OLS of y on R (residuals e_r). The script also checks exactly that
    delta = e_o'P_Z e_o + e_o'P_Vh e_o - e'P_Z e with e the 2SLS residuals (the quadratic
    forms compared by Durbin and by Wu).
  * Durbin = delta / (e_o'e_o / n).
  * Wu-Hausman = (delta / p) / ((e_o'e_o - delta) / (n - k - p)).
  * Sargan = n e'P_Z e / e'e and Basmann = (n - L) e'P_Z e / e'M_Z e, e the 2SLS residuals.
"""
import json
import os
import platform
import struct
import sys
import time
from fractions import Fraction
from math import gcd

import mpmath as mp
import numpy as np

mp.mp.dps = 50
N = 20000
DIGITS = 25
NAMES = ["d", "const", "w1", "w2", "w3"]
INSTRUMENTS = ["z", "z2", "const", "w1", "w2", "w3"]

FORMULAS = {
    "i": "0, 1, ..., n-1 (integer arithmetic throughout; every % has a non-negative left operand)",
    "w1": "((i*7919 + 13) % 2003) / 100.0",
    "w2": "((i*i*31 + i*17 + 5) % 1009 - 504) / 1000.0",
    "w3": "(50000 + 7*((i*104729 + 3) % 997) - 3489) / 1000.0",
    "z": "((i*2654435761) % 2^32) >> 31   (0 or 1)",
    "z2": "((i*6007 + i*i*3 + 11) % 1999 - 999) / 100.0",
    "e (integer)": "(i*i*97 + i*389 + 41) % 2001 - 1000",
    "d": "(1500*z + 2*z2n + 2*e + 3*w1n - 2000) / 1000.0, z2n and w1n the numerators of z2 and w1",
    "v (integer)": "(i*i*211 + i*7 + 3) % 1201 - 600",
    "g": "((i*i*7 + i*37) % 997 + i % 7) % 250   (250 clusters of uneven size)",
    "c (integer)": "((g*53) % 41 - 20) * 40",
    "y": "(2*dn + 15*w1n - 3*w2n + (w3n - 50000) + 500 + 7*e + v*(2 + 3*z + i % 5) + c) / 1000.0,"
         " dn, w1n, w2n, w3n the numerators of d, w1, w2, w3",
}


def row(i):
    """Integer numerators of one row (same formulas as FORMULAS and the Rust test)."""
    w1n = (i * 7919 + 13) % 2003
    w2n = (i * i * 31 + i * 17 + 5) % 1009 - 504
    w3n = 50000 + 7 * ((i * 104729 + 3) % 997) - 3489
    z = ((i * 2654435761) % 4294967296) >> 31
    z2n = (i * 6007 + i * i * 3 + 11) % 1999 - 999
    e = (i * i * 97 + i * 389 + 41) % 2001 - 1000
    dn = 1500 * z + 2 * z2n + 2 * e + 3 * w1n - 2000
    v = (i * i * 211 + i * 7 + 3) % 1201 - 600
    g = ((i * i * 7 + i * 37) % 997 + i % 7) % 250
    c = ((g * 53) % 41 - 20) * 40
    yn = 2 * dn + 15 * w1n - 3 * w2n + (w3n - 50000) + 500 + 7 * e + v * (2 + 3 * z + i % 5) + c
    return {
        "y": float(yn) / 1000.0,
        "d": float(dn) / 1000.0,
        "w1": float(w1n) / 100.0,
        "w2": float(w2n) / 1000.0,
        "w3": float(w3n) / 1000.0,
        "z": float(z),
        "z2": float(z2n) / 100.0,
        "g": g,
    }


# Order of the f64 values in the digest: row by row, these columns in this order.
DIGEST_COLUMNS = ["y", "d", "w1", "w2", "w3", "z", "z2"]


def fnv1a64(rows):
    """FNV-1a (64-bit) over the little-endian bytes of every f64, then of every cluster id
    as a little-endian u64."""
    h = 0xCBF29CE484222325
    prime = 0x100000001B3
    mask = (1 << 64) - 1
    for r in rows:
        data = b"".join(struct.pack("<d", r[c]) for c in DIGEST_COLUMNS)
        data += struct.pack("<Q", r["g"])
        for byte in data:
            h = ((h ^ byte) * prime) & mask
    return "%016x" % h


def log(*a):
    print(*a, file=sys.stderr, flush=True)


# ------------------------------------------------------------ exact linear algebra
def inverse(a):
    """Exact inverse of a square matrix (Gauss-Jordan on Fractions)."""
    n = len(a)
    m = [[Fraction(x) for x in r] + [Fraction(int(i == j)) for j in range(n)]
         for i, r in enumerate(a)]
    for c in range(n):
        p = next(r for r in range(c, n) if m[r][c] != 0)
        m[c], m[p] = m[p], m[c]
        pivot = m[c][c]
        m[c] = [x / pivot for x in m[c]]
        for r in range(n):
            if r != c and m[r][c] != 0:
                f = m[r][c]
                m[r] = [x - f * y for x, y in zip(m[r], m[c])]
    return [r[n:] for r in m]


def matmul(a, b):
    bt = list(zip(*b))
    return [[sum((x * y for x, y in zip(r, col)), Fraction(0)) for col in bt] for r in a]


def matvec(a, v):
    return [sum((x * y for x, y in zip(r, v)), Fraction(0)) for r in a]


def transpose(a):
    return [list(r) for r in zip(*a)]


def to_fractions(m):
    return [[Fraction(int(x)) for x in r] for r in m]


def over_common_denominator(fracs):
    """Integers N and D with fracs[j] = N[j] / D."""
    d = 1
    for f in fracs:
        d = d // gcd(d, f.denominator) * f.denominator
    return [int(f * d) for f in fracs], d


def text(fr):
    """A Fraction (or mpf) as a decimal string with DIGITS significant digits."""
    x = fr if isinstance(fr, mp.mpf) else mp.mpf(fr.numerator) / fr.denominator
    return mp.nstr(x, DIGITS, strip_zeros=False, min_fixed=-5, max_fixed=8)


# ------------------------------------------------------------ estimation
class Data:
    """The design as integer object arrays over one common power-of-two denominator."""

    def __init__(self, rows):
        self.n = len(rows)
        exact = {c: [Fraction(r[c]) for r in rows] for c in DIGEST_COLUMNS}
        # Every f64 is m / 2^e, so the largest denominator is a common one.
        den = max(f.denominator for col in exact.values() for f in col)
        self.scale = den
        self.col = {c: np.array([int(f * den) for f in v], dtype=object)
                    for c, v in exact.items()}
        assert all(Fraction(int(a), den) == f for c in exact
                   for a, f in zip(self.col[c], exact[c]))
        self.col["const"] = np.array([den] * self.n, dtype=object)
        g = np.array([r["g"] for r in rows])
        self.order = np.argsort(g, kind="stable")
        sg = g[self.order]
        self.starts = np.concatenate(([0], np.nonzero(sg[1:] != sg[:-1])[0] + 1))
        self.clusters = len(self.starts)

    def matrix(self, names):
        return np.column_stack([self.col[c] for c in names])


def sandwich(data, r, s_r, u, s_u, bread, kind):
    """Variance diagonal, exact. The regressors are r / s_r and the residuals u / s_u
    (integer arrays); bread is the exact (R'R)^-1 in true units."""
    n, k = r.shape
    scores = r * u[:, None]  # true scores = scores / (s_r * s_u)
    if kind == "hc1":
        meat = scores.T.dot(scores)
        factor = Fraction(n, n - k)
    else:
        sums = np.add.reduceat(scores[data.order], data.starts, axis=0)
        meat = sums.T.dot(sums)
        g = data.clusters
        factor = Fraction(g, g - 1) * Fraction(n - 1, n - k)
    den = (s_r * s_u) ** 2
    meat = [[Fraction(int(meat[a, b]), den) for b in range(k)] for a in range(k)]
    v = matmul(matmul(bread, meat), bread)
    return [factor * v[j][j] for j in range(k)]


def residuals(data, x, b):
    """Integer residuals U and their scale: y - X b = U / s_u exactly."""
    nums, den = over_common_denominator(b)
    u = data.col["y"] * den - x.dot(np.array(nums, dtype=object))
    return u, data.scale * den


def fit_ols(data):
    x = data.matrix(NAMES)
    xtx = x.T.dot(x)
    xty = x.T.dot(data.col["y"])
    inv_s = inverse(to_fractions(xtx))
    b = matvec(inv_s, [Fraction(int(v)) for v in xty])  # the scale cancels
    u, s_u = residuals(data, x, b)
    assert all(v == 0 for v in x.T.dot(u)), "OLS normal equations must hold exactly"
    bread = [[f * data.scale ** 2 for f in r] for r in inv_s]
    var = {kind: sandwich(data, x, data.scale, u, s_u, bread, kind) for kind in ("hc1", "cluster")}
    return b, var, (u, s_u)


def fit_tsls(data):
    x = data.matrix(NAMES)
    z = data.matrix(INSTRUMENTS)
    ztz = to_fractions(z.T.dot(z))
    ztx = to_fractions(z.T.dot(x))
    zty = [Fraction(int(v)) for v in z.T.dot(data.col["y"])]
    pi = matmul(inverse(ztz), ztx)  # Xh = Z pi, scale-free
    xhxh_s = matmul(transpose(ztx), pi)  # Xs' P_Z Xs
    inv_s = inverse(xhxh_s)
    b = matvec(inv_s, matvec(transpose(pi), zty))
    u, s_u = residuals(data, x, b)
    nums, d_pi = over_common_denominator([f for r in pi for f in r])
    nums = np.array(nums, dtype=object).reshape(len(pi), len(NAMES))
    xh = z.dot(nums)  # true Xh = xh / (scale * d_pi)
    assert all(v == 0 for v in xh.T.dot(u)), "2SLS normal equations must hold exactly"
    bread = [[f * data.scale ** 2 for f in r] for r in inv_s]
    s_xh = data.scale * d_pi
    var = {kind: sandwich(data, xh, s_xh, u, s_u, bread, kind) for kind in ("hc1", "cluster")}
    return b, var, (u, s_u)


def sum_of_squares(u, s_u):
    """u'u exactly for the vector u / s_u (u an integer array)."""
    return Fraction(int(u.dot(u)), s_u ** 2)


def projected_square(m, u, s_u):
    """u'P_M u exactly for the vector u / s_u; m an integer matrix at any scale (P_M is
    scale-free)."""
    mtu = [Fraction(int(v)) for v in m.T.dot(u)]
    coef = matvec(inverse(to_fractions(m.T.dot(m))), mtu)
    return sum((a * b for a, b in zip(mtu, coef)), Fraction(0)) / s_u ** 2


def exogeneity(data, ols_resid, tsls_resid):
    """Control-function statistic (HC1 and CR1), Durbin, Wu-Hausman, Sargan and Basmann,
    exact; see the module documentation. ols_resid and tsls_resid are (integer residuals,
    scale) from fit_ols and fit_tsls."""
    x = data.matrix(NAMES)
    z = data.matrix(INSTRUMENTS)
    n, k, l, p = data.n, x.shape[1], z.shape[1], 1
    # Vh = M_Z d: pi_d is scale-free, so Vh = (d_int * den - Z_int nums) / (scale * den).
    pi_d = matvec(inverse(to_fractions(z.T.dot(z))),
                  [Fraction(int(v)) for v in z.T.dot(data.col["d"])])
    nums, den = over_common_denominator(pi_d)
    vhat = data.col["d"] * den - z.dot(np.array(nums, dtype=object))
    assert all(v == 0 for v in z.T.dot(vhat)), "Vh must be orthogonal to Z exactly"
    assert any(v != 0 for v in vhat)
    # R = [X | Vh] = r / (scale * den).
    r = np.column_stack([x * den, vhat])
    s_r = data.scale * den
    inv_r = inverse(to_fractions(r.T.dot(r)))
    # b = (r'r)^-1 r'Y * s_r / scale; and R b = r (b / den) / scale, as `residuals` expects.
    b = [f * den for f in matvec(inv_r, [Fraction(int(v)) for v in r.T.dot(data.col["y"])])]
    u, s_u = residuals(data, r, [f / den for f in b])
    assert all(v == 0 for v in r.T.dot(u)), "control-function normal equations must hold exactly"
    bread = [[f * s_r ** 2 for f in row_] for row_ in inv_r]
    control = {}
    for kind in ("hc1", "cluster"):
        var = sandwich(data, r, s_r, u, s_u, bread, kind)
        control[kind] = b[k] ** 2 / var[k] / p  # Wald of the one Vh coefficient, over p
    rss_o = sum_of_squares(*ols_resid)
    delta = rss_o - sum_of_squares(u, s_u)
    # The same delta as the difference of the quadratic forms, exactly.
    e, s_e = tsls_resid
    forms = (projected_square(z, *ols_resid) + projected_square(vhat[:, None], *ols_resid)
             - projected_square(z, e, s_e))
    assert forms == delta, "delta must equal e_o'P_[Z,d] e_o - e'P_Z e exactly"
    explained = projected_square(z, e, s_e)
    total = sum_of_squares(e, s_e)
    return {
        "control_function": control,
        "durbin": delta / (rss_o / n),
        "wu_hausman": (delta / p) / ((rss_o - delta) / (n - k - p)),
        "sargan": n * explained / total,
        "basmann": (n - l) * explained / (total - explained),
    }


def condition(data):
    """2-norm condition number of the unit-norm-scaled design (information only)."""
    x = np.array(data.matrix(NAMES), dtype=float)
    x /= np.linalg.norm(x, axis=0)
    s = np.linalg.svd(x, compute_uv=False)
    return float(s[0] / s[-1])


def expected(b, var):
    return {
        "coef": [text(f) for f in b],
        "se": {kind: [text(mp.sqrt(mp.mpf(v.numerator) / v.denominator)) for v in vs]
               for kind, vs in var.items()},
    }


def main():
    t0 = time.time()
    rows = [row(i) for i in range(N)]
    data = Data(rows)
    log("data: n=%d clusters=%d scale=2^%d (%.1fs)"
        % (data.n, data.clusters, data.scale.bit_length() - 1, time.time() - t0))
    sizes = np.diff(np.append(data.starts, data.n))
    cond = condition(data)
    log("cluster sizes %d..%d; condition number (unit columns) %.3g" % (sizes.min(), sizes.max(), cond))
    b_ols, v_ols, r_ols = fit_ols(data)
    log("OLS done (%.1fs)" % (time.time() - t0))
    b_iv, v_iv, r_iv = fit_tsls(data)
    log("2SLS done (%.1fs)" % (time.time() - t0))
    stats = exogeneity(data, r_ols, r_iv)
    log("endogeneity and over-identification done (%.1fs)" % (time.time() - t0))
    doc = {
        "description": "OLS and 2SLS coefficients with HC1 and CR1 standard errors, and for "
                       "the 2SLS fit the endogeneity statistics (control function under HC1 "
                       "and under CR1, Durbin, Wu-Hausman) and the over-identification "
                       "statistics (Sargan, Basmann), on data generated from integer formulas "
                       "(nothing stored); see tests/reference/exact_sandwich.py for the "
                       "definitions. The test statistics need no square root and are exact "
                       "rationals before printing",
        "method": "exact rational arithmetic (fractions), square roots in mpmath at 50 digits",
        "versions": {"python": platform.python_version(), "mpmath": mp.__version__,
                     "numpy": np.__version__},
        "generator": {
            "n": N,
            "formulas": FORMULAS,
            "digest": "FNV-1a 64 over the little-endian bytes of y, d, w1, w2, w3, z, z2 "
                      "(f64) and g (u64), row by row",
            "fnv1a64": fnv1a64(rows),
        },
        "n": data.n,
        "k": len(NAMES),
        "clusters": data.clusters,
        "cluster_sizes": {"min": int(sizes.min()), "max": int(sizes.max())},
        "condition_number_unit_columns": round(cond, 3),
        "coefficient_order": NAMES,
        "ols": {"regressors": NAMES, **expected(b_ols, v_ols)},
        "tsls": {"endog": ["d"], "exog": ["const", "w1", "w2", "w3"],
                 "instruments": ["z", "z2"], **expected(b_iv, v_iv),
                 "endogeneity": {
                     "control_function": {kind: text(v) for kind, v in
                                          stats["control_function"].items()},
                     "durbin": text(stats["durbin"]),
                     "wu_hausman": text(stats["wu_hausman"])},
                 "overidentification": {"sargan": text(stats["sargan"]),
                                        "basmann": text(stats["basmann"])}},
    }
    here = os.path.dirname(os.path.abspath(__file__))
    path = os.path.join(here, "fixtures", "exact_sandwich.json")
    with open(path + ".tmp", "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")
    os.replace(path + ".tmp", path)
    log("wrote %s (%.1fs)" % (path, time.time() - t0))


if __name__ == "__main__":
    main()
