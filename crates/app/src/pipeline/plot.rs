//! `rarefy report --plot F.svg`: the run at a glance, drawn as SVG.
//!
//! Log pressure against time for every gauge, over the ISO 3529-1 ranges as
//! background bands; beside it, a column per named length with the pressures
//! where its flow is viscous, transitional and molecular; the pressure alarm
//! thresholds and `--target` as dashed lines; every alarm raised and cleared
//! as a vertical mark; each rate-of-rise segment as a bold line with its
//! verdict; each pump-down's target reached or predicted.
//!
//! The series come from the report sink's [`PlotData`]: per gauge a
//! [`Decimator`] of at most [`PLOT_BUCKETS`] time buckets, each keeping its
//! earliest, latest, smallest and largest reading, so a log of any length
//! draws in the same memory and a one-reading spike still shows.

use chrono::{DateTime, Utc};
use plotters::coord::Shift;
use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::report::ReportSink;
use crate::alarm::Event;
use crate::alarm::event::Change;
use crate::engine::NamedLength;
use crate::engine::regime::{FlowRegime, IsoEdition, RegimeBounds, VacuumRange};
use crate::report::decimate::PLOT_BUCKETS;
use crate::report::{Decimator, GaugeSummary, RANGES};
use crate::units::{PressureUnit, UnitKind, format_pressure};
use rarefy_core::alarm::MonitorSetup;
use rarefy_core::analysis::{Analysis, Target};

/// Width of the drawing, px.
pub const WIDTH: u32 = 1400;
/// Height of the drawing, px.
pub const HEIGHT: u32 = 820;

/// Colours of the gauges' lines, in the order gauges first appear.
pub const GAUGE_COLOURS: [RGBColor; 6] = [
    RGBColor(0x1f, 0x4e, 0x9c),
    RGBColor(0x2a, 0x8a, 0x3c),
    RGBColor(0x7b, 0x3f, 0xa8),
    RGBColor(0x0f, 0x85, 0x8a),
    RGBColor(0x8c, 0x5a, 0x1e),
    RGBColor(0x55, 0x55, 0x55),
];
/// Threshold and target lines.
pub const THRESHOLD_COLOUR: RGBColor = RGBColor(0xd0, 0x6a, 0x00);
/// An alarm raised.
pub const RAISE_COLOUR: RGBColor = RGBColor(0xc8, 0x1e, 0x1e);
/// An alarm cleared.
pub const CLEAR_COLOUR: RGBColor = RGBColor(0x2e, 0x9d, 0x5a);
/// A rate-of-rise segment.
pub const RISE_COLOUR: RGBColor = RGBColor(0xe0, 0x2f, 0x8f);
/// A pump-down's target reached or predicted.
pub const TARGET_COLOUR: RGBColor = RGBColor(0x11, 0x11, 0x11);
/// The ISO 3529-1 range bands, alternating.
pub const RANGE_FILLS: [RGBColor; 2] = [RGBColor(0xf3, 0xf5, 0xf9), RGBColor(0xe3, 0xe9, 0xf2)];
/// The regime columns: viscous, transitional, molecular.
pub const REGIME_FILLS: [RGBColor; 3] = [
    RGBColor(0xc9, 0xdc, 0xf2),
    RGBColor(0xf6, 0xe3, 0xb4),
    RGBColor(0xcf, 0xe8, 0xcf),
];

/// Named lengths drawn as regime columns (the first ones configured).
pub const REGIME_COLUMNS: usize = 3;

/// A relative spread of λ·p over the run above which the regime columns
/// say they hold for the first reading only (the gas or the temperature
/// changed).
const LAMBDA_P_SPREAD: f64 = 0.02;

const FONT: &str = "sans-serif";

/// What the report sink keeps for the plot: a thinned series per gauge and
/// the setup that draws the bands. Bounded whatever the log's length.
#[derive(Debug, Clone, Default)]
pub struct PlotData {
    /// Per gauge, in the order of the sink's summaries.
    series: Vec<Decimator>,
    /// λ·p, m·Pa: at the first reading with kinetics, and its range.
    lambda_p: Option<(f64, f64, f64)>,
    lengths: Vec<NamedLength>,
    bounds: RegimeBounds,
    edition: IsoEdition,
}

impl PlotData {
    /// A new gauge (the next index); the first one also takes the setup's
    /// lengths and physics.
    pub(crate) fn add_gauge(&mut self, setup: &MonitorSetup) {
        if self.series.is_empty() {
            self.lengths = setup.lengths.clone();
            self.bounds = setup.physics.bounds;
            self.edition = setup.physics.edition;
        }
        self.series.push(Decimator::new(PLOT_BUCKETS));
    }

