//! Reading log format v1 (see the module docs of [`crate::log`]), streaming:
//! one line in memory at a time, so logs larger than memory can be read.
//!
//! [`LogReader::new`] reads the header block (magic line, metadata, header
//! row); the reader is then an iterator of [`Row`]s. A bad line gives a
//! located [`LogError`] and the iterator goes on with the next line; the
//! caller decides whether to stop. An I/O error ends the iteration.

use chrono::{DateTime, FixedOffset, Offset, Utc};
use std::fmt;
use std::io::BufRead;

use super::lines::{self, Encoding, Lines, RawLine};
use super::number::parse_f64_prefix;
use super::v1::{Column, ColumnKind, LogMeta, MAGIC};
use crate::sample::{ChannelInfo, ChannelUnit, Fault, Reading, Sample, Status};
use crate::timefmt::Rfc3339Days;

/// A problem reading a log, located by file, line and column.
#[derive(Debug, Clone, PartialEq)]
pub struct LogError {
    /// The file (as named by the caller).
    pub file: String,
    /// 1-based line, when the problem is on a line.
    pub line: Option<u64>,
    /// 1-based column: the field (cell) number in a row or header, or the
    /// character column in a metadata line.
    pub column: Option<usize>,
    /// What is wrong and what is expected.
    pub message: String,
    /// For a row with bad cells: the row with those cells kept as
    /// [`Fault::Unparsed`] samples (a pressure not above zero as read), so a
    /// caller may still use the good ones.
    pub row: Option<Box<Row>>,
}

impl LogError {
    /// An error at `line` and `column` of `file`.
    pub fn at(file: &str, line: u64, column: Option<usize>, message: impl Into<String>) -> Self {
        LogError {
            file: file.to_string(),
            line: Some(line),
            column,
            message: message.into(),
            row: None,
        }
    }

    /// An error for the whole file (cannot open it, not a log …).
    pub fn file(file: &str, message: impl Into<String>) -> Self {
        LogError {
            file: file.to_string(),
            line: None,
            column: None,
            message: message.into(),
            row: None,
        }
    }
}

impl fmt::Display for LogError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.file)?;
        if let Some(l) = self.line {
            write!(f, ":{l}")?;
            if let Some(c) = self.column {
                write!(f, ":{c}")?;
            }
        }
        write!(f, ": {}", self.message)
    }
}

impl std::error::Error for LogError {}

/// One data row: its time and one sample per non-empty channel cell.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Row {
    /// 1-based line number in the file.
    pub line: u64,
    /// Row time, UTC.
    pub time: DateTime<Utc>,
    /// Samples, in column order; empty cells give none.
    pub samples: Vec<Sample>,
    /// The time is earlier than the previous row's (a clock jump): not an
    /// error, but worth a warning.
    pub time_went_back: bool,
    /// The time equals the previous row's (a stuck clock or a row written
    /// twice): not an error, but worth a warning.
    pub time_repeated: bool,
    /// The time carries a different UTC offset from the previous row's (a
    /// logger's clock or daylight-saving setting changed mid-run): read as
    /// UTC, so not an error, but worth a warning.
    pub offset_change: Option<OffsetChange>,
    /// Operator notes: (column, text) for each non-empty text column the
    /// reader was told to keep (foreign logs' `[log] notes`), as read —
    /// escape the text before showing it.
    pub notes: Vec<(String, String)>,
    /// The `gas` column's cell, when the log has one and it is not empty.
    pub gas: Option<String>,
}

/// A change of the UTC offset the times are written with, between a row
/// and the row before it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct OffsetChange {
    /// The offset of the row before.
    pub from: FixedOffset,
    /// This row's offset.
    pub to: FixedOffset,
}

/// Compares a row's UTC offset with the last one seen, updating it:
/// `Some` when both are known and differ.
pub(crate) fn offset_order(
    last: &mut Option<FixedOffset>,
    offset: Option<FixedOffset>,
) -> Option<OffsetChange> {
    let offset = offset?;
    let change = last
        .filter(|from| *from != offset)
        .map(|from| OffsetChange { from, to: offset });
    *last = Some(offset);
    change
}

/// Derived-column units the recorder writes (see `record::derived`); a
/// header unit that is neither one of these nor a channel unit is an error.
pub const DERIVED_UNITS: [&str; 5] = ["1/m3", "m", "1/(m2 s)", "s", "1"];

/// Shortens and escapes text taken from a file for a message.
pub(crate) fn show(text: &str) -> String {
    const MAX: usize = 60;
    let escaped = crate::sample::escape_bytes(text.as_bytes()).replace('"', "\\\"");
    if escaped.chars().count() > MAX {
        let cut: String = escaped.chars().take(MAX).collect();
        format!("{cut}…")
    } else {
        escaped
    }
}

/// The note for a pressure reading that is not above zero (a gauge's zero
/// drift can read a little below it): the reading is kept as read, but no
/// true pressure or kinetics follow from it, and the reader says so rather
/// than leave an `ok` reading without a pressure unexplained. `None` for
/// any other reading.
pub(crate) fn not_above_zero(unit: ChannelUnit, value: f64, text: &str) -> Option<String> {
    (unit.is_pressure() && value <= 0.0).then(|| {
        format!(
            "pressure \"{}\" {unit} is not above zero: kept as read, without a true pressure or kinetics (a gauge's zero drift?)",
            show(text)
        )
    })
}

