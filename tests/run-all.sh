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
