#!/usr/bin/env python3
"""Reference values for the small-count tests of package infer, from SciPy.

  * Garwood's exact Poisson interval (Biometrika 28, 437 (1936)) for a count
    n at level 1 - a: lo = chi2.ppf(a/2, 2n)/2, hi = chi2.ppf(1 - a/2, 2n + 2)/2
    (lo = 0 for n = 0), by scipy.stats.chi2;
  * the exact two-sided binomial test with the doubled smaller tail,
    p = min(1, 2 min(binom.cdf(k), binom.sf(k - 1))), its log from
    binom.logcdf / binom.logsf, and the normal score z = norm.isf(p / 2)
    (signed like k - n p0), computed from the log of p with
    norm.isf(exp(logp) / 2) where that is representable;
  * the chi-square upper tail of the affinity test's statistic, where the
    Go code refers it to chi-square with 1 df.

Usage (from the repository root; Debian's python3 with python3-scipy):

    /usr/bin/python3 testdata/infer/reference_smallcount.py > testdata/infer/reference-smallcount.json
"""

import json
import math
import platform

import scipy
from scipy import optimize, special, stats

LEVELS = [0.95, 0.99, 0.68]
COUNTS = [0, 1, 2, 3, 5, 10, 14, 50, 100, 1000, 100000]

BINOM = [
    # k, n, p0
    (0, 14, 0.05), (0, 14, 0.3), (3, 14, 0.05), (14, 14, 0.9), (7, 14, 0.5),
    (0, 10, 0.5), (10, 10, 0.5), (1, 1, 0.5), (2, 50, 0.3), (40, 50, 0.3),
    (480, 1000, 0.5), (300, 1000, 0.5), (5, 100000, 0.001), (0, 2000, 0.5),
    (2000, 3000, 0.2), (13, 20, 0.25),
]


def main():
    garwood = []
    for level in LEVELS:
        a = 1 - level
        for n in COUNTS:
            lo = 0.0 if n == 0 else stats.chi2.ppf(a / 2, 2 * n) / 2
            hi = stats.chi2.ppf(1 - a / 2, 2 * n + 2) / 2
            garwood.append({"n": n, "level": level, "lo": repr(lo), "hi": repr(hi)})
    binom = []
    for k, n, p0 in BINOM:
        lower = stats.binom.logcdf(k, n, p0)
        upper = stats.binom.logsf(k - 1, n, p0)
        # Far tails underflow in logcdf/logsf: sum the log-pmf terms instead.
        if not lower > -700:
            lower = float(special.logsumexp(stats.binom.logpmf(range(0, k + 1), n, p0)))
        if not upper > -700:
            upper = float(special.logsumexp(stats.binom.logpmf(range(k, n + 1), n, p0)))
        logp = min(0.0, math.log(2) + min(lower, upper))
        p = math.exp(logp)
        if p > 1e-300:
            z = float(stats.norm.isf(p / 2))
        else:
            # Below the range of isf: solve log_ndtr(-z) = log(p/2) for z.
            target = logp - math.log(2)
            z = optimize.brentq(lambda x: special.log_ndtr(-x) - target, 1, 1e4, xtol=1e-13, rtol=1e-15)
        if k < n * p0:
            z = -z
        binom.append({"k": k, "n": n, "p0": p0, "log_p": repr(float(logp)), "p": repr(p), "z": repr(z)})
    chi2 = [{"x": x, "sf": repr(float(stats.chi2.sf(x, 1)))} for x in [0.5, 3.841458820694124, 10.0, 50.0, 200.0]]
    out = {
        "made_by": "/usr/bin/python3 testdata/infer/reference_smallcount.py > testdata/infer/reference-smallcount.json",
        "python": platform.python_version(),
        "scipy": scipy.__version__,
        "garwood": garwood,
        "binomial": binom,
        "chi2_1df": chi2,
    }
    print(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
