//! A recorded log as the pipeline's input: its rows in order (bad rows keep
//! the readings they have), and the index a replay opens with — start, end,
//! gaps and every event, from one pass through the same pipeline that plays
//! it, so the timeline shows exactly what playback will.

use std::path::Path;

use chrono::{DateTime, Utc};

use super::Pipeline;
use super::sinks::Collect;
use crate::alarm::{Event, Monitor, MonitorSetup};
use crate::gas::GasTable;
use crate::log::{ForeignLogSpec, LogSource, Row};
use crate::logfile::open_log;

/// A log's rows, one ahead.
pub struct Rows {
    log: Box<dyn LogSource>,
    next: Option<Row>,
    bad: u64,
}

impl Rows {
    /// Opens the log at its start.
    pub fn open(file: &Path, foreign: Option<&ForeignLogSpec>) -> Result<Rows, String> {
        let log = open_log(file, foreign).map_err(|e| e.to_string())?;
        let mut rows = Rows {
            log,
            next: None,
            bad: 0,
        };
        rows.advance();
        Ok(rows)
    }

    fn advance(&mut self) {
        self.next = None;
        for row in self.log.by_ref() {
            match row {
                Ok(r) => {
                    self.next = Some(r);
                    return;
                }
                Err(e) => {
                    self.bad += 1;
                    // A row with a bad cell keeps its other readings.
                    if let Some(r) = e.row {
                        self.next = Some(*r);
                        return;
                    }
                }
            }
        }
    }

    /// Time of the next row.
    pub fn next_time(&self) -> Option<DateTime<Utc>> {
        self.next.as_ref().map(|r| r.time)
    }

    /// The next row, if it is not after `until`.
    pub fn next_until(&mut self, until: Option<DateTime<Utc>>) -> Option<Row> {
        if until.is_some_and(|u| self.next_time().is_some_and(|t| t > u)) {
            return None;
        }
        let row = self.next.take()?;
        self.advance();
        Some(row)
    }

    /// Rows the reader reported as bad so far.
    pub fn bad_rows(&self) -> u64 {
        self.bad
    }

    /// Rows read so far whose time was earlier than the row before's.
    pub fn times_went_back(&self) -> u64 {
        self.log.times_went_back()
    }

    /// Rows read so far whose time was the same as the row before's.
    pub fn times_repeated(&self) -> u64 {
        self.log.times_repeated()
    }
}

/// What one pass through a log found.
#[derive(Debug, Clone, PartialEq)]
pub struct LogIndex {
    /// First row's time.
    pub start: DateTime<Utc>,
    /// Latest row time.
    pub end: DateTime<Utc>,
    /// Gaps: no row for much longer than usual (five times the typical
    /// interval of the first rows, and over 5 s).
    pub gaps: Vec<(DateTime<Utc>, DateTime<Utc>)>,
    /// Rows the reader reported as bad.
    pub bad_rows: u64,
    /// Rows whose time was earlier than the row before's.
    pub times_went_back: u64,
    /// Rows whose time was the same as the row before's.
    pub times_repeated: u64,
    /// Every event of the log, as playback gives them.
    pub events: Vec<Event>,
}

/// Reads the whole log once through a pipeline with `setup`'s monitor.
pub fn index(
    file: &Path,
    foreign: Option<&ForeignLogSpec>,
    setup: &MonitorSetup,
    gases: &GasTable,
) -> Result<LogIndex, String> {
    let mut log = open_log(file, foreign).map_err(|e| e.to_string())?;
    let mut pipeline = Pipeline::new(Monitor::new(setup.clone()));
    pipeline.set_gases(gases.clone());
    let mut gas = None;
    let mut events = Collect::default();
    let mut start = None;
    let mut end: Option<DateTime<Utc>> = None;
    let mut gaps = Vec::new();
    let mut intervals: Vec<i64> = Vec::new();
    let mut bad_rows = 0u64;
    for item in log.by_ref() {
        let row = match item {
            Ok(r) => r,
            Err(e) => {
                bad_rows += 1;
                // A row with a bad cell keeps its other readings.
                match e.row {
                    Some(r) => *r,
                    None => continue,
                }
            }
        };
        start.get_or_insert(row.time);
        if let Some(prev) = end {
            let dt = (row.time - prev).num_milliseconds();
            if intervals.len() < 64 {
                intervals.push(dt.max(1));
            }
            let mut sorted = intervals.clone();
            sorted.sort_unstable();
            let typical = sorted[sorted.len() / 2];
            if dt > typical * 5 && dt > 5000 {
                gaps.push((prev, row.time));
            }
        }
        end = Some(end.map_or(row.time, |e| e.max(row.time)));
        for ev in crate::log::row_events(row, &mut gas) {
            pipeline.feed(&ev, None, &mut events);
        }
    }
    let (Some(start), Some(end)) = (start, end) else {
        return Err(format!("{}: the log has no rows", file.display()));
    };
    Ok(LogIndex {
        start,
        end,
        gaps,
        bad_rows,
        times_went_back: log.times_went_back(),
        times_repeated: log.times_repeated(),
        events: events.0,
    })
}
