//! From raw bytes to samples: line framing ([`LineSplitter`]), escapes for
//! poll strings, and the decoders that turn one line into events — regular
//! expression [`template`]s for ASCII controllers and the built-in
//! [`plain`] `name=value unit` format for pipes. Pure: no I/O.

pub mod logline;
pub mod plain;
pub mod template;

use chrono::{DateTime, Utc};

use crate::sample::{ChannelInfo, ChannelUnit, Sample, SourceEvent};
use template::{Template, TemplateDecoder, TemplateSpec};

/// Longest line kept; a longer one is reported (never silently cut) and the
/// rest of it discarded up to the next line end.
pub const MAX_LINE: usize = 16 * 1024;

/// One framed line, or the report of an over-long one.
#[derive(Debug, Clone, PartialEq)]
pub enum Framed {
    /// A complete line without its ending.
    Line(Vec<u8>),
    /// A line longer than [`MAX_LINE`]: its first bytes and total length.
    TooLong {
        /// The first [`MAX_LINE`] bytes.
        head: Vec<u8>,
        /// Its full length in bytes.
        len: usize,
    },
}

/// Splits a byte stream into lines ended by LF, CR or CRLF — also when the CR
/// and LF arrive in different reads — holding back a partial last line.
#[derive(Debug, Default, Clone)]
pub struct LineSplitter {
    buf: Vec<u8>,
    overflow: usize,
    last_cr: bool,
}

impl LineSplitter {
    /// A splitter with nothing buffered.
    pub fn new() -> Self {
        Self::default()
    }

    /// Feeds bytes; returns the lines they complete. Empty lines are skipped.
    pub fn push(&mut self, bytes: &[u8]) -> Vec<Framed> {
        let mut out = Vec::new();
        for &b in bytes {
            let was_cr = std::mem::replace(&mut self.last_cr, b == b'\r');
            match b {
                b'\n' if was_cr => {}
                b'\n' | b'\r' => self.end_line(&mut out),
                _ if self.buf.len() < MAX_LINE => self.buf.push(b),
                _ => self.overflow += 1,
            }
        }
        out
    }

    fn end_line(&mut self, out: &mut Vec<Framed>) {
        if self.overflow > 0 {
            let head = std::mem::take(&mut self.buf);
            out.push(Framed::TooLong {
                len: head.len() + self.overflow,
                head,
            });
            self.overflow = 0;
        } else if !self.buf.is_empty() {
            out.push(Framed::Line(std::mem::take(&mut self.buf)));
        }
    }

    /// Bytes of an unfinished line held back.
    pub fn pending(&self) -> usize {
        self.buf.len() + self.overflow
    }

    /// At end of stream: the unfinished last line, if any.
    pub fn finish(&mut self) -> Option<Framed> {
        let mut out = Vec::new();
        self.end_line(&mut out);
        self.last_cr = false;
        out.pop()
    }

    /// Forgets any partial line (after a reconnect the rest of it is gone).
    pub fn reset(&mut self) -> Option<Framed> {
        let partial = self.finish();
        self.buf.clear();
        self.overflow = 0;
        partial
    }
}

/// Turns one line into events: samples, or an `unparsed` event.
pub trait Decoder: Send {
    /// Decodes one complete line received at `received`.
    fn decode(&mut self, line: &[u8], received: DateTime<Utc>, source: &str) -> Vec<SourceEvent>;
    /// The channels this decoder can produce, as far as known in advance.
    fn channels(&self) -> Vec<ChannelInfo>;
}

/// How a source's lines are read: plain settings, as a config resolves them.
#[derive(Debug, Clone)]
pub enum DecoderSettings {
    /// The built-in plain format (switching to log v1 when a log arrives).
    Plain {
        /// Channel of bare numbers.
        channel: String,
        /// Unit of numbers written without one.
        unit: ChannelUnit,
    },
    /// Line templates, tried in order.
    Templates(Vec<TemplateSpec>),
}

/// Builds the decoder the settings describe; `Err` names the first template
/// that does not compile and why.
pub fn decoder(settings: &DecoderSettings) -> Result<Box<dyn Decoder>, String> {
    match settings {
        DecoderSettings::Plain { channel, unit } => Ok(Box::new(logline::AutoDecoder::new(
            plain::PlainDecoder::new(channel.clone(), *unit),
        ))),
        DecoderSettings::Templates(specs) => {
            let templates = specs
                .iter()
                .enumerate()
                .map(|(i, spec)| {
                    Template::new(spec).map_err(|e| format!("template {}: {e}", i + 1))
                })
                .collect::<Result<Vec<_>, _>>()?;
            Ok(Box::new(TemplateDecoder::new(templates)))
        }
    }
}

