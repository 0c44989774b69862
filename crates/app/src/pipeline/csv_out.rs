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
use rarefy_core::numfmt::put_bytes;

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
    /// The lines being laid out, in place: kept at its length (zeroed once)
    /// and written from its start in pieces of about 64 KiB.
    line: Vec<u8>,
    times: crate::timefmt::Rfc3339Writer,
    error: Option<String>,
}

/// Lines are written in pieces of about this many bytes.
const PIECE: usize = 1 << 16;

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
        let mut used = 0;
        if !self.header_written && !batch.records.is_empty() {
            self.header_written = true;
            let header = self.header.as_bytes();
            room(&mut self.line, header.len());
            used = put_bytes(&mut self.line, 0, header);
        }
        for (i, r) in batch.records.iter().enumerate() {
            let cells = batch
                .cells
                .get(i * self.lengths..(i + 1) * self.lengths)
                .unwrap_or_default();
            let name = self.names.get(r.gauge).map_or("", String::as_str);
            used = lay_out(&mut self.line, used, &mut self.times, r, name, cells);
            if used >= PIECE {
                if let Err(e) = self.out.write_all(&self.line[..used]) {
                    self.error = Some(format!("cannot write the CSV: {e}"));
                    return;
                }
                used = 0;
            }
        }
        if let Err(e) = self.out.write_all(&self.line[..used]) {
            self.error = Some(format!("cannot write the CSV: {e}"));
            return;
        }
        if batch.flush
            && let Err(e) = self.out.flush()
        {
            self.error = Some(format!("cannot write the CSV: {e}"));
        }
    }
}

/// Makes `line` at least `n` bytes long.
fn room(line: &mut Vec<u8>, n: usize) {
    if line.len() < n {
        line.resize(n, 0);
    }
}

