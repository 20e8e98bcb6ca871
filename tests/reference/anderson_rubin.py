#!/usr/bin/env python3
"""Reference fixtures for the Anderson-Rubin test and set (src/estimate/anderson_rubin.rs)
and for the tF critical value (src/estimate/tf.rs).

Regenerate from the crate root with

    python3 tests/reference/anderson_rubin.py

(needs numpy, scipy, statsmodels, pandas). Every data set is invented here from a seeded
generator (numpy default_rng); no external data. Writes tests/reference/fixtures/ar_*.json
with data, setup, expected values and library versions.

Where each expected value comes from:
  * AR(beta): statsmodels OLS of y - x*beta on [Z | W] with cov_type nonrobust / HC0 / HC1 /
    HC3 / cluster (groups g1) / two-way cluster (groups [g1, g2]) and its wald_test of the
    Z coefficients with use_f=True (Wald/L). For two-way, a covariance with a negative
    eigenvalue is clamped at zero (numpy eigh), the fix sworn applies (Cameron, Gelbach and
    Miller 2011, section 2.3); statsmodels does not clamp.
  * p-value and critical value: scipy.stats.f with df (L, n - L - |W|), or (L, G - 1) when
    clustered (two-way: the smaller G), the convention sworn uses.
  * Set endpoints: a dense grid (8001 points of beta = b_c + s*tan(theta)) evaluated with an
    independent numpy implementation of AR(beta) (checked against statsmodels at sampled
    points to 1e-9), every sign change of AR - c bracketed and refined by scipy brentq on the
    statsmodels AR function (xtol 1e-14 relative).
  * tF: see tf_reference() below.
"""
import json
import os
import platform

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm
from scipy import integrate, optimize, stats

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "fixtures")
VERSIONS = {
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "statsmodels": statsmodels.__version__,
    "python": platform.python_version(),
}


def sm_ar(d, beta, kind, L, g1, g2):
    """AR(beta) from statsmodels: Wald/L of the first L coefficients."""
    y = d["y"] - d["x"] * beta
    model = sm.OLS(y, d["D"])
    if kind == "classical":
        fit = model.fit()
    elif kind in ("hc0", "hc1", "hc3"):
        fit = model.fit(cov_type=kind.upper())
    elif kind == "cluster":
        fit = model.fit(cov_type="cluster", cov_kwds={"groups": g1})
    else:
        fit = model.fit(cov_type="cluster", cov_kwds={"groups": np.column_stack([g1, g2])})
    hyp = np.eye(d["D"].shape[1])[:L]
    if kind != "twoway":
        return float(fit.wald_test(hyp, use_f=True, scalar=True).statistic)
    v = np.asarray(fit.cov_params())
    w, q = np.linalg.eigh((v + v.T) / 2)
    if w.min() < 0:
        v = q @ np.diag(np.maximum(w, 0)) @ q.T
    b = np.asarray(fit.params)[:L]
    return float(b @ np.linalg.solve(v[:L, :L], b) / L)


def np_cov(D, u, kind, g1, g2):
    n, k = D.shape
    bread = np.linalg.inv(D.T @ D)

    def cr1(ids):
        labels = np.unique(ids, return_inverse=True)[1]
        sums = np.zeros((labels.max() + 1, k))
        np.add.at(sums, labels, D * u[:, None])
        g = sums.shape[0]
        return g / (g - 1) * (n - 1) / (n - k) * bread @ (sums.T @ sums) @ bread

    if kind == "classical":
        return u @ u / (n - k) * bread
    if kind in ("hc0", "hc1", "hc3"):
        w = u * u
        if kind == "hc3":
            h = np.einsum("ij,jk,ik->i", D, bread, D)
            w = w / (1 - h) ** 2
        v = bread @ (D.T * w) @ D @ bread
        return v * (n / (n - k) if kind == "hc1" else 1.0)
    if kind == "cluster":
        return cr1(g1)
    cells = g1.astype(np.int64) * (g2.max() + 1) + g2
    v = cr1(g1) + cr1(g2) - cr1(cells)
    w, q = np.linalg.eigh((v + v.T) / 2)
    if w.min() < 0:
        v = q @ np.diag(np.maximum(w, 0)) @ q.T
    return v


def np_ar(d, beta, kind, L, g1, g2):
    """AR(beta) by numpy: coefficients and residuals are linear in beta."""
    if "by" not in d:
        d["by"] = np.linalg.lstsq(d["D"], d["y"], rcond=None)[0]
        d["bx"] = np.linalg.lstsq(d["D"], d["x"], rcond=None)[0]
        d["ey"], d["ex"] = d["y"] - d["D"] @ d["by"], d["x"] - d["D"] @ d["bx"]
    b = d["by"] - beta * d["bx"]
    u = d["ey"] - beta * d["ex"]
    v = np_cov(d["D"], u, kind, g1, g2)
    return float(b[:L] @ np.linalg.solve(v[:L, :L], b[:L]) / L)


