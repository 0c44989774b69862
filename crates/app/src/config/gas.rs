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

/// Resolves `[[gas.step]]`: each step's gas, its conditions (in the
/// syntax of gate conditions, on configured gauges and lengths) and its
/// data-time window, every problem located at its value.
pub(super) fn steps(
    errs: &mut Errors<'_>,
    gases: &GasTable,
    gauges: &[super::GaugeConfig],
    lengths: &[crate::engine::NamedLength],
    sections: Vec<file::GasStepSection>,
) -> Vec<crate::alarm::GasStep> {
    let gauge_ids: Vec<&str> = gauges.iter().map(|g| g.id.as_str()).collect();
    let length_of = |name: &str| lengths.iter().find(|l| l.name == name).map(|l| l.length_m);
    let mut ids = Vec::<String>::new();
    let mut out = Vec::new();
    for s in sections {
        let id = s.id.get_ref().trim().to_string();
        if id.is_empty() || id.contains(char::is_whitespace) {
            errs.err(s.id.span(), "a gas step id must be one word");
            continue;
        }
        if ids.contains(&id) {
            errs.err(s.id.span(), format!("gas step id `{id}` is used twice"));
            continue;
        }
        ids.push(id.clone());
        let mixture = match (&s.species, &s.mix) {
            (Some(_), Some(m)) => {
                errs.err(
                    m.span(),
                    format!("gas step `{id}`: give either `species` or `mix`, not both"),
                );
                None
            }
            (Some(t), None) | (None, Some(t)) => mixture(errs, gases, t),
            (None, None) => {
                errs.err(
                    s.id.span(),
                    format!("gas step `{id}` names no gas; give `species` or `mix`"),
                );
                None
            }
        };
        let mut when = Vec::new();
        let mut ok = true;
        for c in &s.when {
            match crate::alarm::syntax::condition(c.get_ref(), &length_of) {
                Ok(cond) => match &cond.gauge {
                    Some(g)
                        if g != crate::alarm::AUTO
                            && !gauge_ids.is_empty()
                            && !gauge_ids.contains(&g.as_str()) =>
                    {
                        let hint = crate::suggest::nearest(g, gauge_ids.iter().copied())
                            .map(|s| format!(" (did you mean `{s}`?)"))
                            .unwrap_or_default();
                        errs.err(
                            c.span(),
                            format!(
                                "no gauge `{g}` is configured{hint}; gauges: {}",
                                gauge_ids.join(", ")
                            ),
                        );
                        ok = false;
                    }
                    _ => when.push(cond),
                },
                Err(e) => {
                    errs.err(c.span(), format!("gas step `{id}`: {e}"));
                    ok = false;
                }
            }
        }
        let mut time = |t: &Option<toml::Spanned<String>>| match t {
            Some(t) => match chrono::DateTime::parse_from_rfc3339(t.get_ref().trim()) {
                Ok(v) => Some(v.with_timezone(&chrono::Utc)),
                Err(e) => {
                    errs.err(
                        t.span(),
                        format!(
                            "gas step `{id}`: `{}` is not a data time ({e}); write RFC 3339, e.g. \"2026-11-05T07:15:00Z\"",
                            t.get_ref()
                        ),
                    );
                    ok = false;
                    None
                }
            },
            None => None,
        };
        let (from, until) = (time(&s.from), time(&s.until));
        if let (Some(f), Some(u), Some(span)) = (from, until, s.until.as_ref().map(|u| u.span()))
            && f >= u
        {
            errs.err(
                span,
                format!("gas step `{id}`: `until` must be after `from`"),
            );
            ok = false;
        }
        if s.when.is_empty() && s.from.is_none() && s.until.is_none() {
            errs.err(
                s.id.span(),
                format!(
                    "gas step `{id}` has no `when`, `from` or `until`, so it would always apply; \
                     set the gas in [gas] instead, or give a condition (e.g. when = [\"cdg pressure above 1e-3 mbar\"])"
                ),
            );
            ok = false;
        }
        if let (Some(mixture), true) = (mixture, ok) {
            out.push(crate::alarm::GasStep {
                id,
                mixture,
                when,
                from,
                until,
            });
        }
    }
    out
}
