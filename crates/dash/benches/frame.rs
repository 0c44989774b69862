//! The dashboard's cost with a week of history at 10 Hz.
//!
//! Set-up (printed, not timed by criterion): the demo configuration's
//! dashboard is fed a week of rows at 10 Hz in data time — 6 048 000 rows of
//! three pressure gauges and a wall temperature, through `App::ingest`, the
//! live path — and the process's resident memory and the history's bucket
//! count are printed at the end of each simulated day: both must stay flat
//! once the history's rings are full.
//!
//! Then:
//! * terminal output at a steady 10 rows/s, one row a frame, through the
//!   crossterm backend into a counting sink (what a terminal or an SSH link
//!   receives), against a full repaint of every frame measured the same way;
//! * criterion: one frame at 120×40 into ratatui's `TestBackend`, for the
//!   15 min, 1 h and 1 week trend windows, against two baselines in the same
//!   run: a plain full-screen paragraph and the dashboard with no data.
//!
//! `RAREFY_BENCH_DAYS=1 cargo bench -p rarefy-dash` feeds less for a quick
//! look. The machine is shared and noisy; read the figures as ratios to
//! their baselines.

use std::hint::black_box;
use std::path::Path;
use std::sync::atomic::Ordering;
use std::time::{Duration as StdDuration, Instant};

use chrono::{DateTime, Duration, TimeZone, Utc};
use criterion::{Criterion, Throughput};
use rarefy_app::config::{self, Config};
use rarefy_core::alarm::Monitor;
use rarefy_core::sample::{ChannelUnit, Fault, Sample, SourceEvent};
use rarefy_core::units::{PressureUnit, TemperatureUnit};
use rarefy_dash::app::{App, GaugeInfo};
use rarefy_dash::render;
use rarefy_dash::term::Counting;
use ratatui::backend::{CrosstermBackend, TestBackend};
use ratatui::layout::Rect;
use ratatui::text::Line;
use ratatui::widgets::Paragraph;
use ratatui::{Terminal, TerminalOptions, Viewport};

const CONFIG: &str = include_str!("../../../config/demo.toml");
const WIDTH: u16 = 120;
const HEIGHT: u16 = 40;
/// Rows a second (10 Hz).
const RATE: i64 = 10;
const DAY_ROWS: usize = 86_400 * RATE as usize;

fn config() -> Config {
    config::parse(CONFIG, Path::new("config/demo.toml")).expect("demo config")
}

fn empty_app() -> App {
    let config = config();
    let gauges = GaugeInfo::configured(&config);
    let monitor = Monitor::new(config.monitor_setup(Vec::new()));
    let mut app = App::new(config.chamber.name.clone(), monitor, gauges);
    app.window_s = 3600.0;
    app
}

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

/// Row `i` (at 10 Hz): a pump-down to a base pressure with a daily bump;
/// the capacitance gauge under its range at high vacuum, the ion gauge off
/// above 1e-3 mbar, and the wall temperature.
fn row(i: usize, noise: &mut Noise) -> SourceEvent {
    let t = t0() + Duration::milliseconds(1000 / RATE * i as i64);
    let s = i as f64 / RATE as f64;
    let base = 2e-7 * (1.0 + 0.5 * (s / 86_400.0 * std::f64::consts::TAU).sin());
    let p = 1e3 * (-s / 60.0).exp() + base * (1.0 + 0.05 * noise.next());
    let mbar = ChannelUnit::Pressure(PressureUnit::Mbar);
    let cdg = if p < 1e-4 {
        Sample::bad(t, "cdg", mbar, Fault::UnderRange)
    } else {
        Sample::ok(t, "cdg", p * (1.0 + 0.002 * noise.next()), mbar)
    };
    let ion = if p > 1e-3 {
        Sample::bad(t, "ion", mbar, Fault::SensorOff)
    } else {
        Sample::ok(t, "ion", p * (1.0 + 0.03 * noise.next()), mbar)
    };
    SourceEvent::Samples(vec![
        cdg,
        Sample::ok(t, "chamber", p, mbar),
        ion,
        Sample::ok(
            t,
            "wall",
            22.0 + 0.2 * noise.next(),
            ChannelUnit::Temperature(TemperatureUnit::C),
        ),
    ])
}

/// Resident memory of this process, KiB.
fn rss_kib() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmRSS:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse().ok())
        })
        .unwrap_or(0)
}

fn buckets(app: &App) -> usize {
    app.gauges
        .iter()
        .chain(std::iter::once(&GaugeInfo {
            id: "wall".into(),
            label: String::new(),
            kind: None,
            unit: ChannelUnit::Temperature(TemperatureUnit::C),
        }))
        .filter_map(|g| app.history.get(&g.id))
        .map(|s| s.buckets())
        .sum()
}