    /// A reading of gauge `i`: `t_s` from the report's origin, true pressure,
    /// and its mean free path times pressure when the engine derived one.
    pub(crate) fn push(&mut self, i: usize, t_s: f64, p_pa: f64, lambda_p: Option<f64>) {
        if let Some(d) = self.series.get_mut(i) {
            d.push(t_s, p_pa);
        }
        if let Some(lp) = lambda_p.filter(|x| x.is_finite() && *x > 0.0) {
            let e = self.lambda_p.get_or_insert((lp, lp, lp));
            e.1 = e.1.min(lp);
            e.2 = e.2.max(lp);
        }
    }

    /// Gauge `i`'s thinned series.
    pub fn series(&self, i: usize) -> Option<&Decimator> {
        self.series.get(i)
    }
}

/// log10 of a pressure in the display unit: the plot's y.
struct Scale {
    unit: PressureUnit,
}

impl Scale {
    fn y(&self, pa: f64) -> f64 {
        self.unit.value_of(pa).log10()
    }
}

/// A linear axis whose grid lines and labels sit at given values (round
/// times, whole decades), with lighter lines at others.
#[derive(Debug, Clone)]
struct Axis {
    lo: f64,
    hi: f64,
    bold: Vec<f64>,
    light: Vec<f64>,
}

impl Ranged for Axis {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;

    fn map(&self, v: &f64, limit: (i32, i32)) -> i32 {
        let f = if self.hi > self.lo {
            (v - self.lo) / (self.hi - self.lo)
        } else {
            0.5
        };
        let f = if f.is_finite() {
            f.clamp(-1.0, 2.0)
        } else {
            0.5
        };
        limit.0 + (f64::from(limit.1 - limit.0) * f).round() as i32
    }

    fn key_points<H: KeyPointHint>(&self, hint: H) -> Vec<f64> {
        if hint.weight().allow_light_points() {
            self.light.clone()
        } else {
            self.bold.clone()
        }
    }

    fn range(&self) -> std::ops::Range<f64> {
        self.lo..self.hi
    }
}

type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<Axis, Axis>>;

type Area<'b> = DrawingArea<SVGBackend<'b>, Shift>;

/// A colour as the SVG writes it, `#RRGGBB`.
pub fn hex(c: RGBColor) -> String {
    format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
}

/// A name from a log or config as plot text: control characters (not
/// allowed in XML) become `?`.
fn clean(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_control() { '?' } else { c })
        .collect()
}

fn err<E: std::fmt::Display>(e: E) -> String {
    format!("cannot draw the plot: {e}")
}

/// An alarm event's mark: raised (into an active state) or cleared (out of
/// one); other transitions (acknowledge, shelve …) are not drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Mark {
    Raised,
    Cleared,
}

fn mark(e: &Event) -> Option<Mark> {
    match e.change {
        Change::Alarm { from, to } if !from.is_active() && to.is_active() => Some(Mark::Raised),
        Change::Alarm { from, to } if from.is_active() && !to.is_active() => Some(Mark::Cleared),
        _ => None,
    }
}

/// Seconds from `origin`.
fn secs(origin: DateTime<Utc>, t: DateTime<Utc>) -> f64 {
    (t - origin).num_milliseconds() as f64 / 1000.0
}

/// Time ticks: a round step giving at most about ten ticks, on multiples of
/// the step in UTC.
fn time_ticks(origin: DateTime<Utc>, x0: f64, x1: f64) -> (Vec<f64>, f64) {
    const STEPS: [f64; 22] = [
        1.0, 2.0, 5.0, 10.0, 15.0, 30.0, 60.0, 120.0, 300.0, 600.0, 900.0, 1800.0, 3600.0, 7200.0,
        10800.0, 21600.0, 43200.0, 86400.0, 172800.0, 604800.0, 1209600.0, 2592000.0,
    ];
    let span = (x1 - x0).max(1.0);
    let step = STEPS
        .iter()
        .copied()
        .find(|s| span / s <= 10.0)
        .unwrap_or_else(|| (span / 10.0 / 86400.0).ceil() * 86400.0);
    let o = origin.timestamp() as f64 + f64::from(origin.timestamp_subsec_millis()) / 1000.0;
    let first = ((o + x0) / step).ceil() * step - o;
    let ticks = (0..)
        .map(|i| first + f64::from(i) * step)
        .take_while(|t| *t <= x1 + 1e-9)
        .take(64)
        .collect();
    (ticks, step)
}

fn time_label(origin: DateTime<Utc>, s: f64, step: f64, span: f64) -> String {
    let t = origin + chrono::Duration::milliseconds((s * 1000.0).round() as i64);
    let f = if step < 60.0 {
        "%H:%M:%S"
    } else if span <= 86400.0 {
        "%H:%M"
    } else {
        "%m-%d %H:%M"
    };
    t.format(f).to_string()
}

