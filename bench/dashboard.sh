#!/usr/bin/env bash
# The dashboard (release build) in a 120x40 tmux pane: CPU share, bytes
# written to the terminal per second, and resident memory.
#
# Scenarios (each in a tmux server of its own):
#   steady   `watch --demo --source 'sim:demo?rate=1&interval=100ms'`:
#            a steady 10 rows/s, data time = wall time (the targets' case);
#   demo     `watch --demo` as shipped: 40 rows/s of 1 s steps (data time
#            40x wall time, so the trend moves 40x faster);
#   week     `--source 'sim:demo?rate=max&interval=100ms&duration=7 d'`:
#            a week of 10 Hz rows in data time, as fast as the dashboard
#            takes them; resident memory sampled along the way.
#
# For steady and demo, over DURATION seconds of wall time after WARM
# seconds of start-up:
#   * CPU: utime+stime from /proc/<pid>/stat, against baselines measured in
#     the same run: an idle process in a second pane, and a busy shell loop
#     for BUSY seconds (what one core gives right now on this shared
#     machine; dashboard/busy is the figure to read). The tmux server's
#     share (it parses what the dashboard writes) is shown too;
#   * bytes: the pane's output logged with `tmux pipe-pane -o`, counted;
#   * memory: VmRSS at the start and the end, and VmHWM (the peak).
#
#   bash bench/dashboard.sh                      # all three
#   SCENARIOS="steady" DURATION=60 bash bench/dashboard.sh
#   RAREFY_BIN=path/to/rarefy bash bench/dashboard.sh
set -euo pipefail

DURATION=${DURATION:-30}
WARM=${WARM:-3}
BUSY=${BUSY:-5}
WEEK_LIMIT=${WEEK_LIMIT:-600}     # s of wall time the week may take at most
SCENARIOS=${SCENARIOS:-"steady demo week"}
here=$(cd "$(dirname "$0")/.." && pwd)
target=${CARGO_TARGET_DIR:-$here/target}
BIN=${RAREFY_BIN:-$target/release/rarefy}

command -v tmux >/dev/null || { echo "tmux is needed" >&2; exit 2; }
if [[ -z ${RAREFY_BIN:-} ]]; then
    (cd "$here" && cargo build --release --quiet --bin rarefy)
fi
[[ -x $BIN ]] || { echo "no binary at $BIN" >&2; exit 2; }

HZ=$(getconf CLK_TCK)
SOCK="rarefy-dash-$$"
work=$(mktemp -d)
tm() { tmux -L "$SOCK" -f /dev/null "$@"; }
cleanup() {
    tm kill-server 2>/dev/null || true
    rm -rf "$work"
}
trap cleanup EXIT

# utime+stime of a pid, in clock ticks (fields 14 and 15; the command name
# in parentheses is skipped first, it may hold spaces).
ticks() { sed 's/^.*) //' "/proc/$1/stat" | awk '{print $12 + $13}'; }
# A field of /proc/<pid>/status, in KiB.
kib() { awk -v k="$2:" '$1 == k { print $2 }' "/proc/$1/status"; }
now() { date +%s.%N; }
share() { awk -v d="$1" -v hz="$HZ" -v w="$2" 'BEGIN { printf "%.4f", d / hz / w }'; }
elapsed() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.2f", b - a }'; }

export LANG=C.UTF-8

# Starts the dashboard with `$1` (extra arguments) in a fresh server; an
# idle pane beside it.
start() {
    tm kill-server 2>/dev/null || true
    tm new-session -d -s bench -x 120 -y 40 \
        "exec env TERM=xterm-256color $BIN watch --demo $1"
    tm new-window -d -t bench "exec tail -f /dev/null"
    dash_pid=$(tm list-panes -t bench:0 -F '#{pane_pid}')
    idle_pid=$(tm list-panes -t bench:1 -F '#{pane_pid}')
    server_pid=$(tm display-message -p -t bench '#{pid}')
}

busy_share() {
    bash -c 'while :; do :; done' &
    local pid=$!
    sleep 0.2
    local b0 b1 t0 t1
    b0=$(ticks "$pid"); t0=$(now)
    sleep "$BUSY"
    b1=$(ticks "$pid"); t1=$(now)
    kill "$pid"; wait "$pid" 2>/dev/null || true
    share $((b1 - b0)) "$(elapsed "$t0" "$t1")"
}

