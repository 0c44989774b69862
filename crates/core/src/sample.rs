//! The data model that joins the layers: a gauge reading ([`Sample`]) and
//! what a source reports ([`SourceEvent`]).
//!
//! Every sample carries its own UTC timestamp — device time where the data has
//! one, else the time it was received — so that replay and simulation run on
//! data time. A bad reading keeps its status and never becomes a number.

use chrono::{DateTime, Utc};
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

use crate::units::{PressureUnit, TemperatureUnit, UnitKind};

/// Status of one reading.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Status {
    /// A valid reading.
    Ok,
    /// Above the gauge's range.
    OverRange,
    /// Below the gauge's range.
    UnderRange,
    /// The sensor is switched off (an ion gauge above its pressure limit …).
    SensorOff,
    /// The sensor reports a fault.
    SensorError,
    /// No reading within the channel's timeout.
    Stale,
    /// The device sent something that could not be read.
    Unparsed,
}

impl Status {
    /// Every status, in the order of SPEC §3.
    pub const ALL: [Status; 7] = [
        Status::Ok,
        Status::OverRange,
        Status::UnderRange,
        Status::SensorOff,
        Status::SensorError,
        Status::Stale,
        Status::Unparsed,
    ];

    /// The word used in logs and on screen.
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Ok => "ok",
            Status::OverRange => "over-range",
            Status::UnderRange => "under-range",
            Status::SensorOff => "sensor-off",
            Status::SensorError => "sensor-error",
            Status::Stale => "stale",
            Status::Unparsed => "unparsed",
        }
    }

    /// Whether the reading's value may be used as a measurement.
    pub fn is_ok(self) -> bool {
        self == Status::Ok
    }
}

impl fmt::Display for Status {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for Status {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Status::ALL
            .into_iter()
            .find(|st| st.as_str() == s)
            .ok_or_else(|| {
                format!(
                    "unknown status \"{s}\"; expected one of {}",
                    Status::ALL.map(Status::as_str).join(", ")
                )
            })
    }
}

/// What a channel measures, and in which unit its values are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ChannelUnit {
    /// A pressure.
    Pressure(PressureUnit),
    /// A temperature.
    Temperature(TemperatureUnit),
}

impl ChannelUnit {
    /// The unit symbol, as written in log headers (`mbar`, `C`).
    pub fn symbol(self) -> &'static str {
        match self {
            ChannelUnit::Pressure(u) => u.symbol(),
            ChannelUnit::Temperature(u) => u.symbol(),
        }
    }

    /// Converts a value in this unit to SI (Pa or K).
    pub fn to_si(self, value: f64) -> f64 {
        match self {
            ChannelUnit::Pressure(u) => u.to_si(value),
            ChannelUnit::Temperature(u) => u.to_si(value),
        }
    }

    /// Whether this is a pressure channel.
    pub fn is_pressure(self) -> bool {
        matches!(self, ChannelUnit::Pressure(_))
    }

    /// Reads a unit symbol: a pressure unit, else a temperature unit.
    pub fn parse(symbol: &str) -> Option<Self> {
        let s = symbol.trim();
        PressureUnit::lookup(s)
            .map(ChannelUnit::Pressure)
            .or_else(|| TemperatureUnit::lookup(s).map(ChannelUnit::Temperature))
    }
}

impl fmt::Display for ChannelUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

/// One reading of one channel.
#[derive(Debug, Clone, PartialEq)]
pub struct Sample {
    /// Data time (device time, or receive time when the data has none).
    pub time: DateTime<Utc>,
    /// Channel (gauge id).
    pub channel: String,
    /// The value as the device gave it, in `unit`; `None` when it sent none.
    /// Only meaningful when `status` is [`Status::Ok`].
    pub value: Option<f64>,
    /// Unit of `value`.
    pub unit: ChannelUnit,
    /// Status of the reading.
    pub status: Status,
}

impl Sample {
    /// A valid reading.
    pub fn ok(
        time: DateTime<Utc>,
        channel: impl Into<String>,
        value: f64,
        unit: ChannelUnit,
    ) -> Self {
        Sample {
            time,
            channel: channel.into(),
            value: Some(value),
            unit,
            status: Status::Ok,
        }
    }

    /// A reading with a bad status and no value.
    pub fn bad(
        time: DateTime<Utc>,
        channel: impl Into<String>,
        unit: ChannelUnit,
        status: Status,
    ) -> Self {
        Sample {
            time,
            channel: channel.into(),
            value: None,
            unit,
            status,
        }
    }

    /// The value in SI (Pa or K) when the reading is valid.
    pub fn si(&self) -> Option<f64> {
        match (self.status, self.value) {
            (Status::Ok, Some(v)) => Some(self.unit.to_si(v)),
            _ => None,
        }
    }
}

