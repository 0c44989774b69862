//! Dashboard drawing cost.
//!
//! * Frame time at 120×40 into a test backend with a week of history at 1 s
//!   (604 800 rows of three channels, fed through `App::ingest`), against
//!   two baselines measured in the same run: the same dashboard with no data,
//!   and a plain full-screen paragraph.
//! * Bytes written to a terminal per second at a steady 10 rows/s, one row
//!   per frame, through the crossterm backend into a counting sink, against a
//!   full repaint of every frame.
//!
//! The machine is shared and noisy; read the figures as ratios to their
//! baselines.

use std::hint::black_box;
use std::path::Path;
use std::sync::atomic::Ordering;

use chrono::{DateTime, Duration, TimeZone, Utc};
use criterion::Criterion;
use rarefy::alarm::Monitor;
use rarefy::config::Config;
use rarefy::sample::{ChannelUnit, Sample, SourceEvent};
use rarefy::ui::app::{App, GaugeInfo};
use rarefy::ui::render;
use rarefy::ui::term::Counting;
use rarefy::units::{PressureUnit, TemperatureUnit};
use ratatui::backend::{CrosstermBackend, TestBackend};
use ratatui::layout::Rect;
use ratatui::text::Line;
use ratatui::widgets::Paragraph;
use ratatui::{Terminal, TerminalOptions, Viewport};

const CONFIG: &str = include_str!("../config/demo.toml");
const WIDTH: u16 = 120;
const HEIGHT: u16 = 40;
const WEEK_S: usize = 7 * 86_400;

fn config() -> Config {
    rarefy::config::parse(CONFIG, Path::new("config/demo.toml")).expect("demo config")
}

fn empty_app() -> App {
    let config = config();
    let gauges = config
        .gauges
        .iter()
        .map(|g| GaugeInfo {
            id: g.id.clone(),
            label: g.label.clone(),
            kind: Some(g.kind),
            unit: ChannelUnit::Pressure(config.display.pressure_unit),
        })
        .collect();
    let monitor = Monitor::new(config.monitor_setup(Vec::new()));
    App::new(config.chamber.name.clone(), monitor, gauges)
}

fn t0() -> DateTime<Utc> {
    Utc.timestamp_opt(1_780_000_000, 0).single().expect("time")
}

/// A small deterministic noise source.
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

/// Row `i` at `t`: the chamber pumping down to a base pressure with a daily
/// bump, the ion gauge close to it, and the wall temperature.
fn row(i: usize, t: DateTime<Utc>, noise: &mut Noise) -> SourceEvent {
    let s = i as f64;
    let base = 2e-7 * (1.0 + 0.5 * (s / 86_400.0 * std::f64::consts::TAU).sin());
    let p = 1e3 * (-s / 60.0).exp() + base * (1.0 + 0.05 * noise.next());
    let mbar = ChannelUnit::Pressure(PressureUnit::Mbar);
    SourceEvent::Samples(vec![
        Sample::ok(t, "chamber", p, mbar),
        Sample::ok(t, "ion", p * (1.0 + 0.03 * noise.next()), mbar),
        Sample::ok(
            t,
            "wall",
            22.0 + 0.2 * noise.next(),
            ChannelUnit::Temperature(TemperatureUnit::C),
        ),
    ])
}

/// The dashboard after `rows` rows every `step`.
fn app_with(rows: usize, step: Duration, noise: &mut Noise) -> (App, DateTime<Utc>) {
    let mut app = empty_app();
    let mut t = t0();
    for i in 0..rows {
        app.ingest(&row(i, t, noise), None);
        t += step;
    }
    (app, t)
}

fn frames(c: &mut Criterion) {
    let started = std::time::Instant::now();
    let (mut week, _) = app_with(WEEK_S, Duration::seconds(1), &mut Noise(1));
    eprintln!(
        "fed {WEEK_S} rows ({} samples) in {:.1} s; history buckets decimated: {}",
        week.counters.samples,
        started.elapsed().as_secs_f64(),
        week.history.decimated()
    );
    let empty = empty_app();
    let text: Vec<Line> = (0..HEIGHT)
        .map(|r| Line::raw(format!("{r:>3} {}", "1.23e-6 mbar ".repeat(9))))
        .collect();

    let mut g = c.benchmark_group("frame-120x40");
    g.sample_size(30);
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
    week.window_s = 3600.0;
    g.bench_function("3-dashboard, week of history, 1 h window", |b| {
        b.iter(|| {
            term.draw(|f| render::draw(f, black_box(&week)))
                .expect("draw");
        })
    });
    week.window_s = 7.0 * 86_400.0;
    g.bench_function("4-dashboard, week of history, 1 week window", |b| {
        b.iter(|| {
            term.draw(|f| render::draw(f, black_box(&week)))
                .expect("draw");
        })
    });
    g.finish();
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

/// Bytes written over `frames` frames at 10 rows/s, one row per frame,
/// after an hour of data; with `repaint` every frame clears the screen and
/// is drawn in full (a fresh terminal each frame, nothing to diff against).
fn bytes_written(frames: usize, repaint: bool) -> (u64, u64) {
    let step = Duration::milliseconds(100);
    let mut noise = Noise(7);
    let (mut app, mut t) = app_with(36_000, step, &mut noise);
    let (sink, bytes) = Counting::new(std::io::sink());
    let mut term = counting_term(sink.clone());
    term.draw(|f| render::draw(f, &app)).expect("first frame");
    let first = bytes.swap(0, Ordering::Relaxed);
    for i in 0..frames {
        app.ingest(&row(36_000 + i, t, &mut noise), None);
        t += step;
        if repaint {
            term = counting_term(sink.clone());
            ratatui::backend::Backend::clear(term.backend_mut()).expect("clear");
        }
        term.draw(|f| render::draw(f, &app)).expect("frame");
    }
    (first, bytes.load(Ordering::Relaxed))
}

fn bytes_per_second() {
    const FRAMES: usize = 300;
    let seconds = FRAMES as f64 / 10.0;
    let (first, steady) = bytes_written(FRAMES, false);
    let (_, full) = bytes_written(FRAMES, true);
    let (steady_s, full_s) = (steady as f64 / seconds, full as f64 / seconds);
    println!("terminal output at 10 rows/s, {WIDTH}x{HEIGHT}, {FRAMES} frames:");
    println!("  first frame            {first} bytes");
    println!("  steady (diffed)        {steady_s:.0} bytes/s");
    println!("  full repaint (baseline) {full_s:.0} bytes/s");
    println!("  ratio steady/full      {:.3}", steady_s / full_s.max(1.0));
}

fn main() {
    bytes_per_second();
    let mut c = Criterion::default().configure_from_args();
    frames(&mut c);
    c.final_summary();
}
