//! The log-pressure trend: one series per pressure gauge, decade labels,
//! alarm thresholds as dashed lines, alarm events as marks, gaps left open.
//! Drawn cell by cell so that it works in braille or in plain ASCII.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier, Style};

use super::Look;
use crate::alarm::quantity::Quantity;
use crate::alarm::rule::Test;
use crate::app::App;
use crate::units::UnitKind;

const SERIES_COLORS: [Color; 4] = [Color::Cyan, Color::Magenta, Color::Green, Color::Blue];
/// Marks drawn for each series in ASCII mode.
const SERIES_ASCII: [char; 4] = ['*', 'o', '+', 'x'];

/// A braille canvas: 2×4 dots per cell.
struct Dots {
    w: usize,
    h: usize,
    cells: Vec<(u8, Option<usize>)>,
}

impl Dots {
    fn new(w: usize, h: usize) -> Self {
        Dots {
            w,
            h,
            cells: vec![(0, None); w * h],
        }
    }

    /// Sets dot (x, y) in dot coordinates, y = 0 at the top.
    fn set(&mut self, x: usize, y: usize, series: usize) {
        if x >= self.w * 2 || y >= self.h * 4 {
            return;
        }
        const BITS: [[u8; 2]; 4] = [[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]];
        let cell = &mut self.cells[(y / 4) * self.w + x / 2];
        cell.0 |= BITS[y % 4][x % 2];
        cell.1.get_or_insert(series);
    }
}

