#!/usr/bin/env python3
"""Reference fixture for the robust Kleibergen K and CLR tests (src/estimate/clr/robust.rs).

Regenerate from the crate root with

    python3 tests/reference/clr_robust.py

(needs numpy, scipy and ivmodels from PyPI). Every data set is invented here from a seeded
generator (numpy default_rng); no external data. Writes
tests/reference/fixtures/clr_robust.json with the data, the setup, the expected values and
the library versions.

This is an independent implementation written from the published formulas in their moment
form, not from the Rust code (which works with the instruments' regression coefficients and
their sandwich covariance). Kleibergen (2005), "Testing parameters in GMM without assuming
that they are identified", Econometrica 73, 1103-1123:
  * section 3: the K statistic for moment conditions f_T(theta) with covariance V_ff and
    the Jacobian estimate made uncorrelated with the moments,
    D_T = q_T - V_qf V_ff^{-1} f_T,
    K = f' V_ff^{-1} D (D' V_ff^{-1} D)^{-1} D' V_ff^{-1} f, chi2(number of parameters);
  * section 5: the GMM form of Moreira's CLR statistic,
    CLR = 1/2 [AR - rk + sqrt((AR + rk)^2 - 4 (AR - K) rk)],
    AR = f' V_ff^{-1} f, with a rank statistic rk in place of Moreira's Q_T; for one
    parameter rk = D' V_qq.f^{-1} D, V_qq.f = V_qq - V_qf V_ff^{-1} V_fq; its p-value is
    Moreira's conditional one given rk.
(Equation numbers are not quoted and the section numbers are from memory: the paper was not
at hand when this was written; the formulas are stated in full above and implemented
literally below.)

The linear IV instance (one endogenous regressor x, instruments Z, exogenous W with the
constant): Zt = M_W Z, f = Zt'(y - x b0), q = Zt'x (the Jacobian up to sign, which K, rk and
CLR do not see). The covariances are estimated from the summands centred at their fitted
reduced-form means: e_hat = M_[Z|W](y - x b0), v_hat = M_[Z|W] x, and
  * hc0: V_ab = sum_i zt_i zt_i' a_i b_i; hc1: times n/(n - k), k = L + |W|;
  * hc3: a_i b_i / (1 - h_i)^2, h_i the leverage of [Z|W];
  * cluster (CR1): sum_g (sum_{i in g} zt_i a_i)(sum_{i in g} zt_i b_i)' times
    G/(G - 1) (n - 1)/(n - k);
for (a, b) in {(e_hat, e_hat), (v_hat, e_hat), (v_hat, v_hat)}.

The CLR p-value is ivmodels' conditional_likelihood_ratio_critical_value_function
(k = L, mx = 1, lambdas = [rk], "moreira2003conditional", tol = 1e-11): an outside
implementation of Moreira's conditional law. The K p-value is scipy's chi2(1) tail.

Confidence sets (95%) of each robust case: a brute-force scan of beta = centre +
scale * tan(theta) on SCAN + 1 points of theta in [-pi/2, pi/2], every change of membership
bisected to 1e-14 relative. The ends are the limit beta -> +-infinity: K, rk and CLR depend on
(y - x b0, x) only through their span (replacing x by x + c e leaves D unchanged), so the
limit is the statistic with e = x and y in the Jacobian's place; the script checks this
against beta = 1e5 * scale (to 1e-3 relative; farther out the
subtraction in V_qq.f loses the digits).

Homoskedastic limit (check b): on homoskedastic invented data at two sample sizes, ivmodels'
(homoskedastic) lagrange_multiplier_test and conditional_likelihood_ratio_test, with the hc0
statistics of this script beside them.
"""
import importlib.metadata
import json
import os
import platform

import numpy as np
import scipy
import scipy.stats
from ivmodels.tests import conditional_likelihood_ratio_test, lagrange_multiplier_test
from ivmodels.tests.conditional_likelihood_ratio import (
    conditional_likelihood_ratio_critical_value_function,
)

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "fixtures")
VERSIONS = {
    "ivmodels": importlib.metadata.version("ivmodels"),
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "python": platform.python_version(),
}
SCAN = 20000
ALPHA = 0.05


