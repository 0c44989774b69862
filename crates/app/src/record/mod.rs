//! The recorder: writes samples as log format v1, never dropping one while it
//! can be kept.
//!
//! * Samples of one line (same data time, distinct channels) share a row.
//! * Files rotate by size and by UTC day of the data, and whenever a new
//!   channel appears (the header changes); each file starts with a full
//!   header, so every file reads back on its own.
//! * Rows are written to the OS at every [`Recorder::flush`] (the caller's
//!   interval) and whenever a batch is full; files are fsynced on rotation
//!   and on [`Recorder::close`].
//! * On a write error (disk full, file-size limit, directory removed) the
//!   file is cut back to its last complete row, rows stay in a bounded
//!   buffer, the error is reported, and writing is retried in a new file;
//!   only when that buffer is full are rows lost, oldest first, and counted.
//!   The rows lost in one spell of failure are reported once, as one
//!   [`RecordEvent::Lost`] with their count and data-time range, when
//!   writing works again or the recorder is closed.

pub mod derived;

use std::collections::VecDeque;
use std::fs::{File, OpenOptions};
use std::io::Write;
use std::os::unix::fs::MetadataExt;
use std::path::{Path, PathBuf};

use chrono::{DateTime, NaiveDate, Utc};

use crate::log::v1::{self, Cell, Column, LogMeta};
use crate::sample::{ChannelInfo, Sample};
pub use derived::Deriver;

/// Recorder settings.
#[derive(Debug, Clone, PartialEq)]
pub struct RecordSettings {
    /// Directory the log files go into (created if missing).
    pub dir: PathBuf,
    /// File name prefix.
    pub prefix: String,
    /// Start a new file when one reaches this many bytes.
    pub max_bytes: Option<u64>,
    /// Start a new file when the UTC day of the data changes.
    pub rotate_daily: bool,
    /// Rows kept in memory while writing fails; beyond it the oldest are lost.
    pub buffer_rows: usize,
}

impl Default for RecordSettings {
    fn default() -> Self {
        RecordSettings {
            dir: PathBuf::from("."),
            prefix: "rarefy".into(),
            max_bytes: Some(64 * 1024 * 1024),
            rotate_daily: true,
            buffer_rows: 200_000,
        }
    }
}

/// Something the recorder did that its user should hear about.
#[derive(Debug, Clone, PartialEq)]
pub enum RecordEvent {
    /// A new log file was started.
    Opened {
        /// Its path.
        path: PathBuf,
        /// Why: `start`, `size`, `day`, `new-channel`, `after-error`.
        reason: &'static str,
    },
    /// A file was completed (fsynced and closed).
    Closed {
        /// Its path.
        path: PathBuf,
        /// Data rows in it.
        rows: u64,
    },
    /// Writing failed; rows are being kept in memory.
    WriteFailed {
        /// The file or directory.
        path: PathBuf,
        /// The error.
        error: String,
        /// Rows now waiting in memory.
        buffered: usize,
    },
    /// Writing works again.
    Recovered {
        /// The new file.
        path: PathBuf,
    },
    /// The buffer overflowed while writing failed: rows were lost. One
    /// event for a whole spell of failure, sent when it ends.
    Lost {
        /// Rows lost in this spell.
        rows: u64,
        /// Rows lost since the start.
        total: u64,
        /// Data time of the first row lost.
        from: DateTime<Utc>,
        /// Data time of the last row lost.
        to: DateTime<Utc>,
    },
}

struct Segment {
    path: PathBuf,
    file: File,
    /// (device, inode), to notice the file being removed or renamed away.
    id: (u64, u64),
    /// Bytes known to be completely written.
    committed: u64,
    day: NaiveDate,
    columns: usize,
    rows: u64,
}

/// A row waiting to be written: its time, its cells by channel index, and
/// its derived cells. Channels are only ever appended and derived columns
/// follow the channels in order, so a row's derived cells stay a prefix of
/// the derived columns however many channels appear later.
struct Pending {
    time: DateTime<Utc>,
    cells: Vec<(usize, Cell)>,
    derived: Vec<Cell>,
}

