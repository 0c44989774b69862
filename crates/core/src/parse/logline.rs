//! Lines of a rarefy log v1 arriving one by one (a followed log file, a log
//! piped into stdin), read with the same reader as whole files.
//!
//! [`AutoDecoder`] reads the plain format until a line starts a v1 log
//! (`# rarefy log v1`), then reads v1 until another such line starts a new
//! log (a rotated file) — so a source can carry either.
//!
//! Every line is counted once: a row with a bad cell is a row (the cell kept
//! as an `unparsed` reading) plus a located `Error` report, never also an
//! `unparsed` line. A row whose time is earlier than, or equal to, the row
//! before's is kept and reported as an `Error` with the running count.

use std::io::Cursor;

use chrono::{DateTime, Utc};

use super::Decoder;
use super::plain::PlainDecoder;
use crate::log::LogReader;
use crate::sample::{ChannelInfo, SourceEvent, Status, escape_bytes};

/// The v1 part: the header lines seen so far, then the data rows.
#[derive(Default)]
struct V1 {
    /// Magic, metadata and (once seen) the header row, each with `\n`.
    header: String,
    /// Whether the header row has been seen.
    complete: bool,
    /// Header lines, to give data rows their line numbers in messages.
    header_lines: u64,
    rows: u64,
    channels: Vec<ChannelInfo>,
    /// The last row's time, and how many rows went back or repeated it.
    last_time: Option<DateTime<Utc>>,
    went_back: u64,
    repeated: u64,
    /// The last row's `gas` cell, to send a change of gas once.
    gas: Option<String>,
    /// The reader of the header, once complete: each row is read by it
    /// (the header is parsed once, not again for every row).
    reader: Option<Box<LogReader<Cursor<Vec<u8>>>>>,
    /// Pressures not above zero, said once for each stretch of a channel
    /// (the reader notes every such row).
    zero: super::ZeroNotes,
}

impl V1 {
    /// Checks a row's time against the row before's: a time that goes back
    /// or repeats is counted and reported.
    fn order(&mut self, source: &str, line_no: u64, time: DateTime<Utc>) -> Vec<SourceEvent> {
        let last = self.last_time.replace(time);
        let Some(last) = last else {
            return Vec::new();
        };
        let stamp = |t: DateTime<Utc>| t.to_rfc3339_opts(chrono::SecondsFormat::Millis, true);
        let message = if time < last {
            self.went_back += 1;
            format!(
                "log line {line_no}: time {} is earlier than the row before ({}); times went back {} time(s) so far",
                stamp(time),
                stamp(last),
                self.went_back
            )
        } else if time == last {
            self.repeated += 1;
            format!(
                "log line {line_no}: time {} repeats the row before's; times repeated {} time(s) so far",
                stamp(time),
                self.repeated
            )
        } else {
            return Vec::new();
        };
        vec![SourceEvent::Error {
            source: source.to_string(),
            message,
        }]
    }
}

/// The plain format, switching to log v1 when a log starts.
// Not Clone: the v1 part holds a log reader.
pub struct AutoDecoder {
    plain: PlainDecoder,
    v1: Option<V1>,
}

impl AutoDecoder {
    /// Plain lines go to `plain`.
    pub fn new(plain: PlainDecoder) -> Self {
        AutoDecoder { plain, v1: None }
    }

    fn unparsed(source: &str, time: DateTime<Utc>, text: String) -> Vec<SourceEvent> {
        vec![SourceEvent::Unparsed {
            source: source.to_string(),
            time,
            text,
        }]
    }
}

