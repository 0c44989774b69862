//! The simulated gauges: how each turns the true gas into a reading, with its
//! range, gas dependence, noise and switching behaviour.

use chrono::{DateTime, Utc};

use super::model::{N_SPECIES, Species};
use super::rng::Rng;
use crate::gas::GasTable;
use crate::sample::{ChannelInfo, ChannelUnit, Fault, Sample};
use crate::units::{PressureUnit, TemperatureUnit, UnitKind, ZERO_CELSIUS_K};

/// Channel id of the capacitance diaphragm gauge.
pub const CDG: &str = "cdg";
/// Channel id of the combined thermal + ionization gauge.
pub const CHAMBER: &str = "chamber";
/// Channel id of the separate ionization gauge.
pub const ION: &str = "ion";
/// Channel id of the wall thermocouple.
pub const WALL: &str = "wall";

/// Unit of every pressure channel.
pub const PRESSURE_UNIT: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);
/// Unit of the temperature channel.
pub const TEMPERATURE_UNIT: ChannelUnit = ChannelUnit::Temperature(TemperatureUnit::C);

/// Which gauge (for scripted dropouts).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum GaugeId {
    /// The capacitance gauge.
    Cdg,
    /// The combined gauge.
    Chamber,
    /// The ionization gauge.
    Ion,
    /// The wall thermocouple.
    Wall,
}

impl GaugeId {
    /// Every gauge, in channel order.
    pub const ALL: [GaugeId; 4] = [GaugeId::Cdg, GaugeId::Chamber, GaugeId::Ion, GaugeId::Wall];

    /// The channel id.
    pub fn channel(self) -> &'static str {
        match self {
            GaugeId::Cdg => CDG,
            GaugeId::Chamber => CHAMBER,
            GaugeId::Ion => ION,
            GaugeId::Wall => WALL,
        }
    }

    /// The channel's unit.
    pub fn unit(self) -> ChannelUnit {
        match self {
            GaugeId::Wall => TEMPERATURE_UNIT,
            _ => PRESSURE_UNIT,
        }
    }
}

/// Capacitance gauge: full scale 10 mbar, over-range above 110 % of full
/// scale, under-range below 1e-5 of full scale (common practice, no source).
pub const CDG_FULL_SCALE_PA: f64 = 1000.0;
/// Highest valid capacitance reading, Pa.
pub const CDG_MAX_PA: f64 = 1.1 * CDG_FULL_SCALE_PA;
/// Lowest valid capacitance reading, Pa (1e-4 mbar).
pub const CDG_MIN_PA: f64 = 1e-2;
/// Zero offset left after the last zeroing, Pa (3e-6 mbar; own estimate).
const CDG_ZERO_OFFSET_PA: f64 = 3e-4;
/// Noise: 0.15 % of reading and 1e-6 mbar at zero (own estimate).
const CDG_NOISE_REL: f64 = 1.5e-3;
const CDG_NOISE_ABS_PA: f64 = 1e-4;

/// Combined gauge: highest valid reading, Pa (1100 mbar).
pub const COMBINED_MAX_PA: f64 = 1.1e5;
/// Combined gauge: lowest valid reading, Pa (5e-10 mbar).
pub const COMBINED_MIN_PA: f64 = 5e-8;
/// The combined gauge's ionization element is switched on when the thermal
/// element reads below this, Pa (1e-2 mbar) …
pub const ION_ELEMENT_ON_PA: f64 = 1.0;
/// … and off when it reads above this, Pa (2e-2 mbar).
pub const ION_ELEMENT_OFF_PA: f64 = 2.0;
/// Below this indicated pressure the combined gauge reports its ionization
/// element (the engine's crossover, 1e-3 mbar).
pub const COMBINED_SWITCH_PA: f64 = crate::engine::gauge::COMBINED_CROSSOVER_PA;
/// Thermal element: pressure above which its heat loss saturates, Pa
/// (100 mbar; own estimate).
const THERMAL_SATURATION_PA: f64 = 1e4;
/// Thermal element: lowest pressure it resolves, Pa (5e-4 mbar).
const THERMAL_MIN_PA: f64 = 5e-2;
/// Thermal element noise: 0.3 % of the heat-loss signal and 2e-5 mbar
/// (own estimate).
const THERMAL_NOISE_REL: f64 = 3e-3;
const THERMAL_NOISE_ABS_PA: f64 = 2e-3;
/// Ionization element noise: 1.5 % (own estimate).
const COMBINED_ION_NOISE_REL: f64 = 1.5e-2;

