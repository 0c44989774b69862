//! The built-in plain line format, for pipes and quick tests without a
//! config:
//!
//! ```text
//! 1.2e-6                                   # default channel, default unit
//! 3.4e-6 Torr                              # default channel, this unit
//! chamber=1.2e-6 mbar, wall=22 C           # named channels
//! 2026-12-01T10:00:00.250Z chamber=5e-7    # a leading RFC 3339 device time
//! chamber=over-range                       # a status word instead of a value
//! ```
//!
//! Pairs are separated by `,` or `;`. A unit may be any pressure or
//! temperature unit; a channel keeps the unit it first appeared with.

use chrono::{DateTime, Utc};

use super::Decoder;
use crate::sample::{ChannelInfo, ChannelUnit, Sample, SourceEvent, Status, escape_bytes};

/// Decoder for the plain format.
#[derive(Debug, Clone)]
pub struct PlainDecoder {
    default_channel: String,
    default_unit: ChannelUnit,
    seen: Vec<ChannelInfo>,
    zero: super::ZeroNotes,
}

impl PlainDecoder {
    /// A decoder whose bare numbers go to `default_channel` in `default_unit`.
    pub fn new(default_channel: impl Into<String>, default_unit: ChannelUnit) -> Self {
        PlainDecoder {
            default_channel: default_channel.into(),
            default_unit,
            seen: Vec::new(),
            zero: super::ZeroNotes::default(),
        }
    }

    fn unit_of(
        &mut self,
        channel: &str,
        given: Option<ChannelUnit>,
    ) -> Result<ChannelUnit, String> {
        if let Some(known) = self.seen.iter().find(|c| c.id == channel) {
            return match given {
                Some(u) if u != known.unit => Err(format!(
                    "channel `{channel}` was {} before, now {u}",
                    known.unit
                )),
                _ => Ok(known.unit),
            };
        }
        let unit = given.unwrap_or(self.default_unit);
        self.seen.push(ChannelInfo::new(channel, unit));
        Ok(unit)
    }

    fn parse_line(&mut self, text: &str, received: DateTime<Utc>) -> Result<Vec<Sample>, String> {
        let mut rest = text.trim();
        if rest.is_empty() {
            return Err("a line of blanks only".into());
        }
        let mut time = received;
        if let Some((first, tail)) = rest.split_once(char::is_whitespace)
            && first.len() >= 20
            && let Ok(t) = DateTime::parse_from_rfc3339(first)
        {
            time = t.with_timezone(&Utc);
            rest = tail.trim();
        }
        if rest.is_empty() {
            return Err("no reading after the timestamp".into());
        }
        let mut out = Vec::new();
        for item in rest.split([',', ';']) {
            let item = item.trim();
            if item.is_empty() {
                continue;
            }
            let (channel, value) = match item.split_once('=') {
                Some((c, v)) => {
                    let c = c.trim();
                    if c.is_empty()
                        || !c
                            .chars()
                            .all(|ch| ch.is_ascii_alphanumeric() || "_-.".contains(ch))
                    {
                        return Err(format!("`{c}` is not a channel name"));
                    }
                    (c.to_string(), v.trim())
                }
                None => (self.default_channel.clone(), item),
            };
            if out.iter().any(|s: &Sample| s.channel == channel) {
                return Err(format!("channel `{channel}` appears twice"));
            }
            let mut words = value.split_whitespace();
            let number = words.next().unwrap_or_default();
            let unit = match words.next() {
                Some(u) => Some(ChannelUnit::parse(u).ok_or_else(|| {
                    format!("unknown unit \"{u}\" for `{channel}`; expected a pressure or temperature unit")
                })?),
                None => None,
            };
            if let Some(extra) = words.next() {
                return Err(format!(
                    "unexpected \"{extra}\" after the value of `{channel}`"
                ));
            }
            let unit = self.unit_of(&channel, unit)?;
            if let Ok(status) = number.parse::<Status>() {
                let Some(fault) = status.fault() else {
                    return Err(format!("`{channel}`: \"ok\" is not a value"));
                };
                out.push(Sample::bad(time, channel, unit, fault));
                continue;
            }
            match number.parse::<f64>() {
                Ok(v) if v.is_finite() => out.push(Sample::ok(time, channel, v, unit)),
                _ => {
                    return Err(format!(
                        "\"{number}\" for `{channel}` is neither a number nor a status word"
                    ));
                }
            }
        }
        if out.is_empty() {
            return Err("no reading: only delimiters".into());
        }
        Ok(out)
    }
}

