//! `[[length]]`: named lengths for Knudsen numbers, flow regimes and mean
//! free path thresholds.

use super::{Errors, file};
use crate::engine::NamedLength;

/// Resolves the `[[length]]` tables: names non-empty and unique.
pub(super) fn resolve(
    errs: &mut Errors<'_>,
    sections: Vec<file::LengthSection>,
) -> Vec<NamedLength> {
    let mut out = Vec::new();
    let mut seen = Vec::<String>::new();
    for l in sections {
        let name = l.name.get_ref().trim().to_string();
        if name.is_empty() {
            errs.err(l.name.span(), "a length needs a non-empty name");
        } else if seen.contains(&name) {
            errs.err(l.name.span(), format!("length `{name}` is defined twice"));
        } else {
            seen.push(name.clone());
            out.push(NamedLength::new(name, l.length.si));
        }
    }
    out
}
