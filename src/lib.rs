//! rarefy turns vacuum-gauge readings into gas kinetics: number density, mean
//! free path, Knudsen number and flow regime per named length, wall
//! impingement rate, time to a monolayer and exposure; raises alarms, gates
//! process steps, records, and replays logs.
//!
//! The workspace is layered so that the physics stays pure:
//!
//! * `rarefy-core` (re-exported here as [`units`], [`gas`], [`engine`],
//!   [`sample`], [`parse`], [`log`], [`alarm`], [`sim`]): no I/O, no async
//!   runtime, no clock;
//! * `rarefy-app` ([`config`], [`source`], [`record`], [`action`],
//!   [`ingest`], [`pipeline`]): files, ports, sockets, tasks and the one
//!   ingest pipeline;
//! * `rarefy-dash` ([`ui`]): the terminal dashboard;
//! * [`cli`]: the command line, the only thing the binary calls.
//!
//! ```
//! use rarefy::units::{parse, PressureUnit};
//! let p = parse::<PressureUnit>("1e-6 mbar").unwrap();
//! assert!((p.si - 1e-4).abs() < 1e-18);
//! ```
#![deny(missing_docs)]

pub mod cli;

pub use rarefy_app::{action, config, logfile, operator, pipeline, record, source};
pub use rarefy_core::{
    alarm, engine, gas, log, parse, report, sample, sim, suggest, timefmt, units,
};
pub use rarefy_dash as ui;
