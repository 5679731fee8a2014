#!/usr/bin/env python3
"""Reference fixtures for ringline's tests, computed with numpy and scipy.

Writes tests/fixtures/geometry_reference.json, stats_reference.json, filter_reference.json,
wav_reference.json (with the files in wav/), siegert_reference.json, spectrum_reference.json and
sttc_reference.json, compare_reference.json and probit_reference.json (statsmodels GLM Binomial(Probit);
profile-likelihood intervals with scipy.optimize).
With --check, computes the same fixtures afresh and compares them with the committed files
(numbers to a relative 1e-9), exiting 1 on a difference. The point sets are seeded (numpy PCG64), so the run is reproducible.

References used:
- total-least-squares line: numpy.linalg.svd of the centred points (first right singular
  vector is the direction; the second singular value over sqrt(n) is the RMS perpendicular
  distance);
- geometric circle fit: scipy.optimize.least_squares (method 'lm', i.e. MINPACK) on the
  radial residuals |p - c| - R;
- Kasa's algebraic fit: numpy.linalg.lstsq on x^2 + y^2 + D x + E y + F = 0;
- Theil-Sen: scipy.stats.theilslopes (defaults: method 'separate', 95%);
- OLS: scipy.stats.linregress, and NIST StRD Norris (data and certified values read from the
  copy that ships inside the scipy wheel);
- Huber M-estimation: statsmodels RLM with HuberT() and its defaults;
- Wilson interval: statsmodels.stats.proportion.proportion_confint(method='wilson');
- median interval ranks: scipy.stats.binom.ppf(0.025, n, 0.5);
- quantiles: numpy.percentile (default 'linear');
- Butterworth band-pass: scipy.signal.butter(N, [lo, hi], 'bandpass', fs=fs, output='sos'),
  its response by scipy.signal.sosfreqz, and zero-phase filtering by scipy.signal.sosfiltfilt
  (defaults: odd extension, steady-state initial conditions);
- WAV files: written by Python's standard `wave` module (16-bit PCM), by scipy.io.wavfile.write
  (32-bit float), and byte by byte after Microsoft's WAVE_FORMAT_EXTENSIBLE layout (16-bit
  PCM, with an odd-sized LIST chunk before the data); the expected samples are what
  scipy.io.wavfile.read returns for each file;
- firing rate of a leaky integrate-and-fire neuron under white-noise input (the diffusion
  limit of Poisson kicks): the Siegert formula as Brunel 2000 (J. Comput. Neurosci. 8:183,
  eq. 21) writes it, 1/rate = t_ref + tau sqrt(pi) int_{(V_r - mu)/sigma}^{(theta - mu)/sigma}
  exp(u^2) (1 + erf u) du, integrated by scipy.integrate.quad over scipy.special.erfcx(-u)
  (= exp(u^2)(1 + erf u) without overflow);
- Welch spectra: scipy.signal.welch with its defaults;
- spike time tiling coefficient: written from Cutts & Eglen 2014's definitions with numpy
  (`sttc_numpy`), on seeded trains.
"""
import json
import math
import platform
import sys
from pathlib import Path

import numpy as np
import scipy
from scipy.optimize import least_squares

ROOT = Path(__file__).resolve().parents[2]
OUT = ROOT / "tests" / "fixtures" / "geometry_reference.json"
STATS_OUT = ROOT / "tests" / "fixtures" / "stats_reference.json"
FILTER_OUT = ROOT / "tests" / "fixtures" / "filter_reference.json"
WAV_OUT = ROOT / "tests" / "fixtures" / "wav_reference.json"
WAV_DIR = ROOT / "tests" / "fixtures" / "wav"
SIEGERT_OUT = ROOT / "tests" / "fixtures" / "siegert_reference.json"
SPECTRUM_OUT = ROOT / "tests" / "fixtures" / "spectrum_reference.json"
STTC_OUT = ROOT / "tests" / "fixtures" / "sttc_reference.json"
PROBIT_OUT = ROOT / "tests/fixtures/probit_reference.json"
COMPARE_OUT = ROOT / "tests" / "fixtures" / "compare_reference.json"
HISTOGRAM_OUT = ROOT / "tests" / "fixtures" / "histogram_reference.json"
SEED = 20261201