/// The bad statuses, as listed in messages.
pub(crate) fn status_words() -> String {
    Status::ALL
        .iter()
        .filter(|s| !s.is_ok())
        .map(|s| s.as_str())
        .collect::<Vec<_>>()
        .join(", ")
}

/// Reads a log v1 from any buffered reader.
pub struct LogReader<R> {
    lines: Lines<R>,
    name: String,
    meta: LogMeta,
    columns: Vec<Column>,
    warnings: Vec<LogError>,
    last_time: Option<DateTime<Utc>>,
    went_back: u64,
    repeated: u64,
    last_offset: Option<FixedOffset>,
    offset_changes: u64,
    header_line: u64,
    /// Where each cell of the row being read lies in its text (kept for its
    /// allocation).
    spans: Vec<(usize, usize)>,
    /// The line being read (kept for its allocation).
    raw: RawLine,
    /// The date of the last row time read (most rows share it).
    days: Rfc3339Days,
    /// The channel cells of the row being read, before the row is written
    /// out (kept for its allocation).
    readings: Vec<Option<Reading>>,
    /// Tests: every row read the general way (to compare with).
    #[cfg(test)]
    general_only: bool,
    /// Tests: rows read straight from their bytes.
    #[cfg(test)]
    plain_rows: u64,
    /// Tests: of those, rows read where they lie in the reader's buffer.
    #[cfg(test)]
    in_place_rows: u64,
}

impl<R: BufRead> LogReader<R> {
    /// Reads the header block from `reader`; `name` is the file name used in
    /// messages.
    pub fn new(reader: R, name: &str) -> Result<Self, LogError> {
        let mut r = LogReader {
            lines: Lines::new(reader),
            name: name.to_string(),
            meta: LogMeta::default(),
            columns: Vec::new(),
            warnings: Vec::new(),
            last_time: None,
            went_back: 0,
            repeated: 0,
            last_offset: None,
            offset_changes: 0,
            header_line: 0,
            spans: Vec::new(),
            raw: RawLine::empty(),
            days: Rfc3339Days::default(),
            readings: Vec::new(),
            #[cfg(test)]
            general_only: false,
            #[cfg(test)]
            plain_rows: 0,
            #[cfg(test)]
            in_place_rows: 0,
        };
        r.read_magic()?;
        loop {
            let Some((number, text)) = r.next_text()? else {
                return Err(LogError::file(
                    name,
                    "the log ends before its header row (`time,<channel> [<unit>],…`)",
                ));
            };
            if text.trim().is_empty() {
                continue;
            }
            if let Some(rest) = text.strip_prefix('#') {
                r.meta_line(number, rest);
                continue;
            }
            r.columns = header_row(name, number, &text)?;
            r.header_line = number;
            return Ok(r);
        }
    }

    /// The metadata lines.
    pub fn meta(&self) -> &LogMeta {
        &self.meta
    }

    /// The columns after `time`, in file order.
    pub fn columns(&self) -> &[Column] {
        &self.columns
    }

    /// The measured channels (derived columns left out).
    pub fn channels(&self) -> Vec<ChannelInfo> {
        channels_of(&self.columns)
    }

    /// Problems in the metadata lines that did not stop the reading (a value
    /// that does not parse, a line that is not `# key: value` …).
    pub fn warnings(&self) -> &[LogError] {
        &self.warnings
    }

    /// How many rows so far had a time earlier than the row before.
    pub fn times_went_back(&self) -> u64 {
        self.went_back
    }

    /// How many rows so far had the same time as the row before.
    pub fn times_repeated(&self) -> u64 {
        self.repeated
    }

    /// How many rows so far had a time with a different UTC offset from the
    /// row before's.
    pub fn time_offset_changes(&self) -> u64 {
        self.offset_changes
    }

    /// The line number of the header row.
    pub fn header_line(&self) -> u64 {
        self.header_line
    }

    /// The next line as text, header-block style: errors are fatal.
    fn next_text(&mut self) -> Result<Option<(u64, String)>, LogError> {
        match self.lines.next_line() {
            None => Ok(None),
            Some(Err(e)) => Err(LogError::file(
                &self.name,
                format!("cannot read the log: {e}"),
            )),
            Some(Ok(raw)) => text_of(&self.name, &raw, ',').map(|t| Some((raw.number, t))),
        }
    }

    fn read_magic(&mut self) -> Result<(), LogError> {
        let name = self.name.clone();
        let Some((number, text)) = self.next_text()? else {
            return Err(LogError::file(
                &name,
                format!("the file is empty; a rarefy log starts with `{MAGIC}`"),
            ));
        };
        let first = text.trim_end();
        if first == MAGIC {
            return Ok(());
        }
        let prefix = "# rarefy log";
        if let Some(rest) = first.strip_prefix(prefix) {
            let version = rest.trim();
            if let Some(v) = version.strip_prefix('v')
                && !v.is_empty()
                && v.chars().all(|c| c.is_ascii_digit())
            {
                return Err(LogError::at(
                    &name,
                    number,
                    Some(prefix.len() + 2),
                    format!(
                        "unsupported version {version} of the rarefy log format; this rarefy reads v1"
                    ),
                ));
            }
            return Err(LogError::at(
                &name,
                number,
                Some(prefix.len() + 1),
                format!("bad first line \"{}\"; expected `{MAGIC}`", show(first)),
            ));
        }
        Err(LogError::at(
            &name,
            number,
            Some(1),
            format!(
                "not a rarefy log v1 (first line \"{}\"; expected `{MAGIC}`)",
                show(first)
            ),
        ))
    }

