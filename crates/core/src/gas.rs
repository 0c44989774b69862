//! The gas table: molar mass, viscosity (hard-sphere) diameter, Sutherland
//! constant and gauge sensitivities of the gases found in vacuum chambers,
//! each value with its source.
//!
//! Diameters and Sutherland constants are one fit per gas, made by
//! `tests/reference/fit_gas_table.py`: the equivalent hard-sphere diameter
//! from dilute-gas viscosity, η = (5/16)·√(π m k T)/(π d²), written as
//! d(T)² = d_ref² (1 + S/T)/(1 + S/T_ref) with T_ref = 273.15 K, fitted over
//! 273.15–500 K to minimise the largest error of the mean free path. The
//! viscosities come from CoolProp 8.0.0 (N2, air, O2, Ar, He, H2, H2O, CO2,
//! CH4) and from thermo 0.6.1, method VDI_PPDS (CO, Ne, Kr, Xe).

use std::fmt;

/// Reference temperature of the tabulated diameters, K.
pub const T_REF_K: f64 = 273.15;
/// Temperature range the built-in Sutherland fits were made over, K.
pub const FIT_RANGE_K: (f64, f64) = (273.15, 500.0);

const SRC_MOLAR_MASS: &str = "chemicals 1.5.2 (IUPAC standard atomic weights)";
const SRC_FIT_COOLPROP: &str =
    "fit to CoolProp 8.0.0 dilute-gas viscosity, 273.15-500 K (tests/reference/fit_gas_table.py)";
const SRC_FIT_THERMO: &str = "fit to thermo 0.6.1 VDI_PPDS dilute-gas viscosity, 273.15-500 K (tests/reference/fit_gas_table.py)";
const SRC_ION_CRC: &str =
    "CRC Handbook of Chemistry and Physics, sec. 15, relative sensitivity of Bayard-Alpert gauges";

/// Where each number of a [`Gas`] comes from.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct GasSources {
    /// Source of the molar mass.
    pub molar_mass: String,
    /// Source of the diameter and Sutherland constant.
    pub diameter: String,
    /// Source of the ionization-gauge sensitivity.
    pub ion_sensitivity: String,
    /// Source of the thermal-gauge sensitivity.
    pub thermal_sensitivity: String,
}

/// One gas species.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Gas {
    /// Short id as used on the command line and in configs (`N2`, `H2O`).
    pub id: String,
    /// Human name.
    pub name: String,
    /// Molar mass, g/mol (numerically the relative molecular mass).
    pub molar_mass_g_mol: f64,
    /// Viscosity (hard-sphere) diameter at `reference_temperature_k`, m.
    pub diameter_m: f64,
    /// Temperature at which `diameter_m` holds, K.
    pub reference_temperature_k: f64,
    /// Sutherland constant S, K; `None` when unknown (the `sutherland` model
    /// then falls back to a fixed diameter, with a warning).
    pub sutherland_k: Option<f64>,
    /// Temperature range over which the diameter/Sutherland fit holds, K.
    pub fit_range_k: (f64, f64),
    /// Ionization-gauge sensitivity relative to N2 (reading / true pressure).
    pub ion_sensitivity: Option<f64>,
    /// Thermal-conductivity-gauge sensitivity relative to N2, in the gauge's
    /// linear (low-pressure) range; `None` where no general value exists.
    pub thermal_sensitivity: Option<f64>,
    /// Where the numbers come from.
    pub sources: GasSources,
}

struct Row {
    id: &'static str,
    name: &'static str,
    molar_mass: f64,
    /// nm at 273.15 K
    d_nm: f64,
    sutherland: f64,
    ion: f64,
    thermal: Option<f64>,
    thermo_fit: bool,
    molar_mass_src: &'static str,
    ion_src: &'static str,
}