def resid(A, v):
    return v - A @ np.linalg.lstsq(A, v, rcond=None)[0]


class Moments:
    """The pieces of the moment form that do not depend on the null."""

    def __init__(self, y, x, Z, W, errors, clusters=None):
        n, L = Z.shape
        D = np.column_stack([Z, W])
        self.n, self.L, self.k = n, L, D.shape[1]
        self.Zt = np.column_stack([resid(W, Z[:, j]) for j in range(L)])
        self.y, self.x = y, x
        self.dy, self.dx = resid(D, y), resid(D, x)
        self.errors, self.clusters = errors, clusters
        if errors == "hc3":
            h = np.einsum("ij,ji->i", D, np.linalg.solve(D.T @ D, D.T))
            self.weight = 1.0 / (1.0 - h) ** 2
        else:
            self.weight = np.ones(n)

    def cov(self, a, b):
        """V_ab as in the module docstring."""
        Zt = self.Zt
        if self.errors == "cluster":
            ids = self.clusters
            groups = np.unique(ids)
            sa = np.array([Zt[ids == g].T @ a[ids == g] for g in groups])
            sb = np.array([Zt[ids == g].T @ b[ids == g] for g in groups])
            G = len(groups)
            c = G / (G - 1) * (self.n - 1) / (self.n - self.k)
            return c * sa.T @ sb
        v = (Zt * (self.weight * a * b)[:, None]).T @ Zt
        if self.errors == "hc1":
            v *= self.n / (self.n - self.k)
        return v

    def stats(self, w_e, w_g):
        """AR, K, rk, CLR for e = w_e[0] y + w_e[1] x and Jacobian direction
        g = w_g[0] y + w_g[1] x (the null b0 is w_e = (1, -b0), w_g = (0, 1))."""
        e = w_e[0] * self.y + w_e[1] * self.x
        g = w_g[0] * self.y + w_g[1] * self.x
        eh = w_e[0] * self.dy + w_e[1] * self.dx
        gh = w_g[0] * self.dy + w_g[1] * self.dx
        f, q = self.Zt.T @ e, self.Zt.T @ g
        vff, vqf, vqq = self.cov(eh, eh), self.cov(gh, eh), self.cov(gh, gh)
        Dj = q - vqf @ np.linalg.solve(vff, f)
        ar = f @ np.linalg.solve(vff, f)
        kk = (Dj @ np.linalg.solve(vff, f)) ** 2 / (Dj @ np.linalg.solve(vff, Dj))
        vqq_f = vqq - vqf @ np.linalg.solve(vff, vqf.T)
        rk = Dj @ np.linalg.solve(vqq_f, Dj)
        clr = 0.5 * (ar - rk + np.sqrt((ar + rk) ** 2 - 4 * (ar - kk) * rk))
        return ar, kk, rk, clr

    def tests(self, w_e, w_g):
        ar, kk, rk, clr = self.stats(w_e, w_g)
        p = conditional_likelihood_ratio_critical_value_function(
            k=self.L, mx=1, md=0, lambdas=np.array([rk]), z=clr,
            critical_values="moreira2003conditional", tol=1e-11,
        )
        return {
            "k": float(kk), "k_p_value": float(scipy.stats.chi2.sf(kk, 1)),
            "rk": float(rk), "clr": float(clr), "clr_p_value": float(p), "ar": float(ar),
        }


def bisect(inside, lo, hi, lo_in, to_beta):
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if mid in (lo, hi):
            break
        b_lo, b_hi = to_beta(lo), to_beta(hi)
        if np.isfinite(b_lo) and np.isfinite(b_hi) and abs(b_hi - b_lo) <= 1e-14 * max(
                abs(b_lo), abs(b_hi), 1e-300):
            break
        if inside(mid) == lo_in:
            lo = mid
        else:
            hi = mid
    return to_beta(0.5 * (lo + hi))


