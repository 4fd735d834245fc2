#!/usr/bin/env bash
# End-to-end benchmark: iqaudit analyse vs the page-cache read floor and a numpy/scipy
# baseline, on the same machine in one run. See benches/e2e/README.md.
#
# Env: E2E_DIR (scratch dir, default /tmp/iqaudit-e2e), SPARSE_BURSTS (2000),
#      SPARSE_GAP (60000:70000), DENSE_BURSTS (7200), DENSE_GAP (200:400),
#      APPEND_DOCS (1: append the table to docs/performance.md).
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
DIR=${E2E_DIR:-/tmp/iqaudit-e2e}
SPARSE_BURSTS=${SPARSE_BURSTS:-2000}
SPARSE_GAP=${SPARSE_GAP:-60000:70000}
DENSE_BURSTS=${DENSE_BURSTS:-7200}
DENSE_GAP=${DENSE_GAP:-200:400}
APPEND_DOCS=${APPEND_DOCS:-1}
PROFILE=$ROOT/benches/e2e/profile.json
BASELINE=$ROOT/benches/baseline/pipeline.py
BIN=$ROOT/target/release/iqaudit
TIMEBIN=/usr/bin/time
[ -x $TIMEBIN ] || { echo "needs GNU time: apt-get install time" >&2; exit 2; }
mkdir -p "$DIR"

(cd "$ROOT" && cargo build --release --bin iqaudit)

CHANNEL="1.0,0.4-0.2j,0.15"
make_capture() { # name bursts gap
  local f=$DIR/$1.cf32
  if [ ! -f "$f" ]; then
    "$BIN" synth --profile "$PROFILE" --out "$f" --bursts "$2" --gap "$3" \
      --channel "$CHANNEL" --esn0-db 30 --seed 7 --no-sigmf >&2
  fi
}

# /usr/bin/time -v → "wall cpu rss_kib"
timed() { # outfile cmd...
  local out=$1; shift
  $TIMEBIN -v -o "$DIR/time.txt" "$@" > "$out"
  python3 - "$DIR/time.txt" <<'PY'
import sys, re
t = open(sys.argv[1]).read()
def g(k): return re.search(re.escape(k) + r":\s*(.*)", t).group(1).strip()
w = g("Elapsed (wall clock) time (h:mm:ss or m:ss)").split(":")
wall = sum(float(v) * 60 ** i for i, v in enumerate(reversed(w)))
cpu = float(g("User time (seconds)")) + float(g("System time (seconds)"))
print(f"{wall:.3f} {cpu:.3f} {g('Maximum resident set size (kbytes)')}")
PY
}

best_of() { # n outfile cmd... → best wall line
  local n=$1; shift; local best=""
  for _ in $(seq "$n"); do
    local r; r=$(timed "$@")
    if [ -z "$best" ] || python3 -c "import sys; sys.exit(0 if float('${r%% *}') < float('${best%% *}') else 1)"; then best=$r; fi
  done
  echo "$best"
}

