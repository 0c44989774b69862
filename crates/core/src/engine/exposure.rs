//! Cumulative exposure ∫p dt and rate-of-rise leak rates.

use crate::units::LANGMUIR_PA_S;

/// Running integral of pressure over data time (trapezoid rule), in Pa·s.
///
/// Readings further apart than `max_gap_s` are not bridged: the gap is
/// counted in [`Exposure::gap_s`] instead, so a dropout never invents dose.
#[derive(Debug, Clone, PartialEq)]
pub struct Exposure {
    pa_s: f64,
    gap_s: f64,
    max_gap_s: f64,
    last: Option<(f64, f64)>,
}

impl Exposure {
    /// Starts at zero; samples further apart than `max_gap_s` are not joined.
    pub fn new(max_gap_s: f64) -> Self {
        Exposure {
            pa_s: 0.0,
            gap_s: 0.0,
            max_gap_s,
            last: None,
        }
    }

    /// Adds a reading of `pressure_pa` at data time `t_s` (seconds on any
    /// fixed origin). A reading at or before the previous one restarts the
    /// trapezoid without adding dose (a clock jump is never integrated).
    pub fn add(&mut self, t_s: f64, pressure_pa: f64) {
        if let Some((t0, p0)) = self.last {
            let dt = t_s - t0;
            if dt > 0.0 && dt <= self.max_gap_s {
                self.pa_s += 0.5 * (p0 + pressure_pa) * dt;
            } else if dt > self.max_gap_s {
                self.gap_s += dt;
            }
        }
        self.last = Some((t_s, pressure_pa));
    }

    /// Breaks the integral at a bad or missing reading: the next good reading
    /// starts a new trapezoid.
    pub fn interrupt(&mut self) {
        self.last = None;
    }

    /// Exposure so far, Pa·s.
    pub fn pa_s(&self) -> f64 {
        self.pa_s
    }

    /// Exposure so far, langmuir (1 L = 1e-6 Torr·s).
    pub fn langmuir(&self) -> f64 {
        self.pa_s / LANGMUIR_PA_S
    }

    /// Total time not integrated because readings were too far apart, s.
    pub fn gap_s(&self) -> f64 {
        self.gap_s
    }
}

/// Exposure of a constant pressure held for `seconds`, Pa·s.
pub fn constant_exposure(pressure_pa: f64, seconds: f64) -> f64 {
    pressure_pa * seconds
}

/// Gas load from a rate of rise in an isolated chamber, Q = V dp/dt.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LeakRate {
    /// Pa·m³/s.
    pub pa_m3_per_s: f64,
}

impl LeakRate {
    /// Q = V·dp/dt for a chamber of `volume_m3` rising at `dp_dt_pa_per_s`.
    pub fn from_rise(volume_m3: f64, dp_dt_pa_per_s: f64) -> Self {
        LeakRate {
            pa_m3_per_s: volume_m3 * dp_dt_pa_per_s,
        }
    }

    /// mbar·L/s (1 Pa·m³/s = 10 mbar·L/s).
    pub fn mbar_l_per_s(&self) -> f64 {
        self.pa_m3_per_s * 10.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constant_pressure_gives_p_times_t() {
        let mut e = Exposure::new(10.0);
        for i in 0..=100 {
            e.add(f64::from(i), 1e-4);
        }
        assert!((e.pa_s() - 1e-2).abs() < 1e-15);
        // 1e-6 Torr for 1 s is 1 langmuir (definition of the langmuir).
        let mut e = Exposure::new(10.0);
        e.add(0.0, 1e-6 * crate::units::TORR_PA);
        e.add(1.0, 1e-6 * crate::units::TORR_PA);
        assert!((e.langmuir() - 1.0).abs() < 1e-12);
    }

    #[test]
    fn gaps_and_clock_jumps_add_nothing() {
        let mut e = Exposure::new(5.0);
        e.add(0.0, 1.0);
        e.add(1.0, 1.0);
        e.add(100.0, 1.0); // gap
        e.add(50.0, 1.0); // clock jumped back
        e.add(51.0, 1.0);
        assert_eq!(e.pa_s(), 2.0);
        assert_eq!(e.gap_s(), 99.0);
        e.interrupt();
        e.add(52.0, 1.0);
        assert_eq!(e.pa_s(), 2.0);
    }

    #[test]
    fn leak_rate_units() {
        // 100 L rising 1e-3 Pa/s: Q = 1e-4 Pa·m³/s = 1e-3 mbar·L/s.
        let q = LeakRate::from_rise(0.1, 1e-3);
        assert!((q.pa_m3_per_s - 1e-4).abs() < 1e-18);
        assert!((q.mbar_l_per_s() - 1e-3).abs() < 1e-17);
    }
}