def scan_set(member):
    """Pieces of {theta: member(theta)}; member(+-pi/2) is the limit at infinity."""
    thetas = np.linspace(-np.pi / 2, np.pi / 2, SCAN + 1)
    flags = [member(t) for t in thetas]
    return flags, thetas


def pieces_of(flags, thetas, member, to_beta):
    bounds = []
    for j in range(SCAN):
        if flags[j] != flags[j + 1]:
            lo, hi = thetas[j], thetas[j + 1]
            lo = lo if j > 0 else np.nextafter(lo, 0.0)
            hi = hi if j + 1 < SCAN else np.nextafter(hi, 0.0)
            bounds.append(bisect(member, lo, hi, flags[j], to_beta))
    pieces, start = [], (-np.inf if flags[0] else None)
    for b in bounds:
        if start is None:
            start = b
        else:
            pieces.append([start, b])
            start = None
    if start is not None:
        pieces.append([start, np.inf])
    return pieces


def jsonable(pieces):
    return [[float(a) if np.isfinite(a) else str(a), float(b) if np.isfinite(b) else str(b)]
            for a, b in pieces]


def sets(m):
    """The 95% K and CLR sets by the scan."""
    # centre and scale only place the scan's points (any finite values would do): a
    # 2SLS-type estimate and its rough standard error
    fitted = m.Zt @ np.linalg.lstsq(m.Zt, m.x, rcond=None)[0]
    centre = float(fitted @ m.y / (fitted @ fitted))
    su2 = (m.dy - centre * m.dx) @ (m.dy - centre * m.dx) / m.n
    scale = float(np.sqrt(su2 / (fitted @ fitted)))

    def to_beta(t):
        if t <= -np.pi / 2:
            return -np.inf
        if t >= np.pi / 2:
            return np.inf
        return centre + scale * np.tan(t)

    def at(t):
        if abs(t) >= np.pi / 2:
            return m.tests((0.0, 1.0), (1.0, 0.0))
        return m.tests((1.0, -to_beta(t)), (0.0, 1.0))

    far = m.tests((1.0, -1e5 * scale), (0.0, 1.0))
    lim = at(np.pi / 2)
    for key in ("k", "clr_p_value"):
        assert abs(far[key] - lim[key]) <= 1e-3 * max(abs(lim[key]), 1e-3), (key, far, lim)
    crit = scipy.stats.chi2.ppf(1 - ALPHA, df=1)
    cache = {}

    def tests_at(t):
        if t not in cache:
            cache[t] = at(t)
        return cache[t]

    k_in = lambda t: tests_at(t)["k"] <= crit  # noqa: E731
    clr_in = lambda t: tests_at(t)["clr_p_value"] >= ALPHA  # noqa: E731
    thetas = np.linspace(-np.pi / 2, np.pi / 2, SCAN + 1)
    k_set = pieces_of([k_in(t) for t in thetas], thetas, k_in, to_beta)
    clr_set = pieces_of([clr_in(t) for t in thetas], thetas, clr_in, to_beta)
    return {"k_set": jsonable(k_set), "clr_set": jsonable(clr_set),
            "k_at_infinity": lim["k"], "clr_p_at_infinity": lim["clr_p_value"]}


def design(seed, n, L, pi, rho, beta, het, clusters=0):
    """Invented design: x = Z pi + c 0.3 + v, y = 1.5 + x beta - 0.7 c + u, corr(u, v) = rho;
    het scales u and v by (0.3 + |z1|)^het; clusters > 0 adds cluster shocks to u, v, z1."""
    rng = np.random.default_rng(seed)
    Z = rng.normal(size=(n, L))
    C = rng.normal(size=(n, 1))
    ids = None
    u0, e2 = rng.normal(size=n), rng.normal(size=n)
    if clusters:
        ids = np.sort(rng.integers(0, clusters, size=n))
        # make every cluster present, dense ids 0..G-1 in order
        _, ids = np.unique(ids, return_inverse=True)
        cu, cv, cz = (rng.normal(size=ids.max() + 1) for _ in range(3))
        u0 = u0 + cu[ids]
        e2 = e2 + cv[ids]
        Z[:, 0] += cz[ids]
    s = (0.3 + np.abs(Z[:, 0])) ** het
    u = s * u0
    v = s * (rho * u0 + np.sqrt(1 - rho**2) * e2)
    x = Z @ np.full(L, pi) + 0.3 * C[:, 0] + v
    y = 1.5 + x * beta - 0.7 * C[:, 0] + u
    return y, x, Z, C, ids