// Molar masses: chemicals 1.5.2 (air: CoolProp 8.0.0 pseudo-pure air).
// Diameters and S: tests/reference/fit_gas_table.py; largest mean-free-path
// error of each fit over 273.15-500 K in the trailing comment.
// Ionization sensitivities: CRC Handbook sec. 15 (average of 12 experimenters;
// the table warns gauges differ by up to ±15 %).
// Thermal sensitivities: 1 for N2 by definition of an N2-calibrated gauge, and
// 1 for air (common practice, no source); none for other gases, whose response
// depends on the gauge's design and is not a constant factor.
const ROWS: &[Row] = &[
    row(
        "N2",
        "nitrogen",
        28.0134,
        0.37509,
        118.57,
        1.0,
        Some(1.0),
        false,
    ), // 0.098 %
    Row {
        molar_mass_src: "CoolProp 8.0.0 pseudo-pure air",
        ion_src: "0.99: mole-fraction mean of the CRC sec. 15 values for N2, O2, Ar over dry air (78.08/20.95/0.93 %, from memory)",
        ..row(
            "air",
            "dry air",
            28.96546,
            0.37171,
            122.54,
            0.99,
            Some(1.0),
            false,
        ) // 0.098 %
    },
    row("O2", "oxygen", 31.9988, 0.36147, 136.23, 0.96, None, false), // 0.101 %
    row("Ar", "argon", 39.948, 0.36462, 157.76, 1.4, None, false),    // 0.108 %
    row("He", "helium", 4.002602, 0.21776, 85.75, 0.18, None, false), // 0.407 %
    row("H2", "hydrogen", 2.01588, 0.27398, 87.79, 0.43, None, false), // 0.372 %
    // Water is polar; no Sutherland form follows its viscosity closer than this.
    row(
        "H2O",
        "water vapour",
        18.01528,
        0.46116,
        539.89,
        0.93,
        None,
        false,
    ), // 1.593 %
    row(
        "CO2",
        "carbon dioxide",
        44.0095,
        0.46254,
        267.73,
        1.4,
        None,
        false,
    ), // 0.164 %
    row(
        "CO",
        "carbon monoxide",
        28.0101,
        0.37646,
        117.87,
        1.0,
        None,
        true,
    ), // 0.034 %
    row("Ne", "neon", 20.1797, 0.25904, 95.62, 0.31, None, true), // 0.070 %
    row("Kr", "krypton", 83.798, 0.41455, 191.87, 1.9, None, true), // 0.118 %
    row("Xe", "xenon", 131.293, 0.48741, 260.24, 2.7, None, true), // 0.083 %
    row(
        "CH4", "methane", 16.04246, 0.41296, 167.61, 1.6, None, false,
    ), // 0.143 %
];

#[allow(clippy::too_many_arguments)]
const fn row(
    id: &'static str,
    name: &'static str,
    molar_mass: f64,
    d_nm: f64,
    sutherland: f64,
    ion: f64,
    thermal: Option<f64>,
    thermo_fit: bool,
) -> Row {
    Row {
        id,
        name,
        molar_mass,
        d_nm,
        sutherland,
        ion,
        thermal,
        thermo_fit,
        molar_mass_src: SRC_MOLAR_MASS,
        ion_src: SRC_ION_CRC,
    }
}

impl Row {
    fn to_gas(&self) -> Gas {
        let thermal_src = match (self.id, self.thermal) {
            ("N2", _) => "1 by definition (gauges are calibrated for N2)",
            (_, Some(_)) => "common practice, no source",
            (_, None) => {
                "none: depends on the gauge design; give a sensitivity or a calibration table"
            }
        };
        Gas {
            id: self.id.to_string(),
            name: self.name.to_string(),
            molar_mass_g_mol: self.molar_mass,
            diameter_m: self.d_nm * 1e-9,
            reference_temperature_k: T_REF_K,
            sutherland_k: Some(self.sutherland),
            fit_range_k: FIT_RANGE_K,
            ion_sensitivity: Some(self.ion),
            thermal_sensitivity: self.thermal,
            sources: GasSources {
                molar_mass: self.molar_mass_src.to_string(),
                diameter: if self.thermo_fit {
                    SRC_FIT_THERMO
                } else {
                    SRC_FIT_COOLPROP
                }
                .to_string(),
                ion_sensitivity: self.ion_src.to_string(),
                thermal_sensitivity: thermal_src.to_string(),
            },
        }
    }
}

