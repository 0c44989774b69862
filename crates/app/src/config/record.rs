//! `[record]`: where and how logs are written.

use std::path::PathBuf;

use super::{Errors, file};
use crate::record::RecordSettings;

/// Recording settings.
#[derive(Debug, Clone, PartialEq)]
pub struct RecordConfig {
    /// Directory from the config, if given.
    pub dir: Option<PathBuf>,
    /// Rotation and buffering.
    pub settings: RecordSettings,
    /// Flush interval, s.
    pub flush_s: f64,
    /// Write derived columns.
    pub derived: bool,
}

impl Default for RecordConfig {
    fn default() -> Self {
        RecordConfig {
            dir: None,
            settings: RecordSettings::default(),
            flush_s: 1.0,
            derived: false,
        }
    }
}

/// Resolves `[record]`.
pub(super) fn resolve(errs: &mut Errors<'_>, r: file::RecordSection) -> RecordConfig {
    let mut out = RecordConfig {
        dir: r.dir.map(PathBuf::from),
        ..RecordConfig::default()
    };
    if let Some(p) = r.prefix {
        let v = p.get_ref();
        if v.is_empty() || v.contains(['/', '\\']) {
            errs.err(
                p.span(),
                "prefix must be a non-empty file name part without '/'",
            );
        } else {
            out.settings.prefix = v.clone();
        }
    }
    if let Some(m) = r.max_size {
        out.settings.max_bytes = Some(m.si as u64);
    }
    if let Some(d) = r.rotate_daily {
        out.settings.rotate_daily = d;
    }
    if let Some(f) = r.flush {
        if f.get_ref().si <= 0.0 {
            errs.err(f.span(), "flush must be longer than zero");
        } else {
            out.flush_s = f.get_ref().si;
        }
    }
    if let Some(b) = r.buffer_rows {
        match usize::try_from(*b.get_ref()) {
            Ok(n) if n > 0 => out.settings.buffer_rows = n,
            _ => errs.err(b.span(), "buffer_rows must be a positive whole number"),
        }
    }
    if let Some(d) = r.derived {
        out.derived = d;
    }
    out
}
