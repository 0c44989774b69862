//! Alarm and gate events: every transition, with data time, old and new
//! state, value and threshold with units, and a short text. Written as JSON
//! lines.

use chrono::{DateTime, Utc};
use serde::{Serialize, Serializer};

use super::rule::Severity;

fn rfc3339<S: Serializer>(t: &DateTime<Utc>, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(&crate::log::v1::format_time(*t))
}

/// What an event is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum EventKind {
    /// An alarm rule changed state.
    Alarm,
    /// A gate changed state.
    Gate,
}

/// One event.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Event {
    /// Data time of the transition.
    #[serde(serialize_with = "rfc3339")]
    pub time: DateTime<Utc>,
    /// Alarm or gate.
    pub kind: EventKind,
    /// Rule or gate id.
    pub id: String,
    /// Its label.
    pub label: String,
    /// Severity (alarms).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub severity: Option<Severity>,
    /// Old state.
    pub from: String,
    /// New state.
    pub to: String,
    /// Gauge watched.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gauge: Option<String>,
    /// Quantity watched.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub quantity: Option<String>,
    /// Value in SI, when numeric.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub value: Option<f64>,
    /// Value with its unit, for people.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub value_text: Option<String>,
    /// The rule's test with its threshold and unit, for people.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub threshold: Option<String>,
    /// Who did it, for operator actions.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub user: Option<String>,
    /// Short human text.
    pub text: String,
}

impl Event {
    /// The event as one JSON line (no trailing newline).
    pub fn to_json(&self) -> String {
        serde_json::to_string(self).unwrap_or_else(|e| format!("{{\"error\":\"{e}\"}}"))
    }
}
