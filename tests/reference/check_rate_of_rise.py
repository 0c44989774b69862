"""Reference check of the rate-of-rise fit of `rarefy report` against
scipy.stats.linregress (scipy 1.17.1) and numpy.polyfit (numpy 2.4.6).

Generates a noisy, slightly flattening pressure rise (seeded, so every run
writes the same log) in rarefy's log format v1, runs

    rarefy report LOG --format json --volume "50 L"

and compares the segment rarefy finds by itself with a least-squares line
fitted by scipy.stats.linregress to exactly the rows between the segment's
start and end times:

  * dp/dt (gauges[0].rate_of_rise[0].dp_dt_pa_per_s) within 1e-9 relative;
  * R² (r2) with linregress's rvalue², within 1e-9 relative;
  * the leak rate Q = V·dp/dt, V = 50 L = 0.05 m³, within 1e-9 relative, and
    Q in mbar·L/s = Q[Pa·m³/s] / 0.1 (1 mbar·L/s = 100 Pa × 1e-3 m³ by the
    definitions of the units), within 1e-9 relative.

The segment must be the whole log (the rise starts at the first row and
never dips), so which rows are fitted is not in doubt.

The generated log and the reference numbers are also committed as a fixture
(tests/fixtures/ror_reference.csv and ror_reference.json) that the Rust test
suite checks without Python (tests/report.rs); this script checks that the
committed fixture is the one it generates. To write it again:

    python tests/reference/check_rate_of_rise.py --write-fixture

Usage (from tests/reference, as .ci/run does):

    python check_rate_of_rise.py ../../target/debug/rarefy

Exits non-zero on any failure and ends with a line "N passed, M failed".
"""

import json
import math
import random
import subprocess
import sys
import tempfile
from datetime import datetime, timedelta, timezone
from pathlib import Path

import numpy
import scipy
from scipy import stats

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures"
LOG_NAME = "ror_reference.csv"
EXPECTED_NAME = "ror_reference.json"

SEED = 20260302
START = datetime(2026, 3, 2, 8, 0, 0, tzinfo=timezone.utc)
ROWS = 361
INTERVAL_MS = 5000
JITTER_MS = 200
P0_PA = 1.0e-2
SLOPE0_PA_PER_S = 5.0e-4
# The slope falls by 10 % over the 30 min: p = p0 + a·t − b·t², a − 2·b·T = 0.9·a.
CURVE_PA_PER_S2 = 0.1 * SLOPE0_PA_PER_S / (2 * 1800.0)
NOISE_REL = 2.0e-3
VOLUME_M3 = 0.05
VOLUME_ARG = "50 L"
# 1 mbar·L/s = 100 Pa × 1e-3 m³/s = 0.1 Pa·m³/s (definitions of the units).
MBAR_L_PER_S = 0.1
REL_TOL = 1e-9


def gauss(rng):
    """A standard normal deviate by Box-Muller from random.random(), whose
    sequence for a given seed CPython promises to keep across versions."""
    u1 = 1.0 - rng.random()
    u2 = rng.random()
    return math.sqrt(-2.0 * math.log(u1)) * math.cos(2.0 * math.pi * u2)


def rfc3339(t):
    return t.strftime("%Y-%m-%dT%H:%M:%S.") + f"{t.microsecond // 1000:03d}Z"


def generate():
    """The log's text and its rows as (milliseconds from the first row,
    pressure in Pa), the pressures being exactly the numbers written."""
    rng = random.Random(SEED)
    rows = []
    for i in range(ROWS):
        jitter = 0 if i == 0 else rng.randint(-JITTER_MS, JITTER_MS)
        ms = i * INTERVAL_MS + jitter
        t = ms / 1000.0
        clean = P0_PA + SLOPE0_PA_PER_S * t - CURVE_PA_PER_S2 * t * t
        text = f"{clean * (1.0 + NOISE_REL * gauss(rng)):.5e}"
        rows.append((ms, text))
    lines = [
        "# rarefy log v1",
        "# chamber: Test chamber R-1 (generated)",
        "# gas: N2",
        "# note: seeded noisy rise for the rate-of-rise reference check",
        "time,chamber [Pa]",
    ]
    for ms, text in rows:
        lines.append(f"{rfc3339(START + timedelta(milliseconds=ms))},{text}")
    return "\n".join(lines) + "\n", [(ms, float(text)) for ms, text in rows]


