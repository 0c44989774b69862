//! rarefy turns vacuum-gauge readings into gas kinetics: number density, mean
//! free path, Knudsen number and flow regime per named length, wall
//! impingement rate, time to a monolayer and exposure.
//!
//! The crate is layered so that the physics stays pure:
//!
//! * [`units`] parses and prints quantities with their units;
//! * [`gas`] is the gas table, every value with its source;
//! * [`engine`] derives everything from pressure, temperature and gas, and
//!   corrects gas-dependent gauge readings; it knows nothing of terminals,
//!   ports or clocks;
//! * [`config`] reads and checks the TOML configuration, with located errors;
//! * [`cli`] is the command line.
//!
//! ```
//! use rarefy::units::{parse, PressureUnit};
//! let p = parse::<PressureUnit>("1e-6 mbar").unwrap();
//! assert!((p.si - 1e-4).abs() < 1e-18);
//! ```
#![deny(missing_docs)]

pub mod action;
pub mod alarm;
pub mod cli;
pub mod config;
pub mod engine;
pub mod gas;
pub mod log;
pub mod parse;
pub mod record;
pub mod sample;
pub mod sim;
pub mod source;
pub mod suggest;
pub mod ui;
pub mod units;
