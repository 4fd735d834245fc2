#!/usr/bin/env python3
"""Writes sample-captures/bench-noise-floor.cf32 (+ .sigmf-meta).

Scenario (invented for this project): the bench receiver of the quayside crane
telemetry link, recorded with the crane's transmitter switched off, so the
capture shows the receiver's own noise floor: complex white noise at -40 dBFS,
a small DC offset from the mixer (I +0.002, Q -0.001), a slight IQ gain
imbalance (Q 3 % hot) and a weak spur at +125 kHz (-55 dBFS).
1 MS/s, 65536 samples (512 KiB), centre 869.525 MHz.

numpy version used for the committed file: 2.4.6. Deterministic (fixed seed).
Run from the repository root: python3 sample-captures/make_bench_noise_floor.py
"""
import json
import os

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
FS = 1_000_000.0
N = 65536

rng = np.random.default_rng(869525)
sigma = np.sqrt(10 ** (-40 / 10) / 2)  # per component, total power -40 dBFS
x = rng.normal(0, sigma, N) + 1j * rng.normal(0, sigma, N)
t = np.arange(N) / FS
x += 10 ** (-55 / 20) * np.exp(2j * np.pi * 125e3 * t)
x = x.real * 1.0 + 1j * x.imag * 1.03
x += 0.002 - 0.001j
out = np.empty(2 * N, dtype="<f4")
out[0::2] = x.real
out[1::2] = x.imag
out.tofile(os.path.join(HERE, "bench-noise-floor.cf32"))
meta = {
    "global": {
        "core:datatype": "cf32_le",
        "core:dataset": "bench-noise-floor.cf32",
        "core:sample_rate": FS,
        "core:version": "1.2.0",
        "core:description": "quayside crane telemetry link: bench receiver noise floor, transmitter off",
    },
    "captures": [{"core:sample_start": 0, "core:frequency": 869.525e6}],
    "annotations": [],
}
with open(os.path.join(HERE, "bench-noise-floor.sigmf-meta"), "w") as f:
    json.dump(meta, f, indent=2, sort_keys=True)
    f.write("\n")
