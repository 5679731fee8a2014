#!/usr/bin/env python3
"""A vectorised numpy/scipy fixed-step implementation of ringline's network model, for the
benchmark only: neurons placed uniformly in the strip, Gaussian distance-dependent wiring
scaled to the target mean in-degree (pairs from scipy.spatial.cKDTree), delays quantised to
the step, leaky integrate-and-fire with reset and refractoriness, Tsodyks-Markram depression,
Poisson noise kicks, step dt = 0.1 ms (exact exponential decay per step).

Usage: network_reference.py SCENARIO.json   (prints spikes, synaptic events and seconds)
"""
import json
import sys
import time

import numpy as np
from scipy import sparse
from scipy.spatial import cKDTree


def main():
    s = json.load(open(sys.argv[1]))
    rng = np.random.default_rng(s["seed"])
    start = time.perf_counter()
    pat = s["pattern"]
    n = int(round(s["density_per_mm2"] * pat["length_um"] * pat["width_um"] / 1e6))
    pos = np.column_stack([rng.uniform(0, pat["length_um"], n), rng.uniform(-pat["width_um"] / 2, pat["width_um"] / 2, n)])
    c = s["connectivity"]
    sigma, k = c["sigma_um"], c["mean_in_degree"]
    pairs = cKDTree(pos).query_pairs(4 * sigma, output_type="ndarray")
    pairs = np.vstack([pairs, pairs[:, ::-1]])
    d = np.hypot(*(pos[pairs[:, 0]] - pos[pairs[:, 1]]).T)
    f = np.exp(-0.5 * (d / sigma) ** 2)
    p = np.minimum(1.0, k * n / f.sum() * f)
    keep = rng.random(len(p)) < p
    pre, post, d = pairs[keep, 0], pairs[keep, 1], d[keep]
    dt = 1e-4
    delay_steps = np.rint((s.get("synaptic_delay_s", 1e-3) + d / (s.get("axon_speed_mm_s", 300) * 1e3)) / dt).astype(np.int64)
    order = np.argsort(pre, kind="stable")
    w = sparse.csr_matrix((delay_steps[order] + 1, (pre[order], post[order])), shape=(n, n))
    dmax = int(delay_steps.max()) + 2
    nu, th, vr, tref = s["neuron"]["tau_m_s"], s["neuron"]["threshold_mv"], s["neuron"]["reset_mv"], s["neuron"]["refractory_s"]
    exc = rng.random(n) < s.get("excitatory_fraction", 0.8)
    drive = np.maximum(0, s["drive"]["mean_mv"] + s["drive"]["sd_mv"] * rng.standard_normal(n))
    je, ji = s["synapse"]["excitatory_mv"], s["synapse"]["inhibitory_mv"]
    u, trec = s["synapse"]["depression_u"], s["synapse"]["recovery_s"]
    kick_p, kick = s["noise"]["rate_hz"] * dt, s["noise"]["amplitude_mv"]
    v = np.zeros(n)
    x = np.ones(n)
    ref_until = np.full(n, -1.0)
    buf = np.zeros((dmax, n))
    decay, rec = np.exp(-dt / nu), np.exp(-dt / trec)
    steps = int(s["duration_s"] / dt)
    spikes = events = 0
    for step in range(steps):
        t = step * dt
        slot = step % dmax
        inp = buf[slot]
        inp += kick * (rng.random(n) < kick_p)
        active = t >= ref_until
        v = np.where(active, drive + (v - drive) * decay + inp, vr)
        x = 1 - (1 - x) * rec
        inp[:] = 0
        fired = np.flatnonzero(v >= th)
        if fired.size:
            spikes += fired.size
            eff = np.where(exc[fired], je * u * x[fired], -ji)
            x[fired] -= u * x[fired]
            v[fired] = vr
            ref_until[fired] = t + tref
            rows = w[fired]
            counts = np.diff(rows.indptr)
            events += rows.nnz
            weights = np.repeat(eff, counts)
            slots = (step + rows.data) % dmax
            np.add.at(buf, (slots, rows.indices), weights)
    elapsed = time.perf_counter() - start
    print(f"reference: {n} neurons, {len(pre)} synapses, {spikes} spikes, {events} synaptic events in {elapsed:.2f} s")
    print(f"REFERENCE_SECONDS {elapsed:.3f}")


if __name__ == "__main__":
    main()