fn decade_label(y: f64) -> String {
    format!("1e{}", y.round() as i64)
}

/// A range's name on its band.
fn range_name(r: VacuumRange) -> String {
    match r {
        VacuumRange::AboveAtmospheric | VacuumRange::Atmospheric => r.as_str().replace('-', " "),
        _ => format!("{} vacuum", r.as_str()),
    }
}

/// Breaks a name into lines of at most `width` characters, at spaces and
/// after hyphens; at most three lines, the last cut with "…".
fn wrap(name: &str, width: usize) -> Vec<String> {
    let mut words: Vec<String> = Vec::new();
    for w in name.split(' ') {
        let mut part = String::new();
        for c in w.chars() {
            part.push(c);
            if c == '-' {
                words.push(std::mem::take(&mut part));
            }
        }
        if !part.is_empty() {
            words.push(part + " ");
        }
    }
    let mut lines: Vec<String> = vec![String::new()];
    for w in words {
        let cur = lines.last().map_or(0, |l| l.trim_end().chars().count());
        if cur > 0 && cur + w.trim_end().chars().count() > width {
            lines.push(String::new());
        }
        if let Some(l) = lines.last_mut() {
            l.push_str(&w);
        }
    }
    let mut out: Vec<String> = lines.iter().map(|l| l.trim_end().to_string()).collect();
    if out.len() > 3 {
        out.truncate(3);
        if let Some(l) = out.last_mut() {
            l.push('…');
        }
    }
    for l in &mut out {
        if l.chars().count() > width + 1 {
            *l = l.chars().take(width).collect::<String>() + "…";
        }
    }
    out
}

/// The plot's inputs, gathered from the sink.
struct Run<'s> {
    data: &'s PlotData,
    summaries: Vec<GaugeSummary>,
    analyses: Vec<Analysis>,
    events: &'s [Event],
    origin: DateTime<Utc>,
    scale: Scale,
}

impl Run<'_> {
    /// The `--target` pressure, when given.
    fn target_pa(&self) -> Option<f64> {
        self.summaries
            .iter()
            .flat_map(|g| &g.thresholds)
            .find(|(t, _)| t.source == "--target")
            .map(|(t, _)| t.pa)
    }

    /// Every threshold once, by source and pressure.
    fn thresholds(&self) -> Vec<(String, f64)> {
        let mut out: Vec<(String, f64)> = Vec::new();
        for (t, _) in self.summaries.iter().flat_map(|g| &g.thresholds) {
            if !out.iter().any(|(s, p)| *s == t.source && *p == t.pa) {
                out.push((t.source.clone(), t.pa));
            }
        }
        out
    }

    /// The time span drawn, s from the origin: the data, the marks, and a
    /// predicted target if it is not too far ahead.
    fn x_range(&self) -> (f64, f64) {
        let mut lo = f64::INFINITY;
        let mut hi = f64::NEG_INFINITY;
        for (a, b) in self.data.series.iter().filter_map(Decimator::time_range) {
            lo = lo.min(a);
            hi = hi.max(b);
        }
        for e in self.events.iter().filter(|e| mark(e).is_some()) {
            let s = secs(self.origin, e.time);
            lo = lo.min(s);
            hi = hi.max(s);
        }
        let data_span = (hi - lo).max(1.0);
        for pd in self.analyses.iter().flat_map(|a| &a.pumpdowns) {
            if let Some(Target::Predicted { after_s, .. }) = pd.target {
                let at = pd.start_s + after_s;
                if at > hi && at - lo <= 2.0 * data_span {
                    hi = at;
                }
            }
        }
        if !lo.is_finite() {
            return (0.0, 1.0);
        }
        if hi - lo < 1.0 {
            (lo - 0.5, lo + 0.5)
        } else {
            let pad = (hi - lo) * 0.01;
            (lo - pad, hi + pad)
        }
    }

    /// The decades drawn, in the display unit: the data, thresholds and
    /// rate-of-rise ends.
    fn y_range(&self) -> Option<(f64, f64)> {
        let data: Vec<f64> = self
            .data
            .series
            .iter()
            .filter_map(Decimator::value_range)
            .flat_map(|(a, b)| [a, b])
            .collect();
        if data.is_empty() {
            return None;
        }
        let marks = self.thresholds().into_iter().map(|(_, pa)| pa).chain(
            self.analyses
                .iter()
                .flat_map(|a| &a.rises)
                .flat_map(|r| [r.start_pa, r.end_pa]),
        );
        let all: Vec<f64> = data
            .into_iter()
            .chain(marks)
            .filter(|pa| pa.is_finite() && *pa > 0.0)
            .collect();
        let lo = all.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = all.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if !lo.is_finite() || !hi.is_finite() {
            return None;
        }
        let y0 = self.scale.y(lo).floor();
        let mut y1 = self.scale.y(hi).ceil();
        if y1 - y0 < 1.0 {
            y1 = y0 + 1.0;
        }
        Some((y0, y1))
    }
}

