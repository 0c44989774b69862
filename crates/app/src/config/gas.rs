//! `[gas]`: user gases (`[[gas.custom]]`) added to the table, and the
//! chamber's gas or mixture.

use super::{Errors, file};
use crate::engine::mixture::Mixture;
use crate::gas::{Gas, GasSources, GasTable, T_REF_K};

/// Resolves `[gas]`: adds its custom gases to `gases` and returns the
/// chamber's mixture, if the section names one.
pub(super) fn resolve(
    errs: &mut Errors<'_>,
    gases: &mut GasTable,
    g: file::GasSection,
) -> Option<Mixture> {
    for custom in g.custom {
        custom_gas(errs, gases, custom);
    }
    match (g.species, g.mix) {
        (Some(_), Some(m)) => {
            errs.err(
                m.span(),
                "give either `species` or `mix` in [gas], not both",
            );
            None
        }
        (Some(s), None) | (None, Some(s)) => mixture(errs, gases, &s),
        (None, None) => None,
    }
}

/// Reads a gas or mixture text (`"Ar"`, `"H2=0.6,N2=0.4"`), located at
/// the text on error.
pub(super) fn mixture(
    errs: &mut Errors<'_>,
    table: &GasTable,
    text: &toml::Spanned<String>,
) -> Option<Mixture> {
    match Mixture::parse(text.get_ref(), table) {
        Ok(m) => Some(m),
        Err(e) => {
            errs.err(text.span(), e.to_string());
            None
        }
    }
}

fn custom_gas(errs: &mut Errors<'_>, table: &mut GasTable, g: file::CustomGas) {
    let id = g.id.get_ref().trim().to_string();
    let gas = Gas {
        name: g.name.unwrap_or_else(|| id.clone()),
        id,
        molar_mass_g_mol: g.molar_mass,
        diameter_m: g.diameter.si,
        reference_temperature_k: g.reference_temperature.map_or(T_REF_K, |t| t.si),
        sutherland_k: g.sutherland.map(|t| t.si),
        fit_range_k: g
            .valid_range
            .map_or((0.0, f64::INFINITY), |[lo, hi]| (lo.si, hi.si)),
        ion_sensitivity: g.ion_sensitivity,
        thermal_sensitivity: g.thermal_sensitivity,
        sources: {
            let s = g.source.unwrap_or_else(|| "user configuration".to_string());
            GasSources {
                molar_mass: s.clone(),
                diameter: s.clone(),
                ion_sensitivity: s.clone(),
                thermal_sensitivity: s,
            }
        },
    };
    if let Err(e) = table.add(gas) {
        errs.err(g.id.span(), e.to_string());
    }
}
