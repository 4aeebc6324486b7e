#!/usr/bin/python3
"""Straightforward NumPy implementations of veq's endpoint methods, timed on
the same curves as the C++ benchmark, printed side by side with it.

    /usr/bin/python3 bench/detection/reference_numpy.py BUILD/bin/veq_detection_bench

The C++ program writes its curves and the endpoints it found
(--write-curves); this script checks that its own endpoints agree, times
itself, runs the C++ benchmark in the same run and prints curves per second
for both. Debian 12's python3-numpy (1.24) and python3-scipy are used.

The NumPy versions follow the C++ algorithms step by step, vectorised where
NumPy makes that natural (local fits, residuals, cumulative sums), with plain
Python loops where the algorithm is sequential (growing a segment point by
point). They leave out the parts that do not change the endpoint on these
curves (spike removal, merging of neighbouring maxima, diagnostics), so they
do somewhat less work than the C++ code.
"""
import json
import math
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

# ---------------------------------------------------------------- shared


def window_starts(n, window):
    half = window // 2
    return np.clip(np.arange(n) - half, 0, n - window)


def local_slopes(v, e, window=5):
    """Slope of the least-squares quadratic over `window` points at each point."""
    n = v.size
    idx = window_starts(n, window)[:, None] + np.arange(window)[None, :]
    span = v[idx[:, -1]] - v[idx[:, 0]]
    scale = 2.0 / span
    x = (v[idx] - v[:, None]) * scale[:, None]
    y = e[idx] - e[:, None]
    x2 = x * x
    s0 = float(window)
    s1, s2, s3, s4 = x.sum(1), x2.sum(1), (x2 * x).sum(1), (x2 * x2).sum(1)
    t0, t1, t2 = y.sum(1), (x * y).sum(1), (x2 * y).sum(1)
    det = s0 * (s2 * s4 - s3 * s3) - s1 * (s1 * s4 - s3 * s2) + s2 * (s1 * s3 - s2 * s2)
    num = -(s1 * s4 - s3 * s2) * t0 + (s0 * s4 - s2 * s2) * t1 - (s0 * s3 - s1 * s2) * t2
    return num / det * scale


def noise_sd(v, e):
    span = v[2:] - v[:-2]
    a = (v[2:] - v[1:-1]) / span
    b = 1.0 - a
    r = e[1:-1] - (a * e[:-2] + b * e[2:])
    sq = r * r / (1.0 + a * a + b * b)
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


def parabola_vertex(x0, x1, x2, y0, y1, y2):
    d1 = (y1 - y0) / (x1 - x0)
    d2 = (y2 - y1) / (x2 - x1)
    a = (d2 - d1) / (x2 - x0)
    if not a < 0.0:
        return x1, y1
    x = min(max(0.5 * (x0 + x1) - d1 / (2.0 * a), x0), x2)
    return x, y0 + d1 * (x - x0) + a * (x - x0) * (x - x1)


# ---------------------------------------------------------------- derivative


def flank_position(v0, v1, v2, v3, dl, dr):
    if not (dl > 0 and dr > 0):
        return None
    from scipy.optimize import brentq
    h, hl, hr = v2 - v1, v1 - v0, v3 - v2
    f = lambda x: dr * math.log((x + hl) / x) - dl * math.log((h - x + hr) / (h - x))
    return v1 + brentq(f, 1e-12 * h, h * (1 - 1e-12), xtol=1e-13 * h)


