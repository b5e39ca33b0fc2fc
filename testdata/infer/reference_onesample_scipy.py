#!/usr/bin/env python3
"""Reference values for the one-sample uniformity tests of package infer.

For samples drawn once here (numpy default_rng, seeds below; the samples
are stored so the Go test sees the same numbers), against the uniform law
on (0, 1) with no parameter estimated:

  * scipy.stats.kstest(x, "uniform", method="exact") and method="asymp":
    the one-sample Kolmogorov-Smirnov distance D_n and its two-sided
    p-values (asymp: the limit law of sqrt(n) D_n; "exact" is SciPy's
    kstwo, Simard and L'Ecuyer's choice of route: Durbin's matrix,
    Pomeranz's recursion or the doubled one-sided Smirnov law (exact
    algorithms, or nearly so in the far tail), or Pelz and Good's
    asymptotic series for larger samples; the route SciPy took is stored
    as ks_scipy_route, mirroring scipy/stats/_ksstats.py, _kolmogn);
  * scipy.stats.goodness_of_fit(scipy.stats.uniform, x,
    known_params={"loc": 0, "scale": 1}, statistic="ad"): the
    Anderson-Darling statistic A^2_n and a Monte Carlo p-value from
    100000 samples of the fully specified null (20000 for the largest
    sample, to keep memory in bounds; the number and the p-value's
    standard error are stored with it).

Usage (from the repository root; Debian's python3 with python3-scipy):

    /usr/bin/python3 testdata/infer/reference_onesample_scipy.py > testdata/infer/reference-onesample-scipy.json
"""

import json
import platform
import sys

import numpy as np
import scipy
from scipy import stats

CASES = [
    # name, seed, n, beta a, beta b (uniform when a = b = 1), Monte Carlo samples
    ("uniform-8", 11, 8, 1.0, 1.0, 100000),
    ("uniform-40", 12, 40, 1.0, 1.0, 100000),
    ("uniform-300", 13, 300, 1.0, 1.0, 100000),
    ("uniform-2000", 14, 2000, 1.0, 1.0, 20000),
    ("beta-150", 15, 150, 1.3, 1.0, 100000),
    ("beta-600", 16, 600, 0.9, 0.9, 100000),
    ("beta-1000", 17, 1000, 1.08, 1.0, 100000),
    ("beta-2500", 18, 2500, 1.05, 1.0, 20000),
]


def scipy_route(n, x):
    """The branch of scipy.stats._ksstats._kolmogn (SciPy 1.10) used for
    the survival function at (n, x)."""
    t = n * x
    if t <= 1.0 or t >= n - 1 or x >= 0.5:
        return "closed-form"
    nx2 = t * x
    if n <= 140:
        if nx2 <= 0.754693:
            return "durbin"
        if nx2 <= 4:
            return "pomeranz"
        return "smirnov"
    if nx2 >= 2.2:
        return "smirnov"
    if n <= 100000 and n * x ** 1.5 <= 1.4:
        return "durbin"
    return "pelz-good"


def main():
    out = {
        "generated_by": "/usr/bin/python3 testdata/infer/reference_onesample_scipy.py > testdata/infer/reference-onesample-scipy.json",
        "python": platform.python_version(),
        "scipy": scipy.__version__,
        "numpy": np.__version__,
        "cases": [],
    }
    for name, seed, n, a, b, mc in CASES:
        rng = np.random.default_rng(seed)
        x = rng.beta(a, b, n)
        ks_exact = stats.kstest(x, "uniform", method="exact")
        ks_asymp = stats.kstest(x, "uniform", method="asymp")
        ad = stats.goodness_of_fit(stats.uniform, x, known_params={"loc": 0, "scale": 1},
                                   statistic="ad", n_mc_samples=mc,
                                   random_state=np.random.default_rng(seed + 1000))
        p = float(ad.pvalue)
        out["cases"].append({
            "name": name,
            "x": [repr(float(v)) for v in x],
            "ks_d": float(ks_exact.statistic),
            "ks_p_exact": float(ks_exact.pvalue),
            "ks_p_asymp": float(ks_asymp.pvalue),
            "ks_scipy_route": scipy_route(n, float(ks_exact.statistic)),
            "ad_a2": float(ad.statistic),
            "ad_p_mc": p,
            "ad_mc_samples": mc,
            "ad_p_mc_se": float(np.sqrt(max(p * (1 - p), 1.0 / mc) / mc)),
        })
        print(name, ks_exact.statistic, ks_exact.pvalue, ks_asymp.pvalue, ad.statistic, p, file=sys.stderr)
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
