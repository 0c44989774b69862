//! Other loggers' CSV exports, read through a `[log]` section of the
//! configuration:
//!
//! ```toml
//! [log]
//! delimiter = ";"            # ",", ";", "\t" or "tab", "|", " " or "space"
//! decimal_comma = true       # numbers are written 1,5E-03
//! skip_rows = 3              # lines before the column-name row
//! time = { column = "Timestamp", format = "%d.%m.%Y %H:%M:%S", timezone = "Europe/Vienna" }
//!
//! [[log.column]]
//! name = "P chamber"         # header cell text, or `index = 2` (0-based)
//! channel = "chamber"
//! unit = "mbar"
//! status = { "OR" = "over-range", "UR" = "under-range", "ERR" = "sensor-error" }
//! ```
//!
//! `format` is `"rfc3339"`, `"epoch-s"`, `"epoch-ms"` or a strftime pattern.
//! A pattern without a UTC offset (`%z`) is local time and needs `timezone`: a
//! time-zone name (`"Europe/Vienna"`, `"UTC"`) or a fixed offset (`"+01:00"`).
//!
//! Daylight-saving changes, with a named zone:
//!
//! * a local time that occurs twice (the hour repeated when the clocks go
//!   back) is read as the earlier instant, unless that would put the row
//!   before the row above it while the later instant would not — so a log
//!   written straight through the change reads in order. Each such row is
//!   counted ([`ForeignReader::ambiguous_times`]);
//! * a local time that does not exist (skipped when the clocks go forward) is
//!   a located error: the logger's clock was wrong, and no guess is made.
//!
//! Cells that are empty give no sample (a gap). Text columns listed in
//! `notes = ["Event"]` (by header cell text) are kept as the rows' notes
//! ([`Row::notes`]), non-empty cells only. Other columns not named in the
//! configuration are ignored.

use chrono::{DateTime, FixedOffset, Utc};
use serde::Deserialize;
use std::collections::BTreeMap;
use std::fmt;
use std::io::BufRead;
use std::ops::Range;
use toml::Spanned;

use super::lines::{self, Encoding, Lines};
use super::read::{LogError, Row, show, text_in};
use super::v1::{Column, ColumnKind, LogMeta};
use crate::sample::{ChannelInfo, ChannelUnit, Fault, Reading, Sample, Status};
use crate::timefmt::check_zone;
pub use crate::timefmt::{TimeFormat, Zone};
use crate::units::{PressureUnit, TemperatureUnit, UnitKind};

/// `[log]`: how to read another logger's CSV export.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LogSection {
    /// Cell delimiter: `","` (default), `";"`, `"\t"` or `"tab"`, `"|"`,
    /// `" "` or `"space"`.
    pub delimiter: Option<Spanned<String>>,
    /// Numbers are written with a decimal comma (`1,5E-03`); default false.
    pub decimal_comma: Option<Spanned<bool>>,
    /// Lines before the column-name row (title, device, export date …);
    /// default 0.
    pub skip_rows: Option<Spanned<i64>>,
    /// Whether a column-name row follows the skipped lines (default true).
    /// Without one, columns are chosen by `index`.
    pub header: Option<Spanned<bool>>,
    /// Text encoding: `"utf-8"` (default) or `"latin-1"`.
    pub encoding: Option<Spanned<String>>,
    /// The time column.
    pub time: Spanned<TimeSection>,
    /// `[[log.column]]`: the gauge columns to read.
    #[serde(default)]
    pub column: Vec<ColumnSection>,
    /// Text columns kept as row notes (operator remarks), by header cell
    /// text: `notes = ["Event"]`.
    #[serde(default)]
    pub notes: Vec<Spanned<String>>,
    /// A text column holding the gas or mixture in the chamber, by header
    /// cell text: `gas = "Process gas"`.
    pub gas: Option<Spanned<String>>,
}

/// `time = { column = "Timestamp", format = "…", timezone = "…" }`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TimeSection {
    /// Header cell text of the time column.
    pub column: Option<Spanned<String>>,
    /// Or its 0-based position.
    pub index: Option<Spanned<i64>>,
    /// `"rfc3339"`, `"epoch-s"`, `"epoch-ms"` or a strftime pattern such as
    /// `"%d.%m.%Y %H:%M:%S"`.
    pub format: Spanned<String>,
    /// Time zone of local times: an IANA name (`"Europe/Vienna"`, `"UTC"`) or
    /// a fixed offset (`"+01:00"`). Needed by patterns without `%z`.
    pub timezone: Option<Spanned<String>>,
}

/// `[[log.column]]`: one gauge column.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ColumnSection {
    /// Header cell text.
    pub name: Option<Spanned<String>>,
    /// Or its 0-based position.
    pub index: Option<Spanned<i64>>,
    /// Channel id the readings get (the gauge id).
    pub channel: Spanned<String>,
    /// Unit of the numbers, a pressure or temperature unit (`"mbar"`, `"C"`).
    pub unit: Spanned<String>,
    /// The logger's words for bad readings, mapped to statuses
    /// (`{ "OR" = "over-range" }`).
    #[serde(default)]
    pub status: BTreeMap<String, Spanned<String>>,
}

