//! The dashboard: `rarefy watch` (live) and `rarefy replay` (a recorded log,
//! on data time).
//!
//! * [`app`]: the state, plain data, with bounded decimated [`history`];
//! * [`keyframe`]: the points a replay's seek starts from;
//! * [`keys`]: what each key does, apart from drawing;
//! * [`render`]: one function per panel, and the layout;
//! * [`run`]: the event loops; [`term`]: the terminal and its restoration.
//!
//! Advisory only: the help screen carries the safety caution.

pub mod app;
pub mod history;
pub mod keyframe;
pub mod keys;
pub mod render;
pub mod run;
pub mod term;

pub use app::App;

// The core's and the app crate's modules, reachable as `crate::…` here.
use rarefy_app::{config, record};
use rarefy_core::{alarm, engine, gas, log, sample, units};
