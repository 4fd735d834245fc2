"""Measure how long a 1000-burst report takes to become Python objects.

Run from the repository root after installing the wheel (release build):

    python3 python/bench/measure_conversion.py

Synthesises a 1000-burst 16-QAM capture (256 payload symbols a burst) into a
temporary folder, analyses it with every burst traced (traced_bursts=1000),
then times, best of 5: `report.bursts` on a fresh report (Burst objects and all
their numpy arrays), `report.to_json()`, `report.to_dict()`, and for
comparison `json.loads` of the same JSON (what a notebook without the bindings
would do before rebuilding the complex arrays by hand). The numbers go to
docs/python.md; nothing here asserts a time.
"""

import json
import pathlib
import tempfile
import time

import iqaudit


def best(f, n=5):
    times = []
    for _ in range(n):
        t = time.perf_counter()
        f()
        times.append(time.perf_counter() - t)
    return min(times)


def main():
    with tempfile.TemporaryDirectory() as d:
        d = pathlib.Path(d)
        profile = d / "link.profile.json"
        profile.write_text(json.dumps(iqaudit.profile_new(payload_symbols=256)))
        cap, truth = iqaudit.synth(
            profile, d / "many.cf32", bursts=1000, seed=11, esn0_db=30.0,
            timing_frac="random", gap=(200, 400), format="cf32_le",
        )
        t = time.perf_counter()
        report = iqaudit.analyse(cap, profile, traced_bursts=1000)
        analyse_s = time.perf_counter() - t
        traced = sum(b.has_trace for b in report.bursts)
        text = report.to_json()

        def convert():
            return report_copy().bursts

        # A fresh Report each time so the cached conversion is not what is timed.
        reports = [iqaudit.analyse(cap, profile, traced_bursts=1000) for _ in range(5)]
        it = iter(reports)

        def report_copy():
            return next(it)

        print(f"bursts: {report.burst_count}, traced: {traced}, JSON: {len(text) / 1e6:.1f} MB")
        print(f"analyse (whole capture): {analyse_s:.2f} s")
        print(f"report.bursts (1000 Burst objects + arrays): {best(convert) * 1e3:.1f} ms")
        print(f"report.to_json(): {best(report.to_json) * 1e3:.1f} ms")
        print(f"report.to_dict(): {best(report.to_dict) * 1e3:.1f} ms")
        print(f"json.loads of the same JSON: {best(lambda: json.loads(text)) * 1e3:.1f} ms")
        # The default trace selection (the first 8 and the 8 worst bursts).
        plain = [iqaudit.analyse(cap, profile) for _ in range(5)]
        it2 = iter(plain)
        print(
            f"report.bursts, default traced_bursts (8): "
            f"{best(lambda: next(it2).bursts) * 1e3:.1f} ms"
        )


if __name__ == "__main__":
    main()
