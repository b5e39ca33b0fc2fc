#!/usr/bin/env python3
"""Reference values for the two-sample tests of package infer, from SciPy.

For a few pairs of samples drawn once here (numpy default_rng, seeds
below; the samples are stored so the Go test sees the same numbers):

  * scipy.stats.ks_2samp(x, y, method="exact") and method="asymp":
    the Kolmogorov-Smirnov distance and two-sided p-values;
  * scipy.stats.anderson_ksamp([x, y], midrank=False): the standardised
    Anderson-Darling statistic T (Scholz and Stephens, JASA 82, 918 (1987),
    continuous version), SciPy's critical values of T for k = 2 at
    significance 25%, 10%, 5%, 2.5%, 1%, 0.5%, 0.1%, and its p-value
    (interpolated in that table and capped to [0.001, 0.25]).

Usage (from the repository root; Debian's python3 with python3-scipy):

    /usr/bin/python3 testdata/infer/reference_scipy.py > testdata/infer/reference-scipy.json
"""

import json
import platform
import sys
import warnings

import numpy as np
import scipy
from scipy import stats

CASES = [
    # name, seed, n, m, scale of y (x is exponential with mean 1; y gamma(shape) * scale)
    ("same-30-45", 1, 30, 45, 1.0, 1.0),
    ("shape-200-150", 2, 200, 150, 2.0, 0.5),
    ("scale-80-120", 3, 80, 120, 1.0, 1.3),
    ("same-500-700", 4, 500, 700, 1.0, 1.0),
]


def main():
    out = {
        "generated_by": "/usr/bin/python3 testdata/infer/reference_scipy.py > testdata/infer/reference-scipy.json",
        "python": platform.python_version(),
        "scipy": scipy.__version__,
        "numpy": np.__version__,
        "cases": [],
    }
    for name, seed, n, m, shape, scale in CASES:
        rng = np.random.default_rng(seed)
        x = rng.exponential(1.0, n)
        y = rng.gamma(shape, scale / shape, m)
        ks_exact = stats.ks_2samp(x, y, method="exact")
        ks_asymp = stats.ks_2samp(x, y, method="asymp")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ad = stats.anderson_ksamp([x, y], midrank=False)
        out["cases"].append({
            "name": name,
            "x": [repr(float(v)) for v in x],
            "y": [repr(float(v)) for v in y],
            "ks_d": float(ks_exact.statistic),
            "ks_p_exact": float(ks_exact.pvalue),
            "ks_p_asymp": float(ks_asymp.pvalue),
            "ad_t": float(ad.statistic),
            "ad_critical": [float(c) for c in ad.critical_values],
            "ad_p": float(ad.significance_level),
        })
        print(name, ks_exact.statistic, ks_exact.pvalue, ks_asymp.pvalue, ad.statistic, ad.significance_level, file=sys.stderr)
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
