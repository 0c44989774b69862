//! Drawing: one function per panel, and a layout that fills large terminals
//! and collapses in a fixed order on small ones (the trend goes first, then
//! the lengths, then the kinetics; readings, alarms and the status line
//! always stay).

mod trend;

use chrono::{DateTime, Utc};
use ratatui::Frame;
use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Direction, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::border;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Paragraph};

use super::app::{App, Overlay};
use super::keys::{FOOTER_LIVE, FOOTER_REPLAY, HELP};
use crate::alarm::quantity::Quantity;
use crate::alarm::rule::Severity;
use crate::alarm::{AlarmState, GateState};
use crate::sample::{ChannelUnit, SourceState, Status};
use crate::units::{self, format_sig};

/// Styles and glyphs, with colour or without, Unicode or ASCII.
#[derive(Debug, Clone)]
pub struct Look {
    /// ASCII only.
    pub ascii: bool,
    /// Colour.
    pub color: bool,
    /// Secondary text.
    pub dim: Style,
    /// Decade rules.
    pub grid: Style,
    /// Threshold lines.
    pub threshold: Style,
    /// Alarm marks and unacknowledged alarms.
    pub alarm: Style,
    /// Titles.
    pub title: Style,
}

impl Look {
    /// The look for an app.
    pub fn of(app: &App) -> Look {
        let c = app.color;
        Look {
            ascii: app.ascii,
            color: c,
            dim: if c {
                Style::default().fg(Color::Gray)
            } else {
                Style::default()
            },
            grid: if c {
                Style::default().fg(Color::DarkGray)
            } else {
                Style::default()
            },
            threshold: if c {
                Style::default().fg(Color::Yellow)
            } else {
                Style::default()
            },
            alarm: if c {
                Style::default().fg(Color::Red).add_modifier(Modifier::BOLD)
            } else {
                Style::default().add_modifier(Modifier::BOLD | Modifier::REVERSED)
            },
            title: Style::default().add_modifier(Modifier::BOLD),
        }
    }

    fn block<'a>(&self, title: &'a str) -> Block<'a> {
        let set = if self.ascii {
            border::Set {
                top_left: "+",
                top_right: "+",
                bottom_left: "+",
                bottom_right: "+",
                vertical_left: "|",
                vertical_right: "|",
                horizontal_top: "-",
                horizontal_bottom: "-",
            }
        } else {
            border::ROUNDED
        };
        Block::default()
            .borders(Borders::ALL)
            .border_set(set)
            .title(Span::styled(format!(" {title} "), self.title))
    }

    /// A state's style; how loud an alarm in alarm is depends on its
    /// severity, so a notice never looks like a trip.
    fn state_style(&self, s: AlarmState, sev: Severity) -> Style {
        let base = Style::default();
        match (s, self.color) {
            (AlarmState::Unacknowledged | AlarmState::Acknowledged, _)
                if sev == Severity::Notice =>
            {
                if s == AlarmState::Unacknowledged {
                    base.add_modifier(Modifier::BOLD)
                } else {
                    base
                }
            }
            (AlarmState::Unacknowledged, _) if sev == Severity::Trip => self.alarm,
            (AlarmState::Unacknowledged, true) => {
                base.fg(Color::Yellow).add_modifier(Modifier::BOLD)
            }
            (AlarmState::Unacknowledged, false) => base.add_modifier(Modifier::BOLD),
            (AlarmState::Acknowledged, true) if sev == Severity::Trip => base.fg(Color::Red),
            (AlarmState::Acknowledged, true) => base.fg(Color::Yellow),
            (AlarmState::Acknowledged, false) => base.add_modifier(Modifier::BOLD),
            (AlarmState::ReturnedUnacknowledged, true) => base.fg(Color::Yellow),
            (AlarmState::ReturnedUnacknowledged, false) => base.add_modifier(Modifier::UNDERLINED),
            (AlarmState::Shelved | AlarmState::SuppressedByDesign, _) => self.dim,
            (AlarmState::Normal, true) => base.fg(Color::Green),
            (AlarmState::Normal, false) => base,
        }
    }

    /// A severity word's style: a trip stands out, a notice is quiet.
    fn severity_style(&self, sev: Severity) -> Style {
        match (sev, self.color) {
            (Severity::Trip, true) => Style::default().fg(Color::Red).add_modifier(Modifier::BOLD),
            (Severity::Trip, false) => Style::default().add_modifier(Modifier::BOLD),
            (Severity::Warning, true) => Style::default().fg(Color::Yellow),
            (Severity::Warning, false) => Style::default(),
            (Severity::Notice, _) => self.dim,
        }
    }

    /// Draws a panel's frame with its title (`·` becomes `-` in ASCII mode)
    /// and returns the area inside it.
    fn frame(&self, title: &str, area: Rect, buf: &mut Buffer) -> Rect {
        let title = if self.ascii {
            title.replace('·', "-")
        } else {
            title.to_string()
        };
        let block = self.block(&title);
        let inner = block.inner(area);
        block.render_into(area, buf);
        inner
    }

    /// Short glyph-free words for quantities in ASCII mode.
    fn sym(&self, unicode: &'static str, ascii: &'static str) -> &'static str {
        if self.ascii { ascii } else { unicode }
    }
}

fn age(now: Option<DateTime<Utc>>, t: Option<DateTime<Utc>>) -> String {
    match (now, t) {
        (Some(n), Some(t)) => {
            let s = (n - t).num_milliseconds() as f64 / 1000.0;
            if s < 100.0 {
                format!("{s:.0} s")
            } else {
                trend::span_text(s)
            }
        }
        _ => "-".into(),
    }
}

/// Which panels fit.
struct Plan {
    kinetics: bool,
    lengths: bool,
    trend: bool,
    wide: bool,
}

fn plan(area: Rect) -> Plan {
    Plan {
        trend: area.height >= 20 && area.width >= 60,
        lengths: area.height >= 16,
        kinetics: area.height >= 12,
        wide: area.width >= 110 && area.height >= 30,
    }
}