    fn meta_line(&mut self, number: u64, rest: &str) {
        let warn = |r: &mut Self, col: usize, msg: String| {
            r.warnings
                .push(LogError::at(&r.name, number, Some(col), msg));
        };
        let body = rest.trim_start();
        let key_col = 1 + rest.len() - body.len() + 1;
        let Some((key, value)) = body.split_once(':') else {
            warn(
                self,
                key_col,
                format!(
                    "metadata line \"{}\" is not `# key: value`; ignored",
                    show(body)
                ),
            );
            return;
        };
        let raw_key_len = key.len();
        let key = key.trim();
        let value = value.trim();
        let after_colon = &body[raw_key_len + 1..];
        let value_col = key_col
            + body[..raw_key_len].chars().count()
            + 1
            + (after_colon.len() - after_colon.trim_start().len());
        if key.is_empty() {
            warn(self, key_col, "metadata line without a key; ignored".into());
            return;
        }
        let quantity = |unit: &str| -> Result<f64, String> {
            let number = value
                .strip_suffix(unit)
                .map(str::trim)
                .ok_or_else(|| format!("expected a number in {unit}, e.g. \"8.5e-2 {unit}\""))?;
            match number.parse::<f64>() {
                Ok(v) if v.is_finite() && v > 0.0 => Ok(v),
                Ok(_) => Err(format!("must be a positive finite number in {unit}")),
                Err(_) => Err(format!(
                    "expected a number in {unit}, e.g. \"8.5e-2 {unit}\""
                )),
            }
        };
        let duplicate = match key {
            "chamber" => self.meta.chamber.replace(value.to_string()).is_some(),
            "gas" => self.meta.gas.replace(value.to_string()).is_some(),
            "source" => self.meta.source.replace(value.to_string()).is_some(),
            "volume" | "surface_area" | "started" => {
                let parsed = match key {
                    "volume" => quantity("m3").map(|v| self.meta.volume_m3.replace(v).is_some()),
                    "surface_area" => {
                        quantity("m2").map(|v| self.meta.surface_area_m2.replace(v).is_some())
                    }
                    _ => DateTime::parse_from_rfc3339(value)
                        .map(|t| self.meta.started.replace(t.with_timezone(&Utc)).is_some())
                        .map_err(|e| {
                            format!(
                                "expected an RFC 3339 time such as 2026-12-01T19:00:00.000Z ({e})"
                            )
                        }),
                };
                match parsed {
                    Ok(had) => had,
                    Err(msg) => {
                        warn(
                            self,
                            value_col,
                            format!("metadata `{key}`: \"{}\": {msg}; ignored", show(value)),
                        );
                        return;
                    }
                }
            }
            _ => {
                self.meta.extra.push((key.to_string(), value.to_string()));
                false
            }
        };
        if duplicate {
            warn(
                self,
                key_col,
                format!("metadata `{key}` is given twice; the last one is used"),
            );
        }
    }

    /// Reads one data row given as text, with its line number (a log
    /// arriving line by line): the same checks as reading the file. `None`
    /// for a blank line.
    pub fn read_row(&mut self, number: u64, text: &str) -> Option<Result<Row, LogError>> {
        let raw = RawLine {
            number,
            bytes: text.as_bytes().to_vec(),
            too_long: false,
        };
        let mut row = Row::default();
        Some(self.row(&raw, &mut row)?.map(|()| row))
    }