def tls_line(points):
    centroid = points.mean(axis=0)
    _, s, vt = np.linalg.svd(points - centroid)
    d = vt[0]
    # Same sign rule as the library: the larger component positive.
    if d[np.argmax(np.abs(d))] < 0:
        d = -d
    return {
        "centroid_um": centroid.tolist(),
        "direction": d.tolist(),
        "singular_values_um": s.tolist(),
        "rms_um": float(s[1] / math.sqrt(len(points))),
    }


def kasa(points):
    c = points.mean(axis=0)
    x, y = points[:, 0] - c[0], points[:, 1] - c[1]
    a = np.column_stack([x, y, np.ones_like(x)])
    b = -(x * x + y * y)
    (d, e, f), *_ = np.linalg.lstsq(a, b, rcond=None)
    return {"centre_um": [float(c[0] - d / 2), float(c[1] - e / 2)],
            "radius_um": float(math.sqrt(d * d / 4 + e * e / 4 - f))}


def geometric(points, start):
    def residuals(p):
        return np.hypot(points[:, 0] - p[0], points[:, 1] - p[1]) - p[2]

    def jacobian(p):
        dist = np.hypot(points[:, 0] - p[0], points[:, 1] - p[1])
        return np.column_stack([-(points[:, 0] - p[0]) / dist,
                                -(points[:, 1] - p[1]) / dist,
                                -np.ones(len(points))])

    fit = least_squares(residuals, start, jac=jacobian, method="lm",
                        xtol=1e-15, ftol=1e-15, gtol=1e-15)
    r = residuals(fit.x)
    return {"centre_um": fit.x[:2].tolist(), "radius_um": float(fit.x[2]),
            "rms_um": float(math.sqrt(np.mean(r * r)))}


def line_cases(rng):
    cases = []
    # A 16-electrode row, 375 um pitch, tilted by 20 degrees, 3 um position noise.
    t = np.arange(16) * 375.0
    angle = math.radians(20)
    pts = np.column_stack([100 + t * math.cos(angle), -50 + t * math.sin(angle)])
    pts += rng.normal(0, 3.0, pts.shape)
    cases.append({"name": "tilted row of 16", "points_um": pts.tolist(), "numpy": tls_line(pts)})
    # A near-vertical row of 10 at 200 um pitch.
    t = np.arange(10) * 200.0
    pts = np.column_stack([5 + 0.02 * t, t]) + rng.normal(0, 2.0, (10, 2))
    cases.append({"name": "near-vertical row of 10", "points_um": pts.tolist(), "numpy": tls_line(pts)})
    # Two rows of 12, 150 um apart: a strip.
    t = np.arange(12) * 200.0
    pts = np.vstack([np.column_stack([t, np.zeros(12)]), np.column_stack([t, np.full(12, 150.0)])])
    pts += rng.normal(0, 1.0, pts.shape)
    cases.append({"name": "strip of two rows", "points_um": pts.tolist(), "numpy": tls_line(pts)})
    return cases


def circle_cases(rng):
    cases = []
    specs = [
        ("full ring, 24 sites", 360.0, 24, 1500.0, 10.0),
        ("half ring, 16 sites", 180.0, 16, 1500.0, 10.0),
        ("60-degree arc, 20 sites", 60.0, 20, 1500.0, 25.0),
    ]
    for name, arc_deg, n, radius, noise in specs:
        centre = np.array([2000.0, 1800.0])
        if arc_deg >= 360:
            theta = np.linspace(0, 2 * math.pi, n, endpoint=False)
        else:
            theta = np.linspace(0, math.radians(arc_deg), n)
        theta = theta + math.radians(30)
        pts = centre + radius * np.column_stack([np.cos(theta), np.sin(theta)])
        pts += rng.normal(0, noise, pts.shape)
        k = kasa(pts)
        g = geometric(pts, np.array(k["centre_um"] + [k["radius_um"]]))
        cases.append({
            "name": name,
            "arc_deg": arc_deg,
            "noise_sd_um": noise,
            "true": {"centre_um": centre.tolist(), "radius_um": radius},
            "true_angles_rad": theta.tolist(),
            "points_um": pts.tolist(),
            "scipy_least_squares": g,
            "numpy_kasa": k,
        })
    return cases


