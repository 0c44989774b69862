//! Gauge gas correction: turning an N2-equivalent reading into the true
//! pressure of the gas in the chamber.
//!
//! A thermal-conductivity or ionization gauge calibrated for N2 reads
//! p_ind = S·p for a gas of relative sensitivity S, so p = p_ind/S; for a
//! mixture S = Σ x_i S_i. Gauges whose response is not a constant factor get a
//! calibration table, interpolated log-log.

use serde::{Deserialize, Serialize};
use std::fmt;

use super::mixture::Mixture;
use super::{GaugeModel, GaugeOverrides};

/// Kind of gauge, which decides whether and how the reading depends on gas.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum GaugeKind {
    /// Capacitance diaphragm gauge: measures force per area, gas-independent.
    #[default]
    Capacitance,
    /// Thermal-conductivity (Pirani-type) gauge: gas-dependent.
    Thermal,
    /// Hot- or cold-cathode ionization gauge: gas-dependent.
    Ionization,
    /// Thermal and ionization gauge in one head, switching at
    /// [`COMBINED_CROSSOVER_PA`].
    Combined,
}

/// Below this indicated pressure a combined gauge reports its ionization
/// element, above it the thermal one (1e-3 mbar; common practice, no source).
pub const COMBINED_CROSSOVER_PA: f64 = 0.1;

impl GaugeKind {
    /// The word used on the command line and in configs.
    pub fn as_str(self) -> &'static str {
        match self {
            GaugeKind::Capacitance => "capacitance",
            GaugeKind::Thermal => "thermal",
            GaugeKind::Ionization => "ionization",
            GaugeKind::Combined => "combined",
        }
    }

    /// Whether the reading depends on the gas.
    pub fn is_gas_dependent(self) -> bool {
        !matches!(self, GaugeKind::Capacitance)
    }

    /// The element that produced a reading of `indicated_pa`.
    pub fn element(self, indicated_pa: f64) -> GaugeKind {
        match self {
            GaugeKind::Combined if indicated_pa < COMBINED_CROSSOVER_PA => GaugeKind::Ionization,
            GaugeKind::Combined => GaugeKind::Thermal,
            k => k,
        }
    }

    /// Typical measuring range, Pa (low, high), used to flag readings when
    /// a gauge has no configured range. Common practice, no source: hot-cathode
    /// ionization 1e-10 to 1e-2 mbar; thermal 1e-4 mbar to atmosphere;
    /// capacitance gauges span about four decades below a full scale this
    /// table does not know, so they get no default.
    pub fn typical_range_pa(self) -> Option<(f64, f64)> {
        match self {
            GaugeKind::Capacitance => None,
            GaugeKind::Thermal => Some((1e-2, 1.1e5)),
            GaugeKind::Ionization => Some((1e-8, 1.0)),
            GaugeKind::Combined => Some((1e-8, 1.1e5)),
        }
    }
}

impl fmt::Display for GaugeKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// A problem with a calibration table.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CalibrationError {
    /// Fewer than two points.
    #[error("a calibration table needs at least two points, got {0}")]
    TooFew(usize),
    /// A point is zero, negative or not finite.
    #[error(
        "calibration point {index} ({indicated}, {actual}) must have positive, finite pressures"
    )]
    NotPositive {
        /// Zero-based point index.
        index: usize,
        /// Indicated value.
        indicated: f64,
        /// True value.
        actual: f64,
    },
    /// Points not strictly increasing in both columns.
    #[error(
        "calibration points must increase strictly in both columns; point {index} ({indicated}, {actual}) does not"
    )]
    NotMonotonic {
        /// Zero-based point index.
        index: usize,
        /// Indicated value.
        indicated: f64,
        /// True value.
        actual: f64,
    },
}

/// A gauge's response for one gas: indicated → true pressure pairs, Pa,
/// interpolated linearly in log p–log p.
#[derive(Debug, Clone, PartialEq)]
pub struct CalibrationTable {
    /// (log10 indicated, log10 true), strictly increasing.
    log_points: Vec<(f64, f64)>,
}

/// Whether a conversion stayed inside the table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum TableFit {
    /// Inside the table.
    Inside,
    /// Outside; the end segment was extended.
    Extrapolated {
        /// Lowest indicated pressure in the table, Pa.
        min_pa: f64,
        /// Highest indicated pressure in the table, Pa.
        max_pa: f64,
    },
}

