#!/usr/bin/env python3
"""Independent reference values of the visible-transition log-likelihood.

Pure Python standard library (decimal arithmetic with 50 significant digits),
written separately from the Go code so that the Go tests compare against a
different implementation of the same definitions:

  * generator split L = D0 + sum_l D_l, (D_l)_ij = p_l w_ij on the directed
    edges carrying label l, D0 = L - sum_l D_l;
  * matrix exponential exp(A t) by a Taylor series on A t / 2^j (norm < 1/2,
    terms until below 1e-48) followed by j squarings;
  * int_lo^hi exp(A s) ds = exp(A lo) times the upper-right block of
    exp([[A, I], [0, 0]] (hi - lo)) (Van Loan 1978);
  * per-event factor exp(L delta) E D_l with E = exp(D0 (gap - delta)) for
    exact timestamps, or the integral of exp(D0 s) over
    [max(gap - F/2, 0) - delta, gap + F/2 - delta] clipped at 0 for frames;
  * start: conditioned on the first event, alpha_1 proportional to
    nu exp(L delta) (-D0)^{-1} D_l1 with nu the stationary law of
    K = exp(L delta) (-D0)^{-1} sum_l D_l; or stationary from time 0,
    pi exp(D0 t_1) D_l1 (no dead time before the first event), and with
    frames pi int_{t_1}^{t_1 + F} exp(D0 s) ds D_l1 (timestamps are frame
    starts and the record starts at 0);
  * censored end: exp(L delta) exp(D0 (End - t_n - F/2 - delta)) 1 when
    positive (F = 0 without frames; End exact, the last event at the
    centre of its frame);
  * forward recursion with the state vector rescaled to sum 1 at each step,
    ln L = sum of the logs of the scale factors.

Usage (from the repository root):

    python3 testdata/likelihood/reference.py > testdata/likelihood/reference.json
"""

import csv
import json
import platform
import sys
import tomllib
from decimal import Decimal, getcontext

getcontext().prec = 50
D0_ = Decimal(0)
D1_ = Decimal(1)

CASES = [
    # name, model spec, records, start, dead time, frame, end offset (None: unknown)
    ("ring3-first", "testdata/ring3.toml", "testdata/likelihood/ring3-300.csv", "first", 0.0, 0.0, None),
    ("ring3-stationary-end", "testdata/ring3.toml", "testdata/likelihood/ring3-300.csv", "stationary", 0.0, 0.0, 0.5),
    ("missed4-dead", "testdata/likelihood/missed4.toml", "testdata/likelihood/missed4-300.csv", "first", 0.02, 0.0, None),
    ("shared4-first", "testdata/likelihood/shared4.toml", "testdata/likelihood/shared4-300.csv", "first", 0.0, 0.0, None),
    ("shared4-frames-dead-stationary-end", "testdata/likelihood/shared4.toml", "testdata/likelihood/shared4-300.csv", "stationary", 0.01, 0.05, 0.3),
]


def dec(x):
    """Exact decimal value of the binary double nearest to x."""
    return Decimal(float(x))


def zeros(n, m):
    return [[D0_] * m for _ in range(n)]


def eye(n):
    a = zeros(n, n)
    for i in range(n):
        a[i][i] = D1_
    return a


def matmul(a, b):
    n, k, m = len(a), len(b), len(b[0])
    out = zeros(n, m)
    for i in range(n):
        ai = a[i]
        oi = out[i]
        for p in range(k):
            x = ai[p]
            if x == 0:
                continue
            bp = b[p]
            for j in range(m):
                oi[j] += x * bp[j]
    return out


def scale(a, f):
    return [[x * f for x in row] for row in a]


def add(a, b):
    return [[x + y for x, y in zip(ra, rb)] for ra, rb in zip(a, b)]


def norm_inf(a):
    return max(sum(abs(x) for x in row) for row in a)


def expm(a, t):
    m = scale(a, t)
    n = len(a)
    j = 0
    nrm = norm_inf(m)
    while nrm > Decimal("0.5"):
        nrm /= 2
        j += 1
    m = scale(m, D1_ / (Decimal(2) ** j))
    out = eye(n)
    term = eye(n)
    k = 1
    while True:
        term = scale(matmul(term, m), D1_ / Decimal(k))
        out = add(out, term)
        if norm_inf(term) < Decimal("1e-48"):
            break
        k += 1
    for _ in range(j):
        out = matmul(out, out)
    return out


def integral(a, lo, hi):
    n = len(a)
    w = hi - lo
    big = zeros(2 * n, 2 * n)
    for i in range(n):
        for j in range(n):
            big[i][j] = a[i][j]
        big[i][n + i] = D1_
    eb = expm(big, w)
    ur = [row[n:] for row in eb[:n]]
    if lo == 0:
        return ur
    return matmul(expm(a, lo), ur)


def solve(a, b):
    """Solve a x = b (Gaussian elimination with partial pivoting)."""
    n = len(a)
    m = [list(a[i]) + [b[i]] for i in range(n)]
    for c in range(n):
        p = max(range(c, n), key=lambda r: abs(m[r][c]))
        m[c], m[p] = m[p], m[c]
        for r in range(c + 1, n):
            f = m[r][c] / m[c][c]
            if f != 0:
                for k in range(c, n + 1):
                    m[r][k] -= f * m[c][k]
    x = [D0_] * n
    for r in range(n - 1, -1, -1):
        s = m[r][n] - sum(m[r][k] * x[k] for k in range(r + 1, n))
        x[r] = s / m[r][r]
    return x