def build():
    rng = np.random.default_rng(SEED)
    return {
        "made_by": "scripts/reference/make_fixtures.py",
        "versions": {"python": platform.python_version(), "numpy": np.__version__,
                     "scipy": scipy.__version__},
        "seed": SEED,
        "lines": line_cases(rng),
        "circles": circle_cases(rng),
    }


def norris():
    import os
    path = os.path.join(os.path.dirname(scipy.__file__), "stats", "tests", "data",
                        "nist_linregress", "Norris.dat")
    lines = open(path).read().splitlines()
    certified = {}
    for line in lines[30:46]:
        words = line.split()
        if words[:1] == ["B0"]:
            certified["b0"], certified["b0_sd"] = float(words[1]), float(words[2])
        elif words[:1] == ["B1"]:
            certified["b1"], certified["b1_sd"] = float(words[1]), float(words[2])
        elif "Standard Deviation" in line and words[0] == "Standard":
            certified["residual_sd"] = float(words[-1])
        elif words[:1] == ["R-Squared"]:
            certified["r_squared"] = float(words[-1])
    data = np.array([[float(v) for v in line.split()] for line in lines[60:96]])
    return {"y": data[:, 0].tolist(), "x": data[:, 1].tolist(), "certified": certified,
            "source": "NIST StRD Norris.dat as shipped in the scipy wheel"}


def stats_fixtures(rng):
    from scipy import stats
    import statsmodels.api as sm
    from statsmodels.stats.proportion import proportion_confint

    theil = []
    sets = [("check values example", [0, 0.2, 0.4, 0.6, 0.8], [0, 4, 8, 12, 100])]
    x = np.arange(12) * 0.375
    sets.append(("front with two strays", x.tolist(), (5 + 25 * x + rng.normal(0, 0.4, 12) + np.where(np.arange(12) % 5 == 3, 30, 0)).tolist()))
    xt = np.repeat(np.arange(6) * 0.2, 2)
    sets.append(("ties in x and y", xt.tolist(), np.round(3 + 10 * xt + rng.normal(0, 0.5, 12), 0).tolist()))
    x = rng.uniform(0, 5, 40)
    sets.append(("40 points", x.tolist(), (2 - 3 * x + rng.standard_t(3, 40)).tolist()))
    for name, xv, yv in sets:
        r = stats.theilslopes(yv, xv)
        theil.append({"name": name, "x": list(map(float, xv)), "y": list(map(float, yv)),
                      "slope": float(r.slope), "intercept": float(r.intercept),
                      "low": float(r.low_slope), "high": float(r.high_slope)})

    linreg = []
    for name, xv, yv, _ in [(t["name"], t["x"], t["y"], None) for t in theil]:
        r = stats.linregress(xv, yv)
        linreg.append({"name": name, "x": xv, "y": yv, "slope": float(r.slope),
                       "intercept": float(r.intercept), "r": float(r.rvalue),
                       "stderr": float(r.stderr), "intercept_stderr": float(r.intercept_stderr)})

    huber = []
    x = np.arange(20) * 0.3
    y = 1.0 + 4.0 * x + rng.normal(0, 0.3, 20)
    y[[3, 11, 17]] += [6.0, -5.0, 9.0]
    design = sm.add_constant(x)
    res = sm.RLM(y, design, M=sm.robust.norms.HuberT()).fit()
    huber.append({"name": "line with three outliers", "design": design.tolist(), "y": y.tolist(),
                  "params": res.params.tolist(), "scale": float(res.scale)})
    xy = rng.uniform(0, 1400, (30, 2))
    y = 0.2 + xy @ np.array([3e-5, -1.5e-5]) + rng.normal(0, 0.002, 30)
    y[[4, 20]] += [0.05, -0.04]
    design = sm.add_constant(xy)
    res = sm.RLM(y, design, M=sm.robust.norms.HuberT()).fit()
    huber.append({"name": "plane wave with two outliers", "design": design.tolist(), "y": y.tolist(),
                  "params": res.params.tolist(), "scale": float(res.scale)})

    wilson = []
    for k, n in [(0, 10), (3, 10), (7, 20), (20, 20), (13, 37), (140, 200)]:
        lo, hi = proportion_confint(k, n, alpha=0.05, method="wilson")
        wilson.append({"successes": k, "trials": n, "low": float(lo), "high": float(hi)})

    median_ranks = []
    for n in [6, 7, 10, 11, 25, 60, 200, 1001]:
        median_ranks.append({"n": n, "binom_ppf": int(stats.binom.ppf(0.025, n, 0.5)),
                             "cdf_at_ppf": float(stats.binom.cdf(stats.binom.ppf(0.025, n, 0.5), n, 0.5))})

    values = rng.normal(10, 3, 23)
    percentiles = {"values": values.tolist(), "q": [0, 0.1, 0.25, 0.5, 0.75, 0.9, 1],
                   "numpy": [float(np.percentile(values, 100 * q)) for q in [0, 0.1, 0.25, 0.5, 0.75, 0.9, 1]]}
    return {
        "made_by": "scripts/reference/make_fixtures.py",
        "versions": {"python": platform.python_version(), "numpy": np.__version__,
                     "scipy": scipy.__version__, "statsmodels": sm.__version__ if hasattr(sm, "__version__") else __import__("statsmodels").__version__},
        "theilslopes": theil, "linregress": linreg, "norris": norris(), "huber": huber,
        "wilson": wilson, "median_ranks": median_ranks, "percentiles": percentiles,
    }


