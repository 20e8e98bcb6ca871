"""Reference values for the arm summaries of the cool-roofs demo (comparison-arm outcome mean,
take-up by arm of the instrument) and their standard errors.

Run from the crate root: python3 tests/reference/arms.py
Writes tests/reference/fixtures/arms_demo.json with the library versions. Reads the committed
demo data (demo-data/cool-roofs/households.csv, invented by src/demo/generate.rs).

Source: pandas for the estimation sample and the arm means; statsmodels OLS of the variable
on a constant within the arm for the standard error: cov_type "cluster" by `block` (CR1:
statsmodels' default small-sample correction G/(G-1) * (n-1)/(n-k), which is G/(G-1) with
k = 1), and the classical standard error s/sqrt(n) as a second check; the 95% interval
mean +- z * SE with z = scipy.stats.norm.ppf(0.975).
"""
import json
import os

import numpy as np
import pandas as pd
import statsmodels
import statsmodels.api as sm
import scipy
from scipy.stats import norm

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
FIXTURES = os.path.join(HERE, "fixtures")

# specification id -> (outcome, arm variable, endogenous or None, other variables used)
SPECS = {
    "temp_ols": ("temp_c", "painted", None, ["roof_m2", "storeys", "district", "block"]),
    "temp_iv": ("temp_c", "offer", "painted", ["roof_m2", "storeys", "district", "block"]),
    "temp_iv_call": (
        "temp_c",
        "reminder",
        "painted",
        ["roof_m2", "storeys", "offer", "district", "block"],
    ),
    "clinic_itt": ("clinic_visit", "offer", None, ["roof_m2", "storeys", "block"]),
}


def arm_mean(frame, variable, arm_var, arm):
    part = frame[frame[arm_var] == arm]
    x = part[variable].to_numpy(dtype=float)
    ones = np.ones((len(x), 1))
    clustered = sm.OLS(x, ones).fit(
        cov_type="cluster", cov_kwds={"groups": pd.factorize(part["block"])[0]}
    )
    classical = sm.OLS(x, ones).fit()
    return {
        "variable": variable,
        "arm": arm,
        "n": int(len(x)),
        "clusters": int(part["block"].nunique()),
        "mean": float(np.mean(x)),
        "sd": float(np.std(x, ddof=1)),
        "std_error_cluster": float(clustered.bse[0]),
        "std_error_classical": float(classical.bse[0]),
        # 95% normal-approximation interval, z from scipy.stats.norm.ppf.
        "ci95": [
            float(np.mean(x) - norm.ppf(0.975) * clustered.bse[0]),
            float(np.mean(x) + norm.ppf(0.975) * clustered.bse[0]),
        ],
    }


def main():
    data = pd.read_csv(os.path.join(ROOT, "demo-data/cool-roofs/households.csv"))
    cases = {}
    for spec, (outcome, arm_var, endog, others) in SPECS.items():
        used = [outcome, arm_var] + ([endog] if endog else []) + others
        frame = data.dropna(subset=used)
        # No fixed-effect singletons: every district has many households.
        assert frame.groupby("district").size().min() > 1
        case = {
            "rows": int(len(frame)),
            "by": arm_var,
            "comparison_mean": arm_mean(frame, outcome, arm_var, 0),
        }
        if endog:
            case["take_up"] = [arm_mean(frame, endog, arm_var, k) for k in (0, 1)]
        cases[spec] = case
    out = {
        "source": "pandas arm means; statsmodels OLS on a constant, cluster (CR1) and classical standard errors",
        "versions": {
            "numpy": np.__version__,
            "pandas": pd.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
        },
        "cases": cases,
    }
    with open(os.path.join(FIXTURES, "arms_demo.json"), "w") as f:
        json.dump(out, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
