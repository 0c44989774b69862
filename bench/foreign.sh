#!/usr/bin/env bash
# Another logger's CSV against rarefy's own log: the generated bench log
# (bench/gen) written again as an invented logger's export (three preamble
# lines, `;` between cells, decimal commas, `dd.mm.yyyy hh:mm:ss.fff` times
# in local time without an offset, the pressure in mbar, status words of
# its own) and read through a `[log]` section (bench/foreign.toml). Both
# give the same readings, so the report's time on each shows what reading
# the export costs. Prints the seconds of each, their ratio, and checks
# that both reports count the same rows and statuses.
#
#   bash bench/foreign.sh                 # ROWS=1e6 RUNS=3
#   ROWS=1e5 RUNS=1 bash bench/foreign.sh
#   RAREFY_BIN=target/debug/rarefy ROWS=2e4 RUNS=1 bash bench/foreign.sh   # CI's smoke run
set -euo pipefail
ROWS=${ROWS:-1e6}
RUNS=${RUNS:-3}
here=$(cd "$(dirname "$0")/.." && pwd)
target=${CARGO_TARGET_DIR:-$here/target}
BIN=${RAREFY_BIN:-$target/release/rarefy}
GEN=${RAREFY_GEN:-$target/release/rarefy-bench-gen}
[ -x "$BIN" ] || (cd "$here" && cargo build --release -p rarefy)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
v1="$here/bench/data/log-$ROWS.csv"
if [ ! -s "$v1" ]; then
    [ -x "$GEN" ] || (cd "$here" && cargo build --release -p rarefy-bench-gen)
    mkdir -p "$here/bench/data"
    rows=$(python3 -c "import sys; print(int(float(sys.argv[1])))" "$ROWS")
    "$GEN" --rows "$rows" --out "$v1"
fi
python3 - "$v1" "$work/export.csv" <<'PY'
import sys
src, out = sys.argv[1], sys.argv[2]
words = {"over-range": "HI", "under-range": "LO", "sensor-error": "ERR", "sensor-off": "OFF"}
with open(src) as f, open(out, "w") as o:
    o.write("Quillmere QL-8 export;;\nSite: bench rig B-3;;\nInterval: 0.1 s;;\n")
    o.write("Date/Time;P chamber [mbar];T wall [C]\n")
    for line in f:
        if line.startswith("#") or line.startswith("time"):
            continue
        cells = line.rstrip("\n").split(",")
        if len(cells) != 3:
            o.write(line.replace(",", ";"))  # a cut-off line stays cut off
            continue
        t, p, w = cells
        when = f"{t[8:10]}.{t[5:7]}.{t[0:4]} {t[11:23]}"
        try:
            p = f"{float(p) / 100:.6E}".replace(".", ",")  # Pa -> mbar
        except ValueError:
            p = words.get(p, p)  # a bad cell stays bad
        o.write(f"{when};{p};{w.replace('.', ',')}\n")
PY
size() { stat -c %s "$1"; }
echo "v1 log: $v1 ($(size "$v1") bytes); export: $(size "$work/export.csv") bytes; $RUNS run(s) each"
echo "| run | rarefy log v1 s | export s | export ÷ v1 |"
echo "|---|---:|---:|---:|"
for run in $(seq 1 "$RUNS"); do
    /usr/bin/time -f "%e" -o "$work/t1" "$BIN" report "$v1" --format json \
        > "$work/v1.json" 2> /dev/null
    /usr/bin/time -f "%e" -o "$work/t2" "$BIN" report "$work/export.csv" \
        --config "$here/bench/foreign.toml" --format json > "$work/export.json" 2> /dev/null
    a=$(tail -1 "$work/t1"); b=$(tail -1 "$work/t2")
    python3 -c "import sys; a, b = float(sys.argv[2]), float(sys.argv[3]); print(f'| {sys.argv[1]} | {a:.3f} | {b:.3f} | {b / a:.2f}× |')" "$run" "$a" "$b"
done
python3 - "$work/v1.json" "$work/export.json" <<'PY'
import json, sys
a, b = (json.load(open(p)) for p in sys.argv[1:])
ga = next(g for g in a["gauges"] if g["id"] == "chamber")
gb = next(g for g in b["gauges"] if g["id"] == "chamber")
for key in ("samples", "statuses"):
    if ga.get(key) != gb.get(key):
        sys.exit(f"the reports differ in {key}: {ga.get(key)} vs {gb.get(key)}")
print(f"both reports: {ga['samples']} chamber readings, the same statuses")
PY
