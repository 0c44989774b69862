//! A deterministic generator of large, realistic rarefy v1 logs for the
//! benchmark harness (`bench/`).
//!
//! One wide-range pressure gauge (`chamber`, Pa) and a wall thermocouple
//! (`wall`, °C) of an 85 L chamber, read at 10 Hz:
//!
//! * atmosphere for a minute, then a pump-down: roughing
//!   `p₀ e^(−t/12 s)` to about 1 Pa, the turbo pump taking the rest of the
//!   roughing gas (`3 Pa e^(−t/45 s)`), then the outgassing tail `K/(t + 30 s)`
//!   (10⁻³ Pa after about 10 min, 10⁻⁵ Pa after about 17 h) over a base
//!   pressure;
//! * at 45 % of the rows a vent with dry nitrogen back to (slightly above)
//!   atmosphere, held for up to 10 min;
//! * a second pump-down, with less water in the chamber (a smaller `K`), to
//!   the end.
//!
//! Readings carry 0.5 % gaussian noise and are written with 8 significant
//! digits; the wall temperature follows a daily swing of ±0.4 °C with the
//! 1/16 °C resolution of a thermocouple amplifier. Every `rows / 10` rows
//! (at most 200 000) one cell is bad, in turn: `over-range`, `sensor-off`, a
//! garbled number, `under-range` and a `sensor-error` of the thermocouple.
//! Once, at 62 % of the rows, a line is cut off inside its time (a row the
//! readers drop), and at 70 % the recorder pauses for 45 s (a gap).
//!
//! The same options give the same bytes: the noise comes from
//! [`rarefy_core::sim::rng::Rng`] with a fixed seed, and the rows are
//! written with [`rarefy_core::log::v1`], so the format is exactly v1.

use std::io::{self, Write};

use chrono::{DateTime, Utc};
use rarefy_core::log::v1::{self, Cell, Column, ColumnKind, LogMeta};
use rarefy_core::sample::{ChannelUnit, Fault};
use rarefy_core::sim::rng::Rng;
use rarefy_core::units::{PressureUnit, TemperatureUnit};

/// Interval between rows, ms (10 Hz).
pub const INTERVAL_MS: i64 = 100;
/// Atmosphere before the first pump-down, s.
const ATMOSPHERE_S: f64 = 60.0;
/// Ambient pressure, Pa.
const AMBIENT_PA: f64 = 100_900.0;
/// Roughing time constant, s.
const TAU_ROUGH_S: f64 = 12.0;
/// Roughing gas left for the turbo pump, Pa, and its time constant, s.
const TURBO_PA: f64 = 3.0;
const TAU_TURBO_S: f64 = 45.0;
/// Outgassing tail K/(t + T0): K of the first and the second pump-down,
/// Pa·s, and T0, s.
const TAIL_K1: f64 = 0.6;
const TAIL_K2: f64 = 0.25;
const TAIL_T0_S: f64 = 30.0;
/// Base pressure, Pa.
const BASE_PA: f64 = 3e-8;
/// Vent: time constant, s, and the end pressure relative to ambient (the
/// nitrogen line is slightly above it).
const TAU_VENT_S: f64 = 6.0;
const VENT_OVER: f64 = 1.004;
/// Longest time at atmosphere after the vent, s.
const VENT_HOLD_S: f64 = 600.0;
/// Relative noise of the gauge (1 σ).
const GAUGE_NOISE: f64 = 0.005;
/// Wall temperature: mean, daily swing, noise (1 σ), °C; resolution, °C.
const WALL_C: f64 = 22.0;
const WALL_SWING_C: f64 = 0.4;
const WALL_NOISE_C: f64 = 0.05;
const WALL_STEP_C: f64 = 1.0 / 16.0;
/// Where the recorder pauses, as a fraction of the rows, and for how long, ms.
const GAP_AT: f64 = 0.70;
const GAP_MS: i64 = 45_000;
/// Where a line is cut off, as a fraction of the rows.
const CUT_AT: f64 = 0.62;
/// Where the vent starts, as a fraction of the run.
const VENT_AT: f64 = 0.45;

/// What to generate.
#[derive(Debug, Clone, PartialEq)]
pub struct Options {
    /// Lines of data (the cut-off line included).
    pub rows: u64,
    /// Noise seed.
    pub seed: u64,
    /// Time of the first row.
    pub start: DateTime<Utc>,
}

