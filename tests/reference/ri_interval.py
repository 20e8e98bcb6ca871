"""Reference values for randomization-inference intervals by test inversion.

Run from the crate root: python3 tests/reference/ri_interval.py
Writes tests/reference/fixtures/ri_interval.json with the library versions.

A small exact design, invented and seeded here: 12 units, 6 treated by complete
randomization (all C(12, 6) = 924 assignments), an outcome and one control. For a candidate
constant effect tau, the brute-force p-value refits, for every one of the 924 assignments t*,
the OLS of y - tau * t on [t*, 1, w] with numpy's lstsq and counts the assignments whose
statistic is at least the observed one in absolute value (relative tie tolerance 1e-9); the
statistic is the coefficient ("estimate") or the coefficient over its classical standard
error ("t"). The endpoints are found independently of sworn's search: the p-value is scanned
on a grid of 4,001 points over b +- 8 se (the set of grid points not rejected at alpha must be
one run, or the script stops), then each boundary is refined by bisection on the brute-force
p-value to 1e-12 se.
"""
import itertools
import json
import os

import numpy as np
import scipy

HERE = os.path.dirname(os.path.abspath(__file__))
FIXTURES = os.path.join(HERE, "fixtures")
VERSIONS = {"numpy": np.__version__, "scipy": scipy.__version__}
ALPHA = 0.05


def data():
    rng = np.random.default_rng(20261205)
    n = 12
    t = np.zeros(n)
    t[rng.permutation(n)[:6]] = 1
    w = np.round(rng.normal(5, 2, n), 4)
    y = np.round(1.0 + 0.8 * t + 0.5 * w + rng.normal(0, 1, n), 4)
    return y, t, w


def assignments(n, k):
    for idx in itertools.combinations(range(n), k):
        a = np.zeros(n)
        a[list(idx)] = 1
        yield a


def statistic(y, t, w, kind):
    x = np.column_stack([t, np.ones_like(t), w])
    b, *_ = np.linalg.lstsq(x, y, rcond=None)
    if kind == "estimate":
        return b[0]
    resid = y - x @ b
    s2 = resid @ resid / (len(y) - x.shape[1])
    v = s2 * np.linalg.inv(x.T @ x)
    return b[0] / np.sqrt(v[0, 0])


def p_value(y, t, w, tau, kind, draws):
    y0 = y - tau * t
    obs = statistic(y0, t, w, kind)
    stats = np.array([statistic(y0, a, w, kind) for a in draws])
    return np.mean(np.abs(stats) >= np.abs(obs) * (1 - 1e-9))


def boundary(f, inside, outside, tol):
    while abs(outside - inside) > tol:
        mid = 0.5 * (inside + outside)
        if f(mid) > ALPHA:
            inside = mid
        else:
            outside = mid
    return inside


def case(y, t, w, kind, draws):
    x = np.column_stack([t, np.ones_like(t), w])
    b, *_ = np.linalg.lstsq(x, y, rcond=None)
    resid = y - x @ b
    se = np.sqrt(resid @ resid / (len(y) - 3) * np.linalg.inv(x.T @ x)[0, 0])
    grid = b[0] + se * np.linspace(-8, 8, 4001)
    f = lambda tau: p_value(y, t, w, tau, kind, draws)
    ok = np.array([f(g) > ALPHA for g in grid])
    runs = np.flatnonzero(np.diff(ok.astype(int)) != 0)
    assert len(runs) == 2 and ok[0] == ok[-1] == False, "the accepted grid points are not one run"
    lo_out, lo_in, hi_in, hi_out = grid[runs[0]], grid[runs[0] + 1], grid[runs[1]], grid[runs[1] + 1]
    tol = 1e-12 * se
    return dict(
        statistic=kind,
        estimate=b[0],
        std_error=se,
        lower=boundary(f, lo_in, lo_out, tol),
        upper=boundary(f, hi_in, hi_out, tol),
        alpha=ALPHA,
    )


def main():
    y, t, w = data()
    draws = list(assignments(len(y), 6))
    cases = [case(y, t, w, k, draws) for k in ["estimate", "t"]]
    out = dict(
        source="brute-force numpy enumeration of all 924 assignments (tests/reference/ri_interval.py)",
        versions=VERSIONS,
        data=dict(y=list(y), t=[int(v) for v in t], w=list(w)),
        cases=[{k: (float(v) if isinstance(v, (np.floating, float)) else v) for k, v in c.items()} for c in cases],
    )
    with open(os.path.join(FIXTURES, "ri_interval.json"), "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
