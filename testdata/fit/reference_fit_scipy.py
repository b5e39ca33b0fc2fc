#!/usr/bin/env python3
"""Reference maximum of the log-likelihood computed with SciPy: the
three-state ring with six free rates (testdata/fit/ring3-free.toml) on the
shipped records testdata/likelihood/ring3-300.csv (2 records, 300 events),
each record conditioned on its first event, perfect detection, no dead
time, no frames, no censored end.

ln L is the one of testdata/likelihood/reference_scipy.py (scipy.linalg.expm
on every interval, forward recursion rescaled at each event); its record
reader and null-vector solver are imported from there, and its generator
split and first-event recursion are restated below for a parameter vector
(that script reads rates from a file only). As a check of the restatement,
ln L at the spec's values is computed both ways and must agree to 1e-12.

The maximum is sought over the natural logs of the six rates with
scipy.optimize.minimize(method="L-BFGS-B") from the spec's values and from
NSTARTS - 1 random starts (each log-rate drawn from normal(spec, 1.5), numpy
default_rng(SEED)); the gradient is by central differences of step 1e-5 in
the log-rates (truncation ~ h^2/6 |d3 lnL| ~ 1e-8, rounding ~ eps |lnL| / h
~ 4e-9). Box bounds [ln 1e-4, ln 1e4] keep expm finite; the output says
whether any is active at the end (none should be: the maximum is interior).
The best end is polished by Newton steps on a central-difference Hessian
(until the step is below 1e-10 in every log-rate), so that the reported arg
max does not depend on where L-BFGS-B stopped; the gradient's infinity norm
there is stored. The observed information there gives standard errors of
the log-rates (for the Go test's comparison of the arg max).

Usage (from the repository root; Debian's python3 with python3-scipy):

    OPENBLAS_NUM_THREADS=1 /usr/bin/python3 testdata/fit/reference_fit_scipy.py > testdata/fit/reference-fit-scipy.json

(about two minutes; the thread setting only avoids BLAS threads on 3x3
matrices).
"""

import importlib.util
import json
import os
import platform
import sys
import tomllib

import numpy as np
import scipy
from scipy.linalg import expm
from scipy.optimize import minimize

MODEL = "testdata/fit/ring3-free.toml"
DATA = "testdata/likelihood/ring3-300.csv"
NSTARTS = 6
SEED = 20240611
STEP = 1e-5
LOG_LO, LOG_HI = np.log(1e-4), np.log(1e4)

_here = os.path.dirname(os.path.abspath(__file__))
_spec = importlib.util.spec_from_file_location(
    "reference_scipy", os.path.join(_here, "..", "likelihood", "reference_scipy.py"))
ref = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(ref)


def read_spec(path):
    with open(path, "rb") as f:
        spec = tomllib.load(f)
    names = sorted(spec["param"])  # the Go model's free-parameter order
    return spec, names


def generator(spec, rates):
    """L, D0 and the D_l of the spec with rate values from the dict rates
    (the split of reference_scipy.load_model)."""
    states = spec["states"]
    idx = {s: i for i, s in enumerate(states)}
    n = len(states)
    L = np.zeros((n, n))
    Dl = {}
    for e in spec["edge"]:
        a, b = idx[e["between"][0]], idx[e["between"][1]]
        labs = list(e.get("labels", [])) + ["", ""]
        for d, (i, j) in enumerate([(a, b), (b, a)]):
            w = rates[e["rates"][d]]
            L[i, j] += w
            L[i, i] -= w
            if labs[d]:
                Dl.setdefault(labs[d], np.zeros((n, n)))
                Dl[labs[d]][i, j] += w
    D0 = L - sum(Dl.values())
    return L, D0, Dl


def loglik(spec, rates, records):
    """ln L with each record conditioned on its first event: alpha_1
    proportional to nu (-D0)^{-1} D_{l1}, nu stationary for the post-event
    chain (-D0)^{-1} sum_l D_l; then alpha_k = alpha_{k-1} expm(D0 gap) D_lk,
    rescaled (reference_scipy.loglik with start="first", no instrument)."""
    L, D0, Dl = generator(spec, rates)
    n = L.shape[0]
    A = np.linalg.inv(-D0)
    K = A @ sum(Dl.values())
    nu = ref.left_null(K - np.eye(n))
    w0 = nu @ A
    total = 0.0
    for rec in records:
        alpha = w0 @ Dl[rec[0][1]]
        alpha /= alpha.sum()
        for k in range(1, len(rec)):
            t, lab = rec[k]
            alpha = alpha @ expm(D0 * (t - rec[k - 1][0])) @ Dl[lab]
            s = alpha.sum()
            total += np.log(s)
            alpha /= s
    return total


