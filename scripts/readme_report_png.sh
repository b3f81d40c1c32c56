#!/usr/bin/env bash
# Remakes the README's picture of the shift report (fixtures/readme/report.png):
# the demo plant at a fixed clock, its shift report, and a screenshot of it by the
# same headless chromium the browser test uses (apt-get install -y chromium).
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build -q
bin=${CARGO_TARGET_DIR:-target}/debug/tankbook
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
export TANKBOOK_NOW=${TANKBOOK_NOW:-2026-03-10T14:30:00Z}
"$bin" --db "$dir/demo.db" demo --no-tui 2>/dev/null
"$bin" --db "$dir/demo.db" report --out "$dir/shift.html"
mkdir -p fixtures/readme
chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run --disable-background-networking \
  --disable-component-update --disable-sync --hide-scrollbars --user-data-dir="$dir/profile" \
  --window-size=900,1250 --screenshot="$PWD/fixtures/readme/report.png" "file://$dir/shift.html" 2>/dev/null
echo "wrote fixtures/readme/report.png"
