//! Events: every alarm and gate transition, and every operator action, with
//! data time, old and new state, value and threshold with units, and a short
//! text. Written as JSON lines, one object per event, in the format
//! documented by `docs/event.schema.json` (version [`EVENT_VERSION`]).

use chrono::{DateTime, Utc};
use serde::{Deserialize, Deserializer, Serialize, Serializer};
use std::fmt;

use super::gate::GateState;
use super::rule::{AlarmState, Severity};

/// Version of the event format, written as `"v"` in every event.
pub const EVENT_VERSION: u32 = 1;

fn rfc3339<S: Serializer>(t: &DateTime<Utc>, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(&crate::timefmt::write_rfc3339(*t))
}

fn rfc3339_opt<S: Serializer>(t: &Option<DateTime<Utc>>, s: S) -> Result<S::Ok, S::Error> {
    match t {
        Some(t) => rfc3339(t, s),
        None => s.serialize_none(),
    }
}

fn time_de<'de, D: Deserializer<'de>>(d: D) -> Result<DateTime<Utc>, D::Error> {
    let text = String::deserialize(d)?;
    DateTime::parse_from_rfc3339(&text)
        .map(|t| t.with_timezone(&Utc))
        .map_err(serde::de::Error::custom)
}

fn time_opt_de<'de, D: Deserializer<'de>>(d: D) -> Result<Option<DateTime<Utc>>, D::Error> {
    match Option::<String>::deserialize(d)? {
        Some(text) => DateTime::parse_from_rfc3339(&text)
            .map(|t| Some(t.with_timezone(&Utc)))
            .map_err(serde::de::Error::custom),
        None => Ok(None),
    }
}

fn version() -> u32 {
    EVENT_VERSION
}

/// What an event is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum EventKind {
    /// An alarm changed state.
    Alarm,
    /// A gate changed state.
    Gate,
    /// An operator changed a setting (a threshold, a hold, the exposure).
    Setting,
    /// The gas in force changed (a config step, the log, an operator).
    Gas,
}

impl EventKind {
    /// The word used in events.
    pub fn as_str(self) -> &'static str {
        match self {
            EventKind::Alarm => "alarm",
            EventKind::Gate => "gate",
            EventKind::Setting => "setting",
            EventKind::Gas => "gas",
        }
    }
}

impl fmt::Display for EventKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The change an event records, typed by what changed. Serialised as
/// `"kind"`, `"from"` and `"to"`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Change {
    /// An alarm's state changed.
    Alarm {
        /// Old state.
        from: AlarmState,
        /// New state.
        to: AlarmState,
    },
    /// A gate's state changed.
    Gate {
        /// Old state.
        from: GateState,
        /// New state.
        to: GateState,
    },
    /// An operator changed a setting; old and new values with units.
    Setting {
        /// The value before.
        from: String,
        /// The value after.
        to: String,
    },
    /// The gas in force changed; old and new gas labels (`"N2"`,
    /// `"Ar"`, `"H2=0.6,N2=0.4"`), or an operator's choice (`"auto"`).
    Gas {
        /// The gas before.
        from: String,
        /// The gas after.
        to: String,
    },
}

impl Change {
    /// What the event is about.
    pub fn kind(&self) -> EventKind {
        match self {
            Change::Alarm { .. } => EventKind::Alarm,
            Change::Gate { .. } => EventKind::Gate,
            Change::Setting { .. } => EventKind::Setting,
            Change::Gas { .. } => EventKind::Gas,
        }
    }

    /// The old state or value, as written.
    pub fn from_text(&self) -> &str {
        match self {
            Change::Alarm { from, .. } => from.as_str(),
            Change::Gate { from, .. } => from.as_str(),
            Change::Setting { from, .. } | Change::Gas { from, .. } => from,
        }
    }

    /// The new state or value, as written.
    pub fn to_text(&self) -> &str {
        match self {
            Change::Alarm { to, .. } => to.as_str(),
            Change::Gate { to, .. } => to.as_str(),
            Change::Setting { to, .. } | Change::Gas { to, .. } => to,
        }
    }

    /// The new alarm state, for alarm events.
    pub fn alarm_to(&self) -> Option<AlarmState> {
        match self {
            Change::Alarm { to, .. } => Some(*to),
            _ => None,
        }
    }
}

