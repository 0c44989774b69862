//! Log format v1: the recorder's CSV output, which replay and report read back
//! without any configuration.
//!
//! ```text
//! # rarefy log v1
//! # chamber: KV-7 sputter coater
//! # volume: 0.085 m3
//! # gas: N2
//! # source: sim:pumpdown
//! # started: 2026-12-01T19:00:00.000Z
//! time,chamber [mbar],foreline [mbar],wall [C],chamber.mean_free_path [m]
//! 2026-12-01T19:00:00.000Z,1.013e3,1.013e3,2.2e1,6.6e-8
//! 2026-12-01T19:00:01.000Z,over-range,,2.2e1,
//! ```
//!
//! * Line 1 identifies the format and its version. Further `# key: value`
//!   lines carry metadata, before the header row.
//! * The header row is `time` then one column per channel,
//!   `<channel> [<unit>]`; the unit says whether the channel is a pressure or a
//!   temperature. Columns with a derived-column unit (`[1/m3]`, `[m]`,
//!   `[1/(m2 s)]`, `[s]`, `[1]`) are derived values, written for convenience
//!   and recomputed by readers; any other unit is a located error.
//! * A row whose time is earlier than, or equal to, the row before's is read
//!   and counted (`times_went_back`, `times_repeated`) for the caller to
//!   report.
//! * Times are written RFC 3339 UTC with milliseconds. Readers take any UTC
//!   offset and convert to UTC; a row whose offset differs from the row
//!   before's (a logger's clock or daylight-saving setting changed mid-run)
//!   is read, flagged ([`Row::offset_change`]) and counted
//!   (`time_offset_changes`). A time without an offset is a located error
//!   for its row: the zone it was written in is unknown.
//! * A cell holds a number (shortest exact form, so no digit is lost), a status
//!   word (`over-range`, `sensor-off` … — a bad reading is never written as a
//!   number), or nothing (no reading of that channel at that time).
//! * A quoted cell (header names with commas) ends on its own line.
//!
//! [`read`] reads v1 back; [`foreign`] reads other loggers' CSV exports
//! through a `[log]` configuration section; `open_log_from` opens either.

pub mod foreign;
mod lines;
mod number;
pub mod read;
pub mod v1;

use std::io::BufRead;

use chrono::{DateTime, FixedOffset, Utc};

pub use foreign::{ForeignLogSpec, ForeignReader, LogSection};
pub use lines::{Encoding, MAX_LINE_BYTES};
pub use read::{LogError, LogReader, OffsetChange, Row};
pub use v1::{Column, ColumnKind, LogMeta, MAGIC};

use crate::sample::ChannelInfo;

/// Where a reader is in its log, and what it carries over from the rows
/// before: enough for [`LogSource::resume`] to go on reading from there as
/// if it had read every line before.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ReadPosition {
    /// Where the next line starts, in bytes from the start of the file.
    pub offset: u64,
    /// The number of the last line read (the next one is `line + 1`).
    pub line: u64,
    /// The last row's time (the order checks, and foreign times that
    /// depend on the row before).
    pub last_time: Option<DateTime<Utc>>,
    /// The last row's UTC offset, when its time carried one.
    pub last_offset: Option<FixedOffset>,
    /// Rows so far whose time went back.
    pub times_went_back: u64,
    /// Rows so far whose time repeated.
    pub times_repeated: u64,
    /// Rows so far with an ambiguous local time.
    pub ambiguous_times: u64,
    /// Rows so far whose UTC offset changed.
    pub time_offset_changes: u64,
}

/// Which reader a log is read with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LogFormat {
    /// rarefy's own log format v1.
    V1,
    /// Another logger's CSV, read through a `[log]` section.
    Foreign,
}

/// A log being read, whatever its format: its metadata and columns, and an
/// iterator of rows (a bad row is a located error; iteration goes on after it).
pub trait LogSource: Iterator<Item = Result<Row, LogError>> + Send {
    /// The format being read.
    fn format(&self) -> LogFormat;
    /// Metadata (for a foreign log: its preamble lines, in `extra`).
    fn meta(&self) -> &LogMeta;
    /// Columns after the time, in file order.
    fn columns(&self) -> &[Column];
    /// The measured channels (derived columns left out).
    fn channels(&self) -> Vec<ChannelInfo> {
        read::channels_of(self.columns())
    }
    /// Problems before the data that did not stop the reading.
    fn warnings(&self) -> &[LogError] {
        &[]
    }
    /// How many rows so far had a time earlier than the row before.
    fn times_went_back(&self) -> u64;
    /// How many rows so far had the same time as the row before.
    fn times_repeated(&self) -> u64;
    /// How many rows so far had an ambiguous local time (foreign logs in a
    /// zone with daylight-saving time).
    fn ambiguous_times(&self) -> u64 {
        0
    }
    /// How many rows so far had a time with a different UTC offset from the
    /// row before's (times that carry their own offset).
    fn time_offset_changes(&self) -> u64;
    /// The line of the header (column-name) row, when the log has one.
    fn header_line(&self) -> Option<u64>;
    /// The next row into `row`, reusing its buffers where the reader can
    /// ([`LogReader::next_row_into`]); otherwise the iterator's next row.
    /// After `Some(Err(e))` the bad row's readings are in `e.row` and
    /// `row` holds nothing to use.
    fn next_row_into(&mut self, row: &mut Row) -> Option<Result<(), LogError>> {
        Some(self.next()?.map(|r| *row = r))
    }
    /// Where the reader is now: after the last line it read.
    fn read_position(&self) -> ReadPosition;
    /// A reader of the same log (same header, columns and settings) that
    /// reads `input`, the log's bytes from `at.offset` on, as this kind of
    /// reader would have gone on from `at`: the rows, errors, line numbers
    /// and counts are those of a reading from the start.
    fn resume(&self, input: Box<dyn BufRead + Send>, at: &ReadPosition) -> Box<dyn LogSource>;
}

