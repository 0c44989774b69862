#!/usr/bin/env bash
# The benchmark in one command: builds rarefy and the log generator
# (release), generates the log (bench/data/, kept between runs), sets up the
# peers' venv (bench/.venv, pinned bench/requirements.txt), checks that the
# peers agree with rarefy, then times rarefy, the peers, cat and wc -l and
# prints the table and the targets (bench/run.py).
#
#   bash bench/run.sh                      # 1e6 rows, 3 runs each
#   bash bench/run.sh --rows 1e7 --runs 5
#   bash bench/run.sh --smoke              # 2e4 rows, 1 run, debug build;
#                                          # peers only if bench/.venv exists
#   bash bench/run.sh --no-peers           # rarefy, cat and wc -l only
#   bash bench/run.sh --keep               # keep the last run's outputs
#
# Environment: PYTHON (default python3) makes the venv; CARGO_TARGET_DIR is
# honoured.
set -euo pipefail

here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/.." && pwd)
target=${CARGO_TARGET_DIR:-$root/target}
rows=1e6
runs=3
smoke=0
peers=1
check=1
json=""
keep=0

usage() { sed -n '2,17p' "$0" | sed 's/^# \{0,1\}//'; }
while [[ $# -gt 0 ]]; do
    case $1 in
        --rows) rows=$2; shift 2 ;;
        --runs) runs=$2; shift 2 ;;
        --smoke) smoke=1; shift ;;
        --no-peers) peers=0; shift ;;
        --no-check) check=0; shift ;;
        --json) json=$2; shift 2 ;;
        --keep) keep=1; shift ;;
        -h|--help) usage; exit 0 ;;
        *) echo "run.sh: unknown argument $1" >&2; usage >&2; exit 2 ;;
    esac
done
if [[ $smoke == 1 ]]; then
    rows=2e4
    runs=1
fi
# 1e6 -> 1000000, for the file name and rows/s.
count=$(python3 -c "import sys; v = float(sys.argv[1]); assert v > 0 and v == int(v); print(int(v))" "$rows") || {
    echo "run.sh: --rows $rows: expected a whole number such as 1e6" >&2
    exit 2
}

cd "$root"
if [[ $smoke == 1 ]]; then
    profile=debug
    cargo build --quiet -p rarefy -p rarefy-bench-gen
else
    profile=release
    cargo build --release --quiet -p rarefy -p rarefy-bench-gen
fi
bin=$target/$profile

log=$here/data/log-$rows.csv
if [[ ! -s $log ]]; then
    echo "generating $log"
    "$bin/rarefy-bench-gen" --rows "$count" --out "$log"
fi

py=""
venv=$here/.venv
if [[ $peers == 1 ]]; then
    if [[ $smoke == 1 && ! -x $venv/bin/python ]]; then
        echo "smoke run: no $venv, so no peers"
    else
        stamp=$venv/.requirements
        if [[ ! -x $venv/bin/python ]] || ! cmp -s "$here/requirements.txt" "$stamp"; then
            echo "setting up $venv"
            "${PYTHON:-python3}" -m venv "$venv" || {
                # Debian's python3 ships venv separately.
                apt-get update -qq && apt-get install -y -qq python3-venv
                "${PYTHON:-python3}" -m venv "$venv"
            }
            "$venv/bin/pip" install --quiet --disable-pip-version-check -r "$here/requirements.txt"
            cp "$here/requirements.txt" "$stamp"
        fi
        py=$venv/bin/python
    fi
fi

runner=${py:-python3}
exec "$runner" "$here/run.py" "$log" --rarefy "$bin/rarefy" --rows "$count" --runs "$runs" \
    ${py:+--python "$py"} ${json:+--json "$json"} $([[ $check == 0 ]] && echo --no-check) \
    $([[ $keep == 1 ]] && echo --keep)
