//! The data model that joins the layers: a gauge reading ([`Sample`]) and
//! what a source reports ([`SourceEvent`]).
//!
//! Every sample carries its own UTC timestamp — device time where the data has
//! one, else the time it was received — so that replay and simulation run on
//! data time. A bad reading keeps its status and never becomes a number: a
//! [`Reading`] is either a [`Reading::Value`] or a [`Reading::Bad`] with its
//! [`Fault`], never both.

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

    /// The fault this status names; `None` for [`Status::Ok`].
    pub fn fault(self) -> Option<Fault> {
        match self {
            Status::Ok => None,
            Status::OverRange => Some(Fault::OverRange),
            Status::UnderRange => Some(Fault::UnderRange),
            Status::SensorOff => Some(Fault::SensorOff),
            Status::SensorError => Some(Fault::SensorError),
            Status::Stale => Some(Fault::Stale),
            Status::Unparsed => Some(Fault::Unparsed),
        }
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

/// Why a reading has no value: every [`Status`] but [`Status::Ok`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Fault {
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

impl Fault {
    /// Every fault, in the order of SPEC §3.
    pub const ALL: [Fault; 6] = [
        Fault::OverRange,
        Fault::UnderRange,
        Fault::SensorOff,
        Fault::SensorError,
        Fault::Stale,
        Fault::Unparsed,
    ];

    /// The status word of this fault.
    pub fn status(self) -> Status {
        match self {
            Fault::OverRange => Status::OverRange,
            Fault::UnderRange => Status::UnderRange,
            Fault::SensorOff => Status::SensorOff,
            Fault::SensorError => Status::SensorError,
            Fault::Stale => Status::Stale,
            Fault::Unparsed => Status::Unparsed,
        }
    }

    /// The word used in logs and on screen.
    pub fn as_str(self) -> &'static str {
        self.status().as_str()
    }
}

impl From<Fault> for Status {
    fn from(f: Fault) -> Status {
        f.status()
    }
}

impl fmt::Display for Fault {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for Fault {
    type Err = String;
    /// Reads a fault's word; `ok` is a status but not a fault.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Fault::ALL
            .into_iter()
            .find(|f| f.as_str() == s)
            .ok_or_else(|| {
                format!(
                    "unknown fault \"{s}\"; expected one of {}",
                    Fault::ALL.map(Fault::as_str).join(", ")
                )
            })
    }
}

/// What one reading holds: a value, or the fault that stands in its place.
/// There is no way to hold both: a bad reading has no number to carry.
///
/// ```compile_fail
/// use rarefy_core::sample::{Fault, Reading};
/// // A fault cannot carry a value alongside it.
/// let _ = Reading::Bad(Fault::OverRange, 1.0);
/// ```
///
/// ```compile_fail
/// use rarefy_core::sample::{Fault, Reading};
/// // Nor can a value carry a fault.
/// let _ = Reading::Value(1.0, Fault::Stale);
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Reading {
    /// A valid value, in the channel's unit.
    Value(f64),
    /// A bad reading: no value, only why.
    Bad(Fault),
}

impl Reading {
    /// The status word of this reading.
    pub fn status(self) -> Status {
        match self {
            Reading::Value(_) => Status::Ok,
            Reading::Bad(f) => f.status(),
        }
    }

    /// The value, when the reading is valid.
    pub fn value(self) -> Option<f64> {
        match self {
            Reading::Value(v) => Some(v),
            Reading::Bad(_) => None,
        }
    }

    /// The fault, when the reading is bad.
    pub fn fault(self) -> Option<Fault> {
        match self {
            Reading::Value(_) => None,
            Reading::Bad(f) => Some(f),
        }
    }
}

