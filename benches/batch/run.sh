#!/usr/bin/env bash
# Batch benchmark (issue #7): `iqaudit batch` over a folder of many small
# captures at --jobs 1 and --jobs 2, a resume run over the same folder, and a
# folder holding one ~4 GiB capture; wall, CPU, captures/s, MB/s and peak RSS.
# Not run by CI. See benches/batch/README.md.
#
# Env: BATCH_DIR (scratch, default /tmp/iqaudit-batch-bench), SMALL_N (200),
#      SMALL_BURSTS (4), REPEATS (3: best-of for the small runs),
#      BIG_GIB (4), BIG_GAP (1000000:1100000), SKIP_BIG (0),
#      NICE (0: the measured runs' nice value; a negative value, as root, keeps
#      other work on a shared machine from setting the wall-clock figures; the
#      runs then go in a new session whose autogroup gets the same nice).
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
DIR=${BATCH_DIR:-/tmp/iqaudit-batch-bench}
SMALL_N=${SMALL_N:-200}
SMALL_BURSTS=${SMALL_BURSTS:-4}
REPEATS=${REPEATS:-3}
BIG_GIB=${BIG_GIB:-4}
BIG_GAP=${BIG_GAP:-1000000:1100000}
SKIP_BIG=${SKIP_BIG:-0}
NICE=${NICE:-0}
PROFILE=$ROOT/benches/e2e/profile.json
BIN=$ROOT/target/release/iqaudit
MEASURE=$ROOT/benches/batch/measure.py
[ -x /usr/bin/time ] || { echo "needs GNU time: apt-get install time" >&2; exit 2; }
mkdir -p "$DIR"

(cd "$ROOT" && cargo build --release --bin iqaudit)

# --- the small folder: SMALL_N captures, distinct seeds, two sub-folders ----
SMALL=$DIR/small
if [ ! -f "$SMALL/.complete-$SMALL_N-$SMALL_BURSTS" ]; then
  rm -rf "$SMALL"; mkdir -p "$SMALL"
  for i in $(seq 1 "$SMALL_N"); do
    sub=$SMALL/quay-$((i % 4))
    mkdir -p "$sub"
    "$BIN" synth --profile "$PROFILE" --out "$sub/crane-$i.cf32" --bursts "$SMALL_BURSTS" \
      --channel "1.0,0.4-0.2j,0.15" --esn0-db 30 --seed "$i" --no-sigmf 2>/dev/null
  done
  touch "$SMALL/.complete-$SMALL_N-$SMALL_BURSTS"
fi