/// Writes batches of about this size.
const BATCH_BYTES: usize = 64 * 1024;

/// The recorder. Not async: the caller drives it from a task.
pub struct Recorder {
    settings: RecordSettings,
    meta: LogMeta,
    columns: Vec<Column>,
    channels: Vec<ChannelInfo>,
    deriver: Option<Deriver>,
    current: Option<Segment>,
    pending: VecDeque<Pending>,
    failing: bool,
    events: Vec<RecordEvent>,
    rows_written: u64,
    rows_lost: u64,
    /// Rows lost in the current spell of failure and their time range.
    losing: Option<(u64, DateTime<Utc>, DateTime<Utc>)>,
    segments: u64,
}

impl Recorder {
    /// A recorder for the channels known in advance; more may appear.
    pub fn new(settings: RecordSettings, meta: LogMeta, channels: &[ChannelInfo]) -> Self {
        let mut r = Recorder {
            settings,
            meta,
            columns: Vec::new(),
            channels: Vec::new(),
            deriver: None,
            current: None,
            pending: VecDeque::new(),
            failing: false,
            events: Vec::new(),
            rows_written: 0,
            rows_lost: 0,
            losing: None,
            segments: 0,
        };
        for c in channels {
            r.add_channel(c.clone());
        }
        r
    }

    /// Also writes derived columns computed by `deriver`.
    pub fn with_derived(mut self, deriver: Deriver) -> Self {
        self.deriver = Some(deriver);
        self.rebuild_columns();
        self
    }

    fn rebuild_columns(&mut self) {
        self.columns = self.channels.iter().map(Column::channel).collect();
        if let Some(d) = &self.deriver {
            self.columns.extend(d.columns(&self.channels));
        }
    }

    fn add_channel(&mut self, c: ChannelInfo) {
        self.channels.push(c);
        self.rebuild_columns();
    }

    /// Takes the events since the last call.
    pub fn take_events(&mut self) -> Vec<RecordEvent> {
        std::mem::take(&mut self.events)
    }

    /// Rows written to files so far.
    pub fn rows_written(&self) -> u64 {
        self.rows_written
    }

    /// Rows lost to buffer overflow so far.
    pub fn rows_lost(&self) -> u64 {
        self.rows_lost
    }

    /// Rows waiting in memory.
    pub fn buffered(&self) -> usize {
        self.pending.len()
    }

    /// Whether writing is currently failing.
    pub fn is_failing(&self) -> bool {
        self.failing
    }

    /// The directory log files go into.
    pub fn dir(&self) -> &Path {
        &self.settings.dir
    }

    /// The file being written.
    pub fn current_path(&self) -> Option<&Path> {
        self.current.as_ref().map(|s| s.path.as_path())
    }

    fn channel_index(&mut self, s: &Sample) -> usize {
        let id = match self.channels.iter().position(|c| c.id == s.channel) {
            Some(i) if self.channels[i].unit == s.unit => return i,
            // Same channel id in another unit: a channel of its own.
            Some(_) => format!("{}.{}", s.channel, s.unit.symbol()),
            None => s.channel.clone(),
        };
        if let Some(j) = self.channels.iter().position(|c| c.id == id) {
            return j;
        }
        self.add_channel(ChannelInfo::new(id, s.unit));
        self.channels.len() - 1
    }

    /// Records the samples of one line or record as one row. Returns `true`
    /// when enough is waiting that the caller should [`flush`](Self::flush).
    pub fn push_row(&mut self, samples: &[Sample]) -> bool {
        self.push_row_with(samples, None)
    }

    /// Whether derived columns are written.
    pub fn has_derived(&self) -> bool {
        self.deriver.is_some()
    }