def main():
    spec, names = read_spec(MODEL)
    records = ref.load_records(DATA)
    x_spec = np.log([float(spec["param"][k]["value"]) for k in names])

    ngaps = sum(len(r) - 1 for r in records)

    def f(x):
        """-ln L per gap (a scale of order one for L-BFGS-B); a large
        finite value where ln L cannot be evaluated, so that the line
        search backs off."""
        with np.errstate(all="ignore"):
            ll = loglik(spec, dict(zip(names, np.exp(x))), records)
        return -ll / ngaps if np.isfinite(ll) else 1e10

    def grad(x):
        g = np.zeros_like(x)
        for j in range(len(x)):
            e = np.zeros_like(x)
            e[j] = STEP
            g[j] = (f(x + e) - f(x - e)) / (2 * STEP)
        return g

    def hess(x):
        p = len(x)
        H = np.zeros((p, p))
        for j in range(p):
            e = np.zeros(p)
            e[j] = 1e-4
            H[:, j] = (grad(x + e) - grad(x - e)) / 2e-4
        return (H + H.T) / 2

    # Check of the restated likelihood against reference_scipy.loglik.
    ll_file = ref.loglik(MODEL, DATA, "first", 0.0, 0.0, None)
    ll_here = -f(x_spec) * ngaps
    if abs(ll_file - ll_here) > 1e-12 * abs(ll_file):
        sys.exit(f"restated ln L {ll_here!r} differs from reference_scipy.loglik {ll_file!r}")

    rng = np.random.default_rng(SEED)
    starts = [x_spec] + [x_spec + 1.5 * rng.standard_normal(len(x_spec)) for _ in range(NSTARTS - 1)]
    ends = []
    for i, x0 in enumerate(starts):
        x0 = np.clip(x0, LOG_LO + 1, LOG_HI - 1)
        r = minimize(f, x0, jac=grad, method="L-BFGS-B",
                     bounds=[(LOG_LO, LOG_HI)] * len(x0),
                     options={"maxiter": 2000, "ftol": 1e-15, "gtol": 1e-9, "maxcor": 20})
        x = r.x.copy()
        active = bool(np.any(np.isclose(x, LOG_LO) | np.isclose(x, LOG_HI)))
        g = grad(x) * ngaps
        end = {"start_log_rates": [repr(float(v)) for v in x0],
               "loglik": repr(float(-r.fun * ngaps)), "message": str(r.message),
               "iterations": int(r.nit), "bound_active": active,
               "rates": {k: repr(float(np.exp(v))) for k, v in zip(names, x)},
               "grad_inf_norm": repr(float(np.max(np.abs(g))))}
        ends.append((x, end))
        print(f"start {i}: lnL {-r.fun * ngaps!r} after {r.nit} iterations ({r.message}), |g| {np.max(np.abs(g)):.2e}, bound active {active}", file=sys.stderr)

    best_x, best = max(ends, key=lambda e: float(e[1]["loglik"]))
    # Newton polish of the best end (accepted only while ln L does not
    # decrease), so that the stored arg max does not depend on where
    # L-BFGS-B stopped.
    x = best_x.copy()
    newton = 0
    for _ in range(5):
        dx = -np.linalg.solve(hess(x), grad(x))
        if f(x + dx) > f(x):
            break
        x = x + dx
        newton += 1
        if np.max(np.abs(dx)) < 1e-10:
            break
    info = hess(x) * ngaps  # observed information in log-rates (Hessian of -ln L)
    cov = np.linalg.inv(info)
    g = grad(x) * ngaps
    print(f"polished: lnL {-f(x) * ngaps!r} after {newton} accepted Newton steps, |g| {np.max(np.abs(g)):.2e}", file=sys.stderr)
    out = {
        "generated_by": "OPENBLAS_NUM_THREADS=1 /usr/bin/python3 testdata/fit/reference_fit_scipy.py > testdata/fit/reference-fit-scipy.json",
        "python": platform.python_version(),
        "scipy": scipy.__version__,
        "numpy": np.__version__,
        "model": MODEL,
        "data": DATA,
        "start": "first",
        "method": "scipy.optimize.minimize L-BFGS-B over ln rates, central-difference gradient (step 1e-5), Newton polish",
        "loglik_at_spec": repr(float(ll_here)),
        "max_loglik": repr(float(-f(x) * ngaps)),
        "argmax": {k: repr(float(np.exp(v))) for k, v in zip(names, x)},
        "grad_inf_norm_at_argmax": repr(float(np.max(np.abs(g)))),
        "newton_steps_accepted": newton,
        "se_log": {k: repr(float(np.sqrt(cov[j, j]))) for j, k in enumerate(names)},
        "info_eigenvalues": [repr(float(v)) for v in np.linalg.eigvalsh(info)],
        "seed": SEED,
        "starts": [e for _, e in ends],
    }
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
