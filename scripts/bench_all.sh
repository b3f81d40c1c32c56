#!/usr/bin/env bash
# Every speed figure of the plant-scale issue in one run, each against its
# baseline measured in the same run: the default demo (102 cells) for the
# forecast, the plan and the demo write; the sqlite3 shell's own `.import` of
# the same CSV into a bare table for the current import. Medians of $RUNS
# (default 5) wall-clock runs; peak RSS (`/usr/bin/time`) of the big plant's
# last run of each command.
#
# The screens (first frame, confirm → frame) are measured by
# benches/screens.rs in a pseudo-terminal on the same databases; their table
# is printed after this one.
#
# Needs only bash, awk, coreutils and what it installs itself (sqlite3 and
# GNU time, with apt-get, when missing). Honours CARGO_TARGET_DIR.
#
# The year-long plant ($YEAR, default 3 000 cells × 365 days of one-minute
# readings) is written once (its time and peak RSS are the demo-write goal),
# then the forecast and the plan are timed on it too: against the 30-day big
# plant they show whether a command grows with the length of the history.
# YEAR= (empty) skips it. The big plant has one-minute readings too by
# default, so the two differ only in the length of their history.
#
#   RUNS=5 BIG="--cells 3000 --days 30 --reading-minutes 1" IMPORT_ROWS=1000000 bash scripts/bench_all.sh
set -euo pipefail
cd "$(dirname "$0")/.."

need() { # command, package
  command -v "$1" >/dev/null 2>&1 || [ -x "$1" ] || {
    echo "installing $2" >&2
    apt-get install -y -qq "$2" >/dev/null 2>&1 || { apt-get update -qq >/dev/null && apt-get install -y -qq "$2" >/dev/null; }
  }
}
need sqlite3 sqlite3
need /usr/bin/time time

cargo build --release -q
bin=${CARGO_TARGET_DIR:-target}/release/tankbook
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
export TANKBOOK_NOW=${TANKBOOK_NOW:-2026-11-20T05:30:00Z}
runs=${RUNS:-5}
big=${BIG:---cells 3000 --days 30 --reading-minutes 1}
rows=${IMPORT_ROWS:-1000000}
year=${YEAR-"--cells 3000 --days 365 --reading-minutes 1"}

now_ns() { date +%s%N; }
# median of the numbers on stdin
median() { sort -g | awk '{ v[NR] = $1 } END { if (NR % 2) print v[(NR + 1) / 2]; else print (v[NR / 2] + v[NR / 2 + 1]) / 2 }'; }
secs() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.3f", (b - a) / 1e9 }'; }
ratio() { awk -v a="$1" -v b="$2" 'BEGIN { if (a > 0) printf "%.2f", b / a; else print "-" }'; }

# Times `$@` $runs times: prints the median seconds; the last run's peak RSS (kB) goes to $dir/rss.
# `$prep` (a command string) runs before each run, untimed.
timed() {
  local prep=$1; shift
  for _ in $(seq "$runs"); do
    eval "$prep"
    local t0 t1
    t0=$(now_ns)
    /usr/bin/time -f %M -o "$dir/rss" "$@" >/dev/null 2>"$dir/err" || { cat "$dir/err" >&2; exit 1; }
    t1=$(now_ns)
    secs "$t0" "$t1"
    echo
  done | median
}
rss_mb() { awk '{ printf "%.0f", $1 / 1024 }' "$dir/rss"; }

echo "machine: $(nproc) cores, $(awk '/MemTotal/ { printf "%.0f GiB", $2 / 1048576 }' /proc/meminfo), load average $(cut -d' ' -f1-3 /proc/loadavg) at the start" >&2

# --- demo write (the databases stay for the forecast and the plan)
demo_base=$(timed "rm -f $dir/base.db*" "$bin" --db "$dir/base.db" demo --no-tui)
# shellcheck disable=SC2086 # $big is a list of arguments
demo_big=$(timed "rm -f $dir/big.db*" "$bin" --db "$dir/big.db" demo --no-tui $big)
rss_demo=$(rss_mb)

# --- forecast and plan on both plants
fc_base=$(timed : "$bin" --db "$dir/base.db" forecast --json)
fc_big=$(timed : "$bin" --db "$dir/big.db" forecast --json)
rss_fc=$(rss_mb)
plan_base=$(timed : "$bin" --db "$dir/base.db" plan --days 28 --json)
plan_big=$(timed : "$bin" --db "$dir/big.db" plan --days 28 --json)
rss_plan=$(rss_mb)

# --- the year-long plant: written once, then the same reads
if [ -n "$year" ]; then
  rm -f "$dir"/year.db*
  t0=$(now_ns)
  # shellcheck disable=SC2086 # $year is a list of arguments
  /usr/bin/time -f %M -o "$dir/rss" "$bin" --db "$dir/year.db" demo --no-tui $year >/dev/null 2>"$dir/err" || { cat "$dir/err" >&2; exit 1; }
  demo_year=$(secs "$t0" "$(now_ns)")
  rss_demo_year=$(rss_mb)
  fc_year=$(timed : "$bin" --db "$dir/year.db" forecast --json)
  rss_fc_year=$(rss_mb)
  plan_year=$(timed : "$bin" --db "$dir/year.db" plan --days 28 --json)
  rss_plan_year=$(rss_mb)