/// A panel, for drawing one alone (tests, benchmarks).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Panel {
    /// Title bar.
    Title,
    /// Replay timeline.
    Timeline,
    /// Readings per gauge.
    Readings,
    /// Gas kinetics.
    Kinetics,
    /// Knudsen number and regime per length.
    Lengths,
    /// Log-pressure trend.
    Trend,
    /// Alarms and gates.
    Alarms,
    /// Events (replay: the log's, with the current one's detail).
    Events,
    /// Status line.
    Status,
    /// Key footer.
    Footer,
}

/// Draws one panel into `area`.
pub fn draw_panel(panel: Panel, app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    match panel {
        Panel::Title => title_bar(app, look, area, buf),
        Panel::Timeline => timeline_bar(app, look, area, buf),
        Panel::Readings => readings(app, look, area, buf),
        Panel::Kinetics => kinetics(app, look, area, buf),
        Panel::Lengths => lengths(app, look, area, buf),
        Panel::Trend => trend_panel(app, look, area, buf),
        Panel::Alarms => alarms(app, look, area, buf),
        Panel::Events => events_panel(app, look, area, buf),
        Panel::Status => status_line(app, look, area, buf),
        Panel::Footer => footer(app, look, area, buf),
    }
}

/// Draws the whole screen.
pub fn draw(frame: &mut Frame, app: &App) {
    let area = frame.area();
    let look = Look::of(app);
    let buf = frame.buffer_mut();
    draw_into(app, &look, area, buf);
}

/// Draws the whole screen into a buffer (what [`draw`] does; for tests).
pub fn draw_into(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    if area.width < 20 || area.height < 6 {
        buf.set_string(area.x, area.y, "rarefy: terminal too small", look.alarm);
        return;
    }
    let p = plan(area);
    let timeline = app.replay.is_some();
    let mut rows = vec![Constraint::Length(1)];
    if timeline {
        rows.push(Constraint::Length(1));
    }
    rows.push(Constraint::Min(4));
    rows.push(Constraint::Length(1));
    rows.push(Constraint::Length(1));
    let v = Layout::default()
        .direction(Direction::Vertical)
        .constraints(rows)
        .split(area);
    let mut i = 0;
    title_bar(app, look, v[i], buf);
    i += 1;
    if timeline {
        timeline_bar(app, look, v[i], buf);
        i += 1;
    }
    let body = v[i];
    status_line(app, look, v[i + 1], buf);
    footer(app, look, v[i + 2], buf);

    let gauges = app.gauges.len().max(1) as u16;
    let lengths_n = app.monitor().setup().lengths.len().max(1) as u16;
    if p.wide {
        // Numbers in a left column beside the trend; the events fill the
        // rest of that column; the alarms take the whole width below, so
        // their labels and thresholds have room.
        let left_h = (gauges + 3) + 11 + (lengths_n + 2);
        let alarms_h = (alarm_rows(app) + 2).min(body.height.saturating_sub(left_h).max(5));
        let v2 = Layout::default()
            .direction(Direction::Vertical)
            .constraints([Constraint::Min(10), Constraint::Length(alarms_h)])
            .split(body);
        let h = Layout::default()
            .direction(Direction::Horizontal)
            .constraints([Constraint::Length(52), Constraint::Min(40)])
            .split(v2[0]);
        let events_fit = h[0].height >= left_h + 4;
        let mut parts = vec![Constraint::Length(gauges + 3), Constraint::Length(11)];
        if events_fit {
            parts.extend([Constraint::Length(lengths_n + 2), Constraint::Min(4)]);
        } else {
            parts.push(Constraint::Min(4));
        }
        let left = Layout::default()
            .direction(Direction::Vertical)
            .constraints(parts)
            .split(h[0]);
        readings(app, look, left[0], buf);
        kinetics(app, look, left[1], buf);
        lengths(app, look, left[2], buf);
        if events_fit {
            events_panel(app, look, left[3], buf);
        }
        trend_panel(app, look, h[1], buf);
        alarms(app, look, v2[1], buf);
    } else {
        // Stacked: numbers on top, lengths and alarms, then the trend with
        // whatever height is left; the trend is dropped first.
        let tall = body.height >= 30;
        let kin_h: u16 = if p.kinetics {
            if tall { 11 } else { 7 }
        } else {
            0
        };
        let top_h = (gauges + 2).max(kin_h);
        let mid_h = if tall {
            (lengths_n + 2).max(alarm_rows(app) + 2).min(14)
        } else {
            (lengths_n + 2)
                .max(7)
                .min(body.height.saturating_sub(top_h + 5).max(4))
        };
        let mut parts = vec![Constraint::Length(top_h), Constraint::Length(mid_h)];
        let trend_fits = p.trend && body.height >= top_h + mid_h + 5;
        parts.push(Constraint::Min(if trend_fits { 5 } else { 0 }));
        let v2 = Layout::default()
            .direction(Direction::Vertical)
            .constraints(parts)
            .split(body);
        if p.kinetics {
            let (l, r) = split(v2[0], 50);
            readings(app, look, l, buf);
            kinetics(app, look, r, buf);
        } else {
            readings(app, look, v2[0], buf);
        }
        if p.lengths {
            // The lengths panel as narrow as its names allow: the alarm
            // table needs the width more.
            let lw = (v2[1].width * 44 / 100).min(36);
            let h = Layout::default()
                .direction(Direction::Horizontal)
                .constraints([Constraint::Length(lw), Constraint::Min(20)])
                .split(v2[1]);
            lengths(app, look, h[0], buf);
            alarms(app, look, h[1], buf);
        } else {
            alarms(app, look, v2[1], buf);
        }
        if trend_fits && app.show_events {
            events_panel(app, look, v2[2], buf);
        } else if trend_fits {
            trend_panel(app, look, v2[2], buf);
        }
    }
    overlay(app, look, area, buf);
}

/// Splits an area side by side, `left_pct` percent on the left.
fn split(area: Rect, left_pct: u16) -> (Rect, Rect) {
    let h = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([
            Constraint::Percentage(left_pct),
            Constraint::Percentage(100 - left_pct),
        ])
        .split(area);
    (h[0], h[1])
}

fn alarm_rows(app: &App) -> u16 {
    (app.monitor().alarms().len() + app.monitor().gates().len()).max(1) as u16
}

