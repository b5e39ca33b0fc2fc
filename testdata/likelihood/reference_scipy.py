#!/usr/bin/env python3
"""Reference log-likelihoods computed with SciPy: scipy.linalg.expm on every
interval, in float64, for the same five cases as reference.py.

This is the second outside route (reference.py is the first: 50-digit
decimal Taylor series). Same definitions (see reference.py's header):
generator split L = D0 + sum_l D_l; per-event factor exp(L delta) E D_l with
E = expm(D0 (gap - delta)) for exact times, or the integral of exp(D0 s)
over the frame box (upper-right block of expm([[D0, I], [0, 0]] w), Van Loan
1978); start conditioned on the first event (alpha_1 proportional to
nu exp(L delta) (-D0)^{-1} D_l1, nu stationary for the post-event chain) or
stationary from time 0 (with frames the first event's box is [t_1, t_1 + F]:
timestamps are frame starts, the record starts at 0); censored end
exp(L delta) expm(D0 (End - t_n - F/2 - delta)) 1 (F = 0 without frames);
forward recursion rescaled at each step.

Usage (from the repository root; Debian's python3 with python3-scipy):

    /usr/bin/python3 testdata/likelihood/reference_scipy.py > testdata/likelihood/reference-scipy.json
"""

import csv
import json
import platform
import sys
import tomllib

import numpy as np
import scipy
from scipy.linalg import expm, solve

CASES = [
    ("ring3-first", "testdata/ring3.toml", "testdata/likelihood/ring3-300.csv", "first", 0.0, 0.0, None),
    ("ring3-stationary-end", "testdata/ring3.toml", "testdata/likelihood/ring3-300.csv", "stationary", 0.0, 0.0, 0.5),
    ("missed4-dead", "testdata/likelihood/missed4.toml", "testdata/likelihood/missed4-300.csv", "first", 0.02, 0.0, None),
    ("shared4-first", "testdata/likelihood/shared4.toml", "testdata/likelihood/shared4-300.csv", "first", 0.0, 0.0, None),
    ("shared4-frames-dead-stationary-end", "testdata/likelihood/shared4.toml", "testdata/likelihood/shared4-300.csv", "stationary", 0.01, 0.05, 0.3),
]


def load_model(path):
    with open(path, "rb") as f:
        spec = tomllib.load(f)
    states = spec["states"]
    idx = {s: i for i, s in enumerate(states)}
    params = {k: float(v["value"]) for k, v in spec.get("param", {}).items()}
    detect = {k: float(v.get("detect", 1.0)) for k, v in spec.get("label", {}).items()}
    n = len(states)
    L = np.zeros((n, n))
    Dl = {}
    for e in spec["edge"]:
        a, b = idx[e["between"][0]], idx[e["between"][1]]
        labs = list(e.get("labels", [])) + ["", ""]
        for d, (i, j) in enumerate([(a, b), (b, a)]):
            if d == 1 and e.get("one_way", False):
                continue
            w = params[e["rates"][d]]
            L[i, j] += w
            L[i, i] -= w
            if labs[d]:
                Dl.setdefault(labs[d], np.zeros((n, n)))
                Dl[labs[d]][i, j] += detect.get(labs[d], 1.0) * w
    D0 = L - sum(Dl.values())
    return L, D0, Dl


def load_records(path):
    recs, order = {}, []
    with open(path) as f:
        rows = [r for r in f if not r.startswith("#")]
    for row in csv.DictReader(rows):
        r = row["record"]
        if r not in recs:
            recs[r] = []
            order.append(r)
        recs[r].append((float(row["time"]), row["label"]))
    return [recs[r] for r in order]


def left_null(M):
    """Row vector x with x M = 0, sum x = 1 (M singular of rank n-1)."""
    n = M.shape[0]
    A = M.T.copy()
    A[-1, :] = 1.0
    b = np.zeros(n)
    b[-1] = 1.0
    return solve(A, b)


def box(D0, lo, hi):
    n = D0.shape[0]
    big = np.zeros((2 * n, 2 * n))
    big[:n, :n] = D0
    big[:n, n:] = np.eye(n)
    ur = expm(big * (hi - lo))[:n, n:]
    return ur if lo == 0 else expm(D0 * lo) @ ur


def loglik(model, data, start, dead, frame, end_offset):
    L, D0, Dl = load_model(model)
    n = L.shape[0]
    G = expm(L * dead) if dead > 0 else np.eye(n)
    A = np.linalg.inv(-D0)
    K = G @ A @ sum(Dl.values())
    nu = left_null(K - np.eye(n))
    w0 = nu @ G @ A
    pi = left_null(L)

    def E(g, dead_applies):
        dt = dead if dead_applies else 0.0
        if frame == 0:
            if g - dt < 0:
                raise ValueError("gap shorter than the dead time")
            return expm(D0 * (g - dt))
        lo = max(max(g - frame / 2, 0.0) - dt, 0.0)
        return box(D0, lo, g + frame / 2 - dt)

    total = 0.0
    for rec in load_records(data):
        if start == "first":
            alpha = w0 @ Dl[rec[0][1]]
            alpha /= alpha.sum()
            ks = range(1, len(rec))
        else:
            alpha = pi.copy()
            ks = range(len(rec))
        for k in ks:
            t, lab = rec[k]
            if k == 0:
                y = alpha @ (expm(D0 * t) if frame == 0 else box(D0, t, t + frame))
            else:
                y = alpha @ G @ E(t - rec[k - 1][0], True)
            alpha = y @ Dl[lab]
            s = alpha.sum()
            total += np.log(s)
            alpha /= s
        if end_offset is not None and end_offset - frame / 2 - dead > 0:
            total += np.log((alpha @ G @ expm(D0 * (end_offset - frame / 2 - dead))).sum())
    return total


def main():
    out = {
        "generated_by": "/usr/bin/python3 testdata/likelihood/reference_scipy.py > testdata/likelihood/reference-scipy.json",
        "python": platform.python_version(),
        "scipy": scipy.__version__,
        "numpy": np.__version__,
        "cases": [],
    }
    for name, model, data, start, dead, frame, end in CASES:
        ll = loglik(model, data, start, dead, frame, end)
        out["cases"].append({"name": name, "model": model, "data": data, "start": start,
                             "dead_time": dead, "frame": frame, "end_offset": end,
                             "loglik": repr(float(ll))})
        print(name, repr(float(ll)), file=sys.stderr)
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