impl Decoder for PlainDecoder {
    fn decode(&mut self, line: &[u8], received: DateTime<Utc>, source: &str) -> Vec<SourceEvent> {
        let parsed = std::str::from_utf8(line)
            .map_err(|e| format!("invalid UTF-8 at byte {}", e.valid_up_to()))
            .and_then(|text| self.parse_line(text, received));
        match parsed {
            Ok(samples) => {
                let mut out = Vec::with_capacity(1);
                self.zero.check(&samples, source, &mut out);
                out.insert(0, SourceEvent::Samples(samples));
                out
            }
            Err(why) => vec![SourceEvent::Unparsed {
                source: source.to_string(),
                time: received,
                // The reason quotes the line's text: escape it too.
                text: format!("{}  ({})", escape_bytes(line), escape_bytes(why.as_bytes())),
            }],
        }
    }

    fn channels(&self) -> Vec<ChannelInfo> {
        self.seen.clone()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::{PressureUnit, TemperatureUnit};

    fn dec() -> PlainDecoder {
        PlainDecoder::new("p", ChannelUnit::Pressure(PressureUnit::Mbar))
    }

    fn one(d: &mut PlainDecoder, line: &str) -> Result<Vec<Sample>, String> {
        let events = d.decode(line.as_bytes(), DateTime::<Utc>::UNIX_EPOCH, "stdin:");
        let mut out = Vec::new();
        for e in events {
            match e {
                SourceEvent::Samples(s) => out.extend(s),
                SourceEvent::Unparsed { text, .. } => return Err(text),
                other => panic!("{other:?}"),
            }
        }
        Ok(out)
    }

    #[test]
    fn lines_of_only_delimiters_or_blanks_are_unparsed_not_skipped() {
        let mut d = dec();
        for line in [",,,", " ; , ", " \t ", "2026-12-01T10:00:00Z ,"] {
            let e = one(&mut d, line).expect_err(line);
            assert!(e.contains("only"), "{line:?}: {e}");
        }
    }

    /// A pressure not above zero is kept as read, with a note once until a
    /// reading above zero; a temperature below zero is no news.
    #[test]
    fn a_pressure_not_above_zero_is_said_once_a_stretch() {
        let mut d = dec();
        let mut said = Vec::new();
        for line in ["-2e-8", "-1e-8", "wall=-5 C", "3e-6", "0", "0"] {
            let events = d.decode(line.as_bytes(), DateTime::<Utc>::UNIX_EPOCH, "stdin:");
            assert!(matches!(events[0], SourceEvent::Samples(_)), "{line}");
            said.extend(events[1..].iter().map(|e| match e {
                SourceEvent::Error { message, .. } => (line, message.clone()),
                other => panic!("{other:?}"),
            }));
        }
        assert_eq!(said.len(), 2, "{said:?}");
        assert_eq!(said[0].0, "-2e-8");
        assert!(
            said[0].1.starts_with(
                "p: pressure -2e-8 mbar at 1970-01-01T00:00:00.000Z is not above zero"
            ),
            "{said:?}"
        );
        assert_eq!(said[1].0, "0");
    }

    #[test]
    fn bare_numbers_units_and_pairs() {
        let mut d = dec();
        let s = one(&mut d, "1.5e-6").expect("bare");
        assert_eq!((s[0].channel.as_str(), s[0].value()), ("p", Some(1.5e-6)));
        let s = one(&mut d, "chamber=2e-6 Torr, wall=22 C").expect("pairs");
        assert_eq!(s.len(), 2);
        assert_eq!(s[1].unit, ChannelUnit::Temperature(TemperatureUnit::C));
        let s = one(&mut d, "2026-12-01T10:00:00.250Z chamber=over-range").expect("time");
        assert_eq!(s[0].status(), Status::OverRange);
        assert_eq!(s[0].time.timestamp_subsec_millis(), 250);
        assert_eq!(d.channels().len(), 3);
    }

    #[test]
    fn bad_lines_say_why() {
        let mut d = dec();
        assert!(
            one(&mut d, "abc")
                .expect_err("bad")
                .contains("neither a number")
        );
        assert!(
            one(&mut d, "p=1 furlong")
                .expect_err("bad")
                .contains("unknown unit")
        );
        assert!(one(&mut d, "p=1, p=2").expect_err("bad").contains("twice"));
        assert!(one(&mut d, "p=nan").expect_err("bad").contains("neither"));
        assert!(
            one(&mut d, "a b=1")
                .expect_err("bad")
                .contains("not a channel name")
        );
        one(&mut d, "q=1 mbar").expect("first");
        assert!(
            one(&mut d, "q=1 C")
                .expect_err("bad")
                .contains("was mbar before")
        );
        let e = d.decode(b"p=\xff", DateTime::<Utc>::UNIX_EPOCH, "s");
        assert!(
            matches!(&e[0], SourceEvent::Unparsed { text, .. } if text.contains("invalid UTF-8"))
        );
    }
}