    /// [`Recorder::push_row`] with the row's kinetics already computed (by
    /// the monitor, with the gas in force): the derived columns take them
    /// instead of computing their own.
    pub fn push_row_with(
        &mut self,
        samples: &[Sample],
        kinetics: Option<&[(String, crate::engine::Derived)]>,
    ) -> bool {
        let Some(first) = samples.first() else {
            return false;
        };
        let mut row = Pending {
            time: first.time,
            cells: Vec::with_capacity(samples.len()),
            derived: Vec::new(),
        };
        for s in samples {
            let idx = self.channel_index(s);
            let cell = Cell::of(s);
            match row.cells.iter_mut().find(|(i, _)| *i == idx) {
                // A channel twice in one record: the later reading wins; the
                // earlier one is kept in a row of its own.
                Some(slot) => {
                    let earlier = Pending {
                        time: row.time,
                        cells: vec![*slot],
                        derived: Vec::new(),
                    };
                    self.queue(earlier);
                    slot.1 = cell;
                }
                None => row.cells.push((idx, cell)),
            }
        }
        if let Some(d) = &mut self.deriver {
            row.derived = match kinetics {
                Some(k) => d.from_kinetics(&self.channels, k),
                None => d.derive(&self.channels, &row.cells),
            };
        }
        self.queue(row);
        self.pending.len() >= 1024
    }

    /// Records one sample as a row of its own.
    pub fn push(&mut self, s: &Sample) -> bool {
        self.push_row(std::slice::from_ref(s))
    }

    fn queue(&mut self, row: Pending) {
        self.pending.push_back(row);
        let limit = self.settings.buffer_rows.max(1);
        if self.pending.len() > limit {
            let over = self.pending.len() - limit;
            for lost in self.pending.drain(..over) {
                let span = self.losing.get_or_insert((0, lost.time, lost.time));
                span.0 += 1;
                span.1 = span.1.min(lost.time);
                span.2 = span.2.max(lost.time);
            }
            self.rows_lost += over as u64;
        }
    }

    /// Reports the rows lost in the spell of failure that ends now.
    fn report_lost(&mut self) {
        if let Some((rows, from, to)) = self.losing.take() {
            self.events.push(RecordEvent::Lost {
                rows,
                total: self.rows_lost,
                from,
                to,
            });
        }
    }

    fn file_name(&self, time: DateTime<Utc>) -> PathBuf {
        let stamp = time.format("%Y%m%dT%H%M%SZ");
        let base = format!("{}-{stamp}", self.settings.prefix);
        let mut path = self.settings.dir.join(format!("{base}.csv"));
        let mut n = 1;
        while path.exists() {
            path = self.settings.dir.join(format!("{base}-{n}.csv"));
            n += 1;
        }
        path
    }

    fn open_segment(
        &mut self,
        time: DateTime<Utc>,
        reason: &'static str,
    ) -> Result<(), (PathBuf, String)> {
        let dir = &self.settings.dir;
        std::fs::create_dir_all(dir).map_err(|e| (dir.clone(), e.to_string()))?;
        let path = self.file_name(time);
        let mut file = OpenOptions::new()
            .create_new(true)
            .write(true)
            .open(&path)
            .map_err(|e| (path.clone(), e.to_string()))?;
        let mut meta = self.meta.clone();
        meta.started.get_or_insert(time);
        let header = v1::header(&meta, &self.columns);
        if let Err(e) = file.write_all(header.as_bytes()) {
            drop(file);
            let _ = std::fs::remove_file(&path);
            return Err((path, e.to_string()));
        }
        let id = file
            .metadata()
            .map(|m| (m.dev(), m.ino()))
            .map_err(|e| (path.clone(), e.to_string()))?;
        self.segments += 1;
        self.events.push(RecordEvent::Opened {
            path: path.clone(),
            reason,
        });
        self.current = Some(Segment {
            path,
            file,
            id,
            committed: header.len() as u64,
            day: time.date_naive(),
            columns: self.columns.len(),
            rows: 0,
        });
        Ok(())
    }

    fn close_segment(&mut self) {
        if let Some(seg) = self.current.take() {
            let _ = seg.file.sync_all();
            self.events.push(RecordEvent::Closed {
                path: seg.path,
                rows: seg.rows,
            });
        }
    }

