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
    /// `[[gas.step]]`: gases in force by condition or data time.
    pub gas_steps: Vec<crate::alarm::GasStep>,
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
            gas_steps: Vec::new(),
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
    let text = read_text(path)?;
    parse(&text, path)
}

/// Reads a configuration file's text. Bytes that are not UTF-8 are an error
/// naming their line, column and byte offset.
pub fn read_text(path: &Path) -> Result<String, ConfigErrors> {
    let bytes = std::fs::read(path)
        .map_err(|e| ConfigError::file(path, format!("cannot read the file: {e}")))?;
    String::from_utf8(bytes).map_err(|e| {
        let bytes = e.as_bytes();
        let at = e.utf8_error().valid_up_to();
        // The prefix up to `at` is valid UTF-8.
        let before = std::str::from_utf8(&bytes[..at]).unwrap_or_default();
        let line_start = before.rfind('\n').map_or(0, |i| i + 1);
        ConfigErrors(vec![ConfigError {
            line: Some(before.matches('\n').count() + 1),
            column: Some(before[line_start..].chars().count() + 1),
            ..ConfigError::file(
                path,
                format!(
                    "byte 0x{:02x} at byte offset {at} is not UTF-8; the file must be UTF-8 text",
                    bytes[at]
                ),
            )
        }])
    })
}

/// Parses and checks configuration text; `path` is used in messages. Every
/// problem found is reported: all syntax errors, every unknown key or wrong
/// type, then (when the file's shape is sound) every value's problem.
pub fn parse(text: &str, path: &Path) -> Result<Config, ConfigErrors> {
    let mut errs = Errors {
        path,
        text,
        list: Vec::new(),
    };
    let raw = read_raw(&mut errs);
    let config = match raw {
        Some(raw) => resolve(&mut errs, raw),
        None => Config::default(),
    };
    if errs.list.is_empty() {
        Ok(config)
    } else {
        errs.list
            .sort_by_key(|e| (e.line.unwrap_or(0), e.column.unwrap_or(0)));
        Err(ConfigErrors(errs.list))
    }
}

/// Reads the text into the file's sections, collecting every syntax error
/// and every unknown key or wrong type instead of stopping at the first: an
/// entry in error is reported, taken out, and the rest read again. `None`
/// when what is left cannot be resolved without misleading follow-on errors
/// (a syntax error, or a whole table left out).
fn read_raw(errs: &mut Errors<'_>) -> Option<file::ConfigFile> {
    use serde::Deserialize;
    let text = errs.text;
    let (root, syntax) = toml::de::DeTable::parse_recoverable(text);
    for e in &syntax {
        errs.err(e.span().unwrap_or(0..0), e.message().trim().to_string());
    }
    // A table with a syntax error in it (or in its header) is read back
    // unreliably: its other problems are not reported.
    let broken: Vec<usize> = errs
        .list
        .iter()
        .filter_map(|e| e.line)
        .map(|l| table_region(text, l))
        .collect();
    let span = root.span();
    let mut table = root.into_inner();
    let mut removed_keys: Vec<String> = Vec::new();
    let mut whole_table_left_out = false;
    // Each round takes one entry out; a file has far fewer than this.
    for _ in 0..500 {
        let attempt = toml::Spanned::new(span.clone(), table.clone());
        let e = match file::ConfigFile::deserialize(toml::de::Deserializer::from(attempt)) {
            Ok(raw) => {
                return (syntax.is_empty() && !whole_table_left_out).then_some(raw);
            }
            Err(e) => e,
        };
        let at = e.span().unwrap_or(0..0);
        let Some(out) = take_out(&mut table, at.start, 0) else {
            errs.err(at, e.message().trim().to_string());
            return None;
        };
        whole_table_left_out |= out.whole_table;
        let message = e.message();
        let follow_on = message
            .strip_prefix("missing field `")
            .and_then(|m| m.split('`').next())
            .is_some_and(|k| {
                // Missing because it was taken out, or misspelt.
                removed_keys
                    .iter()
                    .any(|r| r == k || crate::suggest::nearest(r, [k]).is_some())
            });
        removed_keys.push(out.key.clone());
        let line = text[..at.start.min(text.len())].matches('\n').count() + 1;
        if follow_on || broken.contains(&table_region(text, line)) {
            continue;
        }
        let message = if out.depth == 0 && message.starts_with("unknown field `") {
            error::unknown_section(message, &out.key, out.header)
        } else {
            let section = error::section_at(text, at.start);
            error::explain_serde_message(message, section.as_deref())
        };
        errs.err(at, message);
    }
    None
}

/// The line of the table header in force at one-based `line` (0 before any).
fn table_region(text: &str, line: usize) -> usize {
    text.lines()
        .take(line)
        .enumerate()
        .filter(|(_, l)| l.trim_start().starts_with('['))
        .map(|(i, _)| i + 1)
        .last()
        .unwrap_or(0)
}

/// An entry taken out of the file by [`take_out`].
struct TakenOut {
    /// Its key.
    key: String,
    /// Nesting: 0 for a top-level key.
    depth: usize,
    /// A whole table (or array element) was taken out.
    whole_table: bool,
    /// How its header reads: `[key]`, `[[key]]` or `key`.
    header: &'static str,
}