/// Draws the trend into `area` (inside its block).
pub fn draw(app: &App, look: &Look, area: Rect, buf: &mut Buffer) {
    let (monitor, history, now) = app.shown();
    if area.width < 20 || area.height < 3 {
        return;
    }
    let label_w: u16 = 6;
    let plot = Rect {
        x: area.x + label_w,
        y: area.y,
        width: area.width - label_w,
        height: area.height - 1,
    };
    let Some(now) = now else {
        buf.set_string(
            plot.x + 1,
            plot.y + plot.height / 2,
            "no data yet",
            look.dim,
        );
        return;
    };
    let t1 = app.secs(now);
    let t0 = t1 - app.window_s;
    let unit = app.pressure_unit;
    let series: Vec<(&str, Vec<crate::history::Bucket>, f64)> = app
        .gauges
        .iter()
        .filter(|g| g.unit.is_pressure())
        .filter_map(|g| {
            let s = history.get(&g.id)?;
            let (w, b) = s.span(t0, t1);
            Some((g.id.as_str(), b, w))
        })
        .take(4)
        .collect();
    // Decade range over what is visible, and the thresholds.
    let to_y = |pa: f64| unit.value_of(pa).log10();
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for (_, b, _) in &series {
        for k in b {
            lo = lo.min(to_y(k.min));
            hi = hi.max(to_y(k.max));
        }
    }
    let thresholds: Vec<f64> = monitor
        .alarms()
        .iter()
        .filter(|a| {
            a.rule.quantity == Quantity::Pressure && !a.rule.is_input() && !a.rule.is_link()
        })
        .filter_map(|a| match a.rule.test {
            Test::Above(t) | Test::Below(t) => Some(to_y(t)),
            _ => None,
        })
        .collect();
    if !lo.is_finite() {
        buf.set_string(
            plot.x + 1,
            plot.y + plot.height / 2,
            "no pressure readings in this window",
            look.dim,
        );
        return;
    }
    for t in &thresholds {
        if (lo - 1.0..=hi + 1.0).contains(t) {
            lo = lo.min(*t);
            hi = hi.max(*t);
        }
    }
    let (mut dlo, mut dhi) = (lo.floor(), hi.ceil());
    if dhi <= dlo {
        dhi = dlo + 1.0;
    }
    // Every decade on a row of its own, or a whole number of decades a
    // row: a decade label then sits exactly where its value is, and the
    // range grows downwards to fill the plot.
    let spans = f64::from(plot.height.saturating_sub(1).max(1));
    let decades = dhi - dlo;
    let rows_per_decade = if spans >= decades {
        (spans / decades).floor()
    } else {
        1.0 / (decades / spans).ceil()
    };
    // The decades added to fill the plot go half above, half below.
    let total = (spans / rows_per_decade).floor();
    dhi += ((total - decades) / 2.0).floor();
    dlo = dhi - total;
    let rows = plot.height as f64;
    let cols = plot.width as f64;
    let y_of = |v: f64, sub: f64| {
        // The middle of the row for a value on it (so a decade's dots sit
        // in its row, not on an edge).
        ((dhi - v) * rows_per_decade * sub + (sub - 1.0) / 2.0)
            .round()
            .clamp(0.0, rows * sub - 1.0) as usize
    };
    let x_of =
        |t: f64, sub: f64| ((t - t0) / (t1 - t0) * (cols * sub - 1.0)).round().max(0.0) as usize;

    // Decade labels, on the rows where a decade is exactly.
    let per_row = (1.0 / rows_per_decade).max(1.0) as i64;
    for d in (dlo as i64..=dhi as i64).rev() {
        if (dhi as i64 - d) % per_row != 0 {
            continue;
        }
        let row = y_of(d as f64, 1.0) as u16;
        if row < plot.height {
            buf.set_string(
                area.x,
                plot.y + row,
                format!("{:>5}", format!("1e{d}")),
                look.dim,
            );
            // Faint decade rule.
            for x in 0..plot.width {
                let cell = &mut buf[(plot.x + x, plot.y + row)];
                if cell.symbol() == " " {
                    cell.set_symbol(if look.ascii { "." } else { "·" })
                        .set_style(look.grid);
                }
            }
        }
    }
    // Thresholds: a dashed line on the nearest row, labelled with its own
    // value (in place of a decade label there), so it never reads as the
    // decade of that row.
    for t in &thresholds {
        if (dlo..=dhi).contains(t) {
            let row = y_of(*t, 1.0) as u16;
            let exact = (t - t.round()).abs() < 1e-9;
            if !exact {
                let (mut m, mut e) = (10f64.powf(t - t.floor()).round(), t.floor() as i64);
                if m >= 10.0 {
                    (m, e) = (1.0, e + 1);
                }
                let label = format!("{m:.0}e{e}");
                buf.set_string(area.x, plot.y + row, format!("{label:>5}"), look.threshold);
            }
            for x in (0..plot.width).step_by(2) {
                buf[(plot.x + x, plot.y + row)]
                    .set_symbol(if look.ascii { "-" } else { "╌" })
                    .set_style(look.threshold);
            }
        }
    }
    // Series: min–max spans per bucket; gaps stay open. Without colour
    // each gauge has its own mark, so the series stay apart.
    if look.ascii || !look.color {
        for (i, (_, buckets, w)) in series.iter().enumerate() {
            let mark = SERIES_ASCII[i % SERIES_ASCII.len()];
            let style = look.series(i);
            for b in buckets {
                let x = x_of(b.start(*w) + w / 2.0, 1.0) as u16;
                let (ya, yb) = (y_of(to_y(b.max), 1.0), y_of(to_y(b.min), 1.0));
                for y in ya..=yb {
                    if x < plot.width && (y as u16) < plot.height {
                        let c = if y == ya || y == yb { mark } else { '|' };
                        buf[(plot.x + x, plot.y + y as u16)]
                            .set_char(c)
                            .set_style(style);
                    }
                }
            }
        }
    } else {
        let mut dots = Dots::new(plot.width as usize, plot.height as usize);
        for (i, (_, buckets, w)) in series.iter().enumerate() {
            let mut prev: Option<&crate::history::Bucket> = None;
            for b in buckets {
                let x = x_of(b.start(*w) + w / 2.0, 2.0);
                // Adjacent buckets are joined, so a fast pump-down reads as a
                // line; a missing bucket leaves the gap open.
                let (mut hi_v, mut lo_v) = (b.max, b.min);
                if let Some(p) = prev.filter(|p| p.index + 1 == b.index) {
                    hi_v = hi_v.max(p.min);
                    lo_v = lo_v.min(p.max);
                }
                let (ya, yb) = (y_of(to_y(hi_v), 4.0), y_of(to_y(lo_v), 4.0));
                for y in ya..=yb {
                    dots.set(x, y, i);
                }
                prev = Some(b);
            }
        }
        for (k, (bits, s)) in dots.cells.iter().enumerate() {
            if *bits == 0 {
                continue;
            }
            let (x, y) = ((k % dots.w) as u16, (k / dots.w) as u16);
            let ch = char::from_u32(0x2800 + u32::from(*bits)).unwrap_or('*');
            buf[(plot.x + x, plot.y + y)]
                .set_char(ch)
                .set_style(look.series(s.unwrap_or(0)));
        }
    }
    // Alarm events in the window, marked on the top row.
    for e in app
        .events
        .iter()
        .filter(|e| e.to_text() == "unacknowledged")
    {
        let t = app.secs(e.time);
        if (t0..=t1).contains(&t) {
            let x = x_of(t, 1.0) as u16;
            if x < plot.width {
                buf[(plot.x + x, plot.y)]
                    .set_char('!')
                    .set_style(look.alarm);
            }
        }
    }
    // Time axis.
    let axis_y = plot.y + plot.height;
    let left = format!("-{}", span_text(app.window_s));
    buf.set_string(plot.x, axis_y, &left, look.dim);
    let right = now.format("%H:%M:%S").to_string();
    let rx = (plot.x + plot.width).saturating_sub(right.len() as u16);
    buf.set_string(rx, axis_y, &right, look.dim);
    // Legend.
    let mut lx = plot.x + left.len() as u16 + 2;
    let legend_unit = format!("[{}] ", unit.symbol());
    buf.set_string(lx, axis_y, &legend_unit, look.dim);
    lx += legend_unit.len() as u16;
    for (i, (id, _, _)) in series.iter().enumerate() {
        let text = if look.ascii || !look.color {
            format!("{} {id}  ", SERIES_ASCII[i % SERIES_ASCII.len()])
        } else {
            format!("━ {id}  ")
        };
        if lx + (text.chars().count() as u16) < rx {
            buf.set_string(lx, axis_y, &text, look.series(i));
            lx += text.chars().count() as u16;
        }
    }
}

/// `15 min`, `4 h`, `7 d`.
pub fn span_text(s: f64) -> String {
    if s < 120.0 {
        format!("{s:.0} s")
    } else if s < 7200.0 {
        format!("{:.0} min", s / 60.0)
    } else if s < 172_800.0 {
        format!("{:.0} h", s / 3600.0)
    } else {
        format!("{:.0} d", s / 86_400.0)
    }
}

impl Look {
    /// Style of the i-th series.
    pub fn series(&self, i: usize) -> Style {
        if self.color {
            Style::default().fg(SERIES_COLORS[i % SERIES_COLORS.len()])
        } else if i == 0 {
            Style::default().add_modifier(Modifier::BOLD)
        } else {
            Style::default()
        }
    }
}
