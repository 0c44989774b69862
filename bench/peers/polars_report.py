"""`rarefy report --gauge chamber` with polars (lazy, on every core): the
summary as JSON, and with --csv every reading with its derived columns.
Definitions: common.py and bench/README.md."""

import polars as pl

import common as c

P = c.PRESSURE_COLUMN
W = c.WALL_COLUMN


def main():
    args = c.parse_args(f"polars {pl.__version__}")
    lf = pl.scan_csv(
        args.log,
        comment_prefix="#",
        schema_overrides={"time": pl.String, P: pl.String, W: pl.String},
    )
    # A cut-off line has a time that does not parse: rarefy drops the row.
    lf = lf.with_columns(
        pl.col("time")
        .str.to_datetime("%Y-%m-%dT%H:%M:%S%.fZ", time_unit="ms", time_zone="UTC", strict=False)
        .alias("t")
    ).filter(pl.col("t").is_not_null())
    wall = pl.col(W).cast(pl.Float64, strict=False)
    p = pl.col(P).cast(pl.Float64, strict=False)
    lf = lf.with_columns(
        # Gas temperature: the last valid wall reading of the rows before.
        pl.when(wall.is_finite())
        .then(wall + c.ZERO_CELSIUS_K)
        .shift(1)
        .forward_fill()
        .fill_null(c.ASSUMED_T)
        .alias("t_k"),
        p.alias("p_raw"),
    )
    # The gauge's readings: rows whose pressure cell is not empty. Every row
    # stays in the frame (one scan of the log); the sums take the readings.
    reading = pl.col(P).is_not_null()
    finite = pl.col("p_raw").is_finite().fill_null(False)
    valid = reading & finite & (pl.col("p_raw") > 0)
    r = lf.with_columns(
        reading.alias("reading"),
        pl.when(~reading)
        .then(None)
        .when(finite)
        .then(pl.lit("ok"))
        .when(pl.col(P).is_in(c.STATUS_WORDS))
        .then(pl.col(P))
        .otherwise(pl.lit("unparsed"))
        .alias("status"),
        valid.alias("valid"),
        pl.when(valid).then(pl.col("p_raw")).alias("pressure_pa"),
        # Each reading's state holds until the next reading.
        pl.when(reading).then(pl.col("t")).shift(-1).backward_fill().alias("t_next"),
    )
    t_k = pl.col("t_k")
    pv = pl.col("pressure_pa")
    d = c.N2_D_REF * ((1.0 + c.N2_SUTHERLAND / t_k) / (1.0 + c.N2_SUTHERLAND / c.T_REF)).sqrt()
    r = r.with_columns(
        (pv / (c.K_B * t_k)).alias("number_density_per_m3"),
        (pv / (2.0 * c.PI * c.N2_MASS * c.K_B * t_k).sqrt()).alias("impingement_per_m2_s"),
        d.alias("d"),
    )
    n = pl.col("number_density_per_m3")
    r = r.with_columns(
        (1.0 / (n * c.PI * pl.col("d") * pl.col("d") * c.SQRT_1_PLUS_MASS_RATIO)).alias("mean_free_path_m"),
        (c.SITES_PER_M2 / (c.STICKING * pl.col("impingement_per_m2_s"))).alias("monolayer_time_s"),
    )
    kn = pl.col("mean_free_path_m") / c.LENGTH_M
    range_expr = pl.when(pv >= c.RANGE_FLOORS[0][1]).then(pl.lit(c.RANGE_FLOORS[0][0]))
    for name, floor in c.RANGE_FLOORS[1:]:
        range_expr = range_expr.when(pv >= floor).then(pl.lit(name))
    r = r.with_columns(
        kn.alias(f"knudsen {c.LENGTH_NAME}"),
        pl.when(pv.is_null())
        .then(None)
        .when(kn < c.VISCOUS_BELOW)
        .then(pl.lit("viscous"))
        .when(kn > c.MOLECULAR_ABOVE)
        .then(pl.lit("molecular"))
        .otherwise(pl.lit("transitional"))
        .alias(f"regime {c.LENGTH_NAME}"),
        pl.when(pv.is_not_null()).then(range_expr).alias("range"),
        pl.lit(c.GAUGE).alias("gauge"),
        pl.when(reading).then((pl.col("t_next") - pl.col("t")).dt.total_milliseconds()).alias("dt_ms"),
    )

    if args.csv:
        # One pass writes the CSV; the summary is taken from the same frame.
        frame = r.select(c.CSV_COLUMNS[1:] + ["t", "reading", "valid", "dt_ms"]).collect()
        frame.filter(pl.col("reading")).select(pl.col("t").alias("time"), *c.CSV_COLUMNS[1:]).write_csv(
            args.csv, datetime_format="%Y-%m-%dT%H:%M:%S%.3fZ"
        )
        r = frame.lazy()

    # Gaps: 5 x the median of the first 64 intervals (the upper median).
    first = pl.col("dt_ms").filter(pl.col("reading")).head(c.INTERVALS_KEPT).drop_nulls().sort()
    gap_after = first.get(first.len() // 2) / 1000.0 * c.GAP_FACTOR
    dt_s = pl.col("dt_ms") / 1000.0
    gap = (dt_s > gap_after).fill_null(False)

    def held(cond):
        return pl.col("dt_ms").filter(~gap & pl.col("valid") & cond).sum()

    t_read = pl.col("t").filter(pl.col("reading"))
    summary_exprs = [
        pl.len().alias("rows"),
        pl.col("reading").sum().alias("samples"),
        t_read.first().alias("start"),
        t_read.last().alias("end"),
        pv.min().alias("min_pa"),
        pv.max().alias("max_pa"),
        pv.mean().alias("mean_pa"),
        pl.col("dt_ms").filter(~gap & ~pl.col("valid")).sum().alias("no_pressure_ms"),
        gap.sum().alias("gap_count"),
        gap_after.alias("gap_after_s"),
        pl.col("dt_ms").filter(gap).sum().alias("gap_ms"),
    ]
    words = ["ok"] + c.STATUS_WORDS
    summary_exprs += [(pl.col("status") == w).sum().alias(f"status {w}") for w in words]
    for name, _ in c.RANGES:
        summary_exprs.append(held(pl.col("range") == name).alias(f"range {name}"))
    for name in c.REGIMES:
        summary_exprs.append(held(pl.col(f"regime {c.LENGTH_NAME}") == name).alias(f"regime {name}"))
    for th in c.THRESHOLDS:
        summary_exprs.append(pl.col("t").filter(pl.col("valid") & (pv < th)).first().alias(f"below {th}"))
    s = r.select(summary_exprs).collect().row(0, named=True)

    def ms(t):
        return None if t is None else int(t.timestamp() * 1000 + 0.5)

    summary = {
        "tool": f"polars {pl.__version__}",
        "rows": s["rows"],
        "samples": s["samples"],
        "statuses": {w: s[f"status {w}"] for w in words if s[f"status {w}"]},
        "start": c.iso_ms(ms(s["start"])),
        "end": c.iso_ms(ms(s["end"])),
        "duration_s": (ms(s["end"]) - ms(s["start"])) / 1000.0 if s["start"] else 0.0,
        "min_pa": s["min_pa"],
        "max_pa": s["max_pa"],
        "mean_pa": s["mean_pa"],
        "time_in_range_s": {name: (s[f"range {name}"] or 0) / 1000.0 for name, _ in c.RANGES},
        "time_in_regime_s": {c.LENGTH_NAME: {n: (s[f"regime {n}"] or 0) / 1000.0 for n in c.REGIMES}},
        "time_without_pressure_s": (s["no_pressure_ms"] or 0) / 1000.0,
        "gap_after_s": s["gap_after_s"],
        "gap_count": s["gap_count"],
        "gap_s": (s["gap_ms"] or 0) / 1000.0,
        "first_below": {c.threshold_key(th): c.iso_ms(ms(s[f"below {th}"])) for th in c.THRESHOLDS},
    }
    c.emit(summary)


if __name__ == "__main__":
    main()
