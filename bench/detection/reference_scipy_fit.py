#!/usr/bin/python3
"""Straightforward NumPy/SciPy implementations of veq's Gran method and model
fit, timed on the same curves as the C++ benchmark, printed side by side.

    /usr/bin/python3 bench/detection/reference_scipy_fit.py BUILD/bin/veq_detection_fit_bench

The C++ program writes its 200-point curves, their sample documents and its
own endpoints (--write-curves); this script computes the same endpoints with
NumPy and SciPy, checks that they agree, times itself, runs the C++
benchmark in the same run and prints curves (fits) per second for both.
Debian 12's python3-numpy (1.24) and python3-scipy (1.10) are used.

- Gran (calibrated slope 29.58 mV/decade): the C++ algorithm step by step,
  NumPy for the functions and the fits, a Python loop where the algorithm is
  sequential (growing a line point by point).
- 1:1 model fit: scipy.optimize.least_squares (MINPACK's Levenberg-Marquardt,
  method "lm", the same algorithm as Eigen's port) on the exact 1:1 closed
  form, vectorised, with SciPy's default finite-difference Jacobian, from the
  same starting values as the C++ code.
- General model fit (copper in ammonia): the same least_squares around a
  NumPy Newton solver of the equilibria at every point (the textbook solver
  of bench/chemistry/numpy_reference.py, warm-started along the curve).
"""
import json
import math
import os
import subprocess
import sys
import tempfile
import time

import numpy as np
from scipy.optimize import least_squares

LN10 = math.log(10.0)
HERE = os.path.dirname(os.path.abspath(__file__))
CONSTANTS = os.path.join(HERE, "..", "..", "chemistry", "data", "constants.json")

# ---------------------------------------------------------------- shared


def noise_sd(v, e):
    span = v[2:] - v[:-2]
    hl = v[1:-1] - v[:-2]
    hr = v[2:] - v[1:-1]
    scaled = span * e[1:-1] - hr * e[:-2] - hl * e[2:]
    sq = scaled * scaled / (span * span + hl * hl + hr * hr)
    var = sq.mean()
    for _ in range(30):
        keep = sq <= 9.0 * var
        if not keep.any():
            break
        nxt = sq[keep].mean() / 0.97334
        done = abs(nxt - var) <= 1e-2 * var
        var = nxt
        if done:
            break
    return math.sqrt(var)


def steepest_fall(v, y):
    med = y.copy()
    med[1:-1] = np.median(np.stack([y[:-2], y[1:-1], y[2:]]), axis=0)
    d = np.gradient(med, v)
    i = int(np.argmin(d))
    return i if 0 < i < v.size - 1 and d[i] < 0 else None


# ---------------------------------------------------------------- Gran


def relative_fit(v, h, centre):
    p, q = h, (v - centre) * h
    m = np.array([[p @ p, p @ q], [p @ q, q @ q]])
    rhs = np.array([p.sum(), q.sum()])
    a, b = np.linalg.solve(m, rhs)
    return a, b, m


