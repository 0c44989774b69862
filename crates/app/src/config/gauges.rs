//! `[[gauge]]`: each gauge's kind, gas, range, sensitivities and calibration,
//! resolved into plain settings that the core checks and turns into a
//! gas-response model.

use super::{Errors, file};
use crate::engine::GaugeModel;
use crate::engine::GaugeOverrides;
use crate::engine::gauge::{CalibrationTable, GaugeKind, GaugeSetting, GaugeSettings};
use crate::engine::mixture::Mixture;
use crate::gas::GasTable;
use crate::units::UnitKind;

/// A gauge as configured: plain settings, checked by the core when the
/// config was resolved.
#[derive(Debug, Clone, PartialEq)]
pub struct GaugeConfig {
    /// Short id, also the channel name in logs.
    pub id: String,
    /// Human label.
    pub label: String,
    /// Kind of gauge.
    pub kind: GaugeKind,
    /// Gas the gauge sees (the chamber's, or the gauge's own override).
    pub mixture: Mixture,
    /// The pure gas the gauge is calibrated for, when one is named.
    pub calibration_gas: Option<Mixture>,
    /// Sensitivities, calibration table and range as configured.
    pub overrides: GaugeOverrides,
    /// The gauge names a gas of its own (`gas = …`): it does not follow the
    /// chamber's gas when that changes during a run.
    pub own_gas: bool,
}

impl GaugeConfig {
    /// The settings the core builds the gauge's model from.
    pub fn settings(&self) -> GaugeSettings {
        GaugeSettings {
            kind: self.kind,
            mixture: self.mixture.clone(),
            calibration_gas: self.calibration_gas.clone(),
            overrides: self.overrides.clone(),
        }
    }

    /// Reading → true pressure, built by the core from the settings. `None`
    /// only for settings that a resolved config never holds (they were
    /// refused, with their location, when it was read).
    pub fn model(&self) -> Option<GaugeModel> {
        GaugeModel::from_settings(&self.id, &self.settings()).ok()
    }
}

/// Resolves the `[[gauge]]` tables: ids checked (well formed, unique), each
/// gauge's settings for its gas (`chamber_mixture` unless it names its own)
/// checked by the core.
pub(super) fn resolve(
    errs: &mut Errors<'_>,
    gases: &GasTable,
    chamber_mixture: &Mixture,
    sections: Vec<file::GaugeSection>,
) -> Vec<GaugeConfig> {
    let mut out = Vec::new();
    let mut ids = Vec::<String>::new();
    for g in sections {
        let id = g.id.get_ref().trim().to_string();
        if id.is_empty()
            || !id
                .chars()
                .all(|c| c.is_ascii_alphanumeric() || "_-.".contains(c))
        {
            errs.err(
                g.id.span(),
                "a gauge id must be non-empty and use only letters, digits, '_', '-' and '.'",
            );
            continue;
        }
        if ids.contains(&id) {
            errs.err(g.id.span(), format!("gauge id `{id}` is used twice"));
            continue;
        }
        if id == crate::alarm::AUTO {
            errs.err(
                g.id.span(),
                format!(
                    "`{id}` names the chamber pressure (the best gauge in range); give this gauge another id"
                ),
            );
            continue;
        }
        ids.push(id.clone());
        if let Some(gauge) = gauge(errs, gases, chamber_mixture, id, g) {
            out.push(gauge);
        }
    }
    out
}

fn gauge(
    errs: &mut Errors<'_>,
    gases: &GasTable,
    chamber_mixture: &Mixture,
    id: String,
    g: file::GaugeSection,
) -> Option<GaugeConfig> {
    let mixture = match &g.gas {
        Some(text) => super::gas::mixture(errs, gases, text)?,
        None => chamber_mixture.clone(),
    };
    let range_pa = match g.range {
        Some([lo, hi]) if lo.si >= hi.si => {
            errs.err(
                g.id.span(),
                format!("gauge `{id}`: range must be [low, high] with low < high"),
            );
            None
        }
        Some([lo, hi]) => Some((lo.si, hi.si)),
        None => None,
    };
    let table = match &g.calibration {
        Some(c) => {
            let points: Vec<(f64, f64)> = c
                .get_ref()
                .points
                .iter()
                .map(|[a, b]| (c.get_ref().unit.to_si(*a), c.get_ref().unit.to_si(*b)))
                .collect();
            match CalibrationTable::new(&points) {
                Ok(t) => Some(t),
                Err(e) => {
                    errs.err(c.span(), format!("gauge `{id}` calibration: {e}"));
                    return None;
                }
            }
        }
        None => None,
    };
    let overrides = GaugeOverrides {
        sensitivity: g.sensitivity.as_ref().map(|s| *s.get_ref()),
        thermal_sensitivity: g.thermal_sensitivity.as_ref().map(|s| *s.get_ref()),
        table,
        range_pa,
    };
    let calibration_gas = match &g.calibration_gas {
        Some(cal) => match gases.get(cal.get_ref()) {
            Ok(gas) => Some(Mixture::pure(gas.clone())),
            Err(e) => {
                errs.err(cal.span(), e.to_string());
                return None;
            }
        },
        None => None,
    };
    let settings = GaugeSettings {
        kind: g.kind,
        mixture,
        calibration_gas,
        overrides,
    };
    // The core checks the settings; each problem goes to the key it is about.
    let mut usable = true;
    if let Err(problems) = GaugeModel::from_settings(&id, &settings) {
        for p in problems {
            let span = match p.setting {
                GaugeSetting::CalibrationGas => g.calibration_gas.as_ref().map(|c| c.span()),
                GaugeSetting::Response => {
                    usable = false;
                    g.sensitivity
                        .as_ref()
                        .map(|s| s.span())
                        .or(g.gas.as_ref().map(|s| s.span()))
                }
            };
            errs.err(span.unwrap_or(g.id.span()), p.message);
        }
    }
    usable.then(|| GaugeConfig {
        own_gas: g.gas.is_some(),
        label: g.label.unwrap_or_else(|| id.clone()),
        id,
        kind: settings.kind,
        mixture: settings.mixture,
        calibration_gas: settings.calibration_gas,
        overrides: settings.overrides,
    })
}