/// Which cell of a row a column is.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ColumnRef {
    /// The cell under this header text.
    Name(String),
    /// The cell at this 0-based position.
    Index(usize),
}

impl fmt::Display for ColumnRef {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ColumnRef::Name(n) => write!(f, "\"{n}\""),
            ColumnRef::Index(i) => write!(f, "index {i}"),
        }
    }
}

/// The time column, resolved.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeColumn {
    /// Where the time is.
    pub column: ColumnRef,
    /// How it is written.
    pub format: TimeFormat,
    /// Zone of local times (pattern formats without an offset).
    pub zone: Option<Zone>,
}

/// A gauge column, resolved.
#[derive(Debug, Clone, PartialEq)]
pub struct ForeignColumn {
    /// Where the cell is.
    pub column: ColumnRef,
    /// Channel id.
    pub channel: String,
    /// Unit of the numbers.
    pub unit: ChannelUnit,
    /// The logger's status words and what they mean.
    pub status: Vec<(String, Fault)>,
}

/// A checked `[log]` section: everything needed to read a foreign log.
#[derive(Debug, Clone, PartialEq)]
pub struct ForeignLogSpec {
    /// Cell delimiter.
    pub delimiter: char,
    /// Numbers use a decimal comma.
    pub decimal_comma: bool,
    /// Lines before the column-name row.
    pub skip_rows: u64,
    /// Whether there is a column-name row.
    pub header: bool,
    /// Text encoding.
    pub encoding: Encoding,
    /// The time column.
    pub time: TimeColumn,
    /// The gauge columns.
    pub columns: Vec<ForeignColumn>,
    /// Text columns kept as row notes (operator remarks).
    pub notes: Vec<ColumnRef>,
    /// The column that holds the gas in the chamber.
    pub gas: Option<ColumnRef>,
}

impl ForeignLogSpec {
    /// One line saying how logs will be read, for `config check`.
    pub fn summary(&self) -> String {
        let delimiter = match self.delimiter {
            '\t' => "tab".to_string(),
            ' ' => "space".to_string(),
            c => format!("\"{c}\""),
        };
        let format = &self.time.format;
        let zone = self
            .time
            .zone
            .map(|z| format!(" in {z}"))
            .unwrap_or_default();
        let channels = self
            .columns
            .iter()
            .map(|c| format!("{} [{}]", c.channel, c.unit))
            .collect::<Vec<_>>()
            .join(", ");
        format!(
            "foreign CSV, delimiter {delimiter}{}, {} line(s) skipped, time {} as {format}{zone}; channels {channels}",
            if self.decimal_comma {
                ", decimal comma"
            } else {
                ""
            },
            self.skip_rows,
            self.time.column,
        )
    }
}

/// Problems found resolving a section: byte spans in the TOML text and messages.
pub type SpanErrors = Vec<(Range<usize>, String)>;

const DELIMITERS: &str = "\",\", \";\", \"\\t\" (or \"tab\"), \"|\", \" \" (or \"space\")";

