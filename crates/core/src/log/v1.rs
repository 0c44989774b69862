//! Writing log format v1 (see the module docs of [`crate::log`]).

use chrono::{DateTime, Utc};
use std::fmt::Write as _;

use crate::sample::{ChannelInfo, ChannelUnit, Fault, Reading, Sample};

/// First line of every v1 log.
pub const MAGIC: &str = "# rarefy log v1";

/// Metadata written as `# key: value` lines.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LogMeta {
    /// Chamber name.
    pub chamber: Option<String>,
    /// Chamber volume, m³.
    pub volume_m3: Option<f64>,
    /// Chamber surface area, m².
    pub surface_area_m2: Option<f64>,
    /// Gas or mixture label (`N2`, `H2=0.6,N2=0.4`).
    pub gas: Option<String>,
    /// Source URI.
    pub source: Option<String>,
    /// When recording started.
    pub started: Option<DateTime<Utc>>,
    /// Any other `key: value` pairs, in order.
    pub extra: Vec<(String, String)>,
}

/// What a column holds.
#[derive(Debug, Clone, PartialEq)]
pub enum ColumnKind {
    /// A measured channel (pressure or temperature).
    Channel(ChannelUnit),
    /// A derived value with its unit symbol, ignored by readers.
    Derived(String),
    /// The gas or mixture in the chamber, as text (header cell `gas`, no
    /// unit): a change of gas during the run.
    Gas,
}

/// The header cell of the gas column.
pub const GAS_COLUMN: &str = "gas";

/// One column after `time`.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// Channel id, or derived name such as `chamber.mean_free_path`.
    pub name: String,
    /// What it holds.
    pub kind: ColumnKind,
}

impl Column {
    /// A channel column.
    pub fn channel(info: &ChannelInfo) -> Self {
        Column {
            name: info.id.clone(),
            kind: ColumnKind::Channel(info.unit),
        }
    }

    /// The header cell, `name [unit]`.
    pub fn header(&self) -> String {
        let unit = match &self.kind {
            ColumnKind::Channel(u) => u.symbol().to_string(),
            ColumnKind::Derived(u) => u.clone(),
            ColumnKind::Gas => return GAS_COLUMN.to_string(),
        };
        format!("{} [{unit}]", self.name)
    }
}

/// Formats a time as RFC 3339 UTC with milliseconds.
pub fn format_time(t: DateTime<Utc>) -> String {
    crate::timefmt::write_rfc3339(t)
}

/// Quotes a CSV cell when it needs it.
fn csv_cell(out: &mut String, text: &str) {
    if text.contains([',', '"', '\n', '\r']) {
        out.push('"');
        out.push_str(&text.replace('"', "\"\""));
        out.push('"');
    } else {
        out.push_str(text);
    }
}

/// Metadata values are one line each; line breaks are replaced, and what
/// could act on a terminal showing the file is escaped.
fn meta_value(v: &str) -> String {
    crate::parse::terminal_text(&v.replace(['\r', '\n'], " ").replace('\t', " "))
}

/// The header block: magic line, metadata lines, header row; ends with `\n`.
pub fn header(meta: &LogMeta, columns: &[Column]) -> String {
    let mut s = String::new();
    s.push_str(MAGIC);
    s.push('\n');
    let mut kv = |k: &str, v: &str| {
        let _ = writeln!(s, "# {}: {}", meta_value(k), meta_value(v));
    };
    if let Some(c) = &meta.chamber {
        kv("chamber", c);
    }
    if let Some(v) = meta.volume_m3 {
        kv("volume", &format!("{v:e} m3"));
    }
    if let Some(a) = meta.surface_area_m2 {
        kv("surface_area", &format!("{a:e} m2"));
    }
    if let Some(g) = &meta.gas {
        kv("gas", g);
    }
    if let Some(src) = &meta.source {
        kv("source", src);
    }
    if let Some(t) = meta.started {
        kv("started", &format_time(t));
    }
    for (k, v) in &meta.extra {
        kv(k, v);
    }
    s.push_str("time");
    for c in columns {
        s.push(',');
        csv_cell(&mut s, &crate::parse::terminal_text(&c.header()));
    }
    s.push('\n');
    s
}

