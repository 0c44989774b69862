#!/usr/bin/env python3
"""Times `rarefy report` against the peers (bench/peers/) and against the
machine's ceiling (`cat`, `wc -l`) on one generated log, and prints a
markdown table and the performance targets. Called by bench/run.sh, which
builds, generates the logs and sets up the peers' venv first.

Only the standard library is used here, so that the smoke run works
without the venv. Each command runs --runs times one after the other, its
output going where the real tool would write it (a file, or /dev/null for
`cat` and `wc`); the log is read once before, so every run reads it from
the page cache. Wall time is the median over the runs; CPU time (user +
system) and peak RSS come from the kernel's rusage of the child
as `/usr/bin/time -v` prints them (without it, from `os.wait4`, whose peak
RSS is at least this Python's).
"""

import argparse
import datetime
import json
import os
import platform
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import check_agreement as agree  # noqa: E402

MIB = 1024 * 1024

# Targets (issue "Step 8 - Performance"): set at 1e7 rows.
TARGET_VS_FAST = 5.0  # rarefy summary vs the fastest of polars / DuckDB
TARGET_VS_PANDAS = 10.0
TARGET_MBPS_ONE = 600.0  # rarefy summary, MB/s on one core
TARGET_MBPS_TWO = 1000.0  # ... when it uses both
TARGET_RSS_MIB = 64.0
TARGET_CSV_VS_FAST = 3.0  # rarefy --format csv vs the fastest peer writing the CSV
TARGET_CSV_MBPS = 150.0


class Timing:
    def __init__(self, name, tool, task):
        self.name, self.tool, self.task = name, tool, task
        self.walls, self.cpus, self.rss = [], [], []

    @property
    def wall(self):
        return statistics.median(self.walls)

    @property
    def cpu(self):
        return statistics.median(self.cpus)

    @property
    def peak_mib(self):
        return max(self.rss) / MIB


TIME = "/usr/bin/time"


def run_once(cmd, stdout_path):
    """Runs `cmd` with stdout to `stdout_path`; returns (wall s, cpu s, peak
    RSS bytes).

    Under `/usr/bin/time -v` when it exists: the kernel keeps a process's
    peak RSS across exec, so a child forked straight from this Python would
    report this Python's size as its own."""
    out = open(stdout_path, "wb") if stdout_path else subprocess.DEVNULL
    err = tempfile.TemporaryFile()
    report = tempfile.NamedTemporaryFile(prefix="rarefy-time-", delete=False)
    report.close()
    timed = os.access(TIME, os.X_OK)
    full = [TIME, "-v", "-o", report.name, *map(str, cmd)] if timed else list(map(str, cmd))
    try:
        t0 = time.perf_counter()
        proc = subprocess.Popen(full, stdout=out, stderr=err)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - t0
        proc.returncode = os.waitstatus_to_exitcode(status)
    finally:
        if stdout_path:
            out.close()
    if proc.returncode != 0:
        err.seek(0)
        sys.exit(f"failed ({proc.returncode}): {' '.join(map(str, cmd))}\n{err.read().decode(errors='replace')}")
    cpu, rss = usage.ru_utime + usage.ru_stime, usage.ru_maxrss * 1024  # ru_maxrss: KiB
    if timed:
        fields = {}
        for line in Path(report.name).read_text().splitlines():
            key, _, value = line.strip().rpartition(": ")
            fields[key] = value
        cpu = float(fields["User time (seconds)"]) + float(fields["System time (seconds)"])
        rss = int(fields["Maximum resident set size (kbytes)"]) * 1024
    os.unlink(report.name)
    return wall, cpu, rss


def busy_cores(seconds=1.0):
    """Cores busy over the next `seconds` (from /proc/stat): other work on
    the machine, when nothing of ours runs."""

    def sample():
        with open("/proc/stat") as f:
            v = [int(x) for x in f.readline().split()[1:]]
        idle = v[3] + (v[4] if len(v) > 4 else 0)
        return sum(v), idle

    try:
        t0, i0 = sample()
        time.sleep(seconds)
        t1, i1 = sample()
    except OSError:
        return float("nan")
    total = t1 - t0
    return (os.cpu_count() or 1) * (1.0 - (i1 - i0) / total) if total > 0 else 0.0


def fmt_s(s):
    return f"{s:.3f}" if s < 10 else f"{s:.2f}"


def fmt_rate(x):
    if x >= 1e6:
        return f"{x / 1e6:.2f} M"
    if x >= 1e3:
        return f"{x / 1e3:.1f} k"
    return f"{x:.0f}"