impl CalibrationTable {
    /// Builds a table from (indicated, true) pairs in Pa.
    pub fn new(points: &[(f64, f64)]) -> Result<Self, CalibrationError> {
        if points.len() < 2 {
            return Err(CalibrationError::TooFew(points.len()));
        }
        let mut log_points = Vec::with_capacity(points.len());
        for (index, &(indicated, actual)) in points.iter().enumerate() {
            let ok = |x: f64| x.is_finite() && x > 0.0;
            if !ok(indicated) || !ok(actual) {
                return Err(CalibrationError::NotPositive {
                    index,
                    indicated,
                    actual,
                });
            }
            let p = (indicated.log10(), actual.log10());
            if let Some(&(li, la)) = log_points.last()
                && (p.0 <= li || p.1 <= la)
            {
                return Err(CalibrationError::NotMonotonic {
                    index,
                    indicated,
                    actual,
                });
            }
            log_points.push(p);
        }
        Ok(CalibrationTable { log_points })
    }

    /// The indicated range covered, Pa.
    pub fn range_pa(&self) -> (f64, f64) {
        let first = self.log_points[0].0;
        let last = self.log_points[self.log_points.len() - 1].0;
        (10f64.powf(first), 10f64.powf(last))
    }

    /// True pressure for an indicated one, with whether it was extrapolated.
    pub fn convert(&self, indicated_pa: f64) -> (f64, TableFit) {
        let x = indicated_pa.log10();
        let pts = &self.log_points;
        // Segment index: the last point at or below x, clamped so the end
        // segments extend outwards.
        let i = pts
            .partition_point(|&(li, _)| li <= x)
            .saturating_sub(1)
            .min(pts.len() - 2);
        let (x0, y0) = pts[i];
        let (x1, y1) = pts[i + 1];
        let y = y0 + (y1 - y0) * (x - x0) / (x1 - x0);
        let (min_pa, max_pa) = self.range_pa();
        let fit = if x < pts[0].0 || x > pts[pts.len() - 1].0 {
            TableFit::Extrapolated { min_pa, max_pa }
        } else {
            TableFit::Inside
        };
        (10f64.powf(y), fit)
    }
}

/// How a gauge's reading maps to true pressure for the chamber's gas.
#[derive(Debug, Clone, PartialEq)]
pub enum Response {
    /// The reading is the true pressure.
    Direct,
    /// p = p_ind / S.
    Sensitivity(f64),
    /// A calibration table.
    Table(CalibrationTable),
    /// No factor is known for this element of a combined gauge: its
    /// readings cannot be corrected (the other element's still can).
    Missing(super::GaugeError),
}

impl Response {
    /// Converts an indicated pressure; returns the true pressure and whether a
    /// table had to be extrapolated.
    pub fn correct(&self, indicated_pa: f64) -> (f64, TableFit) {
        match self {
            Response::Direct => (indicated_pa, TableFit::Inside),
            Response::Sensitivity(s) => (indicated_pa / s, TableFit::Inside),
            Response::Table(t) => t.convert(indicated_pa),
            Response::Missing(_) => (f64::NAN, TableFit::Inside),
        }
    }
}

/// A gauge as a config describes it, before any physics: plain settings.
#[derive(Debug, Clone, PartialEq)]
pub struct GaugeSettings {
    /// Kind of gauge.
    pub kind: GaugeKind,
    /// Gas the gauge sees (the chamber's, or the gauge's own).
    pub mixture: Mixture,
    /// The pure gas the gauge is calibrated for, when not N2.
    pub calibration_gas: Option<Mixture>,
    /// Sensitivities, calibration table and range as given.
    pub overrides: GaugeOverrides,
}

/// Which of a gauge's settings a problem is about, so that a config can
/// point at it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GaugeSetting {
    /// The calibration gas.
    CalibrationGas,
    /// The response for the gauge's gas (its sensitivities or its gas).
    Response,
}

/// A problem with a gauge's settings: where, and the whole message.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct GaugeProblem {
    /// The setting at fault.
    pub setting: GaugeSetting,
    /// What is wrong, naming the gauge.
    pub message: String,
}

impl GaugeModel {
    /// Builds the model of gauge `id` from its settings. Sensitivities are
    /// relative to N2: a gauge calibrated for another gas reads S_gas / S_cal
    /// of the true pressure, so its factors are rescaled (unless a
    /// calibration table replaces them). `Err` lists every problem, in the
    /// order found; a [`GaugeSetting::Response`] problem is always last.
    pub fn from_settings(id: &str, s: &GaugeSettings) -> Result<GaugeModel, Vec<GaugeProblem>> {
        Self::build(id, s, true)
    }

