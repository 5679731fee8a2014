#!/usr/bin/env python3
"""A straightforward numpy/scipy implementation of the steps of `ringline analyze`, for the
benchmark only: read the spike list and layout, detect network bursts from the smoothed
population rate, take each site's activation (first spike opening a 2-spike cluster within
20 ms), fit one-way and two-way line fronts with scipy.stats.theilslopes (two-way origins
scanned over sites and midpoints), choose by BIC, and bootstrap the chosen slope over sites
with 1000 resamples, refitting with scipy.stats.theilslopes each time.

Prints the burst count, front count and median speed so the run can be compared with
ringline's. Usage: analyze_reference.py SPIKES.csv LAYOUT.csv
"""
import sys

import numpy as np
from scipy import ndimage, stats


def read(spikes_path, layout_path):
    sites = np.loadtxt(spikes_path, delimiter=",", skiprows=1, usecols=0, dtype=str)
    times = np.loadtxt(spikes_path, delimiter=",", skiprows=1, usecols=1) * 1e-3  # time_ms
    lay_ids = np.loadtxt(layout_path, delimiter=",", skiprows=1, usecols=0, dtype=str)
    xy = np.loadtxt(layout_path, delimiter=",", skiprows=1, usecols=(1, 2))
    trains = [np.sort(times[sites == sid]) for sid in lay_ids]
    return lay_ids, xy, trains


def bursts(trains, bin_s=0.005, sd_s=0.02, k=6.0, edge_fraction=0.25, merge_gap=0.2, min_frac=0.3):
    allt = np.concatenate(trains)
    pad = 4 * sd_s
    edges = np.arange(allt.min() - pad, allt.max() + pad + bin_s, bin_s)
    counts, _ = np.histogram(allt, edges)
    rate = ndimage.gaussian_filter1d(counts.astype(float), sd_s / bin_s, mode="constant", truncate=4.0) / bin_s
    base = np.median(rate)
    mad = np.median(np.abs(rate - base)) / 0.6744897501960817
    single = 1.0 / (np.sqrt(2 * np.pi) * sd_s)
    thr = max(base + k * mad, 3 * single)
    edge = base + edge_fraction * (thr - base)
    above = rate > edge
    windows = []
    i = 0
    n = len(rate)
    centres = edges[:-1] + bin_s / 2
    while i < n:
        if rate[i] < thr:
            i += 1
            continue
        lo = i
        while lo > 0 and above[lo - 1]:
            lo -= 1
        hi = i
        while hi + 1 < n and above[hi + 1]:
            hi += 1
        if windows and centres[lo] - centres[windows[-1][1]] <= merge_gap:
            windows[-1][1] = hi
        else:
            windows.append([lo, hi])
        i = hi + 1
    active = sum(1 for t in trains if len(t))
    need = max(int(np.ceil(min_frac * active)), 3)
    out = []
    for lo, hi in windows:
        a, b = centres[lo] - bin_s / 2, centres[hi] + bin_s / 2
        nsites = sum(1 for t in trains if np.searchsorted(t, b, "right") > np.searchsorted(t, a, "left"))
        if nsites >= need:
            out.append((a, b))
    return out


def activation(trains, a, b, prev_end, lead=0.1, k=2, w=0.02):
    start = max(a - lead, prev_end)
    acts = []
    for t in trains:
        i0, i1 = np.searchsorted(t, start, "left"), np.searchsorted(t, b, "right")
        found = None
        for j in range(i0, i1):
            if np.searchsorted(t, t[j] + w, "right") - j >= k:
                found = t[j]
                break
        acts.append(found)
    return acts


def bic(rss, n, k, floor):
    return n * np.log(max(rss, floor) / n) + k * np.log(n)


def fit(s, t, floor):
    n = len(s)
    one = stats.theilslopes(t, s)
    r1 = t - one.intercept - one.slope * s
    best = ("one", one.slope, s, bic(np.sum(r1 ** 2), n, 2, floor))
    order = np.sort(s)
    grid = np.concatenate([order, (order[1:] + order[:-1]) / 2])
    grid = grid[(grid > order[1]) & (grid < order[-2])] if n >= 5 else []
    best_two, best_loss = None, np.inf
    for s0 in grid:
        u = np.abs(s - s0)
        f = stats.theilslopes(t, u)
        if f.slope <= 0:
            continue
        loss = np.sum(np.abs(t - f.intercept - f.slope * u))
        if loss < best_loss:
            best_two, best_loss = (f, u), loss
    if best_two is not None:
        f, u = best_two
        b2 = bic(np.sum((t - f.intercept - f.slope * u) ** 2), n, 3, floor)
        if b2 < best[3]:
            best = ("two", f.slope, u, b2)
    return best


def main():
    ids, xy, trains = read(sys.argv[1], sys.argv[2])
    along = (xy - xy.mean(axis=0)) @ np.linalg.svd(xy - xy.mean(axis=0))[2][0]
    along -= along.min()
    rng = np.random.default_rng(1)
    speeds = []
    prev_end = -np.inf
    found = bursts(trains)
    floor_step = 1e-5
    for a, b in found:
        acts = activation(trains, a, b, prev_end)
        prev_end = b
        idx = [i for i, v in enumerate(acts) if v is not None]
        if len(idx) < 4:
            continue
        s = along[idx]
        t = np.array([acts[i] for i in idx])
        n = len(t)
        floor = n * floor_step ** 2 / 12
        kind, slope, u, b_best = fit(s, t, floor)
        const = np.sum((t - np.median(t)) ** 2)
        if b_best >= bic(const, n, 1, floor):
            continue
        boot = []
        for _ in range(1000):
            pick = rng.integers(0, n, n)
            if np.unique(u[pick]).size < 2:
                continue
            boot.append(stats.theilslopes(t[pick], u[pick]).slope)
        lo, hi = np.percentile(boot, [2.5, 97.5])
        if lo <= 0 <= hi:
            continue
        speeds.append(1 / (abs(slope) * 1e3))
    print(f"reference: {len(found)} bursts, {len(speeds)} fronts, median speed {np.median(speeds):.3f} mm/s")


if __name__ == "__main__":
    main()