impl Decoder for AutoDecoder {
    fn decode(&mut self, line: &[u8], received: DateTime<Utc>, source: &str) -> Vec<SourceEvent> {
        if line.starts_with(b"# rarefy log") || line.starts_with(b"\xEF\xBB\xBF# rarefy log") {
            // A new log starts (the first, or after rotation).
            let mut v1 = V1::default();
            v1.header.push_str(&String::from_utf8_lossy(line));
            v1.header.push('\n');
            v1.header_lines = 1;
            self.v1 = Some(v1);
            return Vec::new();
        }
        let Some(v1) = self.v1.as_mut() else {
            return self.plain.decode(line, received, source);
        };
        let Ok(text) = std::str::from_utf8(line) else {
            return Self::unparsed(
                source,
                received,
                format!("{}  (log row is not UTF-8)", escape_bytes(line)),
            );
        };
        if !v1.complete {
            v1.header.push_str(text);
            v1.header.push('\n');
            v1.header_lines += 1;
            if text.starts_with('#') {
                return Vec::new();
            }
            // The header row: check it by reading the header alone.
            return match LogReader::new(Cursor::new(v1.header.clone().into_bytes()), source) {
                Ok(r) => {
                    v1.channels = r.channels();
                    v1.complete = true;
                    v1.reader = Some(Box::new(r));
                    Vec::new()
                }
                Err(e) => {
                    self.v1 = None;
                    Self::unparsed(
                        source,
                        received,
                        escape_bytes(format!("bad log header: {e}").as_bytes()),
                    )
                }
            };
        }
        v1.rows += 1;
        let line_no = v1.header_lines + v1.rows;
        let parsed = match v1.reader.as_mut() {
            Some(reader) => Ok(reader.read_row(line_no, text)),
            None => {
                let mut doc = v1.header.clone();
                doc.push_str(text);
                doc.push('\n');
                LogReader::new(Cursor::new(doc.into_bytes()), source).map(|mut r| r.next())
            }
        };
        match parsed {
            Ok(Some(Ok(row))) => {
                let time = row.time;
                let mut notes = Vec::new();
                v1.zero.check(&row.samples, source, &mut notes);
                let mut out = crate::log::row_events(row, &mut v1.gas);
                out.extend(notes);
                out.extend(v1.order(source, line_no, time));
                out
            }
            Ok(Some(Err(e))) => {
                let msg = escape_bytes(e.message.as_bytes());
                let Some(row) = e.row else {
                    // No row at all (bad time, wrong width): an unparsed line.
                    return Self::unparsed(
                        source,
                        received,
                        format!("{}  (log line {line_no}: {msg})", escape_bytes(line)),
                    );
                };
                // A row: its good cells, its bad ones as `unparsed` readings,
                // and where they are — counted as a row, not as unparsed. A
                // row whose only news is a pressure not above zero (kept as
                // read) is said once for each stretch of such readings.
                let time = row.time;
                let mut notes = Vec::new();
                v1.zero.check(&row.samples, source, &mut notes);
                let zero_only = row.samples.iter().all(|s| s.status() != Status::Unparsed);
                let mut out = crate::log::row_events(*row, &mut v1.gas);
                if zero_only {
                    out.extend(notes);
                } else {
                    out.push(SourceEvent::Error {
                        source: source.to_string(),
                        message: format!(
                            "log line {line_no}, cell {}: {msg}; recorded as unparsed",
                            e.column.unwrap_or(1)
                        ),
                    });
                }
                out.extend(v1.order(source, line_no, time));
                out
            }
            Ok(None) => Vec::new(),
            Err(e) => Self::unparsed(
                source,
                received,
                format!(
                    "{}  ({})",
                    escape_bytes(line),
                    escape_bytes(e.to_string().as_bytes())
                ),
            ),
        }
    }