    /// The next row into `row`, reusing its buffers (its samples and their
    /// channel names): what the iterator gives, without allocating per row.
    /// `Some(Ok(()))`: `row` holds the row. `Some(Err(e))`: a bad row, its
    /// good readings in `e.row` as the iterator gives them; `row` then holds
    /// nothing to use (emptied after a bad cell, as it was after a line that
    /// is no row: a wrong number of cells, a bad time, bad UTF-8). `None`:
    /// the end of the log.
    pub fn next_row_into(&mut self, row: &mut Row) -> Option<Result<(), LogError>> {
        loop {
            // A row not read in place (not plain, or not whole in the
            // buffer) is read from its copied line.
            if self.row_in_place(row) {
                return Some(Ok(()));
            }
            let mut raw = std::mem::replace(&mut self.raw, RawLine::empty());
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

    /// Reads the next line as a plain row (see [`plain_row`]) where it lies
    /// in the reader's buffer, without copying it: whether it was one (and
    /// is taken; else nothing is).
    #[inline]
    fn row_in_place(&mut self, out: &mut Row) -> bool {
        #[cfg(test)]
        if self.general_only {
            return false;
        }
        // The first line may carry a byte-order mark.
        if self.lines.number() == 0 {
            return false;
        }
        let Some(bytes) = self.lines.buffered() else {
            return false;
        };
        let Some((time, gas, used)) =
            plain_row::<true>(&self.columns, &mut self.days, &mut self.readings, bytes)
        else {
            return false;
        };
        set_gas(&mut out.gas, gas);
        let line = self.lines.take_line(used);
        self.end_plain_row(line, time, out);
        #[cfg(test)]
        {
            self.plain_rows += 1;
            self.in_place_rows += 1;
        }
        true
    }

    fn row(&mut self, raw: &RawLine, out: &mut Row) -> Option<Result<(), LogError>> {
        // The first line may carry a byte-order mark; a cut line is an error.
        #[cfg(test)]
        let general_only = self.general_only;
        #[cfg(not(test))]
        let general_only = false;
        if raw.number > 1
            && !raw.too_long
            && !general_only
            && let Some((time, gas, _)) = plain_row::<false>(
                &self.columns,
                &mut self.days,
                &mut self.readings,
                &raw.bytes,
            )
        {
            set_gas(&mut out.gas, gas);
            self.end_plain_row(raw.number, time, out);
            #[cfg(test)]
            {
                self.plain_rows += 1;
            }
            return Some(Ok(()));
        }
        self.general_row(raw, out)
    }

    /// Writes out a row [`plain_row`] read, as [`LogReader::row_cells`]
    /// would (its gas already in `out`, by [`set_gas`]).
    fn end_plain_row(&mut self, line: u64, time: DateTime<FixedOffset>, out: &mut Row) {
        let offset = time.offset().fix();
        let time = time.with_timezone(&Utc);
        let channels = self.columns.iter().filter_map(|c| match c.kind {
            ColumnKind::Channel(unit) => Some((c.name.as_str(), unit)),
            _ => None,
        });
        let samples = &mut out.samples;
        let mut used = 0;
        for ((name, unit), reading) in channels.zip(&self.readings) {
            let Some(reading) = *reading else {
                continue;
            };
            put_sample(samples, used, time, name, unit, reading);
            used += 1;
        }
        samples.truncate(used);
        self.end_row(line, time, offset, out);
    }

    /// The order checks and counts for a row read in full, and the row's
    /// line, time and flags in `out` (its samples and gas are there).
    fn end_row(&mut self, line: u64, time: DateTime<Utc>, offset: FixedOffset, out: &mut Row) {
        let (time_went_back, time_repeated) = time_order(self.last_time, time);
        self.went_back += u64::from(time_went_back);
        self.repeated += u64::from(time_repeated);
        self.last_time = Some(time);
        let offset_change = offset_order(&mut self.last_offset, Some(offset));
        self.offset_changes += u64::from(offset_change.is_some());
        out.line = line;
        out.time = time;
        out.time_went_back = time_went_back;
        out.time_repeated = time_repeated;
        out.offset_change = offset_change;
        out.notes.clear();
    }

    /// Reads any row: decoded and split as text, every problem located.
    fn general_row(&mut self, raw: &RawLine, out: &mut Row) -> Option<Result<(), LogError>> {
        let name = self.name.as_str();
        // A data line is valid UTF-8 as it stands (no byte-order mark after
        // the first line): borrowed, not copied.
        // A channel cell that is not UTF-8 is that cell's problem alone
        // (as a cell that is not a number): the rest of the row is used.
        let mut not_text: Vec<(usize, String)> = Vec::new();
        let text: std::borrow::Cow<'_, str> = match std::str::from_utf8(&raw.bytes) {
            Ok(t) if raw.number > 1 && !raw.too_long => t.into(),
            _ => match text_of(name, raw, ',') {
                Ok(t) => t.into(),
                Err(e) => match channel_cells_not_text(&self.columns, raw) {
                    Some((t, cells)) => {
                        not_text = cells;
                        t.into()
                    }
                    None => return Some(Err(e)),
                },
            },
        };
        if text.trim().is_empty() {
            return None;
        }
        let at = |col: usize, msg: String| LogError::at(name, raw.number, Some(col), msg);
        if text.starts_with('#') {
            return Some(Err(at(
                1,
                "a `#` line after the header row; metadata belongs before it".into(),
            )));
        }
        // Cells without quotes (what the writer gives) are cut straight
        // from the text; the general splitter takes the rest.
        let split;
        let mut spans = std::mem::take(&mut self.spans);
        spans.clear();
        // One pass finds the commas and whether there is a quote.
        let mut quoted = false;
        let mut start = 0;
        for (i, &b) in text.as_bytes().iter().enumerate() {
            if b == b',' {
                spans.push((start, i));
                start = i + 1;
            } else if b == b'"' {
                quoted = true;
                break;
            }
        }
        let cells: &[lines::Field] = if quoted {
            spans.clear();
            split = match lines::split(&text, ',') {
                Ok(c) => c,
                Err(e) => return Some(Err(at(e.field, e.message))),
            };
            &split
        } else {
            spans.push((start, text.len()));
            &[]
        };
        let cell = |i: usize| -> &str {
            match spans.get(i) {
                Some(&(a, b)) => trim_blanks(&text[a..b]),
                None => cells.get(i).map_or("", |c| c.text.as_str()),
            }
        };
        let count = if cells.is_empty() {
            spans.len()
        } else {
            cells.len()
        };
        let expected = self.columns.len() + 1;
        let result = self.row_cells(raw, count, expected, &cell, &not_text, out);
        self.spans = spans;
        result
    }

    fn row_cells<'t>(
        &mut self,
        raw: &RawLine,
        count: usize,
        expected: usize,
        cell: &dyn Fn(usize) -> &'t str,
        not_text: &[(usize, String)],
        out: &mut Row,
    ) -> Option<Result<(), LogError>> {
        let name = self.name.as_str();
        let at = |col: usize, msg: String| LogError::at(name, raw.number, Some(col), msg);
        if count != expected {
            let col = count.min(expected) + 1;
            return Some(Err(at(
                col,
                format!(
                    "row has {count} cells; the header has {expected} (time and {} columns)",
                    self.columns.len()
                ),
            )));
        }
        let (time, offset) = match parse_time(cell(0), self.last_offset) {
            Ok(t) => (t.with_timezone(&Utc), t.offset().fix()),
            Err(msg) => return Some(Err(at(1, msg))),
        };
        // The row's samples overwrite the buffer's in place: a sample's
        // channel name is copied only when it differs from what the slot
        // held (in a steady log, never).
        let mut used = 0;
        let mut put = |samples: &mut Vec<Sample>, name: &str, unit, reading| {
            put_sample(samples, used, time, name, unit, reading);
            used += 1;
        };
        let mut samples = std::mem::take(&mut out.samples);
        let mut gas = None;
        let mut bad: Vec<(usize, String)> = Vec::new();
        for (i, column) in self.columns.iter().enumerate() {
            let text = cell(i + 1);
            if column.kind == ColumnKind::Gas {
                let g = text.trim();
                gas = (!g.is_empty()).then(|| g.to_string());
                continue;
            }
            let ColumnKind::Channel(unit) = column.kind else {
                continue;
            };
            if let Some((_, msg)) = not_text.iter().find(|(c, _)| *c == i + 1) {
                put(
                    &mut samples,
                    &column.name,
                    unit,
                    Reading::Bad(Fault::Unparsed),
                );
                bad.push((i + 2, msg.clone()));
                continue;
            }
            match parse_cell(text) {
                Ok(None) => {}
                Ok(Some(reading)) => {
                    if let Reading::Value(v) = reading
                        && let Some(msg) = not_above_zero(unit, v, text)
                    {
                        bad.push((i + 2, msg));
                    }
                    put(&mut samples, &column.name, unit, reading);
                }
                Err(msg) => {
                    put(
                        &mut samples,
                        &column.name,
                        unit,
                        Reading::Bad(Fault::Unparsed),
                    );
                    bad.push((i + 2, msg));
                }
            }
        }
        samples.truncate(used);
        out.samples = samples;
        out.gas = gas;
        self.end_row(raw.number, time, offset, out);
        if bad.is_empty() {
            return Some(Ok(()));
        }
        let name = self.name.as_str();
        let at = |col: usize, msg: String| LogError::at(name, raw.number, Some(col), msg);
        Some(row_result(std::mem::take(out), bad, at).map(|_| ()))
    }
}

