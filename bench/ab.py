#!/usr/bin/env python3
"""Compares builds of rarefy (or any programs) on one command, run after run.

On a shared machine whose speed moves by half within minutes, two builds
timed one after the other say little; alternated run by run (the order
swapped every round) they meet the same moments. Each run is started
with fork and exec and reaped with wait4 (its CPU time); its output goes
to /dev/null.

    python3 bench/ab.py ROUNDS BINARY[,BINARY...] ARGS...

    python3 bench/ab.py 8 /tmp/before/rarefy,target/release/rarefy \\
        report bench/data/log-1e7.csv --config bench/bench.toml

prints, per binary, the fastest, the first quartile and the median of the
wall time, and the same of the CPU time (user + system).
"""

import os
import statistics
import sys
import time


def main() -> int:
    if len(sys.argv) < 3:
        print(__doc__, file=sys.stderr)
        return 2
    rounds = int(sys.argv[1])
    binaries = sys.argv[2].split(",")
    args = sys.argv[3:]
    runs = {b: [] for b in binaries}
    devnull = os.open(os.devnull, os.O_WRONLY)
    for i in range(rounds):
        for b in binaries if i % 2 == 0 else binaries[::-1]:
            start = time.perf_counter()
            pid = os.fork()
            if pid == 0:
                os.dup2(devnull, 1)
                os.dup2(devnull, 2)
                try:
                    os.execv(b, [b, *args])
                finally:
                    os._exit(127)
            _, status, usage = os.wait4(pid, 0)
            wall = time.perf_counter() - start
            if os.waitstatus_to_exitcode(status) not in (0, 3):
                # 3: the report saw a trip alarm, as the bench config's logs may.
                print(f"{b}: exit status {os.waitstatus_to_exitcode(status)}", file=sys.stderr)
                return 1
            runs[b].append((wall, usage.ru_utime + usage.ru_stime))

    def quartile(v):
        return v[(len(v) - 1) // 4]

    for b, v in runs.items():
        wall = sorted(w for w, _ in v)
        cpu = sorted(c for _, c in v)
        print(
            f"{b}: wall fastest {wall[0]:.3f} s, first quartile {quartile(wall):.3f}, "
            f"median {statistics.median(wall):.3f} | CPU fastest {cpu[0]:.3f} s, "
            f"first quartile {quartile(cpu):.3f}, median {statistics.median(cpu):.3f}"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
