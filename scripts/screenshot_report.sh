#!/usr/bin/env bash
# Writes docs/report-demo.png: report.html of the demo's audit as headless Chromium
# (Debian's chromium) draws it, 1280 px wide, for README.md's tour. Needs build/tamis
# (scripts/setup.sh demo) and chromium (scripts/setup.sh test installs it).
# Usage: scripts/screenshot_report.sh [OUT.png]
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
out="${1:-$here/docs/report-demo.png}"
tamis="$here/build/tamis"
[ -x "$tamis" ] || { echo "screenshot: build tamis first (bash scripts/setup.sh demo)" >&2; exit 2; }
browser="$(command -v chromium || true)"
[ -n "$browser" ] || { echo "screenshot: chromium is not installed (apt-get install chromium)" >&2; exit 2; }
# A fixed folder, so that the page's header names the same ROOT on every run.
work="${TMPDIR:-/tmp}/tamis-screenshot"
rm -rf "$work"
mkdir -p "$work"
trap 'rm -rf "$work"' EXIT
"$tamis" demo "$work/swatches" >/dev/null
# Exit 1 is expected: the demo is built to have problems.
"$tamis" audit "$work/swatches" --out "$work/swatches-audit" --no-cache --quiet || [ $? -eq 1 ]
"$browser" --headless --no-sandbox --disable-gpu --hide-scrollbars --no-first-run --disable-background-networking \
  --disable-component-update --disable-sync --user-data-dir="$work/profile" --window-size=1280,1500 \
  --screenshot="$work/shot.png" "file://$work/swatches-audit/report.html" 2>/dev/null
mv "$work/shot.png" "$out"
echo "screenshot: $out"