def filter_fixtures(rng):
    """Butterworth band-passes: sections, response at chosen frequencies, and sosfiltfilt of
    seeded noise with spike-like troughs."""
    from scipy import signal
    cases = []
    for order, lo, hi, fs, with_signal in [(3, 300.0, 3000.0, 25000.0, True),
                                          (4, 250.0, 5000.0, 30000.0, True),
                                          (2, 300.0, 3000.0, 20000.0, False),
                                          (1, 500.0, 2000.0, 10000.0, False),
                                          (6, 300.0, 6000.0, 40000.0, False)]:
        sos = signal.butter(order, [lo, hi], "bandpass", fs=fs, output="sos")
        freqs = np.array([10.0, lo / 2, lo, math.sqrt(lo * hi), 1000.0, hi, min(2 * hi, 0.45 * fs)])
        _, h = signal.sosfreqz(sos, worN=freqs, fs=fs)
        case = {"order": order, "low_hz": lo, "high_hz": hi, "sample_rate_hz": fs,
                "sos": sos.tolist(), "freqs_hz": freqs.tolist(), "gain": np.abs(h).tolist()}
        if with_signal:
            n = 3000
            x = rng.normal(0.0, 10.0, n) + 5.0  # microvolts, with an offset the filter removes
            for start in rng.integers(50, n - 100, 12):
                t = np.arange(40) / fs
                x[start:start + 40] += -80.0 * np.exp(-0.5 * ((t - 3e-4) / 1.5e-4) ** 2) + 25.0 * np.exp(-0.5 * ((t - 9e-4) / 3e-4) ** 2)
            case["signal"] = x.tolist()
            case["sosfiltfilt"] = signal.sosfiltfilt(sos, x).tolist()
        cases.append(case)
    return {"versions": {"python": platform.python_version(), "numpy": np.__version__,
                         "scipy": scipy.__version__}, "cases": cases}


def siegert_fixtures():
    """Siegert rates for isolated LIF neurons kicked by Poisson input of rate nu and size J
    (mu = drive + tau J nu, sigma = J sqrt(tau nu)): a fluctuation-driven pair with the kick
    size quartered at the same mu and sigma, and a mean-driven case."""
    from scipy.integrate import quad
    from scipy.special import erfcx
    tau, theta, reset, t_ref = 0.02, 20.0, 10.0, 0.002
    cases = []
    for drive, kick, rate in [(15.0, 0.1, 2000.0), (3.0, 0.025, 32000.0), (11.0, 0.025, 32000.0)]:
        mu = drive + tau * kick * rate
        sigma = kick * math.sqrt(tau * rate)
        integral, _ = quad(lambda u: erfcx(-u), (reset - mu) / sigma, (theta - mu) / sigma,
                           limit=200, epsabs=0.0, epsrel=1e-12)
        cases.append({"drive_mv": drive, "kick_mv": kick, "kick_rate_hz": rate, "mu_mv": mu,
                      "sigma_mv": sigma, "rate_hz": 1.0 / (t_ref + tau * math.sqrt(math.pi) * integral)})
    return {"versions": {"python": platform.python_version(), "numpy": np.__version__,
                         "scipy": scipy.__version__},
            "tau_m_s": tau, "threshold_mv": theta, "reset_mv": reset, "refractory_s": t_ref,
            "cases": cases}


