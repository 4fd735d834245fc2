"""The bindings give what the command line gives: the same report JSON, info,
profiles and recheck result, for every shipped sample capture.

Source of every expected value: the iqaudit command line itself (the built
release binary), which the bindings must reproduce; the bindings compute nothing.
"""

import json

import pytest

import iqaudit
from conftest import REPO, SAMPLES, captures_with_profiles, every_capture, without_command


@pytest.mark.parametrize("name", captures_with_profiles())
def test_the_report_json_is_byte_for_byte_the_clis_apart_from_the_command(cli, name):
    cap = SAMPLES / name
    done = cli("analyse", cap, "--json")
    report = iqaudit.analyse(str(cap))
    ours = report.to_json().encode()
    # Source: `iqaudit analyse --json` stdout; only `command` may differ (docs/python.md).
    assert without_command(ours) == without_command(done.stdout)
    # The exit code the CLI gives for this verdict (cli.rs exit_code) is the report's.
    assert report.exit_code == done.returncode


@pytest.mark.parametrize("name", captures_with_profiles())
def test_the_recorded_command_is_the_equivalent_command_line(name):
    cap = SAMPLES / name
    report = iqaudit.analyse(cap, traced_bursts=3)
    # Source: docs/python.md (the bindings record the command that makes the same report).
    assert report.command == [
        "iqaudit",
        "analyse",
        str(cap),
        "--profile",
        str(cap) + ".profile.json",
        "--traced-bursts",
        "3",
    ]


@pytest.mark.parametrize("name", captures_with_profiles())
def test_the_summary_attributes_are_the_report_jsons_figures(name):
    report = iqaudit.analyse(SAMPLES / name)
    doc = json.loads(report.to_json())
    s = doc["summary"]
    # Source: the report JSON (docs/report.md names); attributes are views of it.
    assert report.burst_count == s["bursts"] == len(report.bursts) == len(report)
    assert report.evm_rms_percent == s["evm_rms_percent"]
    assert report.mer_db == s["mer_db"]
    assert report.ser == (s["ser"] or {}).get("rate")
    assert report.verdict == doc["verdict"]["result"]
    assert report.checks == doc["verdict"]["checks"]
    assert report.summary == s
    for b, jb in zip(report.bursts, doc["bursts"]):
        assert b.start_sample == jb["start_sample"]
        assert b.cfo_hz == jb["cfo_hz"]
        assert b.evm_rms_percent == jb["metrics"]["evm_rms_percent"]
        assert b.mer_db == jb["metrics"]["mer_db"]
        assert b.snr_db == jb["channel"]["snr_db"]
        assert b.metrics == jb["metrics"]
        assert b.to_dict() == jb


@pytest.mark.parametrize("name", every_capture())
def test_info_is_the_dict_info_json_prints(cli, name):
    done = cli("info", SAMPLES / name, "--json")
    assert done.returncode == 0, done.stderr
    # Source: `iqaudit info --json` stdout.
    assert iqaudit.info(SAMPLES / name) == json.loads(done.stdout)


def test_info_with_options_is_the_dict_info_json_prints_with_the_same_options(cli):
    cap = SAMPLES / "crane-bench-cable.ci16"
    done = cli("info", cap, "--json", "--sample-rate", "2e6", "--swap-iq", "--center-freq", "4.5e8")
    ours = iqaudit.info(cap, sample_rate=2e6, swap_iq=True, center_freq=4.5e8)
    # Source: `iqaudit info --json` with the same options.
    assert ours == json.loads(done.stdout)


def test_profile_new_is_what_profile_new_prints(cli):
    done = cli("profile", "new", "--modulation", "qpsk", "--sps", "8", "--payload-symbols", "300")
    # Source: `iqaudit profile new` stdout.
    assert iqaudit.profile_new(modulation="qpsk", sps=8, payload_symbols=300) == json.loads(done.stdout)
    assert iqaudit.profile_new() == json.loads(cli("profile", "new").stdout)


@pytest.mark.parametrize("name", captures_with_profiles())
def test_profile_check_is_what_profile_check_prints(cli, name):
    path = SAMPLES / (name + ".profile.json")
    # Source: `iqaudit profile check` stdout.
    assert iqaudit.profile_check(path) == json.loads(cli("profile", "check", path).stdout)


def test_a_written_report_rechecks_as_the_cli_rechecks_it(cli, tmp_path):
    cap = SAMPLES / "crane-field-containers.ci16"
    report = iqaudit.analyse(cap)
    out = tmp_path / "r.json"
    report.write_json(out)
    assert out.read_text() == report.to_json()
    ours = iqaudit.recheck(out)
    done = cli("recheck", out, "--json")
    # Source: `iqaudit recheck --json` on the same file (exit 0: every figure reproduces).
    assert done.returncode == 0
    assert ours == json.loads(done.stdout)
    assert ours["reproduces"] is True and ours["differences_total"] == 0


def test_a_report_written_with_a_relative_capture_is_what_analyse_report_writes(cli, tmp_path, monkeypatch):
    monkeypatch.chdir(REPO)
    rel = "sample-captures/crane-bench-cable.ci16"
    ours, theirs = tmp_path / "ours.json", tmp_path / "cli.json"
    iqaudit.analyse(rel).write_json(ours)
    done = cli("analyse", rel, "--report", theirs, cwd=REPO)
    assert done.returncode == 0, done.stderr
    # Source: the file `iqaudit analyse --report` writes (with input.path_from_report).
    assert without_command(ours.read_bytes()) == without_command(theirs.read_bytes())
    assert json.loads(ours.read_text())["input"]["path_from_report"] is not None
    # Source: `recheck` finds the capture through path_from_report from another folder.
    monkeypatch.chdir(tmp_path)
    assert iqaudit.recheck(ours)["reproduces"] is True


def test_the_thread_count_does_not_change_the_report():
    cap = SAMPLES / "crane-fade.ci16"
    # Source: the library's contract (DEVELOPERS.md: identical results for any thread count).
    one = iqaudit.analyse(cap, threads=1).to_json()
    two = iqaudit.analyse(cap, threads=2).to_json()
    assert without_command(one.encode()) == without_command(two.encode())