fn title_bar(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let (_, _, now) = app.shown();
    let mode = match &app.replay {
        None => "LIVE".to_string(),
        Some(r) if r.at_end => "REPLAY end of log".into(),
        Some(r) if r.paused => "REPLAY PAUSED".into(),
        Some(r) => format!("REPLAY {}", r.speed.label()),
    };
    let frozen = if app.frozen.is_some() { "  FROZEN" } else { "" };
    let time = now.map_or("--".to_string(), |t| {
        t.format("%Y-%m-%d %H:%M:%S UTC").to_string()
    });
    let mode = Span::styled(
        format!(" {mode}{frozen} "),
        Style::default().add_modifier(Modifier::REVERSED),
    );
    let time = Span::raw(format!("  {time}"));
    // A long chamber name gives way, so the mode and the time stay in view.
    let room = usize::from(area.width).saturating_sub(mode.width() + time.width());
    let name = fit(&format!(" rarefy · {} ", app.title), room, look);
    let line = Line::from(vec![Span::styled(name, look.title), mode, time]);
    let line = if look.ascii {
        Line::from(
            line.spans
                .into_iter()
                .map(|s| Span::styled(s.content.replace('·', "-"), s.style))
                .collect::<Vec<_>>(),
        )
    } else {
        line
    };
    Paragraph::new(line).render_into(area, buf);
}

/// `text` cut to `room` columns, marked as cut.
fn fit(text: &str, room: usize, look: &Look) -> String {
    if Span::raw(text).width() <= room {
        return text.to_string();
    }
    let mark = look.sym("…", "~");
    let mut out = String::new();
    for c in text.chars() {
        if Span::raw(format!("{out}{c}{mark} ")).width() > room {
            break;
        }
        out.push(c);
    }
    if out.is_empty() {
        return String::new();
    }
    format!("{out}{mark} ")
}

/// A small helper to render a widget into a buffer area.
trait RenderInto {
    fn render_into(self, area: Rect, buf: &mut Buffer);
}

impl<W: ratatui::widgets::Widget> RenderInto for W {
    fn render_into(self, area: Rect, buf: &mut Buffer) {
        self.render(area, buf);
    }
}

fn timeline_bar(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let Some(r) = &app.replay else { return };
    let (_, _, now) = app.shown();
    let span = (r.end - r.start).num_milliseconds().max(1) as f64;
    // A log over more than one day shows the dates too.
    let fmt = if r.start.date_naive() == r.end.date_naive() {
        "%H:%M"
    } else {
        "%m-%d %H:%M"
    };
    let label = format!(" {} ", r.start.format(fmt));
    let end_label = format!(" {} ", r.end.format(fmt));
    let x0 = area.x + label.len() as u16;
    let w = area
        .width
        .saturating_sub((label.len() + end_label.len()) as u16);
    buf.set_string(area.x, area.y, &label, look.dim);
    buf.set_string(x0 + w, area.y, &end_label, look.dim);
    if w == 0 {
        return;
    }
    let col = |t: DateTime<Utc>| -> u16 {
        let f = (t - r.start).num_milliseconds() as f64 / span;
        (f.clamp(0.0, 1.0) * f64::from(w - 1)).round() as u16
    };
    for x in 0..w {
        buf[(x0 + x, area.y)]
            .set_symbol(look.sym("─", "-"))
            .set_style(look.dim);
    }
    for (a, b) in &r.gaps {
        for x in col(*a)..=col(*b) {
            buf[(x0 + x, area.y)].set_char(' ');
        }
    }
    // An alarm going off, by its severity's letter (listed in help).
    for e in r.events.iter().filter(|e| e.to_text() == "unacknowledged") {
        let (c, style) = match e.severity {
            Some(Severity::Trip) => ('T', look.alarm),
            Some(Severity::Warning) => ('W', look.severity_style(Severity::Warning)),
            Some(Severity::Notice) => ('N', Style::default()),
            None => ('!', look.alarm),
        };
        let cell = &mut buf[(x0 + col(e.time), area.y)];
        // A trip is never hidden under a lesser mark at the same place.
        if cell.symbol() != "T" {
            cell.set_char(c).set_style(style);
        }
    }
    if let Some(now) = now {
        buf[(x0 + col(now), area.y)]
            .set_symbol(look.sym("█", "#"))
            .set_style(Style::default().add_modifier(Modifier::BOLD));
    }
}

fn readings(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let (monitor, _, now) = app.shown();
    let inner = look.frame("readings", area, buf);
    let mut lines = Vec::new();
    if app.gauges.is_empty() {
        lines.push(Line::styled("waiting for the first reading…", look.dim));
    }
    for g in &app.gauges {
        let track = monitor.track(&g.id);
        let stale = track
            .and_then(|t| t.last_time)
            .zip(now)
            .is_some_and(|(t, n)| {
                (n - t).num_milliseconds() as f64 / 1000.0 > monitor.setup().stale_after_s
            });
        let status = track.map_or(
            Status::Stale,
            |t| if stale { Status::Stale } else { t.status },
        );
        // A pressure not above zero (a gauge's zero drift) is shown as read,
        // dimmed like a reading below the range: it has no kinetics.
        let below_zero = track.and_then(|t| t.indicated).filter(|v| *v <= 0.0);
        let value = match (status, track, g.unit) {
            (Status::Ok, Some(t), ChannelUnit::Pressure(_)) => match (t.pressure_pa, below_zero) {
                (Some(p), _) => units::format_pressure(p, app.pressure_unit),
                (None, Some(v)) => units::format_pressure(v, app.pressure_unit),
                (None, None) => "-".into(),
            },
            (Status::Ok, Some(t), ChannelUnit::Temperature(_)) => {
                t.temperature_k.map_or("-".into(), |k| {
                    units::format_temperature(k, app.temperature_unit)
                })
            }
            (s, _, _) => s.as_str().to_string(),
        };
        let style = match status {
            Status::Ok if below_zero.is_some() && g.unit.is_pressure() => look.dim,
            Status::Ok => Style::default().add_modifier(Modifier::BOLD),
            // Below its range is where a pressure gauge sits at high vacuum.
            Status::UnderRange if g.unit.is_pressure() => look.dim,
            Status::SensorOff => look.dim,
            _ => look.alarm,
        };
        let kind = g
            .kind
            .map_or(if g.unit.is_pressure() { "" } else { "temp" }, |k| {
                k.as_str()
            });
        let when = age(now, track.and_then(|t| t.last_time));
        let name: String = g.id.chars().take(10).collect();
        lines.push(Line::from(vec![
            Span::raw(format!("{name:<10} ")),
            Span::styled(format!("{value:>14}"), style),
            Span::styled(format!(" {kind:<11} {when:>6}"), look.dim),
        ]));
    }
    Paragraph::new(lines).render_into(inner, buf);
}