/// Ionization gauge: switched off to protect its filament above this
/// reading, Pa (1e-3 mbar; common practice, no source).
pub const ION_PROTECT_PA: f64 = 0.1;
/// It is switched back on when the chamber falls below this, Pa (1e-4 mbar).
pub const ION_RESTART_PA: f64 = 1e-2;
/// Time from switch-on to a stable emission, s (own estimate).
pub const ION_WARM_UP_S: f64 = 15.0;
/// Lowest valid reading, Pa (1e-10 mbar).
pub const ION_MIN_PA: f64 = 1e-8;
/// Residual reading at zero pressure (soft-X-ray current), Pa
/// (2e-11 mbar; from memory, typical of the gauge type).
const ION_RESIDUAL_PA: f64 = 2e-9;
/// Noise: 1 % (own estimate).
const ION_NOISE_REL: f64 = 1e-2;

/// Thermocouple noise, K (own estimate), and resolution 0.1 °C.
const TC_NOISE_K: f64 = 0.1;

/// Relative sensitivity of the thermal element, N2 = 1, in its linear range.
///
/// Where the gas table has a value it is used; otherwise it follows the
/// free-molecule heat conduction of a hot wire, proportional to
/// α (γ + 1)/(γ − 1)/√M, with accommodation coefficient α and heat-capacity
/// ratio γ (γ from memory; α own estimates for a warm metal wire).
pub fn thermal_sensitivity(table: &GasTable) -> [f64; N_SPECIES] {
    let conduction =
        |alpha: f64, gamma: f64, m: f64| alpha * (gamma + 1.0) / (gamma - 1.0) / m.sqrt();
    let n2 = conduction(0.85, 1.40, 28.0134);
    let own = |s: Species| match s {
        Species::Air => conduction(0.85, 1.40, 28.965),
        Species::H2O => conduction(0.90, 1.33, 18.015),
        Species::Ar => conduction(0.85, 5.0 / 3.0, 39.948),
        Species::He => conduction(0.35, 5.0 / 3.0, 4.0026),
        Species::H2 => conduction(0.30, 1.41, 2.0159),
    } / n2;
    let mut out = [1.0; N_SPECIES];
    for s in Species::ALL {
        out[s.index()] = table
            .get(s.id())
            .ok()
            .and_then(|g| g.thermal_sensitivity)
            .unwrap_or_else(|| own(s));
    }
    out
}

/// Relative sensitivity of an ionization gauge, N2 = 1, from the gas table.
pub fn ion_sensitivity(table: &GasTable) -> [f64; N_SPECIES] {
    let mut out = [1.0; N_SPECIES];
    for s in Species::ALL {
        out[s.index()] = table
            .get(s.id())
            .ok()
            .and_then(|g| g.ion_sensitivity)
            .unwrap_or(1.0);
    }
    out
}

/// N2-equivalent reading of an ionization element: Σ S_i p_i.
pub fn ion_indicated(sens: &[f64; N_SPECIES], p: &[f64; N_SPECIES]) -> f64 {
    sens.iter().zip(p).map(|(s, p)| s * p).sum()
}

/// Thermal conductivity of each species relative to N2, for the thermal
/// element's high-pressure range (N2 0.026, air 0.026, water vapour 0.019,
/// Ar 0.018, He 0.155, H2 0.18 W/(m·K) near 300 K; from memory).
pub const CONDUCTIVITY_REL: [f64; N_SPECIES] = [1.0, 0.73, 0.68, 5.96, 6.92];

