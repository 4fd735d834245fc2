#!/usr/bin/env python3
"""Check sidecars iqaudit wrote with the SigMF project's reference library.

Usage: check_sidecars.py MANIFEST.json
MANIFEST lists {"meta": PATH, "samples": PATH, "unsigned_zero": "symmetric" |
"power_of_two"}: a .sigmf-meta file iqaudit wrote and the samples iqaudit reads
from the recording it describes (cf32_le, full scale 1.0).

For each entry the library (Python `sigmf`) must:
1. load and validate the metadata against its schema (sigmf.fromfile + validate);
2. find the data (core:dataset or NAME.sigmf-data, core:header_bytes,
   core:trailing_bytes) and give the same number of samples;
3. give the same samples after iqaudit's documented scaling (src/lib.rs):
   floats as stored (rounded to f32); signed codes / 2^(bits-1); unsigned
   (code - z) / z with z = (2^bits - 1)/2 ("symmetric") or 2^(bits-1)
   ("power_of_two"). Exact: the codes come from the library's own reader
   (autoscale=False; for 32-bit integers, which that reader rounds to f32, from
   the same bytes at the offset and count the library computed).
Prints one line per file and a closing "N passed, M failed" line; exits 1 on
any failure.
"""
import json
import sys

import numpy as np
import sigmf
from sigmf.sigmffile import dtype_info


def check(entry):
    meta = entry["meta"]
    f = sigmf.fromfile(meta, autoscale=False)
    f.validate()
    dt = f.get_global_field(sigmf.DATATYPE_KEY)
    info = dtype_info(dt)
    ours = np.fromfile(entry["samples"], dtype="<f4").reshape(-1, 2)
    if f.sample_count != ours.shape[0]:
        return f"{f.sample_count} samples by the library, {ours.shape[0]} by iqaudit"
    comp = info["component_dtype"]
    bits = 8 * info["component_size"]
    if info["is_fixedpoint"] and bits == 32:
        offset = int(getattr(f, "data_offset", 0))
        codes = np.fromfile(str(f.data_file), dtype=comp, count=2 * f.sample_count, offset=offset)
        lib = f.read_samples()
        if not np.array_equal(codes.astype(np.float32), np.stack([lib.real, lib.imag], 1).ravel()):
            return "the bytes at the library's offset are not the samples the library reads"
        codes = codes.astype(np.float64)
    else:
        lib = f.read_samples()
        codes = np.stack([lib.real, lib.imag], 1).ravel().astype(np.float64)
    if not info["is_fixedpoint"]:
        want = codes
    elif info["is_unsigned"]:
        z = (2.0**bits - 1) / 2 if entry["unsigned_zero"] == "symmetric" else 2.0 ** (bits - 1)
        want = (codes - z) / z
    else:
        want = codes / 2.0 ** (bits - 1)
    want = want.astype(np.float32).reshape(-1, 2)
    # Non-finite float samples are 0 in iqaudit (documented); none are written.
    bad = np.nonzero(np.any(want != ours, axis=1))[0]
    if bad.size:
        k = int(bad[0])
        return f"{bad.size} samples differ, first at {k}: library {want[k]} iqaudit {ours[k]}"
    return None


def main():
    with open(sys.argv[1]) as fh:
        entries = json.load(fh)
    failed = 0
    for e in entries:
        try:
            problem = check(e)
        except Exception as exc:  # the library refused the file
            problem = f"{type(exc).__name__}: {exc}"
        if problem:
            failed += 1
            print(f"FAIL {e['meta']}: {problem}")
        else:
            print(f"ok   {e['meta']}")
    print(f"sigmf {sigmf.__version__}: {len(entries) - failed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