def git(*args):
    try:
        return subprocess.run(["git", *args], cwd=HERE.parent, capture_output=True, text=True).stdout.strip()
    except OSError:
        return ""


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("log")
    ap.add_argument("--rarefy", required=True)
    ap.add_argument("--python", help="the venv's Python; without it the peers are left out")
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--rows", type=int, required=True, help="data lines in the log (for rows/s)")
    ap.add_argument("--no-check", action="store_true", help="skip the agreement check")
    ap.add_argument("--json", help="also write the measurements here")
    ap.add_argument("--keep", action="store_true", help="keep the outputs of the last runs (removed by default)")
    args = ap.parse_args()

    log = Path(args.log)
    size = log.stat().st_size
    peers = agree.PEERS if args.python else []
    work = Path(tempfile.mkdtemp(prefix="rarefy-bench-"))
    print(f"log: {log} ({size / 1e6:.1f} MB, {args.rows} lines); {args.runs} run(s) each")
    if args.keep:
        print(f"outputs kept in {work}")
    print(f"rarefy: {args.rarefy}")

    load_before = busy_cores()
    if load_before > 0.2:
        print(f"note: the machine is not idle ({load_before:.2f} cores busy with other work): timings will be slower")
    # The page cache: every run reads the log from memory.
    subprocess.run(["cat", str(log)], stdout=subprocess.DEVNULL, check=True)

    ok = True
    if peers and not args.no_check:
        print("agreement check (rarefy and each peer on this log):")
        with tempfile.TemporaryDirectory(prefix="rarefy-agree-") as tmp:
            tmp = Path(tmp)
            doc = json.loads(subprocess.run(agree.rarefy_args(args.rarefy, log, "json"), capture_output=True, text=True, check=True).stdout)
            subprocess.run(agree.rarefy_args(args.rarefy, log, "csv", tmp / "rarefy.csv"), capture_output=True, check=True)
            reports = []
            for p in peers:
                out = subprocess.run(agree.peer_args(args.python, p, log, tmp / f"{p}.csv"), capture_output=True, text=True, check=True)
                rep = agree.compare_summary(doc, json.loads(out.stdout), p)
                csv = agree.compare_csv(tmp / "rarefy.csv", tmp / f"{p}.csv", p)
                rep.problems += csv.problems
                rep.notes += csv.notes
                reports.append(rep)
            ok = agree.show(reports)
        print()

    commands = [
        ("cat", "cat", "ceiling", ["cat", str(log)], None),
        ("wc -l", "wc -l", "ceiling", ["wc", "-l", str(log)], None),
        ("rarefy summary", "rarefy", "summary", agree.rarefy_args(args.rarefy, log, "json"), work / "rarefy.json"),
    ]
    # The same report held to one core (the affinity rarefy reads when it
    # decides whether to start its helper threads): the one-core target.
    taskset = shutil.which("taskset")
    if taskset:
        commands.append(
            ("rarefy 1 core", "rarefy, 1 core", "summary", [taskset, "-c", "0", *agree.rarefy_args(args.rarefy, log, "json")], work / "rarefy-1.json")
        )
    for p in peers:
        commands.append((f"{p} summary", p, "summary", agree.peer_args(args.python, p, log), work / f"{p}.json"))
    commands.append(
        ("rarefy csv", "rarefy", "csv", agree.rarefy_args(args.rarefy, log, "csv", work / "rarefy.csv"), work / "rarefy.out")
    )
    for p in peers:
        commands.append((f"{p} csv", p, "csv", agree.peer_args(args.python, p, log, work / f"{p}.csv"), work / f"{p}.out"))

    timings = {}
    for name, tool, task, cmd, out in commands:
        t = Timing(name, tool, task)
        for _ in range(args.runs):
            if task == "csv":
                # Each CSV run starts with the disk at rest: the last run's
                # file (about 2.6x the log) gone and its pages written back,
                # untimed, so no run pays for the one before it.
                for f in work.glob("*.csv"):
                    f.unlink()
                os.sync()
            wall, cpu, rss = run_once(cmd, out)
            t.walls.append(wall)
            t.cpus.append(cpu)
            t.rss.append(rss)
        timings[name] = t
        print(f"  {name:<16} {fmt_s(t.wall)} s (runs: {', '.join(fmt_s(w) for w in t.walls)})", flush=True)
    print()

    when = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    commit = git("rev-parse", "--short", "HEAD")
    dirty = " (with uncommitted changes)" if git("status", "--porcelain", "--untracked-files=no") else ""
    cores = os.cpu_count()
    cpu_name = ""
    try:
        for line in open("/proc/cpuinfo"):
            if line.startswith("model name"):
                cpu_name = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    load_after = busy_cores()
    print(
        f"{when}; rarefy at commit {commit}{dirty}; {cores} cores ({cpu_name}); Python {platform.python_version()}; "
        f"cores busy with other work: {load_before:.2f} before, {load_after:.2f} after"
    )
    versions = ""
    if args.python:
        versions = subprocess.run(
            [args.python, "-c", "import pandas, pyarrow, polars, duckdb; print(f'pandas {pandas.__version__}, pyarrow {pyarrow.__version__}, polars {polars.__version__}, duckdb {duckdb.__version__}')"],
            capture_output=True,
            text=True,
        ).stdout.strip()
        print(versions)
    print(f"log: {log.name}, {size / 1e6:.1f} MB, {args.rows:,} lines; median of {args.runs} run(s), warm page cache")
    print()

    def ratio_to(base, t):
        return t.wall / base.wall if base and base.wall > 0 else float("nan")

    print("| task | tool | median s | CPU s | cores used | MB/s | rows/s | peak RSS MiB | time ÷ rarefy's |")
    print("|---|---|---:|---:|---:|---:|---:|---:|---:|")
    for name, t in timings.items():
        base = timings.get("rarefy csv" if t.task == "csv" else "rarefy summary")
        ratio = ratio_to(base, t)
        print(
            f"| {t.task} | {t.tool} | {fmt_s(t.wall)} | {fmt_s(t.cpu)} | {t.cpu / t.wall:.2f} | "
            f"{size / 1e6 / t.wall:.0f} | {fmt_rate(args.rows / t.wall)} | {t.peak_mib:.1f} | {ratio:.2f}× |"
        )
    print()
    print("time ÷ rarefy's: a peer's median time over rarefy's for the same task (above 1: rarefy is faster);")
    print("cat and wc -l are over rarefy's summary. MB/s: log bytes (1 MB = 1e6 bytes) over the median time.")
    print()

    # Targets.
    rs, rc = timings["rarefy summary"], timings["rarefy csv"]
    rows_note = "" if args.rows >= 10_000_000 else f" (measured at {args.rows:,} rows; the targets are set at 1e7)"
    print(f"Targets{rows_note}:")
    print()
    print("| target | wanted | measured | verdict |")
    print("|---|---:|---:|---|")

    def line(what, wanted, measured, met, short):
        verdict = "met" if met else f"short by {short}"
        print(f"| {what} | {wanted} | {measured} | {verdict} |")

    def ratio_target(what, want, peers_of_task):
        ts = [timings[n] for n in peers_of_task if n in timings]
        if not ts:
            print(f"| {what} | ≥{want:g}× | n/a (no peers) | — |")
            return
        fastest = min(ts, key=lambda t: t.wall)
        base = rc if fastest.task == "csv" else rs
        r = fastest.wall / base.wall
        line(f"{what} (fastest: {fastest.tool})", f"≥{want:g}×", f"{r:.2f}×", r >= want, f"{want / r:.1f}×")

    ratio_target("report summary vs fastest of polars/DuckDB", TARGET_VS_FAST, ["polars summary", "duckdb summary"])
    ratio_target("report summary vs pandas", TARGET_VS_PANDAS, ["pandas summary"])
    # Held to one core (taskset) against the one-core target; as it runs,
    # against the two-core one when the machine has two.
    one = timings.get("rarefy 1 core")
    if one is None:
        print(f"| report summary MB/s on one core | ≥{TARGET_MBPS_ONE:g} | n/a (no taskset) | — |")
    two_here = (os.cpu_count() or 1) >= 2
    for t, want, label in (
        (one, TARGET_MBPS_ONE, "held to one core"),
        (rs, TARGET_MBPS_TWO if two_here else TARGET_MBPS_ONE, "two cores" if two_here else "one core"),
    ):
        if t is None:
            continue
        mbps = size / 1e6 / t.wall
        line(
            f"report summary MB/s ({label}: {t.cpu / t.wall:.2f} used)",
            f"≥{want:g}",
            f"{mbps:.0f}",
            mbps >= want,
            f"{want / mbps:.1f}×",
        )
    for t in (rs, rc):
        line(
            f"{t.name} peak RSS",
            f"≤{TARGET_RSS_MIB:g} MiB",
            f"{t.peak_mib:.1f} MiB",
            t.peak_mib <= TARGET_RSS_MIB,
            f"{t.peak_mib / TARGET_RSS_MIB:.1f}× ({t.peak_mib - TARGET_RSS_MIB:.0f} MiB over)",
        )
    ratio_target("report --format csv vs fastest peer writing the CSV", TARGET_CSV_VS_FAST, [f"{p} csv" for p in peers])
    cmbps = size / 1e6 / rc.wall
    line("report --format csv MB/s", f"≥{TARGET_CSV_MBPS:g}", f"{cmbps:.0f}", cmbps >= TARGET_CSV_MBPS, f"{TARGET_CSV_MBPS / cmbps:.1f}×")
    print()

    if args.json:
        Path(args.json).write_text(
            json.dumps(
                {
                    "when": when,
                    "commit": commit,
                    "log": str(log),
                    "bytes": size,
                    "rows": args.rows,
                    "runs": args.runs,
                    "versions": versions,
                    "busy_cores_before_after": [load_before, load_after],
                    "timings": {
                        n: {"walls_s": t.walls, "cpus_s": t.cpus, "peak_rss_bytes": max(t.rss)} for n, t in timings.items()
                    },
                },
                indent=1,
            )
        )
    if not args.keep:
        shutil.rmtree(work, ignore_errors=True)
    if not ok:
        print("the peers DISAGREE with rarefy (see above): the comparison is not valid", file=sys.stderr)
        sys.exit(1)


if __name__ == "__main__":
    main()
