//! The chamber pressure: at each moment of data time, the reading of the
//! best gauge that is in its range. A gas-independent gauge (capacitance)
//! comes first, then the gas-corrected gas-dependent ones (thermal,
//! combined, ionization) in the order configured, then channels no gauge
//! describes. A gauge that is over or under its range, stale, switched off or
//! faulty is never chosen. A configuration may give its own order, and may
//! fix the gauge a quantity uses (e.g. the mean free path always from the
//! ionization gauge).
//!
//! Rules and gate conditions that name no gauge (and no `default_gauge` is
//! set) watch the chamber pressure, written as the gauge id [`AUTO`].

use std::collections::BTreeMap;

use super::quantity::Quantity;

/// The id under which rules, conditions and displays name the chamber
/// pressure. No gauge may have this id.
pub const AUTO: &str = "auto";

/// How the chamber pressure is chosen.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ChamberPressure {
    /// Gauges in order of preference. Empty: every configured gauge, the
    /// gas-independent ones first, then the rest in config order, then
    /// pressure channels no gauge describes, by id.
    pub order: Vec<String>,
    /// A gauge fixed for a quantity, by the quantity's config name
    /// (`mean_free_path`, `exposure`, `regime` … see [`Quantity::name`]).
    pub fixed: BTreeMap<String, String>,
}

impl ChamberPressure {
    /// The gauge fixed for quantity `q`, if any.
    pub fn fixed_for(&self, q: &Quantity) -> Option<&str> {
        self.fixed.get(q.name()).map(String::as_str)
    }
}

/// Where the chamber pressure of a quantity comes from now.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ChamberSource {
    /// The gauge.
    pub gauge: String,
    /// Whether the configuration fixes this gauge for the quantity (rather
    /// than the automatic choice).
    pub fixed: bool,
}
