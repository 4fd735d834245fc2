#!/usr/bin/env python3
"""Independent writer of raw IQ byte layouts for iqaudit's reader tests.

Writes one small file per SigMF complex datatype (all fourteen) (tests/vectors/vec.<datatype>)
with numpy's own dtype encoders, and tests/vectors/expected.json holding, per
datatype, the decoded value of every sample at full scale 1.0 (computed here in
float64 from the integer codes, following the scaling in iqaudit's src/lib.rs),
and how many samples sit at an extreme code (clipped) or are non-finite.

numpy version used to generate the committed files: 2.4.6 (python3).
Run from the repository root:  python3 tests/vectors/make_raw_vectors.py
"""
import json
import os

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))

# (datatype, numpy dtype of one component, full-scale divisor, mid-scale)
# Unsigned types use iqaudit's default zero point (2^bits - 1)/2
# ("symmetric"; the SigMF reference library's 2^(bits-1) is checked against
# that library itself in tests/sigmf/).
INTS = [
    ("ci32_le", "<i4", 2.0**31, 0.0),
    ("ci32_be", ">i4", 2.0**31, 0.0),
    ("ci16_le", "<i2", 32768.0, 0.0),
    ("ci16_be", ">i2", 32768.0, 0.0),
    ("ci8", "i1", 128.0, 0.0),
    ("cu32_le", "<u4", 2147483647.5, 2147483647.5),
    ("cu32_be", ">u4", 2147483647.5, 2147483647.5),
    ("cu16_le", "<u2", 32767.5, 32767.5),
    ("cu16_be", ">u2", 32767.5, 32767.5),
    ("cu8", "u1", 127.5, 127.5),
]
FLOATS = [("cf32_le", "<f4"), ("cf32_be", ">f4"), ("cf64_le", "<f8"), ("cf64_be", ">f8")]


def int_codes(dtype):
    info = np.iinfo(np.dtype(dtype))
    lo, hi = int(info.min), int(info.max)
    rng = np.random.default_rng(20261202)
    codes = rng.integers(lo + 1, hi, size=2 * 13, endpoint=False)
    # Extremes in known places: sample 13 has I at the minimum, 14 has Q at the
    # maximum, 15 has both; everything else is strictly inside the range.
    codes = np.concatenate([codes, [lo, 1, 0, hi, lo, hi]])
    return codes.astype(dtype), lo, hi


def main():
    expected = {"numpy_version": np.__version__, "vectors": {}}
    for name, dtype, div, mid in INTS:
        codes, lo, hi = int_codes(dtype)
        codes.tofile(os.path.join(HERE, "vec." + name))
        vals = (codes.astype(np.float64) - mid) / div
        pairs = codes.reshape(-1, 2).astype(np.int64)
        clipped = int(np.sum(np.any((pairs == lo) | (pairs == hi), axis=1)))
        expected["vectors"][name] = {
            "i": vals[0::2].tolist(),
            "q": vals[1::2].tolist(),
            "clipped": clipped,
            "non_finite": 0,
        }
    rng = np.random.default_rng(7)
    base = rng.uniform(-0.999, 0.999, size=2 * 12)
    # sample 12: I = NaN; 13: Q = +inf; 14: I = 1.0 (full scale); 15: Q = -1.5
    extra = np.array([np.nan, 0.25, -0.5, np.inf, 1.0, 0.0, 0.125, -1.5])
    fvals = np.concatenate([base, extra])
    for name, dtype in FLOATS:
        arr = fvals.astype(dtype)
        arr.tofile(os.path.join(HERE, "vec." + name))
        # What the reader must give: the value rounded to f32, non-finite → 0.
        as32 = arr.astype(np.float32).astype(np.float64)
        pairs = as32.reshape(-1, 2)
        finite = np.all(np.isfinite(pairs), axis=1)
        clean = np.where(finite[:, None], pairs, 0.0)
        clipped = int(np.sum(finite & np.any(np.abs(pairs) >= 1.0, axis=1)))
        expected["vectors"][name] = {
            "i": clean[:, 0].tolist(),
            "q": clean[:, 1].tolist(),
            "clipped": clipped,
            "non_finite": int(np.sum(~finite)),
        }
    with open(os.path.join(HERE, "expected.json"), "w") as f:
        json.dump(expected, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
