//! A log's rows read on a second core while the caller's thread runs the
//! pipeline on the rows before.
//!
//! The reader fills batches in place and hands them over a bounded
//! channel; the caller hands each batch back when it has gone through it, so
//! their buffers are reused rather than allocated on one core and freed on
//! the other. That cross-core allocation is what made an earlier design,
//! which sent freshly built rows, slower than one thread (see
//! `bench/README.md`).
//!
//! What crosses between the cores is kept small, for every byte the caller
//! reads was written on the other core, and every byte the reader writes
//! again was last read on the caller's: a row with the channels, units and
//! gas of the last row sent in full travels as its line, time and readings
//! (about 60 bytes for two channels, against some 310 for the row, its
//! samples and its item), and the caller fills in its own row from them.
//! Rows of another shape, with notes or a change of UTC offset, go in full.
//!
//! Rows reach the caller in file order, every one of them: the same
//! sequence, good and bad, that the log's iterator gives.

use std::sync::mpsc;
use std::thread::JoinHandle;

use chrono::{DateTime, Utc};

use crate::log::{LogError, LogSource, ReadPosition, Row};
use crate::sample::{Reading, same_id};

/// How a log's rows are read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReadMode {
    /// On the caller's thread.
    SameThread,
    /// On a second thread, `batch` rows at a time.
    Ahead {
        /// Rows per hand-over.
        batch: usize,
    },
}

/// Rows per hand-over. Waking the thread on the other side costs about
/// 5 µs on a small virtual machine. With 1024 rows, the wake-ups were 6 %
/// of the pipeline thread's time on the 1e7-row bench log. With 4096 rows,
/// the report uses 7 % less CPU and about 8 MiB more memory (bench/README).
pub const BATCH_ROWS: usize = 4096;

/// Batches in flight: one being filled, one being used, one waiting.
const BATCHES: usize = 3;

impl ReadMode {
    /// Ahead when the machine has a second core, else on the same thread.
    pub fn auto() -> ReadMode {
        match std::thread::available_parallelism() {
            Ok(n) if n.get() >= 2 => ReadMode::Ahead { batch: BATCH_ROWS },
            _ => ReadMode::SameThread,
        }
    }
}

/// One row as the log's iterator gives it: a row, or a located error that
/// may carry the bad row's good readings.
pub type Slot = Result<Row, LogError>;

/// Reads every row of `log`, in order, giving each to `f`; returns the log
/// (its counters) at its end.
pub fn read_rows(
    log: Box<dyn LogSource>,
    mode: ReadMode,
    mut f: impl FnMut(&Slot),
) -> Box<dyn LogSource> {
    let mut slot = Ok(Row::default());
    let mut log = match mode {
        ReadMode::Ahead { batch } => match Ahead::start(log, batch, false) {
            Ok(mut ahead) => {
                while let Some(slot) = ahead.next_slot() {
                    f(slot);
                }
                return ahead.finish();
            }
            // No thread to be had: read here.
            Err(log) => log,
        },
        ReadMode::SameThread => log,
    };
    while fill(&mut slot, |row| log.next_row_into(row)) {
        f(&slot);
    }
    log
}

/// A log read on a thread of its own, `batch` rows at a time, taken here
/// one row at a time as [`LogSource::next_row_into`] gives them. Rows are
/// read into in place: the batches, with their rows, go back to the
/// reader to be filled again.
pub struct Ahead {
    full: mpsc::Receiver<Batch>,
    empty: mpsc::Sender<Batch>,
    batch: Batch,
    /// Items of `batch` taken.
    at: usize,
    /// Of them, how many were of each kind, and the readings taken.
    taken: Taken,
    /// The last row handed over in full: the shape of the
    /// [`Kind::Like`] rows after it.
    shape: Row,
    /// What [`Ahead::next_slot`] gives, and whether it holds a row of the
    /// shape.
    slot: Slot,
    shaped: bool,
    /// With positions: the reader's position before the first item of
    /// `batch` (after the last one of the batch before). After an item of
    /// `batch` it is that item's, read where it is when asked, not copied
    /// at every row.
    position: Option<ReadPosition>,
    /// The reading has ended.
    done: bool,
    thread: Option<JoinHandle<Option<Box<dyn LogSource>>>>,
}

/// What [`LogSource::next_row_into`] gives for one row.
type Step = Option<Result<(), LogError>>;

