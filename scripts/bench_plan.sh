#!/usr/bin/env bash
# Plan speed: `plan --days 28 --json` on the default demo (102 cells, the
# baseline) and on a 3 000-cell, 30-day demo, with this tree's binary and, if
# OLD names one, an older binary in the same run (medians of $RUNS, default 5,
# wall clock); then the same with the signed-plan constraints at plant scale
# (more crew, a binding anode supply, whole sections, crane lifts). Each
# plan's JSON is compared byte for byte between the two binaries.
#
# Needs bash, awk, coreutils and sqlite3 (installed with apt-get when missing).
# Honours CARGO_TARGET_DIR.
#
#   OLD=/path/to/old/tankbook BIG_DB=/path/to/big30.db RUNS=5 bash scripts/bench_plan.sh
#
# BIG_DB (optional) is a 3 000-cell demo database made with
# `tankbook --db FILE demo --no-tui --cells 3000 --days 30` under the same
# TANKBOOK_NOW; it is copied, never written. Without it the demo is written first.
set -euo pipefail
cd "$(dirname "$0")/.."
command -v sqlite3 >/dev/null 2>&1 || {
  apt-get install -y -qq sqlite3 >/dev/null 2>&1 || { apt-get update -qq >/dev/null && apt-get install -y -qq sqlite3 >/dev/null; }
}
cargo build --release -q
new=${CARGO_TARGET_DIR:-target}/release/tankbook
old=${OLD:-}
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
export TANKBOOK_NOW=${TANKBOOK_NOW:-2026-11-20T05:30:00Z}
runs=${RUNS:-5}

now_ns() { date +%s%N; }
median() { sort -g | awk '{ v[NR] = $1 } END { if (NR % 2) print v[(NR + 1) / 2]; else print (v[NR / 2] + v[NR / 2 + 1]) / 2 }'; }
secs() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.3f", (b - a) / 1e9 }'; }
ratio() { awk -v a="$1" -v b="$2" 'BEGIN { if (b > 0) printf "%.1f", a / b; else print "-" }'; }

# Median seconds of $runs plans: binary, output file, database, extra plan args…
timed() {
  local bin=$1 out=$2 db=$3; shift 3
  for _ in $(seq "$runs"); do
    local t0 t1
    t0=$(now_ns)
    "$bin" --db "$db" plan --days 28 --json "$@" >"$out"
    t1=$(now_ns)
    secs "$t0" "$t1"
    echo
  done | median
}

echo "machine: $(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg) at the start" >&2
"$new" --db "$dir/base.db" demo --no-tui >/dev/null 2>&1
if [ -n "${BIG_DB:-}" ]; then
  cp "$BIG_DB" "$dir/big.db"
else
  "$new" --db "$dir/big.db" demo --no-tui --cells 3000 --days 30 >/dev/null 2>&1
fi
# The same plant with whole sections, and with a crane budget: its stored
# layout with [plan] keys added, loaded into copies.
layout_with() { # name, [plan] line to add
  cp "$dir/big.db" "$dir/$1.db"
  sqlite3 -readonly "$dir/big.db" "SELECT text FROM layout_version ORDER BY id DESC LIMIT 1" |
    awk -v add="$2" '{ print } /^\[plan\]$/ { print add }' >"$dir/$1.toml"
  "$new" --db "$dir/$1.db" layout load "$dir/$1.toml" >/dev/null
}
layout_with ws "whole_sections = true"
layout_with crane "crane_lifts_per_shift = 40"

printf '%-44s %9s %9s %7s  %s\n' "plan --days 28 --json" "old s" "new s" "old/new" "JSON"
row() { # label, database, extra args…
  local label=$1 db=$2; shift 2
  local n o="-" same="-"
  n=$(timed "$new" "$dir/new.json" "$db" "$@")
  if [ -n "$old" ]; then
    o=$(timed "$old" "$dir/old.json" "$db" "$@")
    if cmp -s "$dir/old.json" "$dir/new.json"; then same=identical; else same=differs; fi
  fi
  printf '%-44s %9s %9s %7s  %s\n' "$label" "$o" "$n" "$(ratio "$o" "$n")" "$same"
}
row "102 cells (baseline)" "$dir/base.db"
row "3000 cells" "$dir/big.db"
row "3000 cells, crew 150" "$dir/big.db" --crew-cells-per-day 150
row "3000 cells, crew 60, anodes 5000 + 3000/day" "$dir/big.db" --crew-cells-per-day 60 --anode-stock 5000 --anodes-per-day 3000
row "3000 cells, whole sections, crew 40" "$dir/ws.db" --crew-cells-per-day 40
row "3000 cells, crane 40 lifts/shift, crew 60" "$dir/crane.db" --crew-cells-per-day 60
