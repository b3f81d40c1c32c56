#!/usr/bin/env bash
# Peak memory (max RSS, GNU time's %M) and wall time of every headless command
# on a plant database (issue 11 item 6: <= 100 MB each on the plant-scale demo).
#
#   scripts/bench_memory.sh PLANT.db [TANKBOOK_BINARY]
#
# The database given is never written: the script works on a copy in a
# temporary folder (removed at the end). Needs bash, coreutils and GNU time
# (/usr/bin/time; `apt-get install time`); the layout reload row also needs
# the sqlite3 shell to read the layout text back, and is skipped without it.
# The screens are measured by scripts/bench_memory.sh --tui (needs tmux); KEYS="c"
# picks the views opened, in order (default "p s f c e r"; the peak is cumulative).
set -euo pipefail

tui=0
if [[ "${1:-}" == "--tui" ]]; then
    tui=1
    shift
fi
db=${1:?usage: scripts/bench_memory.sh [--tui] PLANT.db [TANKBOOK_BINARY]}
bin=${2:-target/release/tankbook}
[[ -x /usr/bin/time ]] || { echo "GNU time is missing: apt-get install time" >&2; exit 1; }
[[ -f "$db" ]] || { echo "no database at $db" >&2; exit 1; }
bin=$(readlink -f "$bin")
export TANKBOOK_NOW=${TANKBOOK_NOW:-2026-11-20T05:30:00Z}
export TANKBOOK_BY=MB
unset TANKBOOK_DB

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cp "$db" "$work/plant.db"
for ext in -wal -shm; do [[ -f "$db$ext" ]] && cp "$db$ext" "$work/plant.db$ext"; done
cd "$work"

if [[ $tui == 1 ]]; then
    command -v tmux >/dev/null || { echo "tmux is missing" >&2; exit 1; }
    sock="$work/tmux.sock"
    tmux -S "$sock" new-session -d -x 80 -y 24 "'$bin' --db plant.db; sleep 600"
    sleep 0.5
    pid=$(pgrep -n -f -- "$bin --db plant.db" || true)
    [[ -n "$pid" ]] || { echo "the screens did not start" >&2; tmux -S "$sock" kill-server; exit 1; }
    hwm() { awk '/VmHWM/ {printf "%.1f", $2 / 1024}' "/proc/$pid/status"; }
    # waits until the screen no longer says it is computing (at most 600 s)
    settle() {
        sleep "${TUI_WAIT:-5}"
        for _ in $(seq 600); do
            tmux -S "$sock" capture-pane -p | grep -q -e '…' -e 'Initials' || return 0
            sleep 1
        done
    }
    printf '%-30s %8s\n' "screen" "peak MB"
    sleep "${TUI_WAIT:-5}"
    printf '%-30s %8s\n' "first frame" "$(hwm)"
    # the start asks who is logging the shift
    tmux -S "$sock" send-keys M B Enter
    for key in ${KEYS:-p s f c e r}; do
        tmux -S "$sock" send-keys "$key"
        settle
        printf '%-30s %8s\n' "after key $key ($(tmux -S "$sock" capture-pane -p | awk -F'│' 'NR == 1 {gsub(/ /, "", $2); print $2}'))" "$(hwm)"
        tmux -S "$sock" send-keys Escape
        sleep 1
    done
    tmux -S "$sock" capture-pane -p > screen.txt
    kill "$pid" 2>/dev/null || true
    tmux -S "$sock" kill-server 2>/dev/null || true
    exit 0
fi

printf '%-34s %9s %8s %4s\n' "command" "seconds" "peak MB" "rc"
# run LABEL ARGS...: one line of the table; stdout is thrown away.
run() {
    local label=$1
    shift
    local rc=0
    /usr/bin/time -o time.txt -f "%e %M" "$bin" --db plant.db "$@" > out.txt 2> err.txt || rc=$?
    local secs kb
    read -r secs kb < <(tail -n 1 time.txt)
    printf '%-34s %9s %8s %4s\n' "$label" "$secs" "$(awk -v k="$kb" 'BEGIN {printf "%.1f", k / 1024}')" "$rc"
    if [[ $rc != 0 ]]; then head -n 3 err.txt >&2; fi
}

run "--help" --help
run "forecast" forecast
run "forecast --json" forecast --json
run "forecast --at (30 d back)" forecast --at "$(date -u -d "$TANKBOOK_NOW - 30 days" +%Y-%m-%dT%H:%M:%SZ)"
run "plan --days 28" plan --days 28
run "plan --days 28 --json" plan --days 28 --json
run "patrol" patrol
run "patrol --json" patrol --json
run "backtest" backtest
run "backtest --json" backtest --json
run "balance" balance
run "balance --json" balance --json
run "check" check
run "events" events
run "events --json" events --json
run "events --limit 100000 --json" events --limit 100000 --json
run "backup" backup backup-copy.db
run "backup --list" backup --list
run "report --out" report --out report.html
run "report --shift last --out" report --shift last --out report2.html

# writers, on the copy
cell=$("$bin" --db plant.db events --json --limit 1 | awk -F'"' '/"cell": "/ {print $4; exit}')
circuit=$("$bin" --db plant.db balance | awk 'NR > 2 && $2 ~ /^[0-9]/ {print $1; exit}')
run "log shorts" log shorts --cell "$cell" --at "$TANKBOOK_NOW" --count 1
run "undo" undo
{
    echo "time,circuit,amps"
    for m in 0 1 2 3 4 5 6 7 8 9; do
        echo "$(date -u -d "$TANKBOOK_NOW + $((m + 1)) minutes" +%Y-%m-%dT%H:%M:%SZ),$circuit,30000"
    done
} > small.csv
run "import current (10 rows)" import current small.csv
if command -v sqlite3 >/dev/null; then
    sqlite3 plant.db "SELECT text FROM layout_version ORDER BY id DESC LIMIT 1" > layout.toml
    run "layout load (same layout)" layout load layout.toml
else
    printf '%-34s %s\n' "layout load (same layout)" "skipped: no sqlite3 shell"
fi
if [[ -f backup-copy.db ]]; then
    run "restore (the backup)" restore backup-copy.db
fi
