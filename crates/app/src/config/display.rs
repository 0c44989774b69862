//! `[display]`: units and the trend history.

use super::{Errors, file};
use crate::units::{PressureUnit, TemperatureUnit};

/// Display preferences.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Display {
    /// Unit pressures are shown in.
    pub pressure_unit: PressureUnit,
    /// Unit temperatures are shown in.
    pub temperature_unit: TemperatureUnit,
    /// Length of the trend history, s.
    pub history_s: f64,
}

impl Default for Display {
    fn default() -> Self {
        Display {
            pressure_unit: PressureUnit::Mbar,
            temperature_unit: TemperatureUnit::C,
            history_s: 3600.0,
        }
    }
}

/// Resolves `[display]`.
pub(super) fn resolve(errs: &mut Errors<'_>, d: file::DisplaySection) -> Display {
    let defaults = Display::default();
    Display {
        pressure_unit: d.pressure_unit.unwrap_or(defaults.pressure_unit),
        temperature_unit: d.temperature_unit.unwrap_or(defaults.temperature_unit),
        history_s: match d.history {
            Some(h) if h.get_ref().si <= 0.0 => {
                errs.err(h.span(), "history must be longer than zero");
                defaults.history_s
            }
            Some(h) => h.get_ref().si,
            None => defaults.history_s,
        },
    }
}