/// What an operator did.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Operation {
    /// Acknowledged an alarm.
    Acknowledge,
    /// Shelved an alarm.
    Shelve,
    /// Returned a shelved alarm to service.
    Unshelve,
    /// Changed an alarm's threshold.
    SetThreshold,
    /// Changed a gate's hold time.
    SetHold,
    /// Started the exposure count again.
    ResetExposure,
    /// Chose the gas in force (or "auto").
    SetGas,
}

impl Operation {
    /// The word used in events.
    pub fn as_str(self) -> &'static str {
        match self {
            Operation::Acknowledge => "acknowledge",
            Operation::Shelve => "shelve",
            Operation::Unshelve => "unshelve",
            Operation::SetThreshold => "set-threshold",
            Operation::SetHold => "set-hold",
            Operation::ResetExposure => "reset-exposure",
            Operation::SetGas => "set-gas",
        }
    }
}

/// Who did an operation, and when by the wall clock (data time is the
/// event's `time`). Given by the caller: the core reads no clock and no
/// environment.
#[derive(Debug, Clone, PartialEq)]
pub struct Actor {
    /// Local user name.
    pub user: String,
    /// Wall-clock time of the action.
    pub wall_time: Option<DateTime<Utc>>,
}

impl Actor {
    /// An actor without a wall-clock time (tests, scripted replays).
    pub fn named(user: impl Into<String>) -> Self {
        Actor {
            user: user.into(),
            wall_time: None,
        }
    }
}

/// One event.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Event {
    /// Format version ([`EVENT_VERSION`]).
    #[serde(default = "version")]
    pub v: u32,
    /// Data time of the transition.
    #[serde(serialize_with = "rfc3339", deserialize_with = "time_de")]
    pub time: DateTime<Utc>,
    /// Wall-clock time, for operator actions.
    #[serde(
        default,
        skip_serializing_if = "Option::is_none",
        serialize_with = "rfc3339_opt",
        deserialize_with = "time_opt_de"
    )]
    pub wall_time: Option<DateTime<Utc>>,
    /// What changed, from what to what.
    #[serde(flatten)]
    pub change: Change,
    /// Rule or gate id, or `<gauge>.exposure`.
    pub id: String,
    /// Its label.
    pub label: String,
    /// Severity (alarms).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub severity: Option<Severity>,
    /// Gauge watched.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub gauge: Option<String>,
    /// Quantity watched.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub quantity: Option<String>,
    /// Value in SI, when numeric.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub value: Option<f64>,
    /// Value with its unit, for people.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub value_text: Option<String>,
    /// The rule's test with its threshold and unit, for people.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub threshold: Option<String>,
    /// The operator action that caused it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub operation: Option<Operation>,
    /// Who did it, for operator actions.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub user: Option<String>,
    /// Short human text.
    pub text: String,
}

impl Event {
    /// What the event is about.
    pub fn kind(&self) -> EventKind {
        self.change.kind()
    }

    /// The old state or value, as written.
    pub fn from_text(&self) -> &str {
        self.change.from_text()
    }

    /// The new state or value, as written.
    pub fn to_text(&self) -> &str {
        self.change.to_text()
    }

    /// The event as one JSON line (no trailing newline).
    pub fn to_json(&self) -> String {
        serde_json::to_string(self).unwrap_or_else(|e| format!("{{\"error\":\"{e}\"}}"))
    }

    /// Reads one JSON line written by [`Event::to_json`].
    pub fn from_json(line: &str) -> Result<Event, String> {
        serde_json::from_str(line).map_err(|e| e.to_string())
    }

    /// Whether an operator's action caused this event.
    pub fn is_operator_action(&self) -> bool {
        self.operation.is_some()
    }

    /// The event without what differs between runs of the same data (the
    /// wall-clock time): for comparing event lists.
    pub fn on_data_time(&self) -> Event {
        Event {
            wall_time: None,
            ..self.clone()
        }
    }
}

/// Reads an event log (`events-*.jsonl`): every line an [`Event`], blank
/// lines skipped. A line that is not an event is an error naming its line
/// number and what was expected; reading goes on after it.
pub fn read_event_log(
    reader: impl std::io::BufRead,
) -> impl Iterator<Item = Result<Event, (u64, String)>> {
    reader.lines().enumerate().filter_map(|(i, line)| {
        let n = i as u64 + 1;
        match line {
            Err(e) => Some(Err((n, format!("cannot read the line: {e}")))),
            Ok(l) if l.trim().is_empty() => None,
            Ok(l) => Some(
                Event::from_json(&l)
                    .map_err(|e| (n, format!("expected an event as one JSON object ({e})"))),
            ),
        }
    })
}
