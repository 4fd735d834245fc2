#!/usr/bin/env python3
"""Reference vectors for iqaudit's report metrics, computed independently with numpy/scipy.

Writes tests/vectors/metrics.json:
  * clopper_pearson: exact binomial intervals from scipy.stats.beta.ppf
    (lower = beta.ppf(a/2, k, n-k+1), upper = beta.ppf(1-a/2, k+1, n-k); Clopper & Pearson, 1934).
  * evm_example: a seeded 16-QAM block (3GPP TS 38.211 §5.1 points) with noise; EVM RMS and MER
    computed with numpy from the definitions EVM = sqrt(sum|z-s|^2 / sum|s|^2) (3GPP TS 36.104 §6.5.2)
    and MER = 10 log10(sum|s|^2 / sum|z-s|^2) (ETSI TR 101 290).

Run: python3 tests/vectors/make_metric_vectors.py   (numpy 2.x / scipy 1.x; versions are recorded in the output)
"""
import json
import pathlib

import numpy as np
import scipy
from scipy.stats import beta

out = {"numpy": np.__version__, "scipy": scipy.__version__}

cases = []
for (k, n, conf) in [(1, 10, 0.95), (3, 100, 0.95), (17, 1000, 0.95), (0, 500, 0.95),
                     (500, 500, 0.95), (42, 1000000, 0.95), (5, 20, 0.99), (250, 1000, 0.9)]:
    a = 1.0 - conf
    lo = 0.0 if k == 0 else float(beta.ppf(a / 2, k, n - k + 1))
    hi = 1.0 if k == n else float(beta.ppf(1 - a / 2, k + 1, n - k))
    cases.append({"k": k, "n": n, "confidence": conf, "low": lo, "high": hi})
out["clopper_pearson"] = cases

rng = np.random.default_rng(20261202)
levels = np.array([-3, -1, 1, 3]) / np.sqrt(10.0)
n = 257
s = rng.choice(levels, n) + 1j * rng.choice(levels, n)
z = s + (rng.normal(0, 0.05, n) + 1j * rng.normal(0, 0.05, n))
s = s.astype(np.complex64)
z = z.astype(np.complex64)
s64 = s.astype(np.complex128)
z64 = z.astype(np.complex128)
err = np.abs(z64 - s64) ** 2
ref = np.abs(s64) ** 2
evm = np.sqrt(err.sum() / ref.sum())
out["evm_example"] = {
    "s": [[float(v.real), float(v.imag)] for v in s],
    "z": [[float(v.real), float(v.imag)] for v in z],
    "evm_rms_percent": float(100 * evm),
    "evm_rms_db": float(20 * np.log10(evm)),
    "mer_db": float(10 * np.log10(ref.sum() / err.sum())),
    "evm_peak_percent": float(100 * np.sqrt(err.max() / ref.mean())),
    "evm_peak_index": int(err.argmax()),
}

path = pathlib.Path(__file__).with_name("metrics.json")
path.write_text(json.dumps(out, indent=1) + "\n")
print("wrote", path)
