//! The core's per-sample costs, each group in elements per second:
//!
//! * `engine`: one derivation of every kinetic quantity for N2 and for a
//!   three-gas process mixture (`engine::derive`, which works the kinetics
//!   out from the temperature every time), and the monitor's per-reading path
//!   (`Precomputed::derive_into`: kinetics worked out once, scaled to the
//!   pressure, written into the last result's allocations);
//! * `template`: one line through the live template decoder
//!   (`parse::decoder`), 1 000 different lines an iteration;
//! * `log-v1`: reading a 10 000-row log v1 from memory, per row;
//! * `log-foreign`: the same rows as another logger's export (`;`,
//!   decimal commas, local times in a named zone without an offset, status
//!   words of its own) read through a `[log]` section, per row;
//! * `monitor`: `alarm::Monitor::push` of one row of two gauges against six
//!   rules (one a rate of change) and a gate, per row; in N2 without a
//!   temperature channel, then with a wall temperature read to 0.1 °C (a few
//!   values recur, so the kinetics worked out per temperature are found
//!   again) and with one that is new at every row (worked out again every
//!   row), for N2 and for the three-gas mixture;
//! * `numfmt`: one number of a CSV report's row written with the shortest
//!   digits in exponent form (`numfmt::push_exp_bytes`; `lay_exp_at`, in
//!   place, as the CSV writer does), against zmij's own text alone (the
//!   floor: both lay it out again) and
//!   std's `{:e}`, written into the same buffer; the numbers are what a row holds
//!   (pressure, number density, mean free path, Knudsen number,
//!   impingement rate, monolayer time) over a pump-down from 1e5 to 1e-8 Pa.
//!
//! The machine is shared and noisy: read the figures against each other in
//! the same run rather than as absolute numbers.

use std::hint::black_box;
use std::io::Cursor;
use std::time::Duration;

use chrono::{DateTime, TimeZone, Utc};
use criterion::{BenchmarkGroup, Criterion, Throughput, criterion_group, criterion_main};
use rarefy_core::alarm::gate::Gate;
use rarefy_core::alarm::monitor::GaugeSetup;
use rarefy_core::alarm::{Monitor, MonitorSetup, RuleSpec, Severity, syntax};
use rarefy_core::engine::gauge::GaugeKind;
use rarefy_core::engine::mixture::Mixture;
use rarefy_core::engine::{
    Conditions, GaugeModel, GaugeOverrides, NamedLength, Physics, Precomputed, derive,
};
use rarefy_core::gas::GasTable;
use rarefy_core::log::LogReader;
use rarefy_core::log::v1::{self, Cell, Column, LogMeta};
use rarefy_core::parse::template::TemplateSpec;
use rarefy_core::parse::{DecoderSettings, decoder};
use rarefy_core::sample::{ChannelInfo, ChannelUnit, Fault, Sample, SourceEvent, Status};
use rarefy_core::units::{PressureUnit, TemperatureUnit};

const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);

fn t0() -> DateTime<Utc> {
    Utc.timestamp_opt(1_780_000_000, 0).single().expect("time")
}

/// A small deterministic noise source, uniform in [-0.5, 0.5).
struct Noise(u64);

impl Noise {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    }
}

/// A chamber pressure in mbar at step `i`: a pump-down to a base pressure
/// with a slow ripple and noise, repeating every 20 000 steps.
fn pressure_mbar(i: usize, noise: &mut Noise) -> f64 {
    let s = (i % 20_000) as f64;
    let base = 2e-7 * (1.0 + 0.3 * (s / 3_000.0).sin());
    (1e3 * (-s / 400.0).exp() + base) * (1.0 + 0.02 * noise.next())
}

fn lengths() -> Vec<NamedLength> {
    vec![
        NamedLength::new("chamber bore", 0.4),
        NamedLength::new("source-to-substrate", 0.15),
        NamedLength::new("pumping line", 0.04),
    ]
}

fn quick<M: criterion::measurement::Measurement>(g: &mut BenchmarkGroup<'_, M>) {
    g.warm_up_time(Duration::from_secs(1));
    g.measurement_time(Duration::from_secs(3));
}

