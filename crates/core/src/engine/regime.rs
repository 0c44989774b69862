//! Knudsen number, flow regime and the ISO 3529-1 vacuum ranges.

use serde::{Deserialize, Serialize};
use std::fmt;

/// Flow regime of a gas in a duct or gap of a given size.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum FlowRegime {
    /// Continuum (viscous) flow: collisions between molecules dominate.
    Viscous,
    /// Between the two.
    Transitional,
    /// Free-molecular flow: collisions with the walls dominate.
    Molecular,
}

impl FlowRegime {
    /// The word used in output and configs.
    pub fn as_str(self) -> &'static str {
        match self {
            FlowRegime::Viscous => "viscous",
            FlowRegime::Transitional => "transitional",
            FlowRegime::Molecular => "molecular",
        }
    }
}

impl fmt::Display for FlowRegime {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Knudsen-number bounds between the regimes. Conventions differ between
/// fields, so they are settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RegimeBounds {
    /// Flow is viscous when Kn is below this.
    pub viscous_below: f64,
    /// Flow is molecular when Kn is above this.
    pub molecular_above: f64,
}

impl Default for RegimeBounds {
    /// Kn < 0.01 viscous, Kn > 0.5 molecular (common vacuum practice, no
    /// source; European vacuum handbooks).
    fn default() -> Self {
        RegimeBounds {
            viscous_below: 0.01,
            molecular_above: 0.5,
        }
    }
}

impl RegimeBounds {
    /// Checks that the bounds are positive and ordered.
    pub fn validate(&self) -> Result<(), String> {
        let ok = |x: f64| x.is_finite() && x > 0.0;
        if !ok(self.viscous_below) || !ok(self.molecular_above) {
            return Err("Knudsen bounds must be positive numbers".into());
        }
        if self.viscous_below >= self.molecular_above {
            return Err(format!(
                "viscous_below ({}) must be smaller than molecular_above ({})",
                self.viscous_below, self.molecular_above
            ));
        }
        Ok(())
    }

    /// The regime for Knudsen number `kn`: viscous for Kn < lower, molecular
    /// for Kn > upper, transitional in between (both bounds included).
    pub fn classify(&self, kn: f64) -> FlowRegime {
        if kn < self.viscous_below {
            FlowRegime::Viscous
        } else if kn > self.molecular_above {
            FlowRegime::Molecular
        } else {
            FlowRegime::Transitional
        }
    }

    /// The pressures, Pa, where the flow in a length of `length_m` turns
    /// from viscous to transitional (Kn = lower bound) and from transitional
    /// to molecular (Kn = upper bound), for a gas whose mean free path times
    /// pressure is `lambda_p_m_pa` (m·Pa; constant for a gas at one
    /// temperature, since λ ∝ 1/p). `None` when either is not a positive
    /// number.
    pub fn pressures(&self, lambda_p_m_pa: f64, length_m: f64) -> Option<(f64, f64)> {
        let ok = |x: f64| x.is_finite() && x > 0.0;
        if !ok(lambda_p_m_pa) || !ok(length_m) {
            return None;
        }
        // Kn = λ(p)/L = (λ·p)/(p·L) = bound  ⇔  p = (λ·p)/(bound·L).
        let at = |kn: f64| lambda_p_m_pa / (kn * length_m);
        Some((at(self.viscous_below), at(self.molecular_above)))
    }
}

/// How far (relative) inside a regime's limits a band of
/// [`RegimeBounds::steady_band`] keeps: many orders of magnitude above the
/// rounding of a Knudsen number (a few units of the last place), so that
/// every mean free path inside the band is classified as the band says.
const STEADY_MARGIN: f64 = 1e-9;

impl RegimeBounds {
    /// An interval of mean free paths, m, `[lo, hi)`, in which the flow in
    /// a length of `length_m` is surely `regime` (as
    /// [`RegimeBounds::classify`] of their Knudsen number gives it). It
    /// stops short of the regime's limits by a margin, so a mean free path
    /// next to a limit is outside it, whatever the rounding; empty (NaN
    /// ends) when the length is not a positive number.
    pub fn steady_band(&self, length_m: f64, regime: FlowRegime) -> (f64, f64) {
        if !(length_m.is_finite() && length_m > 0.0) {
            return (f64::NAN, f64::NAN);
        }
        let (viscous, molecular) = (
            self.viscous_below * length_m,
            self.molecular_above * length_m,
        );
        let (above, below) = (1.0 + STEADY_MARGIN, 1.0 - STEADY_MARGIN);
        match regime {
            FlowRegime::Viscous => (0.0, viscous * below),
            FlowRegime::Transitional => (viscous * above, molecular * below),
            FlowRegime::Molecular => (molecular * above, f64::INFINITY),
        }
    }
}