/// An error looking up or adding a gas.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum GasError {
    /// The id is not in the table.
    #[error("unknown gas \"{id}\"{hint}; known gases: {known}")]
    Unknown {
        /// The id as given.
        id: String,
        /// `" (did you mean \"N2\"?)"` or empty.
        hint: String,
        /// The ids in the table.
        known: String,
    },
    /// A user gas reuses an existing id.
    #[error("gas \"{0}\" is already defined")]
    Duplicate(String),
    /// A user gas has a nonsensical value.
    #[error("gas \"{id}\": {what}")]
    Invalid {
        /// The gas id.
        id: String,
        /// What is wrong.
        what: String,
    },
}

/// The built-in gases plus any the user added.
#[derive(Debug, Clone, PartialEq)]
pub struct GasTable {
    gases: Vec<Gas>,
}

impl Default for GasTable {
    fn default() -> Self {
        Self::builtin()
    }
}

impl GasTable {
    /// The built-in table.
    pub fn builtin() -> Self {
        GasTable {
            gases: ROWS.iter().map(Row::to_gas).collect(),
        }
    }

    /// All gases, built-in first.
    pub fn iter(&self) -> impl Iterator<Item = &Gas> {
        self.gases.iter()
    }

    /// Looks a gas up by id, case-insensitively, or by its name ("argon").
    pub fn get(&self, id: &str) -> Result<&Gas, GasError> {
        let id = id.trim();
        self.gases
            .iter()
            .find(|g| g.id == id)
            .or_else(|| {
                self.gases
                    .iter()
                    .find(|g| g.id.eq_ignore_ascii_case(id) || g.name.eq_ignore_ascii_case(id))
            })
            .ok_or_else(|| {
                let hint = crate::suggest::nearest(id, self.gases.iter().map(|g| g.id.as_str()))
                    .map(|s| format!(" (did you mean \"{s}\"?)"))
                    .unwrap_or_default();
                GasError::Unknown {
                    id: id.to_string(),
                    hint,
                    known: self.ids().join(", "),
                }
            })
    }

    /// The ids, in table order.
    pub fn ids(&self) -> Vec<&str> {
        self.gases.iter().map(|g| g.id.as_str()).collect()
    }

    /// Adds a user-defined gas after checking its values.
    pub fn add(&mut self, gas: Gas) -> Result<(), GasError> {
        if self
            .gases
            .iter()
            .any(|g| g.id.eq_ignore_ascii_case(&gas.id))
        {
            return Err(GasError::Duplicate(gas.id));
        }
        let invalid = |what: &str| GasError::Invalid {
            id: gas.id.clone(),
            what: what.to_string(),
        };
        let positive = |x: f64| x.is_finite() && x > 0.0;
        if gas.id.trim().is_empty() || gas.id.contains(['=', ',', ' ']) {
            return Err(invalid(
                "an id must be non-empty, without spaces, '=' or ','",
            ));
        }
        if !positive(gas.molar_mass_g_mol) {
            return Err(invalid("molar mass must be positive"));
        }
        if !positive(gas.diameter_m) {
            return Err(invalid("diameter must be positive"));
        }
        if !positive(gas.reference_temperature_k) {
            return Err(invalid("reference temperature must be positive"));
        }
        if gas
            .sutherland_k
            .is_some_and(|s| !(s.is_finite() && s >= 0.0))
        {
            return Err(invalid("Sutherland constant must be zero or positive"));
        }
        for (what, s) in [
            ("ionization sensitivity", gas.ion_sensitivity),
            ("thermal sensitivity", gas.thermal_sensitivity),
        ] {
            if s.is_some_and(|s| !positive(s)) {
                return Err(invalid(&format!("{what} must be positive")));
            }
        }
        self.gases.push(gas);
        Ok(())
    }
}