def derivative(v, e, min_height=20.0, window=5, completion=0.5):
    d = local_slopes(v, e, window)
    a = np.abs(d)
    n = v.size
    sigma = noise_sd(v, e)
    peaks = np.nonzero((a[1:-1] > a[:-2]) & (a[1:-1] >= a[2:]))[0] + 1
    # Regions where |slope| falls away monotonically with the same sign, for
    # every point at once: lo is the last index at or before a point that
    # cannot extend further left, hi the first at or after it to the right.
    sign = np.sign(d)
    index = np.arange(n)
    stop_left = np.ones(n, bool)
    stop_left[1:] = ~((sign[:-1] == sign[1:]) & (a[:-1] <= a[1:]))
    lo_all = np.maximum.accumulate(np.where(stop_left, index, 0))
    stop_right = np.ones(n, bool)
    stop_right[:-1] = ~((sign[1:] == sign[:-1]) & (a[1:] <= a[:-1]))
    hi_all = np.minimum.accumulate(np.where(stop_right, index, n - 1)[::-1])[::-1]
    tall = np.abs(e[hi_all[peaks]] - e[lo_all[peaks]]) >= min_height
    endpoints = []
    for k in peaks[tall]:
        if not (a[k + 1:] < completion * a[k]).any() or not (a[:k] < completion * a[k]).any():
            continue
        # The C++ code also removes the tilt that uneven steps give the
        # vertex; it is zero on the even steps of these curves.
        x, _ = parabola_vertex(v[k - 1], v[k], v[k + 1], a[k - 1], a[k], a[k + 1])
        jump = k if abs(e[k + 1] - e[k]) >= abs(e[k] - e[k - 1]) else k - 1
        steps = np.abs(np.diff(e[max(jump - 2, 0):min(jump + 3, n - 1) + 1]))
        share = steps.max() / steps.sum()
        if share >= 0.5 and 1 <= jump and jump + 2 < n:
            s = 1.0 if e[jump + 1] > e[jump] else -1.0
            refined = flank_position(v[jump - 1], v[jump], v[jump + 1], v[jump + 2],
                                     s * (e[jump] - e[jump - 1]), s * (e[jump + 2] - e[jump + 1]))
            if refined is not None:
                x = refined
        endpoints.append((x, sigma))
    return endpoints[0][0] if endpoints else float("nan")


# ---------------------------------------------------------------- segments


def line_fit(x, y):
    xm, ym = x.mean(), y.mean()
    sxx = ((x - xm) ** 2).sum()
    b = ((x - xm) * (y - ym)).sum() / sxx
    return xm, ym, b, sxx