fn engine(c: &mut Criterion) {
    let table = GasTable::builtin();
    let n2 = Mixture::pure(table.get("N2").expect("N2").clone());
    let process = Mixture::parse("Ar=0.9,N2=0.08,H2O=0.02", &table).expect("mixture");
    let lengths = lengths();
    let physics = Physics::default();
    // Pressures across the whole range, so every regime and range is met.
    let pressures: Vec<f64> = (0..1024)
        .map(|i| 10f64.powf(-8.0 + 13.0 * f64::from(i) / 1024.0))
        .collect();

    let mut g = c.benchmark_group("engine");
    quick(&mut g);
    g.throughput(Throughput::Elements(1));
    for (name, mixture) in [("N2", &n2), ("Ar+N2+H2O", &process)] {
        let mut i = 0;
        g.bench_function(format!("derive {name}"), |b| {
            b.iter(|| {
                i = (i + 1) % pressures.len();
                let c = Conditions::new(pressures[i], 295.15);
                black_box(derive(black_box(&c), mixture, &lengths, &physics))
            })
        });
        let pre = Precomputed::new(295.15, mixture, &lengths, &physics);
        let mut out = pre.derive(1e-3);
        let mut i = 0;
        g.bench_function(format!("Precomputed::derive_into {name}"), |b| {
            b.iter(|| {
                i = (i + 1) % pressures.len();
                pre.derive_into(black_box(pressures[i]), &mut out);
                black_box(out.mean_free_path_m)
            })
        });
    }
    g.finish();
}

/// An invented two-channel controller line: value and status word per gauge.
fn controller_lines(n: usize) -> Vec<Vec<u8>> {
    let mut noise = Noise(3);
    (0..n)
        .map(|i| {
            let p = pressure_mbar(i * 17, &mut noise);
            let word = if i % 97 == 0 { "OVER" } else { "GOOD" };
            format!("VX G1 {p:+.2E} GOOD G2 {:+.2E} {word}", p * 40.0).into_bytes()
        })
        .collect()
}

fn template(c: &mut Criterion) {
    const LINES: usize = 1_000;
    let spec = TemplateSpec {
        pattern: r"^VX G1 (?P<chamber>\S+) (?P<chamber_status>[A-Z]+) G2 (?P<process>\S+) (?P<process_status>[A-Z]+)\s*$".into(),
        unit: Some(MBAR),
        status: [
            ("GOOD", Status::Ok),
            ("UNDR", Status::UnderRange),
            ("OVER", Status::OverRange),
            ("FAIL", Status::SensorError),
            ("IDLE", Status::SensorOff),
        ]
        .into_iter()
        .map(|(k, v)| (k.to_string(), v))
        .collect(),
        ..TemplateSpec::default()
    };
    let mut dec = decoder(&DecoderSettings::Templates(vec![spec])).expect("decoder");
    let lines = controller_lines(LINES);
    let mut g = c.benchmark_group("template");
    quick(&mut g);
    g.throughput(Throughput::Elements(LINES as u64));
    g.bench_function("decode line (2 channels + status words)", |b| {
        b.iter(|| {
            let mut n = 0;
            for line in &lines {
                for e in dec.decode(black_box(line), t0(), "ctl") {
                    if let SourceEvent::Samples(s) = e {
                        n += s.len();
                    }
                }
            }
            black_box(n)
        })
    });
    g.finish();
}

/// A log v1 of `rows` rows at 10 Hz: three pressure gauges (one of them
/// switched off at high pressure) and a wall temperature.
fn log_text(rows: usize) -> String {
    let columns: Vec<Column> = [
        ChannelInfo::new("cdg", MBAR),
        ChannelInfo::new("chamber", MBAR),
        ChannelInfo::new("ion", MBAR),
        ChannelInfo::new("wall", ChannelUnit::Temperature(TemperatureUnit::C)),
    ]
    .iter()
    .map(Column::channel)
    .collect();
    let meta = LogMeta {
        chamber: Some("Bench chamber B-1".into()),
        gas: Some("N2".into()),
        source: Some("sim:bench".into()),
        started: Some(t0()),
        ..LogMeta::default()
    };
    let mut s = v1::header(&meta, &columns);
    let mut noise = Noise(5);
    for i in 0..rows {
        let p = pressure_mbar(i, &mut noise);
        let cells = [
            if p > 11.0 {
                Cell::Bad(Fault::OverRange)
            } else {
                Cell::Value(p)
            },
            Cell::Value(p * (1.0 + 0.01 * noise.next())),
            if p > 1e-3 {
                Cell::Bad(Fault::SensorOff)
            } else {
                Cell::Value(p * (1.0 + 0.03 * noise.next()))
            },
            Cell::Value(22.0 + 0.2 * noise.next()),
        ];
        v1::write_row(
            &mut s,
            t0() + chrono::Duration::milliseconds(100 * i as i64),
            &cells,
        );
    }
    s
}