/// The gauge whose quantity `q` is shown: the one the operator chose with
/// `c`, else the chamber pressure's source now (`None` while no gauge is in
/// range). The flag says whether it is the automatic choice.
fn primary(app: &App, q: &Quantity) -> Option<(String, bool)> {
    let (monitor, _, _) = app.shown();
    match &app.follow {
        Some(g) => Some((g.clone(), false)),
        None => monitor.chamber_source(q).map(|s| (s.gauge, true)),
    }
}

fn kinetics(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let (monitor, _, _) = app.shown();
    let chosen = primary(app, &Quantity::Pressure);
    let auto = app.follow.is_none();
    let id = chosen.as_ref().map(|c| c.0.clone());
    let stale = id
        .as_deref()
        .and_then(|g| monitor.track(g))
        .is_some_and(|t| {
            t.last_time.zip(monitor.now()).is_some_and(|(l, n)| {
                (n - l).num_milliseconds() as f64 / 1000.0 > monitor.setup().stale_after_s
            }) || !t.status.is_ok()
        });
    let title = match (auto, id.as_deref()) {
        (true, Some(g)) => format!("gas kinetics · {}: {g}", crate::alarm::AUTO),
        (true, None) => format!("gas kinetics · {}", crate::alarm::AUTO),
        (false, g) => format!(
            "gas kinetics · {}{}",
            g.unwrap_or("-"),
            if stale { " · last valid" } else { "" }
        ),
    };
    let inner = look.frame(&title, area, buf);
    let track = id.as_deref().and_then(|g| monitor.track(g));
    let Some((d, track)) = track.and_then(|t| t.derived().map(|d| (d, t))) else {
        let why = if auto && monitor.now().is_some() && monitor.tracks().next().is_some() {
            "no gauge in range"
        } else {
            "no valid pressure yet"
        };
        Paragraph::new(Line::styled(why, look.dim)).render_into(inner, buf);
        return;
    };
    // A gauge the configuration fixes for the mean free path.
    let mfp = match primary(app, &Quantity::MeanFreePath) {
        Some((g, _)) if auto => monitor
            .track(&g)
            .and_then(|t| t.kinetics())
            .map_or(d.mean_free_path_m, |(k, p)| k.mean_free_path_m(p)),
        _ => d.mean_free_path_m,
    };
    // The gas in force and where it came from (a gauge with a gas of its
    // own keeps it).
    let (in_force, origin) = monitor.gas();
    let own = id
        .as_deref()
        .and_then(|g| monitor.gauge_gas(g))
        .filter(|m| *m != in_force);
    let (gas, gas_full) = match own {
        Some(m) => (m.label(), format!("{} (gauge's own)", m.label())),
        None => {
            let short = match origin {
                crate::alarm::GasOrigin::Base => in_force.label(),
                crate::alarm::GasOrigin::Step(s) => format!("{} ({s})", in_force.label()),
                crate::alarm::GasOrigin::Log => format!("{} (log)", in_force.label()),
                crate::alarm::GasOrigin::Operator(_) => format!("{} (op)", in_force.label()),
            };
            (short, format!("{} ({origin})", in_force.label()))
        }
    };
    let measured = monitor.tracks().any(|(_, t)| t.temperature_k.is_some());
    let t_k = monitor
        .tracks()
        .find_map(|(_, t)| t.temperature_k)
        .unwrap_or(monitor.setup().assumed_temperature_k);
    let row = |k: &str, v: String| {
        Line::from(vec![
            Span::styled(format!("{k:<12}"), look.dim),
            Span::raw(v),
        ])
    };
    let exposure = track.exposure.pa_s();
    let t_text = format!(
        "{} {}",
        units::format_temperature(t_k, app.temperature_unit),
        if measured { "measured" } else { "assumed" }
    );
    let since = match (track.exposure_since(), track.exposure.start()) {
        (Some(t), _) => format!(" since {}", t.format("%H:%M:%S")),
        (None, crate::engine::exposure::ExposureStart::Below(p)) => {
            format!(" (from < {})", units::format_pressure(p, app.pressure_unit))
        }
        (None, _) => " (from reset)".to_string(),
    };
    let langmuir = format!(
        "{} L{since}",
        format_sig(exposure / units::LANGMUIR_PA_S, 3)
    );
    let full = format!("{} Pa·s {langmuir}", format_sig(exposure, 3));
    // A narrow panel keeps the langmuir and the start, dropping Pa·s.
    let exposure_text = if full.chars().count() + 12 > usize::from(inner.width) {
        langmuir
    } else {
        full.replace('·', look.sym("·", "*"))
    };
    if inner.height < 9 {
        // Compact: two quantities a line.
        let pair = |a: &str, av: String, b: &str, bv: String| {
            Line::from(vec![
                Span::styled(format!("{a} "), look.dim),
                Span::raw(format!("{av:<14} ")),
                Span::styled(format!("{b} "), look.dim),
                Span::raw(bv),
            ])
        };
        let lines = vec![
            pair("gas", gas.clone(), "T", t_text),
            pair(
                look.sym("n", "n"),
                format!("{} m^-3", format_sig(d.number_density_per_m3, 3)),
                look.sym("v̄", "v"),
                format!("{} m/s", format_sig(d.mean_speed_m_per_s, 3)),
            ),
            pair(
                look.sym("λ", "mfp"),
                length(mfp),
                "range",
                d.vacuum_range.to_string(),
            ),
            pair(
                look.sym("Φ", "imp"),
                format!("{} /m2/s", format_sig(d.impingement_per_m2_s, 3)),
                look.sym("τ", "tau"),
                duration(d.monolayer_time_s),
            ),
            row("exposure", exposure_text),
        ];
        Paragraph::new(lines).render_into(inner, buf);
        return;
    }
    let lines = vec![
        row("gas", gas_full),
        row("temperature", t_text),
        row(
            look.sym("n", "n"),
            format!("{} m^-3", format_sig(d.number_density_per_m3, 3)),
        ),
        row(
            look.sym("v̄ mean", "v mean"),
            format!("{} m/s", format_sig(d.mean_speed_m_per_s, 3)),
        ),
        row(look.sym("λ mfp", "mfp"), length(mfp)),
        row(
            look.sym("Φ impinge", "impinge"),
            format!("{} /m2/s", format_sig(d.impingement_per_m2_s, 3)),
        ),
        row(
            look.sym("τ monolayer", "monolayer"),
            duration(d.monolayer_time_s),
        ),
        row("exposure", exposure_text),
        row(
            "range",
            format!(
                "{} (ISO 3529-1:{})",
                d.vacuum_range,
                monitor.setup().physics.edition.year()
            ),
        ),
    ];
    Paragraph::new(lines).render_into(inner, buf);
}

