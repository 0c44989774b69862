//! Alarm rules and their state machine, with the states and terms of
//! ISA-18.2 / IEC 62682: normal, unacknowledged, acknowledged,
//! returned-to-normal unacknowledged, shelved, suppressed by design.
//!
//! The machine is driven by readings and data time only, so the same log
//! gives the same events in replay, record, report and the dashboard.

use chrono::{DateTime, Utc};
use serde::{Deserialize, Serialize};
use std::fmt;

use super::quantity::{Class, Quantity};

/// How serious an alarm is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Severity {
    /// For information.
    Notice,
    /// Needs attention.
    Warning,
    /// A process step must stop; `record` exits 3 on it.
    Trip,
}

impl Severity {
    /// The word.
    pub fn as_str(self) -> &'static str {
        match self {
            Severity::Notice => "notice",
            Severity::Warning => "warning",
            Severity::Trip => "trip",
        }
    }

    /// Reads `notice`, `warning` or `trip`.
    pub fn parse(s: &str) -> Result<Severity, String> {
        match s {
            "notice" => Ok(Severity::Notice),
            "warning" => Ok(Severity::Warning),
            "trip" => Ok(Severity::Trip),
            _ => Err(format!(
                "unknown severity \"{s}\"; expected notice, warning or trip"
            )),
        }
    }
}

impl fmt::Display for Severity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Alarm states (ISA-18.2).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum AlarmState {
    /// Not in alarm.
    Normal,
    /// In alarm, not yet acknowledged.
    Unacknowledged,
    /// In alarm, acknowledged.
    Acknowledged,
    /// Returned to normal before it was acknowledged.
    ReturnedUnacknowledged,
    /// Taken out of service by an operator until a time.
    Shelved,
    /// Its enabling condition is false (a gauge switched off …).
    SuppressedByDesign,
}

impl AlarmState {
    /// The word used in events and on screen.
    pub fn as_str(self) -> &'static str {
        match self {
            AlarmState::Normal => "normal",
            AlarmState::Unacknowledged => "unacknowledged",
            AlarmState::Acknowledged => "acknowledged",
            AlarmState::ReturnedUnacknowledged => "returned-unacknowledged",
            AlarmState::Shelved => "shelved",
            AlarmState::SuppressedByDesign => "suppressed-by-design",
        }
    }

    /// Whether the alarm is in alarm (active) in this state.
    pub fn is_active(self) -> bool {
        matches!(self, AlarmState::Unacknowledged | AlarmState::Acknowledged)
    }
}

impl fmt::Display for AlarmState {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Hysteresis around a threshold.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Deadband {
    /// None: clears as soon as the value is back at the threshold.
    None,
    /// In the quantity's SI unit.
    Absolute(f64),
    /// A fraction of the threshold (`10 %` is 0.1).
    Fraction(f64),
    /// Decades (`0.1 decade` clears at threshold ÷ 10^0.1 for `above`).
    Decades(f64),
}

impl Deadband {
    /// Parses `"10 %"`, `"0.1 decade"`, or an absolute value read by `absolute`.
    pub fn parse(
        text: &str,
        absolute: impl Fn(&str) -> Result<f64, String>,
    ) -> Result<Deadband, String> {
        let t = text.trim();
        let number = |s: &str| -> Result<f64, String> {
            let v: f64 = s
                .trim()
                .parse()
                .map_err(|_| format!("deadband \"{t}\": \"{s}\" is not a number"))?;
            if v.is_finite() && v >= 0.0 {
                Ok(v)
            } else {
                Err(format!("deadband \"{t}\" must be zero or positive"))
            }
        };
        if let Some(p) = t.strip_suffix('%') {
            let f = number(p)? / 100.0;
            if f >= 1.0 {
                return Err(format!("deadband \"{t}\" must be less than 100 %"));
            }
            return Ok(Deadband::Fraction(f));
        }
        for suffix in ["decades", "decade"] {
            if let Some(d) = t.strip_suffix(suffix) {
                return Ok(Deadband::Decades(number(d)?));
            }
        }
        let v = absolute(t)
            .map_err(|e| format!("deadband: {e}; or give \"10 %\" or \"0.1 decade\""))?;
        if v < 0.0 {
            return Err(format!("deadband \"{t}\" must be zero or positive"));
        }
        Ok(Deadband::Absolute(v))
    }