def unambiguous(rows):
    """Whether rarefy's rise finder (crates/core/src/analysis/rise.rs) must
    take every row as one segment: no point below the first, none 10 % below
    the highest so far, and the end at least 1.5 × the start."""
    first = rows[0][1]
    high = first
    for _, p in rows:
        if p < first or p < 0.9 * high:
            return False
        high = max(high, p)
    return rows[-1][1] >= 1.5 * first


def reference(rows, start_ms, end_ms):
    """linregress over the rows in [start, end]; x in seconds from the
    segment's first row."""
    seg = [(ms, p) for ms, p in rows if start_ms <= ms <= end_ms]
    x = numpy.array([(ms - seg[0][0]) / 1000.0 for ms, _ in seg])
    y = numpy.array([p for _, p in seg])
    fit = stats.linregress(x, y)
    poly_slope, _ = numpy.polyfit(x, y, 1)
    return seg, fit, float(poly_slope)


def expected(seg, fit):
    slope = float(fit.slope)
    q = VOLUME_M3 * slope
    return {
        "produced_by": (
            f"tests/reference/check_rate_of_rise.py with scipy {scipy.__version__} "
            f"(scipy.stats.linregress) and numpy {numpy.__version__}"
        ),
        "log": LOG_NAME,
        "volume": VOLUME_ARG,
        "volume_m3": VOLUME_M3,
        "segment_start": rfc3339(START + timedelta(milliseconds=seg[0][0])),
        "segment_end": rfc3339(START + timedelta(milliseconds=seg[-1][0])),
        "points": len(seg),
        "start_pa": seg[0][1],
        "end_pa": seg[-1][1],
        "x": "seconds from the segment's first row",
        "slope_pa_per_s": slope,
        "slope_stderr_pa_per_s": float(fit.stderr),
        "intercept_pa": float(fit.intercept),
        "intercept_stderr_pa": float(fit.intercept_stderr),
        "r2": float(fit.rvalue) ** 2,
        "leak_rate_pa_m3_per_s": q,
        "leak_rate_mbar_l_per_s": q / MBAR_L_PER_S,
    }


def parse_ms(text):
    t = datetime.fromisoformat(text.replace("Z", "+00:00"))
    return round((t - START) / timedelta(milliseconds=1))


class Checks:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def ok(self, what, cond, detail=""):
        if cond:
            self.passed += 1
        else:
            self.failed += 1
            print(f"FAIL {what} {detail}".rstrip())

    def close(self, what, got, want, tol=REL_TOL):
        if got is None or want is None:
            self.ok(what, False, f"{got!r} vs {want!r}")
            return
        err = abs(got - want) / abs(want) if want != 0 else abs(got)
        self.ok(what, err <= tol, f"{got!r} vs {want!r} (relative {err:.2e} > {tol:.0e})")


