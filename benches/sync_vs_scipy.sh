#!/usr/bin/env bash
# The synchroniser's search next to a numpy/scipy overlap-save search, on the same
# ≥ 1 GiB cf32 capture, same machine, same run. Prints a Markdown table (wall and
# per-CPU-second throughput, bursts found, load average at each run) and checks that
# every method found the same burst starts.
#
# Env: SYNC_DIR (scratch dir, default /tmp/iqaudit-sync), SYNC_BENCH_SAMPLES (default
#      134217728 = 1 GiB of cf32), REPEATS (best of, default 3), NFFT (scipy overlap-save
#      block, default 8192).
# Needs: python3 with numpy and scipy (versions are printed in the table).
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
DIR=${SYNC_DIR:-/tmp/iqaudit-sync}
N=${SYNC_BENCH_SAMPLES:-134217728}
REPEATS=${REPEATS:-3}
NFFT=${NFFT:-8192}
F=$DIR/search-$N.cf32
mkdir -p "$DIR"
OUT=$DIR/results.jsonl
: > "$OUT"

load() { cut -d' ' -f1-3 /proc/loadavg; }

# Build (and on the first run write the capture), then warm the page cache.
(cd "$ROOT" && SYNC_BENCH_FILE=$F SYNC_BENCH_SAMPLES=$N SYNC_BENCH_REPEATS=1 \
  cargo bench --bench sync > /dev/null)
cat "$F" > /dev/null; cat "$F" > /dev/null

L=$(load)
(cd "$ROOT" && SYNC_BENCH_FILE=$F SYNC_BENCH_SAMPLES=$N SYNC_BENCH_REPEATS=$REPEATS \
  cargo bench --bench sync) | tee "$DIR/rust.txt" | sed -n 's/^RESULT //p' \
  | python3 -c "import sys,json
for l in sys.stdin:
    d=json.loads(l); d['load']='$L'; print(json.dumps(d))" >> "$OUT"

py_best() { # args... → best-wall JSON line of REPEATS runs, with the load at its start
  local best="" r l
  for _ in $(seq "$REPEATS"); do
    l=$(load)
    r=$(python3 "$ROOT/benches/baseline/search.py" "$F" "$@" \
      | python3 -c "import sys,json; d=json.loads(sys.stdin.read()); d['load']='$l'; print(json.dumps(d))")
    if [ -z "$best" ] || python3 -c "import sys,json; sys.exit(0 if json.loads(sys.argv[1])['wall_s'] < json.loads(sys.argv[2])['wall_s'] else 1)" "$r" "$best"; then
      best=$r
    fi
  done
  echo "$best"
}
py_best --method os --nfft "$NFFT" --workers 2 >> "$OUT"
py_best --method os --nfft "$NFFT" --workers 1 >> "$OUT"
py_best --method oaconvolve >> "$OUT"

grep -h "rustfft" "$DIR/rust.txt" || true
python3 - "$OUT" <<'PY'
import json, sys
rows = [json.loads(l) for l in open(sys.argv[1])]
ref = rows[0]["starts"]
print(f"capture: {rows[0]['samples']} samples ({rows[0]['samples'] * 8 / 2**30:.2f} GiB cf32_le, page cache warm)")
py = next((r for r in rows if "numpy" in r), {})
print(f"numpy {py.get('numpy')}, scipy {py.get('scipy')}")
print("| search | threads | wall s | M samples/s | CPU s | M samples per CPU-second | bursts | same starts | load avg (1/5/15 min) |")
print("|---|---|---|---|---|---|---|---|---|")
for r in rows:
    if r["method"] == "iqaudit":
        name, thr = "iqaudit (rustfft, N = 4096, memory map)", r["threads"]
    elif r["method"] == "os":
        name, thr = f"scipy.fft overlap-save, N = {r['nfft']}", r["workers"]
    else:
        name, thr = "scipy.signal.oaconvolve", 1
    n = r["samples"]
    print(f"| {name} | {thr} | {r['wall_s']:.2f} | {n / r['wall_s'] / 1e6:.0f} | {r['cpu_s']:.2f} | "
          f"{n / max(r['cpu_s'], 1e-9) / 1e6:.0f} | {r['bursts']} | {'yes' if r['starts'] == ref else 'NO'} | {r['load']} |")
ours = min((r for r in rows if r["method"] == "iqaudit"), key=lambda r: r["wall_s"])
best_py = min((r for r in rows if r["method"] != "iqaudit"), key=lambda r: r["wall_s"])
best_py_cpu = max((r for r in rows if r["method"] != "iqaudit"), key=lambda r: r["samples"] / max(r["cpu_s"], 1e-9))
ours_cpu = max((r for r in rows if r["method"] == "iqaudit"), key=lambda r: r["samples"] / max(r["cpu_s"], 1e-9))
print(f"\nwall: best iqaudit / best scipy = {best_py['wall_s'] / ours['wall_s']:.2f}x; "
      f"per CPU-second: {(ours_cpu['samples'] / ours_cpu['cpu_s']) / (best_py_cpu['samples'] / best_py_cpu['cpu_s']):.2f}x")
PY