    /// The value at which an alarm on `threshold` clears (and a gate
    /// condition that holds stops holding).
    pub fn clear_level(self, threshold: f64, above: bool) -> f64 {
        let sign = if above { -1.0 } else { 1.0 };
        match self {
            Deadband::None => threshold,
            Deadband::Absolute(a) => threshold + sign * a,
            Deadband::Fraction(f) => threshold * (1.0 + sign * f),
            Deadband::Decades(d) => threshold * 10f64.powf(sign * d),
        }
    }
}

/// What a rule compares.
#[derive(Debug, Clone, PartialEq)]
pub enum Test {
    /// In alarm while the value is above the threshold (SI).
    Above(f64),
    /// In alarm while the value is below the threshold (SI).
    Below(f64),
    /// In alarm while the class is this one.
    Enters(Class),
    /// In alarm while the class is not this one.
    Leaves(Class),
    /// In alarm at each crossing of the boundary between two neighbouring
    /// classes, either way; it returns to normal at the next reading.
    Crosses(Class, Class),
}

/// One alarm rule.
#[derive(Debug, Clone, PartialEq)]
pub struct Rule {
    /// Id, unique among rules.
    pub id: String,
    /// Human label.
    pub label: String,
    /// Gauge (channel) it watches.
    pub gauge: String,
    /// What it watches.
    pub quantity: Quantity,
    /// How it compares.
    pub test: Test,
    /// Hysteresis.
    pub deadband: Deadband,
    /// The condition must hold this long before the alarm, s.
    pub on_delay_s: f64,
    /// The condition must be clear this long before the return, s.
    pub off_delay_s: f64,
    /// Severity.
    pub severity: Severity,
    /// Stays in alarm after the return until acknowledged.
    pub latching: bool,
}

impl Rule {
    /// Whether this is a gauge's automatic no-valid-reading alarm.
    pub fn is_input(&self) -> bool {
        self.id.ends_with(".input")
    }

    /// Whether this is a source's automatic not-connected alarm.
    pub fn is_link(&self) -> bool {
        self.id.ends_with(".link")
    }
}

/// One input to a rule at a data time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Input {
    /// A number in SI.
    Value(f64),
    /// Beyond the top of the gauge's range: no number, but above any
    /// threshold of a pressure or temperature.
    OverRange,
    /// Below the bottom of the gauge's range: no number, but below any
    /// threshold of a pressure or temperature.
    UnderRange,
    /// A class (regime or range).
    Class(Class),
    /// No usable value (bad or stale reading): the rule holds its state.
    Unusable,
    /// The rule's enabling condition is false.
    Disabled,
}

/// An interval of values, each end included or not.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Band {
    low: f64,
    low_in: bool,
    high: f64,
    high_in: bool,
}

impl Band {
    /// Every value (the infinities included; not NaN).
    pub const ALL: Band = Band {
        low: f64::NEG_INFINITY,
        low_in: true,
        high: f64::INFINITY,
        high_in: true,
    };

    /// From `(low, included)` to `(high, included)`.
    pub fn new(low: (f64, bool), high: (f64, bool)) -> Self {
        Band {
            low: low.0,
            low_in: low.1,
            high: high.0,
            high_in: high.1,
        }
    }

    /// Whether `v` lies in the band (NaN never does).
    #[inline]
    pub fn contains(&self, v: f64) -> bool {
        (v > self.low || (self.low_in && v == self.low))
            && (v < self.high || (self.high_in && v == self.high))
    }

    /// Both ends are numbers (a NaN end would be lost in [`Band::and`]).
    pub fn is_number(&self) -> bool {
        !(self.low.is_nan() || self.high.is_nan())
    }