fn length(m: f64) -> String {
    match m {
        m if m < 1e-6 => format!("{} nm", format_sig(m * 1e9, 3)),
        m if m < 1e-3 => format!("{} um", format_sig(m * 1e6, 3)),
        m if m < 0.1 => format!("{} mm", format_sig(m * 1e3, 3)),
        m if m < 1e4 => format!("{} m", format_sig(m, 3)),
        m => format!("{} km", format_sig(m / 1e3, 3)),
    }
}

fn duration(s: f64) -> String {
    match s {
        s if s < 120.0 => format!("{} s", format_sig(s, 3)),
        s if s < 7200.0 => format!("{} min", format_sig(s / 60.0, 3)),
        s if s < 172_800.0 => format!("{} h", format_sig(s / 3600.0, 3)),
        s => format!("{} d", format_sig(s / 86_400.0, 3)),
    }
}

fn lengths(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let (monitor, _, _) = app.shown();
    let inner = look.frame("flow regime", area, buf);
    let id = primary(app, &Quantity::Regime(String::new())).map(|c| c.0);
    let d = id
        .as_deref()
        .and_then(|g| monitor.track(g))
        .and_then(|t| t.derived());
    let mut lines = Vec::new();
    if monitor.setup().lengths.is_empty() {
        lines.push(Line::styled("no [[length]] configured", look.dim));
    }
    for l in &monitor.setup().lengths {
        let (kn, regime) = d
            .as_ref()
            .and_then(|d| d.lengths.iter().find(|x| x.name == l.name))
            .map_or(("-".to_string(), "-".to_string()), |x| {
                (format_sig(x.knudsen, 3), x.regime.to_string())
            });
        let w = usize::from(inner.width);
        let narrow = w < 48;
        // Narrow: short regime words (listed in help), and the length
        // itself only when the names still fit beside it.
        let longest = monitor
            .setup()
            .lengths
            .iter()
            .map(|l| l.name.chars().count())
            .max()
            .unwrap_or(0);
        let show_len = !narrow || w >= longest.min(20) + 1 + 8 + 1 + 7 + 1 + 5;
        let name_w = if narrow {
            w.saturating_sub(1 + 7 + 1 + 5 + if show_len { 9 } else { 0 })
                .min(longest.max(4))
        } else {
            20
        };
        let regime = if narrow {
            match regime.as_str() {
                "viscous" => "visc".to_string(),
                "transitional" => "trans".to_string(),
                "molecular" => "molec".to_string(),
                r => r.to_string(),
            }
        } else {
            regime
        };
        let mut spans = vec![Span::raw(format!("{} ", cell(&l.name, name_w, look)))];
        if show_len {
            spans.push(Span::styled(
                format!("{:>8} ", length(l.length_m)),
                look.dim,
            ));
        }
        spans.push(Span::raw(format!(
            "{}{kn:>kw$} ",
            if narrow { "" } else { "Kn " },
            kw = if narrow { 7 } else { 6 }
        )));
        spans.push(Span::styled(
            regime,
            Style::default().add_modifier(Modifier::BOLD),
        ));
        lines.push(Line::from(spans));
    }
    Paragraph::new(lines).render_into(inner, buf);
}

/// The state words of the alarm table: the README's and the events' words,
/// or, where the panel is too narrow for them, the short forms listed in
/// help ([`ABBREVIATIONS`]).
fn state_word(s: AlarmState, short: bool) -> &'static str {
    match (s, short) {
        (AlarmState::Unacknowledged, true) => "unack",
        (AlarmState::Acknowledged, true) => "acked",
        (AlarmState::ReturnedUnacknowledged, true) => "rtn-unack",
        (AlarmState::SuppressedByDesign, true) => "suppr",
        (s, _) => s.as_str(),
    }
}

/// Severity words: in full, or short where the panel is narrow.
fn severity_word(s: Severity, short: bool) -> &'static str {
    match (s, short) {
        (Severity::Notice, true) => "note",
        (Severity::Warning, true) => "warn",
        (s, _) => s.as_str(),
    }
}

/// The short forms used where the screen is narrow, for the help screen:
/// (short, meaning).
pub const ABBREVIATIONS: [(&str, &str); 8] = [
    ("unack", "unacknowledged (in alarm, not acknowledged)"),
    ("acked", "acknowledged (in alarm)"),
    ("rtn-unack", "returned-unacknowledged (back to normal)"),
    ("suppr", "suppressed-by-design (enable condition false)"),
    (
        "warn note",
        "severity warning, notice (trip is written out)",
    ),
    ("visc trans", "flow regime viscous, transitional"),
    ("molec", "flow regime molecular"),
    ("Kn", "Knudsen number: mean free path / length"),
];

/// `text` cut to `w` columns (marked `…`/`~` when cut) and padded to `w`.
fn cell(text: &str, w: usize, look: &Look) -> String {
    let n = text.chars().count();
    if n <= w {
        return format!("{text:<w$}");
    }
    if w == 0 {
        return String::new();
    }
    let cut: String = text.chars().take(w - 1).collect();
    format!("{cut}{}", look.sym("…", "~"))
}

/// Column widths of the alarm table for a panel `width` wide.
struct AlarmCols {
    short: bool,
    sev: usize,
    id: usize,
    state: usize,
    value: usize,
    rest: usize,
}