impl LogSection {
    /// Checks the section and resolves it; every problem is reported with the
    /// span of the offending value.
    pub fn resolve(self) -> Result<ForeignLogSpec, SpanErrors> {
        let mut errors: SpanErrors = Vec::new();
        let mut err = |span: Range<usize>, msg: String| errors.push((span, msg));

        let delimiter = match &self.delimiter {
            None => ',',
            Some(d) => match d.get_ref().as_str() {
                "," => ',',
                ";" => ';',
                "\t" | "tab" | "\\t" => '\t',
                "|" => '|',
                " " | "space" => ' ',
                other => {
                    err(
                        d.span(),
                        format!(
                            "unknown delimiter \"{}\"; expected {DELIMITERS}",
                            other.escape_debug()
                        ),
                    );
                    ','
                }
            },
        };
        let decimal_comma = self.decimal_comma.as_ref().is_some_and(|d| *d.get_ref());
        if decimal_comma && delimiter == ',' {
            let span = self.decimal_comma.as_ref().map_or(0..0, |d| d.span());
            err(
                span,
                "decimal_comma = true needs a delimiter other than \",\" (e.g. delimiter = \";\")"
                    .into(),
            );
        }
        let encoding = match &self.encoding {
            None => Encoding::Utf8,
            Some(e) => match e.get_ref().to_ascii_lowercase().as_str() {
                "utf-8" | "utf8" => Encoding::Utf8,
                "latin-1" | "latin1" | "iso-8859-1" => Encoding::Latin1,
                other => {
                    let hint = crate::suggest::nearest(other, ["utf-8", "latin-1"])
                        .map(|s| format!("; did you mean \"{s}\"?"))
                        .unwrap_or_default();
                    err(
                        e.span(),
                        format!(
                            "unknown encoding \"{}\"{hint} (expected \"utf-8\" or \"latin-1\")",
                            other.escape_debug()
                        ),
                    );
                    Encoding::Utf8
                }
            },
        };
        let header = self.header.as_ref().is_none_or(|h| *h.get_ref());
        let skip_rows = match &self.skip_rows {
            None => 0,
            Some(s) => u64::try_from(*s.get_ref()).unwrap_or_else(|_| {
                err(
                    s.span(),
                    format!(
                        "skip_rows must be 0 or more (the number of lines before the column-name row), got {}",
                        s.get_ref()
                    ),
                );
                0
            }),
        };

        // Every column reference, with its span, to find those used twice.
        let mut refs: Vec<(ColumnRef, Range<usize>, String)> = Vec::new();
        let mut column_ref = |name: &Option<Spanned<String>>,
                              index: &Option<Spanned<i64>>,
                              whole: Range<usize>,
                              what: String,
                              err: &mut dyn FnMut(Range<usize>, String)|
         -> Option<ColumnRef> {
            let r = match (name, index) {
                (Some(_), Some(i)) => {
                    err(
                        i.span(),
                        format!("{what}: give either `name`/`column` or `index`, not both"),
                    );
                    return None;
                }
                (None, None) => {
                    err(
                        whole,
                        format!(
                            "{what}: say which column it is, with `name`/`column` (header text) or `index` (0-based)"
                        ),
                    );
                    return None;
                }
                (Some(n), None) => {
                    let text = n.get_ref().trim();
                    if text.is_empty() {
                        err(n.span(), format!("{what}: the column name is empty"));
                        return None;
                    }
                    if !header {
                        err(
                            n.span(),
                            format!(
                                "{what}: with header = false there are no column names; use `index`"
                            ),
                        );
                        return None;
                    }
                    (ColumnRef::Name(text.to_string()), n.span())
                }
                (None, Some(i)) => match usize::try_from(*i.get_ref()) {
                    Ok(v) if v < 100_000 => (ColumnRef::Index(v), i.span()),
                    _ => {
                        let why = if *i.get_ref() < 0 {
                            "must be 0 or more (the first column is 0)"
                        } else {
                            "is too large"
                        };
                        err(i.span(), format!("{what}: index {} {why}", i.get_ref()));
                        return None;
                    }
                },
            };
            if let Some((_, _, first)) = refs.iter().find(|(c, _, _)| *c == r.0) {
                err(
                    r.1,
                    format!("{what}: column {} is already read as {first}", r.0),
                );
                return None;
            }
            refs.push((r.0.clone(), r.1, what));
            Some(r.0)
        };

        // The time column.
        let t = self.time.get_ref();
        let time_ref = column_ref(
            &t.column,
            &t.index,
            self.time.span(),
            "the time".to_string(),
            &mut err,
        );
        let format_text = t.format.get_ref().trim();
        let format = match TimeFormat::parse(format_text) {
            Ok(f) => Some(f),
            Err(msg) => {
                err(t.format.span(), msg);
                None
            }
        };
        let zone = match &t.timezone {
            None => None,
            Some(z) => match Zone::parse(z.get_ref()) {
                Ok(zone) => Some(zone),
                Err(msg) => {
                    err(z.span(), msg);
                    None
                }
            },
        };
        let local = format.as_ref().is_some_and(TimeFormat::is_local);
        match (&t.timezone, local, &format) {
            (None, true, _) => err(
                t.format.span(),
                format!(
                    "the time format \"{}\" has no UTC offset, so give the logger's `timezone` \
                     (e.g. timezone = \"Europe/Vienna\", \"UTC\" or \"+01:00\")",
                    format_text.escape_debug()
                ),
            ),
            (Some(z), _, Some(f)) => {
                if let Err(msg) = check_zone(f, true) {
                    err(z.span(), msg);
                }
            }
            _ => {}
        }

        // The gauge columns.
        if self.column.is_empty() {
            err(
                self.time.span(),
                "[log] reads no gauge column; add at least one [[log.column]] with `name`, `channel` and `unit`"
                    .into(),
            );
        }
        let mut columns = Vec::new();
        let mut channels: Vec<String> = Vec::new();
        for c in &self.column {
            let channel = c.channel.get_ref().trim().to_string();
            let what = format!("column for channel `{channel}`");
            let r = column_ref(&c.name, &c.index, c.channel.span(), what, &mut err);
            if channel.is_empty()
                || !channel
                    .chars()
                    .all(|ch| ch.is_ascii_alphanumeric() || "_-.".contains(ch))
            {
                err(
                    c.channel.span(),
                    "a channel id must be non-empty and use only letters, digits, '_', '-' and '.'"
                        .into(),
                );
                continue;
            }
            if channels.contains(&channel) {
                err(
                    c.channel.span(),
                    format!("channel `{channel}` is read from two columns"),
                );
                continue;
            }
            channels.push(channel.clone());
            let unit = match ChannelUnit::parse(c.unit.get_ref()) {
                Some(u) => Some(u),
                None => {
                    err(c.unit.span(), unknown_unit(c.unit.get_ref()));
                    None
                }
            };
            let mut status = Vec::new();
            for (word, meaning) in &c.status {
                let w = word.trim();
                if w.is_empty() {
                    err(
                        meaning.span(),
                        "an empty status word: empty cells are gaps already".into(),
                    );
                    continue;
                }
                if w.replace(',', ".").parse::<f64>().is_ok() {
                    err(
                        meaning.span(),
                        format!(
                            "status word \"{}\" reads as a number; it would hide readings",
                            w.escape_debug()
                        ),
                    );
                    continue;
                }
                match meaning.get_ref().parse::<Status>().map(Status::fault) {
                    Ok(None) => err(
                        meaning.span(),
                        format!(
                            "status word \"{}\" cannot mean `ok`: a valid reading is a number; expected one of {}",
                            w.escape_debug(),
                            super::read::status_words()
                        ),
                    ),
                    Ok(Some(f)) => status.push((w.to_string(), f)),
                    Err(_) => {
                        let words = Status::ALL
                            .iter()
                            .filter(|s| !s.is_ok())
                            .map(|s| s.as_str());
                        let hint = crate::suggest::nearest(meaning.get_ref(), words)
                            .map(|s| format!("; did you mean \"{s}\"?"))
                            .unwrap_or_default();
                        err(
                            meaning.span(),
                            format!(
                                "unknown status \"{}\"{hint} (expected one of {})",
                                meaning.get_ref().escape_debug(),
                                super::read::status_words()
                            ),
                        );
                    }
                }
            }
            if let (Some(column), Some(unit)) = (r, unit) {
                columns.push(ForeignColumn {
                    column,
                    channel,
                    unit,
                    status,
                });
            }
        }

        // Note and gas columns are chosen by their header text: a name,
        // in a log that has a column-name row, not taken already.
        let mut by_name = |key: &Spanned<String>, what: &str, taken: &[ColumnRef]| {
            let text = key.get_ref().trim();
            let problem = if !header {
                Some(format!(
                    "{what} names a header cell, but header = false: this log has no column-name row"
                ))
            } else if text.is_empty() {
                Some(format!("the {what} column needs its header cell text"))
            } else if taken.contains(&ColumnRef::Name(text.to_string())) {
                Some(format!(
                    "column \"{}\" is already a notes column",
                    show(text)
                ))
            } else {
                None
            };
            match problem {
                Some(p) => {
                    err(key.span(), p);
                    None
                }
                None => Some(ColumnRef::Name(text.to_string())),
            }
        };
        let mut notes = Vec::new();
        for n in &self.notes {
            if let Some(c) = by_name(n, "notes", &notes) {
                notes.push(c);
            }
        }
        let gas = self.gas.as_ref().and_then(|g| by_name(g, "gas", &notes));

        match (time_ref, format) {
            (Some(column), Some(format)) if errors.is_empty() => Ok(ForeignLogSpec {
                delimiter,
                decimal_comma,
                skip_rows,
                header,
                encoding,
                time: TimeColumn {
                    column,
                    format,
                    zone,
                },
                columns,
                notes,
                gas,
            }),
            _ => Err(errors),
        }
    }
}