    /// The values in both bands (both with ends that are numbers; ends
    /// compared as numbers, so that -0 and 0 are one end).
    pub fn and(self, other: Band) -> Band {
        let (low, low_in) = if self.low > other.low {
            (self.low, self.low_in)
        } else if self.low < other.low {
            (other.low, other.low_in)
        } else {
            (self.low, self.low_in && other.low_in)
        };
        let (high, high_in) = if self.high < other.high {
            (self.high, self.high_in)
        } else if self.high > other.high {
            (other.high, other.high_in)
        } else {
            (self.high, self.high_in && other.high_in)
        };
        Band {
            low,
            low_in,
            high,
            high_in,
        }
    }
}

/// A change of a rule's state.
#[derive(Debug, Clone, PartialEq)]
pub struct Transition {
    /// Data time.
    pub time: DateTime<Utc>,
    /// Old state.
    pub from: AlarmState,
    /// New state.
    pub to: AlarmState,
    /// The value that caused it, when there is one.
    pub value: Option<Input>,
    /// Why, for operator operations (`acknowledged by ana`).
    pub note: Option<String>,
}

/// A rule with its state.
#[derive(Debug, Clone)]
pub struct RuleMachine {
    /// The rule.
    pub rule: Rule,
    state: AlarmState,
    /// The condition, after its delays.
    condition: bool,
    pending_since: Option<DateTime<Utc>>,
    shelved_until: Option<DateTime<Utc>>,
    since: Option<DateTime<Utc>>,
    last_class: Option<Class>,
    last_value: Option<Input>,
}

fn seconds(a: DateTime<Utc>, b: DateTime<Utc>) -> f64 {
    crate::timefmt::seconds_between(a, b)
}

/// The first millisecond of data time at which `seconds(t, ·) >= secs`:
/// where a delay that started at `t` has run out.
pub fn after(t: DateTime<Utc>, secs: f64) -> DateTime<Utc> {
    let ms = (secs * 1000.0 - 1e-6).ceil().max(0.0);
    // Saturate rather than overflow on absurd delays.
    let ms = if ms.is_finite() && ms < 1e15 {
        ms as i64
    } else {
        1_000_000_000_000_000
    };
    t.checked_add_signed(chrono::Duration::milliseconds(ms))
        .unwrap_or(DateTime::<Utc>::MAX_UTC)
}

impl RuleMachine {
    /// A rule in the normal state.
    pub fn new(rule: Rule) -> Self {
        RuleMachine {
            rule,
            state: AlarmState::Normal,
            condition: false,
            pending_since: None,
            shelved_until: None,
            since: None,
            last_class: None,
            last_value: None,
        }
    }

    /// Current state.
    pub fn state(&self) -> AlarmState {
        self.state
    }

    /// When the current state began (data time).
    pub fn since(&self) -> Option<DateTime<Utc>> {
        self.since
    }

    /// The last value seen.
    pub fn last_value(&self) -> Option<Input> {
        self.last_value
    }

    /// Whether the condition currently holds (after its delays).
    pub fn condition(&self) -> bool {
        self.condition
    }

    /// When a shelved alarm returns to service.
    pub fn shelved_until(&self) -> Option<DateTime<Utc>> {
        self.shelved_until
    }

    /// Forgets a running on- or off-delay (the clock it ran on was replaced);
    /// it starts again at the next evaluation.
    pub fn restart_delays(&mut self) {
        self.pending_since = None;
    }

    /// The next data time at which this machine changes without a new
    /// reading: a running on- or off-delay runs out, or a shelving expires.
    #[inline(always)]
    pub fn deadline(&self) -> Option<DateTime<Utc>> {
        // Asked of every machine at every reading; nearly always none.
        if self.pending_since.is_none() && self.state != AlarmState::Shelved {
            return None;
        }
        self.running_deadline()
    }

