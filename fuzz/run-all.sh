#!/usr/bin/env bash
# Run every fuzz target for SECONDS (default 180) each, two at a time, seeded from
# fuzz/seeds/<target>/ and growing fuzz/corpus/<target>/ (git-ignored).
# Needs cargo-fuzz (`cargo install cargo-fuzz --locked`); on a stable toolchain
# RUSTC_BOOTSTRAP=1 lets rustc accept the -Z flags cargo-fuzz passes.
# Prints each target's final libFuzzer stats (executions, coverage).
set -euo pipefail
cd "$(dirname "$0")"
secs="${1:-180}"
export RUSTC_BOOTSTRAP=1
cargo fuzz build
targets=(raw_capture wav_capture sigmf_meta profile report recheck)
run() {
  local t="$1" extra=()
  [[ "$t" == report || "$t" == recheck ]] && extra=(-max_len=65536)
  mkdir -p "corpus/$t"
  cargo fuzz run "$t" "corpus/$t" "seeds/$t" -- -max_total_time="$secs" \
    -rss_limit_mb=2048 -timeout=10 -print_final_stats=1 "${extra[@]}" \
    >"fuzz-$t.log" 2>&1 || { echo "$t: FAILED (see fuzz/fuzz-$t.log, fuzz/artifacts/$t/)"; return 1; }
  echo "$t: $(grep -E '^stat::number_of_executed_units' "fuzz-$t.log") $(grep -E '^#[0-9]+' "fuzz-$t.log" | tail -n 1 | grep -oE 'cov: [0-9]+ ft: [0-9]+')"
}
status=0
for ((i = 0; i < ${#targets[@]}; i += 2)); do
  run "${targets[i]}" & a=$!
  b=""
  if ((i + 1 < ${#targets[@]})); then run "${targets[i + 1]}" & b=$!; fi
  wait "$a" || status=1
  if [[ -n "$b" ]]; then wait "$b" || status=1; fi
done
exit "$status"
