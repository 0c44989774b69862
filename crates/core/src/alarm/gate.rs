//! Readiness gates: all of a list of conditions held continuously for a
//! duration before a process step may start.

use chrono::{DateTime, Utc};
use serde::{Deserialize, Serialize};
use std::fmt;

use super::syntax::Condition;

/// A gate as configured.
#[derive(Debug, Clone, PartialEq)]
pub struct Gate {
    /// Id, unique among gates.
    pub id: String,
    /// Human label.
    pub label: String,
    /// Every one must hold.
    pub conditions: Vec<Condition>,
    /// For this long, continuously, s.
    pub hold_s: f64,
}

/// Gate states.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum GateState {
    /// A condition fails, or they have not held long enough yet.
    NotReady,
    /// All conditions have held for the duration.
    Ready,
}

impl GateState {
    /// The word.
    pub fn as_str(self) -> &'static str {
        match self {
            GateState::NotReady => "not-ready",
            GateState::Ready => "ready",
        }
    }
}

impl fmt::Display for GateState {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The outcome of one condition at one time.
#[derive(Debug, Clone, PartialEq)]
pub enum Check {
    /// It holds.
    Holds,
    /// It fails; the text says what the value is.
    Fails(String),
    /// It cannot be judged (bad or stale input): counts as failing.
    Unknown(String),
}

/// A change of a gate's state.
#[derive(Debug, Clone, PartialEq)]
pub struct GateTransition {
    /// Data time.
    pub time: DateTime<Utc>,
    /// Old state.
    pub from: GateState,
    /// New state.
    pub to: GateState,
    /// Why it is not ready (the first failing condition), when it is not.
    pub reason: Option<String>,
}

/// A gate with its state.
#[derive(Debug, Clone)]
pub struct GateMachine {
    /// The gate.
    pub gate: Gate,
    state: GateState,
    held_since: Option<DateTime<Utc>>,
    /// The first failing condition's explanation, when the checks carried
    /// one (and "no data yet" before any).
    reason: Option<String>,
    last_time: Option<DateTime<Utc>>,
    holding: Vec<bool>,
    /// The first condition that failed at the last evaluation, and whether
    /// it had held before (its deadband applied).
    failing_held: Option<(usize, bool)>,
}

impl GateMachine {
    /// A gate, not ready.
    pub fn new(gate: Gate) -> Self {
        GateMachine {
            gate,
            state: GateState::NotReady,
            held_since: None,
            reason: Some("no data yet".into()),
            last_time: None,
            holding: Vec::new(),
            failing_held: None,
        }
    }

    /// Current state.
    pub fn state(&self) -> GateState {
        self.state
    }

    /// Why it is not ready: the first failing condition and its value (when
    /// its check was explained; the monitor's gates are explained by
    /// [`super::Monitor::gate_reason`]), or that the conditions hold but not
    /// yet long enough.
    pub fn reason(&self) -> Option<String> {
        if let Some(r) = &self.reason {
            return Some(r.clone());
        }
        match (self.state, self.held_since, self.last_time) {
            (GateState::NotReady, Some(since), Some(now)) => {
                let held = crate::timefmt::seconds_between(since, now);
                Some(format!(
                    "all conditions hold; {:.0} s of {:.0} s to go",
                    (self.gate.hold_s - held).ceil(),
                    self.gate.hold_s
                ))
            }
            _ => None,
        }
    }

    /// The first condition that failed (or could not be judged) at the last
    /// evaluation, and whether it had held at the evaluation before (so
    /// its deadband applied): what explains it.
    pub fn failing_held(&self) -> Option<(usize, bool)> {
        self.failing_held
    }

    /// Seconds left until ready, when every condition holds now.
    pub fn time_left_s(&self) -> Option<f64> {
        if self.state == GateState::Ready {
            return Some(0.0);
        }
        let (since, now) = (self.held_since?, self.last_time?);
        Some((self.gate.hold_s - crate::timefmt::seconds_between(since, now)).max(0.0))
    }

    /// Seconds left until ready at data time `now` (which may lie after the
    /// last evaluation), when every condition holds.
    pub fn time_left_at(&self, now: DateTime<Utc>) -> Option<f64> {
        if self.state == GateState::Ready {
            return Some(0.0);
        }
        let since = self.held_since?;
        Some((self.gate.hold_s - crate::timefmt::seconds_between(since, now)).max(0.0))
    }

    /// The index of the first condition that failed (or could not be
    /// judged) at the last evaluation; `None` when all held or before any.
    pub fn failing(&self) -> Option<usize> {
        self.holding.iter().position(|h| !h)
    }

    /// Whether condition `index` held at the last evaluation: a condition
    /// with a deadband then keeps holding until its value is past the
    /// threshold by more than the deadband.
    pub fn was_holding(&self, index: usize) -> bool {
        self.holding.get(index).copied().unwrap_or(false)
    }

    /// Forgets how long the conditions have held (the clock it ran on was
    /// replaced); the hold starts again at the next evaluation.
    pub fn restart_hold(&mut self) {
        self.held_since = None;
    }

    /// The next data time at which the gate becomes ready without a new
    /// reading: its conditions have held since `held_since`.
    pub fn deadline(&self) -> Option<DateTime<Utc>> {
        match (self.state, self.held_since) {
            (GateState::NotReady, Some(since)) => Some(super::rule::after(since, self.gate.hold_s)),
            _ => None,
        }
    }

    /// Feeds the checks of every condition (in order) at data time `time`.
    /// A check may come unexplained (an empty reason: the monitor explains
    /// only when asked); the reason is then left to the caller, and
    /// [`GateMachine::failing_held`] says which condition to explain.
    pub fn update(&mut self, time: DateTime<Utc>, checks: &[Check]) -> Option<GateTransition> {
        self.last_time = Some(time);
        let first = checks.iter().position(|c| *c != Check::Holds);
        self.failing_held = first.map(|j| (j, self.was_holding(j)));
        self.holding.clear();
        self.holding
            .extend(checks.iter().map(|c| *c == Check::Holds));
        let failing = first.and_then(|j| match &checks[j] {
            Check::Holds => None,
            Check::Fails(why) | Check::Unknown(why) => Some((j, why)),
        });
        let to = match failing {
            Some((j, why)) => {
                self.held_since = None;
                self.reason = (!why.is_empty()).then(|| {
                    let text = self.gate.conditions.get(j).map_or("", |c| c.text.as_str());
                    format!("{text}: {why}")
                });
                GateState::NotReady
            }
            None => {
                let since = *self.held_since.get_or_insert(time);
                let held = crate::timefmt::seconds_between(since, time);
                // The time left is said when asked (`reason`).
                self.reason = None;
                if held >= self.gate.hold_s {
                    GateState::Ready
                } else {
                    GateState::NotReady
                }
            }
        };
        if to == self.state {
            return None;
        }
        let from = std::mem::replace(&mut self.state, to);
        Some(GateTransition {
            time,
            from,
            to,
            reason: self.reason(),
        })
    }
}