# CPU, bytes and memory of one steady scenario.
steady_run() {
    local name=$1 args=$2 log="$work/$1.out"
    start "$args"
    sleep "$WARM"
    : > "$log"
    tm pipe-pane -o -t bench:0 "cat >> '$log'"
    local t0 t1 d0 d1 i0 i1 s0 s1 rss0 rss1 hwm wall
    t0=$(now)
    d0=$(ticks "$dash_pid"); i0=$(ticks "$idle_pid"); s0=$(ticks "$server_pid")
    rss0=$(kib "$dash_pid" VmRSS)
    sleep "$DURATION"
    t1=$(now)
    d1=$(ticks "$dash_pid"); i1=$(ticks "$idle_pid"); s1=$(ticks "$server_pid")
    rss1=$(kib "$dash_pid" VmRSS); hwm=$(kib "$dash_pid" VmHWM)
    tm pipe-pane -t bench:0
    sleep 0.5
    wall=$(elapsed "$t0" "$t1")
    local screen
    screen=$(tm capture-pane -p -t bench:0)
    if ! grep -q LIVE <<<"$screen"; then
        echo "$name: the dashboard was not showing LIVE at the end:" >&2
        echo "$screen" >&2
        exit 1
    fi
    local bytes rate
    bytes=$(stat -c %s "$log")
    rate=$(grep -o '[0-9.]* rows/s' <<<"$screen" | head -1 || true)
    tm kill-server
    local busy
    busy=$(busy_share)
    local dash idle server
    dash=$(share $((d1 - d0)) "$wall")
    idle=$(share $((i1 - i0)) "$wall")
    server=$(share $((s1 - s0)) "$wall")
    echo "$name: rarefy watch --demo $args"
    echo "  120x40 tmux pane, $wall s wall after $WARM s start-up; input ${rate:-?}"
    printf '  CPU dashboard          %s of a core (%d ticks at %d/s)\n' "$dash" $((d1 - d0)) "$HZ"
    printf '  CPU tmux server        %s of a core\n' "$server"
    printf '  CPU idle baseline      %s of a core\n' "$idle"
    printf '  CPU busy-loop baseline %s of a core (%s s)\n' "$busy" "$BUSY"
    awk -v d="$dash" -v b="$busy" 'BEGIN { printf "  CPU dashboard / busy loop: %.4f (target <= 0.02)\n", d / b }'
    awk -v n="$bytes" -v w="$wall" 'BEGIN {
        printf "  terminal output        %d B in all, %.0f B/s (target <= 4096 B/s)\n", n, n / w
    }'
    printf '  memory                 VmRSS %s KiB at the start, %s KiB at the end; peak VmHWM %s KiB\n' \
        "$rss0" "$rss1" "$hwm"
    echo
}

# A week of 10 Hz rows in data time: memory along the way, and whether
# the screen keeps up (the data time it shows is read every second; the
# longest stretch without a change is a freeze of the display).
week_run() {
    local args="--source 'sim:demo?rate=max&interval=100ms&duration=7 d'"
    start "$args"
    local t0 t n=0
    t0=$(now)
    echo "week: rarefy watch --demo $args"
    echo "  wall s   data time shown            VmRSS KiB  VmHWM KiB"
    local ended=0 shown="" last="" since frozen=0 longest=0
    since=$t0
    while :; do
        sleep 1
        n=$((n + 1))
        t=$(elapsed "$t0" "$(now)")
        [[ -d /proc/$dash_pid ]] || { echo "  the dashboard ended" >&2; exit 1; }
        local screen
        screen=$(tm capture-pane -p -t bench:0)
        shown=$(grep -o '[0-9]\{4\}-[0-9-]* [0-9:]* UTC' <<<"$screen" | head -1 || true)
        if [[ -n $shown && $shown != "$last" ]]; then
            last=$shown
            since=$(now)
        else
            frozen=$(elapsed "$since" "$(now)")
            longest=$(awk -v a="$frozen" -v b="$longest" 'BEGIN { print (a > b) ? a : b }')
        fi
        if ((n % 5 == 0)) || grep -q "all sources ended" <<<"$screen"; then
            printf '  %6s   %-25s  %9s  %9s\n' "$t" "${shown:--}" \
                "$(kib "$dash_pid" VmRSS)" "$(kib "$dash_pid" VmHWM)"
        fi
        if grep -q "all sources ended" <<<"$screen"; then
            ended=1
            break
        fi
        if awk -v t="$t" -v l="$WEEK_LIMIT" 'BEGIN { exit !(t > l) }'; then
            break
        fi
    done
    local dticks
    dticks=$(ticks "$dash_pid")
    if ((ended)); then
        echo "  the week was fed in $t s of wall time ($(share "$dticks" 1 | awk '{printf "%.1f", $1}') s of CPU)"
    else
        echo "  stopped after WEEK_LIMIT=$WEEK_LIMIT s before the week's end"
    fi
    echo "  longest time the shown data time stood still: $longest s"
    tm kill-server
    echo
}

for s in $SCENARIOS; do
    case $s in
        steady) steady_run steady "--source 'sim:demo?rate=1&interval=100ms'" ;;
        demo) steady_run demo "" ;;
        week) week_run ;;
        *) echo "unknown scenario $s" >&2; exit 2 ;;
    esac
done
