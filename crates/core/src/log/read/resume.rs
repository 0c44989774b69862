//! Going on reading a v1 log from a position a reader reached before
//! (a replay jumping to a keyframe), without reading the lines before it.

use std::io::BufRead;

use super::LogReader;
use crate::log::ReadPosition;
use crate::log::lines::{Lines, RawLine};

impl<R: BufRead> LogReader<R> {
    /// Where the reader is now: after the last line it read.
    pub fn read_position(&self) -> ReadPosition {
        ReadPosition {
            offset: self.lines.offset(),
            line: self.lines.number(),
            last_time: self.last_time,
            last_offset: self.last_offset,
            times_went_back: self.went_back,
            times_repeated: self.repeated,
            ambiguous_times: 0,
            time_offset_changes: self.offset_changes,
        }
    }

    /// A reader of the same log that reads `input` (the log's bytes from
    /// `at.offset` on) as this reader would have gone on from `at`.
    pub fn resumed<S: BufRead>(&self, input: S, at: &ReadPosition) -> LogReader<S> {
        LogReader {
            lines: Lines::resume(input, at.line, at.offset),
            name: self.name.clone(),
            meta: self.meta.clone(),
            columns: self.columns.clone(),
            warnings: self.warnings.clone(),
            last_time: at.last_time,
            went_back: at.times_went_back,
            repeated: at.times_repeated,
            last_offset: at.last_offset,
            offset_changes: at.time_offset_changes,
            header_line: self.header_line,
            spans: Vec::new(),
            raw: RawLine::empty(),
            days: Default::default(),
            readings: Vec::new(),
            #[cfg(test)]
            general_only: self.general_only,
            #[cfg(test)]
            plain_rows: 0,
            #[cfg(test)]
            in_place_rows: 0,
        }
    }
}

#[cfg(test)]
mod tests {
    use std::io::{BufRead, BufReader, Cursor};

    use crate::log::{LogReader, LogSource, ReadPosition};

    const LOG: &str = "# rarefy log v1\n# gas: N2\ntime,a [mbar],gas\n\
        2026-01-01T00:00:00.000Z,1,N2\n\
        2026-01-01T00:00:01.000+01:00,2,\n\
        \n\
        2026-01-01T00:00:01.000Z,x,Ar\n\
        2026-01-01T00:00:01.000Z,3\n\
        2026-01-01T00:00:00.500Z,4,Ar\n\
        2026-01-01T00:00:02.000Z,over-range,N2\n\
        2026-01-01T00:00:03.000Z,6,N2";

    /// Every item as text, and the counts at the end.
    fn read_all(mut r: Box<dyn LogSource>) -> (Vec<String>, ReadPosition) {
        let items = r.by_ref().map(|i| format!("{i:?}")).collect();
        (items, r.read_position())
    }

    /// A reader resumed after every row gives the same rest as the reader
    /// that read the whole log, with the same line numbers and counts.
    #[test]
    fn resuming_after_any_row_reads_the_same_rest() {
        let whole: Box<dyn LogSource> =
            Box::new(LogReader::new(LOG.as_bytes(), "run.csv").expect("log"));
        let (items, end) = read_all(whole);
        assert_eq!(items.len(), 7, "{items:#?}");
        assert_eq!(end.offset, LOG.len() as u64);
        for k in 0..=items.len() {
            let mut r = LogReader::new(LOG.as_bytes(), "run.csv").expect("log");
            let head: Vec<String> = r.by_ref().take(k).map(|i| format!("{i:?}")).collect();
            let at = r.read_position();
            let rest = Cursor::new(LOG.as_bytes()[at.offset as usize..].to_vec());
            let input: Box<dyn BufRead + Send> = Box::new(BufReader::with_capacity(7, rest));
            let (tail, tail_end) = read_all(r.resume(input, &at));
            let mut again = head;
            again.extend(tail);
            assert_eq!(again, items, "resumed after {k} rows");
            assert_eq!(tail_end, end, "resumed after {k} rows");
        }
    }
}
