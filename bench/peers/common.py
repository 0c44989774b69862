"""What the three peers share: rarefy's definitions for one pressure gauge
with N2, the benchmark configuration (bench/bench.toml) as numbers, and the
shape of the summary they print.

Every formula is written in the same order of operations as rarefy's engine
(crates/core/src/engine), so that the derived numbers agree to the last bit
or nearly: the harness checks them to a relative 1e-9.
"""

import argparse
import json
import math
import sys

# --- Constants (rarefy: crates/core/src/engine/constants.rs) --------------
K_B = 1.380649e-23  # J/K, exact (SI 2019)
M_U = 1.66053906660e-27  # kg, CODATA 2018

# --- N2 in rarefy's gas table (crates/core/src/gas.rs) ---------------------
N2_MOLAR_MASS = 28.0134  # g/mol
N2_MASS = N2_MOLAR_MASS * M_U  # kg
N2_D_REF = 0.37509 * 1e-9  # m, viscosity diameter at T_REF
T_REF = 273.15  # K
N2_SUTHERLAND = 118.57  # K
SQRT_1_PLUS_MASS_RATIO = math.sqrt(1.0 + N2_MASS / N2_MASS)  # pure gas: sqrt(2)
PI = math.pi

# --- bench/bench.toml -------------------------------------------------------
GAUGE = "chamber"
PRESSURE_COLUMN = "chamber [Pa]"
WALL_COLUMN = "wall [C]"
ZERO_CELSIUS_K = 273.15
ASSUMED_T = 22.0 + ZERO_CELSIUS_K  # [chamber] temperature, until a wall reading
LENGTH_NAME = "chamber bore"
LENGTH_M = 0.4
VISCOUS_BELOW = 0.01  # Kn < this: viscous
MOLECULAR_ABOVE = 0.5  # Kn > this: molecular; both bounds transitional
SITES_PER_M2 = 1e19
STICKING = 1.0
THRESHOLDS = [1e-3, 1e-4, 1e-5, 1e-6]  # Pa: first time a valid pressure is below

# --- ISO 3529-1:2019 ranges (crates/core/src/engine/regime.rs) -------------
ATM_PA = 101325.0
LIMIT_REL_TOL = 1e-9
# Lower limit of each class, from the highest pressure; a pressure at a limit
# (within LIMIT_REL_TOL) belongs to the class above it.
RANGES = [
    ("above-atmospheric", ATM_PA * 1.05),
    ("atmospheric", ATM_PA),
    ("low", 100.0),
    ("medium", 0.1),
    ("high", 1e-6),
    ("ultra-high", 1e-9),
    ("extreme-high", 0.0),
]
RANGE_FLOORS = [(name, lower * (1.0 - LIMIT_REL_TOL)) for name, lower in RANGES]
REGIMES = ["viscous", "transitional", "molecular"]

# --- The report's accounting (crates/core/src/report/mod.rs) ---------------
GAP_FACTOR = 5.0  # an interval longer than 5 x the median interval is a gap
INTERVALS_KEPT = 64  # ... the median of the first 64 intervals

# Status words of a bad reading (crates/core/src/sample.rs). A cell that is
# neither a finite number nor one of these is `unparsed`; an empty cell is
# no reading at all.
STATUS_WORDS = ["over-range", "under-range", "sensor-off", "sensor-error", "stale", "unparsed"]

# The derived CSV's columns, as `rarefy report --format csv` writes them.
CSV_COLUMNS = [
    "time",
    "gauge",
    "status",
    "pressure_pa",
    "number_density_per_m3",
    "mean_free_path_m",
    f"knudsen {LENGTH_NAME}",
    f"regime {LENGTH_NAME}",
    "impingement_per_m2_s",
    "monolayer_time_s",
    "range",
]

# The derived quantities, per reading, as rarefy computes them:
#   d   = D_REF * sqrt((1 + S/T) / (1 + S/T_REF))           (Sutherland)
#   n   = p / (K_B * T)
#   mfp = 1 / (n * PI * d * d * sqrt(1 + m/m))
#   Kn  = mfp / L
#   phi = p / sqrt(2 * PI * m * K_B * T)
#   tau = SITES / (STICKING * phi)
# T is the last valid wall reading taken before the pressure reading (the
# wall column comes after the pressure column, so: the rows before), in K,
# else ASSUMED_T.


def parse_args(tool):
    ap = argparse.ArgumentParser(
        description=f"The work of `rarefy report --gauge {GAUGE}` with {tool}: "
        "the summary as JSON on stdout, and with --csv every reading's derived values."
    )
    ap.add_argument("log", help="a rarefy v1 log (bench/gen)")
    ap.add_argument("--csv", metavar="OUT", help="write every reading with its derived columns")
    return ap.parse_args()


def header_lines(path):
    """How many lines come before the header row (the `#` lines)."""
    n = 0
    with open(path, "rb") as f:
        for line in f:
            if not line.startswith(b"#"):
                return n
            n += 1
    return n


def threshold_key(pa):
    return f"{pa:g}"


def emit(summary):
    """Prints the summary: one JSON document."""
    json.dump(summary, sys.stdout, indent=1, sort_keys=True)
    sys.stdout.write("\n")


def iso_ms(epoch_ms):
    """RFC 3339 UTC with milliseconds, as rarefy writes a time."""
    if epoch_ms is None:
        return None
    import datetime

    t = datetime.datetime.fromtimestamp(epoch_ms // 1000, datetime.timezone.utc)
    return t.strftime("%Y-%m-%dT%H:%M:%S") + f".{epoch_ms % 1000:03d}Z"