/// How far the taker is in each part of a batch.
#[derive(Debug, Default, Clone, Copy)]
struct Taken {
    heads: usize,
    readings: usize,
    full: usize,
    others: usize,
}

/// How an item of a batch is handed over.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    /// A row shaped like the last row handed over in full ([`like`]): its
    /// line, time and order flags in [`Batch::heads`], its readings in
    /// [`Batch::readings`].
    Like,
    /// A row in full: the next of [`Batch::rows`].
    Full,
    /// What the reader gave otherwise (an error, the end): the next of
    /// [`Batch::others`].
    Other,
}

/// What a [`Kind::Like`] row has of its own besides its readings.
#[derive(Debug, Clone, Copy)]
struct Head {
    line: u64,
    time: DateTime<Utc>,
    time_went_back: bool,
    time_repeated: bool,
}

/// Rows read ahead and handed over together: most as [`Kind::Like`] rows,
/// the rest in full (see the module's introduction).
#[derive(Default)]
struct Batch {
    /// One per item, in order.
    kinds: Vec<Kind>,
    /// The [`Kind::Like`] rows' own parts, in order.
    heads: Vec<Head>,
    /// The [`Kind::Like`] rows' readings, one per channel of the shape, in
    /// order.
    readings: Vec<Reading>,
    /// The [`Kind::Full`] rows: the first `full` are this batch's (the rest
    /// are kept for their buffers).
    rows: Vec<Row>,
    full: usize,
    /// The [`Kind::Other`] items, in order: errors, and `None` for the
    /// end.
    others: Vec<Option<LogError>>,
    /// When positions are kept: where the reader stood after each item.
    positions: Vec<ReadPosition>,
}

impl Batch {
    fn clear(&mut self) {
        self.kinds.clear();
        self.heads.clear();
        self.readings.clear();
        self.full = 0;
        self.others.clear();
        self.positions.clear();
    }

    fn len(&self) -> usize {
        self.kinds.len()
    }
}

/// Whether `row` can travel as a [`Kind::Like`] row after `shape` (the last
/// row handed over in full): its shape, every reading at the row's time, no
/// notes and no change of UTC offset.
fn like(row: &Row, shape: &Row) -> bool {
    same_shape::<true>(row, shape) && row.notes.is_empty() && row.offset_change.is_none()
}

/// Whether `row` has `shape`'s channels, units and gas, so that a
/// [`Kind::Like`] row is filled in by its line, time, flags and readings
/// (and no notes).
fn shaped_as(row: &Row, shape: &Row) -> bool {
    same_shape::<false>(row, shape)
}

/// Whether `row` has `shape`'s channels, units and gas, and with
/// `AT_ROW_TIME` every reading at the row's time (one pass over the
/// samples: the reader asks it of every row).
#[inline(always)]
fn same_shape<const AT_ROW_TIME: bool>(row: &Row, shape: &Row) -> bool {
    row.samples.len() == shape.samples.len()
        && row.samples.iter().zip(&shape.samples).all(|(s, t)| {
            (!AT_ROW_TIME || s.time == row.time)
                && s.unit == t.unit
                && same_id(&s.channel, &t.channel)
        })
        && row.gas == shape.gas
}