impl Options {
    /// `rows` rows with the default seed and start time.
    pub fn new(rows: u64) -> Self {
        Options {
            rows,
            seed: 1,
            start: default_start(),
        }
    }
}

/// 2026-11-16T06:00:00Z, the default start.
pub fn default_start() -> DateTime<Utc> {
    DateTime::<Utc>::from_timestamp(1_794_808_800, 0).unwrap_or(DateTime::<Utc>::UNIX_EPOCH)
}

/// What the generator put in a log besides good readings (for tests and
/// the harness's notes).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Written {
    /// Lines of data written.
    pub lines: u64,
    /// Bytes written.
    pub bytes: u64,
    /// Bad pressure cells, by status word (`unparsed` for the garbled one).
    pub bad_pressure: Vec<(String, u64)>,
    /// Bad temperature cells.
    pub bad_wall: u64,
    /// Whether a line was cut off.
    pub cut_line: bool,
    /// Whether the 45 s gap is in the log.
    pub gap: bool,
}

/// The kinds of bad cell, in the order they appear.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Bad {
    Pressure(Fault),
    Garbled,
    Wall(Fault),
}

const BAD_CYCLE: [Bad; 5] = [
    Bad::Pressure(Fault::OverRange),
    Bad::Pressure(Fault::SensorOff),
    Bad::Garbled,
    Bad::Pressure(Fault::UnderRange),
    Bad::Wall(Fault::SensorError),
];

/// The run's schedule, s from the first row.
struct Schedule {
    pump1: f64,
    vent: f64,
    pump2: f64,
}

impl Schedule {
    fn new(duration_s: f64) -> Self {
        let vent = (duration_s * VENT_AT).max(ATMOSPHERE_S + 60.0);
        let hold = VENT_HOLD_S.min(duration_s * 0.05).max(10.0);
        Schedule {
            pump1: ATMOSPHERE_S,
            vent,
            pump2: vent + hold,
        }
    }
}

/// Pressure of a pump-down `s` seconds after it started from `p0`, Pa.
fn pumpdown(p0: f64, s: f64, k: f64) -> f64 {
    p0 * (-s / TAU_ROUGH_S).exp()
        + TURBO_PA * (-s / TAU_TURBO_S).exp()
        + k / (s + TAIL_T0_S)
        + BASE_PA
}

/// The ambient pressure at `t` s: a slow swing of the weather, Pa.
fn ambient(t: f64) -> f64 {
    AMBIENT_PA + 250.0 * (std::f64::consts::TAU * t / 172_800.0).sin()
}

/// The true pressure at `t` s, Pa.
fn pressure(sched: &Schedule, t: f64) -> f64 {
    if t < sched.pump1 {
        ambient(t)
    } else if t < sched.vent {
        pumpdown(ambient(sched.pump1), t - sched.pump1, TAIL_K1)
    } else if t < sched.pump2 {
        let before = pumpdown(ambient(sched.pump1), sched.vent - sched.pump1, TAIL_K1);
        let end = ambient(t) * VENT_OVER;
        before + (end - before) * (1.0 - (-(t - sched.vent) / TAU_VENT_S).exp())
    } else {
        pumpdown(ambient(sched.pump2) * VENT_OVER, t - sched.pump2, TAIL_K2)
    }
}

/// `v` rounded to `digits` significant digits.
fn significant(v: f64, digits: usize) -> f64 {
    format!("{v:.*e}", digits - 1).parse().unwrap_or(v)
}

/// The header: metadata and the two columns.
pub fn header(opts: &Options) -> String {
    let meta = LogMeta {
        chamber: Some("Coater C-2, thin-film bay (simulated)".into()),
        volume_m3: Some(0.085),
        surface_area_m2: Some(1.6),
        gas: Some("N2".into()),
        source: Some(format!("bench:gen?seed={}&rows={}", opts.seed, opts.rows)),
        started: Some(opts.start),
        extra: vec![(
            "note".into(),
            "generated benchmark log; simulated chamber, readings N2-equivalent".into(),
        )],
    };
    let columns = [
        Column {
            name: "chamber".into(),
            kind: ColumnKind::Channel(ChannelUnit::Pressure(PressureUnit::Pa)),
        },
        Column {
            name: "wall".into(),
            kind: ColumnKind::Channel(ChannelUnit::Temperature(TemperatureUnit::C)),
        },
    ];
    v1::header(&meta, &columns)
}

