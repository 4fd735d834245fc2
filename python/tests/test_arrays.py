"""Per-burst traces come out as numpy arrays of the documented dtype and shape,
holding exactly the numbers of the report JSON."""

import json

import numpy as np
import pytest

import iqaudit
from conftest import SAMPLES, captures_with_profiles


def ideal_points(modulation):
    """Unit-average-power constellations, written out independently of the library.

    Source (from memory / common practice): square M-QAM with levels
    {±1, ±3, …, ±(√M−1)} scaled by √(2(M−1)/3); QPSK (±1 ± j)/√2; BPSK ±1;
    8-PSK exp(j2πk/8)."""
    if modulation.endswith("qam"):
        m = int(modulation[:-3])
        side = int(round(np.sqrt(m)))
        levels = np.arange(-(side - 1), side, 2, dtype=float)
        pts = (levels[:, None] + 1j * levels[None, :]).ravel()
        return pts / np.sqrt(2 * (m - 1) / 3)
    if modulation == "qpsk":
        return np.array([1 + 1j, 1 - 1j, -1 + 1j, -1 - 1j]) / np.sqrt(2)
    if modulation == "bpsk":
        return np.array([1.0 + 0j, -1.0 + 0j])
    if modulation == "8psk":
        return np.exp(2j * np.pi * np.arange(8) / 8)
    raise AssertionError(f"no reference constellation for {modulation}")


@pytest.mark.parametrize("name", captures_with_profiles())
def test_every_trace_array_has_its_dtype_and_shape_and_the_jsons_values(name):
    report = iqaudit.analyse(SAMPLES / name)
    doc = json.loads(report.to_json())
    traced = 0
    for b, jb in zip(report.bursts, doc["bursts"]):
        ch, eq, tr = jb["channel"], jb["equaliser"], jb["trace"]
        # Source: the report JSON ([re, im] pairs) is the reference for every array.
        assert b.taps.dtype == np.complex128 and b.taps.shape == (len(ch["taps"]),)
        np.testing.assert_array_equal(b.taps.real, [t[0] for t in ch["taps"]])
        np.testing.assert_array_equal(b.taps.imag, [t[1] for t in ch["taps"]])
        assert b.taps_db.dtype == np.float64
        np.testing.assert_array_equal(b.taps_db, ch["taps_db"])
        assert b.feedforward.dtype == np.complex128 and b.feedforward.shape == (eq["feedforward_taps"],)
        assert b.feedback.dtype == np.complex128 and b.feedback.shape == (eq["feedback_taps"],)
        if tr is None:
            assert not b.has_trace and b.equalised is None and b.evm_blocks is None
            continue
        traced += 1
        n = len(tr["constellation"])
        assert b.equalised.dtype == np.complex128 and b.equalised.shape == (n,)
        assert b.decisions.dtype == np.complex128 and b.decisions.shape == (n,)
        assert b.equalised_index.dtype == np.int64 and b.equalised_index.shape == (n,)
        pts = np.array(tr["constellation"])
        np.testing.assert_array_equal(b.equalised, pts[:, 1] + 1j * pts[:, 2])
        np.testing.assert_array_equal(b.equalised_index, pts[:, 0].astype(np.int64))
        assert b.wrong.dtype == np.int64
        np.testing.assert_array_equal(b.wrong, np.array(tr["wrong"], dtype=np.int64))
        assert b.evm_blocks.dtype == np.float64 and b.evm_blocks.shape == (len(tr["evm_blocks"]), 2)
        np.testing.assert_array_equal(b.evm_blocks, np.array(tr["evm_blocks"]).reshape(-1, 2))
        assert b.sync_trace.dtype == np.float64 and b.sync_trace.shape == (len(tr["sync_metric"]), 2)
        assert b.eye_equalised.dtype == np.complex128
        assert b.eye_equalised.shape == (len(tr["eye_equalised"]),)
        assert b.response_db.dtype == np.float64 and b.response_db.shape == (129, 2)
        if tr["eye_matched"] is not None:
            pps = tr["eye_matched"]["points_per_symbol"]
            assert b.eye_matched.dtype == np.complex128
            assert b.eye_matched.shape == (len(tr["eye_matched"]["traces"]), 2 * pps + 1)
    assert traced > 0, "no burst carried a trace"


@pytest.mark.parametrize("name", captures_with_profiles())
def test_the_decisions_are_the_nearest_ideal_points(name):
    report = iqaudit.analyse(SAMPLES / name)
    ideal = ideal_points(report.profile["payload"]["modulation"])
    for b in report.bursts:
        if not b.has_trace:
            continue
        # Slow twin: brute-force nearest point with numpy; the library slices in
        # float32, so points are equal to within float32 rounding (1e-6).
        nearest = ideal[np.argmin(np.abs(b.equalised[:, None] - ideal[None, :]), axis=1)]
        np.testing.assert_allclose(b.decisions, nearest, atol=1e-6)


def test_traced_bursts_zero_gives_no_traces_but_keeps_the_taps():
    report = iqaudit.analyse(SAMPLES / "crane-bench-cable.ci16", traced_bursts=0)
    # Source: the CLI's --traced-bursts contract (0 keeps none; trace: null).
    assert report.provenance["traced_bursts"] == 0
    for b in report.bursts:
        assert not b.has_trace
        assert b.equalised is None and b.decisions is None and b.response_db is None
        assert b.taps.shape[0] > 0


def test_the_arrays_are_built_once_and_shared_between_reads():
    report = iqaudit.analyse(SAMPLES / "crane-bench-cable.ci16")
    first, again = report.bursts[0], report.bursts[0]
    # Common practice: a cached conversion hands out the same objects.
    assert first is again
    assert first.equalised is again.equalised