impl fmt::Display for Gas {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.id)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_has_the_thirteen_gases() {
        let t = GasTable::builtin();
        assert_eq!(
            t.ids(),
            [
                "N2", "air", "O2", "Ar", "He", "H2", "H2O", "CO2", "CO", "Ne", "Kr", "Xe", "CH4"
            ]
        );
    }

    #[test]
    fn lookup_is_forgiving_but_exact_first() {
        let t = GasTable::builtin();
        assert_eq!(t.get("n2").map(|g| g.id.as_str()), Ok("N2"));
        assert_eq!(t.get("argon").map(|g| g.id.as_str()), Ok("Ar"));
        assert_eq!(t.get("AIR").map(|g| g.id.as_str()), Ok("air"));
        let e = t.get("N3").unwrap_err().to_string();
        assert!(e.contains("unknown gas \"N3\""), "{e}");
        assert!(e.contains("did you mean \"N2\""), "{e}");
    }

    #[test]
    fn molar_masses_match_iupac_values() {
        // Source: REFERENCES.md (b), chemicals 1.5.2 / IUPAC standard atomic weights.
        let t = GasTable::builtin();
        for (id, m) in [
            ("N2", 28.0134),
            ("Ar", 39.948),
            ("H2O", 18.01528),
            ("Xe", 131.293),
        ] {
            assert_eq!(t.get(id).map(|g| g.molar_mass_g_mol), Ok(m), "{id}");
        }
    }

    #[test]
    fn diameters_agree_with_textbook_viscosity_diameters() {
        // Source: REFERENCES.md (c), viscosity diameters printed in vacuum
        // textbooks, from memory; REFERENCES (b) says they agree with the
        // Chapman-Enskog diameters within 0.7 %. Allow 1.5 % (CO2 textbook
        // value 0.459 vs fit 0.4625).
        let textbook = [
            ("N2", 0.375),
            ("Ar", 0.364),
            ("He", 0.218),
            ("H2", 0.274),
            ("O2", 0.361),
            ("CO2", 0.459),
            ("H2O", 0.460),
            ("Ne", 0.259),
            ("Kr", 0.416),
            ("Xe", 0.485),
            ("CO", 0.376),
            ("CH4", 0.414),
            ("air", 0.372),
        ];
        let t = GasTable::builtin();
        for (id, d_nm) in textbook {
            let g = t.get(id).expect(id);
            let rel = g.diameter_m / (d_nm * 1e-9) - 1.0;
            assert!(rel.abs() < 0.015, "{id}: {rel}");
        }
    }

    #[test]
    fn ion_sensitivities_are_the_crc_values() {
        // Source: CRC Handbook of Chemistry and Physics, sec. 15 (REFERENCES.md (a)).
        let t = GasTable::builtin();
        for (id, s) in [
            ("He", 0.18),
            ("Ar", 1.4),
            ("H2", 0.43),
            ("CH4", 1.6),
            ("H2O", 0.93),
        ] {
            assert_eq!(t.get(id).map(|g| g.ion_sensitivity), Ok(Some(s)), "{id}");
        }
    }

    #[test]
    fn user_gases_are_checked() {
        let mut t = GasTable::builtin();
        let mut sf6 = t.get("N2").expect("N2").clone();
        sf6.id = "SF6".into();
        sf6.molar_mass_g_mol = 146.06;
        assert_eq!(t.add(sf6.clone()), Ok(()));
        assert!(t.get("sf6").is_ok());
        assert!(matches!(t.add(sf6.clone()), Err(GasError::Duplicate(_))));
        let mut bad = sf6;
        bad.id = "X1".into();
        bad.diameter_m = -1.0;
        assert!(matches!(t.add(bad), Err(GasError::Invalid { .. })));
    }
}
