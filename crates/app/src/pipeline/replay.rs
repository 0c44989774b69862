//! A recorded log as the pipeline's input: its rows in order (bad rows keep
//! the readings they have), and the index a replay opens with — start, end,
//! gaps and every event, from one pass through the same pipeline that plays
//! it, so the timeline shows exactly what playback will.
//!
//! A reading of a plain file can also go on from a point another reading
//! reached ([`Rows::resume`] at a [`Resume`]): the dashboard's index keeps
//! such points with the state there (keyframes), so that a seek reads at
//! most the rows from the nearest one.

use std::fs::File;
use std::io::{BufReader, Seek, SeekFrom};
use std::path::Path;

use chrono::{DateTime, Utc};

use super::Pipeline;
use super::read_ahead::{Ahead, BATCH_ROWS};
use super::sinks::Collect;
use crate::alarm::{Event, Monitor, MonitorSetup};
use crate::gas::GasTable;
use crate::log::{ForeignLogSpec, LogSource, ReadPosition, Row};
use crate::logfile::open_log;

/// How many of the first intervals between rows give the typical one.
const TYPICAL_OF: usize = 64;

/// The time a log's rows span, and its gaps, found row by row.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Span {
    /// First row's time.
    pub start: Option<DateTime<Utc>>,
    /// Latest row time.
    pub end: Option<DateTime<Utc>>,
    /// Gaps: no row for much longer than usual (five times the typical
    /// interval, and over 5 s). The typical interval is the (upper) median
    /// of the intervals so far while there are fewer than 64, then of the
    /// first 64.
    pub gaps: Vec<(DateTime<Utc>, DateTime<Utc>)>,
    /// The first intervals, ms (at least 1), in order of size.
    first: Vec<i64>,
}

impl Span {
    /// Takes the next row's time.
    pub fn add(&mut self, t: DateTime<Utc>) {
        self.start.get_or_insert(t);
        if let Some(prev) = self.end {
            let dt = crate::timefmt::millis_between(prev, t);
            if self.first.len() < TYPICAL_OF {
                let v = dt.max(1);
                let at = self.first.partition_point(|x| *x < v);
                self.first.insert(at, v);
            }
            let typical = self.first[self.first.len() / 2];
            if dt > typical * 5 && dt > 5000 {
                self.gaps.push((prev, t));
            }
        }
        self.end = Some(self.end.map_or(t, |e| e.max(t)));
    }
}

/// A point to go on reading a log from: before a row, with what the
/// reading of the rows before it carried.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Resume {
    /// The reader's position before the row.
    pub read: ReadPosition,
    /// Rows the reader reported as bad before it.
    pub bad: u64,
    /// Rows taken before it.
    pub taken: u64,
}

/// A log's rows, one ahead.
pub struct Rows {
    log: Box<dyn LogSource>,
    /// An index pass on a machine with two cores: the rows read on a
    /// second thread (the `log` above is then only the reader's model).
    ahead: Option<Ahead>,
    /// The next row (boxed, as the rows given back: a row changes hands
    /// by a pointer, not by a copy of it).
    next: Option<Box<Row>>,
    /// Rows given back, to be read into again.
    #[allow(
        clippy::vec_box,
        reason = "the rows go out and come back as boxes: kept boxed, they move by pointer"
    )]
    spare: Vec<Box<Row>>,
    bad: u64,
    taken: u64,
    /// While indexing: the span of the rows taken, where the reading stood
    /// before `next` when that was a multiple of `every`th row, and
    /// `every`.
    indexing: Option<(Span, Resume, u64)>,
}

impl Rows {
    /// Opens the log at its start.
    pub fn open(file: &Path, foreign: Option<&ForeignLogSpec>) -> Result<Rows, String> {
        Rows::open_as(file, foreign, None, false)
    }

    /// Opens the log at its start for an index pass: the rows' span is
    /// kept ([`Rows::span`]), and the point before the next row when the
    /// rows taken are a multiple of `every` ([`Rows::resume_point`]). On a
    /// machine with two cores the rows are read ahead on the second
    /// (a plain file; the same rows and points either way).
    pub fn open_indexing(
        file: &Path,
        foreign: Option<&ForeignLogSpec>,
        every: u64,
    ) -> Result<Rows, String> {
        let ahead = std::thread::available_parallelism().is_ok_and(|n| n.get() >= 2);
        Rows::open_as(file, foreign, Some(every.max(1)), ahead)
    }