def wav_fixtures(rng, write):
    """Small WAV files from three writers and the samples scipy reads back. `write` is False
    for --check: the files are made in memory and compared with the committed bytes."""
    import io
    import struct
    import wave
    from scipy.io import wavfile
    made = {}
    # 1. Python's wave module: 3 channels of int16 at 25 kHz.
    pcm = rng.integers(-32768, 32768, size=(40, 3)).astype("<i2")
    buf = io.BytesIO()
    with wave.open(buf, "wb") as w:
        w.setnchannels(3)
        w.setsampwidth(2)
        w.setframerate(25000)
        w.writeframes(pcm.tobytes())
    made["pcm16_wave_module.wav"] = buf.getvalue()
    # 2. scipy.io.wavfile: 4 channels of float32 at 20 kHz.
    flt = rng.normal(0.0, 50.0, size=(30, 4)).astype("<f4")
    buf = io.BytesIO()
    wavfile.write(buf, 20000, flt)
    made["float32_scipy.wav"] = buf.getvalue()
    # 3. WAVE_FORMAT_EXTENSIBLE, 5 channels of int16 at 10 kHz, a LIST chunk of odd size first.
    ext = rng.integers(-32768, 32768, size=(25, 5)).astype("<i2")
    data = ext.tobytes()
    pcm_guid = struct.pack("<HHI", 1, 0, 0x00100000) + bytes([0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71])
    fmt = struct.pack("<HHIIHHHHI", 0xFFFE, 5, 10000, 10000 * 10, 10, 16, 22, 16, 0) + pcm_guid
    listing = b"INFOx"  # 5 bytes: padded to 6
    body = (b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt
            + b"LIST" + struct.pack("<I", len(listing)) + listing + b"\0"
            + b"data" + struct.pack("<I", len(data)) + data)
    made["pcm16_extensible.wav"] = b"RIFF" + struct.pack("<I", len(body)) + body
    cases = []
    for name, blob in made.items():
        rate, samples = wavfile.read(io.BytesIO(blob))
        cases.append({"file": name, "sample_rate_hz": rate, "channels": int(samples.shape[1]),
                      "sample_type": "float32" if samples.dtype == np.float32 else "int16",
                      "samples": samples.astype(float).tolist()})
        path = WAV_DIR / name
        if write:
            WAV_DIR.mkdir(parents=True, exist_ok=True)
            path.write_bytes(blob)
        elif not path.exists() or path.read_bytes() != blob:
            cases[-1]["file"] = f"{name} (DIFFERS from the committed file)"
    return {"versions": {"python": platform.python_version(), "numpy": np.__version__,
                         "scipy": scipy.__version__}, "cases": cases}


def spectrum_fixtures(rng):
    """scipy.signal.welch with its defaults (periodic Hann, nperseg // 2 overlap, constant
    detrend, one-sided density) on seeded series: white noise, a sine in noise, a Poisson
    rate; even and odd segment lengths; density and spectrum scaling."""
    from scipy.signal import welch
    cases = []
    series = {
        "white": rng.normal(0.0, 2.0, 1000),
        "sine": np.sin(2 * np.pi * 3.0 * np.arange(777) / 100.0) + rng.normal(0.0, 0.5, 777),
        "poisson_rate": rng.poisson(0.05, 2048) / 0.01,
    }
    fs = {"white": 1000.0, "sine": 100.0, "poisson_rate": 100.0}
    for name, x in series.items():
        for nperseg in (64, 101, 256):
            for scaling in ("density", "spectrum"):
                f, p = welch(x, fs=fs[name], nperseg=nperseg, scaling=scaling)
                cases.append({"series": name, "fs_hz": fs[name], "nperseg": nperseg,
                              "scaling": scaling, "frequency_hz": f.tolist(), "power": p.tolist()})
    return {"versions": {"python": platform.python_version(), "numpy": np.__version__,
                         "scipy": scipy.__version__},
            "series": {k: v.tolist() for k, v in series.items()}, "cases": cases}