/// The run's plot as an SVG document. `title`: what the plot is of (the
/// files). Fails when there is no pressure reading to draw.
pub fn render(sink: &ReportSink, unit: PressureUnit, title: &str) -> Result<String, String> {
    let data = sink
        .plot_data()
        .ok_or_else(|| "the report kept no data for a plot".to_string())?;
    let origin = sink
        .origin()
        .ok_or_else(|| "no readings to plot".to_string())?;
    let run = Run {
        data,
        summaries: sink.summaries(),
        analyses: sink.analyses(),
        events: sink.events(),
        origin,
        scale: Scale { unit },
    };
    let (y0, y1) = run
        .y_range()
        .ok_or_else(|| "no valid pressure reading to plot".to_string())?;
    let (x0, x1) = run.x_range();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let body = root
            .titled(&clean(title), (FONT, 22).into_font().color(&BLACK))
            .map_err(err)?;
        let (body, footer) = body.split_vertically(body.dim_in_pixel().1 as i32 - 64);
        let columns: Vec<&NamedLength> = match data.lambda_p {
            Some(_) => data.lengths.iter().take(REGIME_COLUMNS).collect(),
            None => Vec::new(),
        };
        let side_w = if columns.is_empty() {
            0
        } else {
            40 + 105 * columns.len() as i32
        };
        let (main, side) = body.split_horizontally(WIDTH as i32 - side_w);
        let legend = draw_main(&main, &run, (x0, x1), (y0, y1))?;
        if !columns.is_empty() {
            draw_regimes(&side, &run, &columns, (y0, y1))?;
        }
        draw_footer(&footer, &run, &legend, !columns.is_empty())?;
        root.present().map_err(err)?;
    }
    Ok(svg)
}

/// What the legend shows: the entries that were drawn.
#[derive(Debug, Default)]
struct Legend {
    gauges: Vec<(String, RGBColor)>,
    threshold: bool,
    raised: bool,
    cleared: bool,
    rise: bool,
    target: bool,
}

const X_LABEL_AREA: u32 = 58;
const MARGIN: u32 = 14;

