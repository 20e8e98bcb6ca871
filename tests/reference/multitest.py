"""Reference adjusted p-values for src/inference/tests/corrections.rs.

Run: python3 tests/reference/multitest.py  (statsmodels 0.15.0 produced the numbers in the
tests). Each line prints the input family and the adjusted p-values for one method.
"""
import statsmodels
from statsmodels.stats.multitest import multipletests

FAMILIES = {
    # The 15 p-values of Benjamini and Hochberg (1995), section 4 (quoted from memory).
    "bh1995": [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344,
               0.0459, 0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.000],
    # Invented: unsorted, with ties and a value that saturates at 1.
    "ties": [0.04, 0.01, 0.04, 0.2, 0.01, 0.5, 0.03],
}

print("statsmodels", statsmodels.__version__)
for name, p in FAMILIES.items():
    for method in ("bonferroni", "holm", "fdr_bh"):
        reject, adjusted, _, _ = multipletests(p, alpha=0.05, method=method)
        print(name, method, [repr(float(a)) for a in adjusted], int(reject.sum()))