/// The thermal element's gas response: its low-pressure sensitivities and
/// high-pressure conductivities.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ThermalResponse {
    /// Relative sensitivity in the linear range, N2 = 1.
    pub sensitivity: [f64; N_SPECIES],
    /// Relative thermal conductivity, N2 = 1.
    pub conductivity: [f64; N_SPECIES],
}

impl ThermalResponse {
    /// From the gas table and [`CONDUCTIVITY_REL`].
    pub fn new(table: &GasTable) -> Self {
        ThermalResponse {
            sensitivity: thermal_sensitivity(table),
            conductivity: CONDUCTIVITY_REL,
        }
    }

    /// The heat-loss signal, in N2-equivalent pascals of the linear range.
    ///
    /// H_mol = Σ k_i p_i grows with pressure while molecules cross the gap
    /// freely; at high pressure heat conduction no longer depends on pressure
    /// and H saturates at p_s·Λ, with Λ = Σ x_i λ_i/λ_N2:
    /// H = H_mol/(1 + H_mol/(p_s Λ)).
    pub fn signal(&self, p: &[f64; N_SPECIES]) -> f64 {
        let total: f64 = p.iter().sum();
        if total.is_nan() || total <= 0.0 {
            return 0.0;
        }
        let h_mol: f64 = self.sensitivity.iter().zip(p).map(|(k, p)| k * p).sum();
        let lambda: f64 = self
            .conductivity
            .iter()
            .zip(p)
            .map(|(l, p)| l * p)
            .sum::<f64>()
            / total;
        h_mol / (1.0 + h_mol / (THERMAL_SATURATION_PA * lambda))
    }

    /// N2-equivalent reading (noise-free): the signal inverted as if the gas
    /// were N2, p_ind = H/(1 − H/p_s). N2 and air read true; a gas that
    /// conducts heat less than N2 (argon) levels off below atmosphere, one
    /// that conducts more (helium, hydrogen) runs off the scale. `None` when
    /// the signal is beyond what the inversion can represent.
    pub fn indicated(&self, p: &[f64; N_SPECIES]) -> Option<f64> {
        thermal_invert(self.signal(p))
    }
}

fn thermal_invert(h: f64) -> Option<f64> {
    let denom = 1.0 - h / THERMAL_SATURATION_PA;
    if denom <= 1e-9 { None } else { Some(h / denom) }
}

/// Emission state of an ionization element.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Emission {
    Off,
    Starting { stable_at: f64 },
    On,
}

/// The gauges of the chamber and their state.
#[derive(Debug, Clone)]
pub struct Gauges {
    ion_sens: [f64; N_SPECIES],
    thermal: ThermalResponse,
    rng: [Rng; 4],
    ion: Emission,
    combined_ion_on: bool,
    dropouts: Vec<(GaugeId, f64, f64)>,
}

/// What the gauges see: the true gas and wall temperature at a data time.
#[derive(Debug, Clone, Copy)]
pub struct Exposure<'a> {
    /// Seconds since the start.
    pub t_s: f64,
    /// Data time.
    pub time: DateTime<Utc>,
    /// Partial pressures, Pa.
    pub p: &'a [f64; N_SPECIES],
    /// Wall temperature, K.
    pub wall_k: f64,
}

/// Rounds to three significant digits, as gauge controllers print.
fn round_sig3(x: f64) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    let e = x.abs().log10().floor() as i32 - 2;
    // Divide or multiply by an exact power of ten so that the result is the
    // double nearest the rounded decimal.
    let r = if e < 0 {
        let f = 10f64.powi(-e);
        (x * f).round() / f
    } else {
        let f = 10f64.powi(e);
        (x / f).round() * f
    };
    if r.is_finite() { r } else { x }
}

fn mbar(pa: f64) -> f64 {
    round_sig3(PressureUnit::Mbar.value_of(pa))
}

impl Gauges {
    /// The gauges, with noise streams drawn from `seed`.
    pub fn new(seed: u64) -> Self {
        let table = GasTable::builtin();
        Gauges {
            ion_sens: ion_sensitivity(&table),
            thermal: ThermalResponse::new(&table),
            rng: [0u64, 1, 2, 3].map(|k| Rng::new(seed, k + 1)),
            ion: Emission::Off,
            combined_ion_on: false,
            dropouts: Vec::new(),
        }
    }