def gran_side(v, lng, order, sigma_r, accept=3.0):
    count = len(order)
    if count < 3:
        return None
    lg = lng[order]
    h_all = np.exp(lg.max() - lg)
    x_all = v[order]
    centre = x_all[-1]
    seed = max(min(3, count), (count + 1) // 2)
    used = list(range(seed))
    a, b, m = relative_fit(x_all[used], h_all[used], centre)
    # Spikes in the seed.
    for _ in range(seed // 4):
        if len(used) <= 3:
            break
        r = np.abs(1.0 - (a + b * (x_all[used] - centre)) * h_all[used])
        worst = int(np.argmax(r))
        if r[worst] <= 5.0 * sigma_r:
            break
        used.pop(worst)
        a, b, m = relative_fit(x_all[used], h_all[used], centre)
    misses, missed = 0, []
    minv = np.linalg.inv(m)
    for k in range(seed, count):
        x, hk = x_all[k], h_all[k]
        r = 1.0 - (a + b * (x - centre)) * hk
        g = np.array([hk, (x - centre) * hk])
        limit = accept * sigma_r * math.sqrt(1.0 + g @ minv @ g)
        if abs(r) <= limit:
            misses, missed = 0, []
            used.append(k)
            a, b, m = relative_fit(x_all[used], h_all[used], centre)
            minv = np.linalg.inv(m)
        else:
            missed.append(k)
            misses += 1
            if misses >= 3:
                break
    while len(used) > 4:
        run = max(3, len(used) // 10)
        inner = used[-run:]
        mean = (1.0 - (a + b * (x_all[inner] - centre)) * h_all[inner]).mean()
        if abs(mean) <= accept * sigma_r / math.sqrt(run):
            break
        used.pop()
        a, b, m = relative_fit(x_all[used], h_all[used], centre)
    idx = np.array(order)[used]
    # Final fit centred at the weighted mean.
    lg = lng[idx]
    ref = lg.max()
    h = np.exp(ref - lg)
    centre = (h * h * v[idx]).sum() / (h * h).sum()
    a, b, m = relative_fit(v[idx], h, centre)
    r = 1.0 - (a + b * (v[idx] - centre)) * h
    minv = np.linalg.inv(m)
    x0 = -a / b
    grad = np.array([1.0, x0])
    factor = grad @ minv @ grad / (b * b)
    var = max(r @ r / (len(idx) - 2), sigma_r ** 2) * factor
    return {"zero": centre + x0, "var": var, "b": b * math.exp(ref)}


def gran(v, e, v0, slope=29.58):
    sign = 1.0 if e[: max(1, v.size // 5)].mean() >= e[-max(1, v.size // 5):].mean() else -1.0
    s = sign * slope
    sigma_r = max(LN10 * noise_sd(v, e) / abs(s), 1e-7)
    i = steepest_fall(v, e / s)
    if i is None:
        return float("nan")
    split, ref = v[i], e[i]
    y = LN10 * (e - ref) / s
    before_lng = np.log(v0 + v) + y
    after_lng = -y
    b1 = b2 = 0.0
    previous = 0.0
    zero = float("nan")
    for _ in range(5):
        before = [j for j in range(v.size) if v[j] < split]
        after = [j for j in range(v.size - 1, -1, -1) if v[j] > split]
        if b1 > 0 and b2 > 0:
            limit = 0.3 * sigma_r
            before = [j for j in before if v[j] * (v0 + v[j]) <= limit * b1 * b2 * previous * (previous - v[j]) ** 2]
            after = [j for j in after if (v0 + v[j]) <= limit * b1 * b2 * (v[j] - previous) ** 2]
        fb = gran_side(v, before_lng, before, sigma_r)
        fa = gran_side(v, after_lng, after, sigma_r)
        fits = [f for f in (fb, fa) if f is not None]
        if not fits:
            return float("nan")
        w = np.array([1.0 / f["var"] for f in fits])
        zero = float((w * np.array([f["zero"] for f in fits])).sum() / w.sum())
        b1 = -fb["b"] if fb and fb["b"] < 0 else 0.0
        b2 = fa["b"] if fa and fa["b"] > 0 else 0.0
        moved = abs(zero - previous)
        previous = zero
        split = min(max(zero, v[0]), v[-1])
        if moved <= 1e-4 * zero:
            break
    return zero


# ---------------------------------------------------------------- 1:1 model


def free_metal(v, v0, cy_stock, ve, k):
    total = v0 + v
    cm = cy_stock * ve / total
    cy = cy_stock * v / total
    b = 1.0 + k * (cy - cm)
    root = np.sqrt(b * b + 4.0 * k * cm)
    return np.where(b >= 0.0, 2.0 * cm / (b + root), (-b + root) / (2.0 * k))


def model_one_to_one(v, e, sample, log_k, log_alpha):
    v0, cy = sample["sample_volume_ml"], sample["titrant"]["conc_mol_per_l"]
    sign = 1.0 if e[: max(1, v.size // 5)].mean() >= e[-max(1, v.size // 5):].mean() else -1.0
    i = steepest_fall(v, sign * e)
    steep = v[i]
    nominal = sample["metals"][0]["conc_mol_per_l"] * v0 / cy

    def log_m(p):
        return np.log10(free_metal(v, v0, cy, math.exp(p[0]), 10.0 ** p[1])) - log_alpha

    def linear(lm):
        a = np.stack([np.ones_like(lm), lm], axis=1)
        coef, *_ = np.linalg.lstsq(a, e, rcond=None)
        return coef, float(((a @ coef - e) ** 2).sum())

    best = None
    for ve, lk in [(steep, log_k), (nominal, log_k), (steep, log_k - 1.5), (steep, log_k + 1.5)]:
        p = [math.log(ve), lk]
        coef, sse = linear(log_m(p))
        if best is None or sse < best[0]:
            best = (sse, p + list(coef))

    def residual(p):
        return p[2] + p[3] * log_m(p) - e

    fit = least_squares(residual, np.array(best[1]), method="lm", xtol=1e-8, ftol=1e-8)
    return math.exp(fit.x[0])


def one_to_one_constants(lib, sample):
    """log10 K' and log10 alpha_M at the sample's pH with its ligands (each
    ligand in excess: free = total / alpha_L(H)), as chemistry's
    conditional_constant() computes them."""
    ph, metal, titrant = sample["ph"], sample["metals"][0]["name"], sample["titrant"]["name"]
    by_name = {l["name"]: l for l in lib["ligands"]}

    def log_sum(terms):
        top = max(terms)
        return top + math.log10(sum(10.0 ** (t - top) for t in terms))

    def alpha_h(ligand):
        return log_sum([0.0] + [p["log10_beta"] - p["protons"] * ph
                                for p in by_name[ligand].get("protonation", [])])

    metal_terms = [0.0]
    for m in lib["metals"]:
        if m["name"] == metal:
            metal_terms += [h["log10_beta"] + h["hydroxide"] * ph
                            for h in m.get("hydrolysis", []) if h.get("metals", 1) == 1]
    for l in sample.get("ligands", []):
        free = math.log10(l["total_mol_per_l"]) - alpha_h(l["name"])
        metal_terms += [c["log10_beta"] + c.get("ligands", 1) * free
                        for c in by_name[l["name"]].get("complexes", [])
                        if c["metal"] == metal and c.get("metals", 1) == 1 and c.get("protons", 0) == 0]
    complexes = [c["log10_beta"] - c.get("protons", 0) * ph
                 for c in by_name[titrant]["complexes"] if c["metal"] == metal and c.get("metals", 1) == 1
                 and c.get("ligands", 1) == 1]
    log_alpha_m = log_sum(metal_terms)
    return log_sum(complexes) - log_alpha_m - alpha_h(titrant), log_alpha_m


# ---------------------------------------------------------------- general model


def build_system(lib, metals, ligands, ph):
    names = ["H+"] + metals + ligands
    nc = len(names)
    rows, log_beta, titrant_species = [], [], []

    def add(st, lb, metal_titrant=False):
        rows.append(st)
        log_beta.append(lb)
        titrant_species.append(metal_titrant)

    for j in range(1, nc):
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
                add(st, c["log10_beta"], metal_titrant=(li == 0))
    a = np.array(rows, dtype=float)
    lnk = (np.array(log_beta) - a[:, 0] * ph) * LN10
    return a[:, 1:], lnk, np.array(titrant_species)


def newton(a, lnk, t, x0=None):
    active = t > 0
    keep = np.all(a[:, ~active] == 0, axis=1)
    aa, kk, tt = a[keep][:, active], lnk[keep], t[active]
    x = np.log(tt) if x0 is None else x0[active].copy()
    for _ in range(500):
        c = np.exp(kk + aa @ x)
        r = aa.T @ c - tt
        if np.all(np.abs(r) <= 1e-10 * tt):
            full = np.full(t.shape, -np.inf)
            full[active] = x
            return full
        jac = aa.T @ (c[:, None] * aa)
        dx = np.linalg.solve(jac, -r)
        big = np.max(np.abs(dx))
        if big > 2.0:
            dx *= 2.0 / big
        x = x + dx
    raise RuntimeError("no convergence")


def model_speciation(v, e, sample, lib):
    metal = sample["metals"][0]["name"]
    ligands = [sample["titrant"]["name"]] + [l["name"] for l in sample["ligands"]]
    a, lnk, shifted = build_system(lib, [metal], ligands, sample["ph"])
    v0, cy = sample["sample_volume_ml"], sample["titrant"]["conc_mol_per_l"]
    nominal = sample["metals"][0]["conc_mol_per_l"] * v0 / cy
    ligand_totals = [l["total_mol_per_l"] for l in sample["ligands"]]
    state = {"x": None}

    def log_m(p):
        ve, shift = math.exp(p[0]), p[1]
        k = lnk + shifted * shift * LN10
        out = np.empty(v.size)
        xs = state["x"] if state["x"] is not None else [None] * v.size
        new = []
        for i, vol in enumerate(v):
            f = v0 / (v0 + vol)
            t = np.array([sample["metals"][0]["conc_mol_per_l"] * ve / nominal * f,
                          cy * vol / (v0 + vol)] + [lt * f for lt in ligand_totals])
            start = xs[i] if xs[i] is not None and np.all(np.isfinite(xs[i][t > 0])) else None
            x = newton(a, k, t, start)
            new.append(x)
            out[i] = x[0] / LN10
        state["x"] = new
        return out

    # Start from the 1:1 fit, as the C++ code does.
    one = model_one_to_one(v, e, sample, *one_to_one_constants(lib, sample))
    lm0 = log_m([math.log(one), 0.0])
    coef, *_ = np.linalg.lstsq(np.stack([np.ones_like(lm0), lm0], axis=1), e, rcond=None)

    def residual(p):
        return p[2] + p[3] * log_m(p) - e

    fit = least_squares(residual, np.array([math.log(one), 0.0, coef[0], coef[1]]), method="lm",
                        xtol=1e-8, ftol=1e-8)
    return math.exp(fit.x[0])


# ---------------------------------------------------------------- driver


def read_set(path):
    with open(path) as f:
        sample = json.loads(f.readline())
        rows = [line for line in f]
    curves = []
    for k in range(0, len(rows), 3):
        v = np.array([float(t) for t in rows[k].split()])
        e = np.array([float(t) for t in rows[k + 1].split()])
        truth, gran_cpp, model_cpp = (float(t) for t in rows[k + 2].split())
        curves.append((v, e, truth, gran_cpp, model_cpp))
    return sample, curves


def rate(fn, items, min_seconds):
    count, start = 0, time.process_time()
    while True:
        for item in items:
            fn(item)
            count += 1
            if time.process_time() - start >= min_seconds and count >= 1:
                return count / (time.process_time() - start)


def main():
    if len(sys.argv) != 2:
        sys.exit(__doc__)
    bench = sys.argv[1]
    lib = json.load(open(CONSTANTS))
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([bench, "--write-curves=" + tmp], check=True)
        strong_sample, strong = read_set(os.path.join(tmp, "strong_break.txt"))
        ammonia_sample, ammonia = read_set(os.path.join(tmp, "ammonia_copper.txt"))
    v0 = strong_sample["sample_volume_ml"]
    log_k_ca, log_alpha_ca = one_to_one_constants(lib, strong_sample)

    results = {}
    gran_fn = lambda c: gran(c[0], c[1], v0)
    one_fn = lambda c: model_one_to_one(c[0], c[1], strong_sample, log_k_ca, log_alpha_ca)
    spec_fn = lambda c: model_speciation(c[0], c[1], ammonia_sample, lib)
    agreement = {
        "gran": max(abs(gran_fn(c) - c[3]) for c in strong),
        "model_one_to_one": max(abs(one_fn(c) - c[4]) for c in strong),
        "model_speciation": max(abs(spec_fn(c) - c[4]) for c in ammonia[:2]),
    }
    truth_error = {
        "gran": max(abs(c[3] - c[2]) / c[2] for c in strong),
        "model_one_to_one": max(abs(c[4] - c[2]) / c[2] for c in strong),
        "model_speciation": max(abs(c[4] - c[2]) / c[2] for c in ammonia),
    }
    results["gran"] = rate(gran_fn, strong, 1.0)
    results["model_one_to_one"] = rate(one_fn, strong, 1.0)
    results["model_speciation"] = rate(spec_fn, ammonia, 3.0)

    out = subprocess.run([bench, "--benchmark_format=json", "--benchmark_min_time=0.5"],
                         check=True, capture_output=True, text=True).stdout
    cpp = {b["name"]: b["curves_per_s"] for b in json.loads(out)["benchmarks"]}
    rows = [("gran", "Gran, calibrated slope", "BM_GranCalibratedSlope"),
            ("model_one_to_one", "model fit, 1:1 closed form", "BM_ModelOneToOne"),
            ("model_speciation", "model fit, speciation (Cu, ammonia)", "BM_ModelSpeciationAmmonia")]
    print(f"{'method (200 points)':<38}{'C++ /s':>12}{'NumPy/SciPy /s':>16}{'ratio':>8}"
          f"{'max |C++ - Py| mL':>19}{'max C++ error %':>17}")
    for key, label, name in rows:
        c, p = cpp[name], results[key]
        print(f"{label:<38}{c:>12,.1f}{p:>16,.2f}{c / p:>8.1f}{agreement[key]:>19.2e}"
              f"{100 * truth_error[key]:>17.4f}")
    for name in ("BM_GranFittedSlope", "BM_GranAmmoniaCorrected", "BM_ModelSpeciationTwoMetals"):
        print(f"C++ only: {name[3:]:<32}{cpp[name]:>12,.1f} /s")
    print(f"(CPU time per process; load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores)")


if __name__ == "__main__":
    main()
