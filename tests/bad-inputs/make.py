#!/usr/bin/env python3
"""Writes the bad-input corpus of tests/bad-inputs/ (issue 17): files a new user might give
ringline by mistake, with a few good variants (BOM, CRLF, tabs, a long WAV metadata chunk)
that must still work. Run from anywhere: `python3 tests/bad-inputs/make.py`. Uses only the
standard library, so the files are the same on every machine; the expectations of each case
(exit code, the place and words of the message) are in cases.tsv beside them and are checked
by tests/bad_inputs.rs (the command line) and tests/browser/page.test.mjs (the page).

Common practice, no source: each case is one mistake on an otherwise good file.
"""

import json
import os
import struct

HERE = os.path.dirname(os.path.abspath(__file__))

LAYOUT = "site,x_um,y_um\nA,0,0\nB,200,0\nC,400,0\nD,600,0\n"
SPIKES = "site,time_s\n" + "".join(
    f"{s},{t + 0.01 * i:.3f}\n"
    for t in (0.5, 1.5, 2.5)
    for i, s in enumerate("ABCD")
)


def put(name, data):
    if isinstance(data, str):
        data = data.encode("utf-8")
    with open(os.path.join(HERE, name), "wb") as f:
        f.write(data)


def wav(channels, rate, bits, frames, fmt_tag=1, riff_size=None, data_size=None, extra=b"",
        block_align=None):
    """A RIFF/WAVE file as the WAV format (Microsoft, 1991) lays it out."""
    sample_bytes = bits // 8
    align = channels * sample_bytes if block_align is None else block_align
    fmt = struct.pack("<HHIIHH", fmt_tag, channels, rate, rate * align, align, bits)
    body = bytes((i * 37) % 251 for i in range(frames * max(channels, 1) * sample_bytes))
    data_len = len(body) if data_size is None else data_size
    chunks = b"fmt " + struct.pack("<I", len(fmt)) + fmt + extra
    chunks += b"data" + struct.pack("<I", data_len) + body
    size = 4 + len(chunks) if riff_size is None else riff_size
    return b"RIFF" + struct.pack("<I", size) + b"WAVE" + chunks