/// A data line that is not UTF-8 only in some channel cells: the line with
/// those cells left empty, and each one's index (0 is the time) with its
/// message. `None` when the rest is not text, a cell that is not UTF-8 is
/// the time, the gas or a derived cell, the cells are not as many as the
/// header's, or the line has quotes (which the general splitter reads):
/// the whole row is then an error, as before.
fn channel_cells_not_text(
    columns: &[Column],
    raw: &RawLine,
) -> Option<(String, Vec<(usize, String)>)> {
    if raw.number == 1 || raw.too_long || raw.bytes.contains(&b'"') {
        return None;
    }
    let cells: Vec<&[u8]> = raw.bytes.split(|&b| b == b',').collect();
    if cells.len() != columns.len() + 1 {
        return None;
    }
    let mut text = String::with_capacity(raw.bytes.len());
    let mut bad = Vec::new();
    for (k, cell) in cells.iter().enumerate() {
        if k > 0 {
            text.push(',');
        }
        match std::str::from_utf8(cell) {
            Ok(t) => text.push_str(t),
            Err(e) => {
                if k == 0 || !matches!(columns[k - 1].kind, ColumnKind::Channel(_)) {
                    return None;
                }
                let valid = &cell[..e.valid_up_to()];
                let prefix = std::str::from_utf8(valid).unwrap_or_default();
                bad.push((
                    k,
                    format!(
                        "invalid UTF-8 (byte 0x{:02x} after \"{}\") in cell {}",
                        cell[e.valid_up_to()],
                        show(prefix),
                        k + 1
                    ),
                ));
            }
        }
    }
    (!bad.is_empty()).then_some((text, bad))
}