def sttc_numpy(a, b, t0, t1, dt):
    """STTC (Cutts & Eglen 2014) written from the paper's definitions with numpy: T from the
    union of the clipped windows [t - dt, t + dt], P from np.searchsorted."""
    def tiled_time(x):
        if len(x) == 0:
            return 0.0
        lo = np.clip(x - dt, t0, t1)
        hi = np.clip(x + dt, t0, t1)
        total, cur_lo, cur_hi = 0.0, lo[0], hi[0]
        for l, h in zip(lo[1:], hi[1:]):
            if l <= cur_hi:
                cur_hi = max(cur_hi, h)
            else:
                total += cur_hi - cur_lo
                cur_lo, cur_hi = l, h
        return (total + cur_hi - cur_lo) / (t1 - t0)

    def tiled_spikes(x, y):
        i = np.searchsorted(y, x - dt, side="left")
        near = (i < len(y)) & (y[np.minimum(i, len(y) - 1)] <= x + dt)
        return float(np.mean(near))

    ta, tb = tiled_time(a), tiled_time(b)
    pa, pb = tiled_spikes(a, b), tiled_spikes(b, a)
    return 0.5 * (pa - tb) / (1 - pa * tb) + 0.5 * (pb - ta) / (1 - pb * ta)


def sttc_fixtures(rng):
    """STTC of seeded trains: independent Poisson trains, trains sharing bursts, and jittered
    copies, over a recording of 100 s, for three windows."""
    t0, t1 = 0.0, 100.0
    bursts = np.sort(rng.uniform(t0, t1, 30))
    trains = []
    for k in range(8):
        own = rng.uniform(t0, t1, rng.integers(20, 120))
        shared = bursts[rng.random(30) < 0.3 + 0.08 * k]
        jitter = rng.normal(0.0, 0.01 * (k + 1), len(shared))
        trains.append(np.sort(np.clip(np.concatenate([own, shared + jitter]), t0, t1)))
    cases = []
    for dt in (0.005, 0.05, 0.5):
        for i in range(len(trains)):
            for j in range(i + 1, len(trains)):
                cases.append({"i": i, "j": j, "dt_s": dt,
                              "sttc": sttc_numpy(trains[i], trains[j], t0, t1, dt)})
    return {"versions": {"python": platform.python_version(), "numpy": np.__version__},
            "span_s": [t0, t1], "trains_s": [t.tolist() for t in trains], "cases": cases}


def compare(a, b, path="$"):
    """Yields differences between two fixture trees; numbers compare to a relative 1e-9."""
    if isinstance(a, dict) and isinstance(b, dict):
        for key in sorted(set(a) | set(b)):
            if key == "versions":
                continue
            if key not in a or key not in b:
                yield f"{path}.{key}: present on one side only"
            else:
                yield from compare(a[key], b[key], f"{path}.{key}")
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            yield f"{path}: {len(a)} items against {len(b)}"
        for i, (x, y) in enumerate(zip(a, b)):
            yield from compare(x, y, f"{path}[{i}]")
    elif isinstance(a, (int, float)) and isinstance(b, (int, float)):
        if not math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-9):
            yield f"{path}: {a} against {b}"
    elif a != b:
        yield f"{path}: {a!r} against {b!r}"