fn draw_main(
    area: &Area<'_>,
    run: &Run<'_>,
    (x0, x1): (f64, f64),
    (y0, y1): (f64, f64),
) -> Result<Legend, String> {
    let (ticks, step) = time_ticks(run.origin, x0, x1);
    // One label per decade; every n-th on a run over many decades.
    let every = ((y1 - y0) / 16.0).ceil().max(1.0) as usize;
    let decades: Vec<f64> = (y0 as i64..=y1 as i64)
        .step_by(every)
        .map(|d| d as f64)
        .collect();
    let minor: Vec<f64> = if every == 1 && decades.len() <= 12 {
        decades
            .iter()
            .flat_map(|d| (2..10).map(move |m| d + f64::from(m).log10()))
            .filter(|y| *y < y1)
            .collect()
    } else {
        Vec::new()
    };
    let mut chart: Chart<'_, '_> = ChartBuilder::on(area)
        .margin(MARGIN)
        .x_label_area_size(X_LABEL_AREA)
        .y_label_area_size(78)
        .build_cartesian_2d(
            Axis {
                lo: x0,
                hi: x1,
                bold: ticks,
                light: Vec::new(),
            },
            Axis {
                lo: y0,
                hi: y1,
                bold: decades,
                light: minor,
            },
        )
        .map_err(err)?;

    // ISO 3529-1 range bands, behind everything.
    let edition = run.data.edition;
    let mut band = 0;
    for r in RANGES {
        let Some((upper, lower)) = edition.limits(r) else {
            continue;
        };
        let top = if upper.is_finite() {
            run.scale.y(upper).min(y1)
        } else {
            y1
        };
        let bottom = if lower > 0.0 {
            run.scale.y(lower).max(y0)
        } else {
            y0
        };
        if top <= bottom {
            continue;
        }
        let fill = RANGE_FILLS[band % RANGE_FILLS.len()];
        band += 1;
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(x0, bottom), (x1, top)],
                fill.filled(),
            )))
            .map_err(err)?;
        let px = chart.backend_coord(&(x1, bottom)).1 - chart.backend_coord(&(x1, top)).1;
        if px >= 18 {
            chart
                .draw_series(std::iter::once(
                    EmptyElement::at((x1, top))
                        + Text::new(
                            range_name(r),
                            (-8, 5),
                            (FONT, 14)
                                .into_font()
                                .style(FontStyle::Italic)
                                .color(&RGBColor(0x60, 0x6a, 0x7a))
                                .pos(Pos::new(HPos::Right, VPos::Top)),
                        ),
                ))
                .map_err(err)?;
        }
    }

    let span = x1 - x0;
    chart
        .configure_mesh()
        .x_label_formatter(&|x| time_label(run.origin, *x, step, span))
        .y_label_formatter(&|y| decade_label(*y))
        .x_desc(format!(
            "time (UTC), from {}",
            run.origin.format("%Y-%m-%d %H:%M:%S")
        ))
        .y_desc(format!("pressure, {} (log scale)", run.scale.unit.symbol()))
        .label_style((FONT, 15))
        .axis_desc_style((FONT, 16))
        .bold_line_style(BLACK.mix(0.18))
        .light_line_style(BLACK.mix(0.06))
        .draw()
        .map_err(err)?;

    let mut legend = Legend::default();

    // Labels go on last, over the lines, each where no other one is.
    let mut labels: Vec<Label> = Vec::new();

    // Thresholds and the target: dashed, labelled at the left.
    for (source, pa) in run.thresholds() {
        let y = run.scale.y(pa);
        legend.threshold = true;
        chart
            .draw_series(DashedLineSeries::new(
                [(x0, y), (x1, y)],
                10,
                6,
                THRESHOLD_COLOUR.stroke_width(2),
            ))
            .map_err(err)?;
        labels.push(Label {
            at: (x0, y),
            dx: 6,
            above: true,
            right: false,
            text: format!("{} {}", clean(&source), format_pressure(pa, run.scale.unit)),
            colour: THRESHOLD_COLOUR,
            bold: false,
        });
    }

    // The gauges' pressures, broken at gaps.
    let mut colour_i = 0;
    for (i, g) in run.summaries.iter().enumerate() {
        let Some(d) = run.data.series(i).filter(|d| !d.is_empty()) else {
            continue;
        };
        let colour = GAUGE_COLOURS[colour_i % GAUGE_COLOURS.len()];
        colour_i += 1;
        legend.gauges.push((clean(&g.id), colour));
        let gap = g
            .gap_after_s
            .unwrap_or(f64::INFINITY)
            .max(2.0 * d.width_s());
        let mut piece: Vec<(f64, f64)> = Vec::new();
        let mut last_t = f64::NEG_INFINITY;
        for (t, p) in d.points() {
            if t - last_t > gap && !piece.is_empty() {
                draw_piece(&mut chart, &piece, colour)?;
                piece.clear();
            }
            last_t = t;
            piece.push((t, run.scale.y(p).clamp(y0, y1)));
        }
        draw_piece(&mut chart, &piece, colour)?;
    }

    // Rate-of-rise segments: the straight line p(t) from the first to the
    // last reading (a curve on the log scale), bold, with the verdict.
    let plot_right = chart.backend_coord(&(x1, y0)).0;
    for (g, a) in run.summaries.iter().zip(&run.analyses) {
        for r in &a.rises {
            legend.rise = true;
            let n = 48;
            let line: Vec<(f64, f64)> = (0..=n)
                .map(|k| {
                    let f = f64::from(k) / f64::from(n);
                    let p = r.start_pa + (r.end_pa - r.start_pa) * f;
                    let t = r.from_s + (r.to_s - r.from_s) * f;
                    (t.clamp(x0, x1), run.scale.y(p).clamp(y0, y1))
                })
                .collect();
            chart
                .draw_series(LineSeries::new(
                    line.iter().copied(),
                    RISE_COLOUR.mix(0.75).stroke_width(5),
                ))
                .map_err(err)?;
            let (Some(&from), Some(&to)) = (line.first(), line.last()) else {
                continue;
            };
            chart
                .draw_series(
                    [from, to]
                        .into_iter()
                        .map(|p| Circle::new(p, 4, RISE_COLOUR.filled())),
                )
                .map_err(err)?;
            let mut text = format!("{}: rate of rise, {}", clean(&g.id), r.verdict.as_str());
            if let Some(q) = &r.leak_rate {
                text.push_str(&format!(", Q {:.2e} mbar·L/s", q.mbar_l_per_s));
            }
            let right = chart.backend_coord(&to).0 > plot_right - 380;
            labels.push(Label {
                at: to,
                dx: if right { -10 } else { 10 },
                above: true,
                right,
                text,
                colour: RISE_COLOUR,
                bold: true,
            });
        }
    }

    // Pump-down targets: reached (a dot), predicted (a ring with its band).
    if let Some(target) = run.target_pa() {
        let y = run.scale.y(target).clamp(y0, y1);
        for pd in run.analyses.iter().flat_map(|a| &a.pumpdowns) {
            let label = |at: (f64, f64), dx: i32, right: bool, text: String| Label {
                at,
                dx,
                above: false,
                right,
                text,
                colour: TARGET_COLOUR,
                bold: false,
            };
            match pd.target {
                Some(Target::Reached { at_s, .. }) => {
                    legend.target = true;
                    let at = (at_s.clamp(x0, x1), y);
                    chart
                        .draw_series(std::iter::once(Circle::new(at, 6, TARGET_COLOUR.filled())))
                        .map_err(err)?;
                    labels.push(label(at, 8, false, "target reached".into()));
                }
                Some(Target::Predicted {
                    after_s,
                    after_low_s,
                    after_high_s,
                    ..
                }) => {
                    legend.target = true;
                    let at = pd.start_s + after_s;
                    if at > x1 {
                        labels.push(label(
                            (x1, y),
                            -8,
                            true,
                            format!(
                                "target predicted {} →",
                                time_label(run.origin, at, 60.0, 2.0 * 86400.0)
                            ),
                        ));
                        continue;
                    }
                    let lo = (pd.start_s + after_low_s).clamp(x0, x1);
                    let hi = (pd.start_s + after_high_s).clamp(x0, x1);
                    chart
                        .draw_series(LineSeries::new(
                            [(lo, y), (hi, y)],
                            TARGET_COLOUR.stroke_width(2),
                        ))
                        .map_err(err)?;
                    chart
                        .draw_series(std::iter::once(Circle::new(
                            (at, y),
                            6,
                            TARGET_COLOUR.stroke_width(2),
                        )))
                        .map_err(err)?;
                    labels.push(label((at, y), 8, false, "target predicted".into()));
                }
                Some(Target::NotPredictable { .. }) | None => {}
            }
        }
    }

    // Alarm marks: raised solid, cleared dashed; ids where there is room.
    let mut last_label_px: Option<i32> = None;
    for e in run.events {
        let Some(m) = mark(e) else { continue };
        let x = secs(run.origin, e.time).clamp(x0, x1);
        let line = [(x, y0), (x, y1)];
        let colour = match m {
            Mark::Raised => RAISE_COLOUR,
            Mark::Cleared => CLEAR_COLOUR,
        };
        match m {
            Mark::Raised => {
                legend.raised = true;
                chart
                    .draw_series(LineSeries::new(line, colour.stroke_width(2)))
                    .map_err(err)?;
                chart
                    .draw_series(std::iter::once(TriangleMarker::new(
                        (x, y1),
                        7,
                        colour.filled(),
                    )))
                    .map_err(err)?;
            }
            Mark::Cleared => {
                legend.cleared = true;
                chart
                    .draw_series(DashedLineSeries::new(line, 6, 5, colour.stroke_width(2)))
                    .map_err(err)?;
            }
        }
        let px = chart.backend_coord(&(x, y1)).0;
        if last_label_px.is_none_or(|l| px - l >= 16) {
            last_label_px = Some(px);
            chart
                .draw_series(std::iter::once(
                    EmptyElement::at((x, y1))
                        + Text::new(
                            clean(&e.id),
                            (16, 12),
                            (FONT, 13)
                                .into_font()
                                .color(&colour)
                                .transform(FontTransform::Rotate90)
                                .pos(Pos::new(HPos::Left, VPos::Top)),
                        ),
                ))
                .map_err(err)?;
        }
    }

    place_labels(&mut chart, &labels)?;
    Ok(legend)
}

