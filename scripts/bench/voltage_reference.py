#!/usr/bin/env python3
"""Benchmark helpers for raw voltage (not a test).

  voltage_reference.py make DIR MINUTES   writes DIR/bench.raw (60 channels of int16 at 20 kHz:
                                          noise and fronts of spikes), DIR/bench.json, DIR/layout.csv
  voltage_reference.py detect DIR         the same detection with numpy/scipy, block by block as
                                          ringline does (10 s blocks with margins, sosfiltfilt on
                                          all channels of a block at once, MAD noise, negative
                                          threshold at 5 sigma, 1 ms dead time); prints
                                          REFERENCE_SECONDS and the spike count
"""
import json
import sys
import time
from pathlib import Path

import numpy as np
from scipy import signal

FS, CHANNELS, SCALE = 20000, 60, 0.5


def make(out, minutes):
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(7)
    frames = int(minutes * 60 * FS)
    x_um = (np.arange(CHANNELS) % 10) * 200.0
    block = 10 * FS
    t = np.arange(-20, 40) / FS
    wave = (-np.exp(-0.5 * (t / 1.5e-4) ** 2) + 0.35 * np.exp(-0.5 * ((t - 5e-4) / 3e-4) ** 2)) * 90 / SCALE
    with open(out / "bench.raw", "wb") as f:
        for start in range(0, frames, block):
            n = min(block, frames - start)
            x = rng.normal(0, 10 / SCALE, size=(n, CHANNELS))
            for burst in np.arange(start / FS + 1.0, (start + n) / FS - 0.5, 3.0):
                for c in range(CHANNELS):
                    k = int((burst + x_um[c] / 50e3 - start / FS) * FS)
                    if 20 <= k < n - 40:
                        x[k - 20:k + 40, c] += wave
            f.write(np.clip(np.round(x), -32768, 32767).astype("<i2").tobytes())
    (out / "bench.json").write_text(json.dumps({"sample_rate_hz": FS, "channels": CHANNELS,
                                                "sample_type": "int16", "scale_uv": SCALE}))
    with open(out / "layout.csv", "w") as f:
        f.write("site,x_um,y_um\n")
        for c in range(CHANNELS):
            f.write(f"E{c + 1:02d},{x_um[c]},{(c // 10) * 200.0}\n")


def detect(out):
    sos = signal.butter(3, [300, 3000], "bandpass", fs=FS, output="sos")
    raw = np.memmap(out / "bench.raw", dtype="<i2", mode="r").reshape(-1, CHANNELS)
    frames = raw.shape[0]
    block, margin, dead = 10 * FS, 2000, int(0.001 * FS)
    began = time.perf_counter()
    spikes = 0
    for start in range(0, frames, block):
        end = min(start + block, frames)
        lo, hi = max(0, start - margin), min(frames, end + margin)
        x = raw[lo:hi].astype(np.float64) * SCALE
        y = signal.sosfiltfilt(sos, x, axis=0)[start - lo:end - lo]
        sigma = np.median(np.abs(y), axis=0) / 0.6744897502
        for c in range(CHANNELS):
            below = np.flatnonzero(y[:, c] < -5 * sigma[c])
            last = -dead
            for k in below:
                if k - last >= dead:
                    spikes += 1
                    last = k
    seconds = time.perf_counter() - began
    print(f"reference: {spikes} spikes")
    print(f"REFERENCE_SECONDS {seconds:.3f}")


if __name__ == "__main__":
    if sys.argv[1] == "make":
        make(Path(sys.argv[2]), float(sys.argv[3]))
    else:
        detect(Path(sys.argv[2]))
