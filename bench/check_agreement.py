#!/usr/bin/env python3
"""Checks that the peers (bench/peers/) give rarefy's numbers on a log:
the summary of `rarefy report --gauge chamber --format json` against each
peer's JSON, and rarefy's derived CSV against each peer's --csv, every row.

    bench/.venv/bin/python bench/check_agreement.py bench/data/log-1e6.csv \
        [--rarefy target/release/rarefy] [--peers pandas,polars,duckdb]

Exits 1 when anything disagrees. Tolerances: counts, statuses, times of
the first reading, last reading and first crossings exact; min/max/mean
and every derived number relative 1e-9; seconds in a range, regime, gap or
without pressure absolute 1e-3 s.

`compare_summary` and `compare_csv` are also used by bench/run.py.
"""

import argparse
import json
import math
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
CONFIG = HERE / "bench.toml"
PEERS = ["pandas", "polars", "duckdb"]
GAUGE = "chamber"
REL = 1e-9
ABS_S = 1e-3


def rarefy_args(rarefy, log, fmt, out=None):
    cmd = [str(rarefy), "report", str(log), "--config", str(CONFIG), "--gauge", GAUGE, "--format", fmt]
    if out is not None:
        cmd += ["--out", str(out)]
    return cmd


def peer_args(python, peer, log, csv=None):
    cmd = [str(python), str(HERE / "peers" / f"{peer}_report.py"), str(log)]
    if csv is not None:
        cmd += ["--csv", str(csv)]
    return cmd


def close(a, b, rel=REL):
    if a is None or b is None:
        return a is None and b is None
    return a == b or abs(a - b) <= rel * max(abs(a), abs(b))


class Report:
    def __init__(self, name):
        self.name = name
        self.problems = []
        self.notes = []

    def check(self, ok, what):
        if not ok:
            self.problems.append(what)


def compare_summary(rarefy_doc, peer, name):
    """rarefy's JSON document (the whole report) against a peer's summary."""
    r = Report(name)
    gauges = [g for g in rarefy_doc.get("gauges", []) if g.get("id") == GAUGE]
    if not gauges:
        r.problems.append(f"rarefy's report has no gauge {GAUGE!r}")
        return r
    g = gauges[0]
    r.check(rarefy_doc["rows"] == peer["rows"], f"rows: rarefy {rarefy_doc['rows']}, {name} {peer['rows']}")
    for key in ["samples", "start", "end", "gap_count"]:
        r.check(g[key] == peer[key], f"{key}: rarefy {g[key]!r}, {name} {peer[key]!r}")
    r.check(g["statuses"] == peer["statuses"], f"statuses: rarefy {g['statuses']}, {name} {peer['statuses']}")
    for key in ["min_pa", "max_pa", "gap_after_s"]:
        r.check(close(g[key], peer[key]), f"{key}: rarefy {g[key]!r}, {name} {peer[key]!r}")
    if "mean_pa" in g:
        r.check(close(g["mean_pa"], peer["mean_pa"]), f"mean_pa: rarefy {g['mean_pa']!r}, {name} {peer['mean_pa']!r}")
    else:
        r.notes.append("rarefy's report has no mean_pa yet: the mean is not compared")
    for key in ["duration_s", "time_without_pressure_s", "gap_s"]:
        r.check(abs(g[key] - peer[key]) <= ABS_S, f"{key}: rarefy {g[key]!r}, {name} {peer[key]!r}")
    for rng, s in g["time_in_range_s"].items():
        v = peer["time_in_range_s"].get(rng)
        r.check(v is not None and abs(s - v) <= ABS_S, f"time in range {rng}: rarefy {s!r}, {name} {v!r}")
    for length, m in g["time_in_regime_s"].items():
        pm = peer["time_in_regime_s"].get(length, {})
        for regime, s in m.items():
            v = pm.get(regime)
            r.check(
                v is not None and abs(s - v) <= ABS_S,
                f"time in regime {regime} ({length}): rarefy {s!r}, {name} {v!r}",
            )
    r.check(
        set(g["time_in_regime_s"]) == set(peer["time_in_regime_s"]),
        f"lengths: rarefy {sorted(g['time_in_regime_s'])}, {name} {sorted(peer['time_in_regime_s'])}",
    )
    for t in g["thresholds"]:
        key = f"{t['pa']:g}"
        v = peer["first_below"].get(key, "missing")
        r.check(v == t["first_below"], f"first below {key} Pa: rarefy {t['first_below']!r}, {name} {v!r}")
    r.check(
        len(g["thresholds"]) == len(peer["first_below"]),
        f"thresholds: rarefy {len(g['thresholds'])}, {name} {len(peer['first_below'])}",
    )
    return r