/// The dashboard after `days` days at 10 Hz; prints memory per day.
fn week(days: usize, noise: &mut Noise) -> (App, usize) {
    let mut app = empty_app();
    let started = Instant::now();
    println!(
        "feeding {days} d at {RATE} Hz ({} rows) through App::ingest:",
        days * DAY_ROWS
    );
    println!("  day  rows        history buckets  events kept  RSS KiB  wall s");
    println!(
        "  {:>3}  {:>10}  {:>15}  {:>11}  {:>7}  {:>6.1}",
        0,
        0,
        buckets(&app),
        app.events.len(),
        rss_kib(),
        0.0
    );
    let mut i = 0;
    for day in 1..=days {
        for _ in 0..DAY_ROWS {
            app.ingest(&row(i, noise), None);
            i += 1;
        }
        println!(
            "  {:>3}  {:>10}  {:>15}  {:>11}  {:>7}  {:>6.1}",
            day,
            i,
            buckets(&app),
            app.events.len(),
            rss_kib(),
            started.elapsed().as_secs_f64()
        );
    }
    let per_row = started.elapsed().as_secs_f64() / i.max(1) as f64;
    println!(
        "  ingest: {:.2} us a row ({} samples in all); history decimated {}",
        per_row * 1e6,
        app.counters.samples,
        app.history.decimated()
    );
    (app, i)
}

type CountingTerm = Terminal<CrosstermBackend<Counting<std::io::Sink>>>;

fn counting_term(sink: Counting<std::io::Sink>) -> CountingTerm {
    Terminal::with_options(
        CrosstermBackend::new(sink),
        TerminalOptions {
            viewport: Viewport::Fixed(Rect::new(0, 0, WIDTH, HEIGHT)),
        },
    )
    .expect("terminal")
}

/// Bytes written over `frames` frames at 10 rows/s, one row a frame; with
/// `repaint` every frame is drawn in full on a cleared screen (nothing to
/// diff against). Returns (first frame, all the others) in bytes.
fn bytes_written(app: &mut App, next: &mut usize, frames: usize, repaint: bool) -> (u64, u64) {
    let mut noise = Noise(7);
    let (sink, bytes) = Counting::new(std::io::sink());
    let mut term = counting_term(sink.clone());
    term.draw(|f| render::draw(f, app)).expect("first frame");
    let first = bytes.swap(0, Ordering::Relaxed);
    for _ in 0..frames {
        app.ingest(&row(*next, &mut noise), None);
        *next += 1;
        if repaint {
            term = counting_term(sink.clone());
            ratatui::backend::Backend::clear(term.backend_mut()).expect("clear");
        }
        term.draw(|f| render::draw(f, app)).expect("frame");
    }
    (first, bytes.load(Ordering::Relaxed))
}

fn bytes_per_second(app: &mut App, next: &mut usize) {
    const FRAMES: usize = 600;
    let seconds = FRAMES as f64 / RATE as f64;
    println!(
        "terminal output at {RATE} rows/s, one row a frame, {WIDTH}x{HEIGHT}, {FRAMES} frames:"
    );
    for (label, window) in [
        ("15 min", 900.0),
        ("1 h", 3600.0),
        ("1 week", 7.0 * 86_400.0),
    ] {
        app.window_s = window;
        let (first, steady) = bytes_written(app, next, FRAMES, false);
        let (_, full) = bytes_written(app, next, FRAMES, true);
        let (steady_s, full_s) = (steady as f64 / seconds, full as f64 / seconds);
        println!(
            "  window {label:>6}: first frame {first} B; steady {steady_s:.0} B/s \
             ({:.0} B a frame); full repaint (baseline) {full_s:.0} B/s; ratio {:.3}",
            steady as f64 / FRAMES as f64,
            steady_s / full_s.max(1.0)
        );
    }
    app.window_s = 3600.0;
}

fn frames(c: &mut Criterion, week: &mut App) {
    let empty = empty_app();
    let text: Vec<Line> = (0..HEIGHT)
        .map(|r| Line::raw(format!("{r:>3} {}", "1.23e-6 mbar ".repeat(9))))
        .collect();

    let mut g = c.benchmark_group("frame-120x40");
    g.warm_up_time(StdDuration::from_secs(1));
    g.measurement_time(StdDuration::from_secs(4));
    g.throughput(Throughput::Elements(1));
    let mut term = Terminal::new(TestBackend::new(WIDTH, HEIGHT)).expect("terminal");
    g.bench_function("1-paragraph (baseline)", |b| {
        b.iter(|| {
            term.draw(|f| f.render_widget(Paragraph::new(text.clone()), f.area()))
                .expect("draw");
        })
    });
    g.bench_function("2-dashboard, no data (baseline)", |b| {
        b.iter(|| {
            term.draw(|f| render::draw(f, black_box(&empty)))
                .expect("draw");
        })
    });
    for (name, window) in [
        ("3-dashboard, week at 10 Hz, 15 min window", 900.0),
        ("4-dashboard, week at 10 Hz, 1 h window", 3600.0),
        ("5-dashboard, week at 10 Hz, 1 week window", 7.0 * 86_400.0),
    ] {
        week.window_s = window;
        g.bench_function(name, |b| {
            b.iter(|| {
                term.draw(|f| render::draw(f, black_box(&*week)))
                    .expect("draw");
            })
        });
    }
    g.finish();
}

fn main() {
    let days = std::env::var("RAREFY_BENCH_DAYS")
        .ok()
        .and_then(|d| d.parse().ok())
        .unwrap_or(7);
    let mut noise = Noise(1);
    let (mut app, mut next) = week(days, &mut noise);
    bytes_per_second(&mut app, &mut next);
    let mut c = Criterion::default().configure_from_args();
    frames(&mut c, &mut app);
    c.final_summary();
}