def stationary_left(m_rows, generator):
    """Row vector x with x (M - I) = 0 (stochastic M) or x L = 0
    (generator), normalised to sum 1."""
    n = len(m_rows)
    # Equations: columns of (M - I) or L, last replaced by sum x = 1.
    a = zeros(n, n)
    for i in range(n):
        for j in range(n):
            v = m_rows[j][i]
            if not generator and i == j:
                v -= D1_
            a[i][j] = v
    a[n - 1] = [D1_] * n
    b = [D0_] * n
    b[n - 1] = D1_
    return solve(a, b)


def inverse(a):
    n = len(a)
    cols = [solve(a, [D1_ if i == j else D0_ for i in range(n)]) for j in range(n)]
    return [[cols[j][i] for j in range(n)] for i in range(n)]


def load_model(path):
    with open(path, "rb") as f:
        spec = tomllib.load(f)
    states = spec["states"]
    idx = {s: i for i, s in enumerate(states)}
    params = {k: dec(v["value"]) for k, v in spec.get("param", {}).items()}
    labels = {}
    for k, v in spec.get("label", {}).items():
        labels[k] = dec(v.get("detect", 1.0))
    n = len(states)
    L = zeros(n, n)
    Dl = {}
    for e in spec["edge"]:
        a, b = idx[e["between"][0]], idx[e["between"][1]]
        labs = list(e.get("labels", [])) + ["", ""]
        for d, (i, j) in enumerate([(a, b), (b, a)]):
            if d == 1 and e.get("one_way", False):
                continue
            w = params[e["rates"][d]]
            L[i][j] += w
            L[i][i] -= w
            lab = labs[d]
            if lab:
                p = labels.get(lab, D1_)
                Dl.setdefault(lab, zeros(n, n))
                Dl[lab][i][j] += p * w
    D0 = [row[:] for row in L]
    for m in Dl.values():
        for i in range(n):
            for j in range(n):
                D0[i][j] -= m[i][j]
    return L, D0, Dl


def load_records(path):
    recs = {}
    order = []
    with open(path) as f:
        rows = [r for r in f if not r.startswith("#")]
    for row in csv.DictReader(rows):
        r = row["record"]
        if r not in recs:
            recs[r] = []
            order.append(r)
        recs[r].append((dec(row["time"]), row["label"]))
    return [recs[r] for r in order]


def rowvec_mat(x, a):
    n = len(a[0])
    return [sum(x[i] * a[i][j] for i in range(len(x))) for j in range(n)]


def loglik(model_path, data_path, start, dead, frame, end_offset):
    L, D0, Dl = load_model(model_path)
    n = len(L)
    delta = dec(dead)
    F = dec(frame)
    G = expm(L, delta) if delta > 0 else eye(n)
    A = inverse(scale(D0, Decimal(-1)))
    Dsum = zeros(n, n)
    for m in Dl.values():
        Dsum = add(Dsum, m)
    K = matmul(matmul(G, A), Dsum)
    nu = stationary_left(K, generator=False)
    w0 = rowvec_mat(rowvec_mat(nu, G), A)
    pi = stationary_left(L, generator=True)
    cache = {}

    def E(g, dead_applies):
        dt = delta if dead_applies else D0_
        key = (g, dead_applies)
        if key in cache:
            return cache[key]
        if F == 0:
            t = g - dt
            if t < 0:
                raise ValueError("gap shorter than the dead time")
            m = expm(D0, t)
        else:
            lo = max(g - F / 2, D0_) - dt
            hi = g + F / 2 - dt
            lo = max(lo, D0_)
            m = integral(D0, lo, hi)
        cache[key] = m
        return m

    total = D0_
    for rec in load_records(data_path):
        if start == "first":
            alpha = rowvec_mat(w0, Dl[rec[0][1]])
            s = sum(alpha)
            alpha = [x / s for x in alpha]
            rest = range(1, len(rec))
        else:
            alpha = list(pi)
            rest = range(0, len(rec))
        for k in rest:
            t, lab = rec[k]
            if k == 0:
                x = alpha
                y = rowvec_mat(x, expm(D0, t) if F == 0 else integral(D0, t, t + F))
            else:
                g = t - rec[k - 1][0]
                x = rowvec_mat(alpha, G)
                y = rowvec_mat(x, E(g, True))
            alpha = rowvec_mat(y, Dl[lab])
            s = sum(alpha)
            total += s.ln()
            alpha = [v / s for v in alpha]
        if end_offset is not None:
            tau = dec(end_offset) - F / 2 - delta
            if tau > 0:
                y = rowvec_mat(rowvec_mat(alpha, G), expm(D0, tau))
                total += sum(y).ln()
    return total


def main():
    out = {
        "generated_by": "python3 testdata/likelihood/reference.py > testdata/likelihood/reference.json",
        "python": platform.python_version(),
        "precision_digits": getcontext().prec,
        "cases": [],
    }
    for name, model, data, start, dead, frame, end in CASES:
        ll = loglik(model, data, start, dead, frame, end)
        out["cases"].append({
            "name": name, "model": model, "data": data, "start": start,
            "dead_time": dead, "frame": frame, "end_offset": end,
            "loglik": str(ll.quantize(Decimal("1e-30"))),
        })
        print(name, ll, file=sys.stderr)
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