def compare_csv(rarefy_csv, peer_csv, name):
    """Every row of rarefy's derived CSV against a peer's: same header, same
    number of rows; times as instants; words exact; numbers relative 1e-9."""
    import polars as pl

    r = Report(name)

    def load(path):
        head = Path(path).open(encoding="utf-8").readline().rstrip("\r\n").split(",")
        df = pl.read_csv(path, infer_schema=False)
        return head, df

    rh, rd = load(rarefy_csv)
    ph, pd_ = load(peer_csv)
    if rh != ph:
        r.problems.append(f"CSV header: rarefy {rh}, {name} {ph}")
        return r
    if rd.height != pd_.height:
        r.problems.append(f"CSV rows: rarefy {rd.height}, {name} {pd_.height}")
        return r
    when = pl.col("time").str.to_datetime("%Y-%m-%dT%H:%M:%S%.fZ", time_unit="us", time_zone="UTC", strict=False)
    words = ["gauge", "status", "regime chamber bore", "range"]
    numbers = [c for c in rh if c not in words and c != "time"]
    a = rd.select(when.alias("time"), *[pl.col(c) for c in words], *[pl.col(c).cast(pl.Float64) for c in numbers])
    b = pd_.select(when.alias("time"), *[pl.col(c) for c in words], *[pl.col(c).cast(pl.Float64) for c in numbers])
    bad_time = (a["time"].is_null() | (a["time"] != b["time"]).fill_null(True)).sum()
    r.check(bad_time == 0, f"CSV time: {bad_time} rows differ")
    for col in words:
        x, y = a[col], b[col]
        differ = ((x != y).fill_null(True) & ~(x.is_null() & y.is_null())).sum()
        r.check(differ == 0, f"CSV {col}: {differ} rows differ")
    both = pl.concat([a.select(numbers), b.select(numbers).rename({c: c + " (peer)" for c in numbers})], how="horizontal")
    for col in numbers:
        x, y = pl.col(col), pl.col(col + " (peer)")
        tol = pl.max_horizontal(x.abs(), y.abs()) * REL
        ok = ((x == y) | ((x - y).abs() <= tol)).fill_null(False) | (x.is_null() & y.is_null())
        flags = both.select(ok.alias("ok"))["ok"]
        differ = int((~flags).sum())
        if differ:
            i = int((~flags).arg_max())
            r.problems.append(
                f"CSV {col}: {differ} rows differ, e.g. row {i + 2}: rarefy {a[col][i]!r}, {name} {b[col][i]!r}"
            )
    r.notes.append(f"CSV: {rd.height} rows compared")
    return r


def show(reports):
    ok = True
    for r in reports:
        for n in r.notes:
            print(f"  {r.name}: note: {n}")
        if r.problems:
            ok = False
            for p in r.problems:
                print(f"  {r.name}: DISAGREES: {p}")
        else:
            print(f"  {r.name}: agrees")
    return ok


def run(cmd, stdout=None):
    res = subprocess.run(cmd, stdout=subprocess.PIPE if stdout is None else stdout, stderr=subprocess.PIPE, text=True)
    if res.returncode != 0:
        sys.exit(f"{' '.join(cmd)} failed ({res.returncode}):\n{res.stderr}")
    return res.stdout


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("log")
    ap.add_argument("--rarefy", default=ROOT / "target" / "release" / "rarefy")
    ap.add_argument("--peers", default=",".join(PEERS))
    ap.add_argument("--python", default=sys.executable, help="the Python with the peers' packages")
    args = ap.parse_args()
    peers = [p for p in args.peers.split(",") if p]
    with tempfile.TemporaryDirectory(prefix="rarefy-agree-") as tmp:
        tmp = Path(tmp)
        doc = json.loads(run(rarefy_args(args.rarefy, args.log, "json")))
        run(rarefy_args(args.rarefy, args.log, "csv", tmp / "rarefy.csv"))
        reports = []
        for p in peers:
            summary = json.loads(run(peer_args(args.python, p, args.log, tmp / f"{p}.csv")))
            reports.append(compare_summary(doc, summary, p))
            csv = compare_csv(tmp / "rarefy.csv", tmp / f"{p}.csv", p)
            reports[-1].problems += csv.problems
            reports[-1].notes += csv.notes
    print(f"agreement with rarefy on {args.log}:")
    sys.exit(0 if show(reports) else 1)


if __name__ == "__main__":
    main()
