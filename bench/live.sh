#!/usr/bin/env bash
# The live path at full speed: N lines of an invented two-gauge readout
# (device time, two values with status words) piped into `rarefy record`
# through a line template (bench/live.toml): template parse -> engine ->
# alarms -> recorder, writing the log and the event log. Prints samples/s
# (two per line), and rows lost and unwritten from the recorder's summary:
# the target is >= 100 000 samples/s on one core with zero loss. A pipe
# blocks the writer when rarefy is behind, so every line is offered; the
# recorder's own queue waits rather than drops, and says so if it ever did.
#
#   bash bench/live.sh            # LINES=500000 RUNS=3
#   LINES=2000000 bash bench/live.sh
set -euo pipefail
LINES=${LINES:-500000}
RUNS=${RUNS:-3}
here=$(cd "$(dirname "$0")/.." && pwd)
target=${CARGO_TARGET_DIR:-$here/target}
BIN=${RAREFY_BIN:-$target/release/rarefy}
[ -x "$BIN" ] || (cd "$here" && cargo build --release -p rarefy)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
python3 - "$LINES" "$work/lines.txt" <<'PY'
import sys, datetime
n, out = int(sys.argv[1]), sys.argv[2]
t0 = datetime.datetime(2026, 1, 1)
with open(out, "w") as f:
    for i in range(n):
        t = t0 + datetime.timedelta(milliseconds=100 * i)
        p = 1e-5 * (1 + 0.01 * (i % 7))
        f.write(f"{t:%Y-%m-%dT%H:%M:%S}.{t.microsecond // 1000:03d}Z VX G1 +{p:.2E} GOOD G2 +1.20E-02 GOOD\n")
PY
echo "| run | s | CPU s | samples/s | samples/s per CPU s | rows | lost | unwritten | peak RSS MiB |"
echo "|---|---|---|---|---|---|---|---|---|"
for run in $(seq 1 "$RUNS"); do
    rm -rf "$work/out"
    /usr/bin/time -f "%e %U %S %M" -o "$work/time" \
        "$BIN" record -c "$here/bench/live.toml" --out "$work/out" \
        < "$work/lines.txt" > "$work/events.jsonl" 2> "$work/err"
    read -r wall user sys rss < "$work/time"
    summary=$(grep '"event":"summary"' "$work/events.jsonl")
    python3 - "$run" "$wall" "$user" "$sys" "$rss" "$summary" "$LINES" <<'PY'
import json, sys
run, wall, user, sys_s, rss, summary, lines = sys.argv[1:]
s = json.loads(summary)
wall, cpu = float(wall), float(user) + float(sys_s)
samples = s["samples"]
ok = s["rows"] == int(lines) and s["rows_lost"] == 0 and s["rows_unwritten"] == 0
print(f"| {run} | {wall:.2f} | {cpu:.2f} | {samples / wall:,.0f} | {samples / cpu:,.0f} | "
      f"{s['rows']} | {s['rows_lost']} | {s['rows_unwritten']} | {int(rss) / 1024:.1f} |")
if not ok:
    sys.exit(f"rows lost or missing: {s}")
PY
done
