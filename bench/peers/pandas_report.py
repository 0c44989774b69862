"""`rarefy report --gauge chamber` with pandas (pyarrow CSV engine): the
summary as JSON, and with --csv every reading with its derived columns.
Definitions: common.py and bench/README.md."""

import numpy as np
import pandas as pd

import common as c


def main():
    args = c.parse_args(f"pandas {pd.__version__}")
    # The pyarrow engine has no `comment` option: skip the `#` lines before
    # the header row. A cut-off line (too few cells) is dropped, as rarefy
    # drops it.
    df = pd.read_csv(
        args.log,
        engine="pyarrow",
        skiprows=c.header_lines(args.log),
        on_bad_lines="skip",
        dtype={c.PRESSURE_COLUMN: "string", c.WALL_COLUMN: "string"},
    )
    if not pd.api.types.is_datetime64_any_dtype(df["time"]):
        df["time"] = pd.to_datetime(df["time"], utc=True, format="ISO8601", errors="coerce")
    df = df[df["time"].notna()]
    rows = len(df)

    # Gas temperature for each row: the last valid wall reading of the rows
    # before it (the wall column follows the pressure column), else assumed.
    wall = pd.to_numeric(df[c.WALL_COLUMN], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    wall_k = np.where(np.isfinite(wall), wall + c.ZERO_CELSIUS_K, np.nan)
    t_k = pd.Series(wall_k).shift(1).ffill().fillna(c.ASSUMED_T).to_numpy()

    # The gauge's readings: rows whose pressure cell is not empty.
    text = df[c.PRESSURE_COLUMN]
    present = text.notna().to_numpy()
    text = text[present]
    t_k = t_k[present]
    time = df["time"][present]
    ms = time.dt.as_unit("ms").astype("int64").to_numpy()
    p = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    finite = np.isfinite(p)
    words = text.isin(c.STATUS_WORDS).to_numpy()
    status = np.where(finite, "ok", np.where(words, text.to_numpy(dtype=object, na_value=""), "unparsed"))
    valid = finite & (p > 0)
    pv = np.where(valid, p, np.nan)

    # Derived quantities (same order of operations as rarefy's engine).
    d = c.N2_D_REF * np.sqrt((1.0 + c.N2_SUTHERLAND / t_k) / (1.0 + c.N2_SUTHERLAND / c.T_REF))
    n = pv / (c.K_B * t_k)
    mfp = 1.0 / (n * c.PI * d * d * c.SQRT_1_PLUS_MASS_RATIO)
    kn = mfp / c.LENGTH_M
    phi = pv / np.sqrt(2.0 * c.PI * c.N2_MASS * c.K_B * t_k)
    tau = c.SITES_PER_M2 / (c.STICKING * phi)
    regime_code = np.where(kn < c.VISCOUS_BELOW, 0, np.where(kn > c.MOLECULAR_ABOVE, 2, 1))
    range_code = np.full(len(pv), len(c.RANGES) - 1)
    for i in range(len(c.RANGE_FLOORS) - 1, -1, -1):
        range_code = np.where(pv >= c.RANGE_FLOORS[i][1], i, range_code)

    # Time: each reading's state holds until the next reading; an interval
    # longer than 5 x the median of the first 64 is a gap.
    dt_ms = np.diff(ms)
    dt = dt_ms / 1000.0
    first = np.sort(dt[: c.INTERVALS_KEPT])
    gap_after = first[len(first) // 2] * c.GAP_FACTOR if len(first) else None
    gap = dt > gap_after if gap_after is not None else np.zeros(0, bool)
    held_valid = valid[:-1] & ~gap
    counted = dt_ms * ~gap
    in_range = np.bincount(range_code[:-1][held_valid], weights=dt_ms[held_valid], minlength=len(c.RANGES))
    in_regime = np.bincount(regime_code[:-1][held_valid], weights=dt_ms[held_valid], minlength=3)
    no_pressure = counted[~valid[:-1]].sum()

    def first_below(th):
        hit = np.flatnonzero(valid & (p < th))
        return c.iso_ms(int(ms[hit[0]])) if len(hit) else None

    statuses = pd.Series(status).value_counts()
    summary = {
        "tool": f"pandas {pd.__version__} (pyarrow engine)",
        "rows": rows,
        "samples": int(len(p)),
        "statuses": {k: int(v) for k, v in statuses.items()},
        "start": c.iso_ms(int(ms[0])) if len(ms) else None,
        "end": c.iso_ms(int(ms[-1])) if len(ms) else None,
        "duration_s": float(ms[-1] - ms[0]) / 1000.0 if len(ms) else 0.0,
        "min_pa": float(np.nanmin(pv)) if valid.any() else None,
        "max_pa": float(np.nanmax(pv)) if valid.any() else None,
        "mean_pa": float(np.nanmean(pv)) if valid.any() else None,
        "time_in_range_s": {name: float(v) / 1000.0 for (name, _), v in zip(c.RANGES, in_range)},
        "time_in_regime_s": {c.LENGTH_NAME: {r: float(v) / 1000.0 for r, v in zip(c.REGIMES, in_regime)}},
        "time_without_pressure_s": float(no_pressure) / 1000.0,
        "gap_after_s": gap_after,
        "gap_count": int(gap.sum()),
        "gap_s": float(dt_ms[gap].sum()) / 1000.0,
        "first_below": {c.threshold_key(th): first_below(th) for th in c.THRESHOLDS},
    }

    if args.csv:
        names = np.array(c.REGIMES, dtype=object)
        ranges = np.array([r for r, _ in c.RANGES], dtype=object)
        out = pd.DataFrame(
            {
                "time": time.to_numpy(),
                "gauge": c.GAUGE,
                "status": status,
                "pressure_pa": pv,
                "number_density_per_m3": n,
                "mean_free_path_m": mfp,
                f"knudsen {c.LENGTH_NAME}": kn,
                f"regime {c.LENGTH_NAME}": np.where(valid, names[regime_code], None),
                "impingement_per_m2_s": phi,
                "monolayer_time_s": tau,
                "range": np.where(valid, ranges[range_code], None),
            }
        )
        out.to_csv(args.csv, index=False, date_format="%Y-%m-%dT%H:%M:%S.%fZ")
    c.emit(summary)


if __name__ == "__main__":
    main()