    fn open_as(
        file: &Path,
        foreign: Option<&ForeignLogSpec>,
        every: Option<u64>,
        ahead: bool,
    ) -> Result<Rows, String> {
        let log = open_log(file, foreign).map_err(|e| e.to_string())?;
        let mut rows = Rows {
            indexing: every.map(|every| {
                let at = Resume {
                    read: log.read_position(),
                    bad: 0,
                    taken: 0,
                };
                (Span::default(), at, every)
            }),
            ahead: None,
            log,
            next: None,
            spare: Vec::new(),
            bad: 0,
            taken: 0,
        };
        if ahead {
            // The reader's model stays here (for its counts); the reading
            // goes on from the start in a resumed copy on the thread.
            let input = File::open(file)
                .map_err(|e| format!("{}: cannot read the log: {e}", file.display()))
                .and_then(|mut f| {
                    let at = rows.log.read_position();
                    f.seek(SeekFrom::Start(at.offset))
                        .map_err(|e| format!("{}: cannot read the log: {e}", file.display()))?;
                    Ok(rows.log.resume(Box::new(BufReader::new(f)), &at))
                });
            // A log that cannot be reopened (not a plain file) is read here.
            if let Ok(log) = input {
                rows.ahead = Ahead::start(log, BATCH_ROWS, true).ok();
            }
        }
        rows.advance();
        Ok(rows)
    }

    /// Whether `file` is a plain file, which a reading can be resumed in
    /// (not a pipe or a device).
    pub fn can_resume(file: &Path) -> bool {
        std::fs::metadata(file).is_ok_and(|m| m.is_file())
    }

    /// Goes on reading `file` (the log these rows were opened on) from
    /// `at`, a point an indexing reading of it gave: the rows, bad-row
    /// count and time-order counts are then those of a reading from the
    /// start.
    pub fn resume(&mut self, file: &Path, at: &Resume) -> Result<(), String> {
        let cannot = |e: std::io::Error| format!("{}: cannot read the log: {e}", file.display());
        // Reading ahead ends; the rest is read here.
        self.ahead = None;
        let mut f = File::open(file).map_err(cannot)?;
        f.seek(SeekFrom::Start(at.read.offset)).map_err(cannot)?;
        self.log = self.log.resume(Box::new(BufReader::new(f)), &at.read);
        self.bad = at.bad;
        self.taken = at.taken;
        if let Some((_, before, _)) = &mut self.indexing {
            before.clone_from(at);
        }
        self.advance();
        Ok(())
    }

    fn advance(&mut self) {
        if let Some(row) = self.next.take() {
            self.spare.push(row);
        }
        if let Some((_, before, every)) = &mut self.indexing
            && self.taken.is_multiple_of(*every)
        {
            *before = Resume {
                read: match self.ahead.as_ref().and_then(Ahead::position) {
                    Some(p) => p.clone(),
                    None => self.log.read_position(),
                },
                bad: self.bad,
                taken: self.taken,
            };
        }
        loop {
            let mut row = self.spare.pop().unwrap_or_default();
            let item = match &mut self.ahead {
                Some(a) => a.next_into(&mut row),
                None => self.log.next_row_into(&mut row),
            };
            match item {
                None => return,
                Some(Ok(())) => {
                    self.next = Some(row);
                    return;
                }
                Some(Err(e)) => {
                    self.spare.push(row);
                    self.bad += 1;
                    // A row with a bad cell keeps its other readings.
                    if let Some(r) = e.row {
                        self.next = Some(r);
                        return;
                    }
                }
            }
        }
    }

    /// Takes back a row [`Rows::next_until`] gave, to read into again
    /// (no allocation per row).
    pub fn give_back(&mut self, row: Box<Row>) {
        if self.spare.len() < 64 {
            self.spare.push(row);
        }
    }

    /// Time of the next row.
    pub fn next_time(&self) -> Option<DateTime<Utc>> {
        self.next.as_ref().map(|r| r.time)
    }