ROWS=""
run_case() { # name
  local f=$DIR/$1.cf32
  local size samples
  size=$(stat -c %s "$f"); samples=$((size / 8))
  cat "$f" > /dev/null; cat "$f" > /dev/null   # warm the page cache
  local load_read read_r an_r an1_r base_r
  load_read=$(cut -d' ' -f1-3 /proc/loadavg)
  read_r=$(best_of 3 /dev/null cat "$f")
  local load_an; load_an=$(cut -d' ' -f1-3 /proc/loadavg)
  an_r=$(best_of 2 "$DIR/$1.analyse.txt" "$BIN" analyse "$f" --profile "$PROFILE")
  an1_r=$(best_of 1 "$DIR/$1.analyse1.txt" "$BIN" analyse "$f" --profile "$PROFILE" --jobs 1)
  # The summary on stdout lists only the first bursts: the burst check reads the JSON report.
  rm -f "$DIR/$1.report.json"
  rep_r=$(best_of 1 /dev/null "$BIN" analyse "$f" --profile "$PROFILE" --report "$DIR/$1.report.json")
  grep -o '"start_sample": *[0-9]*' "$DIR/$1.report.json" | grep -o '[0-9]*$' > "$DIR/$1.starts.txt"
  local rep_size; rep_size=$(stat -c %s "$DIR/$1.report.json"); rm -f "$DIR/$1.report.json"
  local load_base; load_base=$(cut -d' ' -f1-3 /proc/loadavg)
  base_r=$(best_of 1 "$DIR/$1.baseline.json" python3 "$BASELINE" "$f" "$PROFILE")
  local check
  check=$(python3 - "$DIR/$1.starts.txt" "$DIR/$1.baseline.json" "$f.truth.json" <<'PY'
import sys, re, json
ours = [int(v) for v in open(sys.argv[1]).read().split()]
base = json.load(open(sys.argv[2]))["start_samples"]
truth = len(json.load(open(sys.argv[3]))["bursts"])
same = len(ours) == len(base) and all(abs(a - b) <= 1 for a, b in zip(ours, base))
print(f"truth {truth}, iqaudit {len(ours)}, baseline {len(base)}, same starts ±1: {'yes' if same else 'NO'}")
PY
)
  ROWS+=$(python3 - "$1" "$size" "$samples" "$read_r" "$an_r" "$an1_r" "$base_r" "$load_read" "$load_an" "$load_base" "$check" "$rep_r" "$rep_size" <<'PY'
import sys
name, size, samples = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
rd, an, an1, bs, rep = [[max(float(v), 1e-3) for v in a.split()] for a in sys.argv[4:8] + [sys.argv[12]]]
lr, la, lb, check = sys.argv[8:12]
rep_mib = int(sys.argv[13]) / 2**20
ms = samples / 1e6
print(f"| {name} | {size / 2**20:.0f} MiB, {ms:.1f} M samples | "
      f"{rd[0]:.3f} s | {an[0]:.3f} s ({ms / an[0]:.0f} M/s), CPU {an[1]:.2f} s, RSS {an[2] / 1024:.0f} MiB | "
      f"{an1[0]:.3f} s | {rep[0]:.2f} s, CPU {rep[1]:.2f} s, RSS {rep[2] / 1024:.0f} MiB, report {rep_mib:.0f} MiB | {bs[0]:.2f} s, CPU {bs[1]:.2f} s, RSS {bs[2] / 1024:.0f} MiB | "
      f"{an[0] / rd[0]:.1f}× | {bs[0] / an[0]:.1f}× ({bs[0] / rep[0]:.1f}× with --report) | {an1[0] / an[0]:.2f}× | {lr} / {la} / {lb} | {check} |")
PY
)$'\n'
}

make_capture sparse "$SPARSE_BURSTS" "$SPARSE_GAP"
make_capture dense "$DENSE_BURSTS" "$DENSE_GAP"
run_case sparse
run_case dense

CPU=$(lscpu | sed -n 's/^Model name:\s*//p' | head -1)
HEAD="| capture | size | read floor (\`cat\`, warm) | \`iqaudit analyse\` (2 threads) | \`analyse --jobs 1\` | \`analyse --report R.json\` | numpy/scipy baseline | iqaudit / read floor | baseline / iqaudit | 2 threads vs 1 | load avg (read / analyse / baseline) | bursts |
|---|---|---|---|---|---|---|---|---|---|---|---|"
TABLE=$(cat <<EOT
### End-to-end run $(date -u '+%Y-%m-%d %H:%M UTC')

Machine: $CPU, $(nproc) cores, commit $(cd "$ROOT" && git rev-parse --short HEAD), rustc $(rustc --version | cut -d' ' -f2), python $(python3 -c 'import numpy, scipy, platform; print(platform.python_version(), "numpy", numpy.__version__, "scipy", scipy.__version__)').
\`analyse\` without \`--report\`/\`--json\` prints the terminal summary and does not hash the file (the digest is only in the JSON); the \`--report\` column includes the SHA-256 pass and writing the report. The baseline hashes nothing.
Commands: \`benches/e2e/run.sh\` (captures: \`iqaudit synth --profile benches/e2e/profile.json --bursts $SPARSE_BURSTS --gap $SPARSE_GAP\` (sparse) / \`--bursts $DENSE_BURSTS --gap $DENSE_GAP\` (dense), \`--channel $CHANNEL --esn0-db 30 --seed 7\`; \`cat F > /dev/null\`; \`iqaudit analyse F --profile benches/e2e/profile.json\`; \`python3 benches/baseline/pipeline.py F benches/e2e/profile.json\`; all under \`/usr/bin/time -v\`, best of 3 for the read, best of 2 for analyse, one run otherwise).

$HEAD
$ROWS
EOT
)
echo "$TABLE"
if [ "$APPEND_DOCS" = 1 ]; then printf '\n%s\n' "$TABLE" >> "$ROOT/docs/performance.md"; fi
