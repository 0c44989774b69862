//! `[chamber]`: the chamber's name, volume, surface area and assumed gas
//! temperature.

use super::file;

/// The chamber being watched.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Chamber {
    /// Name shown on screen and written into logs.
    pub name: String,
    /// Volume, m³ (for leak rates and pumping speeds).
    pub volume_m3: Option<f64>,
    /// Inner surface area, m² (for outgassing rates).
    pub surface_area_m2: Option<f64>,
    /// Gas temperature to assume when no gauge measures it, K.
    pub temperature_k: Option<f64>,
}

/// Resolves `[chamber]` (its values are checked while the file is read).
pub(super) fn resolve(c: file::ChamberSection) -> Chamber {
    Chamber {
        name: c.name.unwrap_or_default(),
        volume_m3: c.volume.map(|v| v.si),
        surface_area_m2: c.surface_area.map(|a| a.si),
        temperature_k: c.temperature.map(|t| t.si),
    }
}
