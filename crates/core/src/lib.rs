//! rarefy's pure core: everything that turns vacuum-gauge readings into gas
//! kinetics, alarm states and log rows, with no I/O, no async runtime and no
//! clock. Time enters only as data (each sample carries its own timestamp),
//! so the same input always gives the same output.
//!
//! * [`units`] parses and prints quantities with their units;
//! * [`gas`] is the gas table, every value with its source;
//! * [`engine`] derives number density, mean free path, Knudsen number and
//!   flow regime, impingement, monolayer time and exposure, and corrects
//!   gas-dependent gauge readings;
//! * [`sample`] is the data model (readings, statuses, source events);
//! * [`parse`] frames byte streams into lines and decodes them (templates,
//!   the plain format, log rows);
//! * [`timefmt`] reads time formats and timestamps (templates and foreign
//!   logs share it);
//! * [`log`] reads and writes log format v1 (and reads foreign CSV logs) on
//!   any `Read`/`Write`;
//! * [`alarm`] holds the ISA-18.2 rule state machines, readiness gates, the
//!   condition syntax and the [`alarm::Monitor`] that drives them on data
//!   time;
//! * [`sim`] is the simulated chamber.
//!
//! ```
//! use rarefy_core::units::{parse, PressureUnit};
//! let p = parse::<PressureUnit>("1e-6 mbar").unwrap();
//! assert!((p.si - 1e-4).abs() < 1e-18);
//! ```
#![deny(missing_docs)]

/// The caution shown by `--help`, the README and the dashboard's help screen.
pub const CAUTION: &str = "\
rarefy is advisory software, not a safety interlock or a safety-rated system. \
Vacuum vessels can implode; vents and pump exhausts may carry toxic, flammable \
or pyrophoric process gases; ionization gauges use high voltage. Follow your \
site's procedures, local codes and the equipment manuals, and defer to \
qualified staff.";

pub mod alarm;
pub mod analysis;
pub mod engine;
pub mod gas;
pub mod log;
pub mod numfmt;
pub mod parse;
pub mod report;
pub mod sample;
pub mod sim;
pub mod suggest;
pub mod timefmt;
pub mod units;