/// A text on the plot at a point, on a white backing.
struct Label {
    at: (f64, f64),
    /// Horizontal offset from the point, px.
    dx: i32,
    /// Above the point (else below).
    above: bool,
    /// Ends at the point (else starts there).
    right: bool,
    text: String,
    colour: RGBColor,
    bold: bool,
}

/// Draws the labels inside the plot, each moved away from its point (down
/// or up) until it overlaps no label drawn before it.
fn place_labels(chart: &mut Chart<'_, '_>, labels: &[Label]) -> Result<(), String> {
    let (left, top) = {
        let x = chart.x_range().start;
        let y = chart.y_range().end;
        chart.backend_coord(&(x, y))
    };
    let (right, bottom) = {
        let x = chart.x_range().end;
        let y = chart.y_range().start;
        chart.backend_coord(&(x, y))
    };
    let mut placed: Vec<(i32, i32, i32, i32)> = Vec::new();
    for l in labels {
        let font = (FONT, 15)
            .into_font()
            .style(if l.bold {
                FontStyle::Bold
            } else {
                FontStyle::Normal
            })
            .color(&l.colour)
            .pos(Pos::new(HPos::Left, VPos::Top));
        let (w, h) = chart
            .plotting_area()
            .estimate_text_size(&l.text, &font)
            .map_err(err)?;
        let (w, h) = (w as i32 + 6, h as i32 + 4);
        let (px, py) = chart.backend_coord(&l.at);
        let x = if l.right { px + l.dx - w } else { px + l.dx };
        let x = x.min(right - w - 2).max(left + 2);
        let inside = |y: i32| y.min(bottom - h - 2).max(top + 2);
        let mut y = inside(if l.above { py - 4 - h } else { py + 4 });
        // Away from the point, and back the other way at the plot's edge.
        let mut step = if l.above { -(h + 2) } else { h + 2 };
        for _ in 0..8 {
            let hit = placed
                .iter()
                .any(|&(a, b, c, d)| x < c && a < x + w && y < d && b < y + h);
            if !hit {
                break;
            }
            if inside(y + step) != y + step {
                step = -step;
            }
            y = inside(y + step);
        }
        placed.push((x, y, x + w, y + h));
        let (dx, dy) = (x - px, y - py);
        chart
            .draw_series(std::iter::once(
                EmptyElement::at(l.at)
                    + Rectangle::new([(dx, dy), (dx + w, dy + h)], WHITE.mix(0.8).filled())
                    + Text::new(l.text.clone(), (dx + 3, dy + 2), font),
            ))
            .map_err(err)?;
    }
    Ok(())
}