def pack(name, seed, y, x, Z, C, ids, errors, nulls):
    data = {f"z{j + 1}": Z[:, j].tolist() for j in range(Z.shape[1])}
    data.update({"c1": C[:, 0].tolist(), "y": y.tolist(), "x": x.tolist()})
    if ids is not None:
        data["g"] = [int(i) for i in ids]
    return {
        "name": name, "data": data,
        "setup": {"outcome": "y", "endog": ["x"],
                  "instruments": [f"z{j + 1}" for j in range(Z.shape[1])],
                  "exog": ["const", "c1"], "errors": errors,
                  "clusters": "g" if ids is not None else None,
                  "nulls": nulls, "confidence": 1 - ALPHA, "seed": seed},
    }


def robust_case(name, seed, n, L, pi, rho, beta, het, errors, clusters=0):
    y, x, Z, C, ids = design(seed, n, L, pi, rho, beta, het, clusters)
    W = np.column_stack([np.ones(n), C])
    m = Moments(y, x, Z, W, errors, ids)
    nulls = [0.0, beta, beta + 1.0]
    out = pack(name, seed, y, x, Z, C, ids, errors, nulls)
    out["expected"] = {"tests": [m.tests((1.0, -b0), (0.0, 1.0)) for b0 in nulls]}
    out["expected"].update(sets(m))
    return out


def homoskedastic_case(name, seed, n):
    """Homoskedastic data: ivmodels' LM and CLR at 0, with this script's hc0 values."""
    y, x, Z, C, ids = design(seed, n, 3, 0.1, 0.5, 0.3, het=0.0)
    W = np.column_stack([np.ones(n), C])
    X = x.reshape(-1, 1)
    lm, lm_p = lagrange_multiplier_test(Z, X, y, np.array([0.0]), C=C)
    clr, clr_p = conditional_likelihood_ratio_test(
        Z, X, y, np.array([0.0]), C=C, critical_values="moreira2003conditional", tol=1e-10)
    out = pack(name, seed, y, x, Z, C, ids, "hc0", [0.0])
    out["expected"] = {
        "ivmodels": {"lm": float(lm), "lm_p_value": float(lm_p),
                     "clr": float(clr), "clr_p_value": float(clr_p)},
        "hc0": Moments(y, x, Z, W, "hc0").tests((1.0, 0.0), (0.0, 1.0)),
    }
    return out


def main():
    robust = [
        robust_case("hc0_weak_three", 101, 150, 3, 0.12, 0.6, 0.5, 1.0, "hc0"),
        robust_case("hc1_strong_two", 202, 200, 2, 0.5, 0.4, 1.0, 1.0, "hc1"),
        robust_case("hc3_moderate_four", 303, 160, 4, 0.2, -0.5, -0.5, 0.8, "hc3"),
        robust_case("cluster_moderate_three", 404, 240, 3, 0.25, 0.6, 0.5, 0.5, "cluster",
                    clusters=40),
        robust_case("cluster_weak_two", 505, 180, 2, 0.05, 0.8, 0.0, 0.5, "cluster",
                    clusters=30),
    ]
    homosk = [homoskedastic_case("homoskedastic_small", 606, 200),
              homoskedastic_case("homoskedastic_large", 606, 4000)]
    os.makedirs(OUT, exist_ok=True)
    with open(os.path.join(OUT, "clr_robust.json"), "w") as fh:
        json.dump({"versions": VERSIONS, "alpha": ALPHA, "scan_cells": SCAN,
                   "robust": robust, "homoskedastic": homosk}, fh)
    for c in robust:
        e = c["expected"]
        print(c["name"], e["tests"][0], e["k_set"], e["clr_set"])
    for c in homosk:
        print(c["name"], c["expected"])


if __name__ == "__main__":
    main()
