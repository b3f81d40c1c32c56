#!/usr/bin/env bash
# Plan speed: the default demo plant (102 cells) planned over 28 days as the
# baseline, and a 3 000-cell, 30-day demo plant planned over 28 days, in one
# run, reported as times (best of three each) and as a ratio to the baseline.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release -q
bin=${CARGO_TARGET_DIR:-target}/release/tankbook
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
export TANKBOOK_NOW=${TANKBOOK_NOW:-2026-11-20T05:30:00Z}
runs=${RUNS:-3}

# Best wall-clock time of $runs plans of the database $1; the demo is written first.
plan_time() { # name, demo args…
  local name=$1; shift
  "$bin" --db "$dir/$name.db" demo --no-tui "$@" 2>"$dir/$name.log"
  local best=""
  for _ in $(seq "$runs"); do
    local t0 t1 s
    t0=$(date +%s.%N)
    "$bin" --db "$dir/$name.db" plan --days 28 --json >"$dir/$name.json"
    t1=$(date +%s.%N)
    s=$(echo "$t1 - $t0" | bc)
    if [ -z "$best" ] || [ "$(echo "$s < $best" | bc)" = 1 ]; then best=$s; fi
  done
  echo "$best"
}

# What the plan placed, counted by keys only its jobs carry: anode changes
# ("cycle"), harvests ("with_anode_change"), jobs not placed ("kind").
summary() {
  echo "$(grep -c '"cycle"' "$1") anode changes, $(grep -c '"with_anode_change"' "$1") harvests, $(grep -c '"kind"' "$1") not placed"
}

b=$(plan_time baseline)
g=$(plan_time big --cells 3000 --days 30)
echo "baseline (102 cells): plan --days 28 ${b}s  ($(summary "$dir/baseline.json"))"
echo "big (3000 cells):     plan --days 28 ${g}s  ($(summary "$dir/big.json"))"
echo "ratio big/baseline: $(echo "scale=1; $g / $b" | bc)x"