fn unknown_unit(text: &str) -> String {
    let symbols: Vec<&str> = PressureUnit::ALL
        .iter()
        .map(|u| u.symbol())
        .chain(TemperatureUnit::ALL.iter().map(|u| u.symbol()))
        .collect();
    let hint = crate::suggest::nearest(text.trim(), symbols.iter().copied())
        .map(|s| format!("; did you mean \"{s}\"?"))
        .unwrap_or_default();
    format!(
        "unknown unit \"{}\"{hint}; a gauge column is a pressure or a temperature: {}",
        text.escape_debug(),
        symbols.join(", ")
    )
}

/// `f` of `text` with its decimal commas made points, on the stack when it
/// is short (a number cell), else in a new string.
fn with_points<T>(text: &str, f: impl FnOnce(&str) -> T) -> T {
    if !text.contains(',') {
        return f(text);
    }
    let mut room = [0u8; 64];
    let Some(room) = room.get_mut(..text.len()) else {
        return f(&text.replace(',', "."));
    };
    room.copy_from_slice(text.as_bytes());
    for b in room.iter_mut() {
        if *b == b',' {
            *b = b'.';
        }
    }
    // An ASCII byte replaced by another: still UTF-8.
    match std::str::from_utf8(room) {
        Ok(t) => f(t),
        Err(_) => f(&text.replace(',', ".")),
    }
}

