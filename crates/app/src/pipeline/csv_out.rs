//! The report's CSV of every reading with its derived values, written on a
//! second core when there is one.
//!
//! The report sink turns each reading into a [`Record`] (numbers, not
//! text); [`CsvOut`] lays records out as lines, either at once on the
//! sink's thread or, in batches handed over a bounded channel, on a writer
//! thread. Batches go back to the sink to be filled again, so nothing is
//! allocated per row on either side. Both ways write the same bytes: one
//! function lays out a line.

use std::io::Write;

use chrono::{DateTime, Utc};

use super::worker::Worker;
use crate::sample::Status;

/// Rows per hand-over to the writer thread.
const BATCH_ROWS: usize = 1024;

/// A reading's derived values, as the CSV gives them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DerivedCells {
    /// Number density, 1/m³.
    pub number_density_per_m3: f64,
    /// Mean free path, m.
    pub mean_free_path_m: f64,
    /// Wall impingement rate, 1/(m² s).
    pub impingement_per_m2_s: f64,
    /// Time to a monolayer, s.
    pub monolayer_time_s: f64,
    /// ISO 3529-1 range name.
    pub range: &'static str,
}

/// One line of the CSV, before it is laid out. Its per-length cells
/// (Knudsen number and regime name, or none) are given beside it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Record {
    /// Reading time.
    pub time: DateTime<Utc>,
    /// Index of the gauge's name in the names given to [`CsvOut::gauge`].
    pub gauge: usize,
    /// The reading's status.
    pub status: Status,
    /// The gauge's true pressure, Pa, when usable.
    pub pressure_pa: Option<f64>,
    /// The derived values, when the pressure is usable.
    pub derived: Option<DerivedCells>,
}

