//! `[[gauge]]`: each gauge's kind, gas, range, sensitivities and calibration,
//! resolved into its gas-response model.

use super::{Errors, file};
use crate::engine::GaugeModel;
use crate::engine::GaugeOverrides;
use crate::engine::gauge::{CalibrationTable, GaugeKind};
use crate::engine::mixture::Mixture;
use crate::gas::GasTable;
use crate::units::UnitKind;

/// A gauge as configured, with its gas response resolved.
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
    /// Reading → true pressure.
    pub model: GaugeModel,
}

/// Resolves the `[[gauge]]` tables: ids checked (well formed, unique), each
/// gauge's model built for its gas (`chamber_mixture` unless it names its
/// own).
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
    let mut overrides = GaugeOverrides {
        sensitivity: g.sensitivity.as_ref().map(|s| *s.get_ref()),
        thermal_sensitivity: g.thermal_sensitivity.as_ref().map(|s| *s.get_ref()),
        table,
        range_pa,
    };
    if let Some(cal) = &g.calibration_gas {
        let cal_gas = match gases.get(cal.get_ref()) {
            Ok(gas) => Mixture::pure(gas.clone()),
            Err(e) => {
                errs.err(cal.span(), e.to_string());
                return None;
            }
        };
        // Sensitivities are relative to N2; a gauge calibrated for another
        // gas reads S_gas / S_cal of the true pressure.
        if cal_gas.components()[0].gas.id != "N2" && overrides.table.is_none() {
            let scale = |kind: GaugeKind, user: Option<f64>, this: &mut Errors<'_>| {
                let o = GaugeOverrides {
                    sensitivity: user,
                    ..GaugeOverrides::default()
                };
                let s_gas = GaugeModel::new(kind, &mixture, &o)
                    .ok()?
                    .correct(1.0)
                    .sensitivity?;
                match GaugeModel::new(kind, &cal_gas, &GaugeOverrides::default()) {
                    Ok(m) => Some(s_gas / m.correct(1.0).sensitivity?),
                    Err(e) => {
                        this.err(cal.span(), format!("gauge `{id}`: {e}"));
                        None
                    }
                }
            };
            match g.kind {
                GaugeKind::Capacitance => {}
                GaugeKind::Combined => {
                    overrides.sensitivity =
                        scale(GaugeKind::Ionization, overrides.sensitivity, errs);
                    overrides.thermal_sensitivity =
                        scale(GaugeKind::Thermal, overrides.thermal_sensitivity, errs);
                }
                k => overrides.sensitivity = scale(k, overrides.sensitivity, errs),
            }
        }
    }
    match GaugeModel::new(g.kind, &mixture, &overrides) {
        Ok(model) => Some(GaugeConfig {
            label: g.label.unwrap_or_else(|| id.clone()),
            id,
            kind: g.kind,
            mixture,
            model,
        }),
        Err(e) => {
            let span = g
                .sensitivity
                .as_ref()
                .map(|s| s.span())
                .or(g.gas.as_ref().map(|s| s.span()))
                .unwrap_or(g.id.span());
            errs.err(span, format!("gauge `{id}` ({}): {e}", g.kind));
            None
        }
    }
}