    /// The channels, in the order readings are returned.
    pub fn channels() -> Vec<ChannelInfo> {
        GaugeId::ALL
            .iter()
            .map(|g| ChannelInfo::new(g.channel(), g.unit()))
            .collect()
    }

    /// Schedules a fault: `gauge` reports `sensor-error` from `from_s` for
    /// `duration_s`.
    pub fn add_dropout(&mut self, gauge: GaugeId, from_s: f64, duration_s: f64) {
        self.dropouts
            .push((gauge, from_s, from_s + duration_s.max(0.0)));
    }

    fn dropped(&self, gauge: GaugeId, t: f64) -> bool {
        self.dropouts
            .iter()
            .any(|(g, from, to)| *g == gauge && t >= *from && t < *to)
    }

    /// Whether the separate ionization gauge is emitting.
    pub fn ion_on(&self) -> bool {
        self.ion == Emission::On
    }

    /// One reading per channel.
    pub fn read(&mut self, x: Exposure<'_>) -> Vec<Sample> {
        let cdg = self.read_cdg(&x);
        let chamber = self.read_combined(&x);
        let ion = self.read_ion(&x);
        let wall = self.read_wall(&x);
        let mut out = vec![cdg, chamber, ion, wall];
        for (s, g) in out.iter_mut().zip(GaugeId::ALL) {
            if self.dropped(g, x.t_s) {
                *s = Sample::bad(x.time, g.channel(), g.unit(), Fault::SensorError);
            }
        }
        out
    }

    fn read_cdg(&mut self, x: &Exposure<'_>) -> Sample {
        let rng = &mut self.rng[0];
        let p: f64 = x.p.iter().sum();
        let reading = p * (1.0 + CDG_NOISE_REL * rng.normal())
            + CDG_ZERO_OFFSET_PA
            + CDG_NOISE_ABS_PA * rng.normal();
        pressure_sample(x.time, CDG, reading, CDG_MIN_PA, CDG_MAX_PA)
    }

    fn read_combined(&mut self, x: &Exposure<'_>) -> Sample {
        let rng = &mut self.rng[1];
        let h = self.thermal.signal(x.p);
        let h_meas =
            h * (1.0 + THERMAL_NOISE_REL * rng.normal()) + THERMAL_NOISE_ABS_PA * rng.normal();
        let ion_meas = ion_indicated(&self.ion_sens, x.p)
            * (1.0 + COMBINED_ION_NOISE_REL * rng.normal())
            + ION_RESIDUAL_PA;
        let thermal = thermal_invert(h_meas.max(0.0));
        // The ionization element follows the thermal element's reading.
        let thermal_for_switch = thermal.unwrap_or(f64::INFINITY);
        if self.combined_ion_on && thermal_for_switch > ION_ELEMENT_OFF_PA {
            self.combined_ion_on = false;
        } else if !self.combined_ion_on && thermal_for_switch < ION_ELEMENT_ON_PA {
            self.combined_ion_on = true;
        }
        if self.combined_ion_on && ion_meas < COMBINED_SWITCH_PA {
            return pressure_sample(x.time, CHAMBER, ion_meas, COMBINED_MIN_PA, COMBINED_MAX_PA);
        }
        match thermal {
            Some(t) if t < THERMAL_MIN_PA => {
                Sample::bad(x.time, CHAMBER, PRESSURE_UNIT, Fault::UnderRange)
            }
            Some(t) => pressure_sample(x.time, CHAMBER, t, COMBINED_MIN_PA, COMBINED_MAX_PA),
            None => Sample::bad(x.time, CHAMBER, PRESSURE_UNIT, Fault::OverRange),
        }
    }

