#!/usr/bin/env python3
"""SigMF recordings written by the SigMF project's Python reference library, for
iqaudit's reader tests (tests/integration/sigmf_reference.rs).

What it writes, here in tests/vectors/sigmf/:
- dt/<datatype>.sigmf-meta + .sigmf-data for every complex SigMF datatype
  (16 samples each, numpy-encoded; metadata by the library), and in
  expected.json the samples as the library reads them (autoscale=True) and the
  raw integer codes (autoscale=False).
- bursts.sigmf-meta + .sigmf-data: a 3-burst ci8 stimulus made by
  `iqaudit synth` (link.profile.json, seed 7), three capture segments with
  different core:frequency (the third starts inside burst 2, so that burst
  spans two segments), and one library annotation per burst at its true
  start; expected.json gives the true start samples.
- ncd-hdr2.ci8 / ncd-hdr16.ci8 + their .sigmf-meta: the same samples as a
  non-conforming dataset (core:dataset) behind 2 and 16 header bytes (hdr16
  also with 3 core:trailing_bytes).
- bursts-archive.sigmf: the bursts recording as a SigMF archive, written by
  the library's archiver.

Versions used for the committed files: sigmf 1.14.0, numpy 2.4.6, python 3.11.
Run from the repository root after `cargo build --release`:
    python3 tests/vectors/sigmf/make_sigmf_vectors.py
"""
import json
import os
import shutil
import subprocess
import tempfile

import numpy as np
import sigmf
from sigmf import SigMFFile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.abspath(os.path.join(HERE, "..", "..", ".."))
IQAUDIT = os.environ.get("IQAUDIT", os.path.join(ROOT, "target", "release", "iqaudit"))

RATE = 250_000.0
FREQS = [433.92e6, 434.02e6, 434.12e6]

COMPLEX = [
    "cf64_le", "cf64_be", "cf32_le", "cf32_be",
    "ci32_le", "ci32_be", "ci16_le", "ci16_be", "ci8",
    "cu32_le", "cu32_be", "cu16_le", "cu16_be", "cu8",
]


def component_dtype(dt):
    kind = {"f": "f", "i": "i", "u": "u"}[dt[1]]
    bits = int("".join(c for c in dt.split("_")[0] if c.isdigit()))
    order = ">" if dt.endswith("_be") else "<"
    if bits == 8:
        order = "|"
    return np.dtype(f"{order}{kind}{bits // 8}")


def write_dt_vectors(expected):
    out = os.path.join(HERE, "dt")
    os.makedirs(out, exist_ok=True)
    rng = np.random.default_rng(20261204)
    for dt in COMPLEX:
        cd = component_dtype(dt)
        if cd.kind == "f":
            comps = rng.uniform(-0.99, 0.99, size=32).astype(cd)
        else:
            info = np.iinfo(cd)
            comps = rng.integers(int(info.min), int(info.max), size=32, endpoint=True).astype(cd)
            # extremes in known places: sample 14 = (min, max)
            comps[28], comps[29] = info.min, info.max
        data_fn = os.path.join(out, dt + ".sigmf-data")
        comps.tofile(data_fn)
        meta = SigMFFile(
            data_file=data_fn,
            global_info={
                sigmf.DATATYPE_KEY: dt,
                sigmf.SAMPLE_RATE_KEY: RATE,
                sigmf.DESCRIPTION_KEY: f"iqaudit reader vector, {dt}",
            },
        )
        meta.add_capture(0, metadata={sigmf.FREQUENCY_KEY: FREQS[0]})
        meta.tofile(os.path.join(out, dt), overwrite=True)
        back = sigmf.fromfile(os.path.join(out, dt + ".sigmf-meta"))
        scaled = back.read_samples()
        expected["datatypes"][dt] = {
            "samples": int(back.sample_count),
            "library_i": [float(x) for x in scaled.real],
            "library_q": [float(x) for x in scaled.imag],
            "codes": [c.item() for c in comps],
        }


def synth(tmp):
    cap = os.path.join(tmp, "stim.ci8")
    subprocess.run(
        [
            IQAUDIT, "synth", "--profile", os.path.join(HERE, "link.profile.json"),
            "--out", cap, "--format", "ci8", "--sample-rate", str(int(RATE)),
            "--bursts", "3", "--seed", "7", "--esn0-db", "30", "--cfo-hz", "300",
            "--gap", "200:300", "--lead-gap", "150", "--level-dbfs", "-12", "--no-sigmf",
        ],
        check=True,
    )
    with open(cap + ".truth.json") as f:
        truth = json.load(f)
    with open(cap, "rb") as f:
        return f.read(), truth


