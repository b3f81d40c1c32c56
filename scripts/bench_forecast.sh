#!/usr/bin/env bash
# The forecast against the length of the history (issue 11 item 1): medians of
# $RUNS `forecast --json` runs of an old binary ($BASE) and this one, each on a
# copy of a short-history and a long-history plant database, in the same run,
# with the long/short ratio (goal: within 20 %) and the new/old ratio. Each
# binary gets its own copies (a newer one migrates them); one untimed run first.
# Checks that both binaries print the same forecast on both plants.
#
#   BASE=path/to/old/tankbook SHORT=big30.db LONG=big120.db RUNS=5 bash scripts/bench_forecast.sh
#
# Without SHORT/LONG it writes the demo plants (--cells $CELLS, default 3000,
# --days $SHORT_DAYS / $LONG_DAYS, default 30 / 120: minutes each) with $BASE.
# Needs bash, awk, coreutils and GNU time (installed with apt-get when missing).
set -euo pipefail
cd "$(dirname "$0")/.."
command -v /usr/bin/time >/dev/null 2>&1 || apt-get install -y -qq time >/dev/null
cargo build --release -q
new=$(realpath "${CARGO_TARGET_DIR:-target}/release/tankbook")
base=$(realpath "${BASE:?BASE=path of the old tankbook binary}")
runs=${RUNS:-5}
export TANKBOOK_NOW=${TANKBOOK_NOW:-2026-11-20T05:30:00Z}
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
cells=${CELLS:-3000}
for which in SHORT LONG; do
  if [ -z "${!which:-}" ]; then
    days_var=${which}_DAYS
    days=${!days_var:-$([ $which = SHORT ] && echo 30 || echo 120)}
    echo "writing the $days-day demo plant ($cells cells)" >&2
    "$base" --db "$dir/$which.db" demo --no-tui --cells "$cells" --days "$days" >&2
    declare "$which=$dir/$which.db"
  fi
done

now_ns() { date +%s%N; }
median() { sort -g | awk '{ v[NR] = $1 } END { if (NR % 2) print v[(NR + 1) / 2]; else print (v[NR / 2] + v[NR / 2 + 1]) / 2 }'; }
ratio() { awk -v a="$1" -v b="$2" 'BEGIN { if (a > 0) printf "%.2f", b / a; else print "-" }'; }

# median wall seconds of `forecast --json` of binary $1 on database $2; the
# median CPU seconds (user + system: steadier on a shared machine) in $dir/cpu,
# the last run's peak RSS (kB) in $dir/rss
timed() {
  "$1" --db "$2" forecast --json >"$dir/out" # untimed: migrates a copy for a newer binary, warms the cache
  : >"$dir/cpus"
  for _ in $(seq "$runs"); do
    local t0 t1
    t0=$(now_ns)
    /usr/bin/time -f "%M %U %S" -o "$dir/time" "$1" --db "$2" forecast --json >/dev/null
    t1=$(now_ns)
    awk '{ print $1 > "'"$dir/rss"'"; print $2 + $3 >> "'"$dir/cpus"'" }' "$dir/time"
    awk -v a="$t0" -v b="$t1" 'BEGIN { printf "%.3f\n", (b - a) / 1e9 }'
  done | median
  median <"$dir/cpus" >"$dir/cpu"
}

declare -A fig rss cpu
for b in base new; do
  for which in SHORT LONG; do
    cp "${!which}" "$dir/$b-$which.db"
    bin=$base; [ $b = new ] && bin=$new
    fig[$b-$which]=$(timed "$bin" "$dir/$b-$which.db")
    rss[$b-$which]=$(awk '{ printf "%.0f", $1 / 1024 }' "$dir/rss")
    cpu[$b-$which]=$(cat "$dir/cpu")
    cp "$dir/out" "$dir/$b-$which.json"
  done
done
for which in SHORT LONG; do
  cmp -s "$dir/base-$which.json" "$dir/new-$which.json" || { echo "the forecasts on $which differ between the binaries" >&2; exit 1; }
done
echo "$(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg) at the end; medians of $runs runs; the forecasts of both binaries are identical" >&2
echo
echo "| forecast --json: wall (CPU, peak RSS) | short history | long history | long / short, wall (CPU) |"
echo "|---|---|---|---|"
for b in base new; do
  echo "| $b | ${fig[$b-SHORT]} s (${cpu[$b-SHORT]} s, ${rss[$b-SHORT]} MB) | ${fig[$b-LONG]} s (${cpu[$b-LONG]} s, ${rss[$b-LONG]} MB) |" \
    "$(ratio "${fig[$b-SHORT]}" "${fig[$b-LONG]}")× ($(ratio "${cpu[$b-SHORT]}" "${cpu[$b-LONG]}")×) |"
done
echo "| new / base, wall (CPU) | $(ratio "${fig[base-SHORT]}" "${fig[new-SHORT]}")× ($(ratio "${cpu[base-SHORT]}" "${cpu[new-SHORT]}")×) |" \
  "$(ratio "${fig[base-LONG]}" "${fig[new-LONG]}")× ($(ratio "${cpu[base-LONG]}" "${cpu[new-LONG]}")×) | |"