/// Reads a foreign log as described by a [`ForeignLogSpec`].
pub struct ForeignReader<R> {
    lines: Lines<R>,
    name: String,
    spec: ForeignLogSpec,
    time_cell: usize,
    /// (cell index, header text for messages) per spec column.
    cells: Vec<(usize, String)>,
    time_header: String,
    columns: Vec<Column>,
    meta: LogMeta,
    last_time: Option<DateTime<Utc>>,
    went_back: u64,
    repeated: u64,
    ambiguous: u64,
    last_offset: Option<FixedOffset>,
    offset_changes: u64,
    /// The column-name row's line, when there is one.
    header_line: Option<u64>,
    /// (cell index, header text) per `notes` column.
    note_cells: Vec<(usize, String)>,
    /// Cell index of the gas column.
    gas_cell: Option<usize>,
    /// The time format, its pattern parsed once.
    time_reader: crate::timefmt::TimeReader,
    /// The last row's cells, their buffers reused for the next.
    fields: Vec<lines::Field>,
    /// The last line read, its buffer reused for the next.
    raw: lines::RawLine,
}

impl<R: BufRead> ForeignReader<R> {
    /// Reads the preamble and the column-name row from `reader`; `name` is
    /// the file name used in messages.
    pub fn new(reader: R, name: &str, spec: &ForeignLogSpec) -> Result<Self, LogError> {
        let mut lines = Lines::new(reader);
        let mut meta = LogMeta::default();
        let read_err =
            |e: std::io::Error| LogError::file(name, format!("cannot read the log: {e}"));
        for n in 0..spec.skip_rows {
            match lines.next_line() {
                None => {
                    return Err(LogError::file(
                        name,
                        format!(
                            "the file has only {n} lines, fewer than skip_rows = {} before the {}",
                            spec.skip_rows,
                            if spec.header {
                                "column-name row"
                            } else {
                                "data"
                            }
                        ),
                    ));
                }
                Some(Err(e)) => return Err(read_err(e)),
                Some(Ok(raw)) => {
                    let text = match lines::decode(&raw.bytes, spec.encoding, raw.number == 1) {
                        Ok(t) => t,
                        Err(_) => crate::sample::escape_bytes(&raw.bytes).into(),
                    };
                    let text = text.trim_end_matches(spec.delimiter).trim().to_string();
                    if !text.is_empty() {
                        meta.extra.push(("preamble".to_string(), text));
                    }
                }
            }
        }
        let mut header_cells: Vec<String> = Vec::new();
        let mut header_line = spec.skip_rows + 1;
        if spec.header {
            let raw = match lines.next_line() {
                None => {
                    return Err(LogError::file(
                        name,
                        format!(
                            "the file ends before its column-name row (line {header_line}, after skip_rows = {})",
                            spec.skip_rows
                        ),
                    ));
                }
                Some(Err(e)) => return Err(read_err(e)),
                Some(Ok(raw)) => raw,
            };
            header_line = raw.number;
            let text = text_in(name, &raw, spec.delimiter, spec.encoding)?;
            if text.trim().is_empty() {
                return Err(LogError::at(
                    name,
                    raw.number,
                    None,
                    format!(
                        "line {} should be the column-name row but is blank; check skip_rows (now {})",
                        raw.number, spec.skip_rows
                    ),
                ));
            }
            header_cells = lines::split(&text, spec.delimiter)
                .map_err(|e| LogError::at(name, raw.number, Some(e.field), e.message))?
                .into_iter()
                .map(|f| f.text)
                .collect();
        }
        let find = |r: &ColumnRef| -> Result<usize, LogError> {
            let at = |msg: String| LogError::at(name, header_line, None, msg);
            match r {
                ColumnRef::Index(i) => {
                    if spec.header && *i >= header_cells.len() {
                        Err(at(format!(
                            "index {i} is past the last column: the column-name row has {} cells (index 0 to {})",
                            header_cells.len(),
                            header_cells.len().saturating_sub(1)
                        )))
                    } else {
                        Ok(*i)
                    }
                }
                ColumnRef::Name(n) => {
                    let exact: Vec<usize> = (0..header_cells.len())
                        .filter(|&i| header_cells[i].trim() == n)
                        .collect();
                    let found = if exact.is_empty() {
                        (0..header_cells.len())
                            .filter(|&i| header_cells[i].trim().to_lowercase() == n.to_lowercase())
                            .collect()
                    } else {
                        exact
                    };
                    match found.as_slice() {
                        [i] => Ok(*i),
                        [a, b, ..] => Err(LogError::at(
                            name,
                            header_line,
                            Some(b + 1),
                            format!(
                                "column \"{}\" appears twice in the column-name row (cells {} and {}); choose it by `index`",
                                show(n),
                                a + 1,
                                b + 1
                            ),
                        )),
                        [] => {
                            let hint =
                                crate::suggest::nearest(n, header_cells.iter().map(|s| s.trim()))
                                    .map(|s| format!("; did you mean \"{}\"?", show(s)))
                                    .unwrap_or_default();
                            let list = header_cells
                                .iter()
                                .map(|c| format!("\"{}\"", show(c)))
                                .collect::<Vec<_>>()
                                .join(", ");
                            Err(at(format!(
                                "no column \"{}\" in the column-name row{hint} (its cells: {list}); check the name or skip_rows",
                                show(n)
                            )))
                        }
                    }
                }
            }
        };
        let header_text = |i: usize| {
            header_cells
                .get(i)
                .cloned()
                .unwrap_or_else(|| format!("column {i}"))
        };
        let time_cell = find(&spec.time.column)?;
        let mut cells = Vec::new();
        for c in &spec.columns {
            let i = find(&c.column)?;
            if i == time_cell || cells.iter().any(|&(j, _)| j == i) {
                return Err(LogError::at(
                    name,
                    header_line,
                    Some(i + 1),
                    format!(
                        "column \"{}\" (cell {}) is named twice in [log] (by name and by index)",
                        show(&header_text(i)),
                        i + 1
                    ),
                ));
            }
            cells.push((i, header_text(i)));
        }
        let mut note_cells: Vec<(usize, String)> = Vec::new();
        for n in &spec.notes {
            let i = find(n)?;
            if i == time_cell || cells.iter().chain(&note_cells).any(|&(j, _)| j == i) {
                return Err(LogError::at(
                    name,
                    header_line,
                    Some(i + 1),
                    format!(
                        "column \"{}\" (cell {}) is in [log] notes and read as time, a gauge or another note",
                        show(&header_text(i)),
                        i + 1
                    ),
                ));
            }
            note_cells.push((i, header_text(i)));
        }
        let gas_cell = match &spec.gas {
            None => None,
            Some(g) => {
                let i = find(g)?;
                if i == time_cell || cells.iter().chain(&note_cells).any(|&(j, _)| j == i) {
                    return Err(LogError::at(
                        name,
                        header_line,
                        Some(i + 1),
                        format!(
                            "column \"{}\" (cell {}) is the [log] gas column and read as time, a gauge or a note",
                            show(&header_text(i)),
                            i + 1
                        ),
                    ));
                }
                Some(i)
            }
        };
        let columns = spec
            .columns
            .iter()
            .map(|c| Column {
                name: c.channel.clone(),
                kind: ColumnKind::Channel(c.unit),
            })
            .collect();
        Ok(ForeignReader {
            lines,
            name: name.to_string(),
            spec: spec.clone(),
            time_cell,
            cells,
            time_header: header_text(time_cell),
            columns,
            meta,
            last_time: None,
            went_back: 0,
            repeated: 0,
            ambiguous: 0,
            last_offset: None,
            offset_changes: 0,
            header_line: spec.header.then_some(header_line),
            note_cells,
            gas_cell,
            time_reader: crate::timefmt::TimeReader::new(&spec.time.format),
            fields: Vec::new(),
            raw: lines::RawLine::empty(),
        })
    }