fn alarm_cols(width: usize, longest_id: usize) -> AlarmCols {
    // Full words once the panel can hold them with a value beside them.
    let short = width < 1 + 7 + 1 + 16 + 1 + 23 + 1 + 12 + 10;
    let (sev, state) = if short { (4, 9) } else { (7, 23) };
    let fixed = 1 + sev + 1 + 1 + state + 1;
    let value_min = 12;
    let id = longest_id
        .min(width.saturating_sub(fixed + value_min))
        .max(6);
    let value = width.saturating_sub(fixed + id).min(16);
    let rest = width.saturating_sub(fixed + id + value + 1);
    AlarmCols {
        short,
        sev,
        id,
        state,
        value,
        rest,
    }
}

fn alarms(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let (monitor, _, now) = app.shown();
    let views = monitor.alarms();
    let active = views.iter().filter(|a| a.state.is_active()).count();
    let returned = views
        .iter()
        .filter(|a| a.state == AlarmState::ReturnedUnacknowledged)
        .count();
    // Returned-unacknowledged alarms still wait for the operator, so they
    // count; the words say how the count is made up.
    // The longest wording that leaves the frame's corners free.
    let attend = active + returned;
    let candidates = if returned == 0 {
        vec![format!("alarms & gates · {active} active")]
    } else {
        vec![
            format!(
                "alarms & gates · {attend} to attend: {active} active, {returned} returned-unacknowledged"
            ),
            format!("alarms & gates · {attend} to attend ({returned} rtn-unack)"),
            format!("alarms · {attend} to attend ({returned} rtn-unack)"),
        ]
    };
    let room = usize::from(area.width).saturating_sub(4);
    let title = candidates
        .iter()
        .find(|t| t.chars().count() <= room)
        .or(candidates.last())
        .cloned()
        .unwrap_or_default();
    let inner = look.frame(&title, area, buf);
    let width = usize::from(inner.width);
    let longest = views
        .iter()
        .map(|a| a.rule.id.chars().count())
        .chain(monitor.gates().iter().map(|g| g.gate.id.chars().count()))
        .max()
        .unwrap_or(8)
        .min(20);
    let c = alarm_cols(width, longest);
    let mut lines: Vec<Line> = Vec::new();
    let n = views.len();
    for (i, a) in views.iter().enumerate() {
        let sel = if i == app.selected { ">" } else { " " };
        let since = a
            .since
            .map_or(String::new(), |s| format!("{} ago", age(now, Some(s))));
        let extra = match a.shelved_until {
            Some(u) => format!("until {}", u.format("%H:%M:%S")),
            None => since,
        };
        let sev = a.rule.severity;
        let value = a.value_text.clone().unwrap_or_else(|| "-".into());
        // A pressure gauge below its range at high vacuum is normal: the
        // value is not painted as trouble.
        let value_style = if value == Status::UnderRange.as_str() {
            look.dim
        } else {
            Style::default()
        };
        let mut spans = vec![
            Span::raw(format!("{sel}{} ", cell(&a.rule.id, c.id, look))),
            Span::styled(
                format!("{:<w$}", severity_word(sev, c.short), w = c.sev),
                look.severity_style(sev),
            ),
            Span::raw(" "),
            Span::styled(
                format!("{:<w$}", state_word(a.state, c.short), w = c.state),
                look.state_style(a.state, sev),
            ),
            Span::styled(format!(" {}", cell(&value, c.value, look)), value_style),
        ];
        if c.rest >= 8 {
            let label = if a.rule.label.is_empty() || a.rule.label == a.rule.id {
                String::new()
            } else {
                format!("{} · ", a.rule.label)
            };
            let text =
                format!("{label}{} · {extra}", a.threshold_text).replace('·', look.sym("·", "-"));
            spans.push(Span::styled(
                format!(" {}", cell(&text, c.rest, look)),
                look.dim,
            ));
        }
        lines.push(Line::from(spans));
    }
    for (j, g) in monitor.gates().iter().enumerate() {
        let sel = if n + j == app.selected { ">" } else { " " };
        let (word, style) = match g.state() {
            GateState::Ready => (
                "READY",
                if look.color {
                    Style::default()
                        .fg(Color::Green)
                        .add_modifier(Modifier::BOLD)
                } else {
                    Style::default().add_modifier(Modifier::BOLD)
                },
            ),
            GateState::NotReady => (
                "NOT READY",
                if look.color {
                    Style::default().fg(Color::Yellow)
                } else {
                    Style::default()
                },
            ),
        };
        let left = monitor
            .now()
            .and_then(|n| g.time_left_at(n))
            .or(g.time_left_s());
        let why = match (g.state(), left) {
            (GateState::Ready, _) => format!("held {} s", g.gate.hold_s),
            (_, Some(left)) if left > 0.0 => format!("{left:.0} s left"),
            _ => monitor.gate_reason(j).unwrap_or_default(),
        };
        let room = width.saturating_sub(1 + c.id + 1 + c.sev + 1 + 9 + 1);
        lines.push(Line::from(vec![
            Span::raw(format!("{sel}{} ", cell(&g.gate.id, c.id, look))),
            Span::styled(format!("{:<w$} ", "gate", w = c.sev), look.dim),
            Span::styled(format!("{word:<9}"), style),
            Span::styled(format!(" {}", cell(&why, room, look)), look.dim),
        ]));
    }
    if lines.is_empty() {
        lines.push(Line::styled("no alarms or gates configured", look.dim));
    }
    // Keep the selection in view, and say what is out of it.
    let height = inner.height as usize;
    let total = lines.len();
    let skip = app.selected.saturating_sub(height.saturating_sub(1));
    let below = total.saturating_sub(skip + height);
    Paragraph::new(lines.into_iter().skip(skip).collect::<Vec<_>>()).render_into(inner, buf);
    more_hints(look, area, skip, below, buf);
}

/// `+N more ↓` (and `↑ N above`) on a panel's bottom border when rows are
/// out of view.
fn more_hints(look: &Look, area: Rect, above: usize, below: usize, buf: &mut Buffer) {
    if area.height < 2 || area.width < 16 {
        return;
    }
    let y = area.y + area.height - 1;
    if below > 0 {
        let text = format!(" +{below} more {} ", look.sym("↓", "v"));
        let w = text.chars().count() as u16;
        buf.set_string(
            area.x + area.width.saturating_sub(w + 1),
            y,
            &text,
            look.title,
        );
    }
    if above > 0 {
        let text = format!(" {} {above} above ", look.sym("↑", "^"));
        buf.set_string(area.x + 1, y, &text, look.dim);
    }
}