/// Knudsen number Kn = λ/L.
pub fn knudsen(mean_free_path_m: f64, length_m: f64) -> f64 {
    mean_free_path_m / length_m
}

/// Vacuum range names of ISO 3529-1, with two classes above it: the
/// standard defines vacuum as a pressure below atmospheric, so at and above
/// atmosphere there is no vacuum range to name.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum VacuumRange {
    /// Above atmospheric pressure: more than [`ABOVE_ATMOSPHERIC_PA`].
    AboveAtmospheric,
    /// At atmospheric pressure: from the standard atmosphere (101325 Pa) up
    /// to [`ABOVE_ATMOSPHERIC_PA`]; not a vacuum.
    Atmospheric,
    /// Low (rough) vacuum: below atmospheric pressure down to 100 Pa.
    Low,
    /// Medium vacuum.
    Medium,
    /// High vacuum.
    High,
    /// Ultra-high vacuum.
    UltraHigh,
    /// Extreme-high vacuum (2019 edition only).
    ExtremeHigh,
}

impl VacuumRange {
    /// The word used in output and configs.
    pub fn as_str(self) -> &'static str {
        match self {
            VacuumRange::AboveAtmospheric => "above-atmospheric",
            VacuumRange::Atmospheric => "atmospheric",
            VacuumRange::Low => "low",
            VacuumRange::Medium => "medium",
            VacuumRange::High => "high",
            VacuumRange::UltraHigh => "ultra-high",
            VacuumRange::ExtremeHigh => "extreme-high",
        }
    }
}

impl fmt::Display for VacuumRange {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Upper end of [`VacuumRange::Atmospheric`], Pa: the standard atmosphere
/// plus 5 %, the spread of barometric pressure at sea level (common
/// practice, no source). The same margin flags `above-atmospheric` readings.
pub const ABOVE_ATMOSPHERIC_PA: f64 = crate::units::ATM_PA * 1.05;

/// Relative tolerance when a pressure is compared with a published range
/// limit: a pressure within one part in 1e9 of a limit is taken as at the
/// limit, so that the last-bit rounding of a unit conversion
/// (1e-11 mbar × 100 = 9.999999999999999e-10 Pa) never moves it across.
pub const LIMIT_REL_TOL: f64 = 1e-9;

/// Edition of ISO 3529-1 whose range limits are used.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum IsoEdition {
    /// ISO 3529-1:1981 (same limits as DIN 28400-1): high vacuum down to
    /// 1e-5 Pa, ultra-high below; no extreme-high range.
    #[serde(rename = "1981")]
    Ed1981,
    /// ISO 3529-1:2019: high vacuum down to 1e-6 Pa, ultra-high to 1e-9 Pa,
    /// extreme-high below. The standard calls its limits approximate.
    #[default]
    #[serde(rename = "2019")]
    Ed2019,
}

impl IsoEdition {
    /// The year, as written in configs.
    pub fn year(self) -> u16 {
        match self {
            IsoEdition::Ed1981 => 1981,
            IsoEdition::Ed2019 => 2019,
        }
    }

    /// Edition by year.
    pub fn from_year(year: i64) -> Option<Self> {
        match year {
            1981 => Some(IsoEdition::Ed1981),
            2019 => Some(IsoEdition::Ed2019),
            _ => None,
        }
    }

