#!/usr/bin/env bash
# Demo build speed: the default demo (the baseline) and a 3 000-cell, 30-day
# plant, in one run, reported as times and as a ratio to the baseline.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release -q
bin=target/release/tankbook
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
export TANKBOOK_NOW=${TANKBOOK_NOW:-2026-11-20T05:30:00Z}

run() { # name, args…
  local name=$1; shift
  local t0 t1
  t0=$(date +%s.%N)
  "$bin" --db "$dir/$name.db" demo --no-tui "$@" 2>"$dir/$name.log"
  t1=$(date +%s.%N)
  local secs; secs=$(echo "$t1 - $t0" | bc)
  local t2 t3
  t2=$(date +%s.%N)
  "$bin" --db "$dir/$name.db" forecast --json >/dev/null
  t3=$(date +%s.%N)
  local fsecs; fsecs=$(echo "$t3 - $t2" | bc)
  echo "$name $secs $fsecs $(cat "$dir/$name.log")"
}

base=$(run baseline)
big=$(run big --cells 3000 --days 30)
b=$(echo "$base" | cut -d' ' -f2); bf=$(echo "$base" | cut -d' ' -f3)
g=$(echo "$big" | cut -d' ' -f2); gf=$(echo "$big" | cut -d' ' -f3)
echo "baseline (102 cells, 60 days): demo ${b}s, forecast ${bf}s"
echo "big (3000 cells, 30 days):     demo ${g}s, forecast ${gf}s"
echo "ratio big/baseline: demo $(echo "scale=1; $g / $b" | bc)x, forecast $(echo "scale=1; $gf / $bf" | bc)x"
echo "$big" | cut -d' ' -f4-