fn draw_piece(
    chart: &mut Chart<'_, '_>,
    piece: &[(f64, f64)],
    colour: RGBColor,
) -> Result<(), String> {
    match piece {
        [] => Ok(()),
        [one] => chart
            .draw_series(std::iter::once(Circle::new(*one, 2, colour.filled())))
            .map(|_| ())
            .map_err(err),
        _ => chart
            .draw_series(LineSeries::new(
                piece.iter().copied(),
                colour.stroke_width(2),
            ))
            .map(|_| ())
            .map_err(err),
    }
}

/// A column per named length: where its flow is viscous, transitional and
/// molecular, on the main plot's pressure scale.
fn draw_regimes(
    area: &Area<'_>,
    run: &Run<'_>,
    columns: &[&NamedLength],
    (y0, y1): (f64, f64),
) -> Result<(), String> {
    let Some((lambda_p, _, _)) = run.data.lambda_p else {
        return Ok(());
    };
    let n = columns.len() as f64;
    let mut chart = ChartBuilder::on(area)
        .margin(MARGIN)
        .margin_left(24)
        .x_label_area_size(X_LABEL_AREA)
        .build_cartesian_2d(0.0..n, y0..y1)
        .map_err(err)?;
    let regimes = [
        FlowRegime::Viscous,
        FlowRegime::Transitional,
        FlowRegime::Molecular,
    ];
    for (j, l) in columns.iter().enumerate() {
        let Some((viscous_pa, molecular_pa)) = run.data.bounds.pressures(lambda_p, l.length_m)
        else {
            continue;
        };
        let yv = run.scale.y(viscous_pa);
        let ym = run.scale.y(molecular_pa);
        let spans = [(yv.max(y0), y1), (ym.max(y0), yv.min(y1)), (y0, ym.min(y1))];
        let (a, b) = (j as f64 + 0.06, j as f64 + 0.94);
        for ((lo, hi), (regime, fill)) in spans.into_iter().zip(regimes.iter().zip(REGIME_FILLS)) {
            if hi <= lo {
                continue;
            }
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(a, lo), (b, hi)],
                    fill.filled(),
                )))
                .map_err(err)?;
            let px = chart.backend_coord(&(a, lo)).1 - chart.backend_coord(&(a, hi)).1;
            let name = regime.as_str();
            if f64::from(px) >= name.len() as f64 * 7.0 + 8.0 {
                chart
                    .draw_series(std::iter::once(
                        EmptyElement::at((j as f64 + 0.5, (lo + hi) / 2.0))
                            + Text::new(
                                name,
                                (0, 0),
                                (FONT, 14)
                                    .into_font()
                                    .color(&RGBColor(0x33, 0x33, 0x33))
                                    .transform(FontTransform::Rotate270)
                                    .pos(Pos::new(HPos::Center, VPos::Center)),
                            ),
                    ))
                    .map_err(err)?;
            }
        }
        // The length's name under its column.
        for (k, line) in wrap(&clean(&l.name), 12).into_iter().enumerate() {
            chart
                .draw_series(std::iter::once(
                    EmptyElement::at((j as f64 + 0.5, y0))
                        + Text::new(
                            line,
                            (0, 8 + 15 * k as i32),
                            (FONT, 13)
                                .into_font()
                                .color(&BLACK)
                                .pos(Pos::new(HPos::Center, VPos::Top)),
                        ),
                ))
                .map_err(err)?;
        }
    }
    Ok(())
}