    fn channels(&self) -> Vec<ChannelInfo> {
        match &self.v1 {
            Some(v) => v.channels.clone(),
            None => self.plain.channels(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sample::{ChannelUnit, Status};
    use crate::units::PressureUnit;

    type Got = (String, Option<f64>, Status, String);

    fn feed(d: &mut AutoDecoder, text: &str) -> (Vec<Got>, Vec<String>) {
        let mut samples = Vec::new();
        let mut unparsed = Vec::new();
        for line in text.lines() {
            for e in d.decode(line.as_bytes(), DateTime::<Utc>::UNIX_EPOCH, "file") {
                match e {
                    SourceEvent::Samples(s) => samples.extend(s.into_iter().map(|s| {
                        (
                            s.channel.clone(),
                            s.value(),
                            s.status(),
                            s.time.to_rfc3339(),
                        )
                    })),
                    SourceEvent::Unparsed { text, .. } => unparsed.push(text),
                    SourceEvent::Error { message, .. } => {
                        unparsed.push(format!("error: {message}"))
                    }
                    other => panic!("{other:?}"),
                }
            }
        }
        (samples, unparsed)
    }

    /// A followed log's pressure not above zero is kept as read and said
    /// once for each stretch of a channel, not at every row; a row with a
    /// bad cell is still said where it is.
    #[test]
    fn a_pressure_not_above_zero_is_said_once_a_stretch() {
        let mut d = AutoDecoder::new(PlainDecoder::new(
            "p",
            ChannelUnit::Pressure(PressureUnit::Mbar),
        ));
        let (samples, said) = feed(
            &mut d,
            "# rarefy log v1\ntime,a [mbar],b [mbar]\n\
             2026-01-01T00:00:01.000Z,-1e-6,1e-6\n\
             2026-01-01T00:00:02.000Z,-2e-6,1e-6\n\
             2026-01-01T00:00:03.000Z,1e-6,0\n\
             2026-01-01T00:00:04.000Z,0,x\n",
        );
        assert_eq!(samples.len(), 8, "{samples:?}");
        assert_eq!(samples[2].1, Some(-2e-6), "kept as read");
        assert_eq!(samples[2].2, Status::Ok);
        assert_eq!(said.len(), 3, "{said:?}");
        assert!(
            said[0].starts_with(
                "error: a: pressure -1e-6 mbar at 2026-01-01T00:00:01.000Z is not above zero"
            ),
            "{said:?}"
        );
        assert!(
            said[1].starts_with("error: b: pressure 0 mbar at 2026-01-01T00:00:03.000Z"),
            "{said:?}"
        );
        // A bad cell in the row: said where it is, as before, with the
        // pressure not above zero beside it.
        assert!(
            said[2].contains("log line 6, cell 2: pressure \"0\" mbar is not above zero")
                && said[2].contains("(and 1 more bad cell in this row)"),
            "{said:?}"
        );
    }

    #[test]
    fn plain_then_v1_with_device_times_then_a_rotated_log() {
        let mut d = AutoDecoder::new(PlainDecoder::new(
            "p",
            ChannelUnit::Pressure(PressureUnit::Mbar),
        ));
        let text = "1e-6\n# rarefy log v1\n# chamber: X\ntime,a [mbar],b [mbar]\n\
                    2026-01-01T00:00:01.000Z,2e-6,over-range\n2026-01-01T00:00:02.000Z,,3e-6\n\
                    # rarefy log v1\ntime,c [Torr]\n2026-01-01T00:00:03.000Z,4e-6\n";
        let (s, u) = feed(&mut d, text);
        assert!(u.is_empty(), "{u:?}");
        let got: Vec<(&str, Option<f64>, Status)> = s
            .iter()
            .map(|(c, v, st, _)| (c.as_str(), *v, *st))
            .collect();
        assert_eq!(
            got,
            [
                ("p", Some(1e-6), Status::Ok),
                ("a", Some(2e-6), Status::Ok),
                ("b", None, Status::OverRange),
                ("b", Some(3e-6), Status::Ok),
                ("c", Some(4e-6), Status::Ok),
            ]
        );
        assert_eq!(s[1].3, "2026-01-01T00:00:01+00:00");
        assert_eq!(d.channels().len(), 1);
    }

    #[test]
    fn bad_rows_keep_good_cells_and_say_where() {
        let mut d = AutoDecoder::new(PlainDecoder::new(
            "p",
            ChannelUnit::Pressure(PressureUnit::Mbar),
        ));
        let text = "# rarefy log v1\ntime,a [mbar],b [mbar]\n2026-01-01T00:00:01.000Z,2e-6,1.2.3\n";
        let (s, u) = feed(&mut d, text);
        assert_eq!(s[0].1, Some(2e-6));
        assert_eq!(s[1].2, Status::Unparsed);
        // A row, reported as an error and not also as an unparsed line.
        assert_eq!(u.len(), 1);
        assert!(u[0].starts_with("error: log line 3, cell 3:"), "{u:?}");
        let mut d = AutoDecoder::new(PlainDecoder::new(
            "p",
            ChannelUnit::Pressure(PressureUnit::Mbar),
        ));
        let (_, u) = feed(&mut d, "# rarefy log v1\ntime,a\n");
        assert!(u[0].contains("bad log header"), "{u:?}");
    }

    #[test]
    fn times_going_back_or_repeating_are_reported_with_a_count() {
        let mut d = AutoDecoder::new(PlainDecoder::new(
            "p",
            ChannelUnit::Pressure(PressureUnit::Mbar),
        ));
        let text = "# rarefy log v1\ntime,a [mbar]\n2026-01-01T00:00:02.000Z,1\n\
                    2026-01-01T00:00:01.000Z,2\n2026-01-01T00:00:01.000Z,3\n\
                    2026-01-01T00:00:00.000Z,4\n2026-01-01T00:00:05.000Z,5\n";
        let (s, u) = feed(&mut d, text);
        assert_eq!(s.len(), 5, "every row is kept");
        assert_eq!(u.len(), 3, "{u:?}");
        assert!(u[0].contains("log line 4: time 2026-01-01T00:00:01.000Z is earlier"));
        assert!(u[0].ends_with("went back 1 time(s) so far"), "{u:?}");
        assert!(u[1].contains("log line 5: time 2026-01-01T00:00:01.000Z repeats"));
        assert!(u[2].ends_with("went back 2 time(s) so far"), "{u:?}");
    }
}