    /// Metadata: the preamble lines, kept in `extra` as `preamble` entries.
    pub fn meta(&self) -> &LogMeta {
        &self.meta
    }

    /// One channel column per configured gauge column.
    pub fn columns(&self) -> &[Column] {
        &self.columns
    }

    /// The channels read.
    pub fn channels(&self) -> Vec<ChannelInfo> {
        super::read::channels_of(&self.columns)
    }

    /// How many rows so far had a time earlier than the row before.
    pub fn times_went_back(&self) -> u64 {
        self.went_back
    }

    /// How many rows so far had the same time as the row before.
    pub fn times_repeated(&self) -> u64 {
        self.repeated
    }

    /// How many rows so far had a local time that occurs twice (the hour
    /// repeated when daylight-saving time ends).
    pub fn ambiguous_times(&self) -> u64 {
        self.ambiguous
    }

    /// How many rows so far had a time with a different UTC offset from the
    /// row before's (times that carry their own offset).
    pub fn time_offset_changes(&self) -> u64 {
        self.offset_changes
    }

    /// The line number of the column-name row, when the log has one.
    pub fn header_line(&self) -> Option<u64> {
        self.header_line
    }

    /// Where the reader is now: after the last line it read.
    pub fn read_position(&self) -> super::ReadPosition {
        super::ReadPosition {
            offset: self.lines.offset(),
            line: self.lines.number(),
            last_time: self.last_time,
            last_offset: self.last_offset,
            times_went_back: self.went_back,
            times_repeated: self.repeated,
            ambiguous_times: self.ambiguous,
            time_offset_changes: self.offset_changes,
        }
    }