    /// [`RuleMachine::deadline`] while a delay or a shelving runs.
    #[inline(never)]
    fn running_deadline(&self) -> Option<DateTime<Utc>> {
        let delay = if self.condition {
            self.rule.off_delay_s
        } else {
            self.rule.on_delay_s
        };
        let pending = self.pending_since.map(|since| after(since, delay));
        let shelf = self
            .shelved_until
            .filter(|_| self.state == AlarmState::Shelved);
        match (pending, shelf) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        }
    }

    /// The raw condition for an input, with hysteresis: `None` when the
    /// input says nothing (unusable).
    fn raw(&mut self, input: Input) -> Option<bool> {
        let active = self.condition;
        match (&self.rule.test, input) {
            (Test::Above(t), Input::Value(v)) => Some(if active {
                v > self.rule.deadband.clear_level(*t, true)
            } else {
                v > *t
            }),
            (Test::Below(t), Input::Value(v)) => Some(if active {
                v < self.rule.deadband.clear_level(*t, false)
            } else {
                v < *t
            }),
            (Test::Above(_), Input::OverRange) | (Test::Below(_), Input::UnderRange) => Some(true),
            (Test::Above(_), Input::UnderRange) | (Test::Below(_), Input::OverRange) => Some(false),
            (Test::Enters(c), Input::Class(k)) => Some(k == *c),
            (Test::Leaves(c), Input::Class(k)) => Some(k != *c),
            (Test::Crosses(a, b), Input::Class(k)) => {
                let prev = self.last_class.replace(k);
                let (lo, hi) = if a.rank() < b.rank() {
                    (*a, *b)
                } else {
                    (*b, *a)
                };
                Some(prev.is_some_and(|p| {
                    (p.rank() <= lo.rank() && k.rank() >= hi.rank())
                        || (p.rank() >= hi.rank() && k.rank() <= lo.rank())
                }))
            }
            _ => None,
        }
    }

    fn set(
        &mut self,
        time: DateTime<Utc>,
        to: AlarmState,
        out: &mut Vec<Transition>,
        note: Option<String>,
    ) {
        if to != self.state {
            out.push(Transition {
                time,
                from: self.state,
                to,
                value: self.last_value,
                note,
            });
            self.state = to;
            self.since = Some(time);
        }
    }

    /// Whether the state is one the condition as it is keeps (an update
    /// with the same condition changes nothing).
    #[inline]
    fn settled(&self) -> bool {
        match (self.state, self.condition) {
            (AlarmState::Normal | AlarmState::ReturnedUnacknowledged, c) => !c,
            (AlarmState::Unacknowledged | AlarmState::Acknowledged, c) => c || self.rule.latching,
            (AlarmState::Shelved | AlarmState::SuppressedByDesign, _) => false,
        }
    }

    /// Feeds one input at data time `time`; returns the state changes.
    pub fn update(&mut self, time: DateTime<Utc>, input: Input) -> Vec<Transition> {
        // Nearly every reading: a value on the side of the threshold the
        // condition is already on, no delay running, in a state the
        // condition keeps. Only the last value changes.
        if self.quiet(input) {
            return Vec::new();
        }
        self.update_in_full(time, input)
    }

    /// The shortcut of [`RuleMachine::update`]: whether `input` changes
    /// nothing but the last value (which it then records). Nearly every
    /// reading: a value, an off-scale reading or a class on the side of the
    /// threshold the condition is already on, no delay running, in a state
    /// the condition keeps; a rule switched off (by its enable condition or
    /// a gauge switched off) that is already suppressed by design; no
    /// usable input while nothing waits on one.
    #[inline(always)]
    pub fn quiet(&mut self, input: Input) -> bool {
        let Input::Value(v) = input else {
            return self.quiet_other(input);
        };
        if self.pending_since.is_some() || self.since.is_none() || !self.settled() {
            return false;
        }
        // As `raw`, for the two tests a value decides.
        let active = self.condition;
        let raw = match self.rule.test {
            Test::Above(t) if active => v > self.rule.deadband.clear_level(t, true),
            Test::Above(t) => v > t,
            Test::Below(t) if active => v < self.rule.deadband.clear_level(t, false),
            Test::Below(t) => v < t,
            _ => return false,
        };
        if raw != active {
            return false;
        }
        self.last_value = Some(input);
        true
    }

    /// The values for which [`RuleMachine::quiet`] holds in the present
    /// state, as a band (or a part of them: a value outside may still be
    /// quiet, never the other way); `None` when there is no such band (a
    /// delay running, a state the condition does not keep, a test no value
    /// decides, a threshold that is not a number).
    pub fn quiet_values(&self) -> Option<Band> {
        if self.pending_since.is_some() || self.since.is_none() || !self.settled() {
            return None;
        }
        let (low, high) = (f64::NEG_INFINITY, f64::INFINITY);
        // Where `raw` (as in `quiet`) equals the condition.
        let band = match self.rule.test {
            // v > clear
            Test::Above(t) if self.condition => Band::new(
                (self.rule.deadband.clear_level(t, true), false),
                (high, true),
            ),
            // not v > t
            Test::Above(t) => Band::new((low, true), (t, true)),
            // v < clear
            Test::Below(t) if self.condition => Band::new(
                (low, true),
                (self.rule.deadband.clear_level(t, false), false),
            ),
            // not v < t
            Test::Below(t) => Band::new((t, true), (high, true)),
            _ => return None,
        };
        band.is_number().then_some(band)
    }

    /// What [`RuleMachine::quiet`] does to a value in
    /// [`RuleMachine::quiet_values`]: it becomes the last value.
    #[inline]
    pub fn note_quiet(&mut self, v: f64) {
        self.last_value = Some(Input::Value(v));
    }

    /// [`RuleMachine::quiet`] for an input that is not a value (out of
    /// line: the shortcut for a value is inlined where it is taken).
    #[inline(never)]
    fn quiet_other(&mut self, input: Input) -> bool {
        let raw = match (input, &self.rule.test) {
            (Input::OverRange, Test::Above(_)) | (Input::UnderRange, Test::Below(_)) => true,
            (Input::UnderRange, Test::Above(_)) | (Input::OverRange, Test::Below(_)) => false,
            (Input::Class(k), Test::Enters(c)) => k == *c,
            (Input::Class(k), Test::Leaves(c)) => k != *c,
            (Input::Disabled, _) => return self.quiet_disabled(),
            (Input::Unusable, _) => return self.quiet_unusable(),
            _ => return false,
        };
        if raw != self.condition
            || self.pending_since.is_some()
            || self.since.is_none()
            || !self.settled()
        {
            return false;
        }
        self.last_value = Some(input);
        true
    }

    /// [`RuleMachine::quiet`] for [`Input::Disabled`]: what the update in
    /// full would leave as it is (no shelving to expire, the condition,
    /// delay and class already cleared, the state already suppressed).
    fn quiet_disabled(&mut self) -> bool {
        let still = self.since.is_some()
            && self.state == AlarmState::SuppressedByDesign
            && !self.condition
            && self.pending_since.is_none()
            && self.last_class.is_none();
        if still {
            self.last_value = Some(Input::Disabled);
        }
        still
    }

    /// [`RuleMachine::quiet`] for [`Input::Unusable`]: the state is held
    /// and the last value kept; only a running delay (restarted), a
    /// shelving (that may expire) or a suppression (that ends) would move.
    fn quiet_unusable(&self) -> bool {
        self.since.is_some()
            && self.pending_since.is_none()
            && !matches!(
                self.state,
                AlarmState::Shelved | AlarmState::SuppressedByDesign
            )
    }

    /// [`RuleMachine::update`] without its shortcut for the common case.
    pub(super) fn update_in_full(&mut self, time: DateTime<Utc>, input: Input) -> Vec<Transition> {
        let mut out = Vec::new();
        if self.since.is_none() {
            self.since = Some(time);
        }
        if input != Input::Unusable {
            self.last_value = Some(input);
        }
        // Shelving expires on data time.
        if self.state == AlarmState::Shelved
            && let Some(until) = self.shelved_until
            && time >= until
        {
            self.shelved_until = None;
            let to = if self.condition {
                AlarmState::Unacknowledged
            } else {
                AlarmState::Normal
            };
            self.set(time, to, &mut out, Some("shelving expired".into()));
        }
        if input == Input::Disabled {
            self.condition = false;
            self.pending_since = None;
            self.last_class = None;
            if self.state != AlarmState::Shelved {
                self.set(time, AlarmState::SuppressedByDesign, &mut out, None);
            }
            return out;
        }
        if self.state == AlarmState::SuppressedByDesign {
            self.set(time, AlarmState::Normal, &mut out, None);
        }
        let Some(raw) = self.raw(input) else {
            // No usable value: hold the state and restart any delay.
            self.pending_since = None;
            return out;
        };
        let delay = if self.condition {
            self.rule.off_delay_s
        } else {
            self.rule.on_delay_s
        };
        if raw != self.condition {
            let since = *self.pending_since.get_or_insert(time);
            if seconds(since, time) >= delay {
                self.condition = raw;
                self.pending_since = None;
            }
        } else {
            self.pending_since = None;
        }
        if self.state == AlarmState::Shelved {
            return out;
        }
        let to = match (self.state, self.condition) {
            (AlarmState::Normal | AlarmState::ReturnedUnacknowledged, true) => {
                AlarmState::Unacknowledged
            }
            (AlarmState::Unacknowledged, false) if !self.rule.latching => {
                AlarmState::ReturnedUnacknowledged
            }
            (AlarmState::Acknowledged, false) if !self.rule.latching => AlarmState::Normal,
            (s, _) => s,
        };
        self.set(time, to, &mut out, None);
        // A crossing is momentary: the condition is spent once reported.
        if matches!(self.rule.test, Test::Crosses(..)) {
            self.condition = false;
        }
        out
    }

    /// Operator acknowledges the alarm. Returns the change, or why nothing
    /// changed.
    pub fn acknowledge(
        &mut self,
        time: DateTime<Utc>,
        who: &str,
    ) -> Result<Vec<Transition>, String> {
        let mut out = Vec::new();
        let note = Some(format!("acknowledged by {who}"));
        match self.state {
            AlarmState::Unacknowledged if self.condition => {
                self.set(time, AlarmState::Acknowledged, &mut out, note);
            }
            // Latched, and the condition has since cleared.
            AlarmState::Unacknowledged | AlarmState::ReturnedUnacknowledged => {
                self.set(time, AlarmState::Normal, &mut out, note);
            }
            AlarmState::Acknowledged if !self.condition => {
                // A latched alarm is reset by acknowledging it once clear.
                self.set(time, AlarmState::Normal, &mut out, note);
            }
            s => return Err(format!("{} is {s}; nothing to acknowledge", self.rule.id)),
        }
        Ok(out)
    }

    /// Operator shelves the alarm until `until` (data time).
    pub fn shelve(
        &mut self,
        time: DateTime<Utc>,
        until: DateTime<Utc>,
        who: &str,
    ) -> Result<Vec<Transition>, String> {
        if until <= time {
            return Err("a shelving must end in the future".into());
        }
        if self.state == AlarmState::SuppressedByDesign {
            return Err(format!(
                "{} is suppressed by design; nothing to shelve",
                self.rule.id
            ));
        }
        let mut out = Vec::new();
        self.shelved_until = Some(until);
        let note = Some(format!(
            "shelved by {who} until {}",
            crate::timefmt::write_rfc3339(until)
        ));
        self.set(time, AlarmState::Shelved, &mut out, note);
        Ok(out)
    }

    /// Operator returns a shelved alarm to service now.
    pub fn unshelve(&mut self, time: DateTime<Utc>, who: &str) -> Result<Vec<Transition>, String> {
        if self.state != AlarmState::Shelved {
            return Err(format!("{} is not shelved", self.rule.id));
        }
        self.shelved_until = None;
        let mut out = Vec::new();
        let to = if self.condition {
            AlarmState::Unacknowledged
        } else {
            AlarmState::Normal
        };
        self.set(time, to, &mut out, Some(format!("unshelved by {who}")));
        Ok(out)
    }
}