def compare_fixtures(rng):
    """scipy.stats.wilcoxon and mannwhitneyu (method "auto": exact for small samples without
    ties, else the normal approximation with the tie correction) and statsmodels'
    multipletests (holm, fdr_bh) on seeded data: small and large samples, with and without
    ties and zero differences."""
    from scipy.stats import mannwhitneyu, wilcoxon
    from statsmodels.stats.multitest import multipletests
    import statsmodels
    signed = []
    for n, ties in ((7, False), (20, False), (12, True), (60, False), (80, True)):
        d = rng.normal(0.4, 1.0, n)
        if ties:
            d = np.round(d * 2.0) / 2.0  # half-unit grid: ties and zeros
        r = wilcoxon(d)
        signed.append({"d": d.tolist(), "statistic": float(r.statistic), "p": float(r.pvalue)})
    two = []
    for n1, n2, ties in ((5, 4, False), (8, 8, False), (6, 7, True), (9, 12, False), (30, 25, True)):
        x, y = rng.normal(0.5, 1.0, n1), rng.normal(0.0, 1.0, n2)
        if ties:
            x, y = np.round(x * 2.0) / 2.0, np.round(y * 2.0) / 2.0
        r = mannwhitneyu(x, y)
        two.append({"x": x.tolist(), "y": y.tolist(), "statistic": float(r.statistic),
                    "p": float(r.pvalue)})
    adjusted = []
    for m in (3, 8, 20):
        p = rng.uniform(0.0, 0.2, m)
        adjusted.append({"p": p.tolist(),
                         "holm": multipletests(p, method="holm")[1].tolist(),
                         "fdr_bh": multipletests(p, method="fdr_bh")[1].tolist()})
    from scipy.stats import bootstrap
    boot = []
    for n1, n2 in ((8, 10), (25, 30)):
        x, y = rng.lognormal(0.3, 0.6, n1), rng.lognormal(0.0, 0.6, n2)
        r = bootstrap((x, y), lambda a, b: np.median(a) - np.median(b), method="percentile",
                      n_resamples=20000, vectorized=False, random_state=rng)
        boot.append({"x": x.tolist(), "y": y.tolist(),
                     "low": float(r.confidence_interval.low),
                     "high": float(r.confidence_interval.high),
                     "standard_error": float(r.standard_error)})
    return {"versions": {"python": platform.python_version(), "numpy": np.__version__,
                         "scipy": scipy.__version__, "statsmodels": statsmodels.__version__},
            "wilcoxon": signed, "mannwhitneyu": two, "multipletests": adjusted,
            "bootstrap_median_difference": boot}


def probit_profile(x, n, k, which, level=0.95):
    """Profile-likelihood interval of the 50% point ("threshold") or of the width sigma of
    P = Phi((x - mu) / sigma), by scipy's bounded scalar minimiser and root finder: an
    implementation independent of the Rust one."""
    from scipy.optimize import brentq, minimize_scalar
    from scipy.stats import chi2, norm

    def loglik(mu, sigma):
        eta = (x - mu) / sigma
        return float(np.sum(k * norm.logcdf(eta) + (n - k) * norm.logsf(eta)))

    def best(fixed):
        if which == "threshold":
            r = minimize_scalar(lambda ls: -loglik(fixed, np.exp(ls)), bounds=(-12, 6),
                                method="bounded", options={"xatol": 1e-12})
        else:
            r = minimize_scalar(lambda m: -loglik(m, fixed), bounds=(x.min() - 5 * np.ptp(x),
                                x.max() + 5 * np.ptp(x)), method="bounded",
                                options={"xatol": 1e-12})
        return -r.fun

    import statsmodels.api as sm
    fit = sm.GLM(k / n, sm.add_constant(x), family=sm.families.Binomial(sm.families.links.Probit()),
                 var_weights=n).fit()
    b0, b1 = fit.params
    mu_hat, sigma_hat = -b0 / b1, 1.0 / b1
    top = loglik(mu_hat, sigma_hat)
    cut = chi2.ppf(level, 1) / 2.0
    gap = lambda v: top - best(v) - cut
    hat = mu_hat if which == "threshold" else sigma_hat
    span = 20 * (fit.bse[0] / abs(b1) if which == "threshold" else fit.bse[1] / b1 ** 2)
    low_end = hat - span if which == "threshold" else hat * 1e-3
    return [brentq(gap, low_end, hat, xtol=1e-12), brentq(gap, hat, hat + span, xtol=1e-12)]


