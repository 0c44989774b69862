//! Line and cell splitting shared by the log readers: bounded, streaming
//! line reads and a small CSV cell splitter that reports where it failed.

use std::io::{self, BufRead};

/// Longest line the readers accept; a longer one is reported and skipped, so
/// a file without line breaks cannot exhaust memory.
pub const MAX_LINE_BYTES: usize = 1 << 20;

/// One physical line as read.
pub(crate) struct RawLine {
    /// 1-based line number.
    pub number: u64,
    /// The bytes without the line break (`\n` or `\r\n`), capped at
    /// [`MAX_LINE_BYTES`].
    pub bytes: Vec<u8>,
    /// Whether the line was longer than the cap (the rest was skipped).
    pub too_long: bool,
}

impl RawLine {
    /// No line yet (a buffer to read into).
    pub fn empty() -> Self {
        RawLine {
            number: 0,
            bytes: Vec::new(),
            too_long: false,
        }
    }
}

/// Reads physical lines one at a time from a `BufRead`, never holding more
/// than one line.
pub(crate) struct Lines<R> {
    inner: R,
    number: u64,
    done: bool,
    /// Bytes taken from `inner` so far (with the starting offset of a
    /// resumed reading): where the next line starts in the file.
    offset: u64,
    /// A read error met by [`Lines::buffered`], for the next read to give.
    pending: Option<io::Error>,
}

impl<R: BufRead> Lines<R> {
    pub fn new(inner: R) -> Self {
        Lines::resume(inner, 0, 0)
    }

    /// Lines of `inner`, which starts `offset` bytes into the file, after
    /// line `number` (its lines are numbered from `number + 1`).
    pub fn resume(inner: R, number: u64, offset: u64) -> Self {
        Lines {
            inner,
            number,
            done: false,
            offset,
            pending: None,
        }
    }

    /// The number of the last line read (0 before any).
    pub fn number(&self) -> u64 {
        self.number
    }

    /// Where the next line starts, in bytes from the start of the file.
    pub fn offset(&self) -> u64 {
        self.offset
    }

    /// The next line; `None` at the end; an I/O error ends the reading.
    pub fn next_line(&mut self) -> Option<io::Result<RawLine>> {
        let mut line = RawLine {
            number: 0,
            bytes: Vec::new(),
            too_long: false,
        };
        match self.next_line_into(&mut line)? {
            Ok(()) => Some(Ok(line)),
            Err(e) => Some(Err(e)),
        }
    }

    /// [`Lines::next_located`] into `line`, reusing its allocation.
    pub fn next_located_into(
        &mut self,
        name: &str,
        line: &mut RawLine,
    ) -> Option<Result<(), super::LogError>> {
        Some(self.next_line_into(line)?.map_err(|e| {
            super::LogError::at(
                name,
                self.number + 1,
                None,
                format!("cannot read the log: {e}"),
            )
        }))
    }

    /// What the reader holds from where the next line starts (at least a
    /// byte), for a caller to read a line in place: nothing is taken until
    /// [`Lines::take_line`]. `None` at the end or on a read error (kept
    /// for [`Lines::next_line_into`] to give): that reads on as it would
    /// have.
    #[inline]
    pub fn buffered(&mut self) -> Option<&[u8]> {
        if self.done || self.pending.is_some() {
            return None;
        }
        let avail = match self.inner.fill_buf() {
            Ok(b) => b,
            Err(e) => {
                // An interrupted read is tried again by the next read.
                if e.kind() != io::ErrorKind::Interrupted {
                    self.pending = Some(e);
                }
                return None;
            }
        };
        if avail.is_empty() {
            self.done = true;
            return None;
        }
        Some(avail)
    }

    /// Takes a line read in place from [`Lines::buffered`]: `len` bytes,
    /// its line break (`\n`) the last of them, and no longer than
    /// [`MAX_LINE_BYTES`] without it; gives its number.
    #[inline]
    pub fn take_line(&mut self, len: usize) -> u64 {
        self.inner.consume(len);
        self.offset += len as u64;
        self.number += 1;
        self.number
    }

    /// [`Lines::next_line`] into `line`, reusing its allocation.
    pub fn next_line_into(&mut self, line: &mut RawLine) -> Option<io::Result<()>> {
        if self.done {
            return None;
        }
        let bytes = &mut line.bytes;
        bytes.clear();
        if let Some(e) = self.pending.take() {
            self.done = true;
            return Some(Err(e));
        }
        let mut too_long = false;
        let mut any = false;
        loop {
            let avail = match self.inner.fill_buf() {
                Ok(b) => b,
                Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
                Err(e) => {
                    self.done = true;
                    return Some(Err(e));
                }
            };
            if avail.is_empty() {
                self.done = true;
                if !any {
                    return None;
                }
                break;
            }
            any = true;
            let (chunk, used, end) = match memchr::memchr(b'\n', avail) {
                Some(i) => (&avail[..i], i + 1, true),
                None => (avail, avail.len(), false),
            };
            let room = MAX_LINE_BYTES.saturating_sub(bytes.len());
            if chunk.len() > room {
                too_long = true;
            }
            bytes.extend_from_slice(&chunk[..chunk.len().min(room)]);
            self.inner.consume(used);
            self.offset += used as u64;
            if end {
                break;
            }
        }
        if bytes.last() == Some(&b'\r') {
            bytes.pop();
        }
        self.number += 1;
        line.number = self.number;
        line.too_long = too_long;
        Some(Ok(()))
    }
}