    /// The next row, if it is not after `until`.
    pub fn next_until(&mut self, until: Option<DateTime<Utc>>) -> Option<Box<Row>> {
        if until.is_some_and(|u| self.next_time().is_some_and(|t| t > u)) {
            return None;
        }
        let row = self.next.take()?;
        self.taken += 1;
        if let Some((span, _, _)) = &mut self.indexing {
            span.add(row.time);
        }
        self.advance();
        Some(row)
    }

    /// Rows taken so far.
    pub fn taken(&self) -> u64 {
        self.taken
    }

    /// Indexing: the point before the next row, to resume at, when the
    /// rows taken are a multiple of the `every` the rows were opened with.
    pub fn resume_point(&self) -> Option<&Resume> {
        self.indexing
            .as_ref()
            .map(|(_, at, _)| at)
            .filter(|at| at.taken == self.taken)
    }

    /// Indexing: the span of the rows taken so far.
    pub fn span(&self) -> Option<&Span> {
        self.indexing.as_ref().map(|(span, _, _)| span)
    }

    /// Rows the reader reported as bad so far.
    pub fn bad_rows(&self) -> u64 {
        self.bad
    }

    /// Rows read so far whose time was earlier than the row before's.
    pub fn times_went_back(&self) -> u64 {
        match self.ahead.as_ref().and_then(Ahead::position) {
            Some(p) => p.times_went_back,
            None => self.log.times_went_back(),
        }
    }

