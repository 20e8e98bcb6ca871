"""Reference values for the standard errors of Lee (2009) bounds and their Imbens and
Manski (2004) confidence interval.

Run from the crate root: python3 tests/reference/lee_interval.py
Writes tests/reference/fixtures/lee_interval.json with the library versions.

An implementation of its own from the published formulas, in the population notation of
Lee (2009, Proposition 3; typed from memory): with pi_d the share of units in arm d, q_d the
observed share in arm d, p the trimming share of the arm h with the larger observed share,
y the outcome quantile at the cut and mu, sigma^2 the truncated mean and variance,

  n Var(bound) = [sigma^2 + p (y - mu)^2] / (q_h pi_h (1 - p))
               + ((y - mu) / (1 - p))^2 V_p
               + sigma_l^2 / (q_l pi_l),
  V_p = (1 - p)^2 [(1 - q_l) / (q_l pi_l) + (1 - q_h) / (q_h pi_h)],

and the interval of Imbens and Manski (2004, Section 4): C solves
Phi(C + (U - L) / max(s_L, s_U)) - Phi(-C) = level (scipy brentq), the interval is
[L - C s_L, U + C s_U]. The empirical truncation keeps mass K = m_h (1 - p) of the sorted
observed outcomes with weights clip(K - i, 0, 1); sigma^2 is their weighted variance (divisor
K) and y the last value with positive weight.

Because the variance formula is typed from memory, the script also checks it by simulation:
the standard deviation of the estimated bounds over 2,000 simulated samples against the mean
of the analytic standard errors (ratios recorded in the fixture; the script stops if a ratio
leaves [0.95, 1.05]).
"""
import json
import os

import numpy as np
import scipy
from scipy import optimize, stats

HERE = os.path.dirname(os.path.abspath(__file__))
FIXTURES = os.path.join(HERE, "fixtures")
VERSIONS = {"numpy": np.__version__, "scipy": scipy.__version__}


def truncated(values, kept, from_top):
    v = np.sort(values)
    if from_top:
        v = v[::-1]
    w = np.clip(kept - np.arange(len(v)), 0.0, 1.0)
    mu = np.sum(w * v) / kept
    var = np.sum(w * (v - mu) ** 2) / kept
    cut = v[np.nonzero(w > 0)[0][-1]]
    return mu, var, cut


def lee(y, observed, treated, level):
    n = len(y)
    arms = {}
    for d in (1, 0):
        in_arm = treated == d
        seen = y[in_arm & observed]
        arms[d] = dict(pi=in_arm.sum() / n, q=observed[in_arm].mean(), y=seen)
    h = 1 if arms[1]["q"] >= arms[0]["q"] else 0
    l = 1 - h
    H, L = arms[h], arms[l]
    p = (H["q"] - L["q"]) / H["q"]
    kept = len(H["y"]) * (1 - p)
    v_p = (1 - p) ** 2 * ((1 - L["q"]) / (L["q"] * L["pi"]) + (1 - H["q"]) / (H["q"] * H["pi"]))
    mean_l = L["y"].mean()
    var_l = np.mean((L["y"] - mean_l) ** 2)

    def piece(from_top):
        mu, var, cut = truncated(H["y"], kept, from_top)
        nv = (var + p * (cut - mu) ** 2) / (H["q"] * H["pi"] * (1 - p))
        nv += ((cut - mu) / (1 - p)) ** 2 * v_p
        nv += var_l / (L["q"] * L["pi"])
        return mu, np.sqrt(nv / n)

    mu_low, s_low = piece(False)
    mu_high, s_high = piece(True)
    if h == 1:
        lower, upper, se_l, se_u = mu_low - mean_l, mu_high - mean_l, s_low, s_high
    else:
        lower, upper, se_l, se_u = mean_l - mu_high, mean_l - mu_low, s_high, s_low
    scale = max(se_l, se_u)
    f = lambda c: stats.norm.cdf(c + (upper - lower) / scale) - stats.norm.cdf(-c) - level
    c = optimize.brentq(f, 0.0, 10.0, xtol=1e-15, rtol=4 * np.finfo(float).eps)
    return dict(
        lower=lower,
        upper=upper,
        trim_share=p,
        trimmed_arm="treated" if h == 1 else "comparison",
        se_lower=se_l,
        se_upper=se_u,
        critical_value=c,
        interval=[lower - c * se_l, upper + c * se_u],
    )


def sample(rng, n, share_t, q_t, q_c, effect, integer=False):
    treated = (rng.permutation(n) < int(round(n * share_t))).astype(int)
    base = rng.normal(0, 1, n)
    y = 10 + base + effect * treated + 0.5 * rng.standard_t(5, n)
    if integer:
        y = np.round(y)
    else:
        y = np.round(y, 6)
    q = np.where(treated == 1, q_t, q_c)
    observed = rng.uniform(size=n) < q
    return y, observed, treated


def simulation_check(rng):
    """SD of the bound estimates over samples against the mean analytic SE."""
    out = []
    for (q_t, q_c) in [(0.9, 0.7), (0.65, 0.85)]:
        est, ses = [], []
        for _ in range(2000):
            y, o, t = sample(rng, 3000, 0.5, q_t, q_c, 0.4)
            r = lee(y, o, t, 0.95)
            est.append([r["lower"], r["upper"]])
            ses.append([r["se_lower"], r["se_upper"]])
        ratio = np.std(np.array(est), axis=0, ddof=1) / np.mean(np.array(ses), axis=0)
        assert np.all(np.abs(ratio - 1) < 0.05), ratio
        out.append(dict(q_treated=q_t, q_comparison=q_c, sd_over_mean_se=list(ratio)))
    return out


def main():
    rng = np.random.default_rng(20261204)
    cases = []
    for name, args in [
        ("treated_trimmed", (400, 0.5, 0.9, 0.72, 0.5, False)),
        ("comparison_trimmed", (350, 0.4, 0.6, 0.8, -0.3, False)),
        ("integer_ties", (300, 0.5, 0.85, 0.7, 1.0, True)),
        ("small", (40, 0.5, 0.8, 0.6, 0.2, False)),
    ]:
        y, o, t = sample(rng, *args)
        r = lee(y, o, t, 0.95)
        r.update(
            name=name,
            outcome=[float(v) if ob else None for v, ob in zip(y, o)],
            treated=[int(v) for v in t],
            level=0.95,
        )
        cases.append(r)
    out = dict(
        source="numpy/scipy implementation of Lee (2009) Prop. 3 and Imbens-Manski (2004) (tests/reference/lee_interval.py)",
        versions=VERSIONS,
        cases=[{k: (float(v) if isinstance(v, (np.floating,)) else v) for k, v in c.items()} for c in cases],
        simulation=simulation_check(rng),
    )
    with open(os.path.join(FIXTURES, "lee_interval.json"), "w") as fh:
        json.dump(out, fh, indent=1, default=float)
        fh.write("\n")


if __name__ == "__main__":
    main()