def main():
    args = sys.argv[1:]
    text, rows = generate()
    if not unambiguous(rows):
        print("the generated rise is not one unambiguous segment; change the seed or noise")
        sys.exit(1)
    first_ms, last_ms = rows[0][0], rows[-1][0]
    if args == ["--write-fixture"]:
        seg, fit, _ = reference(rows, first_ms, last_ms)
        FIXTURES.mkdir(exist_ok=True)
        (FIXTURES / LOG_NAME).write_text(text, encoding="utf-8")
        doc = json.dumps(expected(seg, fit), indent=2) + "\n"
        (FIXTURES / EXPECTED_NAME).write_text(doc, encoding="utf-8")
        print(f"wrote {FIXTURES / LOG_NAME} and {FIXTURES / EXPECTED_NAME}")
        return
    binary = args[0] if args else "target/debug/rarefy"
    c = Checks()

    with tempfile.TemporaryDirectory() as tmp:
        log = Path(tmp) / LOG_NAME
        log.write_text(text, encoding="utf-8")
        out = subprocess.run(
            [binary, "report", str(log), "--format", "json", "--volume", VOLUME_ARG],
            capture_output=True, text=True,
        )
    c.ok("exit code", out.returncode == 0, f"{out.returncode}: {out.stderr}")
    if out.returncode != 0:
        print(f"rate of rise: {c.passed} passed, {c.failed} failed")
        sys.exit(1)
    report = json.loads(out.stdout)
    rises = report["gauges"][0]["rate_of_rise"]
    c.ok("one segment found", len(rises) == 1, f"{len(rises)}")
    r = rises[0]
    start_ms, end_ms = parse_ms(r["start"]), parse_ms(r["end"])
    c.ok("segment starts at the first row", start_ms == first_ms, r["start"])
    c.ok("segment ends at the last row", end_ms == last_ms, r["end"])

    seg, fit, poly_slope = reference(rows, start_ms, end_ms)
    want = expected(seg, fit)
    c.close("numpy.polyfit slope vs linregress", poly_slope, want["slope_pa_per_s"])
    c.ok("start_pa", r["start_pa"] == seg[0][1], f"{r['start_pa']!r} vs {seg[0][1]!r}")
    c.ok("end_pa", r["end_pa"] == seg[-1][1], f"{r['end_pa']!r} vs {seg[-1][1]!r}")
    c.close("dp_dt_pa_per_s", r["dp_dt_pa_per_s"], want["slope_pa_per_s"])
    c.close("r2", r["r2"], want["r2"])
    c.close("leak_rate_pa_m3_per_s", r["leak_rate_pa_m3_per_s"], want["leak_rate_pa_m3_per_s"])
    c.close("leak_rate_mbar_l_per_s", r["leak_rate_mbar_l_per_s"], want["leak_rate_mbar_l_per_s"])
    q = r["leak_rate_pa_m3_per_s"]
    if q is not None:
        c.close("leak_rate_mbar_l_per_s = Q / 0.1", r["leak_rate_mbar_l_per_s"], q / MBAR_L_PER_S)

    # The committed fixture is this log, and its numbers this fit's.
    committed = FIXTURES / LOG_NAME
    c.ok("fixture log is current", committed.exists()
         and committed.read_text(encoding="utf-8") == text,
         f"{committed} differs; run with --write-fixture")
    try:
        saved = json.loads((FIXTURES / EXPECTED_NAME).read_text(encoding="utf-8"))
    except (OSError, ValueError) as e:
        saved = {}
        c.ok("fixture numbers readable", False, str(e))
    for k in ("slope_pa_per_s", "intercept_pa", "r2", "leak_rate_pa_m3_per_s",
              "leak_rate_mbar_l_per_s"):
        c.close(f"fixture {k}", saved.get(k), want[k], 1e-12)
    for k in ("segment_start", "segment_end", "points", "start_pa", "end_pa"):
        c.ok(f"fixture {k}", saved.get(k) == want[k], f"{saved.get(k)!r} vs {want[k]!r}")

    print(f"rate of rise over {len(seg)} points: dp/dt {r['dp_dt_pa_per_s']:.6e} Pa/s "
          f"(scipy {want['slope_pa_per_s']:.6e}), R² {r['r2']:.9f}, "
          f"Q {q:.4e} Pa·m³/s, verdict {r['verdict']}")
    print(f"rate of rise: {c.passed} passed, {c.failed} failed")
    sys.exit(1 if c.failed else 0)


if __name__ == "__main__":
    main()