    /// Lower limits, Pa, of each class from `AboveAtmospheric` downwards; a
    /// pressure at a limit (within [`LIMIT_REL_TOL`]) belongs to the range
    /// above it: 1 atm is atmospheric, 100 Pa is low vacuum, 1e-9 Pa is
    /// ultra-high vacuum (extreme-high is "below 1e-9 Pa").
    // Limits: ISO 3529-1 as recorded in REFERENCES.md (c, from memory; the
    // 2019 text calls them approximate). Both editions start low vacuum at
    // atmospheric pressure (the 1981 edition writes it rounded, 1e5 Pa); the
    // tool takes the standard atmosphere, 101325 Pa, for both.
    fn lower_limits(self) -> &'static [(VacuumRange, f64)] {
        match self {
            IsoEdition::Ed2019 => &[
                (VacuumRange::AboveAtmospheric, ABOVE_ATMOSPHERIC_PA),
                (VacuumRange::Atmospheric, crate::units::ATM_PA),
                (VacuumRange::Low, 100.0),
                (VacuumRange::Medium, 0.1),
                (VacuumRange::High, 1e-6),
                (VacuumRange::UltraHigh, 1e-9),
                (VacuumRange::ExtremeHigh, 0.0),
            ],
            IsoEdition::Ed1981 => &[
                (VacuumRange::AboveAtmospheric, ABOVE_ATMOSPHERIC_PA),
                (VacuumRange::Atmospheric, crate::units::ATM_PA),
                (VacuumRange::Low, 100.0),
                (VacuumRange::Medium, 0.1),
                (VacuumRange::High, 1e-5),
                (VacuumRange::UltraHigh, 0.0),
            ],
        }
    }

    /// The vacuum range of `pressure_pa`.
    pub fn classify(self, pressure_pa: f64) -> VacuumRange {
        self.lower_limits()
            .iter()
            .find(|&&(_, lower)| pressure_pa >= lower * (1.0 - LIMIT_REL_TOL))
            .map_or(VacuumRange::Low, |&(r, _)| r)
    }

    /// The pressures, Pa, `[lo, hi)` that [`IsoEdition::classify`] puts in
    /// the same range as `pressure_pa` (a positive number): its range's
    /// limits as `classify` compares them, so exactly.
    pub fn band(self, pressure_pa: f64) -> (f64, f64) {
        let mut hi = f64::INFINITY;
        for &(_, lower) in self.lower_limits() {
            let lo = lower * (1.0 - LIMIT_REL_TOL);
            if pressure_pa >= lo {
                return (lo, hi);
            }
            hi = lo;
        }
        // Not a positive number: no band.
        (f64::NAN, f64::NAN)
    }

    /// The upper and lower pressure limits (Pa) of a range in this edition;
    /// `None` when the edition has no such range.
    pub fn limits(self, range: VacuumRange) -> Option<(f64, f64)> {
        let limits = self.lower_limits();
        let i = limits.iter().position(|&(r, _)| r == range)?;
        let upper = if i == 0 {
            f64::INFINITY
        } else {
            limits[i - 1].1
        };
        Some((upper, limits[i].1))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn regimes_follow_the_bounds_inclusively() {
        let b = RegimeBounds::default();
        assert_eq!(b.classify(0.009_999), FlowRegime::Viscous);
        assert_eq!(b.classify(0.01), FlowRegime::Transitional);
        assert_eq!(b.classify(0.5), FlowRegime::Transitional);
        assert_eq!(b.classify(0.500_001), FlowRegime::Molecular);
        let us = RegimeBounds {
            viscous_below: 0.01,
            molecular_above: 1.0,
        };
        assert_eq!(us.classify(0.7), FlowRegime::Transitional);
        assert!(
            RegimeBounds {
                viscous_below: 1.0,
                molecular_above: 0.5
            }
            .validate()
            .is_err()
        );
    }

    #[test]
    fn regime_pressures_classify_as_their_bounds() {
        // Source: REFERENCES.md (b): air at 293.15 K has Kn = 0.01 at
        // p·L = 0.674 Pa·m and Kn = 0.5 at 0.0135 Pa·m, so λ·p = 6.74e-3 m·Pa.
        let b = RegimeBounds::default();
        let (visc, mol) = b.pressures(6.74e-3, 1.0).expect("pressures");
        assert!((visc - 0.674).abs() < 1e-12, "{visc}");
        assert!((mol - 0.01348).abs() < 1e-12, "{mol}");
        // Just above the viscous bound's pressure the flow is viscous, just
        // below the molecular bound's it is molecular.
        let lp = 6.6e-3;
        let l = 0.04;
        let (visc, mol) = b.pressures(lp, l).expect("pressures");
        let kn = |p: f64| knudsen(lp / p, l);
        assert_eq!(b.classify(kn(visc * 1.001)), FlowRegime::Viscous);
        assert_eq!(b.classify(kn(visc * 0.999)), FlowRegime::Transitional);
        assert_eq!(b.classify(kn(mol * 1.001)), FlowRegime::Transitional);
        assert_eq!(b.classify(kn(mol * 0.999)), FlowRegime::Molecular);
        assert_eq!(b.pressures(0.0, 1.0), None);
        assert_eq!(b.pressures(1e-2, f64::NAN), None);
    }

    #[test]
    fn iso_3529_1_2019_ranges() {
        // Limits: ISO 3529-1:2019 as recorded in REFERENCES.md (c, from memory).
        let e = IsoEdition::Ed2019;
        assert_eq!(e.classify(101_324.0), VacuumRange::Low);
        assert_eq!(e.classify(100.0), VacuumRange::Low);
        assert_eq!(e.classify(99.9), VacuumRange::Medium);
        assert_eq!(e.classify(0.1), VacuumRange::Medium);
        assert_eq!(e.classify(0.099), VacuumRange::High);
        assert_eq!(e.classify(1e-6), VacuumRange::High);
        assert_eq!(e.classify(9.9e-7), VacuumRange::UltraHigh);
        assert_eq!(e.classify(1e-9), VacuumRange::UltraHigh);
        assert_eq!(e.classify(1e-10), VacuumRange::ExtremeHigh);
    }

    #[test]
    fn iso_3529_1_1981_ranges() {
        // Limits: ISO 3529-1:1981 / DIN 28400-1 as recorded in REFERENCES.md
        // (c, from memory).
        let e = IsoEdition::Ed1981;
        assert_eq!(e.classify(1e-5), VacuumRange::High);
        assert_eq!(e.classify(9e-6), VacuumRange::UltraHigh);
        assert_eq!(e.classify(1e-12), VacuumRange::UltraHigh);
        assert_eq!(e.limits(VacuumRange::ExtremeHigh), None);
        assert_eq!(e.limits(VacuumRange::High), Some((0.1, 1e-5)));
    }

    /// Parses "VALUE UNIT" as an operator types it.
    fn pa(text: &str) -> f64 {
        crate::units::parse::<crate::units::PressureUnit>(text)
            .unwrap_or_else(|e| panic!("{e}"))
            .si
    }

    #[test]
    fn at_and_above_atmosphere_is_no_vacuum() {
        // ISO 3529-1 defines vacuum as below atmospheric pressure (REFERENCES.md,
        // low vacuum "atmospheric - 100 Pa"); 1 atm = 101325 Pa by definition.
        for e in [IsoEdition::Ed2019, IsoEdition::Ed1981] {
            assert_eq!(e.classify(pa("1 atm")), VacuumRange::Atmospheric);
            assert_eq!(e.classify(pa("1013.25 mbar")), VacuumRange::Atmospheric);
            assert_eq!(e.classify(pa("2e5 Pa")), VacuumRange::AboveAtmospheric);
            assert_eq!(e.classify(pa("1000 mbar")), VacuumRange::Low);
            assert_eq!(e.limits(VacuumRange::Low), Some((101_325.0, 100.0)));
        }
    }

    #[test]
    fn the_unit_never_moves_a_pressure_across_a_limit() {
        // Every published limit of both editions (REFERENCES.md, ISO 3529-1,
        // c from memory) written in Pa, mbar, kPa and Torr-free forms: the
        // same pressure is in the same range whatever its unit, and a limit
        // belongs to the range above it.
        let e = IsoEdition::Ed2019;
        for (pa_text, mbar_text, range) in [
            ("100 Pa", "1 mbar", VacuumRange::Low),
            ("0.1 Pa", "1e-3 mbar", VacuumRange::Medium),
            ("1e-6 Pa", "1e-8 mbar", VacuumRange::High),
            ("1e-9 Pa", "1e-11 mbar", VacuumRange::UltraHigh),
        ] {
            assert_eq!(e.classify(pa(pa_text)), range, "{pa_text}");
            assert_eq!(e.classify(pa(mbar_text)), range, "{mbar_text}");
        }
        assert_eq!(e.classify(pa("1e-12 kPa")), VacuumRange::UltraHigh);
        assert_eq!(e.classify(pa("9.99e-12 mbar")), VacuumRange::ExtremeHigh);
        assert_eq!(e.classify(pa("0.99e-9 Pa")), VacuumRange::ExtremeHigh);
        let e = IsoEdition::Ed1981;
        // 1e-7 mbar x 100 is 9.999999999999999e-6 Pa in binary floating point.
        assert_eq!(e.classify(pa("1e-7 mbar")), VacuumRange::High);
        assert_eq!(e.classify(pa("1e-5 Pa")), VacuumRange::High);
        assert_eq!(e.classify(pa("0.99e-5 Pa")), VacuumRange::UltraHigh);
    }
}