    fn read_ion(&mut self, x: &Exposure<'_>) -> Sample {
        let rng = &mut self.rng[2];
        let true_ind = ion_indicated(&self.ion_sens, x.p);
        let reading = true_ind * (1.0 + ION_NOISE_REL * rng.normal()) + ION_RESIDUAL_PA;
        // The controller switches emission on from another gauge's setpoint
        // and off to protect the filament.
        self.ion = match self.ion {
            Emission::On if reading > ION_PROTECT_PA => Emission::Off,
            Emission::Off if true_ind < ION_RESTART_PA => Emission::Starting {
                stable_at: x.t_s + ION_WARM_UP_S,
            },
            Emission::Starting { .. } if true_ind > ION_PROTECT_PA => Emission::Off,
            Emission::Starting { stable_at } if x.t_s >= stable_at => Emission::On,
            e => e,
        };
        if self.ion != Emission::On {
            return Sample::bad(x.time, ION, PRESSURE_UNIT, Fault::SensorOff);
        }
        pressure_sample(x.time, ION, reading, ION_MIN_PA, ION_PROTECT_PA)
    }

    fn read_wall(&mut self, x: &Exposure<'_>) -> Sample {
        let rng = &mut self.rng[3];
        let c = x.wall_k - ZERO_CELSIUS_K + TC_NOISE_K * rng.normal();
        if !c.is_finite() {
            return Sample::bad(x.time, WALL, TEMPERATURE_UNIT, Fault::SensorError);
        }
        Sample::ok(x.time, WALL, (c * 10.0).round() / 10.0, TEMPERATURE_UNIT)
    }
}

/// A pressure reading with range checks: under-range below `min_pa`,
/// over-range above `max_pa`, else the value in mbar.
fn pressure_sample(
    time: DateTime<Utc>,
    channel: &str,
    pa: f64,
    min_pa: f64,
    max_pa: f64,
) -> Sample {
    if !pa.is_finite() {
        Sample::bad(time, channel, PRESSURE_UNIT, Fault::SensorError)
    } else if pa > max_pa {
        Sample::bad(time, channel, PRESSURE_UNIT, Fault::OverRange)
    } else if pa < min_pa {
        Sample::bad(time, channel, PRESSURE_UNIT, Fault::UnderRange)
    } else {
        Sample::ok(time, channel, mbar(pa), PRESSURE_UNIT)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pure(s: Species, p: f64) -> [f64; N_SPECIES] {
        let mut a = [0.0; N_SPECIES];
        a[s.index()] = p;
        a
    }

    #[test]
    fn ion_reading_in_argon_is_1_4_times_true() {
        let sens = ion_sensitivity(&GasTable::builtin());
        let p = pure(Species::Ar, 1e-4);
        assert!((ion_indicated(&sens, &p) / 1e-4 - 1.4).abs() < 1e-9);
    }

    #[test]
    fn thermal_element_reads_true_for_air_low_for_argon_high_for_helium() {
        let th = ThermalResponse::new(&GasTable::builtin());
        for p in [1.0, 100.0, 1e4, 1e5] {
            let r = th
                .indicated(&pure(Species::Air, p))
                .expect("air is on scale");
            assert!((r / p - 1.0).abs() < 1e-9);
        }
        let ar = th.indicated(&pure(Species::Ar, 1.0)).expect("on scale");
        assert!(ar > 0.45 && ar < 0.7, "{ar}");
        // Argon at atmosphere levels off far below 1000 mbar.
        let ar_atm = th.indicated(&pure(Species::Ar, 1e5)).expect("on scale");
        assert!(ar_atm < 3e4, "{ar_atm}");
        // Helium conducts heat far better than N2 and runs off the scale.
        assert!(th.indicated(&pure(Species::He, 5e4)).is_none());
        // Humid air at atmosphere still reads within a few percent.
        let mut humid = pure(Species::Air, 1.0e5);
        humid[Species::H2O.index()] = 1.3e3;
        let r = th.indicated(&humid).expect("on scale");
        assert!((r / 1.013e5 - 1.0).abs() < 0.05, "{r}");
    }

    #[test]
    fn rounding_keeps_three_digits() {
        assert_eq!(round_sig3(1.23456e-6), 1.23e-6);
        assert_eq!(round_sig3(987.6), 988.0);
        assert_eq!(round_sig3(0.0), 0.0);
    }
}