def ar_case(name, description, seed, n, L, kinds, make, beta0=0.0, confidence=0.95, shapes=None):
    rng = np.random.default_rng(seed)
    cols = make(rng, n)
    zn = [f"z{j + 1}" for j in range(L)]
    wn = ["const", "w1"]
    D = np.column_stack([cols[c] for c in zn] + [np.ones(n), cols["w1"]])
    d = {"y": cols["y"], "x": cols["x"], "D": D}
    g1, g2 = cols["g1"].astype(int), cols["g2"].astype(int)
    k = D.shape[1]
    # 2SLS centre and scale for the grid
    R = D[:, :L] - D[:, L:] @ np.linalg.lstsq(D[:, L:], D[:, :L], rcond=None)[0]
    px = np.linalg.lstsq(R, d["x"], rcond=None)[0]
    py = np.linalg.lstsq(R, d["y"], rcond=None)[0]
    rx, ry = R @ px, R @ py
    bc = rx @ ry / (rx @ rx)
    expected = {}
    for kind in kinds:
        df2 = n - k
        if kind == "cluster":
            df2 = len(np.unique(g1)) - 1
        if kind == "twoway":
            df2 = min(len(np.unique(g1)), len(np.unique(g2))) - 1
        crit = float(stats.f.ppf(confidence, L, df2))
        stat = sm_ar(d, beta0, kind, L, g1, g2)
        assert np.isclose(stat, np_ar(d, beta0, kind, L, g1, g2), rtol=1e-9)
        f = lambda b: sm_ar(d, b, kind, L, g1, g2) - crit
        theta = np.linspace(-np.pi / 2, np.pi / 2, 8001)[1:-1]
        scale = 3.0 * abs(bc) + 1.0
        betas = bc + scale * np.tan(theta)
        vals = np.array([np_ar(d, b, kind, L, g1, g2) for b in betas]) - crit
        for b in betas[::800]:
            assert np.isclose(np_ar(d, b, kind, L, g1, g2), sm_ar(d, b, kind, L, g1, g2), rtol=1e-9)
        roots = []
        for i in np.nonzero(np.sign(vals[:-1]) != np.sign(vals[1:]))[0]:
            a, b = betas[i], betas[i + 1]
            roots.append(optimize.brentq(f, a, b, xtol=1e-300, rtol=1e-14, maxiter=500))
        # limit as beta -> +-inf: the first-stage Wald/L, evaluated far out
        at_inf = f(bc + scale * 1e12) <= 0
        pieces = []
        start = -np.inf if at_inf else None
        for r in roots:
            if start is None:
                start = r
            else:
                pieces.append([start, r])
                start = None
        if start is not None:
            pieces.append([start, np.inf])
        js = [[None if not np.isfinite(a) else a, None if not np.isfinite(b) else b] for a, b in pieces]
        expected[kind] = {
            "statistic": stat,
            "p_value": float(stats.f.sf(stat, L, df2)),
            "df1": L,
            "df2": df2,
            "critical_value": crit,
            "pieces": js,
        }
        print(f"{name} {kind}: stat {stat:.4f} pieces {pieces}")
        expected[kind]["shape"] = shape_of(pieces)
        if shapes is not None:
            assert shape_of(pieces) == shapes[kind], (name, kind, pieces)
            expected[kind]["shape"] = shapes[kind]
    doc = {
        "case": name,
        "description": description,
        "seed": seed,
        "versions": VERSIONS,
        "data": {c: cols[c].tolist() for c in ["y", "x", "w1", "g1", "g2"] + zn},
        "setup": {
            "outcome": "y",
            "endog": ["x"],
            "instruments": zn,
            "exog": wn,
            "beta0": beta0,
            "confidence": confidence,
            "kinds": kinds,
        },
        "expected": expected,
    }
    with open(os.path.join(OUT, name + ".json"), "w") as fh:
        json.dump(doc, fh)


def shape_of(pieces):
    if not pieces:
        return "empty"
    if len(pieces) == 1:
        a, b = pieces[0]
        if np.isfinite(a) and np.isfinite(b):
            return "bounded"
        if not np.isfinite(a) and not np.isfinite(b):
            return "whole"
    if len(pieces) == 2 and not np.isfinite(pieces[0][0]) and not np.isfinite(pieces[1][1]):
        return "rays"
    return "other"


