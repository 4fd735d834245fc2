"""Bad input raises iqaudit.IqauditError with the command line's one-line
message and exit code.

Source of every expected message and code: the command line's stderr line
(`iqaudit: <message>`) and exit status for the same bad input.
"""

import pytest

import iqaudit
from conftest import SAMPLES, cli_message


def same_error(cli, call, *cli_args):
    done = cli(*cli_args)
    with pytest.raises(iqaudit.IqauditError) as caught:
        call()
    assert str(caught.value) == cli_message(done.stderr)
    assert caught.value.exit_code == done.returncode
    return caught.value


def test_a_missing_capture_raises_the_clis_message(cli, tmp_path):
    missing = tmp_path / "nope.ci16"
    profile = SAMPLES / "crane-bench-cable.ci16.profile.json"
    e = same_error(
        cli,
        lambda: iqaudit.analyse(missing, profile),
        "analyse", missing, "--profile", profile, "--json",
    )
    assert e.exit_code == 2


def test_a_capture_without_a_profile_raises_the_clis_message(cli):
    cap = SAMPLES / "bench-noise-floor.cf32"
    same_error(cli, lambda: iqaudit.analyse(cap), "analyse", cap, "--json")


def test_a_malformed_profile_raises_the_clis_message(cli, tmp_path):
    bad = tmp_path / "bad.profile.json"
    bad.write_text('{"samples_per_symbol": "four"}')
    cap = SAMPLES / "crane-bench-cable.ci16"
    same_error(cli, lambda: iqaudit.analyse(cap, bad), "analyse", cap, "--profile", bad, "--json")
    same_error(cli, lambda: iqaudit.profile_check(bad), "profile", "check", bad)


def test_a_bad_format_name_raises_the_clis_message(cli):
    cap = SAMPLES / "crane-bench-cable.ci16"
    same_error(cli, lambda: iqaudit.analyse(cap, format="ci17_le"), "analyse", cap, "--format", "ci17_le", "--json")
    same_error(cli, lambda: iqaudit.info(cap, format="ci17_le"), "info", cap, "--format", "ci17_le")


def test_zero_threads_raises_the_clis_jobs_message(cli):
    cap = SAMPLES / "crane-bench-cable.ci16"
    same_error(cli, lambda: iqaudit.analyse(cap, threads=0), "analyse", cap, "--jobs", "0", "--json")


def test_a_report_that_is_not_json_raises_the_clis_recheck_message(cli, tmp_path):
    bad = tmp_path / "r.json"
    bad.write_text("not json")
    same_error(cli, lambda: iqaudit.recheck(bad), "recheck", bad)


def test_an_out_of_range_synth_option_raises_the_clis_message(cli, tmp_path):
    profile = SAMPLES / "crane-bench-cable.ci16.profile.json"
    out = tmp_path / "x.ci16"
    same_error(
        cli,
        lambda: iqaudit.synth(profile, out, level_dbfs=100.0),
        "synth", "--profile", profile, "--out", out, "--level-dbfs", "100",
    )
    assert not out.exists()


def test_the_exception_is_an_ordinary_exception_subclass():
    # Common practice: one library exception type deriving from Exception.
    assert issubclass(iqaudit.IqauditError, Exception)