/// Says when a live channel's pressure is not above zero (a gauge's zero
/// drift can read a little below it): the reading is kept as read, but no
/// true pressure or kinetics follow from it. Said once for each stretch of
/// such readings of a channel, not at every reading; said again after a
/// reading of that channel above zero.
#[derive(Debug, Clone, Default)]
pub struct ZeroNotes {
    /// The channels whose last pressure reading was not above zero (and
    /// has been said).
    said: Vec<String>,
}

impl ZeroNotes {
    /// Adds to `out` the notes `samples` call for (none, nearly always).
    pub fn check(&mut self, samples: &[Sample], source: &str, out: &mut Vec<SourceEvent>) {
        for s in samples {
            if !s.unit.is_pressure() {
                continue;
            }
            let Some(v) = s.value() else {
                continue;
            };
            let at = self.said.iter().position(|c| *c == s.channel);
            match (v > 0.0, at) {
                (true, Some(i)) => {
                    self.said.swap_remove(i);
                }
                (false, None) => {
                    self.said.push(s.channel.clone());
                    let mut value = String::new();
                    if v == 0.0 {
                        value.push('0');
                    } else {
                        crate::numfmt::push_exp(&mut value, v);
                    }
                    out.push(SourceEvent::Error {
                        source: source.to_string(),
                        message: format!(
                            "{}: pressure {value} {} at {} is not above zero: kept as read, without a \
                             true pressure or kinetics (a gauge's zero drift?); said again only \
                             after a reading above zero",
                            s.channel,
                            s.unit,
                            crate::timefmt::write_rfc3339(s.time)
                        ),
                    });
                }
                _ => {}
            }
        }
    }
}

/// Runs a framed line through a decoder, reporting over-long lines.
pub fn decode_framed(
    decoder: &mut dyn Decoder,
    framed: Framed,
    received: DateTime<Utc>,
    source: &str,
) -> Vec<SourceEvent> {
    match framed {
        Framed::Line(line) => decoder.decode(&line, received, source),
        Framed::TooLong { head, len } => vec![SourceEvent::Unparsed {
            source: source.to_string(),
            time: received,
            text: format!(
                "line of {len} bytes is longer than {MAX_LINE}; it starts: {}",
                crate::sample::escape_bytes(&head[..head.len().min(80)])
            ),
        }],
    }
}

/// Text made safe to print on a terminal: line ends and tabs are kept; other
/// control characters become `\xNN`, and C1 controls, bidirectional
/// overrides and invisible characters `\u{NNNN}`. For messages and tables
/// that echo arguments, configuration text, device text or channel names.
pub fn terminal_text(text: &str) -> String {
    escape_chars(text, |c, out| {
        if (c as u32) < 0x80 {
            out.push_str(&format!("\\x{:02x}", c as u32));
        } else {
            out.push_str(&format!("\\u{{{:x}}}", c as u32));
        }
    })
}

/// JSON text made safe to print on a terminal: serde_json escapes C0
/// controls already; DEL, C1 controls, bidirectional overrides and invisible
/// characters (which can only stand inside strings) become `\uNNNN`, so the
/// text stays the same JSON.
pub fn terminal_json(json: &str) -> String {
    escape_chars(json, |c, out| {
        let mut units = [0u16; 2];
        for u in c.encode_utf16(&mut units) {
            out.push_str(&format!("\\u{u:04x}"));
        }
    })
}

/// Whether a character can change what a terminal shows beyond itself.
fn is_unsafe(c: char) -> bool {
    matches!(c as u32, 0..=0x08 | 0x0b..=0x1f | 0x7f..=0x9f | 0x200b..=0x200f | 0x202a..=0x202e | 0x2066..=0x2069 | 0xfeff)
}

fn escape_chars(text: &str, mut escape: impl FnMut(char, &mut String)) -> String {
    if !text.chars().any(is_unsafe) {
        return text.to_string();
    }
    let mut out = String::with_capacity(text.len() + 16);
    for c in text.chars() {
        if is_unsafe(c) {
            escape(c, &mut out);
        } else {
            out.push(c);
        }
    }
    out
}

