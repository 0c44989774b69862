//! Log format v1: the recorder's CSV output, which replay and report read back
//! without any configuration.
//!
//! ```text
//! # rarefy log v1
//! # chamber: KV-7 sputter coater
//! # volume: 0.085 m3
//! # gas: N2
//! # source: sim:pumpdown
//! # started: 2026-12-01T19:00:00.000Z
//! time,chamber [mbar],foreline [mbar],wall [C],chamber.mean_free_path [m]
//! 2026-12-01T19:00:00.000Z,1.013e3,1.013e3,2.2e1,6.6e-8
//! 2026-12-01T19:00:01.000Z,over-range,,2.2e1,
//! ```
//!
//! * Line 1 identifies the format and its version. Further `# key: value`
//!   lines carry metadata, before the header row.
//! * The header row is `time` then one column per channel,
//!   `<channel> [<unit>]`; the unit says whether the channel is a pressure or a
//!   temperature. Columns whose unit is neither (`[m]`, `[1/m3]` …) are derived
//!   values, written for convenience and recomputed by readers.
//! * Times are RFC 3339 UTC with milliseconds.
//! * A cell holds a number (shortest exact form, so no digit is lost), a status
//!   word (`over-range`, `sensor-off` … — a bad reading is never written as a
//!   number), or nothing (no reading of that channel at that time).

pub mod v1;

pub use v1::{Column, ColumnKind, LogMeta, MAGIC};
