//! The TOML configuration: what the file may say ([`file`] types, every key
//! checked, unknown keys refused with a suggestion) and the resolved
//! [`Config`] the rest of the program uses.
//!
//! Each section is resolved by its own module into plain types, with every
//! problem located at its value: [`chamber`](Chamber), `gas`, `lengths`,
//! `gauges`, `physics`, `display`, `sources`, `record`, `log` and `alarms`
//! (`[alarms]`, `[[alarm]]`, `[[gate]]`), `chamber_pressure`. This module only reads the file
//! and hands each section to its resolver, in dependency order (gases before
//! gauges, gauges and lengths before alarms).
//!
//! Errors name the file, line and column; several problems in one file are
//! reported together.

mod alarms;
mod chamber;
mod chamber_pressure;
mod display;
pub mod edit;
mod error;
pub mod file;
mod gas;
mod gauges;
mod lengths;
mod log;
mod monitor;
mod physics;
mod record;
mod sources;

use std::path::{Path, PathBuf};

pub use alarms::{ActionSpec, AlarmConfig};
pub use chamber::Chamber;
pub use display::Display;
pub use error::{ConfigError, ConfigErrors};
pub use gauges::GaugeConfig;
pub use record::RecordConfig;
pub use sources::SourceConfig;

use crate::engine::mixture::Mixture;
use crate::engine::{Model, NamedLength, Physics};
use crate::gas::GasTable;
use crate::units::{UnitKind, format_sig};

/// A checked, resolved configuration.
#[derive(Debug, Clone)]
pub struct Config {
    /// Where it was read from; `None` for the built-in defaults.
    pub path: Option<PathBuf>,
    /// The chamber.
    pub chamber: Chamber,
    /// Built-in and user gases.
    pub gases: GasTable,
    /// The chamber's gas.
    pub mixture: Mixture,
    /// Gauges.
    pub gauges: Vec<GaugeConfig>,
    /// Named lengths for Knudsen numbers.
    pub lengths: Vec<NamedLength>,
    /// Physics settings.
    pub physics: Physics,
    /// Display preferences.
    pub display: Display,
    /// Sources.
    pub sources: Vec<SourceConfig>,
    /// Recording.
    pub record: RecordConfig,
    /// Alarms and gates.
    pub alarms: AlarmConfig,
    /// How to read another logger's CSV (`[log]`), when configured.
    pub log: Option<crate::log::foreign::ForeignLogSpec>,
    /// How the chamber pressure is chosen (`[chamber_pressure]`).
    pub chamber_pressure: crate::alarm::ChamberPressure,
}

impl Default for Config {
    fn default() -> Self {
        let gases = GasTable::builtin();
        let n2 = gases.get("N2").expect("built-in gas table has N2").clone();
        Config {
            path: None,
            chamber: Chamber::default(),
            mixture: Mixture::pure(n2),
            gases,
            gauges: Vec::new(),
            lengths: Vec::new(),
            physics: Physics::default(),
            display: Display::default(),
            sources: Vec::new(),
            record: RecordConfig::default(),
            alarms: AlarmConfig::default(),
            log: None,
            chamber_pressure: crate::alarm::ChamberPressure::default(),
        }
    }
}

/// Reads and checks a configuration file.
pub fn load(path: &Path) -> Result<Config, ConfigErrors> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| ConfigError::file(path, format!("cannot read the file: {e}")))?;
    parse(&text, path)
}

/// Parses and checks configuration text; `path` is used in messages.
pub fn parse(text: &str, path: &Path) -> Result<Config, ConfigErrors> {
    let raw: file::ConfigFile = toml::from_str(text).map_err(|e| {
        let span = e.span().unwrap_or(0..0);
        let section = error::section_at(text, span.start);
        let message = error::explain_serde_message(e.message(), section.as_deref());
        ConfigError::at(path, text, span, message)
    })?;
    let mut errs = Errors {
        path,
        text,
        list: Vec::new(),
    };
    let config = resolve(&mut errs, raw);
    if errs.list.is_empty() {
        Ok(config)
    } else {
        Err(ConfigErrors(errs.list))
    }
}

/// Problems found while resolving, each located in the text.
struct Errors<'a> {
    path: &'a Path,
    text: &'a str,
    list: Vec<ConfigError>,
}

impl Errors<'_> {
    /// Records a problem at `span` (bytes of the text).
    fn err(&mut self, span: std::ops::Range<usize>, message: impl Into<String>) {
        self.list
            .push(ConfigError::at(self.path, self.text, span, message));
    }
}

