"""`synth` writes what the command line writes, and `analyse` finds its truth."""

import json
import shlex

import numpy as np

import iqaudit
from conftest import SAMPLES


def sample_synth_lines():
    """The `iqaudit synth` lines sample-captures/README.md says made each sample."""
    text = (SAMPLES / "README.md").read_text()
    return [l for l in text.splitlines() if l.startswith("iqaudit synth ")]


def kwargs_of(argv):
    """The synth() keyword arguments for a command line's options."""
    kw, args = {}, list(argv)
    while args:
        opt = args.pop(0)
        key = opt[2:].replace("-", "_")
        val = args.pop(0)
        if key in ("profile", "out"):
            kw[key] = val
        elif key in ("bursts", "seed", "lead_gap", "channel_main"):
            kw[key] = int(val)
        elif key == "timing_frac":
            kw[key] = val if val == "random" else float(val)
        elif key == "dc":
            kw[key] = tuple(float(x) for x in val.split(","))
        elif key == "channel":
            kw[key] = val
        else:
            kw[key] = float(val)
    return kw


def test_synth_regenerates_every_shipped_sample_byte_for_byte(tmp_path):
    lines = sample_synth_lines()
    assert len(lines) >= 4
    for line in lines:
        kw = kwargs_of(shlex.split(line)[2:])
        name = kw.pop("out")
        profile = SAMPLES / kw.pop("profile")
        path, truth = iqaudit.synth(profile, tmp_path / name, **kw)
        # Source: the committed sample (made by the CLI with this line; README).
        assert path.read_bytes() == (SAMPLES / name).read_bytes(), name
        shipped = json.loads((SAMPLES / (name + ".truth.json")).read_text())
        assert truth["bursts"] == shipped["bursts"]
        assert json.loads((tmp_path / (name + ".truth.json")).read_text()) == truth


def test_analyse_finds_the_truth_of_a_clean_synth_capture(tmp_path):
    profile = tmp_path / "link.profile.json"
    p = iqaudit.profile_new(modulation="16qam", payload_symbols=400)
    profile.write_text(json.dumps(p))
    cap, truth = iqaudit.synth(
        profile, tmp_path / "clean.cf32", bursts=6, seed=7, esn0_db=40.0,
        cfo_hz=300.0, timing_frac="random", lead_gap=900, format="cf32_le",
    )
    report = iqaudit.analyse(cap, profile)
    # Source: the synth truth file (where each burst starts); at Es/N0 40 dB a
    # 16-QAM symbol error has probability far below 1e-20 (textbook SER bound
    # ~3·Q(sqrt(Es/N0/5))), so zero errors are expected.
    assert report.burst_count == len(truth["bursts"]) == 6
    for b, t in zip(report.bursts, truth["bursts"]):
        # The instant of the first training symbol is start_sample + timing
        # fraction (src/lib.rs); a fraction near ±0.5 may be reported from the
        # neighbouring sample, so the instants are compared (within 0.1 sample,
        # common practice for a training-based timing estimate at 40 dB).
        found = b.start_sample + b.timing_frac_samples
        assert abs(found - (t["start_sample"] + t["timing_frac"])) < 0.1
        assert abs(b.start_sample - t["start_sample"]) <= 1
        assert b.symbol_errors == 0 and b.ser == 0.0
        # Source: truth's CFO; a training-based estimate at 40 dB is within a few Hz.
        assert abs(b.cfo_hz - 300.0) < 20.0
    assert report.ser == 0.0 and report.verdict == "pass"
    np.testing.assert_equal(report.bursts[0].wrong.size, 0)


def test_synth_takes_channel_taps_as_complex_numbers(tmp_path):
    profile = SAMPLES / "crane-field-containers.ci16.profile.json"
    taps = [0.18 - 0.12j, 1.0, 0.42 + 0.28j, -0.21 + 0.09j, 0.08]
    a, ta = iqaudit.synth(profile, tmp_path / "a.ci16", seed=3, channel=taps, channel_main=1)
    b, tb = iqaudit.synth(
        profile, tmp_path / "b.ci16", seed=3, channel="0.18-0.12j,1.0,0.42+0.28j,-0.21+0.09j,0.08",
        channel_main=1,
    )
    # Common practice: the same taps written two ways give the same capture.
    assert a.read_bytes() == b.read_bytes()
    assert ta["bursts"] == tb["bursts"]
