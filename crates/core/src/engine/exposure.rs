//! Cumulative exposure ∫p dt and rate-of-rise leak rates.

use crate::units::LANGMUIR_PA_S;

/// When an exposure starts counting.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ExposureStart {
    /// At the first reading whose true pressure is below this, Pa, or at an
    /// operator reset, whichever comes first.
    Below(f64),
    /// Only at an operator reset.
    Reset,
    /// At the first reading (the time at atmosphere counts too).
    FirstReading,
}

/// Default start threshold, Pa: 0.1 Pa (1e-3 mbar), the top of the high
/// vacuum range of ISO 3529-1, so pump-down from atmosphere is not counted.
pub const DEFAULT_EXPOSURE_BELOW_PA: f64 = 0.1;

impl Default for ExposureStart {
    fn default() -> Self {
        ExposureStart::Below(DEFAULT_EXPOSURE_BELOW_PA)
    }
}

/// Running integral of pressure over data time (trapezoid rule), in Pa·s,
/// from its start (see [`ExposureStart`]).
///
/// Readings further apart than `max_gap_s` are not bridged: the gap is
/// counted in [`Exposure::gap_s`] instead, so a dropout never invents dose.
#[derive(Debug, Clone, PartialEq)]
pub struct Exposure {
    pa_s: f64,
    gap_s: f64,
    max_gap_s: f64,
    last: Option<(f64, f64)>,
    start: ExposureStart,
    since_s: Option<f64>,
}

impl Exposure {
    /// Starts at zero at the first reading; samples further apart than
    /// `max_gap_s` are not joined.
    pub fn new(max_gap_s: f64) -> Self {
        Exposure::with_start(max_gap_s, ExposureStart::FirstReading)
    }

    /// Starts at zero and counts from `start` on.
    pub fn with_start(max_gap_s: f64, start: ExposureStart) -> Self {
        Exposure {
            pa_s: 0.0,
            gap_s: 0.0,
            max_gap_s,
            last: None,
            start,
            since_s: None,
        }
    }

    /// When counting started, data time in seconds on the caller's origin;
    /// `None` while waiting for the start.
    pub fn since_s(&self) -> Option<f64> {
        self.since_s
    }

    /// The start condition.
    pub fn start(&self) -> ExposureStart {
        self.start
    }

    /// Operator reset at data time `t_s`: back to zero and counting from
    /// `t_s` whatever the start condition. The last reading's pressure is
    /// held from `t_s` to the next reading, so the trapezoid goes on.
    pub fn restart(&mut self, t_s: f64) {
        self.pa_s = 0.0;
        self.gap_s = 0.0;
        self.since_s = Some(t_s);
        self.last = self
            .last
            .filter(|&(t0, _)| t0 <= t_s)
            .map(|(_, p0)| (t_s, p0));
    }

    /// Adds a reading of `pressure_pa` at data time `t_s` (seconds on any
    /// fixed origin). A reading at or before the previous one restarts the
    /// trapezoid without adding dose (a clock jump is never integrated).
    /// Before the start nothing is added; the first reading that meets the
    /// start condition starts the count at its time.
    pub fn add(&mut self, t_s: f64, pressure_pa: f64) {
        if self.since_s.is_none() {
            let starts = match self.start {
                ExposureStart::Below(limit) => pressure_pa < limit,
                ExposureStart::Reset => false,
                ExposureStart::FirstReading => true,
            };
            if !starts {
                // Kept for a reset, which holds it from the reset on.
                self.last = Some((t_s, pressure_pa));
                return;
            }
            self.since_s = Some(t_s);
            self.last = None;
        }
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
    fn counting_starts_below_the_threshold_or_at_a_reset() {
        // Pump-down: 1e5 Pa for 10 s, then 1e-2 Pa from t = 10 s on.
        let mut e = Exposure::with_start(10.0, ExposureStart::Below(0.1));
        for i in 0..10 {
            e.add(f64::from(i), 1e5);
        }
        assert_eq!(e.pa_s(), 0.0);
        assert_eq!(e.since_s(), None);
        for i in 10..=20 {
            e.add(f64::from(i), 1e-2);
        }
        assert_eq!(e.since_s(), Some(10.0));
        assert!((e.pa_s() - 0.1).abs() < 1e-15, "{}", e.pa_s());
        // Reset at 25 s: the last pressure is held from the reset on.
        e.restart(25.0);
        assert_eq!((e.pa_s(), e.since_s()), (0.0, Some(25.0)));
        e.add(27.0, 1e-2);
        assert!((e.pa_s() - 2e-2).abs() < 1e-15);
        // "reset" waits for the operator; the first reading starts otherwise.
        let mut e = Exposure::with_start(10.0, ExposureStart::Reset);
        e.add(0.0, 1e-6);
        e.add(1.0, 1e-6);
        assert_eq!((e.pa_s(), e.since_s()), (0.0, None));
        e.restart(1.0);
        e.add(2.0, 1e-6);
        assert!((e.pa_s() - 1e-6).abs() < 1e-20);
        let mut e = Exposure::with_start(10.0, ExposureStart::FirstReading);
        e.add(3.0, 1e5);
        assert_eq!(e.since_s(), Some(3.0));
    }

    #[test]
    fn leak_rate_units() {
        // 100 L rising 1e-3 Pa/s: Q = 1e-4 Pa·m³/s = 1e-3 mbar·L/s.
        let q = LeakRate::from_rise(0.1, 1e-3);
        assert!((q.pa_m3_per_s - 1e-4).abs() < 1e-18);
        assert!((q.mbar_l_per_s() - 1e-3).abs() < 1e-17);
    }
}
