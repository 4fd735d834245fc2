"""Shared fixtures of the Python binding tests: the repository, the built
command-line binary the bindings are compared with, the shipped samples."""

import os
import pathlib
import re
import subprocess

import pytest

REPO = pathlib.Path(__file__).resolve().parents[2]
SAMPLES = REPO / "sample-captures"


def cli_binary():
    """The iqaudit binary to compare with: $IQAUDIT_BIN, else target/release/iqaudit."""
    env = os.environ.get("IQAUDIT_BIN")
    path = pathlib.Path(env) if env else REPO / "target" / "release" / "iqaudit"
    if not path.is_file():
        pytest.fail(
            f"the iqaudit binary {path} is missing: build it with `cargo build --release` "
            "(or set IQAUDIT_BIN); these tests compare the bindings with it"
        )
    return path


@pytest.fixture(scope="session")
def cli():
    """Run the command line; returns the CompletedProcess (bytes)."""
    binary = cli_binary()

    def run(*args, cwd=None):
        return subprocess.run(
            [str(binary), *map(str, args)], capture_output=True, cwd=cwd, timeout=600
        )

    return run


def captures_with_profiles():
    """Every shipped sample that has its profile beside it (what `analyse X` reads)."""
    return sorted(
        p.name
        for p in SAMPLES.iterdir()
        if p.is_file() and (SAMPLES / (p.name + ".profile.json")).is_file()
    )


def every_capture():
    """Every shipped capture file (data files, not profiles, truths, sidecars, scripts)."""
    skip = (".json", ".sigmf-meta", ".md", ".py")
    return sorted(p.name for p in SAMPLES.iterdir() if p.is_file() and not p.name.endswith(skip))


# The `command` member of a pretty-printed report: one JSON string per line at
# four spaces, closed by `],` at two (serde_json's pretty printer).
COMMAND_BLOCK = re.compile(rb'\n  "command": \[\n(?:    .*\n)*?  \],\n')


def without_command(report_json: bytes) -> bytes:
    """The report JSON with its `command` member cut out (the one field that
    legitimately differs between the CLI and the bindings)."""
    cut, n = COMMAND_BLOCK.subn(b"\n", report_json, count=1)
    assert n == 1, "no command member found in the report JSON"
    return cut


def cli_message(stderr: bytes) -> str:
    """The CLI's one error line without its `iqaudit: ` prefix."""
    lines = [l for l in stderr.decode().splitlines() if l.startswith("iqaudit: ")]
    assert lines, f"no iqaudit: line on stderr: {stderr!r}"
    return lines[-1][len("iqaudit: "):]