impl<R: BufRead + Send> LogSource for LogReader<R> {
    fn format(&self) -> LogFormat {
        LogFormat::V1
    }
    fn meta(&self) -> &LogMeta {
        LogReader::meta(self)
    }
    fn columns(&self) -> &[Column] {
        LogReader::columns(self)
    }
    fn warnings(&self) -> &[LogError] {
        LogReader::warnings(self)
    }
    fn times_went_back(&self) -> u64 {
        LogReader::times_went_back(self)
    }
    fn times_repeated(&self) -> u64 {
        LogReader::times_repeated(self)
    }
    fn time_offset_changes(&self) -> u64 {
        LogReader::time_offset_changes(self)
    }
    fn header_line(&self) -> Option<u64> {
        Some(LogReader::header_line(self))
    }
    fn next_row_into(&mut self, row: &mut Row) -> Option<Result<(), LogError>> {
        LogReader::next_row_into(self, row)
    }
    fn read_position(&self) -> ReadPosition {
        LogReader::read_position(self)
    }
    fn resume(&self, input: Box<dyn BufRead + Send>, at: &ReadPosition) -> Box<dyn LogSource> {
        Box::new(self.resumed(input, at))
    }
}

impl<R: BufRead + Send> LogSource for ForeignReader<R> {
    fn format(&self) -> LogFormat {
        LogFormat::Foreign
    }
    fn meta(&self) -> &LogMeta {
        ForeignReader::meta(self)
    }
    fn columns(&self) -> &[Column] {
        ForeignReader::columns(self)
    }
    fn times_went_back(&self) -> u64 {
        ForeignReader::times_went_back(self)
    }
    fn times_repeated(&self) -> u64 {
        ForeignReader::times_repeated(self)
    }
    fn ambiguous_times(&self) -> u64 {
        ForeignReader::ambiguous_times(self)
    }
    fn time_offset_changes(&self) -> u64 {
        ForeignReader::time_offset_changes(self)
    }
    fn header_line(&self) -> Option<u64> {
        ForeignReader::header_line(self)
    }
    fn next_row_into(&mut self, row: &mut Row) -> Option<Result<(), LogError>> {
        ForeignReader::next_row_into(self, row)
    }
    fn read_position(&self) -> ReadPosition {
        ForeignReader::read_position(self)
    }
    fn resume(&self, input: Box<dyn BufRead + Send>, at: &ReadPosition) -> Box<dyn LogSource> {
        Box::new(self.resumed(input, at))
    }
}

/// Opens a log from any buffered reader (a file, stdin, a test buffer):
/// input starting with the v1 magic line is read as v1 (even when `foreign`
/// is given); any other input needs `foreign`, the checked `[log]` section of
/// a configuration. `name` is used in messages.
pub fn open_log_from<R: BufRead + Send + 'static>(
    mut reader: R,
    name: &str,
    foreign: Option<&ForeignLogSpec>,
) -> Result<Box<dyn LogSource>, LogError> {
    let head = reader
        .fill_buf()
        .map_err(|e| LogError::file(name, format!("cannot read the log: {e}")))?;
    let head = head.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(head);
    if head.starts_with(b"# rarefy log") {
        return Ok(Box::new(LogReader::new(reader, name)?));
    }
    if let Some(spec) = foreign {
        return Ok(Box::new(ForeignReader::new(reader, name, spec)?));
    }
    let first = head.split(|&b| b == b'\n').next().unwrap_or_default();
    let first = first.strip_suffix(b"\r").unwrap_or(first);
    let shown = read::show(&String::from_utf8_lossy(first));
    let what = if head.is_empty() {
        "the file is empty".to_string()
    } else {
        format!("first line \"{shown}\"")
    };
    Err(LogError::at(
        name,
        1,
        None,
        format!(
            "not a rarefy log v1 ({what}); give a config with a [log] section to read other loggers' CSV"
        ),
    ))
}

/// What a log row gives the pipeline, in order: a [`SourceEvent::Gas`] when
/// the row's `gas` column differs from the last row's (`last`), then the
/// row's readings. One place, so every way of reading a log (replay, its
/// index, `record --source file://`) sees the same gas changes.
pub fn row_events(row: Row, last: &mut Option<String>) -> Vec<crate::sample::SourceEvent> {
    let mut out = Vec::with_capacity(2);
    out.extend(gas_event(&row, last));
    out.push(crate::sample::SourceEvent::Samples(row.samples));
    out
}

/// The first of [`row_events`] alone, without building the list: the
/// [`SourceEvent::Gas`](crate::sample::SourceEvent::Gas) when the row's
/// `gas` cell differs from `last` (which it updates). The row's readings
/// follow it as `SourceEvent::Samples(row.samples)`.
pub fn gas_event(row: &Row, last: &mut Option<String>) -> Option<crate::sample::SourceEvent> {
    if row.gas == *last {
        return None;
    }
    last.clone_from(&row.gas);
    Some(crate::sample::SourceEvent::Gas {
        time: row.time,
        text: row.gas.clone(),
    })
}