    /// Builds the model of gauge `id` for the gas in its settings as
    /// [`GaugeModel::from_settings`] does, but lets one element of a
    /// combined gauge go without a factor (its readings then correct to
    /// NaN, which the monitor never passes off as a pressure). Used when
    /// the gas changes during a run.
    pub fn for_gas(id: &str, s: &GaugeSettings) -> Result<GaugeModel, Vec<GaugeProblem>> {
        Self::build(id, s, false)
    }

    fn build(
        id: &str,
        s: &GaugeSettings,
        both_elements: bool,
    ) -> Result<GaugeModel, Vec<GaugeProblem>> {
        let mut problems = Vec::new();
        let mut overrides = s.overrides.clone();
        if let Some(cal_gas) = &s.calibration_gas
            && cal_gas
                .components()
                .first()
                .is_some_and(|c| c.gas.id != "N2")
            && overrides.table.is_none()
        {
            let mut scale = |kind: GaugeKind, user: Option<f64>| -> Option<f64> {
                let o = GaugeOverrides {
                    sensitivity: user,
                    ..GaugeOverrides::default()
                };
                let s_gas = GaugeModel::new(kind, &s.mixture, &o)
                    .ok()?
                    .correct(1.0)
                    .sensitivity?;
                match GaugeModel::new(kind, cal_gas, &GaugeOverrides::default()) {
                    Ok(m) => Some(s_gas / m.correct(1.0).sensitivity?),
                    Err(e) => {
                        problems.push(GaugeProblem {
                            setting: GaugeSetting::CalibrationGas,
                            message: format!("gauge `{id}`: {e}"),
                        });
                        None
                    }
                }
            };
            match s.kind {
                GaugeKind::Capacitance => {}
                GaugeKind::Combined => {
                    overrides.sensitivity = scale(GaugeKind::Ionization, overrides.sensitivity);
                    overrides.thermal_sensitivity =
                        scale(GaugeKind::Thermal, overrides.thermal_sensitivity);
                }
                k => overrides.sensitivity = scale(k, overrides.sensitivity),
            }
        }
        match GaugeModel::new(s.kind, &s.mixture, &overrides) {
            Ok(model) => {
                // A monitored combined gauge reads on both elements.
                if let Some(e) = model.missing().filter(|_| both_elements) {
                    problems.push(GaugeProblem {
                        setting: GaugeSetting::Response,
                        message: format!("gauge `{id}` ({}): {e}", s.kind),
                    });
                }
                if problems.is_empty() {
                    Ok(model)
                } else {
                    Err(problems)
                }
            }
            Err(e) => {
                problems.push(GaugeProblem {
                    setting: GaugeSetting::Response,
                    message: format!("gauge `{id}` ({}): {e}", s.kind),
                });
                Err(problems)
            }
        }
    }
}