/// Takes out of `table` the innermost entry at byte `pos`: the key or value
/// there, or else the table (or array element) whose header holds `pos`.
fn take_out(table: &mut toml::de::DeTable<'_>, pos: usize, depth: usize) -> Option<TakenOut> {
    take_entry(table, pos, depth).or_else(|| take_table(table, pos, depth))
}

fn contains(r: std::ops::Range<usize>, pos: usize) -> bool {
    r.start <= pos && pos < r.end.max(r.start + 1)
}

/// Whether `v` is an array of tables (`[[x]]`).
fn is_table_array(v: &toml::de::DeValue<'_>) -> bool {
    matches!(v, toml::de::DeValue::Array(a) if !a.is_empty() && a.iter().all(|i| i.get_ref().is_table()))
}

fn header_of(v: &toml::de::DeValue<'_>) -> &'static str {
    match v {
        toml::de::DeValue::Table(_) => "[]",
        v if is_table_array(v) => "[[]]",
        _ => "",
    }
}

/// Takes out the entry whose key or plain value holds `pos`, at any depth.
fn take_entry(table: &mut toml::de::DeTable<'_>, pos: usize, depth: usize) -> Option<TakenOut> {
    use toml::de::DeValue;
    let mut hit: Option<String> = None;
    for (k, v) in table.iter_mut() {
        if contains(k.span(), pos) {
            hit = Some(k.get_ref().to_string());
            break;
        }
        let value_span = v.span();
        match v.get_mut() {
            DeValue::Table(t) => {
                if let Some(out) = take_entry(t, pos, depth + 1) {
                    return Some(out);
                }
            }
            DeValue::Array(items) if items.iter().all(|i| i.get_ref().is_table()) => {
                for item in items.iter_mut() {
                    if let DeValue::Table(t) = item.get_mut()
                        && let Some(out) = take_entry(t, pos, depth + 1)
                    {
                        return Some(out);
                    }
                }
            }
            _ if contains(value_span, pos) => {
                hit = Some(k.get_ref().to_string());
                break;
            }
            _ => {}
        }
    }
    let key = hit?;
    let header = table
        .get(key.as_str())
        .map_or("", |v| header_of(v.get_ref()));
    table.remove(key.as_str());
    Some(TakenOut {
        key,
        depth,
        whole_table: !header.is_empty(),
        header,
    })
}

/// Takes out the innermost table or array element whose span holds `pos`.
fn take_table(table: &mut toml::de::DeTable<'_>, pos: usize, depth: usize) -> Option<TakenOut> {
    use toml::de::DeValue;
    let mut hit: Option<String> = None;
    for (k, v) in table.iter_mut() {
        let key = k.get_ref().to_string();
        let value_span = v.span();
        match v.get_mut() {
            DeValue::Table(t) => {
                if let Some(out) = take_table(t, pos, depth + 1) {
                    return Some(out);
                }
                if contains(value_span, pos) {
                    hit = Some(key);
                    break;
                }
            }
            DeValue::Array(items) if items.iter().all(|i| i.get_ref().is_table()) => {
                let mut drop = None;
                for (i, item) in items.iter_mut().enumerate() {
                    let span = item.span();
                    if let DeValue::Table(t) = item.get_mut()
                        && let Some(out) = take_table(t, pos, depth + 1)
                    {
                        return Some(out);
                    }
                    if contains(span, pos) {
                        drop = Some(i);
                        break;
                    }
                }
                if let Some(i) = drop {
                    // Drop the element: rebuild the array without it.
                    let mut kept = toml::de::DeArray::new();
                    for (j, item) in items.iter().enumerate() {
                        if j != i {
                            kept.push(item.clone());
                        }
                    }
                    *items = kept;
                    return Some(TakenOut {
                        key,
                        depth,
                        whole_table: true,
                        header: "[[]]",
                    });
                }
            }
            _ => {}
        }
    }
    let key = hit?;
    table.remove(key.as_str());
    Some(TakenOut {
        key,
        depth,
        whole_table: true,
        header: "[]",
    })
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
fn resolve(errs: &mut Errors<'_>, mut raw: file::ConfigFile) -> Config {
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
    let steps = raw
        .gas
        .as_mut()
        .map(|g| std::mem::take(&mut g.step))
        .unwrap_or_default();
    if let Some(g) = raw.gas
        && let Some(m) = gas::resolve(errs, &mut config.gases, g)
    {
        config.mixture = m;
    }
    config.lengths = lengths::resolve(errs, raw.length);
    config.gauges = gauges::resolve(errs, &config.gases, &config.mixture, raw.gauge);
    config.gas_steps = gas::steps(errs, &config.gases, &config.gauges, &config.lengths, steps);
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
        for s in &self.gas_steps {
            let mut when: Vec<String> = s.when.iter().map(|c| c.text.clone()).collect();
            if let Some(f) = s.from {
                when.push(format!("from {}", crate::timefmt::write_rfc3339(f)));
            }
            if let Some(u) = s.until {
                when.push(format!("until {}", crate::timefmt::write_rfc3339(u)));
            }
            line(format!(
                "  step     {:<12} {} while {}",
                s.id,
                s.mixture.label(),
                when.join(" and ")
            ));
        }
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
