"""`rarefy report --gauge chamber` with DuckDB SQL (on every core): the
summary as JSON, and with --csv every reading with its derived columns.
Definitions: common.py and bench/README.md."""

import duckdb

import common as c


def q(name):
    """A quoted SQL identifier."""
    return '"' + name.replace('"', '""') + '"'


def literal(text):
    return "'" + text.replace("'", "''") + "'"


def main():
    args = c.parse_args(f"duckdb {duckdb.__version__}")
    con = duckdb.connect()
    P, W = q(c.PRESSURE_COLUMN), q(c.WALL_COLUMN)
    words = ", ".join(literal(w) for w in c.STATUS_WORDS)
    ranges = " ".join(f"WHEN p >= {floor!r} THEN {literal(name)}" for name, floor in c.RANGE_FLOORS)
    d = (
        f"{c.N2_D_REF!r} * sqrt((1.0 + {c.N2_SUTHERLAND!r} / t_k) / (1.0 + {c.N2_SUTHERLAND!r} / {c.T_REF!r}))"
    )
    # The log: `#` lines skipped; a cut-off line (too few cells) is dropped,
    # as rarefy drops it. Rows in time order (the file's order: a log's
    # times only go forward).
    con.execute(
        f"""
        CREATE TEMP VIEW log AS
        SELECT epoch_ms(CAST(time AS TIMESTAMPTZ)) AS ms, {P} AS ptext, TRY_CAST({W} AS DOUBLE) AS wall
        FROM read_csv({literal(args.log)}, comment = '#', header = true, ignore_errors = true,
                      columns = {{'time': 'VARCHAR', {literal(c.PRESSURE_COLUMN)}: 'VARCHAR',
                                 {literal(c.WALL_COLUMN)}: 'VARCHAR'}})
        """
    )
    con.execute(
        f"""
        CREATE TEMP TABLE derived AS
        WITH temps AS (
            -- Gas temperature: the last valid wall reading of the rows before.
            SELECT ms, ptext,
                   coalesce(lag(CASE WHEN isfinite(wall) THEN wall + {c.ZERO_CELSIUS_K!r} END IGNORE NULLS)
                            OVER (ORDER BY ms),
                            {c.ASSUMED_T!r}) AS t_k
            FROM log
        ),
        readings AS (
            -- The gauge's readings: rows whose pressure cell is not empty.
            SELECT ms, t_k, ptext, TRY_CAST(ptext AS DOUBLE) AS raw
            FROM temps WHERE ptext IS NOT NULL
        ),
        valued AS (
            SELECT ms, t_k,
                   CASE WHEN isfinite(raw) THEN 'ok' WHEN ptext IN ({words}) THEN ptext ELSE 'unparsed' END AS status,
                   CASE WHEN isfinite(raw) AND raw > 0 THEN raw END AS p,
                   lead(ms) OVER (ORDER BY ms) - ms AS dt_ms
            FROM readings
        ),
        kinetics AS (
            SELECT *, p / ({c.K_B!r} * t_k) AS n, {d} AS d,
                   p / sqrt(2.0 * {c.PI!r} * {c.N2_MASS!r} * {c.K_B!r} * t_k) AS phi
            FROM valued
        ),
        lengths AS (
            SELECT *, 1.0 / (n * {c.PI!r} * d * d * {c.SQRT_1_PLUS_MASS_RATIO!r}) AS mfp FROM kinetics
        )
        SELECT ms, status, p, n, mfp, mfp / {c.LENGTH_M!r} AS kn,
               CASE WHEN p IS NULL THEN NULL
                    WHEN mfp / {c.LENGTH_M!r} < {c.VISCOUS_BELOW!r} THEN 'viscous'
                    WHEN mfp / {c.LENGTH_M!r} > {c.MOLECULAR_ABOVE!r} THEN 'molecular'
                    ELSE 'transitional' END AS regime,
               phi, {c.SITES_PER_M2!r} / ({c.STICKING!r} * phi) AS tau,
               CASE {ranges} END AS range, dt_ms
        FROM lengths
        """
    )
    if args.csv:
        cols = ", ".join(
            [
                "strftime(make_timestamp(ms * 1000), '%Y-%m-%dT%H:%M:%S.%gZ') AS time",
                f"{literal(c.GAUGE)} AS gauge",
                "status",
                "p AS pressure_pa",
                "n AS number_density_per_m3",
                "mfp AS mean_free_path_m",
                f"kn AS {q('knudsen ' + c.LENGTH_NAME)}",
                f"regime AS {q('regime ' + c.LENGTH_NAME)}",
                "phi AS impingement_per_m2_s",
                "tau AS monolayer_time_s",
                "range",
            ]
        )
        con.execute(f"COPY (SELECT {cols} FROM derived ORDER BY ms) TO {literal(args.csv)} (HEADER, DELIMITER ',')")

    # Gaps: 5 x the median of the first 64 intervals (the upper median).
    gap_after = con.execute(
        f"""
        SELECT list_sort(list(dt_ms / 1000.0))[count(*) // 2 + 1] * {c.GAP_FACTOR!r}
        FROM (SELECT dt_ms FROM derived WHERE dt_ms IS NOT NULL ORDER BY ms LIMIT {c.INTERVALS_KEPT})
        """
    ).fetchone()[0]
    limit = repr(gap_after) if gap_after is not None else "'Infinity'::DOUBLE"
    held = f"dt_ms / 1000.0 <= {limit} AND p IS NOT NULL"
    sums = [
        "count(*)",
        "min(ms)",
        "max(ms)",
        "min(p)",
        "max(p)",
        "avg(p)",
        f"sum(dt_ms) FILTER (WHERE dt_ms / 1000.0 <= {limit} AND p IS NULL)",
        f"count(*) FILTER (WHERE dt_ms / 1000.0 > {limit})",
        f"sum(dt_ms) FILTER (WHERE dt_ms / 1000.0 > {limit})",
    ]
    sums += [f"sum(dt_ms) FILTER (WHERE {held} AND range = {literal(name)})" for name, _ in c.RANGES]
    sums += [f"sum(dt_ms) FILTER (WHERE {held} AND regime = {literal(name)})" for name in c.REGIMES]
    sums += [f"min(ms) FILTER (WHERE p < {th!r})" for th in c.THRESHOLDS]
    row = list(con.execute(f"SELECT {', '.join(sums)} FROM derived").fetchone())
    samples, start, end, pmin, pmax, pmean, no_p, gap_count, gap_ms = row[:9]
    rest = row[9:]
    in_range, rest = rest[: len(c.RANGES)], rest[len(c.RANGES) :]
    in_regime, below = rest[:3], rest[3:]
    statuses = dict(con.execute("SELECT status, count(*) FROM derived GROUP BY status").fetchall())
    rows = con.execute("SELECT count(*) FROM log").fetchone()[0]
    summary = {
        "tool": f"duckdb {duckdb.__version__}",
        "rows": rows,
        "samples": samples,
        "statuses": statuses,
        "start": c.iso_ms(start),
        "end": c.iso_ms(end),
        "duration_s": (end - start) / 1000.0 if samples else 0.0,
        "min_pa": pmin,
        "max_pa": pmax,
        "mean_pa": pmean,
        "time_in_range_s": {name: (v or 0) / 1000.0 for (name, _), v in zip(c.RANGES, in_range)},
        "time_in_regime_s": {c.LENGTH_NAME: {n: (v or 0) / 1000.0 for n, v in zip(c.REGIMES, in_regime)}},
        "time_without_pressure_s": (no_p or 0) / 1000.0,
        "gap_after_s": gap_after,
        "gap_count": gap_count,
        "gap_s": (gap_ms or 0) / 1000.0,
        "first_below": {c.threshold_key(th): c.iso_ms(v) for th, v in zip(c.THRESHOLDS, below)},
    }
    c.emit(summary)


if __name__ == "__main__":
    main()