/// Hands each section to its resolver, in dependency order.
fn resolve(errs: &mut Errors<'_>, raw: file::ConfigFile) -> Config {
    let mut config = Config {
        path: Some(errs.path.to_path_buf()),
        ..Config::default()
    };
    if let Some(c) = raw.chamber {
        config.chamber = chamber::resolve(c);
    }
    if let Some(p) = raw.physics {
        config.physics = physics::resolve(errs, p);
    }
    if let Some(d) = raw.display {
        config.display = display::resolve(errs, d);
    }
    if let Some(g) = raw.gas
        && let Some(m) = gas::resolve(errs, &mut config.gases, g)
    {
        config.mixture = m;
    }
    config.lengths = lengths::resolve(errs, raw.length);
    config.gauges = gauges::resolve(errs, &config.gases, &config.mixture, raw.gauge);
    config.sources = raw
        .source
        .into_iter()
        .filter_map(|s| sources::resolve(errs, s))
        .collect();
    if let Some(r) = raw.record {
        config.record = record::resolve(errs, r);
    }
    if let Some(l) = raw.log {
        config.log = log::resolve(errs, l);
    }
    config.chamber_pressure = chamber_pressure::resolve(errs, &config.gauges, raw.chamber_pressure);
    config.alarms = alarms::resolve(
        errs,
        &config.gauges,
        &config.lengths,
        raw.alarms,
        raw.alarm,
        raw.gate,
    );
    config
}

impl Config {
    /// A short human summary, as printed by `rarefy config check`.
    pub fn summary(&self) -> String {
        let mut out = String::new();
        let mut line = |s: String| {
            out.push_str(&s);
            out.push('\n');
        };
        let name = if self.chamber.name.is_empty() {
            "(unnamed)"
        } else {
            &self.chamber.name
        };
        line(format!("chamber    {name}"));
        if let Some(v) = self.chamber.volume_m3 {
            line(format!("  volume   {} L", format_sig(v * 1e3, 4)));
        }
        if let Some(a) = self.chamber.surface_area_m2 {
            line(format!("  surface  {} m2", format_sig(a, 4)));
        }
        if let Some(t) = self.chamber.temperature_k {
            line(format!(
                "  assumed temperature {}",
                crate::units::format_temperature(t, self.display.temperature_unit)
            ));
        }
        line(format!("gas        {}", self.mixture.label()));
        line(format!(
            "physics    model {}, viscous below Kn {}, molecular above Kn {}, ISO 3529-1:{}, {:e} sites/m2, sticking {}",
            Model::as_str(self.physics.model),
            self.physics.bounds.viscous_below,
            self.physics.bounds.molecular_above,
            self.physics.edition.year(),
            self.physics.sites_per_m2,
            self.physics.sticking
        ));
        for l in &self.lengths {
            line(format!(
                "length     {:<24} {} m",
                l.name,
                format_sig(l.length_m, 4)
            ));
        }
        for g in &self.gauges {
            let s = g.model().and_then(|m| m.correct(1e-3).sensitivity);
            let response = match (g.kind.is_gas_dependent(), s) {
                (false, _) => "reads true pressure".to_string(),
                (true, Some(s)) => format!("sensitivity {s:.3} for {}", g.mixture.label()),
                (true, None) => format!("calibration table for {}", g.mixture.label()),
            };
            line(format!(
                "gauge      {:<12} {:<12} {response}",
                g.id,
                g.kind.as_str()
            ));
        }
        for r in &self.alarms.rules {
            let enable = r
                .enable
                .as_ref()
                .map(|c| format!(", enabled while {}", c.text))
                .unwrap_or_default();
            line(format!(
                "alarm      {:<20} {:<8} {} {}{enable}",
                r.rule.id,
                r.rule.severity.as_str(),
                r.rule.gauge,
                r.rule.quantity
            ));
        }
        for g in &self.alarms.gates {
            let conds: Vec<&str> = g.conditions.iter().map(|c| c.text.as_str()).collect();
            line(format!(
                "gate       {:<20} {} for {} s",
                g.id,
                conds.join(" and "),
                g.hold_s
            ));
        }
        line(format!(
            "display    pressure in {}, temperature in {}, history {} s",
            UnitKind::symbol(self.display.pressure_unit),
            UnitKind::symbol(self.display.temperature_unit),
            self.display.history_s
        ));
        if let Some(l) = &self.log {
            line(format!("log        {}", l.summary()));
        }
        out
    }
}

#[cfg(test)]
mod tests;
