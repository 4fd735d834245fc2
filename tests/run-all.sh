#!/usr/bin/env bash
# Every test of iqaudit, on a fresh machine: installs what the suites beyond cargo
# need, then runs them all. This is README's test command and what .ci/run calls.
#
#   tests/run-all.sh
#
# 1. `cargo test --release` — unit, integration and Monte-Carlo tests (needs only cargo).
# 2. The extra suites below, each in its own block (Python packages, the SigMF
#    reference library, a single-node Slurm cluster). A suite that cannot run
#    says so in a banner; on this project's machines every one must run.
set -euo pipefail
cd "$(dirname "$0")/.."

# jq, python3 and node re-serialise a report in the recheck round-trip test (#19);
# under CI (IQAUDIT_CI=1, set by .ci/run) that test fails instead of skipping.
missing=()
command -v jq >/dev/null 2>&1 || missing+=(jq)
command -v python3 >/dev/null 2>&1 || missing+=(python3)
command -v node >/dev/null 2>&1 || missing+=(nodejs)
# groff renders the generated man pages in tests/integration/cli_conventions.rs (#19).
command -v groff >/dev/null 2>&1 || missing+=(groff-base)
if [ "${#missing[@]}" -gt 0 ]; then
  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${missing[@]}"
fi

# ---- SigMF reference library for the interchange checks (#18) ---------------
# tests/integration/sigmf_library.rs has the SigMF project's Python library
# validate and read every sidecar synth/analyse/batch write; under CI a missing
# package fails that test instead of skipping it. numpy comes with it.
# tests/integration/schemas.rs validates every JSON document against the
# shipped docs/schemas/ with the Python `jsonschema` package (#19); under CI a
# missing package fails that test too.
if ! python3 -c "import sigmf, numpy, jsonschema" >/dev/null 2>&1; then
  python3 -m pip install --quiet "sigmf==1.14.0" "jsonschema==4.26.0" \
    || python3 -m pip install --quiet --break-system-packages "sigmf==1.14.0" "jsonschema==4.26.0"
fi
python3 -c "import sigmf; print('ci: SigMF reference library', sigmf.__version__)"
python3 -c "import importlib.metadata as m; print('ci: jsonschema', m.version('jsonschema'))"
export IQAUDIT_REQUIRE_SIGMF=1
# ---- end of the SigMF block -----------------------------------------------------

cargo test --release

# ---- Python bindings (#23) ----------------------------------------------------
# python/ is its own cargo workspace (pyo3 never enters the root build above).
# Its wheel is built with maturin, its cargo output kept under python/target so
# the root target/ is untouched, installed with pip, and python/tests run with
# pytest against the release binary built above (they compare the bindings with
# the CLI). Every step that cannot run fails the whole run with a banner; pytest
# collecting no test (its exit 5) fails it too.
py_banner() {
  echo "tests: ==================================================================" >&2
  echo "tests: PYTHON BINDINGS NOT TESTED: $*" >&2
  echo "tests: ==================================================================" >&2
  exit 1
}
if ! python3 -c "import maturin, pytest, numpy" >/dev/null 2>&1; then
  python3 -m pip install --quiet "maturin==1.16.0" "pytest==9.2.0" "numpy>=1.21" \
    || python3 -m pip install --quiet --break-system-packages "maturin==1.16.0" "pytest==9.2.0" "numpy>=1.21" \
    || py_banner "pip could not install maturin, pytest and numpy"
fi
python3 -m maturin --version || py_banner "maturin does not run after installing it"
cargo build --release --quiet --bin iqaudit || py_banner "the iqaudit binary the tests compare with did not build"
py_wheels="$(mktemp -d)"
CARGO_TARGET_DIR="${PWD}/python/target" nice -n 5 python3 -m maturin build --release --quiet \
  --manifest-path python/Cargo.toml --out "${py_wheels}" \
  || py_banner "maturin could not build the wheel"
py_wheel="$(ls "${py_wheels}"/iqaudit-*.whl 2>/dev/null | head -n 1)"
[ -n "${py_wheel}" ] || py_banner "maturin wrote no wheel to ${py_wheels}"
echo "ci: built ${py_wheel##*/}"
python3 -m pip install --quiet --force-reinstall --no-deps "${py_wheel}" \
  || python3 -m pip install --quiet --force-reinstall --no-deps --break-system-packages "${py_wheel}" \
  || py_banner "pip could not install ${py_wheel##*/}"
rm -rf "${py_wheels}"
py_rc=0
IQAUDIT_BIN="${PWD}/target/release/iqaudit" python3 -m pytest -q -p no:cacheprovider python/tests || py_rc=$?
if [ "${py_rc}" -eq 5 ]; then
  py_banner "pytest collected no test in python/tests"
elif [ "${py_rc}" -ne 0 ]; then
  echo "tests: the Python binding tests failed (pytest exit ${py_rc})" >&2
  exit "${py_rc}"
fi
# ---- end of the Python bindings block ------------------------------------------

# ---- Slurm: docs/scaling.md's array job on a single-node cluster (#22) --------
# tests/cluster/slurm.sh needs root and installs slurm-wlm and munge from Debian
# when missing; it stops every daemon it started. Exit 77 means Slurm cannot be
# started on this machine (the script printed why in a banner): the run goes on
# unless IQAUDIT_REQUIRE_SLURM=1. Any other failure fails the run.
slurm_rc=0
bash tests/cluster/slurm.sh || slurm_rc=$?
if [ "${slurm_rc}" -eq 77 ]; then
  echo "tests: SLURM TEST NOT RUN on this machine (reason in the banner above)" >&2
  if [ "${IQAUDIT_REQUIRE_SLURM:-0}" = 1 ]; then exit 1; fi
elif [ "${slurm_rc}" -ne 0 ]; then
  exit "${slurm_rc}"
fi
# ---- end of the Slurm block ------------------------------------------------------