impl Ahead {
    /// Starts reading `log` on a thread of its own; with `positions`, the
    /// reader's position after each row is kept
    /// ([`Ahead::position`]). Gives the log back when no thread can be
    /// started.
    pub fn start(
        log: Box<dyn LogSource>,
        batch: usize,
        positions: bool,
    ) -> Result<Ahead, Box<dyn LogSource>> {
        let batch = batch.max(1);
        let position = positions.then(|| log.read_position());
        let (full_tx, full_rx) = mpsc::sync_channel::<Batch>(BATCHES - 1);
        let (empty_tx, empty_rx) = mpsc::channel::<Batch>();
        let (log_tx, log_rx) = mpsc::channel::<Box<dyn LogSource>>();
        for _ in 0..BATCHES {
            // Cannot fail: the receiver is here.
            let _ = empty_tx.send(Batch::default());
        }
        let read = move || {
            // The log comes once the thread runs (so that it stays with the
            // caller when no thread can be started).
            let Ok(mut log) = log_rx.recv() else {
                return None;
            };
            // The row read into, and the last row handed over in full (the
            // shape the rows after it are compared with).
            let mut cur = Row::default();
            let mut shape: Option<Row> = None;
            // Ends at the end of the log, or when the taker has gone.
            while let Ok(mut b) = empty_rx.recv() {
                b.clear();
                let mut end = false;
                while b.len() < batch && !end {
                    match log.next_row_into(&mut cur) {
                        Some(Ok(())) if shape.as_ref().is_some_and(|s| like(&cur, s)) => {
                            b.kinds.push(Kind::Like);
                            b.heads.push(Head {
                                line: cur.line,
                                time: cur.time,
                                time_went_back: cur.time_went_back,
                                time_repeated: cur.time_repeated,
                            });
                            b.readings.extend(cur.samples.iter().map(|s| s.reading));
                        }
                        Some(Ok(())) => {
                            shape.get_or_insert_with(Row::default).clone_from(&cur);
                            if b.rows.len() == b.full {
                                b.rows.push(Row::default());
                            }
                            // The row goes; a spare buffer is read into next.
                            std::mem::swap(&mut b.rows[b.full], &mut cur);
                            b.full += 1;
                            b.kinds.push(Kind::Full);
                        }
                        Some(Err(e)) => {
                            b.others.push(Some(e));
                            b.kinds.push(Kind::Other);
                        }
                        None => {
                            end = true;
                            b.others.push(None);
                            b.kinds.push(Kind::Other);
                        }
                    }
                    if positions {
                        b.positions.push(log.read_position());
                    }
                }
                if full_tx.send(b).is_err() || end {
                    break;
                }
            }
            Some(log)
        };
        let thread = match std::thread::Builder::new()
            .name("log reader".into())
            .spawn(read)
        {
            Ok(t) => t,
            Err(_) => return Err(log),
        };
        if let Err(mpsc::SendError(log)) = log_tx.send(log) {
            return Err(log);
        }
        Ok(Ahead {
            full: full_rx,
            empty: empty_tx,
            batch: Batch::default(),
            at: 0,
            taken: Taken::default(),
            shape: Row::default(),
            slot: Ok(Row::default()),
            shaped: false,
            position,
            done: false,
            thread: Some(thread),
        })
    }

    /// Moves to the next item, taking the next batch when this one is
    /// used up; its kind, or `None` at the end.
    fn step(&mut self) -> Option<Kind> {
        if self.done {
            return None;
        }
        if self.at == self.batch.len() {
            // A batch the reader could not send (it stopped) reads as the end.
            let next = self.full.recv().unwrap_or_default();
            let used = std::mem::replace(&mut self.batch, next);
            if let (Some(mine), Some(p)) = (self.position.as_mut(), used.positions.last()) {
                mine.clone_from(p);
            }
            let _ = self.empty.send(used);
            self.at = 0;
            self.taken = Taken::default();
        }
        let Some(&kind) = self.batch.kinds.get(self.at) else {
            self.done = true;
            return None;
        };
        self.at += 1;
        Some(kind)
    }

    /// Fills `row` with the [`Kind::Like`] row stepped to in `b` (`t`:
    /// how far the taker is); `shaped`: `row` has `shape`'s channels, units
    /// and gas already.
    fn fill_like(b: &Batch, t: &mut Taken, shape: &Row, row: &mut Row, shaped: bool) {
        let h = b.heads[t.heads];
        t.heads += 1;
        let n = shape.samples.len();
        let readings = &b.readings[t.readings..t.readings + n];
        t.readings += n;
        if !shaped {
            row.clone_from(shape);
        }
        row.line = h.line;
        row.time = h.time;
        row.time_went_back = h.time_went_back;
        row.time_repeated = h.time_repeated;
        row.offset_change = None;
        row.notes.clear();
        for (s, r) in row.samples.iter_mut().zip(readings) {
            s.time = h.time;
            s.reading = *r;
        }
    }

    /// Swaps `row` with the [`Kind::Full`] row stepped to in `b`, which
    /// becomes the `shape`.
    fn swap_full(b: &mut Batch, t: &mut Taken, shape: &mut Row, row: &mut Row) {
        let r = &mut b.rows[t.full];
        t.full += 1;
        shape.clone_from(r);
        std::mem::swap(row, r);
    }

    /// The [`Kind::Other`] item stepped to: an error, or `None` at the end.
    fn other(&mut self) -> Option<LogError> {
        let item = self.batch.others[self.taken.others].take();
        self.taken.others += 1;
        self.done = item.is_none();
        item
    }