/// Reads the common row straight from its bytes, each cell parsed where
/// it starts: as many cells as the header, none quoted or padded with
/// blanks, a time in the fixed layout, and every channel cell empty, a
/// number read exactly by [`parse_f64_prefix`] or a fault's status word
/// (gas and derived cells valid UTF-8). Gives the time, the gas cell and
/// the length read, the channel cells in `readings`; `None` (no state but
/// those buffers changed) for any other row, which
/// [`LogReader::general_row`] reads. `IN_BUFFER`: `bytes` is what the
/// reader holds from the line's start on, and the row must end in a line
/// break there (its length then counts the break); else `bytes` is the
/// line. Every byte of a row read here is
/// ASCII or in a cell checked to be UTF-8, so the line is valid UTF-8,
/// as the general path requires.
fn plain_row<'t, const IN_BUFFER: bool>(
    columns: &[Column],
    days: &mut Rfc3339Days,
    readings: &mut Vec<Option<Reading>>,
    bytes: &'t [u8],
) -> Option<(DateTime<FixedOffset>, Option<&'t str>, usize)> {
    let in_buffer = IN_BUFFER;
    readings.clear();
    // The time: at least 20 bytes, then the first comma (a quote or
    // blank in it is refused by the time parser). In a buffer, the comma
    // is looked for only as far as a time the parser reads can reach.
    let end = if in_buffer {
        let window = bytes.get(20..bytes.len().min(MAX_TIME_BYTES + 1))?;
        20 + window.iter().position(|&b| b == b',')?
    } else {
        match bytes.get(20..)?.iter().position(|&b| b == b',') {
            Some(i) => 20 + i,
            None => bytes.len(),
        }
    };
    let time = days.parse_fast(&bytes[..end])?;
    let mut gas = None;
    // Where the cell after the last comma read starts (past the end
    // when the line has ended).
    let mut at = end + 1;
    // Whether a number was not above zero: a pressure that is gets its
    // note on the general path (looked into only then).
    let mut not_positive = false;
    for (k, column) in columns.iter().enumerate() {
        let rest = bytes.get(at..)?;
        let (cell, used) = match column.kind {
            ColumnKind::Channel(_) => match parse_f64_prefix(rest) {
                Some((v, used)) => {
                    not_positive |= v <= 0.0;
                    (Some(Reading::Value(v)), used)
                }
                None => {
                    let used = cell_len(rest, in_buffer)?;
                    (plain_word(&rest[..used])?, used)
                }
            },
            ColumnKind::Gas => {
                let used = cell_len(rest, in_buffer)?;
                let g = std::str::from_utf8(&rest[..used]).ok()?;
                if g.trim().len() != g.len() {
                    return None;
                }
                gas = (!g.is_empty()).then_some(g);
                (None, used)
            }
            ColumnKind::Derived(_) => {
                let used = cell_len(rest, in_buffer)?;
                if !rest[..used].is_ascii() {
                    std::str::from_utf8(&rest[..used]).ok()?;
                }
                (None, used)
            }
        };
        let after = rest.get(used);
        if in_buffer && k + 1 == columns.len() {
            // The last cell: then the line break, `\n` or `\r\n`, within
            // the longest line read whole.
            let brk = match (after, rest.get(used + 1)) {
                (Some(b'\n'), _) => 0,
                (Some(b'\r'), Some(b'\n')) => 1,
                _ => return None,
            };
            let line_break = at + used + brk;
            if line_break > lines::MAX_LINE_BYTES {
                return None;
            }
            if let ColumnKind::Channel(_) = column.kind {
                readings.push(cell);
            }
            if not_positive && pressure_not_positive(columns, readings) {
                return None;
            }
            return Some((time, gas, line_break + 1));
        }
        match after {
            None if !in_buffer => {}
            Some(b',') => {}
            _ => return None,
        }
        if let ColumnKind::Channel(_) = column.kind {
            readings.push(cell);
        }
        at += used + 1;
    }
    // Every cell read, and the line ends with the last one (in a buffer,
    // a row without cells is left to the line).
    if not_positive && pressure_not_positive(columns, readings) {
        return None;
    }
    (!in_buffer && at == bytes.len() + 1).then_some((time, gas, bytes.len()))
}

/// Whether a pressure channel's reading in `readings` (one per channel
/// column) is a number not above zero.
#[cold]
fn pressure_not_positive(columns: &[Column], readings: &[Option<Reading>]) -> bool {
    let units = columns.iter().filter_map(|c| match c.kind {
        ColumnKind::Channel(unit) => Some(unit),
        _ => None,
    });
    units
        .zip(readings)
        .any(|(unit, r)| matches!(r, Some(Reading::Value(v)) if *v <= 0.0 && unit.is_pressure()))
}

/// The longest row time [`Rfc3339Days::parse_fast`] reads
/// (`YYYY-MM-DDTHH:MM:SS.fffffffff+HH:MM`).
const MAX_TIME_BYTES: usize = 35;

/// A plain row's gas cell into a row's, reusing its allocation.
#[inline(always)]
fn set_gas(held: &mut Option<String>, gas: Option<&str>) {
    match (gas, held) {
        // No gas before or now (a log without a gas column): nothing to do.
        (None, None) => {}
        (Some(g), Some(held)) => g.clone_into(held),
        (g, held) => *held = g.map(str::to_string),
    }
}

/// Puts a reading in slot `at` of a row's samples (the next one), over
/// what the slot held: the channel name is copied only when it differs
/// (in a steady log, never).
#[inline(always)]
fn put_sample(
    samples: &mut Vec<Sample>,
    at: usize,
    time: DateTime<Utc>,
    name: &str,
    unit: ChannelUnit,
    reading: Reading,
) {
    match samples.get_mut(at) {
        Some(s) => {
            s.time = time;
            if !crate::sample::same_id(&s.channel, name) {
                name.clone_into(&mut s.channel);
            }
            s.unit = unit;
            s.reading = reading;
        }
        None => samples.push(Sample {
            time,
            channel: name.to_string(),
            unit,
            reading,
        }),
    }
}

