//! `[log]`: how to read another logger's CSV export (checked by the core's
//! [`crate::log::foreign`]).

use super::Errors;
use crate::log::foreign::{ForeignLogSpec, LogSection};

/// Resolves `[log]`, every problem located at its value.
pub(super) fn resolve(errs: &mut Errors<'_>, l: LogSection) -> Option<ForeignLogSpec> {
    match l.resolve() {
        Ok(spec) => Some(spec),
        Err(problems) => {
            for (span, message) in problems {
                errs.err(span, message);
            }
            None
        }
    }
}