/// Writes the log to `out`.
pub fn generate<W: Write>(opts: &Options, out: W) -> io::Result<Written> {
    let mut out = io::BufWriter::with_capacity(1 << 20, out);
    let mut written = Written::default();
    let head = header(opts);
    out.write_all(head.as_bytes())?;
    written.bytes += head.len() as u64;

    let rows = opts.rows;
    let duration_s = rows as f64 * INTERVAL_MS as f64 / 1000.0;
    let sched = Schedule::new(duration_s);
    let mut gauge = Rng::new(opts.seed, 1);
    let mut wall = Rng::new(opts.seed, 2);
    let mut faults = Rng::new(opts.seed, 3);
    let spacing = (rows / 10).clamp(500, 200_000);
    // The first bad cell half a spacing in, each later one a spacing on,
    // give or take a tenth.
    let jitter = |r: &mut Rng| (r.uniform() * (spacing / 5) as f64) as u64;
    let mut next_bad = spacing / 2 + jitter(&mut faults);
    let mut bad_index = 0usize;
    let cut = (rows >= 1000).then_some((rows as f64 * CUT_AT) as u64);
    let gap = (rows >= 1000).then_some((rows as f64 * GAP_AT) as u64);
    let start_ms = opts.start.timestamp_millis();

    let mut line = String::with_capacity(128);
    for i in 0..rows {
        let pause = if gap.is_some_and(|g| i >= g) {
            GAP_MS
        } else {
            0
        };
        let ms = start_ms + i as i64 * INTERVAL_MS + pause;
        let t = (ms - start_ms) as f64 / 1000.0;
        let time = DateTime::<Utc>::from_timestamp_millis(ms).unwrap_or(opts.start);
        // Noise is drawn for every row, bad or not, so a bad cell does not
        // shift the rest.
        let p = significant(
            pressure(&sched, t) * (1.0 + GAUGE_NOISE * gauge.normal()),
            8,
        );
        let swing = WALL_SWING_C * (std::f64::consts::TAU * t / 86_400.0).sin();
        let w = WALL_C + swing + WALL_NOISE_C * wall.normal();
        let w = (w / WALL_STEP_C).round() * WALL_STEP_C;

        line.clear();
        if cut == Some(i) {
            // A line cut off inside its time: what a recorder killed in
            // the middle of a write leaves.
            let full = v1::format_time(time);
            line.push_str(&full[..15]);
            line.push('\n');
            written.cut_line = true;
        } else {
            let mut cells = [Cell::Value(p), Cell::Value(w)];
            let mut garbled = false;
            if i == next_bad {
                let kind = BAD_CYCLE[bad_index % BAD_CYCLE.len()];
                bad_index += 1;
                next_bad += spacing - spacing / 10 + jitter(&mut faults);
                match kind {
                    Bad::Pressure(f) => {
                        cells[0] = Cell::Bad(f);
                        count(&mut written.bad_pressure, f.as_str());
                    }
                    Bad::Garbled => {
                        garbled = true;
                        count(&mut written.bad_pressure, "unparsed");
                    }
                    Bad::Wall(f) => {
                        cells[1] = Cell::Bad(f);
                        written.bad_wall += 1;
                    }
                }
            }
            if garbled {
                // A number garbled on the line: a letter O where the
                // exponent's sign belongs.
                let text = format!("{p:e}").replacen('e', "E-O", 1);
                cells[0] = Cell::Bad(Fault::Unparsed);
                v1::write_row(&mut line, time, &cells);
                line = line.replacen(",unparsed,", &format!(",{text},"), 1);
            } else {
                v1::write_row(&mut line, time, &cells);
            }
        }
        if gap == Some(i) {
            written.gap = true;
        }
        out.write_all(line.as_bytes())?;
        written.bytes += line.len() as u64;
        written.lines += 1;
    }
    out.flush()?;
    Ok(written)
}

fn count(list: &mut Vec<(String, u64)>, word: &str) {
    match list.iter_mut().find(|(w, _)| w == word) {
        Some((_, n)) => *n += 1,
        None => list.push((word.to_string(), 1)),
    }
}

#[cfg(test)]
mod tests;