/// `cell` without the spaces and tabs around it (most cells have none:
/// two byte tests).
fn trim_blanks(cell: &str) -> &str {
    let blank = |b: &u8| *b == b' ' || *b == b'\t';
    let bytes = cell.as_bytes();
    if bytes.first().is_some_and(blank) || bytes.last().is_some_and(blank) {
        cell.trim_matches([' ', '\t'])
    } else {
        cell
    }
}

/// The length of the cell `rest` starts with (up to the next comma or the
/// end); `None` when it holds a quote (left to the general splitter).
/// `in_buffer`: `rest` runs on past the line, so the cell also ends at a
/// line break (`\n`, or `\r\n` as a line ending in `\r\n` is read).
fn cell_len(rest: &[u8], in_buffer: bool) -> Option<usize> {
    if in_buffer {
        return match memchr::memchr3(b',', b'"', b'\n', rest) {
            Some(i) if rest[i] == b'"' => None,
            Some(i) if rest[i] == b'\n' && i > 0 && rest[i - 1] == b'\r' => Some(i - 1),
            Some(i) => Some(i),
            None => None,
        };
    }
    match memchr::memchr2(b',', b'"', rest) {
        Some(i) if rest[i] == b'"' => None,
        Some(i) => Some(i),
        None => Some(rest.len()),
    }
}

/// A channel cell that is not a number as [`parse_cell`] reads it: empty,
/// or a fault's status word; `None` for anything else (left to
/// [`parse_cell`]).
fn plain_word(cell: &[u8]) -> Option<Option<Reading>> {
    if cell.is_empty() {
        return Some(None);
    }
    let status = Status::ALL
        .iter()
        .copied()
        .find(|s| s.as_str().as_bytes() == cell)?;
    Some(Some(Reading::Bad(status.fault()?)))
}

/// A row, or, when cells of it were bad, an error located at the first bad
/// cell (naming how many more there are) that still carries the row, so its
/// good readings are kept. Both log readers end a row here.
pub(crate) fn row_result(
    row: Row,
    bad: Vec<(usize, String)>,
    at: impl Fn(usize, String) -> LogError,
) -> Result<Row, LogError> {
    let mut bad = bad.into_iter();
    let Some((col, mut msg)) = bad.next() else {
        return Ok(row);
    };
    let more = bad.count();
    if more > 0 {
        msg.push_str(&format!(
            " (and {more} more bad cell{} in this row)",
            if more == 1 { "" } else { "s" }
        ));
    }
    let mut e = at(col, msg);
    e.row = Some(Box::new(row));
    Err(e)
}

impl<R: BufRead> Iterator for LogReader<R> {
    type Item = Result<Row, LogError>;

    fn next(&mut self) -> Option<Self::Item> {
        let mut row = Row::default();
        Some(self.next_row_into(&mut row)?.map(|()| row))
    }
}

/// Whether `time` is earlier than, or the same as, the row before's.
pub(crate) fn time_order(last: Option<DateTime<Utc>>, time: DateTime<Utc>) -> (bool, bool) {
    match last {
        Some(last) => (time < last, time == last),
        None => (false, false),
    }
}

/// The measured channels among `columns`.
pub(crate) fn channels_of(columns: &[Column]) -> Vec<ChannelInfo> {
    columns
        .iter()
        .filter_map(|c| match c.kind {
            ColumnKind::Channel(u) => Some(ChannelInfo::new(c.name.clone(), u)),
            ColumnKind::Derived(_) | ColumnKind::Gas => None,
        })
        .collect()
}

/// A line's text, or a located error for a line too long or not in the
/// encoding.
pub(crate) fn text_of(name: &str, raw: &RawLine, delim: char) -> Result<String, LogError> {
    text_in(name, raw, delim, Encoding::Utf8).map(std::borrow::Cow::into_owned)
}

/// [`text_of`] for a given encoding.
pub(crate) fn text_in<'a>(
    name: &str,
    raw: &'a RawLine,
    delim: char,
    encoding: Encoding,
) -> Result<std::borrow::Cow<'a, str>, LogError> {
    if raw.too_long {
        return Err(LogError::at(
            name,
            raw.number,
            None,
            format!(
                "line is longer than {} bytes; skipped",
                lines::MAX_LINE_BYTES
            ),
        ));
    }
    lines::decode(&raw.bytes, encoding, raw.number == 1).map_err(|(prefix, byte)| {
        let field = lines::field_of(&prefix, delim);
        LogError::at(
            name,
            raw.number,
            Some(field),
            format!(
                "invalid UTF-8 (byte 0x{byte:02x} after \"{}\") in cell {field}",
                show(prefix.rsplit(delim).next().unwrap_or_default())
            ),
        )
    })
}

