//! A log's rows read on a second core while the caller's thread runs the
//! pipeline on the rows before.
//!
//! The reader fills batches of rows in place and hands them over a bounded
//! channel; the caller hands each batch back when it has gone through it, so
//! the rows' buffers (their samples and channel names) are reused rather
//! than allocated on one core and freed on the other. That cross-core
//! allocation is what made an earlier design, which sent freshly built rows,
//! slower than one thread (see `bench/README.md`).
//!
//! Rows reach the caller in file order, every one of them: the same
//! sequence, good and bad, that the log's iterator gives.

use std::sync::mpsc;
use std::thread::JoinHandle;

use crate::log::{LogError, LogSource, ReadPosition, Row};

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
                while fill(&mut slot, |row| ahead.next_into(row)) {
                    f(&slot);
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
    /// With positions: the reader's position after the last item taken.
    position: Option<ReadPosition>,
    /// The reading has ended.
    done: bool,
    thread: Option<JoinHandle<Option<Box<dyn LogSource>>>>,
}

/// What [`LogSource::next_row_into`] gives for one row.
type Step = Option<Result<(), LogError>>;

/// Rows read ahead and handed over together.
#[derive(Default)]
struct Batch {
    /// What the reader gave for each row (`None` at the end).
    items: Vec<Step>,
    /// When positions are kept: where the reader stood after each item
    /// (apart from `items`, so that an item is moved without them).
    positions: Vec<ReadPosition>,
    /// The rows read into, one per item.
    rows: Vec<Row>,
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
            // Ends at the end of the log, or when the taker has gone.
            while let Ok(mut b) = empty_rx.recv() {
                b.items.clear();
                b.positions.clear();
                let mut end = false;
                while b.items.len() < batch && !end {
                    let i = b.items.len();
                    if b.rows.len() == i {
                        b.rows.push(Row::default());
                    }
                    let item = log.next_row_into(&mut b.rows[i]);
                    end = item.is_none();
                    b.items.push(item);
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
            position,
            done: false,
            thread: Some(thread),
        })
    }

    /// The next row into `row` (swapped with the one read ahead), as
    /// [`LogSource::next_row_into`] gives it.
    pub fn next_into(&mut self, row: &mut Row) -> Step {
        if self.done {
            return None;
        }
        if self.at == self.batch.items.len() {
            // A batch the reader could not send (it stopped) reads as the end.
            let next = self.full.recv().unwrap_or_default();
            let used = std::mem::replace(&mut self.batch, next);
            let _ = self.empty.send(used);
            self.at = 0;
        }
        let Some(item) = self.batch.items.get_mut(self.at) else {
            self.done = true;
            return None;
        };
        if let (Some(mine), Some(p)) = (self.position.as_mut(), self.batch.positions.get(self.at)) {
            mine.clone_from(p);
        }
        let item = item.take();
        if let (Some(Ok(())), Some(r)) = (&item, self.batch.rows.get_mut(self.at)) {
            std::mem::swap(row, r);
        }
        self.at += 1;
        self.done = item.is_none();
        item
    }

    /// With positions: where the reader stood after the last row taken
    /// (what [`LogSource::read_position`] would say there).
    pub fn position(&self) -> Option<&ReadPosition> {
        self.position.as_ref()
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

/// Reads the next row into `slot` with `next`, reusing the row it holds;
/// false at the end of the log.
fn fill(slot: &mut Slot, mut next: impl FnMut(&mut Row) -> Step) -> bool {
    if slot.is_err() {
        *slot = Ok(Row::default());
    }
    let Ok(row) = slot else {
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
        for _ in 0..100 {
            let mut mine = Row::default();
            let a = ahead.next_into(&mut row).map(|r| r.is_ok());
            let b = here.next_row_into(&mut mine).map(|r| r.is_ok());
            assert_eq!(a, b);
            assert_eq!(ahead.position(), Some(&here.read_position()));
        }
        let back = ahead.finish();
        assert_eq!(back.header_line(), Some(2));
        let mut dropped = Ahead::start(log(&text), 3, false).unwrap_or_else(|_| panic!("thread"));
        assert!(dropped.next_into(&mut row).is_some());
        assert_eq!(dropped.position(), None);
        drop(dropped);
    }

    #[test]
    fn the_counters_are_the_readers_at_the_end() {
        let text = "# rarefy log v1\ntime,p [Pa]\n\
                    2026-11-16T06:00:01Z,1\n2026-11-16T06:00:00Z,1\n2026-11-16T06:00:00Z,1\n";
        let back = read_rows(log(text), ReadMode::Ahead { batch: 2 }, |_| {});
        assert_eq!((back.times_went_back(), back.times_repeated()), (1, 1));
    }
}
