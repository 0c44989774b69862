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

use crate::log::{LogError, LogSource, Row};

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

/// Rows per hand-over: enough that the hand-overs cost nothing next to the
/// rows, few enough that a batch stays in the cache between the cores.
pub const BATCH_ROWS: usize = 1024;

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
    mut log: Box<dyn LogSource>,
    mode: ReadMode,
    mut f: impl FnMut(&Slot),
) -> Box<dyn LogSource> {
    if let ReadMode::Ahead { batch } = mode
        && ahead(log.as_mut(), batch.max(1), &mut f)
    {
        return log;
    }
    // One thread (asked for, or none could be started).
    let mut slot = Ok(Row::default());
    while fill(log.as_mut(), &mut slot) {
        f(&slot);
    }
    log
}

/// Reads `log` on a second thread, `batch` rows at a time; false, having
/// read nothing, when no thread could be started.
fn ahead(log: &mut dyn LogSource, batch: usize, f: &mut impl FnMut(&Slot)) -> bool {
    std::thread::scope(|scope| {
        let (full_tx, full_rx) = mpsc::sync_channel::<Batch>(BATCHES);
        let (empty_tx, empty_rx) = mpsc::channel::<Batch>();
        for _ in 0..BATCHES {
            // Cannot fail: the receiver is alive.
            let _ = empty_tx.send(Batch::default());
        }
        let read = move || {
            // Ends when the log does, or when the caller has gone.
            while let Ok(mut b) = empty_rx.recv() {
                b.used = 0;
                let mut more = true;
                while b.used < batch {
                    if b.slots.len() == b.used {
                        b.slots.push(Ok(Row::default()));
                    }
                    if !fill(log, &mut b.slots[b.used]) {
                        more = false;
                        break;
                    }
                    b.used += 1;
                }
                if full_tx.send(b).is_err() || !more {
                    break;
                }
            }
        };
        let Ok(reader) = std::thread::Builder::new()
            .name("log reader".into())
            .spawn_scoped(scope, read)
        else {
            return false;
        };
        for b in full_rx.iter() {
            for slot in &b.slots[..b.used] {
                f(slot);
            }
            // The reader may have finished: then the batch is dropped here.
            let _ = empty_tx.send(b);
        }
        drop(empty_tx);
        if let Err(panic) = reader.join() {
            std::panic::resume_unwind(panic);
        }
        true
    })
}

/// Rows handed over together, with their buffers kept for the next fill.
#[derive(Default)]
struct Batch {
    slots: Vec<Slot>,
    used: usize,
}

/// Reads the next row into `slot`, reusing the row it holds; false at the
/// end of the log.
fn fill(log: &mut dyn LogSource, slot: &mut Slot) -> bool {
    if slot.is_err() {
        *slot = Ok(Row::default());
    }
    let Ok(row) = slot else {
        return false;
    };
    match log.next_row_into(row) {
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

    #[test]
    fn the_counters_are_the_readers_at_the_end() {
        let text = "# rarefy log v1\ntime,p [Pa]\n\
                    2026-11-16T06:00:01Z,1\n2026-11-16T06:00:00Z,1\n2026-11-16T06:00:00Z,1\n";
        let back = read_rows(log(text), ReadMode::Ahead { batch: 2 }, |_| {});
        assert_eq!((back.times_went_back(), back.times_repeated()), (1, 1));
    }
}