/// Relative sensitivity of a mixture, S = Σ x_i S_i.
pub fn mixture_sensitivity(parts: impl IntoIterator<Item = (f64, f64)>) -> f64 {
    parts.into_iter().map(|(x, s)| x * s).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn argon_reading_is_corrected_by_its_sensitivity() {
        // Source: CRC Handbook sec. 15, S(Ar) = 1.4; REFERENCES.md example
        // (a, b): 1.0e-6 Pa indicated in pure Ar -> 7.143e-7 Pa.
        let (p, _) = Response::Sensitivity(1.4).correct(1.0e-6);
        assert!((p - 7.143e-7).abs() / 7.143e-7 < 1e-4, "{p}");
    }

    #[test]
    fn table_interpolates_log_log_and_flags_extrapolation() {
        let t = CalibrationTable::new(&[(1e-3, 2e-3), (1e-1, 1e-1), (10.0, 20.0)])
            .expect("valid table");
        // Halfway in log between 1e-3 and 1e-1 is 1e-2; halfway between
        // log(2e-3) and log(1e-1) is sqrt(2e-4).
        let (p, fit) = t.convert(1e-2);
        assert!((p - 2e-4f64.sqrt()).abs() / p < 1e-12);
        assert_eq!(fit, TableFit::Inside);
        let (p, _) = t.convert(1e-1);
        assert!((p - 1e-1).abs() < 1e-12);
        let (_, fit) = t.convert(100.0);
        assert!(matches!(fit, TableFit::Extrapolated { .. }));
        let (p, fit) = t.convert(1e-4);
        assert!(matches!(fit, TableFit::Extrapolated { .. }));
        assert!(p > 0.0 && p < 2e-3);
    }

    #[test]
    fn bad_tables_are_refused() {
        assert_eq!(
            CalibrationTable::new(&[(1.0, 1.0)]),
            Err(CalibrationError::TooFew(1))
        );
        assert!(matches!(
            CalibrationTable::new(&[(1.0, 1.0), (0.5, 2.0)]),
            Err(CalibrationError::NotMonotonic { index: 1, .. })
        ));
        assert!(matches!(
            CalibrationTable::new(&[(1.0, 1.0), (2.0, 1.0)]),
            Err(CalibrationError::NotMonotonic { index: 1, .. })
        ));
        assert!(matches!(
            CalibrationTable::new(&[(1.0, -1.0), (2.0, 1.0)]),
            Err(CalibrationError::NotPositive { index: 0, .. })
        ));
        assert!(matches!(
            CalibrationTable::new(&[(1.0, 1.0), (f64::NAN, 2.0)]),
            Err(CalibrationError::NotPositive { index: 1, .. })
        ));
    }

    fn gas(id: &str) -> Mixture {
        Mixture::pure(
            crate::gas::GasTable::builtin()
                .get(id)
                .unwrap_or_else(|e| panic!("{e}"))
                .clone(),
        )
    }

    fn settings(kind: GaugeKind, mixture: Mixture, cal: Option<Mixture>) -> GaugeSettings {
        GaugeSettings {
            kind,
            mixture,
            calibration_gas: cal,
            overrides: GaugeOverrides::default(),
        }
    }

    #[test]
    fn settings_build_the_model_with_the_calibration_gas_taken_out() {
        // An ionization gauge in argon reads 1.4x as N2-calibrated, 1x as
        // argon-calibrated.
        let n2_cal =
            GaugeModel::from_settings("g", &settings(GaugeKind::Ionization, gas("Ar"), None))
                .unwrap_or_else(|e| panic!("{e:?}"));
        assert_eq!(n2_cal.correct(1e-4).sensitivity, Some(1.4));
        let ar_cal = GaugeModel::from_settings(
            "g",
            &settings(GaugeKind::Ionization, gas("Ar"), Some(gas("Ar"))),
        )
        .unwrap_or_else(|e| panic!("{e:?}"));
        assert!((ar_cal.correct(1e-4).sensitivity.unwrap_or_default() - 1.0).abs() < 1e-12);
        // Capacitance gauges read true pressure whatever the calibration gas.
        let cdg = GaugeModel::from_settings(
            "g",
            &settings(GaugeKind::Capacitance, gas("Ar"), Some(gas("He"))),
        )
        .unwrap_or_else(|e| panic!("{e:?}"));
        assert_eq!(cdg.correct(1.0).pressure_pa, 1.0);
    }

    #[test]
    fn settings_problems_name_the_gauge_and_the_setting() {
        let mut s = settings(GaugeKind::Ionization, gas("N2"), None);
        s.overrides.sensitivity = Some(-1.0);
        assert_eq!(
            GaugeModel::from_settings("main", &s),
            Err(vec![GaugeProblem {
                setting: GaugeSetting::Response,
                message:
                    "gauge `main` (ionization): gauge sensitivity must be a positive number, got -1"
                        .into(),
            }])
        );
        // A calibration gas with no thermal sensitivity cannot be taken out.
        let mut odd = crate::gas::GasTable::builtin()
            .get("Ar")
            .unwrap_or_else(|e| panic!("{e}"))
            .clone();
        odd.id = "Qx".into();
        odd.thermal_sensitivity = None;
        let s = settings(GaugeKind::Thermal, gas("N2"), Some(Mixture::pure(odd)));
        let problems = GaugeModel::from_settings("pir", &s)
            .err()
            .unwrap_or_default();
        assert_eq!(problems.len(), 1, "{problems:?}");
        assert_eq!(problems[0].setting, GaugeSetting::CalibrationGas);
        assert!(
            problems[0]
                .message
                .starts_with("gauge `pir`: no thermal gauge sensitivity is known for Qx"),
            "{}",
            problems[0].message
        );
    }

    #[test]
    fn combined_gauge_switches_elements() {
        assert_eq!(GaugeKind::Combined.element(1e-4), GaugeKind::Ionization);
        assert_eq!(GaugeKind::Combined.element(10.0), GaugeKind::Thermal);
        assert_eq!(GaugeKind::Ionization.element(10.0), GaugeKind::Ionization);
    }
}
