#!/usr/bin/env bash
# Compare the JSON output of two iqaudit binaries over a fixed corpus: the shipped
# sample captures, an e2e-style capture and a matrix of synth captures covering
# every modulation, equaliser kind, tracking mode, payload position and the
# optional fit terms. Used for refactors that must not change behaviour (#14):
#
#   tests/regression/same-reports.sh OLD_BIN NEW_BIN [WORKDIR]
#
# The corpus is made by OLD_BIN's synth; each capture is analysed (--json, with
# --jobs 1 and --jobs 2) and described (info --json) by both binaries, and the
# outputs must be byte-identical. Exit 0 when every output matches.
set -euo pipefail
OLD=$(realpath "$1"); NEW=$(realpath "$2")
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
WORK=${3:-$(mktemp -d)}
mkdir -p "$WORK"
cd "$WORK"

# Shipped samples (profile beside each capture).
cases=()
for c in "$ROOT"/sample-captures/*.profile.json; do
  cap=${c%.profile.json}
  cp "$cap" "$c" . 2>/dev/null || true
  meta=${cap%.*}.sigmf-meta
  [ -f "$meta" ] && cp "$meta" .
  [ -f "$cap.truth.json" ] && cp "$cap.truth.json" .
  cases+=("$(basename "$cap")|$(basename "$c")")
done
cp "$ROOT"/sample-captures/bench-noise-floor.* .

# Synth matrix: name#jq edit of the example profile#synth options
matrix=(
  "bpsk#.payload.modulation=\"bpsk\"#--esn0-db 12 --channel 1.0,0.5,0.2"
  "qpsk-zf#.payload.modulation=\"qpsk\" | .equaliser.kind=\"zf-dfe\"#--esn0-db 14 --channel 0.75,-0.6,0.3"
  "8psk-lin#.payload.modulation=\"8psk\" | .equaliser.kind=\"linear-mmse\" | del(.equaliser.feedback_taps)#--esn0-db 20 --channel 1.0,0.3"
  "16qam-proakis#.#--esn0-db 30 --channel 0.407,0.815,0.407 --bursts 4 --seed 9"
  "16qam-lms#.equaliser.tracking={\"kind\":\"lms\",\"mu\":0.01}#--esn0-db 25 --channel 1.0,0.4-0.2j,0.15 --cfo-hz 300"
  "16qam-rls#.equaliser.tracking={\"kind\":\"rls\",\"lambda\":0.995}#--esn0-db 25 --channel 1.0,0.6-0.2j,0.3"
  "64qam-mid#.payload.modulation=\"64qam\" | .payload.position=\"both\" | del(.payload.length_symbols) | .payload.length_before_symbols=300 | .payload.length_after_symbols=400#--esn0-db 32 --channel 1.0,0.2 --bursts 3"
  "16qam-before#.payload.position=\"before\"#--esn0-db 22 --bursts 3 --cfo-hz -1200"
  "16qam-auto#.channel_fit.pre_cursor_taps=\"auto\" | .channel_fit.post_cursor_taps=\"auto\"#--esn0-db 25 --channel 0.2,1.0,0.5,0.2"
  "16qam-dciq#.channel_fit.dc_offset=true | .channel_fit.iq_imbalance=true#--esn0-db 25 --dc 0.03,-0.02 --iq-gain-db 0.9 --iq-phase-deg 4.5"
  "qpsk-low#.payload.modulation=\"qpsk\"#--esn0-db 6 --channel 0.75,-0.6,0.3 --bursts 6"
  "256qam#.payload.modulation=\"256qam\"#--esn0-db 38 --bursts 2"
  "unknown#del(.payload.known) | del(.limits.ser_max)#--esn0-db 25 --channel 1.0,0.4 --bursts 3"
  "many#.#--esn0-db 25 --bursts 150 --channel 1.0,0.3-0.1j"
)
"$OLD" profile new > base.profile.json
for m in "${matrix[@]}"; do
  IFS='#' read -r name edit opts <<<"$m"
  jq ".capture.format=\"cf32_le\" | $edit" base.profile.json > "$name.profile.json"
  # shellcheck disable=SC2086
  case " $opts " in *" --seed "*) ;; *) opts="$opts --seed 3" ;; esac
  "$OLD" synth --profile "$name.profile.json" --out "$name.cf32" --no-sigmf $opts >/dev/null
  cases+=("$name.cf32|$name.profile.json")
done
# e2e-style capture (its own profile and channel), fewer bursts.
"$OLD" synth --profile "$ROOT/benches/e2e/profile.json" --out e2e.cf32 --bursts 200 --gap 2000:6000 \
  --channel "1.0,0.4-0.2j,0.15" --esn0-db 30 --seed 7 --no-sigmf >/dev/null
cases+=("e2e.cf32|$ROOT/benches/e2e/profile.json")

fail=0; n=0
for c in "${cases[@]}"; do
  IFS='|' read -r cap prof <<<"$c"
  for jobs in 1 2; do
    set +e
    "$OLD" analyse "$cap" --profile "$prof" --json --jobs $jobs > "old.$cap.$jobs.json" 2>"old.$cap.err"; ro=$?
    "$NEW" analyse "$cap" --profile "$prof" --json --jobs $jobs > "new.$cap.$jobs.json" 2>"new.$cap.err"; rn=$?
    set -e
    n=$((n+1))
    if [ $ro -ne $rn ] || ! cmp -s "old.$cap.$jobs.json" "new.$cap.$jobs.json"; then
      echo "DIFFERS: analyse $cap --jobs $jobs (exit $ro vs $rn)"; fail=1
    fi
  done
  "$OLD" info "$cap" --json > "old.$cap.info.json" 2>/dev/null || true
  "$NEW" info "$cap" --json > "new.$cap.info.json" 2>/dev/null || true
  n=$((n+1))
  cmp -s "old.$cap.info.json" "new.$cap.info.json" || { echo "DIFFERS: info $cap"; fail=1; }
done
# Terminal text and plots of a few cases.
for cap in 16qam-proakis.cf32 crane-field-containers.ci16 unknown.cf32; do
  prof=${cap%.cf32}.profile.json; [ -f "$prof" ] || prof=$cap.profile.json
  "$OLD" analyse "$cap" --profile "$prof" --plots "plots-old-$cap" > "old.$cap.txt" 2>&1 || true
  "$NEW" analyse "$cap" --profile "$prof" --plots "plots-new-$cap" > "new.$cap.txt" 2>&1 || true
  n=$((n+1))
  sed "s/plots-old-/plots-X-/g" "old.$cap.txt" | cmp -s - <(sed "s/plots-new-/plots-X-/g" "new.$cap.txt") \
    || { echo "DIFFERS: text of $cap"; fail=1; }
  diff -r "plots-old-$cap" "plots-new-$cap" >/dev/null || { echo "DIFFERS: plots of $cap"; fail=1; }
done
# Recheck of a report written by the new binary.
"$NEW" analyse 16qam-proakis.cf32 --profile 16qam-proakis.profile.json --report r.json >/dev/null 2>&1 || true
"$OLD" recheck r.json > old.recheck.txt 2>&1 || true
"$NEW" recheck r.json > new.recheck.txt 2>&1 || true
n=$((n+1))
cmp -s old.recheck.txt new.recheck.txt || { echo "DIFFERS: recheck"; fail=1; }
echo "$n outputs compared in $WORK: $([ $fail = 0 ] && echo all identical || echo SOME DIFFER)"
exit $fail
