#!/usr/bin/python3
"""Straightforward NumPy Newton solver for the benchmark system of
equilibrium_bench.cpp: zinc with EDTA in an ammonia buffer at pH 10 with
Eriochrome Black T, constants read from chemistry/data/constants.json.

Newton's method on the natural logarithms of the free concentrations with the
mass-balance residual, a dense Jacobian A^T diag(c) A solved by numpy.linalg,
and the step cut to at most 2 natural-log units per component: the textbook
approach, without the special start or line search of the C++ solver.

Prints one JSON object: cold solves per second, warm-started solves per second
along the curve, the time of a 500-point curve, and pZn at a few volumes for the
C++ benchmark to compare with its own answers.
Run with the Debian interpreter: /usr/bin/python3 numpy_reference.py CONSTANTS_JSON
"""
import json
import sys
import time

import numpy as np

SAMPLE_ML, ZN_M, EDTA_M, NH3_M, IND_M, PH = 50.0, 1.0e-3, 1.0e-3, 0.1, 1.0e-5, 10.0
LN10 = np.log(10.0)


def build(lib):
    metals = ["Zn"]
    ligands = ["EDTA", "ammonia", "Eriochrome Black T"]
    names = ["H+"] + metals + ligands
    nc = len(names)
    rows, log_beta = [], []

    def add(st, lb):
        rows.append(st)
        log_beta.append(lb)

    for j in range(1, nc):  # free components (H+ is fixed by the pH)
        st = [0] * nc
        st[j] = 1
        add(st, 0.0)
    st = [0] * nc
    st[0] = -1
    add(st, lib["water"]["log10_beta"])
    by_name = {l["name"]: l for l in lib["ligands"]}
    for li, lname in enumerate(ligands):
        lc = 1 + len(metals) + li
        for p in by_name[lname].get("protonation", []):
            st = [0] * nc
            st[0], st[lc] = p["protons"], 1
            add(st, p["log10_beta"])
    for m in lib["metals"]:
        if m["name"] in metals:
            mi = 1 + metals.index(m["name"])
            for h in m.get("hydrolysis", []):
                st = [0] * nc
                st[0], st[mi] = -h["hydroxide"], h.get("metals", 1)
                add(st, h["log10_beta"])
    for li, lname in enumerate(ligands):
        lc = 1 + len(metals) + li
        for c in by_name[lname].get("complexes", []):
            if c["metal"] in metals:
                st = [0] * nc
                st[0] = c.get("protons", 0)
                st[1 + metals.index(c["metal"])] = c.get("metals", 1)
                st[lc] = c.get("ligands", 1)
                add(st, c["log10_beta"])
    a = np.array(rows, dtype=float)
    # Fixed pH: fold the H+ column into the constants.
    lnk = (np.array(log_beta) - a[:, 0] * PH) * LN10
    return a[:, 1:], lnk


def totals(added_ml):
    total = SAMPLE_ML + added_ml
    f = SAMPLE_ML / total
    return np.array([ZN_M * f, EDTA_M * added_ml / total, NH3_M * f, IND_M * f])


def solve(a, lnk, t, x0=None):
    active = t > 0
    aa = a[:, active]
    keep = np.all(a[:, ~active] == 0, axis=1)
    aa, kk, tt = aa[keep], lnk[keep], t[active]
    x = np.log(tt) if x0 is None else x0[active].copy()
    for it in range(500):
        c = np.exp(kk + aa @ x)
        r = aa.T @ c - tt
        if np.all(np.abs(r) <= 1e-10 * tt):
            full = np.full(t.shape, -np.inf)
            full[active] = x
            return full, it
        jac = aa.T @ (c[:, None] * aa)
        dx = np.linalg.solve(jac, -r)
        big = np.max(np.abs(dx))
        if big > 2.0:
            dx *= 2.0 / big
        x = x + dx
    raise RuntimeError("no convergence")


def main():
    lib = json.load(open(sys.argv[1]))
    a, lnk = build(lib)
    veq = ZN_M * SAMPLE_ML / EDTA_M
    volumes = np.linspace(0.0, 1.5 * veq, 500)
    # Cold solves: cycle over volumes around the equivalence point.
    cold_volumes = np.linspace(0.5 * veq, 1.5 * veq, 64)
    n, start = 0, time.process_time()
    while time.process_time() - start < 1.0:
        solve(a, lnk, totals(cold_volumes[n % 64]))
        n += 1
    cold_rate = n / (time.process_time() - start)
    # A 500-point curve, warm-started from the previous point.
    best = float("inf")
    for _ in range(3):
        start = time.process_time()
        x = None
        for v in volumes:
            t = totals(v)
            if x is not None and not np.all(np.isfinite(x[t > 0])):
                x = None
            x, _ = solve(a, lnk, t, x)
        best = min(best, time.process_time() - start)
    checks = {}
    for v in (10.0, 49.0, 50.0, 51.0, 70.0):
        x, _ = solve(a, lnk, totals(v))
        checks["%g" % v] = -x[0] / LN10
    print(json.dumps({"cold_solves_per_s": cold_rate, "curve_500_ms": best * 1e3,
                      "warm_solves_per_s": 500 / best, "pzn": checks}))


if __name__ == "__main__":
    main()