# --- the big folder: one capture of about BIG_GIB GiB (cf32, sparse bursts) --
BIG=$DIR/big
BIGF=$BIG/long-haul.cf32
if [ "$SKIP_BIG" != 1 ] && [ ! -f "$BIGF" ]; then
  need_kib=$(( (BIG_GIB + 1) * 1024 * 1024 ))
  avail_kib=$(df -Pk "$DIR" | awk 'NR==2 {print $4}')
  [ "$avail_kib" -gt "$need_kib" ] || { echo "not enough space in $DIR for $BIG_GIB GiB" >&2; exit 2; }
  mkdir -p "$BIG"
  # Burst length of the e2e profile: (64 + 1024) symbols x 4 samples + pulse tails.
  lo=${BIG_GAP%%:*}; hi=${BIG_GAP##*:}
  samples=$(( BIG_GIB * 1024 * 1024 * 1024 / 8 ))
  bursts=$(( samples / ((lo + hi) / 2 + 4400) ))
  "$BIN" synth --profile "$PROFILE" --out "$BIGF" --bursts "$bursts" --gap "$BIG_GAP" \
    --channel "1.0,0.4-0.2j,0.15" --esn0-db 30 --seed 7 --no-sigmf
fi

bytes_of() { find "$1" -type f -name '*.cf32' -printf '%s\n' | awk '{s += $1} END {printf "%.0f\n", s}'; }
count_of() { find "$1" -type f -name '*.cf32' | wc -l; }

# One measured batch run: name folder out jobs extra-args...
run() {
  local name=$1 folder=$2 out=$3 jobs=$4; shift 4
  local cmd=(python3 "$MEASURE" "$DIR/$name.json" -- "$BIN" batch "$folder" --profile "$PROFILE"
    --out "$out" --jobs "$jobs" --quiet "$@")
  if [ "$NICE" = 0 ]; then
    "${cmd[@]}"
  else
    # With autogroup scheduling (Linux, sched_autogroup_enabled=1) a nice value
    # only ranks threads within one session: run in a new session and set that
    # session's autogroup nice as well.
    setsid -w sh -c 'echo "$0" > /proc/self/autogroup 2>/dev/null || true; exec nice -n "$0" "$@"' \
      "$NICE" "${cmd[@]}"
  fi
}

# Best (lowest wall) of REPEATS forced runs.
best_run() { # name folder out jobs
  local name=$1; shift
  local best=""
  for r in $(seq 1 "$REPEATS"); do
    run "$name.$r" "$@" --force
    if [ -z "$best" ] || python3 -c "import json,sys; a=json.load(open('$DIR/$name.$r.json')); b=json.load(open('$DIR/$best.json')); sys.exit(0 if a['wall_s'] < b['wall_s'] else 1)"; then
      best=$name.$r
    fi
  done
  cp "$DIR/$best.json" "$DIR/$name.json"
}

cat "$SMALL"/*/*.cf32 > /dev/null       # warm the page cache
best_run small-j1 "$SMALL" "$DIR/out-small" 1
best_run small-j2 "$SMALL" "$DIR/out-small" 2
run small-resume "$SMALL" "$DIR/out-small" 2   # every report up to date: hash + read only
if [ "$SKIP_BIG" != 1 ]; then
  cat "$BIGF" > /dev/null
  run big-j2 "$BIG" "$DIR/out-big" 2 --force
  run big-resume "$BIG" "$DIR/out-big" 2        # report up to date: one SHA-256 pass
fi

python3 - "$DIR" "$(bytes_of "$SMALL")" "$(count_of "$SMALL")" \
  "$( [ "$SKIP_BIG" = 1 ] && echo 0 || bytes_of "$BIG")" <<'PY' | tee "$DIR/results.md"
import json, os, sys
d, small_bytes, small_n, big_bytes = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4])
print("| run | captures | MB | exit | wall s | CPU s (user+sys) | captures/s | MB/s | MB per CPU-s | max RSS (time -v) MiB | sampled VmHWM / RssAnon / RssFile MiB | load before |")
print("|---|---|---|---|---|---|---|---|---|---|---|---|")
rows = {}
for name, n, b in [("small-j1", small_n, small_bytes), ("small-j2", small_n, small_bytes),
                   ("small-resume", small_n, small_bytes), ("big-j2", 1, big_bytes),
                   ("big-resume", 1, big_bytes)]:
    p = os.path.join(d, name + ".json")
    if not os.path.exists(p):
        continue
    r = json.load(open(p))
    cpu = r["user_s"] + r["sys_s"]
    pk = r["peak_kib"]
    mib = lambda k: f"{pk.get(k, 0) / 1024:.0f}"
    rows[name] = n / r["wall_s"]
    print(f"| {name} | {n} | {b / 1e6:.1f} | {r['exit']} | {r['wall_s']:.2f} | {cpu:.2f} | {n / r['wall_s']:.1f} | "
          f"{b / 1e6 / r['wall_s']:.1f} | {b / 1e6 / cpu:.1f} | {r['maxrss_kib'] / 1024:.0f} | "
          f"{mib('VmHWM')} / {mib('RssAnon')} / {mib('RssFile')} | {r['load_before']} |")
if "small-j1" in rows and "small-j2" in rows:
    s = rows["small-j2"] / (2 * rows["small-j1"])
    print(f"\nscaling: --jobs 2 gives {rows['small-j2'] / rows['small-j1']:.2f}x --jobs 1 = {s:.2f} x N x single-core (target >= 0.8)")
PY