/// The samples of every row a reader gives (`want` of them, or the bench
/// is wrong).
fn samples_in(
    rows: impl Iterator<Item = Result<rarefy_core::log::Row, rarefy_core::log::LogError>>,
    want: usize,
) -> usize {
    let samples: usize = rows.map(|r| r.expect("row").samples.len()).sum();
    assert_eq!(samples, want);
    samples
}

fn log(c: &mut Criterion) {
    const ROWS: usize = 10_000;
    let text = log_text(ROWS);
    let mut g = c.benchmark_group("log-v1");
    quick(&mut g);
    g.throughput(Throughput::Elements(ROWS as u64));
    g.bench_function("read row (4 channels)", |b| {
        b.iter(|| {
            let reader = LogReader::new(Cursor::new(black_box(text.as_bytes())), "bench.csv")
                .expect("header");
            black_box(samples_in(reader, ROWS * 4))
        })
    });
    g.finish();
}

/// Two gauges (a combined gauge and an ionization gauge, both in N2), six
/// rules — thresholds with deadband and delays, a rate of change, a flow
/// regime crossing, a mean free path, a vacuum range — and one gate.
fn monitor_setup(gas: &Mixture) -> MonitorSetup {
    let lengths = lengths();
    let length = |name: &str| lengths.iter().find(|l| l.name == name).map(|l| l.length_m);
    let rules = [
        "ion pressure above 5e-5 mbar for 10 s deadband 0.3 decade as trip latching named ion-high",
        "chamber rate_of_change above 1 decade/min for 5 s clear after 20 s named fast-rise",
        "chamber regime(pumping line) crosses transitional/molecular as notice named line-regime",
        "chamber pressure above 1e-4 mbar for 30 s deadband 10 % named chamber-high",
        "chamber mean_free_path below 1 x chamber bore as notice named short-path",
        "ion vacuum_range enters medium as notice named ion-range",
    ]
    .iter()
    .map(|text| RuleSpec {
        rule: syntax::alarm(text, Some("chamber"), 0, &length).expect(text),
        enable: None,
    })
    .collect();
    let gate = Gate {
        id: "deposition-ready".into(),
        label: "Ready to deposit".into(),
        conditions: [
            "chamber pressure below 5e-6 mbar",
            "chamber mean_free_path above 10 x source-to-substrate",
        ]
        .iter()
        .map(|c| syntax::condition(c, &length).expect(c))
        .collect(),
        hold_s: 120.0,
    };
    let gauge = |id: &str, kind| GaugeSetup {
        id: id.into(),
        model: GaugeModel::new(kind, gas, &GaugeOverrides::default()).expect("model"),
        mixture: gas.clone(),
        settings: None,
    };
    MonitorSetup {
        gauges: vec![
            gauge("chamber", GaugeKind::Combined),
            gauge("ion", GaugeKind::Ionization),
        ],
        mixture: gas.clone(),
        gas_steps: vec![],
        lengths: lengths.clone(),
        physics: Physics::default(),
        assumed_temperature_k: 295.15,
        rules,
        gates: vec![gate],
        stale_after_s: 10.0,
        rate_window_s: 10.0,
        input_severity: Severity::Warning,
        default_gauge: Some("chamber".into()),
        chamber: Default::default(),
        pressure_unit: PressureUnit::Mbar,
        temperature_unit: TemperatureUnit::C,
    }
}

/// How the rows' wall temperature channel reads.
#[derive(Clone, Copy)]
enum Wall {
    /// No temperature channel: the assumed temperature throughout.
    None,
    /// Read to 0.1 °C, as a thermocouple readout gives it: a few values
    /// recur.
    Tenths,
    /// A value that is new at every row (a filtered or averaged channel).
    Continuous,
}