    /// Rows read so far whose time was the same as the row before's.
    pub fn times_repeated(&self) -> u64 {
        match self.ahead.as_ref().and_then(Ahead::position) {
            Some(p) => p.times_repeated,
            None => self.log.times_repeated(),
        }
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

impl LogIndex {
    /// The index of what `rows` read, with `events`; an error naming
    /// `file` when it had no rows.
    pub fn of(rows: &Rows, events: Vec<Event>, file: &Path) -> Result<LogIndex, String> {
        let span = rows.span().cloned().unwrap_or_default();
        let (Some(start), Some(end)) = (span.start, span.end) else {
            return Err(format!("{}: the log has no rows", file.display()));
        };
        Ok(LogIndex {
            start,
            end,
            gaps: span.gaps,
            bad_rows: rows.bad_rows(),
            times_went_back: rows.times_went_back(),
            times_repeated: rows.times_repeated(),
            events,
        })
    }
}

/// Reads the whole log once through a pipeline with `setup`'s monitor.
pub fn index(
    file: &Path,
    foreign: Option<&ForeignLogSpec>,
    setup: &MonitorSetup,
    gases: &GasTable,
) -> Result<LogIndex, String> {
    let mut rows = Rows::open_indexing(file, foreign, u64::MAX)?;
    let mut pipeline = Pipeline::new(Monitor::new(setup.clone()));
    pipeline.set_gases(gases.clone());
    let mut gas = None;
    let mut events = Collect::default();
    while let Some(row) = rows.next_until(None) {
        pipeline.feed_log_row(&row, &mut gas, &mut events);
        rows.give_back(row);
    }
    LogIndex::of(&rows, events.0, file)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn at(s: f64) -> DateTime<Utc> {
        DateTime::<Utc>::UNIX_EPOCH + chrono::Duration::milliseconds((s * 1000.0) as i64)
    }

    /// The gaps as the index found them before: the median of a sorted
    /// copy of the first 64 intervals, taken again at every row.
    fn gaps_by_sorting(times: &[DateTime<Utc>]) -> Vec<(DateTime<Utc>, DateTime<Utc>)> {
        let mut end: Option<DateTime<Utc>> = None;
        let mut intervals: Vec<i64> = Vec::new();
        let mut gaps = Vec::new();
        for &t in times {
            if let Some(prev) = end {
                let dt = (t - prev).num_milliseconds();
                if intervals.len() < 64 {
                    intervals.push(dt.max(1));
                }
                let mut sorted = intervals.clone();
                sorted.sort_unstable();
                let typical = sorted[sorted.len() / 2];
                if dt > typical * 5 && dt > 5000 {
                    gaps.push((prev, t));
                }
            }
            end = Some(end.map_or(t, |e| e.max(t)));
        }
        gaps
    }

    /// An index pass reading ahead on a second thread gives the same rows,
    /// bad-row and time-order counts, span and resume points as reading
    /// here, across its batch edges; and a reading resumed at any of those
    /// points goes on with the same rows.
    #[test]
    fn reading_ahead_indexes_as_reading_here() {
        let file = std::env::temp_dir().join(format!("rarefy-ahead-{}.csv", std::process::id()));
        let mut text = String::from("# rarefy log v1\ntime,p [Pa],wall [C]\n");
        for i in 0..(3 * BATCH_ROWS + 11) {
            let s = 100 + i / 3 - usize::from(i % 101 == 7) * 2;
            // Two rows of three share their time.
            let t = format!(
                "2026-11-16T06:{:02}:{:02}.{}Z",
                s / 60 % 60,
                s % 60,
                (i % 3).min(1) * 5
            );
            match i % 13 {
                2 => text.push_str(&format!("{t},2.5E-O-5,22\n")),
                5 => text.push_str("2026-11-16T0\n"),
                _ => text.push_str(&format!("{t},{}e-3,22.5\n", i + 1)),
            }
        }
        std::fs::write(&file, text).expect("write");
        let every = 97;
        let walk = |ahead: bool| {
            let mut rows = Rows::open_as(&file, None, Some(every), ahead).expect("open");
            assert_eq!(rows.ahead.is_some(), ahead);
            let mut seen = Vec::new();
            let mut points = Vec::new();
            while let Some(r) = rows.next_until(None) {
                seen.push(format!(
                    "{r:?} {} {}",
                    rows.bad_rows(),
                    rows.times_went_back()
                ));
                if let Some(p) = rows.resume_point() {
                    points.push(p.clone());
                }
                rows.give_back(r);
            }
            let counts = (
                rows.bad_rows(),
                rows.times_went_back(),
                rows.times_repeated(),
            );
            (seen, points, counts, rows.span().cloned())
        };
        let here = walk(false);
        let ahead = walk(true);
        assert_eq!(here, ahead);
        assert!(here.2.0 > 0 && here.2.1 > 0 && here.2.2 > 0, "{:?}", here.2);
        assert!(here.1.len() > 20);
        // Resumed at each point (from either), the same rest.
        for p in ahead.1.iter().step_by(7) {
            let mut rows = Rows::open(&file, None).expect("open");
            rows.resume(&file, p).expect("resume");
            let rest: Vec<String> = std::iter::from_fn(|| rows.next_until(None))
                .map(|r| format!("{r:?}"))
                .collect();
            let expected: Vec<String> = here.0[usize::try_from(p.taken).expect("rows")..]
                .iter()
                .map(|l| l.rsplitn(3, ' ').nth(2).unwrap_or_default().to_string())
                .collect();
            assert_eq!(rest, expected);
        }
        let _ = std::fs::remove_file(&file);
    }

    #[test]
    fn only_plain_files_can_be_resumed_in() {
        let file = std::env::temp_dir().join(format!("rarefy-resume-{}.csv", std::process::id()));
        std::fs::write(&file, "x\n").expect("write");
        assert!(Rows::can_resume(&file));
        let _ = std::fs::remove_file(&file);
        assert!(!Rows::can_resume(&file));
        assert!(!Rows::can_resume(Path::new("/dev/null")));
        assert!(!Rows::can_resume(&std::env::temp_dir()));
    }

    #[test]
    fn gaps_are_those_of_the_median_taken_at_every_row() {
        // Irregular intervals, times going back and repeating, long pauses
        // early and late.
        let mut x: u64 = 7;
        let mut times = Vec::new();
        let mut t = 0.0;
        for i in 0..2000 {
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let r = (x >> 33) % 1000;
            t += match r {
                0..=9 => 30.0 + r as f64,
                10..=19 => -2.0,
                20..=29 => 0.0,
                _ => 0.1 + (r % 7) as f64 * 0.35,
            };
            if i == 5 {
                t += 100.0;
            }
            times.push(at(t));
        }
        let mut span = Span::default();
        for &t in &times {
            span.add(t);
        }
        let want = gaps_by_sorting(&times);
        assert!(want.len() > 5, "{}", want.len());
        assert_eq!(span.gaps, want);
        assert_eq!(span.start, times.first().copied());
        assert_eq!(span.end, times.iter().max().copied());
    }
}