fn trend_panel(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let title = format!("log pressure · last {}", trend::span_text(app.window_s));
    let inner = look.frame(&title, area, buf);
    trend::draw(app, look, inner, buf);
}

fn status_line(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let mut parts: Vec<Span> = Vec::new();
    if app.replay.is_none() {
        for (name, state) in &app.sources {
            let style = match state {
                SourceState::Connected => Style::default(),
                _ => look.alarm,
            };
            let short: String = name.chars().take(28).collect();
            parts.push(Span::styled(format!("{short}: {state}  "), style));
        }
    } else if let Some(r) = &app.replay {
        let name = r
            .file
            .file_name()
            .map_or(String::new(), |n| n.to_string_lossy().into_owned());
        parts.push(Span::raw(format!("{name}  ")));
        if r.bad_rows > 0 {
            parts.push(Span::styled(
                format!("{} bad rows  ", r.bad_rows),
                look.alarm,
            ));
        }
        // Rows out of time order are read, and said.
        if r.times_went_back > 0 {
            parts.push(Span::styled(
                format!("time went back {}×  ", r.times_went_back),
                look.alarm,
            ));
        }
        if r.times_repeated > 0 {
            parts.push(Span::styled(
                format!("time repeated {}×  ", r.times_repeated),
                look.alarm,
            ));
        }
        // The latest operator note at the playhead, escaped and shortened.
        if let Some((t, column, text)) = &app.note {
            let text: String = crate::sample::escape_bytes(text.as_bytes())
                .chars()
                .take(60)
                .collect();
            let column: String = crate::sample::escape_bytes(column.as_bytes())
                .chars()
                .take(20)
                .collect();
            parts.push(Span::raw(format!(
                "note {} {column}: {text}  ",
                t.format("%H:%M:%S")
            )));
        }
    }
    if app.replay.is_none() {
        parts.push(Span::raw(format!(
            "{} rows/s  ",
            format_sig(app.counters.rate, 3)
        )));
    }
    parts.push(Span::raw(format!("unparsed {}  ", app.counters.unparsed)));
    if app.counters.behind > 100 {
        parts.push(Span::styled(
            format!("DISPLAY BEHIND: {} queued  ", app.counters.behind),
            look.alarm,
        ));
    }
    // A message first: it is what the operator just did or must know.
    if let Some(m) = &app.message {
        parts.insert(
            0,
            Span::styled(
                format!("{m}  "),
                Style::default().add_modifier(Modifier::BOLD),
            ),
        );
    }
    if let Some(f) = &app.log_file {
        // The file's name; its directory was given on the command line.
        let name = f.file_name().map_or_else(
            || f.display().to_string(),
            |n| n.to_string_lossy().into_owned(),
        );
        parts.push(Span::styled(format!("recording {name}  "), look.dim));
    }
    // Without a message, the latest device trouble.
    let trouble = match (&app.last_unparsed, &app.source_error) {
        (Some(u), _) => Some(format!("last unparsed: {u}")),
        (None, Some(e)) => Some(e.clone()),
        (None, None) => None,
    };
    if let Some(t) = trouble.filter(|_| app.message.is_none()) {
        parts.push(Span::styled(format!("{t}  "), look.dim));
    }
    // Readings folded into the trend's buckets: the display only; the
    // monitor and the recording keep every reading. Device trouble first.
    parts.push(Span::raw(format!(
        "folded {} (display only)",
        app.history.decimated()
    )));
    Paragraph::new(Line::from(parts)).render_into(area, buf);
}

fn footer(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let keys = if app.replay.is_some() {
        FOOTER_REPLAY
    } else {
        FOOTER_LIVE
    };
    let keys = if look.ascii {
        keys.replace('←', "Left").replace('→', "Right")
    } else {
        keys.to_string()
    };
    // Keys drop from the right when the line is short, but quit stays.
    let quit = "  q:quit";
    let body = keys.trim_end_matches("q:quit").trim_end();
    let room = usize::from(area.width).saturating_sub(quit.len());
    let mut shown = String::new();
    for part in body.split("  ") {
        let next = if shown.is_empty() {
            part.to_string()
        } else {
            format!("{shown}  {part}")
        };
        if next.chars().count() > room {
            break;
        }
        shown = next;
    }
    Paragraph::new(Line::styled(
        format!("{shown}{quit}"),
        Style::default().add_modifier(Modifier::REVERSED),
    ))
    .render_into(area, buf);
}

fn centered(area: Rect, w: u16, h: u16) -> Rect {
    let w = w.min(area.width);
    let h = h.min(area.height);
    Rect {
        x: area.x + (area.width - w) / 2,
        y: area.y + (area.height - h) / 2,
        width: w,
        height: h,
    }
}

fn overlay(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    match &app.overlay {
        Overlay::None => {}
        Overlay::Help => help_overlay(app, look, area, buf),
        Overlay::Goto(s) => prompt_box(look, area, buf, "go to time (HH:MM:SS UTC or RFC 3339)", s),
        Overlay::Shelve(s) => prompt_box(look, area, buf, "shelve the selected alarm for", s),
        Overlay::Edit(e) => prompt_box(
            look,
            area,
            buf,
            &format!("{} {}: new {} (was {})", e.kind, e.id, e.key, e.old),
            &e.input,
        ),
        Overlay::Confirm(e) => {
            let target = app.config_path.as_ref().map_or(
                "(no config file: applied in memory only)".to_string(),
                |p| p.display().to_string(),
            );
            prompt_box(
                look,
                area,
                buf,
                &format!(
                    "set {} {} = \"{}\" and save to {target}? y/n",
                    e.kind, e.id, e.input
                ),
                "",
            );
        }
    }
}

fn prompt_box(look: &Look, area: Rect, buf: &mut Buffer, title: &str, input: &str) {
    let r = centered(area, (title.chars().count() as u16 + 6).max(40), 3);
    Clear.render_into(r, buf);
    let block = look.block(title);
    let inner = block.inner(r);
    block.render_into(r, buf);
    Paragraph::new(Line::raw(format!("{input}_"))).render_into(inner, buf);
}

