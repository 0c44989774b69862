#!/usr/bin/env bash
# CPU share of `rarefy watch --demo` (release build) drawing into a 120x40
# tmux pane for DURATION seconds of wall time, from utime+stime in
# /proc/<pid>/stat, against baselines measured in the same run:
#   * an idle process (`tail -f /dev/null`) in a second pane, same window;
#   * a busy shell loop for BUSY seconds: what one core gives right now on
#     this (shared) machine. The ratio dashboard/busy is the figure to read.
# The tmux server's own share (it parses what the dashboard writes) is
# reported too.
#
#   bash bench/cpu-watch-demo.sh            # DURATION=30 BUSY=5
#   RAREFY_BIN=path/to/rarefy DURATION=60 bash bench/cpu-watch-demo.sh
set -euo pipefail

DURATION=${DURATION:-30}
BUSY=${BUSY:-5}
here=$(cd "$(dirname "$0")/.." && pwd)
target=${CARGO_TARGET_DIR:-$here/target}
BIN=${RAREFY_BIN:-$target/release/rarefy}

command -v tmux >/dev/null || { echo "tmux is needed" >&2; exit 2; }
if [[ -z ${RAREFY_BIN:-} ]]; then
    (cd "$here" && cargo build --release --quiet --bin rarefy)
fi
[[ -x $BIN ]] || { echo "no binary at $BIN" >&2; exit 2; }

HZ=$(getconf CLK_TCK)
SOCK="rarefy-cpu-$$"
tm() { tmux -L "$SOCK" -f /dev/null "$@"; }
cleanup() { tm kill-server 2>/dev/null || true; }
trap cleanup EXIT

# utime+stime of a pid, in clock ticks (fields 14 and 15; the command name
# in parentheses is skipped first, it may hold spaces).
ticks() { sed 's/^.*) //' "/proc/$1/stat" | awk '{print $12 + $13}'; }
now() { date +%s.%N; }
share() { awk -v d="$1" -v hz="$HZ" -v w="$2" 'BEGIN { printf "%.4f", d / hz / w }'; }

export LANG=C.UTF-8
tm new-session -d -s bench -x 120 -y 40 \
    "exec env TERM=xterm-256color $BIN watch --demo"
tm new-window -d -t bench "exec tail -f /dev/null"
sleep 1
dash_pid=$(tm list-panes -t bench:0 -F '#{pane_pid}')
idle_pid=$(tm list-panes -t bench:1 -F '#{pane_pid}')
server_pid=$(tm display-message -p -t bench '#{pid}')

t0=$(now)
d0=$(ticks "$dash_pid"); i0=$(ticks "$idle_pid"); s0=$(ticks "$server_pid")
sleep "$DURATION"
t1=$(now)
d1=$(ticks "$dash_pid"); i1=$(ticks "$idle_pid"); s1=$(ticks "$server_pid")
wall=$(awk -v a="$t0" -v b="$t1" 'BEGIN { print b - a }')

if ! tm capture-pane -p -t bench:0 | grep -q LIVE; then
    echo "the dashboard was not showing LIVE at the end:" >&2
    tm capture-pane -p -t bench:0 >&2
    exit 1
fi

# One core's worth, now: a busy loop of our own.
bash -c 'while :; do :; done' &
busy_pid=$!
sleep 0.2
b0=$(ticks "$busy_pid"); tb0=$(now)
sleep "$BUSY"
b1=$(ticks "$busy_pid"); tb1=$(now)
kill "$busy_pid"; wait "$busy_pid" 2>/dev/null || true
bwall=$(awk -v a="$tb0" -v b="$tb1" 'BEGIN { print b - a }')

dash=$(share $((d1 - d0)) "$wall")
idle=$(share $((i1 - i0)) "$wall")
server=$(share $((s1 - s0)) "$wall")
busy=$(share $((b1 - b0)) "$bwall")

echo "rarefy watch --demo, 120x40 tmux pane, ${wall%.*} s wall (CLK_TCK $HZ):"
printf '  dashboard          %s of a core (%d ticks)\n' "$dash" $((d1 - d0))
printf '  tmux server        %s of a core (%d ticks)\n' "$server" $((s1 - s0))
printf '  idle baseline      %s of a core (%d ticks)\n' "$idle" $((i1 - i0))
printf '  busy-loop baseline %s of a core (%d ticks over %s s)\n' "$busy" $((b1 - b0)) "${bwall%.*}"
awk -v d="$dash" -v b="$busy" -v i="$idle" 'BEGIN {
    printf "  ratio dashboard / busy loop: %.4f\n", d / b
    if (i > 0) printf "  ratio dashboard / idle: %.1f\n", d / i
    else print "  ratio dashboard / idle: idle used no measurable CPU"
}'