fi

# --- import of $rows one-minute readings of circuit C1 (fixtures/plant_check.toml) against sqlite3's .import
csv=$dir/current.csv
awk -v n="$rows" 'BEGIN {
  print "time,circuit,amps"
  t0 = 1733011200 # 2024-12-01T00:00:00Z: a million minutes end before TANKBOOK_NOW
  srand(7)
  for (i = 0; i < n; i++) {
    s = t0 + 60 * i; d = int(s / 86400); r = s - d * 86400
    # civil date from days since 1970-01-01 (proleptic Gregorian)
    z = d + 719468; era = int(z / 146097); doe = z - era * 146097
    yoe = int((doe - int(doe / 1460) + int(doe / 36524) - int(doe / 146096)) / 365)
    y = yoe + era * 400; doy = doe - (365 * yoe + int(yoe / 4) - int(yoe / 100)); mp = int((5 * doy + 2) / 153)
    dd = doy - int((153 * mp + 2) / 5) + 1; m = mp < 10 ? mp + 3 : mp - 9; if (m <= 2) y++
    printf "%04d-%02d-%02dT%02d:%02d:%02dZ,C1,%d\n", y, m, dd, int(r / 3600), int(r % 3600 / 60), r % 60, 30000 + int(rand() * 300)
  }
}' >"$csv"
"$bin" --db "$dir/imp0.db" layout load fixtures/plant_check.toml >/dev/null
sq_import=$(timed "rm -f $dir/bare.db*; sqlite3 $dir/bare.db 'CREATE TABLE reading(time TEXT, circuit TEXT, amps REAL)'" \
  sqlite3 "$dir/bare.db" ".import --csv --skip 1 $csv reading")
sq_rows=$(sqlite3 "$dir/bare.db" 'SELECT count(*) FROM reading')
tk_import=$(timed "rm -f $dir/imp.db*; cp $dir/imp0.db $dir/imp.db" "$bin" --db "$dir/imp.db" import current "$csv")
rss_import=$(rss_mb)
tk_rows=$(sqlite3 "$dir/imp.db" 'SELECT count(*) FROM reading')
[ "$sq_rows" = "$rows" ] && [ "$tk_rows" = "$rows" ] || { echo "row counts differ: sqlite3 $sq_rows, tankbook $tk_rows, file $rows" >&2; exit 1; }

echo "big plant: demo $big; $(sqlite3 "$dir/big.db" 'SELECT count(*) FROM reading') readings, $(sqlite3 "$dir/big.db" 'SELECT count(*) FROM event') entries" >&2
echo "load average $(cut -d' ' -f1-3 /proc/loadavg) at the end; medians of $runs runs" >&2
echo
echo "| what | baseline | big plant | ratio | peak RSS (big) |"
echo "|---|---|---|---|---|"
echo "| \`demo\` write | ${demo_base} s (102 cells) | ${demo_big} s | $(ratio "$demo_base" "$demo_big")× | ${rss_demo} MB |"
echo "| \`forecast --json\` | ${fc_base} s | ${fc_big} s | $(ratio "$fc_base" "$fc_big")× | ${rss_fc} MB |"
echo "| \`plan --days 28 --json\` | ${plan_base} s | ${plan_big} s | $(ratio "$plan_base" "$plan_big")× | ${rss_plan} MB |"
echo "| import $rows readings | ${sq_import} s (sqlite3 \`.import\`, bare table) | ${tk_import} s (\`import current\`) | $(ratio "$sq_import" "$tk_import")× | ${rss_import} MB |"
if [ -n "$year" ]; then
  echo "| \`demo\` write, year plant ($year), once | ${demo_base} s (102 cells) | ${demo_year} s | $(ratio "$demo_base" "$demo_year")× | ${rss_demo_year} MB |"
  echo "| \`forecast --json\`, year plant vs big plant | ${fc_big} s | ${fc_year} s | $(ratio "$fc_big" "$fc_year")× | ${rss_fc_year} MB |"
  echo "| \`plan --days 28 --json\`, year plant vs big plant | ${plan_big} s | ${plan_year} s | $(ratio "$plan_big" "$plan_year")× | ${rss_plan_year} MB |"
fi
echo
BASE_DB=$dir/base.db BIG_DB=$dir/big.db RUNS=$runs cargo bench -q --bench screens 2>/dev/null
if [ -n "$year" ]; then
  echo
  BASE_DB=$dir/base.db BIG_DB=$dir/year.db RUNS=$runs cargo bench -q --bench screens 2>/dev/null
fi