/// Parses the header row into columns.
fn header_row(name: &str, number: u64, text: &str) -> Result<Vec<Column>, LogError> {
    let at = |col: usize, msg: String| LogError::at(name, number, Some(col), msg);
    let cells = lines::split(text, ',').map_err(|e| at(e.field, e.message))?;
    if cells[0].text != "time" {
        return Err(at(
            1,
            format!(
                "the header row must start with `time`, found \"{}\"",
                show(&cells[0].text)
            ),
        ));
    }
    let mut columns: Vec<Column> = Vec::new();
    for (i, cell) in cells.iter().enumerate().skip(1) {
        let col = i + 1;
        let t = cell.text.trim();
        if t == super::v1::GAS_COLUMN {
            if columns.iter().any(|c| c.kind == ColumnKind::Gas) {
                return Err(at(
                    col,
                    "the `gas` column appears twice in the header".into(),
                ));
            }
            columns.push(Column {
                name: t.to_string(),
                kind: ColumnKind::Gas,
            });
            continue;
        }
        let (Some(open), true) = (t.rfind('['), t.ends_with(']')) else {
            return Err(at(
                col,
                format!(
                    "header cell \"{}\" has no unit; expected `<name> [<unit>]`, e.g. `chamber [mbar]`",
                    show(t)
                ),
            ));
        };
        let column_name = t[..open].trim();
        let unit = t[open + 1..t.len() - 1].trim();
        if column_name.is_empty() {
            return Err(at(
                col,
                format!("header cell \"{}\" has no name before its unit", show(t)),
            ));
        }
        if unit.is_empty() {
            return Err(at(
                col,
                format!("header cell \"{}\" has an empty unit", show(t)),
            ));
        }
        if let Some(first) = columns.iter().position(|c| c.name == column_name) {
            return Err(at(
                col,
                format!(
                    "column \"{}\" appears twice in the header (cells {} and {col})",
                    show(column_name),
                    first + 2
                ),
            ));
        }
        let kind = match ChannelUnit::parse(unit) {
            Some(u) => ColumnKind::Channel(u),
            None if DERIVED_UNITS.contains(&unit) => ColumnKind::Derived(unit.to_string()),
            None => {
                // Not silently a derived column: a misspelt channel unit
                // would lose the channel.
                use crate::units::{PressureUnit, TemperatureUnit, UnitKind};
                let symbols = PressureUnit::ALL
                    .iter()
                    .map(|u| u.symbol())
                    .chain(TemperatureUnit::ALL.iter().map(|u| u.symbol()));
                let hint = crate::suggest::nearest(unit, symbols)
                    .map(|s| format!("; did you mean \"{s}\"?"))
                    .unwrap_or_default();
                return Err(at(
                    col,
                    format!(
                        "unknown unit \"{}\" in header cell \"{}\"; expected a pressure or temperature unit (mbar, Torr, Pa, C, K …) or a derived-column unit ({}){hint}",
                        show(unit),
                        show(t),
                        DERIVED_UNITS.join(", ")
                    ),
                ));
            }
        };
        columns.push(Column {
            name: column_name.to_string(),
            kind,
        });
    }
    Ok(columns)
}

/// Parses a row time: RFC 3339 with any UTC offset (the caller converts to
/// UTC), with or without fractional seconds. A time without an offset is
/// refused with its own message (`before`: the offset of the times before
/// it, to name).
fn parse_time(text: &str, before: Option<FixedOffset>) -> Result<DateTime<FixedOffset>, String> {
    if text.is_empty() {
        return Err("the time cell is empty".into());
    }
    crate::timefmt::parse_rfc3339(text).map_err(|e| {
        if crate::timefmt::lacks_offset(text) {
            format!(
                "time \"{}\" {}",
                show(text),
                crate::timefmt::missing_offset(before)
            )
        } else {
            format!(
                "time \"{}\" is not an RFC 3339 time such as 2026-12-01T19:00:00.000Z ({e})",
                show(text)
            )
        }
    })
}

/// A cell: `None` when empty, else its reading (a value or a fault); `Err`
/// with a message when it is neither.
type CellValue = Option<Reading>;

fn parse_cell(text: &str) -> Result<CellValue, String> {
    if text.is_empty() {
        return Ok(None);
    }
    // Numbers are the common case: try them first, before the status words
    // (none of which parses as a number, nor starts like one).
    if text
        .as_bytes()
        .first()
        .is_some_and(|b| b.is_ascii_digit() || matches!(b, b'-' | b'+' | b'.'))
        && let Ok(v) = text.parse::<f64>()
        && v.is_finite()
    {
        return Ok(Some(Reading::Value(v)));
    }
    if let Some(status) = Status::ALL.iter().copied().find(|s| s.as_str() == text) {
        let Some(fault) = status.fault() else {
            return Err(
                "cell \"ok\" has no value; a valid reading is written as its number".into(),
            );
        };
        return Ok(Some(Reading::Bad(fault)));
    }
    match text.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(Some(Reading::Value(v))),
        Ok(_) => Err(format!(
            "cell \"{}\" is not a finite number; a log never holds NaN or infinity",
            show(text)
        )),
        Err(_) => {
            let words = Status::ALL
                .iter()
                .filter(|s| !s.is_ok())
                .map(|s| s.as_str());
            let hint = crate::suggest::nearest(text, words)
                .map(|s| format!("; did you mean \"{s}\"?"))
                .unwrap_or_default();
            Err(format!(
                "cell \"{}\" is neither a number nor a status word ({}){hint}",
                show(text),
                status_words()
            ))
        }
    }
}

mod resume;
#[cfg(test)]
mod tests;