    /// The next row into `row` (any row: one with the channels of the row
    /// before is filled in, another is overwritten), as
    /// [`LogSource::next_row_into`] gives it.
    pub fn next_into(&mut self, row: &mut Row) -> Step {
        match self.step()? {
            Kind::Like => {
                let shaped = shaped_as(row, &self.shape);
                Self::fill_like(&self.batch, &mut self.taken, &self.shape, row, shaped);
                Some(Ok(()))
            }
            Kind::Full => {
                Self::swap_full(&mut self.batch, &mut self.taken, &mut self.shape, row);
                Some(Ok(()))
            }
            Kind::Other => self.other().map(Err),
        }
    }

    /// The next row or error, as [`LogSource::next_row_into`] gives it,
    /// in a slot of the reading's own: a row with the channels of the row
    /// before is filled in there without comparing them again.
    pub fn next_slot(&mut self) -> Option<&Slot> {
        match self.step()? {
            // After an error the slot holds a new row, not of the shape
            // (`shaped` was cleared with the error).
            Kind::Like => {
                if let Some(row) = row_in(&mut self.slot) {
                    Self::fill_like(&self.batch, &mut self.taken, &self.shape, row, self.shaped);
                }
                self.shaped = true;
            }
            Kind::Full => {
                if let Some(row) = row_in(&mut self.slot) {
                    Self::swap_full(&mut self.batch, &mut self.taken, &mut self.shape, row);
                }
                self.shaped = true;
            }
            Kind::Other => {
                self.slot = Err(self.other()?);
                self.shaped = false;
            }
        }
        Some(&self.slot)
    }

    /// With positions: where the reader stood after the last row taken
    /// (what [`LogSource::read_position`] would say there).
    pub fn position(&self) -> Option<&ReadPosition> {
        let before = self.position.as_ref()?;
        Some(match self.at.checked_sub(1) {
            Some(last) => self.batch.positions.get(last).unwrap_or(before),
            None => before,
        })
    }

    /// Stops reading and gives the log back (its counters are those of
    /// what it read; all of it, once [`Ahead::next_into`] said the end).
    pub fn finish(mut self) -> Box<dyn LogSource> {
        // The thread had the log from the start (`Ahead::start` sent it)
        // and gives it back, unless it panicked, which is passed on.
        self.stop()
            .expect("the reader's thread holds the log from its start")
    }

    fn stop(&mut self) -> Option<Box<dyn LogSource>> {
        let thread = self.thread.take()?;
        // The reader stops at its next hand-over.
        drop(std::mem::replace(&mut self.full, mpsc::sync_channel(0).1));
        let (closed, _) = mpsc::channel();
        drop(std::mem::replace(&mut self.empty, closed));
        match thread.join() {
            Ok(log) => log,
            Err(panic) => std::panic::resume_unwind(panic),
        }
    }
}

impl Drop for Ahead {
    fn drop(&mut self) {
        if !std::thread::panicking() {
            self.stop();
        }
    }
}

/// The row `slot` holds, to read or fill into: a new one in place of an
/// error (always `Some`).
fn row_in(slot: &mut Slot) -> Option<&mut Row> {
    if slot.is_err() {
        *slot = Ok(Row::default());
    }
    slot.as_mut().ok()
}