/// Text encodings a log may be written in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Encoding {
    /// UTF-8 (a leading byte-order mark is ignored).
    #[default]
    Utf8,
    /// ISO 8859-1: every byte is the character of the same code.
    Latin1,
}

/// Decodes a line; on invalid UTF-8 gives the character column of the first
/// bad byte and the valid text before it.
pub(crate) fn decode(
    bytes: &[u8],
    encoding: Encoding,
    first: bool,
) -> Result<std::borrow::Cow<'_, str>, (String, u8)> {
    match encoding {
        Encoding::Latin1 => Ok(bytes.iter().map(|&b| char::from(b)).collect()),
        Encoding::Utf8 => {
            let bytes = if first {
                bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes)
            } else {
                bytes
            };
            match std::str::from_utf8(bytes) {
                Ok(s) => Ok(std::borrow::Cow::Borrowed(s)),
                Err(e) => {
                    let good = &bytes[..e.valid_up_to()];
                    let prefix = String::from_utf8_lossy(good).into_owned();
                    Err((prefix, bytes[e.valid_up_to()]))
                }
            }
        }
    }
}

/// A cell after splitting: its text (quotes removed, unquoted cells trimmed).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Field {
    pub text: String,
}

/// A splitting problem: 1-based field number and message.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct SplitError {
    pub field: usize,
    pub message: String,
}

/// Splits one line into cells. A cell may be quoted with `"` (a quote inside
/// is doubled); a quoted cell must end on the same line and be followed by the
/// delimiter or the end of the line.
pub(crate) fn split(line: &str, delim: char) -> Result<Vec<Field>, SplitError> {
    let mut fields = Vec::new();
    split_into(line, delim, &mut fields).map(|()| fields)
}

/// [`split`] into `fields`, whose strings are reused (a reader cuts every
/// row into the last row's buffers). On an error `fields` holds the cells
/// before the bad one.
pub(crate) fn split_into(
    line: &str,
    delim: char,
    fields: &mut Vec<Field>,
) -> Result<(), SplitError> {
    let mut n = 0;
    let mut rest = line;
    let result = loop {
        // Leading blanks (not the delimiter itself, which may be a tab or space).
        rest = rest.trim_start_matches(|c: char| c != delim && (c == ' ' || c == '\t'));
        if n == fields.len() {
            fields.push(Field {
                text: String::new(),
            });
        }
        let text = &mut fields[n].text;
        text.clear();
        n += 1;
        if let Some(quoted) = rest.strip_prefix('"') {
            let mut r = quoted;
            // The cell's text, a doubled quote as one.
            let closed = loop {
                match r.find('"') {
                    None => break false,
                    Some(i) => {
                        text.push_str(&r[..i]);
                        r = &r[i + 1..];
                        match r.strip_prefix('"') {
                            Some(after) => {
                                text.push('"');
                                r = after;
                            }
                            None => break true,
                        }
                    }
                }
            };
            if !closed {
                break Err(SplitError {
                    field: n,
                    message: "quoted cell is not closed on this line (a closing \" is missing)"
                        .into(),
                });
            }
            // Only blanks may follow the closing quote.
            let mut chars = r.char_indices();
            let next = loop {
                match chars.next() {
                    None => break Ok(None),
                    Some((i, c)) if c == delim => break Ok(Some(i + c.len_utf8())),
                    Some((_, ' ' | '\t')) => {}
                    Some((_, c)) => {
                        break Err(SplitError {
                            field: n,
                            message: format!(
                                "text after the closing quote of a quoted cell ({c:?}); \
                                 double a quote inside a quoted cell (\"\")"
                            ),
                        });
                    }
                }
            };
            match next {
                Ok(None) => break Ok(()),
                Ok(Some(i)) => rest = &r[i..],
                Err(e) => break Err(e),
            }
        } else {
            match rest.find(delim) {
                Some(i) => {
                    text.push_str(rest[..i].trim_matches([' ', '\t']));
                    rest = &rest[i + delim.len_utf8()..];
                }
                None => {
                    text.push_str(rest.trim_matches([' ', '\t']));
                    break Ok(());
                }
            }
        }
    };
    fields.truncate(n);
    result
}