    /// A reader of the same log that reads `input` (the log's bytes from
    /// `at.offset` on) as this reader would have gone on from `at`.
    pub fn resumed<S: BufRead>(&self, input: S, at: &super::ReadPosition) -> ForeignReader<S> {
        ForeignReader {
            lines: Lines::resume(input, at.line, at.offset),
            name: self.name.clone(),
            spec: self.spec.clone(),
            time_cell: self.time_cell,
            cells: self.cells.clone(),
            time_header: self.time_header.clone(),
            columns: self.columns.clone(),
            meta: self.meta.clone(),
            last_time: at.last_time,
            went_back: at.times_went_back,
            repeated: at.times_repeated,
            ambiguous: at.ambiguous_times,
            last_offset: at.last_offset,
            offset_changes: at.time_offset_changes,
            header_line: self.header_line,
            note_cells: self.note_cells.clone(),
            gas_cell: self.gas_cell,
            time_reader: self.time_reader.clone(),
            fields: Vec::new(),
            raw: lines::RawLine::empty(),
        }
    }

    fn parse_time(&mut self, text: &str) -> Result<(DateTime<Utc>, Option<FixedOffset>), String> {
        let bad = |why: String| {
            format!(
                "time \"{}\" in column \"{}\" {why}",
                show(text),
                show(&self.time_header)
            )
        };
        if text.is_empty() {
            return Err(bad("is empty".into()));
        }
        let normalized;
        let text_num = if self.spec.decimal_comma {
            normalized = text.replace(',', ".");
            normalized.as_str()
        } else {
            text
        };
        let format = &self.spec.time.format;
        let text = if format.is_epoch() { text_num } else { text };
        if *format == TimeFormat::Rfc3339 && crate::timefmt::lacks_offset(text) {
            return Err(bad(crate::timefmt::missing_offset(self.last_offset)));
        }
        let read = self
            .time_reader
            .read(text, self.spec.time.zone, self.last_time)
            .map_err(bad)?;
        if read.ambiguous {
            self.ambiguous += 1;
        }
        Ok((read.time, read.offset))
    }

    fn cell(&self, k: usize, text: &str) -> Result<Option<Reading>, String> {
        if text.is_empty() {
            return Ok(None);
        }
        let col = &self.spec.columns[k];
        let header = &self.cells[k].1;
        if let Some((_, s)) = col.status.iter().find(|(w, _)| w == text).or_else(|| {
            col.status
                .iter()
                .find(|(w, _)| w.eq_ignore_ascii_case(text))
        }) {
            return Ok(Some(Reading::Bad(*s)));
        }
        // Messages are made only for a cell that has something to say.
        let prefix = || format!("column \"{}\": cell \"{}\"", show(header), show(text));
        let parsed = if self.spec.decimal_comma {
            if text.contains('.') {
                return Err(format!(
                    "{} has a '.', but the [log] section says decimal_comma = true",
                    prefix()
                ));
            }
            with_points(text, |t| t.parse::<f64>())
        } else {
            text.parse::<f64>()
        };
        match parsed {
            Ok(v) if v.is_finite() => Ok(Some(Reading::Value(v))),
            Ok(_) => Err(format!(
                "{} is not a finite number; map the word to a status with `status = {{ \"{}\" = \"sensor-error\" }}`",
                prefix(),
                show(text)
            )),
            Err(_) => {
                let hint = if !self.spec.decimal_comma
                    && text.contains(',')
                    && text.replace(',', ".").parse::<f64>().is_ok()
                {
                    " (set decimal_comma = true in [log] if the logger writes decimal commas)"
                        .to_string()
                } else if col.status.is_empty() {
                    format!(
                        "; no status words are set for this column (add e.g. `status = {{ \"{}\" = \"sensor-error\" }}` to its [[log.column]])",
                        show(text)
                    )
                } else {
                    let words = col
                        .status
                        .iter()
                        .map(|(w, _)| format!("\"{}\"", show(w)))
                        .collect::<Vec<_>>()
                        .join(", ");
                    format!(" or a status word of this column ({words})")
                };
                Err(format!("{} is not a number{hint}", prefix()))
            }
        }
    }

    fn row(&mut self, raw: &lines::RawLine, out: &mut Row) -> Option<Result<(), LogError>> {
        let text = match text_in(&self.name, raw, self.spec.delimiter, self.spec.encoding) {
            Ok(t) => t,
            Err(e) => return Some(Err(e)),
        };
        let at =
            |name: &str, col: Option<usize>, msg: String| LogError::at(name, raw.number, col, msg);
        if text.trim().is_empty() {
            return None;
        }
        let mut cells = std::mem::take(&mut self.fields);
        if let Err(e) = lines::split_into(&text, self.spec.delimiter, &mut cells) {
            self.fields = cells;
            return Some(Err(at(&self.name, Some(e.field), e.message)));
        }
        let row = self.row_of(raw, &cells, out);
        self.fields = cells;
        row
    }