    /// Why the next row cannot go into the current file, if it cannot.
    fn rotation_needed(&self, time: DateTime<Utc>) -> Option<&'static str> {
        let Some(seg) = &self.current else {
            return Some(if self.segments == 0 {
                "start"
            } else {
                "after-error"
            });
        };
        if seg.columns != self.columns.len() {
            return Some("new-channel");
        }
        if self.settings.rotate_daily && time.date_naive() != seg.day {
            return Some("day");
        }
        if self.settings.max_bytes.is_some_and(|m| seg.committed >= m) {
            return Some("size");
        }
        None
    }

    /// Writes every complete row to the OS. Returns `false` while writing
    /// fails (rows are then kept and retried on the next call).
    pub fn flush(&mut self) -> bool {
        if self.pending.is_empty() {
            return !self.failing;
        }
        // Writes into a file that was deleted (or its directory) succeed and
        // are lost: check the file is still where it was before writing.
        if let Some(seg) = &self.current {
            let here = std::fs::metadata(&seg.path).map(|m| (m.dev(), m.ino()));
            if here.ok() != Some(seg.id) {
                let path = seg.path.clone();
                self.current = None;
                self.fail(path, "the log file was removed or moved away".into());
            }
        }
        let mut text = String::with_capacity(BATCH_BYTES + 256);
        // After a write error, one row per write: a file-size limit then
        // fills each file with complete rows before the next file is started.
        let mut one_row = false;
        while let Some(first_time) = self.pending.front().map(|p| p.time) {
            if let Some(reason) = self.rotation_needed(first_time) {
                self.close_segment();
                if let Err((path, error)) = self.open_segment(first_time, reason) {
                    self.fail(path, error);
                    return false;
                }
            }
            let day = self.current.as_ref().map(|s| s.day);
            let n = self.format_batch(&mut text, day, if one_row { 1 } else { usize::MAX });
            if n == 0 {
                // Cannot happen: rotation makes the first row fit. Never spin.
                return false;
            }
            let Some(seg) = self.current.as_mut() else {
                return false;
            };
            match seg.file.write_all(text.as_bytes()) {
                Ok(()) => {
                    seg.committed += text.len() as u64;
                    seg.rows += n as u64;
                    self.rows_written += n as u64;
                    self.pending.drain(..n);
                    if self.failing {
                        self.failing = false;
                        let path = seg.path.clone();
                        self.report_lost();
                        self.events.push(RecordEvent::Recovered { path });
                    }
                }
                Err(e) => {
                    // Cut the file back to its last complete row, so that it
                    // reads back cleanly, and retry the rows in a new file.
                    let _ = seg.file.set_len(seg.committed);
                    let fresh = seg.rows == 0;
                    let path = seg.path.clone();
                    self.close_segment();
                    self.fail(path, e.to_string());
                    if one_row && fresh {
                        // Not even one row fits a new file: a real failure.
                        return false;
                    }
                    one_row = true;
                }
            }
        }
        true
    }

    /// Formats up to `max_rows` pending rows (and about [`BATCH_BYTES`]) that
    /// belong in a file of data day `day`; returns how many.
    fn format_batch(&self, text: &mut String, day: Option<NaiveDate>, max_rows: usize) -> usize {
        text.clear();
        let mut cells = vec![Cell::Empty; self.columns.len()];
        let first_derived = self.channels.len();
        let mut n = 0;
        for row in &self.pending {
            if n >= max_rows
                || text.len() >= BATCH_BYTES
                || (self.settings.rotate_daily && Some(row.time.date_naive()) != day)
            {
                break;
            }
            cells.iter_mut().for_each(|c| *c = Cell::Empty);
            for &(i, c) in &row.cells {
                cells[i] = c;
            }
            for (k, &c) in row.derived.iter().enumerate() {
                if let Some(slot) = cells.get_mut(first_derived + k) {
                    *slot = c;
                }
            }
            v1::write_row(text, row.time, &cells);
            n += 1;
        }
        n
    }

    fn fail(&mut self, path: PathBuf, error: String) {
        if !self.failing {
            self.failing = true;
            self.events.push(RecordEvent::WriteFailed {
                path,
                error,
                buffered: self.buffered(),
            });
        }
    }

    /// Writes what it can and fsyncs the file. Returns the rows still in
    /// memory (lost when the process ends).
    pub fn close(&mut self) -> usize {
        self.flush();
        self.report_lost();
        self.close_segment();
        self.buffered()
    }
}

#[cfg(test)]
mod tests;