/// The 1-based field in which the text `prefix` (the start of a line) ends,
/// for locating an invalid byte.
pub(crate) fn field_of(prefix: &str, delim: char) -> usize {
    let mut quoted = false;
    let mut field = 1;
    for c in prefix.chars() {
        if c == '"' {
            quoted = !quoted;
        } else if c == delim && !quoted {
            field += 1;
        }
    }
    field
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The splitting as first written (a char at a time, a new string per
    /// cell): what [`split_into`] is tested against.
    fn split_reference(line: &str, delim: char) -> Result<Vec<Field>, SplitError> {
        let mut fields = Vec::new();
        let mut chars = line.chars().peekable();
        loop {
            let number = fields.len() + 1;
            // Leading blanks (not the delimiter itself, which may be a tab or space).
            while let Some(&c) = chars.peek() {
                if c != delim && (c == ' ' || c == '\t') {
                    chars.next();
                } else {
                    break;
                }
            }
            let mut text = String::new();
            if chars.peek() == Some(&'"') {
                chars.next();
                loop {
                    match chars.next() {
                        None => {
                            return Err(SplitError {
                                field: number,
                                message:
                                    "quoted cell is not closed on this line (a closing \" is missing)"
                                        .into(),
                            });
                        }
                        Some('"') if chars.peek() == Some(&'"') => {
                            chars.next();
                            text.push('"');
                        }
                        Some('"') => break,
                        Some(c) => text.push(c),
                    }
                }
                // Only blanks may follow the closing quote.
                loop {
                    match chars.next() {
                        None => {
                            fields.push(Field { text });
                            return Ok(fields);
                        }
                        Some(c) if c == delim => break,
                        Some(' ' | '\t') => {}
                        Some(c) => {
                            return Err(SplitError {
                                field: number,
                                message: format!(
                                    "text after the closing quote of a quoted cell ({c:?}); \
                                     double a quote inside a quoted cell (\"\")"
                                ),
                            });
                        }
                    }
                }
                fields.push(Field { text });
            } else {
                let mut ended = true;
                for c in chars.by_ref() {
                    if c == delim {
                        ended = false;
                        break;
                    }
                    text.push(c);
                }
                let trimmed = text.trim_matches([' ', '\t']).to_string();
                fields.push(Field { text: trimmed });
                if ended {
                    return Ok(fields);
                }
            }
        }
    }

    fn texts(line: &str, d: char) -> Vec<String> {
        split(line, d)
            .unwrap_or_else(|e| panic!("{e:?}"))
            .into_iter()
            .map(|f| f.text)
            .collect()
    }

    proptest::proptest! {
        /// Splitting into reused cells gives what the first splitter gave,
        /// cells and errors alike, line after line (some longer, some
        /// shorter than the one before).
        #[test]
        fn split_into_reused_cells_is_the_reference(
            lines in proptest::collection::vec("[a;, \t\"é1]{0,24}", 1..12),
            delim in proptest::sample::select(vec![',', ';', '\t', ' ', 'é']),
        ) {
            let mut fields = Vec::new();
            for line in &lines {
                let got = split_into(line, delim, &mut fields).map(|()| fields.clone());
                proptest::prop_assert_eq!(got, split_reference(line, delim), "{:?}", line);
            }
        }
    }

    #[test]
    fn splits_quoted_and_plain_cells() {
        assert_eq!(texts("a,b,,c", ','), ["a", "b", "", "c"]);
        assert_eq!(
            texts("\"a,b\",\"say \"\"hi\"\"\"", ','),
            ["a,b", "say \"hi\""]
        );
        assert_eq!(texts(" 1 ; 2 ", ';'), ["1", "2"]);
        assert_eq!(texts("1\t\t2", '\t'), ["1", "", "2"]);
        assert_eq!(texts("", ','), [""]);
        assert_eq!(texts("a,", ','), ["a", ""]);
        let e = split("a,\"b", ',').expect_err("open quote");
        assert_eq!(e.field, 2);
        let e = split("\"b\"x,c", ',').expect_err("after quote");
        assert_eq!(e.field, 1);
    }

    #[test]
    fn reads_lines_with_any_ending() {
        let mut l = Lines::new(&b"a\r\nb\n\nc"[..]);
        let mut got = Vec::new();
        while let Some(Ok(line)) = l.next_line() {
            got.push((line.number, line.bytes));
        }
        assert_eq!(
            got,
            [
                (1, b"a".to_vec()),
                (2, b"b".to_vec()),
                (3, b"".to_vec()),
                (4, b"c".to_vec())
            ]
        );
    }

    #[test]
    fn caps_long_lines() {
        let mut data = vec![b'x'; MAX_LINE_BYTES + 10];
        data.extend_from_slice(b"\nnext\n");
        let mut l = Lines::new(std::io::BufReader::with_capacity(1000, &data[..]));
        let first = l.next_line().and_then(Result::ok).expect("line");
        assert!(first.too_long);
        assert_eq!(first.bytes.len(), MAX_LINE_BYTES);
        let second = l.next_line().and_then(Result::ok).expect("line");
        assert_eq!((second.number, second.bytes), (2, b"next".to_vec()));
        assert!(l.next_line().is_none());
    }

    #[test]
    fn decodes_and_locates_bad_utf8() {
        assert_eq!(
            decode(b"\xEF\xBB\xBFa", Encoding::Utf8, true),
            Ok("a".into())
        );
        assert_eq!(
            decode(b"ab\xffc", Encoding::Utf8, false),
            Err(("ab".into(), 0xff))
        );
        assert_eq!(decode(b"\xb0C", Encoding::Latin1, false), Ok("°C".into()));
        assert_eq!(field_of("a,\"b,c\",d", ','), 3);
    }
}
