//! `[chamber_pressure]`: the gauges the chamber pressure may come from, in
//! order of preference, and a gauge fixed for a quantity.

use toml::Spanned;

use super::gauges::GaugeConfig;
use super::{Errors, file};
use crate::alarm::{AUTO, ChamberPressure};

/// Resolves `[chamber_pressure]`; every gauge named must be configured.
pub(super) fn resolve(
    errs: &mut Errors<'_>,
    gauges: &[GaugeConfig],
    section: Option<file::ChamberPressureSection>,
) -> ChamberPressure {
    let mut out = ChamberPressure::default();
    let Some(s) = section else {
        return out;
    };
    let ids: Vec<&str> = gauges.iter().map(|g| g.id.as_str()).collect();
    let known = |errs: &mut Errors<'_>, g: &Spanned<String>| -> Option<String> {
        let id = g.get_ref().trim();
        if ids.contains(&id) {
            return Some(id.to_string());
        }
        let message = if id == AUTO {
            format!("`{AUTO}` is the chamber pressure itself; name a gauge")
        } else {
            let hint = crate::suggest::nearest(id, ids.iter().copied())
                .map(|s| format!(" (did you mean `{s}`?)"))
                .unwrap_or_default();
            format!(
                "no gauge `{id}` is configured{hint}; gauges: {}",
                if ids.is_empty() {
                    "none".to_string()
                } else {
                    ids.join(", ")
                }
            )
        };
        errs.err(g.span(), message);
        None
    };
    if let Some(list) = &s.gauges {
        if list.get_ref().is_empty() {
            errs.err(
                list.span(),
                "`gauges` lists no gauge; leave it out for the automatic order",
            );
        }
        for g in list.get_ref() {
            if let Some(id) = known(errs, g) {
                if out.order.contains(&id) {
                    errs.err(g.span(), format!("gauge `{id}` is listed twice"));
                } else {
                    out.order.push(id);
                }
            }
        }
    }
    let fixed = [
        ("pressure", &s.pressure),
        ("mean_free_path", &s.mean_free_path),
        ("knudsen", &s.knudsen),
        ("impingement", &s.impingement),
        ("monolayer_time", &s.monolayer_time),
        ("exposure", &s.exposure),
        ("rate_of_change", &s.rate_of_change),
        ("regime", &s.regime),
        ("vacuum_range", &s.vacuum_range),
    ];
    for (q, g) in fixed {
        if let Some(g) = g
            && let Some(id) = known(errs, g)
        {
            out.fixed.insert(q.to_string(), id);
        }
    }
    out
}
