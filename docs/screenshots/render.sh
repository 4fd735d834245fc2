#!/usr/bin/env bash
# Render the plots index page of a shipped sample in headless Chromium and save
# the screenshots committed beside this script (issue #20). Not run in CI.
#
#   apt-get install chromium      # Debian's package
#   bash docs/screenshots/render.sh
#
# Writes docs/screenshots/crane-fade-*.png (the index page of the faded crane
# capture and its views) and docs/screenshots/bench-noise-floor-info.png.
set -euo pipefail
cd "$(dirname "$0")/../.."
out=docs/screenshots
browser=$(command -v chromium || command -v chromium-browser || true)
if [ -z "$browser" ]; then
  echo "render.sh: chromium not found; install it with 'apt-get install chromium'" >&2
  exit 2
fi
cargo build --release --quiet
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
bin=target/release/iqaudit
# Exit code 1 (a limit failed) is what this capture gives; anything else is an error.
"$bin" analyse sample-captures/crane-fade.ci16 --plots "$work/fade" >/dev/null || [ $? -eq 1 ]
"$bin" info sample-captures/bench-noise-floor.cf32 --plots "$work/floor" >/dev/null
shot() { # url width height file
  # No network: the page is offline, and these flags stop the browser's own
  # background connections (a closed network refuses them, slowly).
  "$browser" --headless --no-sandbox --disable-gpu --hide-scrollbars \
    --disable-quic --no-first-run --disable-background-networking \
    --disable-component-update --disable-sync --user-data-dir="$work/profile" \
    --force-device-scale-factor=1 --window-size="$2,$3" --screenshot="$4" "$1" 2>/dev/null
}
# The top of the page as one screen sees it at 100 % zoom, the whole page in
# one tall picture, and the capture, trend and burst views one by one.
shot "file://$work/fade/index.html" 1400 1000 "$out/crane-fade-index-top.png"
shot "file://$work/fade/index.html" 1400 9000 "$out/crane-fade-index-full.png"
for f in psd power trend burst-2-eye burst-2-taps burst-2-response; do
  shot "file://$work/fade/$f.svg" 1000 1400 "$out/crane-fade-$f.png"
done
shot "file://$work/floor/index.html" 1400 1000 "$out/bench-noise-floor-info.png"
ls -l "$out"/*.png