/// Reads the next row into `slot` with `next`, reusing the row it holds;
/// false at the end of the log.
fn fill(slot: &mut Slot, mut next: impl FnMut(&mut Row) -> Step) -> bool {
    let Some(row) = row_in(slot) else {
        return false;
    };
    match next(row) {
        None => false,
        Some(Ok(())) => true,
        Some(Err(e)) => {
            *slot = Err(e);
            true
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::log::LogReader;

    fn log(text: &str) -> Box<dyn LogSource> {
        Box::new(LogReader::new(std::io::Cursor::new(text.as_bytes().to_vec()), "t.csv").unwrap())
    }

    /// A log with good rows, a cut-off line, a bad cell and a short row, so
    /// that errors fall at and across batch edges.
    fn sample_log(rows: usize) -> String {
        let mut text = String::from("# rarefy log v1\ntime,chamber [Pa],wall [C]\n");
        for i in 0..rows {
            let t = format!(
                "2026-11-16T06:{:02}:{:02}.{:03}Z",
                i / 600 % 60,
                i / 10 % 60,
                i % 10 * 100
            );
            match i % 7 {
                3 => text.push_str(&format!("{t},2.5E-O-5,22\n")),
                5 => text.push_str("2026-11-16T0\n"),
                6 => text.push_str(&format!("{t},,22.5\n")),
                _ => text.push_str(&format!("{t},{}e-3,22\n", i + 1)),
            }
        }
        text
    }

    fn shown(slot: &Slot) -> String {
        match slot {
            Ok(r) => format!("ok {r:?}"),
            Err(e) => format!("err {e} {:?}", e.row),
        }
    }

    #[test]
    fn every_mode_and_batch_size_gives_the_iterators_rows_in_order() {
        for rows in [0, 1, 2, 7, 50] {
            let text = sample_log(rows);
            let expected: Vec<String> = log(&text).map(|s| shown(&s)).collect();
            for mode in [
                ReadMode::SameThread,
                ReadMode::Ahead { batch: 1 },
                ReadMode::Ahead { batch: 3 },
                ReadMode::Ahead { batch: 7 },
                ReadMode::Ahead { batch: 1024 },
            ] {
                let mut got = Vec::new();
                let back = read_rows(log(&text), mode, |s| got.push(shown(s)));
                assert_eq!(got, expected, "{rows} rows, {mode:?}");
                assert_eq!(back.times_went_back(), 0);
            }
        }
    }

    /// A reading ahead stopped before the end (dropped, or finished) ends
    /// its thread and gives the log back; with positions, each row's is the
    /// reader's own after it.
    #[test]
    fn reading_ahead_stops_early_and_keeps_positions() {
        let text = sample_log(5000);
        let mut here = log(&text);
        let mut ahead = Ahead::start(log(&text), 7, true).unwrap_or_else(|_| panic!("thread"));
        let mut row = Row::default();
        assert_eq!(ahead.position(), Some(&here.read_position()));
        for _ in 0..100 {
            let mut mine = Row::default();
            let a = ahead.next_into(&mut row).map(|r| r.is_ok());
            let b = here.next_row_into(&mut mine).map(|r| r.is_ok());
            assert_eq!(a, b);
            assert_eq!(ahead.position(), Some(&here.read_position()));
        }
        let back = ahead.finish();
        assert_eq!(back.header_line(), Some(2));
        // To the end and past it, a batch ending at the last row and one
        // after it.
        for rows in [13, 14, 20] {
            let text = sample_log(rows);
            let mut here = log(&text);
            let mut ahead = Ahead::start(log(&text), 7, true).unwrap_or_else(|_| panic!("thread"));
            for _ in 0..rows + 3 {
                let mut mine = Row::default();
                let a = ahead.next_into(&mut row).map(|r| r.is_ok());
                let b = here.next_row_into(&mut mine).map(|r| r.is_ok());
                assert_eq!(a, b, "{rows} rows");
                assert_eq!(ahead.position(), Some(&here.read_position()), "{rows} rows");
            }
        }
        let mut dropped = Ahead::start(log(&text), 3, false).unwrap_or_else(|_| panic!("thread"));
        assert!(dropped.next_into(&mut row).is_some());
        assert_eq!(dropped.position(), None);
        drop(dropped);
    }

    /// Every row read ahead in `batch`-row batches, each into a row of the
    /// taker's choosing: the same one every time (as `read_rows` does), a
    /// new one, or one with the last row's channels in another order.
    fn taken_ahead(
        text: &str,
        source: &dyn Fn(&str) -> Box<dyn LogSource>,
        batch: usize,
        into: u8,
    ) -> Vec<String> {
        let mut ahead =
            Ahead::start(source(text), batch, false).unwrap_or_else(|_| panic!("thread"));
        let mut row = Row::default();
        let mut got = Vec::new();
        loop {
            match into {
                0 => {}
                1 => row = Row::default(),
                _ => row.samples.reverse(),
            }
            let shown = match ahead.next_into(&mut row) {
                None => break,
                Some(Ok(())) => format!("ok {row:?}"),
                Some(Err(e)) => format!("err {e} {:?}", e.row),
            };
            got.push(shown);
        }
        got
    }

    /// A v1 log with a gas column, whose rows change in every way a row
    /// can: good rows, bad and empty cells, a status word, a cut-off line,
    /// times that go back, repeat or change their UTC offset, a new gas.
    fn varied_log(kinds: &[u8]) -> String {
        let mut text = String::from("# rarefy log v1\ntime,chamber [Pa],wall [C],gas\n");
        let mut gas = "N2";
        for (i, k) in kinds.iter().enumerate() {
            let (m, s) = (i / 60 % 60, i % 60);
            let t = format!("2026-11-16T06:{m:02}:{s:02}.500Z");
            let line = match k % 10 {
                0 => format!("{t},,22.5,{gas}"),
                1 => format!("{t},sensor-off,22,{gas}"),
                2 => "2026-11-16T0".to_string(),
                3 => format!("{t},2.5E-O-5,22,{gas}"),
                4 => format!("2026-11-16T05:00:{s:02}Z,1e-3,22,{gas}"),
                5 => format!("2026-11-16T07:{m:02}:{s:02}.500+01:00,1e-3,22,{gas}"),
                6 => {
                    gas = if gas == "N2" { "Ar" } else { "N2" };
                    format!("{t},{}e-4,21,{gas}", i + 1)
                }
                7 => format!("{t},-1,22,{gas}"),
                _ => format!("{t},{}e-3,2{}.5,{gas}", i + 1, k % 3),
            };
            text.push_str(&line);
            text.push('\n');
        }
        text
    }

    proptest::proptest! {
        /// Rows handed over by their readings alone are filled in, in
        /// whatever row the taker gives, to the rows the log's iterator
        /// gives, across batch edges and every change of a row's shape.
        #[test]
        fn rows_handed_over_in_part_are_the_iterators_rows(
            kinds in proptest::collection::vec(0u8..30, 0..120),
            batch in 1usize..9,
            into in 0u8..3,
        ) {
            let text = varied_log(&kinds);
            let expected: Vec<String> = log(&text).map(|s| shown(&s)).collect();
            let got = taken_ahead(&text, &log, batch, into);
            proptest::prop_assert_eq!(&got, &expected);
            let mut slots = Vec::new();
            read_rows(log(&text), ReadMode::Ahead { batch }, |s| slots.push(shown(s)));
            proptest::prop_assert_eq!(&slots, &expected);
        }
    }

    /// The same for another logger's file, whose rows carry notes.
    #[test]
    fn rows_with_notes_are_handed_over_in_full() {
        let toml = "[log]\ndelimiter = \";\"\nnotes = [\"Remark\"]\n\
                    time = { column = \"Time\", format = \"%Y-%m-%d %H:%M:%S\", timezone = \"UTC\" }\n\
                    [[log.column]]\nname = \"P\"\nchannel = \"p\"\nunit = \"mbar\"\n";
        let spec = crate::config::parse(toml, std::path::Path::new("t.toml"))
            .unwrap_or_else(|e| panic!("{e}"))
            .log
            .expect("a [log] section");
        let mut text = String::from("Time;P;Remark\n");
        for i in 0..40 {
            let remark = if i % 6 == 2 { "door opened" } else { "" };
            text.push_str(&format!("2026-11-16 06:00:{i:02};{}e-3;{remark}\n", i + 1));
        }
        let foreign = |t: &str| -> Box<dyn LogSource> {
            Box::new(
                crate::log::ForeignReader::new(
                    std::io::Cursor::new(t.as_bytes().to_vec()),
                    "x.csv",
                    &spec,
                )
                .unwrap_or_else(|e| panic!("{e}")),
            )
        };
        let expected: Vec<String> = foreign(&text).map(|s| shown(&s)).collect();
        assert!(
            expected.iter().any(|r| r.contains("door opened")),
            "{expected:?}"
        );
        for batch in [1, 4, 64] {
            for into in 0..3 {
                assert_eq!(
                    taken_ahead(&text, &foreign, batch, into),
                    expected,
                    "{batch} {into}"
                );
            }
        }
    }

    #[test]
    fn the_counters_are_the_readers_at_the_end() {
        let text = "# rarefy log v1\ntime,p [Pa]\n\
                    2026-11-16T06:00:01Z,1\n2026-11-16T06:00:00Z,1\n2026-11-16T06:00:00Z,1\n";
        let back = read_rows(log(text), ReadMode::Ahead { batch: 2 }, |_| {});
        assert_eq!((back.times_went_back(), back.times_repeated()), (1, 1));
    }
}