def write_bursts(expected, data, truth, tmp):
    starts = [b["start_sample"] for b in truth["bursts"]]
    firsts = [b["first_sample"] for b in truth["bursts"]]
    ends = [b["end_sample"] for b in truth["bursts"]]
    # Segment 1 starts in the gap before burst 1; segment 2 inside burst 2.
    seg1 = (ends[0] + firsts[1]) // 2
    seg2 = starts[2] + 40
    segs = [0, seg1, seg2]
    data_fn = os.path.join(HERE, "bursts.sigmf-data")
    with open(data_fn, "wb") as f:
        f.write(data)

    def build(path_for_data):
        meta = SigMFFile(
            data_file=path_for_data,
            global_info={
                sigmf.DATATYPE_KEY: "ci8",
                sigmf.SAMPLE_RATE_KEY: RATE,
                sigmf.DESCRIPTION_KEY: "iqaudit reader vector: 3 bursts, 3 capture segments",
            },
        )
        for s, fr in zip(segs, FREQS):
            meta.add_capture(s, metadata={sigmf.FREQUENCY_KEY: fr})
        for k, (s, e) in enumerate(zip(firsts, ends)):
            meta.add_annotation(s, e - s, metadata={sigmf.LABEL_KEY: f"burst {k}"})
        return meta

    build(data_fn).tofile(os.path.join(HERE, "bursts"), overwrite=True)
    # The archive: the library's archiver packs metadata and data.
    arch = build(data_fn)
    arch.tofile(os.path.join(HERE, "bursts-archive.sigmf"), overwrite=True)
    back = sigmf.fromfile(os.path.join(HERE, "bursts-archive.sigmf"))
    expected["bursts"] = {
        "samples": int(back.sample_count),
        "segment_starts": segs,
        "frequencies_hz": FREQS,
        "true_start_samples": starts,
        "annotation_starts": firsts,
        "spanning_burst": 2,
    }
    # Non-conforming datasets: the same samples behind a header.
    for name, header, trailing in [("ncd-hdr2", 2, 0), ("ncd-hdr16", 16, 3)]:
        fn = os.path.join(HERE, name + ".ci8")
        with open(fn, "wb") as f:
            f.write(bytes(range(0xA0, 0xA0 + header)))
            f.write(data)
            f.write(b"\xee" * trailing)
        info = {
            sigmf.DATATYPE_KEY: "ci8",
            sigmf.SAMPLE_RATE_KEY: RATE,
            sigmf.DATASET_KEY: name + ".ci8",
            sigmf.DESCRIPTION_KEY: f"iqaudit reader vector: {header} header bytes",
        }
        if trailing:
            info[sigmf.TRAILING_BYTES_KEY] = trailing
        meta = SigMFFile(global_info=info)
        meta.add_capture(0, metadata={sigmf.FREQUENCY_KEY: FREQS[0], sigmf.HEADER_BYTES_KEY: header})
        meta.tofile(os.path.join(HERE, name), overwrite=True)
        back = sigmf.fromfile(os.path.join(HERE, name + ".sigmf-meta"), autoscale=False)
        got = back.read_samples()
        want = np.frombuffer(data, dtype="i1").astype(np.float32)
        assert back.sample_count == len(data) // 2, (name, back.sample_count)
        assert np.array_equal(got.real, want[0::2]) and np.array_equal(got.imag, want[1::2]), name
        expected["ncd"][name] = {"header_bytes": header, "trailing_bytes": trailing,
                                 "samples": int(back.sample_count)}


def main():
    expected = {
        "sigmf_version": sigmf.__version__,
        "numpy_version": np.__version__,
        "sample_rate_hz": RATE,
        "datatypes": {},
        "ncd": {},
    }
    write_dt_vectors(expected)
    tmp = tempfile.mkdtemp()
    try:
        data, truth = synth(tmp)
        write_bursts(expected, data, truth, tmp)
    finally:
        shutil.rmtree(tmp)
    with open(os.path.join(HERE, "expected.json"), "w") as f:
        json.dump(expected, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