/// Rows of the two gauges (and a wall temperature) at 10 Hz: pump-downs
/// with the ion gauge off above 1e-3 mbar.
fn monitor_rows(n: usize, wall: Wall) -> Vec<Vec<Sample>> {
    let mut noise = Noise(9);
    let celsius = ChannelUnit::Temperature(TemperatureUnit::C);
    (0..n)
        .map(|i| {
            let t = t0() + chrono::Duration::milliseconds(100 * i as i64);
            let p = pressure_mbar(i, &mut noise);
            let ion = if p > 1e-3 {
                Sample::bad(t, "ion", MBAR, Fault::SensorOff)
            } else {
                Sample::ok(t, "ion", p * (1.0 + 0.03 * noise.next()), MBAR)
            };
            let mut row = vec![Sample::ok(t, "chamber", p, MBAR), ion];
            let c = 22.0 + 0.3 * noise.next();
            match wall {
                Wall::None => {}
                Wall::Tenths => row.push(Sample::ok(t, "wall", (c * 10.0).round() / 10.0, celsius)),
                Wall::Continuous => row.push(Sample::ok(t, "wall", c, celsius)),
            }
            row
        })
        .collect()
}

fn monitor(c: &mut Criterion) {
    // Four pump-down cycles; pushed again, the data time goes on (the rows
    // are shifted by whole cycles), so the monitor never sees time go back.
    const ROWS: usize = 80_000;
    const BATCH: usize = 1_000;
    let table = GasTable::builtin();
    let n2 = Mixture::pure(table.get("N2").expect("N2").clone());
    let process = Mixture::parse("Ar=0.9,N2=0.08,H2O=0.02", &table).expect("mixture");
    let cycle = chrono::Duration::milliseconds(100 * ROWS as i64);
    let mut g = c.benchmark_group("monitor");
    quick(&mut g);
    // An iteration is 1 000 rows (up to tens of ms): fewer samples keep
    // the group within its few seconds.
    g.sample_size(30);
    g.throughput(Throughput::Elements(BATCH as u64));
    for (name, gas, wall) in [
        ("push row (2 gauges, 6 rules, 1 gate) N2", &n2, Wall::None),
        ("push row + wall 0.1 C, Ar+N2+H2O", &process, Wall::Tenths),
        ("push row + wall continuous, N2", &n2, Wall::Continuous),
        (
            "push row + wall continuous, Ar+N2+H2O",
            &process,
            Wall::Continuous,
        ),
    ] {
        let mut rows = monitor_rows(ROWS, wall);
        let mut m = Monitor::new(monitor_setup(gas));
        let mut at = 0;
        let mut events = 0usize;
        g.bench_function(name, |b| {
            b.iter(|| {
                for _ in 0..BATCH {
                    if at == ROWS {
                        at = 0;
                        for r in &mut rows {
                            for s in r.iter_mut() {
                                s.time += cycle;
                            }
                        }
                    }
                    events += m.push(black_box(&rows[at])).len();
                    at += 1;
                }
            })
        });
        println!("  {name}: {events} events over the pushes (alarms and gate changes)");
    }
    g.finish();
}

/// The rows of [`log_text`] as an invented logger's export: a preamble
/// line, `;` between cells, decimal commas, `dd.mm.yyyy hh:mm:ss.fff` in
/// Vienna's local time, its own status words.
fn foreign_text(rows: usize) -> String {
    let v1 = log_text(rows);
    let mut s = String::from("Bench export;;;;\nDate/Time;CDG;Chamber;Ion;Wall\n");
    for line in v1
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("time"))
    {
        let mut cells = line.split(',');
        let t = cells.next().expect("time");
        s.push_str(&format!(
            "{}.{}.{} {}",
            &t[8..10],
            &t[5..7],
            &t[0..4],
            &t[11..23]
        ));
        for c in cells {
            s.push(';');
            s.push_str(&match c {
                "over-range" => "OR".to_string(),
                "sensor-off" => "OFF".to_string(),
                c => c.replace('.', ","),
            });
        }
        s.push('\n');
    }
    s
}

