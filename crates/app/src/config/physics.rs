//! `[physics]`: the viscosity model, flow-regime bounds, ISO 3529-1 edition
//! and surface constants.

use super::{Errors, file};
use crate::engine::Physics;
use crate::engine::exposure::ExposureStart;
use crate::engine::regime::{IsoEdition, RegimeBounds};

/// Resolves `[physics]`: the model, regime bounds, ISO edition and surface
/// constants.
pub(super) fn resolve(errs: &mut Errors<'_>, p: file::PhysicsSection) -> Physics {
    let d = Physics::default();
    let mut out = Physics {
        model: p.model.unwrap_or(d.model),
        ..d
    };
    let bounds = RegimeBounds {
        viscous_below: p
            .viscous_below
            .as_ref()
            .map_or(d.bounds.viscous_below, |s| *s.get_ref()),
        molecular_above: p
            .molecular_above
            .as_ref()
            .map_or(d.bounds.molecular_above, |s| *s.get_ref()),
    };
    match bounds.validate() {
        Ok(()) => out.bounds = bounds,
        Err(msg) => {
            let span = p
                .viscous_below
                .as_ref()
                .or(p.molecular_above.as_ref())
                .map_or(0..0, |s| s.span());
            errs.err(span, msg);
        }
    }
    if let Some(e) = p.iso_edition {
        match IsoEdition::from_year(*e.get_ref()) {
            Some(ed) => out.edition = ed,
            None => errs.err(
                e.span(),
                format!(
                    "unknown ISO 3529-1 edition {}; expected 1981 or 2019",
                    e.get_ref()
                ),
            ),
        }
    }
    if let Some(s) = p.sites_per_m2 {
        let v = *s.get_ref();
        if v.is_finite() && v > 0.0 {
            out.sites_per_m2 = v;
        } else {
            errs.err(
                s.span(),
                "sites_per_m2 must be a positive number (e.g. 1e19)",
            );
        }
    }
    if let Some(s) = p.sticking {
        let v = *s.get_ref();
        if v.is_finite() && v > 0.0 && v <= 1.0 {
            out.sticking = v;
        } else {
            errs.err(s.span(), "sticking must be greater than 0 and at most 1");
        }
    }
    if let Some(s) = p.exposure_start {
        match exposure_start(s.get_ref()) {
            Ok(start) => out.exposure_start = start,
            Err(msg) => errs.err(s.span(), msg),
        }
    }
    out
}

/// Reads `exposure_start`: `"below 0.1 Pa"`, `"reset"` or `"first reading"`.
fn exposure_start(text: &str) -> Result<ExposureStart, String> {
    let expected =
        "expected \"below PRESSURE\" (e.g. \"below 0.1 Pa\"), \"reset\" or \"first reading\"";
    let t = text.trim();
    if t == "reset" {
        return Ok(ExposureStart::Reset);
    }
    if t.split_whitespace().collect::<Vec<_>>() == ["first", "reading"] {
        return Ok(ExposureStart::FirstReading);
    }
    match t.strip_prefix("below") {
        Some(p) => crate::units::parse::<crate::units::PressureUnit>(p)
            .map(|q| ExposureStart::Below(q.si))
            .map_err(|e| format!("exposure_start: {e}")),
        None => Err(format!("exposure_start \"{t}\": {expected}")),
    }
}