impl From<Fault> for Reading {
    fn from(f: Fault) -> Reading {
        Reading::Bad(f)
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
    /// Unit of the reading's value.
    pub unit: ChannelUnit,
    /// The value as the device gave it, in `unit`, or why there is none.
    pub reading: Reading,
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
            unit,
            reading: Reading::Value(value),
        }
    }

    /// A bad reading: a fault and no value.
    pub fn bad(
        time: DateTime<Utc>,
        channel: impl Into<String>,
        unit: ChannelUnit,
        fault: Fault,
    ) -> Self {
        Sample {
            time,
            channel: channel.into(),
            unit,
            reading: Reading::Bad(fault),
        }
    }

    /// The status word of the reading.
    pub fn status(&self) -> Status {
        self.reading.status()
    }

    /// The value as the device gave it, in `unit`, when the reading is valid.
    pub fn value(&self) -> Option<f64> {
        self.reading.value()
    }

    /// The value in SI (Pa or K) when the reading is valid.
    pub fn si(&self) -> Option<f64> {
        self.reading.value().map(|v| self.unit.to_si(v))
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
    /// The log's `gas` column changed at this row: the gas or mixture in
    /// the chamber from `time` on, as written (`None`: the column is empty
    /// from here, and the configuration decides again). Sent before the
    /// row's readings.
    Gas {
        /// Data time of the row.
        time: DateTime<Utc>,
        /// The cell's text, e.g. `Ar` or `Ar=0.9,N2=0.1`.
        text: Option<String>,
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

/// Whether two ids (of channels, gases, lengths) are the same: lengths
/// first, then short ids word by word (a comparison of the whole bytes is a
/// call into the C library; ids are a few bytes long and compared several
/// times a reading).
#[inline(always)]
pub fn same_id(a: &str, b: &str) -> bool {
    let (a, b) = (a.as_bytes(), b.as_bytes());
    let n = a.len();
    if n != b.len() {
        return false;
    }
    fn word<const W: usize>(s: &[u8], at: usize) -> [u8; W] {
        let mut w = [0u8; W];
        w.copy_from_slice(&s[at..at + W]);
        w
    }
    match n {
        // Two words that overlap cover every byte.
        8..=16 => word::<8>(a, 0) == word::<8>(b, 0) && word::<8>(a, n - 8) == word::<8>(b, n - 8),
        4..=7 => word::<4>(a, 0) == word::<4>(b, 0) && word::<4>(a, n - 4) == word::<4>(b, n - 4),
        0..=3 => a.iter().zip(b).all(|(x, y)| x == y),
        _ => a == b,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    proptest::proptest! {
        /// Ids compared word by word are compared as `==` compares them,
        /// at every length around the words' sizes.
        #[test]
        fn same_id_is_equality(
            a in "[ab]{0,20}",
            b in "[ab]{0,20}",
            c in "\\PC{0,20}",
        ) {
            proptest::prop_assert_eq!(same_id(&a, &b), a == b);
            proptest::prop_assert!(same_id(&a, &a.clone()));
            proptest::prop_assert!(same_id(&c, &c.clone()));
            proptest::prop_assert_eq!(same_id(&a, &c), a == c);
        }
    }

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
        s.reading = Reading::Bad(Fault::OverRange);
        assert_eq!(s.si(), None);
    }

    #[test]
    fn faults_are_the_bad_statuses() {
        assert_eq!(Status::Ok.fault(), None);
        for f in Fault::ALL {
            assert_eq!(f.status().fault(), Some(f));
            assert!(!f.status().is_ok());
            assert_eq!(f.as_str().parse::<Fault>(), Ok(f));
        }
        assert_eq!(
            Status::ALL.iter().filter_map(|s| s.fault()).count(),
            Fault::ALL.len()
        );
        assert!("ok".parse::<Fault>().is_err());
    }

    /// Every way to build a reading gives either a value or a fault, never
    /// both and never neither.
    #[test]
    fn a_reading_is_a_value_or_a_fault_never_both() {
        let t = DateTime::<Utc>::UNIX_EPOCH;
        let unit = ChannelUnit::Pressure(PressureUnit::Mbar);
        let mut readings = vec![Reading::Value(2.5), Sample::ok(t, "p", 2.5, unit).reading];
        for f in Fault::ALL {
            readings.push(Reading::Bad(f));
            readings.push(Reading::from(f));
            readings.push(Sample::bad(t, "p", unit, f).reading);
        }
        for r in readings {
            assert!(r.value().is_some() != r.fault().is_some(), "{r:?}");
            assert_eq!(r.status().is_ok(), r.value().is_some(), "{r:?}");
            assert_eq!(r.status().fault(), r.fault(), "{r:?}");
        }
        for f in Fault::ALL {
            let s = Sample::bad(t, "p", unit, f);
            assert_eq!((s.value(), s.si(), s.status()), (None, None, f.status()));
        }
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
