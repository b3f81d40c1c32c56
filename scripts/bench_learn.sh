#!/usr/bin/env bash
# Learning's cost: the demo write (every weighing relearns its section), the
# forecast, the patrol and the back-test, on the default demo (the baseline)
# and a 3 000-cell, 30-day plant, in one run; each figure also as a ratio to
# the baseline's. Pass BIN=path to time another build (e.g. one from before
# learning: its patrol and back-test columns then read "-").
set -euo pipefail
cd "$(dirname "$0")/.."
if [ -z "${BIN:-}" ]; then
  cargo build --release -q
  BIN=${CARGO_TARGET_DIR:-target}/release/tankbook
fi
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
export TANKBOOK_NOW=${TANKBOOK_NOW:-2026-11-20T05:30:00Z}

secs() { # command… → best wall-clock seconds of three runs ("-" if it fails)
  local best=""
  for _ in 1 2 3; do
    local t0 t1 s
    t0=$(date +%s.%N)
    "$@" >/dev/null 2>&1 || { echo "-"; return; }
    t1=$(date +%s.%N)
    s=$(echo "$t1 - $t0" | bc)
    if [ -z "$best" ] || [ "$(echo "$s < $best" | bc)" = 1 ]; then best=$s; fi
  done
  echo "$best"
}

run() { # name, demo args…
  local name=$1; shift
  local t0 t1
  t0=$(date +%s.%N)
  "$BIN" --db "$dir/$name.db" demo --no-tui "$@" >/dev/null 2>&1
  t1=$(date +%s.%N)
  local demo; demo=$(echo "$t1 - $t0" | bc)
  local f p b
  f=$(secs "$BIN" --db "$dir/$name.db" forecast --json)
  p=$(secs "$BIN" --db "$dir/$name.db" patrol --json)
  b=$(secs "$BIN" --db "$dir/$name.db" backtest --json)
  echo "$demo $f $p $b"
}

ratio() { if [ "$1" = "-" ] || [ "$2" = "-" ]; then echo "-"; else echo "scale=1; $1 / $2" | bc; fi; }

read -r bd bf bp bb <<<"$(run baseline)"
read -r gd gf gp gb <<<"$(run big --cells 3000 --days 30)"
echo "binary: $BIN"
echo "baseline (102 cells, 60 days): demo ${bd}s, forecast ${bf}s, patrol ${bp}s, backtest ${bb}s"
echo "big (3000 cells, 30 days):     demo ${gd}s, forecast ${gf}s, patrol ${gp}s, backtest ${gb}s"
echo "ratio big/baseline: demo $(ratio "$gd" "$bd")x, forecast $(ratio "$gf" "$bf")x, patrol $(ratio "$gp" "$bp")x, backtest $(ratio "$gb" "$bb")x"
