//! The gas in force during a run: the base gas of the configuration, a
//! configured step whose condition holds (the first that matches), a gas
//! given by the log, or one an operator chose. The monitor re-derives the
//! kinetics and re-corrects gas-dependent gauges with it at each data time.

use chrono::{DateTime, Utc};
use std::fmt;

use super::syntax::Condition;
use crate::engine::mixture::Mixture;

/// A configured gas step: while all its conditions hold and data time is
/// inside its window, its gas is in force.
#[derive(Debug, Clone)]
pub struct GasStep {
    /// Id, shown as where the gas came from.
    pub id: String,
    /// The gas or mixture of the step.
    pub mixture: Mixture,
    /// Conditions that must all hold (none: the window alone decides).
    pub when: Vec<Condition>,
    /// Data time from which the step may apply (inclusive).
    pub from: Option<DateTime<Utc>>,
    /// Data time until which the step may apply (exclusive).
    pub until: Option<DateTime<Utc>>,
}

impl GasStep {
    /// Whether data time `t` is inside the step's window.
    pub fn in_window(&self, t: DateTime<Utc>) -> bool {
        self.from.is_none_or(|f| t >= f) && self.until.is_none_or(|u| t < u)
    }
}

/// Where the gas in force came from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum GasOrigin {
    /// The configuration's `[gas]`.
    Base,
    /// A configured step, by id.
    Step(String),
    /// The log's gas column.
    Log,
    /// An operator's choice, by user.
    Operator(String),
}

impl fmt::Display for GasOrigin {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            GasOrigin::Base => f.write_str("config"),
            GasOrigin::Step(id) => write!(f, "step {id}"),
            GasOrigin::Log => f.write_str("log"),
            GasOrigin::Operator(user) => write!(f, "operator {user}"),
        }
    }
}

/// An operator's choice of gas: automatic (config steps, the log, the
/// base gas), or one gas or mixture fixed until changed again.
#[derive(Debug, Clone, PartialEq)]
pub enum GasChoice {
    /// Follow the configured steps and the log.
    Auto,
    /// This gas, whatever the steps say.
    Fixed(Mixture),
}

impl GasChoice {
    /// The word or gas label shown and written in events.
    pub fn label(&self) -> String {
        match self {
            GasChoice::Auto => "auto".into(),
            GasChoice::Fixed(m) => m.label(),
        }
    }
}