/// A channel a source will produce: its id and unit.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub struct ChannelInfo {
    /// Channel id.
    pub id: String,
    /// Unit of its values.
    pub unit: ChannelUnit,
}

impl ChannelInfo {
    /// A channel.
    pub fn new(id: impl Into<String>, unit: ChannelUnit) -> Self {
        ChannelInfo {
            id: id.into(),
            unit,
        }
    }
}

/// Connection state of a source.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SourceState {
    /// Connected and reading.
    Connected,
    /// Disconnected; the next attempt is in this many seconds.
    Retrying {
        /// Seconds until the next attempt.
        in_s: f64,
    },
    /// The source has ended (end of file, stdin closed, simulation over).
    Ended,
}

impl fmt::Display for SourceState {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SourceState::Connected => f.write_str("connected"),
            SourceState::Retrying { in_s } => write!(f, "retrying in {}s", in_s.ceil()),
            SourceState::Ended => f.write_str("ended"),
        }
    }
}

/// What a source sends down its channel.
#[derive(Debug, Clone, PartialEq)]
pub enum SourceEvent {
    /// The readings of one line or record; they share a data time and go
    /// into one row of the log.
    Samples(Vec<Sample>),
    /// A change of connection state.
    Status {
        /// Source name (its URI).
        source: String,
        /// New state.
        state: SourceState,
    },
    /// A line that matched no template, kept with its text (escaped).
    Unparsed {
        /// Source name.
        source: String,
        /// When it was received.
        time: DateTime<Utc>,
        /// The line, with control characters and invalid UTF-8 escaped.
        text: String,
    },
    /// A problem the source reports and survives (a cell it cannot read …).
    Error {
        /// Source name.
        source: String,
        /// What went wrong, with its location.
        message: String,
    },
}

/// Escapes a device's bytes for display and logs: printable ASCII and
/// printable UTF-8 pass, everything else (control characters, escape
/// sequences, invalid UTF-8) becomes `\xNN`, `\r`, `\n`, `\t` or `\u{…}`.
pub fn escape_bytes(bytes: &[u8]) -> String {
    let mut out = String::with_capacity(bytes.len());
    for chunk in bytes.utf8_chunks() {
        for c in chunk.valid().chars() {
            match c {
                '\r' => out.push_str("\\r"),
                '\n' => out.push_str("\\n"),
                '\t' => out.push_str("\\t"),
                '\\' => out.push_str("\\\\"),
                c if (c as u32) < 0x20 || c as u32 == 0x7f => {
                    out.push_str(&format!("\\x{:02x}", c as u32));
                }
                c if c.is_control() || is_bidi_or_invisible(c) => {
                    out.push_str(&format!("\\u{{{:x}}}", c as u32));
                }
                c => out.push(c),
            }
        }
        for b in chunk.invalid() {
            out.push_str(&format!("\\x{b:02x}"));
        }
    }
    out
}

/// Characters that can reorder or hide text on a terminal.
fn is_bidi_or_invisible(c: char) -> bool {
    matches!(c as u32, 0x200b..=0x200f | 0x202a..=0x202e | 0x2066..=0x2069 | 0xfeff)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn statuses_round_trip() {
        for s in Status::ALL {
            assert_eq!(s.as_str().parse::<Status>(), Ok(s));
        }
        assert!("fine".parse::<Status>().is_err());
    }

    #[test]
    fn bad_readings_never_become_numbers() {
        let t = DateTime::<Utc>::UNIX_EPOCH;
        let mut s = Sample::ok(t, "main", 1e-6, ChannelUnit::Pressure(PressureUnit::Mbar));
        assert!(s.si().is_some_and(|p| (p - 1e-4).abs() < 1e-18));
        s.status = Status::OverRange;
        assert_eq!(s.si(), None);
    }

    #[test]
    fn escaping_neutralises_terminal_control() {
        assert_eq!(escape_bytes(b"1.0E-6 mbar\r\n"), "1.0E-6 mbar\\r\\n");
        assert_eq!(escape_bytes(b"\x1b[2J\x07ok"), "\\x1b[2J\\x07ok");
        assert_eq!(escape_bytes(&[0x31, 0xff, 0xfe, 0x32]), "1\\xff\\xfe2");
        assert_eq!(escape_bytes("µ°".as_bytes()), "µ°");
        assert_eq!(escape_bytes("a\u{202e}b".as_bytes()), "a\\u{202e}b");
        assert_eq!(escape_bytes("\u{9b}".as_bytes()), "\\u{9b}");
    }

    #[test]
    fn channel_units_tell_pressure_from_temperature() {
        assert_eq!(
            ChannelUnit::parse("mbar"),
            Some(ChannelUnit::Pressure(PressureUnit::Mbar))
        );
        assert_eq!(
            ChannelUnit::parse("C"),
            Some(ChannelUnit::Temperature(TemperatureUnit::C))
        );
        assert_eq!(ChannelUnit::parse("m"), None);
    }
}
