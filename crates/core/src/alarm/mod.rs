//! Alarms and readiness gates: pure state machines driven by readings and data
//! time, so replay, record, report and the dashboard give the same events for
//! the same log.
//!
//! * [`rule`]: a rule on one quantity of one gauge, with deadband, delays,
//!   severity and latching, in the states of ISA-18.2 / IEC 62682.
//! * [`gate`]: conditions that must all hold continuously for a duration.
//! * [`syntax`]: the small language of conditions and one-off alarms.
//! * [`gas_step`]: the gas in force (base, config steps, log, operator).
//! * [`chamber`]: the chamber pressure, the best gauge in range now.
//! * [`monitor`]: keeps each gauge's latest kinetics and drives both.
//! * [`event`]: the transitions, as JSON lines.
//!
//! Alarms are advisory: rarefy is not a safety interlock.

pub mod chamber;
pub mod event;
pub mod gas_step;
pub mod gate;
pub mod monitor;
pub mod quantity;
pub mod rate_window;
pub mod rule;
pub mod syntax;
pub mod track_map;

#[cfg(test)]
mod chamber_tests;
#[cfg(test)]
mod tests;

pub use chamber::{AUTO, ChamberPressure, ChamberSource};
pub use event::{Actor, Change, EVENT_VERSION, Event, EventKind, Operation};
pub use gas_step::{GasChoice, GasOrigin, GasStep};
pub use gate::{Gate, GateMachine, GateState};
pub use monitor::{Monitor, MonitorSetup, PackedMonitor, RuleSpec};
pub use rule::{AlarmState, Rule, RuleMachine, Severity};