/// One event as a line: time, id, the state it went to.
fn event_line<'a>(e: &crate::alarm::Event, width: usize, look: &Look, current: bool) -> Line<'a> {
    let sev = e.severity.map_or("", |s| severity_word(s, true));
    let text = format!(
        "{} {} {} {}",
        e.time.format("%H:%M:%S"),
        e.id,
        e.to_text(),
        sev
    );
    let style = if current {
        Style::default().add_modifier(Modifier::REVERSED)
    } else {
        match e.change.alarm_to() {
            Some(AlarmState::Unacknowledged) => e
                .severity
                .map_or(Style::default(), |s| look.severity_style(s)),
            _ => Style::default(),
        }
    };
    Line::styled(cell(&text, width, look), style)
}

/// The events: live, the latest; in replay, every event of the log around
/// the playhead, the last one reached marked and its detail below.
fn events_panel(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let (_, _, now) = app.shown();
    let all: Vec<&crate::alarm::Event> = match &app.replay {
        Some(r) => r.events.iter().collect(),
        None => app.events.iter().collect(),
    };
    let reached = now.map_or(0, |t| all.iter().filter(|e| e.time <= t).count());
    let title = if app.replay.is_some() {
        format!("events · {reached} of {} reached", all.len())
    } else {
        format!("events · latest {}", all.len())
    };
    let inner = look.frame(&title, area, buf);
    let width = usize::from(inner.width);
    if all.is_empty() {
        Paragraph::new(Line::styled("no events yet", look.dim)).render_into(inner, buf);
        return;
    }
    let current = reached.checked_sub(1).filter(|_| app.replay.is_some());
    // Detail of the current event below the list, when there is room.
    let detail: Vec<Line> = match current.map(|i| all[i]) {
        Some(e) if inner.height >= 8 => {
            let mut d = vec![Line::styled(
                cell(&format!("{} · {}", e.id, e.label), width, look)
                    .replace('·', look.sym("·", "-")),
                look.title,
            )];
            d.push(Line::raw(cell(
                &format!(
                    "{} {} -> {}{}",
                    e.time.format("%Y-%m-%d %H:%M:%S"),
                    e.from_text(),
                    e.to_text(),
                    e.severity.map_or(String::new(), |s| format!(" ({s})"))
                ),
                width,
                look,
            )));
            let value = [e.value_text.as_deref(), e.threshold.as_deref()]
                .into_iter()
                .flatten()
                .collect::<Vec<_>>()
                .join(" · ")
                .replace('·', look.sym("·", "-"));
            if !value.is_empty() {
                d.push(Line::styled(cell(&value, width, look), look.dim));
            }
            d
        }
        _ => Vec::new(),
    };
    let list_h =
        usize::from(inner.height).saturating_sub(detail.len() + usize::from(!detail.is_empty()));
    // The current event (or the newest, live) in view, a few after it.
    let end = match current {
        Some(i) => (i + 1 + list_h / 3)
            .min(all.len())
            .max(list_h.min(all.len())),
        None => all.len(),
    };
    let start = end.saturating_sub(list_h);
    let mut lines: Vec<Line> = all[start..end]
        .iter()
        .enumerate()
        .map(|(k, e)| event_line(e, width, look, current == Some(start + k)))
        .collect();
    if !detail.is_empty() {
        lines.push(Line::raw(""));
        lines.extend(detail);
    }
    Paragraph::new(lines).render_into(inner, buf);
    more_hints(look, area, start, all.len() - end, buf);
}

/// `text` broken into lines of at most `width` columns at spaces.
fn wrap_words(text: &str, width: usize) -> Vec<String> {
    let mut out = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
            out.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        out.push(line);
    }
    out
}

/// The help screen's lines for a box `width` wide.
fn help_lines(look: &Look, width: usize) -> Vec<Line<'static>> {
    let mut lines: Vec<Line> = vec![Line::styled("CAUTION", look.alarm)];
    lines.extend(
        wrap_words(rarefy_core::CAUTION, width)
            .into_iter()
            .map(Line::raw),
    );
    lines.push(Line::raw(""));
    let arrows = |k: &str| {
        if look.ascii {
            k.replace('↑', "Up")
                .replace('↓', "Down")
                .replace('←', "Left")
                .replace('→', "Right")
        } else {
            k.to_string()
        }
    };
    let row = |k: String, what: &str| {
        let what_w = width.saturating_sub(14).max(10);
        let mut out = Vec::new();
        for (i, part) in wrap_words(what, what_w).into_iter().enumerate() {
            let k = if i == 0 { k.clone() } else { String::new() };
            out.push(Line::from(vec![
                Span::styled(format!("{k:<14}"), look.title),
                Span::raw(part),
            ]));
        }
        out
    };
    for (k, what) in HELP {
        lines.extend(row(arrows(k), what));
    }
    lines.push(Line::raw(""));
    lines.push(Line::styled(
        "Short forms where the screen is narrow",
        look.title,
    ));
    for (k, what) in ABBREVIATIONS {
        lines.extend(row(k.to_string(), what));
    }
    lines.push(Line::raw(""));
    lines.push(Line::styled("Replay timeline", look.title));
    lines.extend(row(
        "T W N".into(),
        "an alarm went off: trip, warning, notice",
    ));
    lines.extend(row(
        look.sym("█", "#").into(),
        "where the replay is; a blank stretch is a gap in the log",
    ));
    lines
}

fn help_overlay(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let r = centered(area, 78, 60);
    Clear.render_into(r, buf);
    let inner_w = usize::from(r.width.saturating_sub(2));
    let lines = help_lines(look, inner_w);
    let inner_h = usize::from(r.height.saturating_sub(2));
    let max = lines.len().saturating_sub(inner_h);
    app.help_max.set(max);
    let top = app.help_scroll.min(max);
    let title = if max > 0 {
        format!(
            "help · {}/{} PgUp/PgDn scroll · other keys close",
            look.sym("↑", "Up"),
            look.sym("↓", "Down")
        )
    } else {
        "help · any key closes".to_string()
    }
    .replace('·', look.sym("·", "-"));
    let block = look.block(&title);
    let inner = block.inner(r);
    block.render_into(r, buf);
    let below = lines.len().saturating_sub(top + inner_h);
    Paragraph::new(lines.into_iter().skip(top).collect::<Vec<_>>()).render_into(inner, buf);
    more_hints(look, r, top, below, buf);
}