    /// [`ForeignReader::row`] once the line is cut into `cells`.
    fn row_of(
        &mut self,
        raw: &lines::RawLine,
        cells: &[lines::Field],
        out: &mut Row,
    ) -> Option<Result<(), LogError>> {
        let at =
            |name: &str, col: Option<usize>, msg: String| LogError::at(name, raw.number, col, msg);
        if cells.iter().all(|c| c.text.is_empty()) {
            return None;
        }
        let Some(time_text) = cells.get(self.time_cell) else {
            return Some(Err(at(
                &self.name,
                Some(cells.len() + 1),
                format!(
                    "row has {} cells; the time (\"{}\") is cell {}",
                    cells.len(),
                    show(&self.time_header),
                    self.time_cell + 1
                ),
            )));
        };
        let (time, offset) = match self.parse_time(&time_text.text) {
            Ok(t) => t,
            Err(msg) => return Some(Err(at(&self.name, Some(self.time_cell + 1), msg))),
        };
        // The row's samples refilled where the last row's lie.
        let mut samples = std::mem::take(&mut out.samples);
        let mut used = 0;
        let mut put = |samples: &mut Vec<Sample>, col: &ForeignColumn, reading: Reading| {
            match samples.get_mut(used) {
                Some(s) => {
                    s.time = time;
                    s.channel.clone_from(&col.channel);
                    s.unit = col.unit;
                    s.reading = reading;
                }
                None => samples.push(Sample {
                    time,
                    channel: col.channel.clone(),
                    unit: col.unit,
                    reading,
                }),
            }
            used += 1;
        };
        let mut bad: Vec<(usize, String)> = Vec::new();
        for (k, (i, header)) in self.cells.iter().enumerate() {
            let col = &self.spec.columns[k];
            let Some(cell) = cells.get(*i) else {
                put(&mut samples, col, Reading::Bad(Fault::Unparsed));
                bad.push((
                    cells.len() + 1,
                    format!(
                        "row has {} cells; column \"{}\" is cell {}",
                        cells.len(),
                        show(header),
                        i + 1
                    ),
                ));
                continue;
            };
            match self.cell(k, &cell.text) {
                Ok(None) => {}
                Ok(Some(reading)) => {
                    if let Reading::Value(v) = reading
                        && let Some(msg) = super::read::not_above_zero(col.unit, v, &cell.text)
                    {
                        bad.push((i + 1, msg));
                    }
                    put(&mut samples, col, reading);
                }
                Err(msg) => {
                    put(&mut samples, col, Reading::Bad(Fault::Unparsed));
                    bad.push((i + 1, msg));
                }
            }
        }
        let (time_went_back, time_repeated) = super::read::time_order(self.last_time, time);
        self.went_back += u64::from(time_went_back);
        self.repeated += u64::from(time_repeated);
        self.last_time = Some(time);
        let offset_change = super::read::offset_order(&mut self.last_offset, offset);
        self.offset_changes += u64::from(offset_change.is_some());
        let notes = self
            .note_cells
            .iter()
            .filter_map(|(i, header)| {
                let text = cells.get(*i)?.text.trim();
                (!text.is_empty()).then(|| (header.clone(), text.to_string()))
            })
            .collect();
        samples.truncate(used);
        *out = Row {
            line: raw.number,
            time,
            samples,
            time_went_back,
            time_repeated,
            offset_change,
            notes,
            gas: self
                .gas_cell
                .and_then(|i| cells.get(i))
                .map(|c| c.text.trim().to_string())
                .filter(|g| !g.is_empty()),
        };
        if bad.is_empty() {
            return Some(Ok(()));
        }
        // A bad row goes with its error (`out` is left empty).
        let row = std::mem::take(out);
        Some(
            super::read::row_result(row, bad, |col, msg| at(&self.name, Some(col), msg))
                .map(|_| ()),
        )
    }

    /// The next row into `row`, its samples and their channel names
    /// refilled where the last row's lie: what the iterator gives, without
    /// allocating per row. `Some(Ok(()))`: `row` holds the row.
    /// `Some(Err(e))`: a bad row, its good readings in `e.row` as the
    /// iterator gives them (`row` then holds nothing to use). `None`: the
    /// end of the log.
    pub fn next_row_into(&mut self, row: &mut Row) -> Option<Result<(), LogError>> {
        loop {
            let mut raw = std::mem::replace(&mut self.raw, lines::RawLine::empty());
            if let Err(e) = self.lines.next_located_into(&self.name, &mut raw)? {
                self.raw = raw;
                return Some(Err(e));
            }
            let item = self.row(&raw, row);
            self.raw = raw;
            if let Some(item) = item {
                return Some(item);
            }
        }
    }
}

impl<R: BufRead> Iterator for ForeignReader<R> {
    type Item = Result<Row, LogError>;

    fn next(&mut self) -> Option<Self::Item> {
        let mut row = Row::default();
        Some(self.next_row_into(&mut row)?.map(|()| row))
    }
}