/// The legend, and what the bands mean, under the plot.
fn draw_footer(
    area: &Area<'_>,
    run: &Run<'_>,
    legend: &Legend,
    regimes: bool,
) -> Result<(), String> {
    let font = (FONT, 15).into_font().color(&BLACK);
    let mut x = 90;
    let y = 14;
    let mut entry =
        |sample: &dyn Fn(&Area<'_>, i32) -> Result<(), String>, text: &str| -> Result<(), String> {
            sample(area, x)?;
            area.draw(&Text::new(
                text.to_string(),
                (x + 34, y),
                font.clone().pos(Pos::new(HPos::Left, VPos::Center)),
            ))
            .map_err(err)?;
            let w = area
                .estimate_text_size(text, &font)
                .map_or(8 * text.len() as i32, |(w, _)| w as i32);
            x += 34 + w + 26;
            Ok(())
        };
    let line = |colour: RGBColor, width: u32| {
        move |a: &Area<'_>, x: i32| {
            a.draw(&PathElement::new(
                vec![(x, y), (x + 26, y)],
                colour.stroke_width(width),
            ))
            .map_err(err)
        }
    };
    let dashed = |colour: RGBColor| {
        move |a: &Area<'_>, x: i32| {
            for (s, e) in [(0, 7), (11, 18), (22, 26)] {
                a.draw(&PathElement::new(
                    vec![(x + s, y), (x + e, y)],
                    colour.stroke_width(2),
                ))
                .map_err(err)?;
            }
            Ok(())
        }
    };
    for (id, colour) in &legend.gauges {
        entry(&line(*colour, 2), id)?;
    }
    if legend.threshold {
        entry(&dashed(THRESHOLD_COLOUR), "threshold")?;
    }
    if legend.raised {
        entry(&line(RAISE_COLOUR, 2), "alarm raised")?;
    }
    if legend.cleared {
        entry(&dashed(CLEAR_COLOUR), "alarm cleared")?;
    }
    if legend.rise {
        entry(&line(RISE_COLOUR, 6), "rate of rise")?;
    }
    if legend.target {
        entry(
            &|a: &Area<'_>, x: i32| {
                a.draw(&Circle::new((x + 13, y), 6, TARGET_COLOUR.filled()))
                    .map_err(err)
            },
            "target",
        )?;
    }
    let b = run.data.bounds;
    let mut note = format!(
        "Bands: ISO 3529-1:{} vacuum ranges.",
        run.data.edition.year()
    );
    if regimes && let Some((first, lo, hi)) = run.data.lambda_p {
        note.push_str(&format!(
            " Columns: flow regime per named length, Kn = λ/L < {} viscous, > {} molecular, at λ·p = {:.3e} m·Pa",
            b.viscous_below, b.molecular_above, first
        ));
        if (hi - lo) > LAMBDA_P_SPREAD * first {
            note.push_str(" (the first reading's; the gas or temperature changed in the run)");
        }
        note.push('.');
    }
    area.draw(&Text::new(
        note,
        (90, 42),
        (FONT, 14)
            .into_font()
            .color(&RGBColor(0x44, 0x44, 0x44))
            .pos(Pos::new(HPos::Left, VPos::Center)),
    ))
    .map_err(err)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::TimeZone;

    #[test]
    fn names_wrap_at_spaces_and_hyphens() {
        assert_eq!(wrap("chamber bore", 12), vec!["chamber bore"]);
        assert_eq!(
            wrap("source-to-substrate", 12),
            vec!["source-to-", "substrate"]
        );
        assert_eq!(wrap("pumping line", 8), vec!["pumping", "line"]);
        assert_eq!(wrap("abcdefghijklmnopq", 5), vec!["abcde…"]);
    }

    #[test]
    fn time_ticks_are_round_and_inside() {
        let o = Utc
            .with_ymd_and_hms(2026, 11, 3, 7, 0, 5)
            .single()
            .expect("time");
        let (ticks, step) = time_ticks(o, 0.0, 8995.0);
        assert_eq!(step, 900.0);
        assert_eq!(time_label(o, ticks[0], step, 8995.0), "07:15");
        assert!(ticks.iter().all(|t| (0.0..=8995.0).contains(t)));
        assert!(ticks.len() <= 11);
        let (_, step) = time_ticks(o, 0.0, 40.0);
        assert_eq!(step, 5.0);
        assert_eq!(time_label(o, 0.0, step, 40.0), "07:00:05");
        assert_eq!(decade_label(-5.0), "1e-5");
        assert_eq!(decade_label(3.0), "1e3");
    }
}