fn log_foreign(c: &mut Criterion) {
    use rarefy_core::log::foreign::{
        ColumnRef, ForeignColumn, ForeignLogSpec, ForeignReader, TimeColumn,
    };
    use rarefy_core::timefmt::{TimeFormat, Zone};
    const ROWS: usize = 10_000;
    let text = foreign_text(ROWS);
    let words = vec![
        ("OR".to_string(), Fault::OverRange),
        ("OFF".to_string(), Fault::SensorOff),
    ];
    let column = |name: &str, unit| ForeignColumn {
        column: ColumnRef::Name(name.into()),
        channel: name.to_lowercase(),
        unit,
        status: words.clone(),
    };
    let spec = ForeignLogSpec {
        delimiter: ';',
        decimal_comma: true,
        skip_rows: 1,
        header: true,
        encoding: Default::default(),
        time: TimeColumn {
            column: ColumnRef::Name("Date/Time".into()),
            format: TimeFormat::parse("%d.%m.%Y %H:%M:%S%.3f").expect("format"),
            zone: Some(Zone::parse("Europe/Vienna").expect("zone")),
        },
        columns: vec![
            column("CDG", MBAR),
            column("Chamber", MBAR),
            column("Ion", MBAR),
            column("Wall", ChannelUnit::Temperature(TemperatureUnit::C)),
        ],
        notes: Vec::new(),
        gas: None,
    };
    let mut g = c.benchmark_group("log-foreign");
    quick(&mut g);
    g.throughput(Throughput::Elements(ROWS as u64));
    g.bench_function("read row (4 channels)", |b| {
        b.iter(|| {
            let reader =
                ForeignReader::new(Cursor::new(black_box(text.as_bytes())), "bench.csv", &spec)
                    .expect("header");
            black_box(samples_in(reader, ROWS * 4))
        })
    });
    g.finish();
}

fn numfmt(c: &mut Criterion) {
    use std::io::Write;
    let table = GasTable::builtin();
    let n2 = Mixture::pure(table.get("N2").expect("N2").clone());
    let pre = Precomputed::new(295.15, &n2, &lengths(), &Physics::default());
    let mut noise = Noise(11);
    // The six numbers of a row, for 1024 pressures from 1e5 to 1e-8 Pa with
    // a gauge's seven or eight digits (noise on every one).
    let values: Vec<f64> = (0..1024)
        .flat_map(|i| {
            let p = 10f64.powf(5.0 - 13.0 * f64::from(i) / 1024.0) * (1.0 + 0.02 * noise.next());
            let p: f64 = format!("{p:.7e}").parse().expect("p");
            let d = pre.derive(p);
            [
                p,
                d.number_density_per_m3,
                d.mean_free_path_m,
                d.lengths[0].knudsen,
                d.impingement_per_m2_s,
                d.monolayer_time_s,
            ]
        })
        .collect();
    let mut g = c.benchmark_group("numfmt");
    quick(&mut g);
    g.throughput(Throughput::Elements(values.len() as u64));
    let mut out = Vec::with_capacity(64 * values.len());
    g.bench_function("push_exp_bytes", |b| {
        b.iter(|| {
            out.clear();
            for &v in &values {
                rarefy_core::numfmt::push_exp_bytes(&mut out, black_box(v));
                out.push(b',');
            }
            black_box(out.len())
        })
    });
    // The CSV writer's way: laid out in place in a buffer kept at its
    // length, with room for the layout's fixed-size copies after the last.
    let mut line = vec![
        0u8;
        values.len() * (rarefy_core::numfmt::EXP_MOST + 1)
            + rarefy_core::numfmt::LAY_ROOM
    ];
    g.bench_function("lay_exp_at", |b| {
        b.iter(|| {
            let mut k = 0;
            for &v in &values {
                k = rarefy_core::numfmt::lay_exp_at(&mut line, k, black_box(v));
                line[k] = b',';
                k += 1;
            }
            black_box(k)
        })
    });
    g.bench_function("zmij alone", |b| {
        b.iter(|| {
            out.clear();
            let mut buf = zmij::Buffer::new();
            for &v in &values {
                out.extend_from_slice(buf.format_finite(black_box(v)).as_bytes());
                out.push(b',');
            }
            black_box(out.len())
        })
    });
    g.bench_function("std {:e}", |b| {
        b.iter(|| {
            out.clear();
            for &v in &values {
                write!(out, "{:e}", black_box(v)).expect("write");
                out.push(b',');
            }
            black_box(out.len())
        })
    });
    g.finish();
}

criterion_group!(benches, engine, template, log, log_foreign, monitor, numfmt);
criterion_main!(benches);