def main():
    put("good-layout.csv", LAYOUT)
    put("good-spikes.csv", SPIKES)

    # Spike lists
    put("spikes-empty.csv", "")
    put("spikes-header-only.csv", "site,time_s\n")
    put("spikes-only-comments.csv", "# exported on rig 2\n\n# nothing followed\n")
    put("spikes-nul.csv", "site,time_s\nA,0.5\nB,0.\x006\n")
    put("spikes-latin1.csv", b"site,time_s\nA,0.5\n\xe9lectrode,0.6\n")
    put("spikes-utf16.csv", "\ufeffsite,time_s\nA,0.5\nB,0.6\n".encode("utf-16-le"))
    put("spikes-mixed-delimiters.csv", "site,time_s\nA\t0.5\nB\t0.6\n")
    put("spikes-nan.csv", "site,time_s\nA,0.5\nB,NaN\n")
    put("spikes-inf.csv", "site,time_s\nA,0.5\nB,inf\n")
    put("spikes-negative.csv", "site,time_s\nA,0.5\nB,-0.6\n")
    put("spikes-1e300.csv", "site,time_s\nA,0.5\nB,0.6\nC,1e300\n")
    put("spikes-1e15.csv", "site,time_s\nA,0.5\nB,0.6\nC,1e15\n")
    put("spikes-text-time.csv", "site,time_ms\nA,500\nB,six hundred\n")
    put("spikes-no-time-column.csv", "site,amplitude_uv\nA,-40\nB,-55\n")
    put("spikes-unknown-site-column.csv", "unit_label,time_s\nA,0.5\nB,0.6\n")
    put("spikes-unknown-site.csv", "site,time_s\nA,0.5\nZ9,0.6\n")
    put("spikes-blank-site.csv", "site,time_s\nA,0.5\n,0.6\n")
    put("spikes-short-row.csv", "site,time_s\nA,0.5\nB\n")
    put("spikes-long-row.csv", "site,time_s\nA,0.5\nB,0.6,0.7\n")
    put("spikes-open-quote.csv", 'site,time_s\nA,0.5\n"B,0.6\n')
    put("spikes-duplicate-column.csv", "site,time_s,time_s\nA,0.5,0.5\n")
    put("spikes-plain-time.csv", "site,time\nA,0.5\nB,0.6\n")
    put("spikes-binary.csv", bytes(range(256)) * 4)
    put("spikes-bom-crlf.csv", "\ufeff" + SPIKES.replace("\n", "\r\n"))
    put("spikes-crlf.csv", SPIKES.replace("\n", "\r\n"))
    put("spikes-tabs.tsv", SPIKES.replace(",", "\t"))
    put("spikes-semicolons.csv", SPIKES.replace(",", ";"))

    # Layouts
    put("layout-empty.csv", "")
    put("layout-header-only.csv", "site,x_um,y_um\n")
    put("layout-duplicate-site.csv", "site,x_um,y_um\nA,0,0\nB,200,0\nB,400,0\nD,600,0\n")
    put("layout-coincident.csv", "site,x_um,y_um\nA,0,0\nB,0,0\nC,0,0\nD,0,0\n")
    put("layout-two-sites.csv", "site,x_um,y_um\nA,0,0\nB,200,0\nC,200,0\nD,200,0\n")
    put("layout-1nm.csv", "site,x_um,y_um\nA,0,0\nB,0.001,0\nC,0.002,0\nD,0.003,0\n")
    put("layout-1e308-mm.csv", "site,x_mm,y_mm\nA,0,0\nB,1e308,0\nC,0.4,0\nD,0.6,0\n")
    put("layout-1e300-um.csv", "site,x_um,y_um\nA,0,0\nB,1e300,0\nC,2e300,0\nD,3e300,0\n")
    put("layout-nan.csv", "site,x_um,y_um\nA,0,0\nB,NaN,0\nC,400,0\nD,600,0\n")
    put("layout-inf.csv", "site,x_um,y_um\nA,0,0\nB,200,-inf\nC,400,0\nD,600,0\n")
    put("layout-no-y.csv", "site,x_um\nA,0\nB,200\nC,400\nD,600\n")
    put("layout-text.csv", "site,x_um,y_um\nA,0,0\nB,two hundred,0\nC,400,0\nD,600,0\n")
    put("layout-plain-xy.csv", "site,x,y\nA,0,0\nB,200,0\nC,400,0\nD,600,0\n")
    put("layout-missing-site.csv", "site,x_um,y_um\nA,0,0\nB,200,0\nC,400,0\n")
    put("layout-bom-crlf.csv", "\ufeff" + LAYOUT.replace("\n", "\r\n"))

    # ROI traces (time_s, one column per ROI) and their layout
    roi_layout = "site,x_um,y_um\nR1,0,0\nR2,100,0\nR3,200,0\n"
    put("roi-layout.csv", roi_layout)
    rows = "".join(f"{i * 0.05:.2f},{0.01 * (i % 7)},{0.02 * (i % 5)},{0.01 * (i % 3)}\n"
                   for i in range(40))
    put("traces-good.csv", "time_s,R1,R2,R3\n" + rows)
    put("traces-1ps.csv", "time_s,R1,R2,R3\n" + "".join(
        f"{i * 1e-12:.3e},0.1,0.2,0.3\n" for i in range(40)))
    put("traces-nan.csv", "time_s,R1,R2,R3\n0,0.1,0.2,0.3\n0.05,0.1,NaN,0.3\n")
    put("traces-backwards.csv", "time_s,R1,R2,R3\n0,0.1,0.2,0.3\n0.1,0.1,0.2,0.3\n0.05,0.1,0.2,0.3\n")
    put("traces-no-time.csv", "R1,R2,R3\n" + "".join(
        f"{0.01 * (i % 7)},{0.02 * (i % 5)},{0.01 * (i % 3)}\n" for i in range(40)))
    put("traces-text.csv", "time_s,R1,R2,R3\n0,0.1,0.2,0.3\n0.05,0.1,bright,0.3\n")

    # WAV files (channel i is row i of the layout)
    put("wav-good.wav", wav(4, 20000, 16, 4000))
    put("wav-long-metadata.wav", wav(4, 20000, 16, 4000,
                                      extra=b"LIST" + struct.pack("<I", 102400) + bytes(102400)))
    put("wav-zero-channels.wav", wav(0, 20000, 16, 100))
    put("wav-0hz.wav", wav(4, 0, 16, 100))
    put("wav-24bit.wav", wav(4, 20000, 24, 100))
    put("wav-8bit.wav", wav(4, 20000, 8, 100))
    put("wav-alaw.wav", wav(4, 20000, 16, 100, fmt_tag=6))
    put("wav-data-size-lies.wav", wav(4, 20000, 16, 100, data_size=10_000_000))
    put("wav-riff-size-lies.wav", wav(4, 20000, 16, 100, riff_size=0xFFFFFFF0))
    put("wav-block-align-lies.wav", wav(4, 20000, 16, 100, block_align=3))
    put("wav-header-only.wav", wav(4, 20000, 16, 0)[:20])
    put("wav-not-riff.wav", b"ID3\x04" + bytes(60))
    put("wav-no-data-chunk.wav", wav(4, 20000, 16, 100)[:36])

    # Raw samples with sidecars
    raw = struct.pack("<" + "h" * 4 * 2000, *[((i * 7919) % 401) - 200 for i in range(8000)])
    side = {"sample_rate_hz": 20000, "channels": 4, "sample_type": "int16", "scale_uv": 0.195}
    put("raw-good.raw", raw)
    put("raw-good.json", json.dumps(side))
    put("raw-no-sidecar.raw", raw)
    for name, change in [
        ("raw-duplicate-channels", {"channel_sites": ["A", "A", "C", "D"]}),
        ("raw-4096-channels", {"channels": 4096}),
        ("raw-1e9-hz", {"sample_rate_hz": 1e9}),
        ("raw-0-hz", {"sample_rate_hz": 0}),
        ("raw-zero-scale", {"scale_uv": 0}),
        ("raw-unknown-type", {"sample_type": "int24"}),
        ("raw-unknown-key", {"sample_rate": 20000}),
        ("raw-size-mismatch", {"channels": 3}),
        ("raw-unknown-channel-site", {"channel_sites": ["A", "B", "C", "Q"]}),
    ]:
        put(name + ".raw", raw)
        put(name + ".json", json.dumps({**side, **change}))
    put("raw-bad-json.raw", raw)
    put("raw-bad-json.json", '{"sample_rate_hz": 20000, "channels": 4,\n "sample_type": int16}\n')

    # Stimulus protocols
    put("stimuli-nan.csv", "time_s,amplitude_mV\n0.4,100\n1.4,NaN\n")
    put("stimuli-no-time.csv", "amplitude_mV\n100\n200\n")
    put("stimuli-unknown-site.csv", "time_s,amplitude_mV,site\n0.4,100,A\n1.4,200,Q7\n")

    # Analysis settings
    put("settings-misspelt.json", '{"fronts": {"resample": 500}}\n')
    put("settings-array.json", "[]\n")
    put("settings-edge-fraction.json", '{"bursts": {"population_rate": {"edge_fraction": -1e308}}}\n')
    put("settings-resamples.json", '{"fronts": {"resamples": 1e12}}\n')
    put("settings-resamples-max.json", '{"fronts": {"resamples": 18446744073709551615}}\n')
    put("settings-bin.json", '{"bursts": {"population_rate": {"bin_s": 1e-12}}}\n')
    put("settings-wrong-type.json", '{"fronts": {"confidence": "high"}}\n')
    put("settings-not-json.json", "fronts.resamples = 500\n")

    # Simulator scenarios: the network demo with one value changed
    with open(os.path.join(HERE, "../../demo-data/scenarios/network-strip-16.json")) as f:
        base = json.load(f)

    def scenario(name, path, value):
        s = json.loads(json.dumps(base))
        node = s
        for key in path[:-1]:
            node = node[key]
        node[path[-1]] = value
        put(name, json.dumps(s, indent=1) + "\n")

    scenario("scenario-unknown-key.json", ["duration_seconds"], 10)
    scenario("scenario-1e9-electrodes.json", ["electrodes", "layout", "count"], 10**9)
    scenario("scenario-imaging-1e300.json", ["imaging", "frame_rate_hz"], 1e300)
    scenario("scenario-sampling-tiny.json", ["electrodes", "sampling_rate_hz"], 1e-300)
    scenario("scenario-sigma-tiny.json", ["connectivity", "sigma_um"], 1e-300)
    scenario("scenario-chain-big.json", ["pattern"],
             {"shape": "chain", "length_um": 1e9, "spacing_um": 1})
    scenario("scenario-noise-1e12.json", ["noise", "rate_hz"], 1e12)
    scenario("scenario-duration-1e12.json", ["duration_s"], 1e12)
    scenario("scenario-negative-refractory.json", ["neuron", "refractory_s"], -0.002)
    scenario("scenario-negative-in-degree.json", ["connectivity", "mean_in_degree"], -5)
    s = json.loads(json.dumps(base))
    s["electrodes"]["sampling_rate_hz"] = 1e12
    s["electrodes"]["voltage"] = {"noise_uv": 10, "spike_uv": 60}
    put("scenario-voltage-1e12.json", json.dumps(s, indent=1) + "\n")
    s = json.loads(json.dumps(base))
    s["duration_s"] = 1
    s["pattern"] = {"shape": "strip", "length_um": 2000, "width_um": 200}
    s["connectivity"]["mean_in_degree"] = 10000
    s["imaging"] = None
    s["electrodes"]["layout"]["count"] = 4
    put("scenario-in-degree-beyond.json", json.dumps(s, indent=1) + "\n")
    put("scenario-not-json.json", "pattern: strip\n")
    return base


if __name__ == "__main__":
    main()