/// Per-length cells: Knudsen number and regime name.
pub type LengthCells = Option<(f64, &'static str)>;

#[derive(Default)]
struct Batch {
    /// New gauge names, in index order, before the records.
    names: Vec<String>,
    records: Vec<Record>,
    /// `lengths` cells per record, in order.
    cells: Vec<LengthCells>,
    /// Also flush the output after this batch.
    flush: bool,
}

impl Batch {
    fn clear(&mut self) {
        self.names.clear();
        self.records.clear();
        self.cells.clear();
        self.flush = false;
    }
}

/// Lays records out as lines.
struct Writer {
    out: Box<dyn Write + Send>,
    header: String,
    header_written: bool,
    lengths: usize,
    names: Vec<String>,
    line: Vec<u8>,
    times: crate::timefmt::Rfc3339Writer,
    error: Option<String>,
}

impl Writer {
    fn write(&mut self, batch: &Batch) {
        for n in &batch.names {
            self.names.push(if n.contains([',', '"', '\n', '\r']) {
                csv_text(n)
            } else {
                n.clone()
            });
        }
        if self.error.is_some() {
            return;
        }
        let line = &mut self.line;
        line.clear();
        if !self.header_written && !batch.records.is_empty() {
            self.header_written = true;
            line.extend_from_slice(self.header.as_bytes());
        }
        for (i, r) in batch.records.iter().enumerate() {
            let cells = batch
                .cells
                .get(i * self.lengths..(i + 1) * self.lengths)
                .unwrap_or_default();
            let name = self.names.get(r.gauge).map_or("", String::as_str);
            lay_out(line, &mut self.times, r, name, cells);
            // Written in pieces of about 64 KiB.
            if line.len() >= 1 << 16 {
                if let Err(e) = self.out.write_all(line) {
                    self.error = Some(format!("cannot write the CSV: {e}"));
                    return;
                }
                line.clear();
            }
        }
        if let Err(e) = self.out.write_all(line) {
            self.error = Some(format!("cannot write the CSV: {e}"));
            return;
        }
        line.clear();
        if batch.flush
            && let Err(e) = self.out.flush()
        {
            self.error = Some(format!("cannot write the CSV: {e}"));
        }
    }
}

/// One CSV line: time, gauge, status, pressure, number density, mean free
/// path, per length Knudsen number and regime, impingement rate, time to a
/// monolayer, range. Numbers in the shortest form that reads back to the
/// same `f64` (`numfmt::push_exp`); no value, an empty cell.
fn lay_out(
    line: &mut Vec<u8>,
    times: &mut crate::timefmt::Rfc3339Writer,
    r: &Record,
    gauge: &str,
    cells: &[LengthCells],
) {
    let num = |line: &mut Vec<u8>, v: Option<f64>| {
        line.push(b',');
        if let Some(v) = v {
            rarefy_core::numfmt::push_exp_bytes(line, v);
        }
    };
    let d = r.derived.as_ref();
    times.push(line, r.time);
    line.push(b',');
    line.extend_from_slice(gauge.as_bytes());
    line.push(b',');
    line.extend_from_slice(r.status.as_str().as_bytes());
    num(line, r.pressure_pa);
    num(line, d.map(|d| d.number_density_per_m3));
    num(line, d.map(|d| d.mean_free_path_m));
    for c in cells {
        num(line, c.map(|c| c.0));
        line.push(b',');
        line.extend_from_slice(c.map_or("", |c| c.1).as_bytes());
    }
    num(line, d.map(|d| d.impingement_per_m2_s));
    num(line, d.map(|d| d.monolayer_time_s));
    line.push(b',');
    line.extend_from_slice(d.map_or("", |d| d.range).as_bytes());
    line.push(b'\n');
}

/// A CSV cell: quoted when it holds a comma, a quote or a line break.
pub fn csv_text(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// Where the CSV goes, and how.
pub struct CsvOut {
    worker: Worker<Batch, Writer>,
    lengths: usize,
    /// Gauge names given so far (for their indices).
    names: Vec<String>,
}

/// The writer takes a batch: its lines written, the batch emptied.
fn take(w: &mut Writer, b: &mut Batch) {
    w.write(b);
    b.clear();
}

impl CsvOut {
    /// A CSV to `out` whose rows have one Knudsen number and regime per name
    /// in `lengths`; on a writer thread when `thread` (and one can be
    /// started).
    pub fn new(out: Box<dyn Write + Send>, lengths: &[String], thread: bool) -> CsvOut {
        let mut header =
            String::from("time,gauge,status,pressure_pa,number_density_per_m3,mean_free_path_m");
        for l in lengths {
            let name = csv_text(l);
            header.push_str(&format!(",knudsen {name},regime {name}"));
        }
        header.push_str(",impingement_per_m2_s,monolayer_time_s,range\n");
        let writer = Writer {
            out,
            header,
            header_written: false,
            lengths: lengths.len(),
            names: Vec::new(),
            line: Vec::new(),
            times: Default::default(),
            error: None,
        };
        CsvOut {
            worker: Worker::new(writer, thread.then_some("csv writer"), take),
            lengths: lengths.len(),
            names: Vec::new(),
        }
    }

    /// The index of gauge `name` (given once, the first time).
    pub fn gauge(&mut self, name: &str) -> usize {
        if let Some(i) = self
            .names
            .iter()
            .position(|n| crate::sample::same_id(n, name))
        {
            return i;
        }
        self.names.push(name.to_string());
        self.worker.batch.names.push(name.to_string());
        self.names.len() - 1
    }

    /// Adds one line: `record` and its cells, one per length (missing ones
    /// are empty).
    pub fn push(&mut self, record: Record, cells: impl Iterator<Item = LengthCells>) {
        let b = &mut self.worker.batch;
        b.records.push(record);
        let before = b.cells.len();
        b.cells.extend(cells.take(self.lengths));
        b.cells.resize(before + self.lengths, None);
        if b.records.len() >= BATCH_ROWS {
            self.worker.hand_over();
        }
    }

    /// Writes out everything pushed so far.
    pub fn flush(&mut self) {
        self.worker.batch.flush = true;
        self.worker.hand_over();
    }

    /// Writes out the rest and closes; the first write error, if any.
    pub fn finish(&mut self) -> Result<(), String> {
        self.worker.batch.flush = true;
        self.worker.settle();
        match self.worker.state_mut() {
            Some(w) => w.error.take().map_or(Ok(()), Err),
            None => Err("the CSV writer stopped unexpectedly".into()),
        }
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use std::sync::{Arc, Mutex};

    /// A writer whose bytes the test reads afterwards.
    #[derive(Clone, Default)]
    pub(crate) struct Shared(pub(crate) Arc<Mutex<Vec<u8>>>);

    impl Shared {
        /// Everything written, as text.
        pub(crate) fn text(&self) -> String {
            String::from_utf8(self.0.lock().expect("lock").clone()).expect("utf-8")
        }
    }

    impl Write for Shared {
        fn write(&mut self, b: &[u8]) -> std::io::Result<usize> {
            self.0.lock().expect("lock").extend_from_slice(b);
            Ok(b.len())
        }
        fn flush(&mut self) -> std::io::Result<()> {
            Ok(())
        }
    }

    struct Broken;
    impl Write for Broken {
        fn write(&mut self, _: &[u8]) -> std::io::Result<usize> {
            Err(std::io::Error::other("disk full"))
        }
        fn flush(&mut self) -> std::io::Result<()> {
            Ok(())
        }
    }

    fn fill(csv: &mut CsvOut, rows: usize) {
        let t0: DateTime<Utc> = "2026-11-16T06:00:00Z".parse().expect("time");
        for i in 0..rows {
            let gauge = csv.gauge(if i % 3 == 0 { "wall" } else { "cdg, \"main\"" });
            let p = 1e5 * 0.9f64.powi(i as i32 % 300);
            let derived = (i % 5 != 0).then_some(DerivedCells {
                number_density_per_m3: p * 2.4e20,
                mean_free_path_m: 6.6e-3 / p,
                impingement_per_m2_s: p * 2.9e22,
                monolayer_time_s: 3.4e-4 / p,
                range: "high",
            });
            let record = Record {
                time: t0 + chrono::Duration::milliseconds(i as i64 * 100),
                gauge,
                status: if i % 7 == 0 {
                    Status::OverRange
                } else {
                    Status::Ok
                },
                pressure_pa: derived.map(|_| p),
                derived,
            };
            let cells = [(i as f64 * 1e-3, "molecular"), (2.5, "transitional")];
            // Fewer cells than lengths on some rows: the rest are empty.
            csv.push(record, cells.into_iter().take(i % 3).map(Some));
        }
    }

    /// The writer thread writes the same bytes as writing at once, across
    /// batch edges, with a header and quoted names.
    #[test]
    fn a_thread_writes_what_writing_here_writes() {
        let lengths = ["bore".to_string(), "slit, 2 mm".to_string()];
        let mut outs = Vec::new();
        for thread in [false, true] {
            let shared = Shared::default();
            let mut csv = CsvOut::new(Box::new(shared.clone()), &lengths, thread);
            fill(&mut csv, 3 * BATCH_ROWS + 17);
            csv.finish().expect("written");
            outs.push(shared.text());
        }
        assert_eq!(outs[0], outs[1]);
        let text = &outs[0];
        assert_eq!(text.lines().count(), 3 * BATCH_ROWS + 17 + 1);
        assert!(text.starts_with(
            "time,gauge,status,pressure_pa,number_density_per_m3,mean_free_path_m,\
             knudsen bore,regime bore,knudsen \"slit, 2 mm\",regime \"slit, 2 mm\","
        ));
        let second = text.lines().nth(2).expect("row");
        assert_eq!(
            second,
            "2026-11-16T06:00:00.100Z,\"cdg, \"\"main\"\"\",ok,9e4,2.16e25,7.333333333333333e-8,\
             1e-3,molecular,,,2.61e27,3.777777777777778e-9,high"
        );
    }

    #[test]
    fn a_write_error_is_told_at_the_end_either_way() {
        for thread in [false, true] {
            let mut csv = CsvOut::new(Box::new(Broken), &[], thread);
            fill(&mut csv, 2 * BATCH_ROWS);
            let e = csv.finish().expect_err("an error");
            assert!(e.contains("disk full"), "{e}");
        }
    }
}