/// What one cell of a row holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Cell {
    /// No reading.
    Empty,
    /// A valid value in the column's unit.
    Value(f64),
    /// A derived value, written with six significant digits.
    Derived(f64),
    /// A bad reading, written as its status word.
    Bad(Fault),
}

impl Cell {
    /// The cell for a sample: its value when valid, else its status word.
    /// A value that is not finite cannot be written and becomes `unparsed`.
    pub fn of(sample: &Sample) -> Cell {
        match sample.reading {
            Reading::Value(v) if v.is_finite() => Cell::Value(v),
            Reading::Value(_) => Cell::Bad(Fault::Unparsed),
            Reading::Bad(f) => Cell::Bad(f),
        }
    }
}

/// Appends one data row (ending in `\n`) to `out`.
pub fn write_row(out: &mut String, time: DateTime<Utc>, cells: &[Cell]) {
    out.push_str(&format_time(time));
    for c in cells {
        out.push(',');
        match c {
            Cell::Empty => {}
            // `{:e}` is the shortest form that reads back to the same f64.
            Cell::Value(v) => {
                let _ = write!(out, "{v:e}");
            }
            Cell::Derived(v) => {
                let _ = write!(out, "{v:.5e}");
            }
            Cell::Bad(f) => out.push_str(f.as_str()),
        }
    }
    out.push('\n');
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::{PressureUnit, TemperatureUnit};

    #[test]
    fn header_and_rows() {
        let meta = LogMeta {
            chamber: Some("KV-7".into()),
            volume_m3: Some(0.085),
            gas: Some("N2".into()),
            source: Some("sim:pumpdown".into()),
            started: DateTime::parse_from_rfc3339("2026-12-01T19:00:00Z")
                .ok()
                .map(|t| t.with_timezone(&Utc)),
            ..LogMeta::default()
        };
        let cols = [
            Column::channel(&ChannelInfo::new(
                "chamber",
                ChannelUnit::Pressure(PressureUnit::Mbar),
            )),
            Column::channel(&ChannelInfo::new(
                "wall",
                ChannelUnit::Temperature(TemperatureUnit::C),
            )),
            Column {
                name: "chamber.mean_free_path".into(),
                kind: ColumnKind::Derived("m".into()),
            },
        ];
        let h = header(&meta, &cols);
        assert_eq!(
            h,
            "# rarefy log v1\n# chamber: KV-7\n# volume: 8.5e-2 m3\n# gas: N2\n# source: sim:pumpdown\n\
             # started: 2026-12-01T19:00:00.000Z\ntime,chamber [mbar],wall [C],chamber.mean_free_path [m]\n"
        );
        let mut row = String::new();
        let t = meta.started.unwrap_or_default();
        write_row(
            &mut row,
            t,
            &[Cell::Bad(Fault::OverRange), Cell::Value(22.0), Cell::Empty],
        );
        assert_eq!(row, "2026-12-01T19:00:00.000Z,over-range,2.2e1,\n");
    }

    #[test]
    fn header_text_cannot_act_on_a_terminal() {
        let meta = LogMeta {
            chamber: Some("rig\u{1b}]0;owned\u{7}".into()),
            extra: vec![("note\u{1b}[2J".into(), "a\r\nb\u{202e}".into())],
            ..LogMeta::default()
        };
        let cols = [Column {
            name: "p\u{1b}[31m".into(),
            kind: ColumnKind::Derived("m".into()),
        }];
        let h = header(&meta, &cols);
        assert!(!h.contains('\u{1b}') && !h.contains('\u{202e}'), "{h:?}");
        assert!(h.contains("# chamber: rig\\x1b]0;owned\\x07\n"), "{h}");
        assert!(h.contains("# note\\x1b[2J: a  b\\u{202e}\n"), "{h}");
        assert!(h.ends_with("time,p\\x1b[31m [m]\n"), "{h}");
    }

    #[test]
    fn numbers_are_written_exactly() {
        for v in [
            1.0134e3,
            1e-11,
            0.1 + 0.2,
            6.02214076e23,
            123.456_789_012_345,
        ] {
            let mut row = String::new();
            write_row(&mut row, DateTime::<Utc>::UNIX_EPOCH, &[Cell::Value(v)]);
            let cell = row.trim_end().rsplit(',').next().unwrap_or_default();
            assert_eq!(cell.parse::<f64>(), Ok(v));
        }
    }
}