def maker(pi, beta, direct=None, rho=0.6, hetero=0.0, shock=0.5):
    """y = 1 + beta x + 0.2 w1 + direct'z + u, x = pi'z + 0.3 w1 + v, corr(u, v) = rho."""
    pi = np.asarray(pi, float)

    def make(rng, n):
        L = len(pi)
        z = rng.normal(size=(n, L))
        w1 = rng.normal(size=n)
        e = rng.normal(size=(n, 2))
        v = e[:, 0]
        u = rho * e[:, 0] + np.sqrt(1 - rho * rho) * e[:, 1]
        u = u * (1 + hetero * np.abs(z[:, 0]))
        g1 = rng.integers(0, 25, size=n)
        g2 = rng.integers(0, 15, size=n)
        # a cluster-level shock so clustering matters
        u = u + shock * rng.normal(size=25)[g1]
        x = z @ pi + 0.3 * w1 + v
        y = 1 + beta * x + 0.2 * w1 + u
        if direct is not None:
            y = y + z @ np.asarray(direct, float)
        cols = {"y": y, "x": x, "w1": w1, "g1": g1.astype(float), "g2": g2.astype(float)}
        for j in range(L):
            cols[f"z{j + 1}"] = z[:, j]
        return cols

    return make


ALL = ["classical", "hc0", "hc1", "hc3", "cluster", "twoway"]


def main():
    os.makedirs(OUT, exist_ok=True)
    if os.environ.get("AR_ONLY_TF"):
        return tf_reference()
    ar_case("ar_bounded", "strong single instrument: a bounded interval", 11, 200, 1, ALL,
            maker([0.8], 0.5, hetero=0.5), shapes={k: "bounded" for k in ALL})
    ar_case("ar_rays", "weak but present single instrument, large beta: two rays", 12, 200, 1,
            ALL, maker([0.03], 1.0, rho=-0.99, shock=0.1), shapes={k: "rays" for k in ALL})
    ar_case("ar_whole", "irrelevant instruments (pi = 0, no direct effect): the whole line",
            13, 200, 2, ALL, maker([0.0, 0.0], 1.0), shapes={k: "whole" for k in ALL})
    ar_case("ar_empty", "strong instruments, one with a direct effect on y: empty set", 14,
            200, 2, ["classical", "hc1"], maker([0.8, 0.8], 1.0, direct=[0.0, 0.7]),
            shapes={"classical": "empty", "hc1": "empty"})
    ar_case("ar_over", "two instruments, heteroskedastic errors: robust set by the grid", 15,
            200, 2, ALL, maker([0.4, 0.25], 1.0, hetero=0.8), beta0=0.5, shapes={k: "bounded" for k in ALL})
    tf_reference()


def tf_rejection(f0, F, c):
    """rho = 1 rejection of "fhat^2 > F and t^2 > c^2": scipy quad of the N(0,1) density
    over {z : |f0 + z| > sqrt(F), |z (f0 + z)| > c f0}, split at the breakpoints (np.roots)."""
    if f0 == 0:
        return 2 * stats.norm.sf(np.sqrt(F))
    pts = [-f0 - np.sqrt(F), -f0 + np.sqrt(F)]
    for sg in (-1, 1):
        r = np.roots([1.0, f0, sg * c * f0])
        pts += [float(v.real) for v in r if abs(v.imag) < 1e-12]
    pts = sorted(pts)
    edges = [-np.inf] + pts + [np.inf]
    total = 0.0
    for a, b in zip(edges[:-1], edges[1:]):
        if b <= a:
            continue
        m = (a + b) / 2 if np.isfinite(a) and np.isfinite(b) else (b - 1 if np.isfinite(b) else a + 1)
        if abs(f0 + m) > np.sqrt(F) and abs(m * (f0 + m)) > c * f0:
            if a >= 0:
                total += stats.norm.sf(a) - stats.norm.sf(b)
            elif b <= 0:
                total += stats.norm.cdf(b) - stats.norm.cdf(a)
            else:
                total += integrate.quad(stats.norm.pdf, a, b, epsabs=0, epsrel=1e-14)[0]
    return total


def golden_max(g, a, b):
    """Golden-section maximisation to 1e-13 in the argument (scipy's bounded Brent stops at
    sqrt(eps) relative, too coarse where the maximum sits at a kink)."""
    r = (np.sqrt(5) - 1) / 2
    x1, x2 = b - r * (b - a), a + r * (b - a)
    g1, g2 = g(x1), g(x2)
    while b - a > 1e-13:
        if g1 >= g2:
            b, x2, g2 = x2, x1, g1
            x1 = b - r * (b - a)
            g1 = g(x1)
        else:
            a, x1, g1 = x1, x2, g2
            x2 = a + r * (b - a)
            g2 = g(x2)
    return max(g1, g2)