/// Lays out one CSV line at `line[at..]` (lengthening `line` first if it
/// could fall short); returns the index after it. The line: time, gauge,
/// status, pressure, number density, mean free path, per length Knudsen
/// number and regime, impingement rate, time to a monolayer, range.
/// Numbers in the shortest form that reads back to the same `f64`
/// (`numfmt::push_exp`'s); no value, an empty cell.
fn lay_out(
    line: &mut Vec<u8>,
    at: usize,
    times: &mut crate::timefmt::Rfc3339Writer,
    r: &Record,
    gauge: &str,
    cells: &[LengthCells],
) -> usize {
    use rarefy_core::numfmt::{EXP_MOST, LAY_ROOM, lay_exp_at};
    let d = r.derived.as_ref();
    let status = r.status.as_str().as_bytes();
    let range = d.map_or("", |d| d.range).as_bytes();
    // The longest the line can be: its texts, the time, each number with
    // its comma, the other commas and the line's end; and the room the
    // last number is laid out in.
    let texts = gauge.len()
        + status.len()
        + range.len()
        + cells.iter().flatten().map(|c| c.1.len()).sum::<usize>();
    let numbers = 5 + cells.len();
    let most = crate::timefmt::RFC3339_MOST
        + texts
        + numbers * (1 + EXP_MOST)
        + cells.len()
        + 4
        + LAY_ROOM;
    room(line, at + most);
    let b = line.as_mut_slice();
    let num = |b: &mut [u8], k: usize, v: Option<f64>| {
        b[k] = b',';
        match v {
            Some(v) => lay_exp_at(b, k + 1, v),
            None => k + 1,
        }
    };
    let mut k = times.lay_at(b, at, r.time);
    b[k] = b',';
    k = put_bytes(b, k + 1, gauge.as_bytes());
    b[k] = b',';
    k = put_bytes(b, k + 1, status);
    k = num(b, k, r.pressure_pa);
    k = num(b, k, d.map(|d| d.number_density_per_m3));
    k = num(b, k, d.map(|d| d.mean_free_path_m));
    for c in cells {
        k = num(b, k, c.map(|c| c.0));
        b[k] = b',';
        k = put_bytes(b, k + 1, c.map_or("", |c| c.1).as_bytes());
    }
    k = num(b, k, d.map(|d| d.impingement_per_m2_s));
    k = num(b, k, d.map(|d| d.monolayer_time_s));
    b[k] = b',';
    k = put_bytes(b, k + 1, range);
    b[k] = b'\n';
    k + 1
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

    /// A line as the format says it, pushed piece by piece: what
    /// `lay_out` is tested against.
    fn line_reference(r: &Record, gauge: &str, cells: &[LengthCells]) -> Vec<u8> {
        let mut s = Vec::new();
        crate::timefmt::push_rfc3339_bytes(&mut s, r.time);
        s.push(b',');
        s.extend_from_slice(gauge.as_bytes());
        s.push(b',');
        s.extend_from_slice(r.status.as_str().as_bytes());
        let num = |s: &mut Vec<u8>, v: Option<f64>| {
            s.push(b',');
            if let Some(v) = v {
                s.extend_from_slice(format!("{v:e}").as_bytes());
            }
        };
        let d = r.derived.as_ref();
        num(&mut s, r.pressure_pa);
        num(&mut s, d.map(|d| d.number_density_per_m3));
        num(&mut s, d.map(|d| d.mean_free_path_m));
        for c in cells {
            num(&mut s, c.map(|c| c.0));
            s.push(b',');
            s.extend_from_slice(c.map_or("", |c| c.1).as_bytes());
        }
        num(&mut s, d.map(|d| d.impingement_per_m2_s));
        num(&mut s, d.map(|d| d.monolayer_time_s));
        s.push(b',');
        s.extend_from_slice(d.map_or("", |d| d.range).as_bytes());
        s.push(b'\n');
        s
    }

    /// Texts of every length around the fixed copies' sizes: 0, 4, 7, 8,
    /// 15, 16, 17, 21, 32, 33 and 40 bytes.
    const TEXTS: [&str; 11] = [
        "",
        "high",
        "vacuum!",
        "molecule",
        "fifteen letters",
        "sixteen letters!",
        "seventeen letters",
        "extremely high vacuum",
        "a range name of exactly 32 bytes",
        "a range name of exactly 33 bytes.",
        "a very long name of forty bytes, at last",
    ];

    proptest::proptest! {
        /// Lines laid out in place, one after another in one buffer that
        /// starts short, read as the format's own layout: every number as
        /// `{:e}` writes it (values whose shortest digits tie may differ
        /// in a last digit: only values that read back the same are
        /// drawn), texts of every length, no derived values, cells
        /// missing, times of any year chrono holds.
        #[test]
        fn lines_laid_out_in_place_are_the_reference(
            rows in proptest::collection::vec((
                -8_000_000_000_000_000i64..8_000_000_000_000_000,
                proptest::option::of(proptest::num::f64::ANY),
                proptest::option::of((1e-12f64..1e30, 0usize..TEXTS.len())),
                proptest::collection::vec(proptest::option::of((-1e300f64..1e300, 0usize..TEXTS.len())), 0..4),
                0usize..3,
                0usize..3,
            ), 1..40),
        ) {
            let names = ["chamber", "", "a gauge whose name runs well over thirty-two bytes"];
            let (mut line, mut times) = (Vec::new(), crate::timefmt::Rfc3339Writer::default());
            let (mut at, mut want) = (0, Vec::new());
            for (micros, p, derived, cells, status, name) in rows {
                let Some(time) = DateTime::from_timestamp_millis(micros / 1_000) else {
                    continue;
                };
                let r = Record {
                    time,
                    gauge: 0,
                    status: [Status::Ok, Status::OverRange, Status::SensorError][status],
                    pressure_pa: p,
                    derived: derived.map(|(v, t)| DerivedCells {
                        number_density_per_m3: v * 2.4e20,
                        mean_free_path_m: 6.6e-3 / v,
                        impingement_per_m2_s: -v,
                        monolayer_time_s: 1.0 / v,
                        range: TEXTS[t],
                    }),
                };
                let cells: Vec<LengthCells> = cells.into_iter().map(|c| c.map(|(v, t)| (v, TEXTS[t]))).collect();
                // Numbers whose shortest digits tie are left out (the
                // layout's last digit may then differ from `{:e}`'s).
                let reads_back = |v: f64| v.is_nan() || format!("{v:e}").parse::<f64>() == Ok(v);
                let mut all = vec![r.pressure_pa];
                if let Some(d) = r.derived {
                    all.extend([d.number_density_per_m3, d.mean_free_path_m, d.impingement_per_m2_s, d.monolayer_time_s].map(Some));
                }
                all.extend(cells.iter().map(|c| c.map(|c| c.0)));
                let mut laid = Vec::new();
                for v in all.into_iter().flatten() {
                    rarefy_core::numfmt::push_exp_bytes(&mut laid, v);
                    proptest::prop_assume!(reads_back(v));
                    proptest::prop_assume!(laid == format!("{v:e}").as_bytes());
                    laid.clear();
                }
                at = lay_out(&mut line, at, &mut times, &r, names[name], &cells);
                want.extend(line_reference(&r, names[name], &cells));
            }
            proptest::prop_assert_eq!(String::from_utf8_lossy(&line[..at]), String::from_utf8_lossy(&want));
        }
    }

    /// A gauge name longer than a piece of the output: the buffer grows
    /// to hold its lines, each written whole.
    #[test]
    fn a_name_longer_than_a_piece_is_written_whole() {
        let name = "g".repeat(3 * PIECE / 2);
        let shared = Shared::default();
        let mut csv = CsvOut::new(Box::new(shared.clone()), &["bore".to_string()], false);
        let gauge = csv.gauge(&name);
        let t0: DateTime<Utc> = "2026-11-16T06:00:00Z".parse().expect("time");
        let mut want = String::new();
        for i in 0..3 {
            let r = Record {
                time: t0 + chrono::Duration::milliseconds(i * 100),
                gauge,
                status: Status::Ok,
                pressure_pa: Some(1e-3),
                derived: None,
            };
            let cells = [Some((2.5, "transitional"))];
            want.push_str(&String::from_utf8_lossy(&line_reference(&r, &name, &cells)));
            csv.push(r, cells.into_iter());
        }
        csv.finish().expect("written");
        let text = shared.text();
        let (header, rows) = text.split_once('\n').expect("a header");
        assert!(header.starts_with("time,gauge,"), "{header}");
        assert_eq!(rows, want);
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