def probit_fixtures(rng):
    """statsmodels GLM Binomial(Probit) fits (expected information, as GLM uses by default):
    Bliss's beetle data and seeded simulated dose-response sets; profile-likelihood
    intervals of the 50% point and the width from scipy."""
    import statsmodels
    import statsmodels.api as sm
    from scipy.stats import chi2
    cases = [{"name": "Bliss beetles",
              "x": [1.6907, 1.7242, 1.7552, 1.7842, 1.8113, 1.8369, 1.8610, 1.8839],
              "n": [59, 60, 62, 56, 63, 59, 62, 60], "k": [6, 13, 18, 28, 52, 53, 61, 60]}]
    for name, mu, sigma, amps, trials in (("six amplitudes, 20 trials", 2.0, 0.5, np.linspace(1, 3, 6), 20),
                                          ("ten amplitudes, 8 trials", 5.0, 1.5, np.linspace(1, 9, 10), 8),
                                          ("four amplitudes, 50 trials", 0.3, 0.05, np.linspace(0.22, 0.4, 4), 50)):
        p = 0.5 * (1 + np.vectorize(math.erf)((amps - mu) / sigma / math.sqrt(2)))
        k = rng.binomial(trials, p)
        cases.append({"name": name, "x": amps.tolist(), "n": [trials] * len(amps), "k": k.tolist()})
    out = []
    for c in cases:
        x, n, k = np.array(c["x"]), np.array(c["n"], float), np.array(c["k"], float)
        fit = sm.GLM(k / n, sm.add_constant(x), family=sm.families.Binomial(sm.families.links.Probit()),
                     var_weights=n).fit()
        b0, b1 = fit.params
        dof = len(x) - 2
        out.append(dict(c, beta=[float(b0), float(b1)], se=[float(v) for v in fit.bse],
                        deviance=float(fit.deviance), pearson_chi2=float(fit.pearson_chi2),
                        gof_p=float(chi2.sf(fit.deviance, dof)), threshold=float(-b0 / b1),
                        width=float(1 / b1),
                        threshold_profile=probit_profile(x, n, k, "threshold"),
                        width_profile=probit_profile(x, n, k, "width")))
    return {"versions": {"python": platform.python_version(), "numpy": np.__version__,
                         "scipy": scipy.__version__, "statsmodels": statsmodels.__version__},
            "cases": out}


def histogram_fixtures(rng):
    """numpy.histogram_bin_edges with bins='fd' (Freedman & Diaconis 1981: width 2 IQR n^(-1/3))
    and bins='sturges' on seeded samples: interburst intervals (gamma), speeds (normal),
    heavy tails (lognormal), small and tied samples."""
    samples = [("gamma intervals, n = 33", rng.gamma(4.0, 2.5, 33)),
               ("normal speeds, n = 120", rng.normal(25.0, 4.0, 120)),
               ("lognormal, n = 400", rng.lognormal(1.0, 1.0, 400)),
               ("five values", np.array([1.0, 2.0, 2.5, 4.0, 9.0])),
               ("ties: IQR zero", np.array([3.0] * 20 + [4.0, 9.0]))]
    out = []
    for name, x in samples:
        out.append({"name": name, "values": [float(v) for v in x],
                    "fd_edges": [float(e) for e in np.histogram_bin_edges(x, bins="fd")],
                    "sturges_edges": [float(e) for e in np.histogram_bin_edges(x, bins="sturges")]})
    return {"versions": {"python": platform.python_version(), "numpy": np.__version__}, "cases": out}


def main():
    outputs = [(OUT, build()), (STATS_OUT, stats_fixtures(np.random.default_rng(SEED + 1))),
               (FILTER_OUT, filter_fixtures(np.random.default_rng(SEED + 2))),
               (WAV_OUT, wav_fixtures(np.random.default_rng(SEED + 3), "--check" not in sys.argv)),
               (SIEGERT_OUT, siegert_fixtures()),
               (SPECTRUM_OUT, spectrum_fixtures(np.random.default_rng(SEED + 4))),
               (STTC_OUT, sttc_fixtures(np.random.default_rng(SEED + 5))),
               (COMPARE_OUT, compare_fixtures(np.random.default_rng(SEED + 6))),
               (PROBIT_OUT, probit_fixtures(np.random.default_rng(SEED + 7))),
               (HISTOGRAM_OUT, histogram_fixtures(np.random.default_rng(SEED + 8)))]
    if "--check" in sys.argv:
        failed = False
        for path, fresh in outputs:
            committed = json.loads(path.read_text())
            diffs = list(compare(committed, fresh))
            if diffs:
                failed = True
                print(f"{path.relative_to(ROOT)} differs from a fresh computation:")
                for d in diffs[:20]:
                    print("  " + d)
            else:
                print(f"{path.relative_to(ROOT)} matches a fresh computation "
                      f"(now {json.dumps(fresh['versions'])}; made with {json.dumps(committed['versions'])})")
        return 1 if failed else 0
    for path, fresh in outputs:
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(fresh, indent=1) + "\n")
        print(f"wrote {path.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