def tf_sup(F, c):
    grid = np.concatenate([np.geomspace(1e-4, 1, 40), np.arange(1, 60, 0.2), np.geomspace(60, 1e5, 80)])
    vals = np.array([tf_rejection(f0, F, c) for f0 in grid])
    best = max(vals.max(), 2 * stats.norm.sf(c), 2 * stats.norm.sf(np.sqrt(F)))
    for j in np.nonzero((vals[1:-1] >= vals[:-2]) & (vals[1:-1] >= vals[2:]))[0] + 1:
        best = max(best, golden_max(lambda u: tf_rejection(np.exp(u), F, c),
                                    np.log(grid[j - 1]), np.log(grid[j + 1])))
    return best


def tf_critical(F, alpha):
    z = stats.norm.isf(alpha / 2)
    if tf_sup(F, z) <= alpha:
        return z
    hi = 2 * z
    while tf_sup(F, hi) > alpha:
        hi *= 2
    return optimize.brentq(lambda c: tf_sup(F, c) - alpha, z, hi, xtol=1e-13, rtol=1e-13)


def rho_rejection(f0, rho, F, c):
    """Rejection of the screened test at |rho| < 1 by scipy quad over Z_v of the exact
    conditional probability of t^2 > c^2 given Z_v (a quadratic inequality in Z_u)."""
    sd = np.sqrt(1 - rho * rho)

    def cond(zv):
        fh = f0 + zv
        a, b, cc = fh * fh - c * c, 2 * rho * c * c * fh, -c * c * fh * fh
        disc = b * b - 4 * a * cc
        if disc < 0:
            return 1.0 if a > 0 else 0.0
        r1, r2 = sorted(np.roots([a, b, cc]).real) if a != 0 else (-cc / b, -cc / b)
        inside = stats.norm.cdf((r2 - rho * zv) / sd) - stats.norm.cdf((r1 - rho * zv) / sd)
        return 1 - inside if a > 0 else inside

    f = lambda zv: cond(zv) * stats.norm.pdf(zv)
    s = np.sqrt(F)
    lo = integrate.quad(f, -f0 - s - 12, -f0 - s, epsabs=1e-13, limit=200)[0]
    hi = integrate.quad(f, -f0 + s, max(-f0 + s, 0) + 12, epsabs=1e-13, limit=200)[0]
    return lo + hi


def tf_reference():
    alpha = 0.05
    critical = []
    for F in [4.0, 5.0, 10.0, 20.0, 50.0, 100.0, 150.0]:
        c = tf_critical(F, alpha)
        print(f"tF c_0.05({F}) = {c:.10f}")
        critical.append({"f": F, "alpha": alpha, "c": c})
    for F, a in [(10.0, 0.01), (30.0, 0.10)]:
        critical.append({"f": F, "alpha": a, "c": tf_critical(F, a)})
    # the F at which the standard 1.96 becomes valid: sup S(F, z) = alpha
    z = stats.norm.isf(alpha / 2)
    f_standard = optimize.brentq(lambda F: tf_sup(F, z) - alpha - 1e-15, 90, 120, xtol=1e-10)
    print("F where c reaches 1.96:", f_standard)
    pvals = [{"t": t, "f": F, "p": tf_sup(F, abs(t))} for t, F in [(2.5, 10.0), (4.0, 8.0), (-3.0, 30.0), (2.0, 200.0)]]
    rho = []
    for F, c, f0 in [(10.0, 3.4, 3.0), (10.0, 3.4, 6.0), (50.0, 2.2, 8.0), (104.5, 1.96, 15.0)]:
        r1 = tf_rejection(f0, F, c)
        for r in [0.0, 0.5, 0.9, 0.99]:
            rr = rho_rejection(f0, r, F, c)
            assert rr <= r1 + 1e-9, (F, c, f0, r, rr, r1)
            rho.append({"f": F, "c": c, "f0": f0, "rho": r, "rejection": rr, "rejection_rho1": r1})
    doc = {
        "case": "ar_tf",
        "description": "tF critical values and p-values (rho = 1 worst case), scipy quad",
        "versions": VERSIONS,
        "expected": {"critical": critical, "f_standard": f_standard, "p_values": pvals, "rho_check": rho},
    }
    with open(os.path.join(OUT, "ar_tf.json"), "w") as fh:
        json.dump(doc, fh)


if __name__ == "__main__":
    main()