/// Interprets the escapes of a poll string: `\r`, `\n`, `\t`, `\\`, `\0`,
/// `\xNN`. Anything else after a backslash is an error naming its position.
pub fn unescape(text: &str) -> Result<Vec<u8>, String> {
    let mut out = Vec::with_capacity(text.len());
    let bytes = text.as_bytes();
    let mut i = 0;
    while i < bytes.len() {
        let b = bytes[i];
        if b != b'\\' {
            out.push(b);
            i += 1;
            continue;
        }
        let bad = |i: usize| {
            format!(
                "bad escape at character {} of \"{text}\"; expected \\r, \\n, \\t, \\\\, \\0 or \\xNN",
                i + 1
            )
        };
        match bytes.get(i + 1) {
            Some(b'r') => out.push(b'\r'),
            Some(b'n') => out.push(b'\n'),
            Some(b't') => out.push(b'\t'),
            Some(b'0') => out.push(0),
            Some(b'\\') => out.push(b'\\'),
            Some(b'x') => {
                let hex = text.get(i + 2..i + 4).ok_or_else(|| bad(i))?;
                out.push(u8::from_str_radix(hex, 16).map_err(|_| bad(i))?);
                i += 2;
            }
            _ => return Err(bad(i)),
        }
        i += 2;
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lines(chunks: &[&[u8]]) -> Vec<Vec<u8>> {
        let mut s = LineSplitter::new();
        let mut out = Vec::new();
        for c in chunks {
            for f in s.push(c) {
                if let Framed::Line(l) = f {
                    out.push(l);
                }
            }
        }
        out
    }

    #[test]
    fn all_line_endings_and_split_writes() {
        assert_eq!(
            lines(&[b"a\nb\rc\r\nd"]),
            vec![b"a".to_vec(), b"b".to_vec(), b"c".to_vec()]
        );
        // CR and LF in different reads make one line end, not two.
        assert_eq!(
            lines(&[b"a\r", b"\nb\r", b"\n"]),
            vec![b"a".to_vec(), b"b".to_vec()]
        );
        // A line split across many writes.
        assert_eq!(
            lines(&[b"1.2", b"e-6", b" mbar", b"\r\n"]),
            vec![b"1.2e-6 mbar".to_vec()]
        );
        // Blank lines are skipped.
        assert_eq!(lines(&[b"\n\n\r\nx\n"]), vec![b"x".to_vec()]);
    }

    #[test]
    fn partial_last_line_is_held_then_finished() {
        let mut s = LineSplitter::new();
        assert!(s.push(b"12").is_empty());
        assert_eq!(s.pending(), 2);
        assert_eq!(s.finish(), Some(Framed::Line(b"12".to_vec())));
        assert_eq!(s.finish(), None);
    }

    #[test]
    fn over_long_lines_are_reported_with_their_length() {
        let mut s = LineSplitter::new();
        let long = vec![b'x'; MAX_LINE + 10];
        assert!(s.push(&long).is_empty());
        let out = s.push(b"\nnext\n");
        assert_eq!(out.len(), 2);
        assert!(matches!(&out[0], Framed::TooLong { len, .. } if *len == MAX_LINE + 10));
        assert_eq!(out[1], Framed::Line(b"next".to_vec()));
    }

    #[test]
    fn decoders_are_built_from_plain_settings() {
        let mbar = ChannelUnit::Pressure(crate::units::PressureUnit::Mbar);
        let t = DateTime::<Utc>::UNIX_EPOCH;
        let mut plain = decoder(&DecoderSettings::Plain {
            channel: "p".into(),
            unit: mbar,
        })
        .unwrap_or_else(|e| panic!("{e}"));
        assert!(matches!(
            plain.decode(b"1.5e-6", t, "pipe").as_slice(),
            [SourceEvent::Samples(s)] if s[0].channel == "p" && s[0].value() == Some(1.5e-6)
        ));
        let spec = |pattern: &str| TemplateSpec {
            pattern: pattern.into(),
            unit: Some(mbar),
            ..TemplateSpec::default()
        };
        let mut templates = decoder(&DecoderSettings::Templates(vec![spec(r"^P=(?P<g>\S+)$")]))
            .unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(templates.channels(), vec![ChannelInfo::new("g", mbar)]);
        assert!(matches!(
            templates.decode(b"P=2e-3", t, "serial").as_slice(),
            [SourceEvent::Samples(s)] if s[0].value() == Some(2e-3)
        ));
        let e = decoder(&DecoderSettings::Templates(vec![
            spec(r"^(?P<a>\S+)$"),
            spec(r"^(?P<b>\S+"),
        ]))
        .err()
        .unwrap_or_default();
        assert!(e.starts_with("template 2: bad pattern"), "{e}");
    }

    #[test]
    fn text_for_a_terminal_keeps_lines_and_escapes_controls() {
        assert_eq!(terminal_text("a\tb\nc"), "a\tb\nc");
        assert_eq!(
            terminal_text("x\u{1b}[2J\r\u{7f}\u{9b}1m\u{202e}"),
            "x\\x1b[2J\\x0d\\x7f\\u{9b}1m\\u{202e}"
        );
        let json = "{\"a\":\"\\u001b\u{9b}\u{202e}\"}";
        let safe = terminal_json(json);
        assert_eq!(safe, "{\"a\":\"\\u001b\\u009b\\u202e\"}");
        let back: Vec<char> = safe.chars().filter(|c| is_unsafe(*c)).collect();
        assert!(back.is_empty());
    }

    #[test]
    fn poll_string_escapes() {
        assert_eq!(unescape(":VX GET\\r\\n"), Ok(b":VX GET\r\n".to_vec()));
        assert_eq!(unescape("\\x05\\\\"), Ok(vec![5, b'\\']));
        assert!(unescape("bad\\q").is_err());
        assert!(unescape("\\x5").is_err());
        assert!(unescape("\\xzz").is_err());
    }
}