def segments(v, a, sample_ml=50.0, accept=3.0, seed_fraction=0.5):
    y = a * (sample_ml + v) / sample_ml
    n = v.size
    sigma = max(noise_sd(v, y), 1e-12)
    # Two-phase regression: SSE of a line over every prefix and suffix.
    def sse_prefix(x, y):
        k = np.arange(1, x.size + 1, dtype=float)
        sx, sy = np.cumsum(x), np.cumsum(y)
        sxx, sxy, syy = np.cumsum(x * x), np.cumsum(x * y), np.cumsum(y * y)
        vxx = sxx - sx * sx / k
        vxy = sxy - sx * sy / k
        vyy = syy - sy * sy / k
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.maximum(vyy - vxy * vxy / vxx, 0.0)
    left = sse_prefix(v, y)                    # left[s-1] = SSE of points 0..s-1
    right = sse_prefix(v[::-1], y[::-1])[::-1]  # right[s] = SSE of points s..n-1
    s_range = np.arange(3, n - 2)
    split = int(s_range[np.argmin(left[s_range - 1] + right[s_range])])

    def grow(order):
        seed = min(max(int(math.ceil(seed_fraction * len(order))), 2), len(order))
        used = list(order[:seed])
        xs, ys = v[used], y[used]
        cnt, sx, sy, sxx, sxy = float(len(used)), xs.sum(), ys.sum(), (xs * xs).sum(), (xs * ys).sum()
        misses = 0
        for i in order[seed:]:
            xm = sx / cnt
            vxx = sxx - sx * sx / cnt
            b = (sxy - sx * sy / cnt) / vxx
            pred = sy / cnt + b * (v[i] - xm)
            factor = 1.0 / cnt + (v[i] - xm) ** 2 / vxx if cnt > 2 else 1.0
            if abs(y[i] - pred) <= accept * sigma * math.sqrt(1.0 + factor):
                misses = 0
                used.append(i)
                cnt += 1
                sx += v[i]; sy += y[i]; sxx += v[i] * v[i]; sxy += v[i] * y[i]
            else:
                misses += 1
                if misses >= 2:
                    break
        while len(used) > 4:
            xm, ym, b, _ = line_fit(v[used], y[used])
            run = max(3, len(used) // 10)
            inner = used[-run:]
            mean = (y[inner] - (ym + b * (v[inner] - xm))).mean()
            if abs(mean) <= accept * sigma / math.sqrt(run):
                break
            used.pop()
        return used

    crossing = 0.5 * (v[split - 1] + v[split])
    for _ in range(4):
        lu = grow(list(range(split)))
        ru = grow(list(range(n - 1, split - 1, -1)))
        xa, ya, ba, sa = line_fit(v[lu], y[lu])
        xb, yb, bb, sb = line_fit(v[ru], y[ru])
        if ba != bb:
            crossing = xa + ((yb + bb * (xa - xb)) - ya) / (ba - bb)
        nxt = min(max(int(np.searchsorted(v, crossing, side="right")), 3), n - 3)
        if nxt == split:
            break
        split = nxt
    return crossing


# ---------------------------------------------------------------- crossing


def crossing(v, e, level):
    a = e[:-1] - level
    b = e[1:] - level
    hits = np.nonzero(((a <= 0) & (b > 0)) | ((a >= 0) & (b < 0)))[0]
    if hits.size == 0:
        return float("nan")
    i = int(hits[0])
    h, d = v[i + 1] - v[i], e[i + 1] - e[i]
    x = v[i] + h * (level - e[i]) / d
    sigma = noise_sd(v, e)
    n = v.size
    interp = 0.0
    for lo, hi in ((i - 1, i + 1), (i, i + 2), (i - 1, i + 2)):
        if lo < 0 or hi >= n:
            continue
        p = np.polyfit(v[lo:hi + 1] - v[i], e[lo:hi + 1], hi - lo)
        p[-1] -= level
        roots = np.roots(p)
        roots = roots[np.isreal(roots)].real + v[i]
        roots = roots[(roots >= v[i]) & (roots <= v[i + 1])]
        if roots.size:
            interp = max(interp, 1.3 * abs(roots[0] - x))
    slope = local_slopes(v[max(i - 2, 0):i + 3], e[max(i - 2, 0):i + 3])[min(i, 2)]
    noise = sigma / abs(slope) if slope != 0 else 0.0
    return x, math.hypot(noise, interp)


# ---------------------------------------------------------------- driver


def read_set(path):
    with open(path) as f:
        level = float(f.readline().split()[1])
        v = np.array([float(t) for t in f.readline().split()])
        curves, expected = [], []
        for line in f:
            values = [float(t) for t in line.split()]
            curves.append(np.array(values[:-1]))
            expected.append(values[-1])
    return level, v, curves, expected


def time_method(fn, curves, min_seconds=0.5):
    count, start = 0, time.process_time()
    while True:
        for c in curves:
            fn(c)
        count += len(curves)
        elapsed = time.process_time() - start
        if elapsed >= min_seconds:
            return count / elapsed


def main():
    if len(sys.argv) != 2:
        sys.exit(__doc__)
    bench = sys.argv[1]
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([bench, "--write-curves=" + tmp], check=True)
        numpy_rate, agreement = {}, {}
        for method in ("derivative", "segments", "crossing"):
            for points in (50, 200, 1000):
                level, v, curves, expected = read_set(os.path.join(tmp, f"{method}_{points}.txt"))
                if method == "derivative":
                    fn = lambda e: derivative(v, e)
                elif method == "segments":
                    fn = lambda e: segments(v, e)
                else:
                    fn = lambda e: crossing(v, e, level)[0]
                found = np.array([fn(c) for c in curves])
                agreement[(method, points)] = np.nanmax(np.abs(found - np.array(expected)))
                numpy_rate[(method, points)] = time_method(fn, curves)
        out = subprocess.run([bench, "--benchmark_format=json", "--benchmark_min_time=0.5"],
                             check=True, capture_output=True, text=True).stdout
    cpp_rate = {}
    for b in json.loads(out)["benchmarks"]:
        name, points = b["name"].split("/")
        method = name.replace("BM_", "").lower()
        if method == "derivativeunevensteps":
            print(f"C++ derivative with uneven steps, {points} points: "
                  f"{b['curves_per_s']:,.0f} curves/s")
            continue
        cpp_rate[(method, int(points))] = b["curves_per_s"]
    print(f"{'method':<11}{'points':>7}{'C++ curves/s':>15}{'NumPy curves/s':>16}{'ratio':>8}"
          f"{'max |C++ - NumPy| mL':>22}")
    for key in sorted(numpy_rate, key=lambda k: (["derivative", "segments", "crossing"].index(k[0]), k[1])):
        c, p = cpp_rate.get(key, float("nan")), numpy_rate[key]
        print(f"{key[0]:<11}{key[1]:>7}{c:>15,.0f}{p:>16,.0f}{c / p:>8.1f}{agreement[key]:>22.2e}")
    print(f"(CPU time per process; load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores)")


if __name__ == "__main__":
    main()
