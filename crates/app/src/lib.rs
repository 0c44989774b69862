//! rarefy's edges around the pure core: loading the configuration from
//! files, the sources (tokio tasks for serial ports, TCP, followed files,
//! stdin and the paced simulator), the recorder, actions, and the one ingest
//! pipeline that every command drives (sources → decode → monitor → sinks).
#![deny(missing_docs)]

pub mod action;
pub mod config;
pub mod logfile;
pub mod operator;
pub mod pipeline;
pub mod record;
pub mod source;

// The core's modules, reachable as `crate::…` inside this crate.
use rarefy_core::{alarm, engine, gas, log, parse, report, sample, sim, suggest, timefmt, units};
