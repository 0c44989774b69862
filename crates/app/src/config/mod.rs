//! The TOML configuration: what the file may say ([`file`] types, every key
//! checked, unknown keys refused with a suggestion) and the resolved
//! [`Config`] the rest of the program uses.
//!
//! Errors name the file, line and column; several problems in one file are
//! reported together.

pub mod edit;
mod error;
pub mod file;

use std::path::{Path, PathBuf};

pub use error::{ConfigError, ConfigErrors};

use crate::engine::gauge::{CalibrationTable, GaugeKind};
use crate::engine::mixture::Mixture;
use crate::engine::regime::{IsoEdition, RegimeBounds};
use crate::engine::{GaugeModel, GaugeOverrides, Model, NamedLength, Physics};
use crate::gas::{Gas, GasSources, GasTable, T_REF_K};
use crate::parse::template::{Template, TemplateSpec};
use crate::record::RecordSettings;
use crate::sample::ChannelUnit;
use crate::source::{Poll, SourceUri};
use crate::timefmt::{TimeFormat, Zone};
use crate::units::{PressureUnit, TemperatureUnit, UnitKind, format_sig};

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

/// A gauge as configured, with its gas response resolved.
#[derive(Debug, Clone, PartialEq)]
pub struct GaugeConfig {
    /// Short id, also the channel name in logs.
    pub id: String,
    /// Human label.
    pub label: String,
    /// Kind of gauge.
    pub kind: GaugeKind,
    /// Gas the gauge sees (the chamber's, or the gauge's own override).
    pub mixture: Mixture,
    /// Reading → true pressure.
    pub model: GaugeModel,
}

/// Display preferences.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Display {
    /// Unit pressures are shown in.
    pub pressure_unit: PressureUnit,
    /// Unit temperatures are shown in.
    pub temperature_unit: TemperatureUnit,
    /// Length of the trend history, s.
    pub history_s: f64,
}

impl Default for Display {
    fn default() -> Self {
        Display {
            pressure_unit: PressureUnit::Mbar,
            temperature_unit: TemperatureUnit::C,
            history_s: 3600.0,
        }
    }
}

/// A configured source, ready to start.
#[derive(Debug, Clone)]
pub struct SourceConfig {
    /// Where to read.
    pub uri: SourceUri,
    /// Poll request, if the controller must be asked.
    pub poll: Option<Poll>,
    /// Line templates; empty means the plain format.
    pub templates: Vec<Template>,
}

impl SourceConfig {
    /// A source from a URI alone (the plain format).
    pub fn from_uri(uri: SourceUri) -> Self {
        SourceConfig {
            uri,
            poll: None,
            templates: Vec::new(),
        }
    }

    /// The decoder for this source's lines.
    pub fn decoder(&self) -> Box<dyn crate::parse::Decoder> {
        if self.templates.is_empty() {
            let unit = self
                .uri
                .unit
                .as_deref()
                .and_then(ChannelUnit::parse)
                .unwrap_or(ChannelUnit::Pressure(PressureUnit::Mbar));
            let channel = self.uri.channel.clone().unwrap_or_else(|| "p".into());
            Box::new(crate::parse::logline::AutoDecoder::new(
                crate::parse::plain::PlainDecoder::new(channel, unit),
            ))
        } else {
            Box::new(crate::parse::template::TemplateDecoder::new(
                self.templates.clone(),
            ))
        }
    }
}

/// A command run on an alarm's or gate's events (never through a shell).
#[derive(Debug, Clone, PartialEq)]
pub struct ActionSpec {
    /// Rule or gate id.
    pub id: String,
    /// Program and arguments.
    pub argv: Vec<String>,
    /// Stopped after this long, s.
    pub timeout_s: f64,
    /// At most one run this often, s.
    pub repeat_after_s: f64,
}

/// Alarms, gates and their settings.
#[derive(Debug, Clone)]
pub struct AlarmConfig {
    /// Rules.
    pub rules: Vec<crate::alarm::RuleSpec>,
    /// Gates.
    pub gates: Vec<crate::alarm::Gate>,
    /// Commands to run.
    pub actions: Vec<ActionSpec>,
    /// Gauge for rules and conditions that name none.
    pub default_gauge: Option<String>,
    /// A gauge with no reading for this long is stale, s.
    pub stale_after_s: f64,
    /// Window of the rate-of-change fit, s.
    pub rate_window_s: f64,
    /// Severity of no-valid-reading alarms.
    pub input_severity: crate::alarm::Severity,
    /// Ring the bell on new alarms.
    pub bell: bool,
}

impl Default for AlarmConfig {
    fn default() -> Self {
        AlarmConfig {
            rules: Vec::new(),
            gates: Vec::new(),
            actions: Vec::new(),
            default_gauge: None,
            stale_after_s: 10.0,
            rate_window_s: 10.0,
            input_severity: crate::alarm::Severity::Warning,
            bell: true,
        }
    }
}

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
    Resolver {
        path,
        text,
        errors: Vec::new(),
    }
    .resolve(raw)
}

struct Resolver<'a> {
    path: &'a Path,
    text: &'a str,
    errors: Vec<ConfigError>,
}

impl Resolver<'_> {
    fn err(&mut self, span: std::ops::Range<usize>, message: impl Into<String>) {
        self.errors
            .push(ConfigError::at(self.path, self.text, span, message));
    }

    fn resolve(mut self, raw: file::ConfigFile) -> Result<Config, ConfigErrors> {
        let mut config = Config {
            path: Some(self.path.to_path_buf()),
            ..Config::default()
        };
        if let Some(c) = raw.chamber {
            config.chamber = Chamber {
                name: c.name.unwrap_or_default(),
                volume_m3: c.volume.map(|v| v.si),
                surface_area_m2: c.surface_area.map(|a| a.si),
                temperature_k: c.temperature.map(|t| t.si),
            };
        }
        if let Some(p) = raw.physics {
            config.physics = self.physics(p);
        }
        if let Some(d) = raw.display {
            let defaults = Display::default();
            config.display = Display {
                pressure_unit: d.pressure_unit.unwrap_or(defaults.pressure_unit),
                temperature_unit: d.temperature_unit.unwrap_or(defaults.temperature_unit),
                history_s: match d.history {
                    Some(h) if h.get_ref().si <= 0.0 => {
                        self.err(h.span(), "history must be longer than zero");
                        defaults.history_s
                    }
                    Some(h) => h.get_ref().si,
                    None => defaults.history_s,
                },
            };
        }
        if let Some(g) = raw.gas {
            for custom in g.custom {
                self.custom_gas(&mut config.gases, custom);
            }
            match (g.species, g.mix) {
                (Some(_), Some(m)) => self.err(
                    m.span(),
                    "give either `species` or `mix` in [gas], not both",
                ),
                (Some(s), None) | (None, Some(s)) => {
                    if let Some(m) = self.mixture(&config.gases, &s) {
                        config.mixture = m;
                    }
                }
                (None, None) => {}
            }
        }
        let mut seen = Vec::<String>::new();
        for l in raw.length {
            let name = l.name.get_ref().trim().to_string();
            if name.is_empty() {
                self.err(l.name.span(), "a length needs a non-empty name");
            } else if seen.contains(&name) {
                self.err(l.name.span(), format!("length `{name}` is defined twice"));
            } else {
                seen.push(name.clone());
                config.lengths.push(NamedLength::new(name, l.length.si));
            }
        }
        let mut ids = Vec::<String>::new();
        for g in raw.gauge {
            let id = g.id.get_ref().trim().to_string();
            if id.is_empty()
                || !id
                    .chars()
                    .all(|c| c.is_ascii_alphanumeric() || "_-.".contains(c))
            {
                self.err(
                    g.id.span(),
                    "a gauge id must be non-empty and use only letters, digits, '_', '-' and '.'",
                );
                continue;
            }
            if ids.contains(&id) {
                self.err(g.id.span(), format!("gauge id `{id}` is used twice"));
                continue;
            }
            ids.push(id.clone());
            if let Some(gauge) = self.gauge(&config, id, g) {
                config.gauges.push(gauge);
            }
        }
        for src in raw.source {
            if let Some(s) = self.source(src) {
                config.sources.push(s);
            }
        }
        if let Some(r) = raw.record {
            config.record = self.record(r);
        }
        if let Some(l) = raw.log {
            match l.resolve() {
                Ok(spec) => config.log = Some(spec),
                Err(problems) => {
                    for (span, message) in problems {
                        self.err(span, message);
                    }
                }
            }
        }
        self.alarms(&mut config, raw.alarms, raw.alarm, raw.gate);
        if self.errors.is_empty() {
            Ok(config)
        } else {
            Err(ConfigErrors(self.errors))
        }
    }

    fn source(&mut self, s: file::SourceSection) -> Option<SourceConfig> {
        let uri = match SourceUri::parse(s.uri.get_ref()) {
            Ok(u) => u,
            Err(e) => {
                self.err(s.uri.span(), e);
                return None;
            }
        };
        let poll = match &s.poll {
            Some(p) => match crate::parse::unescape(p.get_ref()) {
                Ok(bytes) => {
                    let every = s.poll_interval.as_ref().map_or(1.0, |d| d.get_ref().si);
                    if every <= 0.0 {
                        let span = s.poll_interval.as_ref().map_or(p.span(), |d| d.span());
                        self.err(span, "poll_interval must be longer than zero");
                        None
                    } else {
                        Some(Poll {
                            bytes,
                            every: std::time::Duration::from_secs_f64(every),
                        })
                    }
                }
                Err(e) => {
                    self.err(p.span(), e);
                    None
                }
            },
            None => {
                if let Some(d) = &s.poll_interval {
                    self.err(d.span(), "poll_interval without a poll string");
                }
                None
            }
        };
        let mut templates = Vec::new();
        for t in &s.template {
            let span = t.span();
            let t = t.get_ref();
            let unit = |this: &mut Self, text: &str| -> Option<ChannelUnit> {
                let u = ChannelUnit::parse(text);
                if u.is_none() {
                    this.err(
                        span.clone(),
                        format!("unknown unit \"{text}\"; expected a pressure or temperature unit (mbar, Torr, Pa, C, K …)"),
                    );
                }
                u
            };
            let mut spec = TemplateSpec {
                pattern: t.pattern.get_ref().clone(),
                unit: None,
                units: Default::default(),
                status: t.status.clone(),
                time_format: None,
                time_zone: None,
            };
            let mut ok = true;
            if let Some(u) = &t.unit {
                spec.unit = unit(self, u);
                ok &= spec.unit.is_some();
            }
            for (ch, u) in &t.units {
                match unit(self, u) {
                    Some(u) => {
                        spec.units.insert(ch.clone(), u);
                    }
                    None => ok = false,
                }
            }
            if let Some(f) = &t.time_format {
                match TimeFormat::parse(f.get_ref()) {
                    Ok(f) => spec.time_format = Some(f),
                    Err(e) => {
                        self.err(f.span(), e);
                        ok = false;
                    }
                }
            }
            if let Some(z) = &t.timezone {
                match Zone::parse(z.get_ref()) {
                    Ok(zone) => spec.time_zone = Some(zone),
                    Err(e) => {
                        self.err(z.span(), e);
                        ok = false;
                    }
                }
                if let Some(f) = &spec.time_format
                    && let Err(e) = crate::timefmt::check_zone(f, true)
                {
                    self.err(z.span(), e);
                    ok = false;
                }
            }
            if !ok {
                continue;
            }
            match Template::new(&spec) {
                Ok(t) => templates.push(t),
                Err(e) => {
                    let at = if e.starts_with("bad pattern") {
                        t.pattern.span()
                    } else {
                        span
                    };
                    self.err(at, format!("template: {e}"));
                }
            }
        }
        Some(SourceConfig {
            uri,
            poll,
            templates,
        })
    }

    fn alarms(
        &mut self,
        config: &mut Config,
        settings: Option<file::AlarmsSection>,
        alarms: Vec<file::AlarmSection>,
        gates: Vec<file::GateSection>,
    ) {
        use crate::alarm::rule::{Deadband, Rule, Severity, Test};
        use crate::alarm::{Gate, RuleSpec, quantity::Class, quantity::Quantity, syntax};
        let mut out = AlarmConfig::default();
        let gauge_ids: Vec<String> = config.gauges.iter().map(|g| g.id.clone()).collect();
        let lengths = config.lengths.clone();
        let length_of =
            move |name: &str| lengths.iter().find(|l| l.name == name).map(|l| l.length_m);
        let known_gauge = |this: &mut Self, g: &toml::Spanned<String>| -> bool {
            let id = g.get_ref();
            if gauge_ids.is_empty() || gauge_ids.contains(id) {
                return true;
            }
            let hint = crate::suggest::nearest(id, gauge_ids.iter().map(String::as_str))
                .map(|s| format!(" (did you mean `{s}`?)"))
                .unwrap_or_default();
            this.err(
                g.span(),
                format!(
                    "no gauge `{id}` is configured{hint}; gauges: {}",
                    gauge_ids.join(", ")
                ),
            );
            false
        };
        if let Some(s) = settings {
            if let Some(g) = &s.default_gauge
                && known_gauge(self, g)
            {
                out.default_gauge = Some(g.get_ref().clone());
            }
            for (field, slot) in [
                (&s.stale_after, &mut out.stale_after_s),
                (&s.rate_window, &mut out.rate_window_s),
            ] {
                if let Some(d) = field {
                    if d.get_ref().si <= 0.0 {
                        self.err(d.span(), "must be longer than zero");
                    } else {
                        *slot = d.get_ref().si;
                    }
                }
            }
            if let Some(sev) = s.input_severity {
                out.input_severity = sev;
            }
            if let Some(b) = s.bell {
                out.bell = b;
            }
        }
        let action = |this: &mut Self,
                      id: &str,
                      cmd: &Option<toml::Spanned<Vec<String>>>,
                      timeout: &Option<toml::Spanned<crate::units::Duration>>,
                      repeat: &Option<toml::Spanned<crate::units::Duration>>|
         -> Option<ActionSpec> {
            let cmd = cmd.as_ref()?;
            if cmd.get_ref().is_empty() || cmd.get_ref()[0].trim().is_empty() {
                this.err(
                    cmd.span(),
                    "command needs a program: [\"program\", \"arg\", …]",
                );
                return None;
            }
            let timeout_s = timeout.as_ref().map_or(10.0, |d| d.get_ref().si);
            if timeout_s <= 0.0 {
                this.err(
                    timeout.as_ref().map_or(cmd.span(), |d| d.span()),
                    "command_timeout must be longer than zero",
                );
                return None;
            }
            Some(ActionSpec {
                id: id.to_string(),
                argv: cmd.get_ref().clone(),
                timeout_s,
                repeat_after_s: repeat.as_ref().map_or(60.0, |d| d.get_ref().si),
            })
        };
        let mut ids: Vec<String> = Vec::new();
        for a in alarms {
            let id = a.id.get_ref().trim().to_string();
            if id.is_empty() || id.contains(char::is_whitespace) || id.ends_with(".input") {
                self.err(
                    a.id.span(),
                    "an alarm id must be one word (and not end in .input)",
                );
                continue;
            }
            if ids.contains(&id) {
                self.err(a.id.span(), format!("alarm id `{id}` is used twice"));
                continue;
            }
            ids.push(id.clone());
            let gauge = match (&a.gauge, &out.default_gauge) {
                // Temperature channels are not gauges of the config.
                (Some(g), _) if a.quantity.get_ref() == "temperature" => g.get_ref().clone(),
                (Some(g), _) => {
                    if !known_gauge(self, g) {
                        continue;
                    }
                    g.get_ref().clone()
                }
                (None, Some(d)) => d.clone(),
                (None, None) => {
                    self.err(
                        a.id.span(),
                        format!(
                            "alarm `{id}` names no gauge; give `gauge` or [alarms] default_gauge"
                        ),
                    );
                    continue;
                }
            };
            let quantity = match Quantity::parse(
                a.quantity.get_ref(),
                a.length.as_ref().map(|l| l.get_ref().as_str()),
            ) {
                Ok(q) => q,
                Err(e) => {
                    self.err(a.quantity.span(), e);
                    continue;
                }
            };
            if let Some(l) = quantity.length()
                && length_of(l).is_none()
            {
                let span = a.length.as_ref().map_or(a.quantity.span(), |s| s.span());
                let names: Vec<String> = config.lengths.iter().map(|l| l.name.clone()).collect();
                let hint = crate::suggest::nearest(l, names.iter().map(String::as_str))
                    .map(|s| format!(" (did you mean `{s}`?)"))
                    .unwrap_or_default();
                self.err(
                    span,
                    format!("no length named `{l}` is configured{hint} ([[length]])"),
                );
                continue;
            }
            let tests: Vec<(&str, &toml::Spanned<String>)> = [
                ("above", &a.above),
                ("below", &a.below),
                ("enters", &a.enters),
                ("leaves", &a.leaves),
                ("crosses", &a.crosses),
            ]
            .into_iter()
            .filter_map(|(k, v)| v.as_ref().map(|v| (k, v)))
            .collect();
            let [(op, value)] = tests.as_slice() else {
                self.err(
                    a.id.span(),
                    format!(
                        "alarm `{id}` needs exactly one of above, below, enters, leaves, crosses"
                    ),
                );
                continue;
            };
            let mut quantity = quantity;
            if quantity == Quantity::RateOfChange
                && crate::alarm::quantity::rate(value.get_ref()).is_ok_and(|(_, decades)| decades)
            {
                quantity = Quantity::DecadesPerMinute;
            }
            let class = |w: &str| Class::parse(&quantity, w);
            let test = match *op {
                "above" | "below" => match quantity.threshold(value.get_ref()) {
                    Ok(t) if *op == "above" => Ok(Test::Above(t)),
                    Ok(t) => Ok(Test::Below(t)),
                    Err(e) => Err(e),
                },
                "enters" => class(value.get_ref()).map(Test::Enters),
                "leaves" => class(value.get_ref()).map(Test::Leaves),
                _ => match value.get_ref().split_once('/') {
                    Some((x, y)) => match (class(x), class(y)) {
                        (Ok(x), Ok(y)) if x.rank().abs_diff(y.rank()) == 1 => {
                            Ok(Test::Crosses(x, y))
                        }
                        (Ok(x), Ok(y)) => {
                            Err(format!("{}/{} are not neighbours", x.as_str(), y.as_str()))
                        }
                        (Err(e), _) | (_, Err(e)) => Err(e),
                    },
                    None => Err(
                        "crosses needs two neighbouring classes, e.g. \"transitional/molecular\""
                            .into(),
                    ),
                },
            };
            let test = match test {
                Ok(t) => t,
                Err(e) => {
                    self.err(value.span(), e);
                    continue;
                }
            };
            let deadband = match &a.deadband {
                None => Deadband::None,
                Some(d) if quantity.is_class() => {
                    self.err(
                        d.span(),
                        format!("{quantity} has no deadband; use on_delay/off_delay"),
                    );
                    continue;
                }
                Some(d) => match Deadband::parse(d.get_ref(), |s| quantity.threshold(s)) {
                    Ok(db) => db,
                    Err(e) => {
                        self.err(d.span(), e);
                        continue;
                    }
                },
            };
            let enable = match &a.enable {
                Some(c) => match syntax::condition(c.get_ref(), &length_of) {
                    Ok(c) => Some(c),
                    Err(e) => {
                        self.err(c.span(), e);
                        continue;
                    }
                },
                None => None,
            };
            if let Some(act) = action(self, &id, &a.command, &a.command_timeout, &a.repeat_after) {
                out.actions.push(act);
            }
            out.rules.push(RuleSpec {
                rule: Rule {
                    label: a.label.clone().unwrap_or_else(|| id.clone()),
                    id,
                    gauge,
                    quantity,
                    test,
                    deadband,
                    on_delay_s: a.on_delay.as_ref().map_or(0.0, |d| d.get_ref().si),
                    off_delay_s: a.off_delay.as_ref().map_or(0.0, |d| d.get_ref().si),
                    severity: a.severity.unwrap_or(Severity::Warning),
                    latching: a.latching.unwrap_or(false),
                },
                enable,
            });
        }
        let mut gate_ids: Vec<String> = Vec::new();
        for g in gates {
            let id = g.id.get_ref().trim().to_string();
            if id.is_empty() || id.contains(char::is_whitespace) {
                self.err(g.id.span(), "a gate id must be one word");
                continue;
            }
            if gate_ids.contains(&id) {
                self.err(g.id.span(), format!("gate id `{id}` is used twice"));
                continue;
            }
            gate_ids.push(id.clone());
            if g.conditions.is_empty() {
                self.err(g.id.span(), format!("gate `{id}` has no conditions"));
                continue;
            }
            let mut conditions = Vec::new();
            for c in &g.conditions {
                match syntax::condition(c.get_ref(), &length_of) {
                    Ok(cond) => {
                        if cond.gauge.is_none() && out.default_gauge.is_none() {
                            self.err(
                                c.span(),
                                "the condition names no gauge and [alarms] has no default_gauge",
                            );
                        } else if let Some(gid) = &cond.gauge
                            && !gauge_ids.is_empty()
                            && !gauge_ids.contains(gid)
                        {
                            self.err(
                                c.span(),
                                format!(
                                    "no gauge `{gid}` is configured; gauges: {}",
                                    gauge_ids.join(", ")
                                ),
                            );
                        } else {
                            conditions.push(cond);
                        }
                    }
                    Err(e) => self.err(c.span(), e),
                }
            }
            if let Some(act) = action(self, &id, &g.command, &g.command_timeout, &None) {
                out.actions.push(act);
            }
            out.gates.push(Gate {
                label: g.label.clone().unwrap_or_else(|| id.clone()),
                id,
                conditions,
                hold_s: g.hold.get_ref().si,
            });
        }
        config.alarms = out;
    }

    fn record(&mut self, r: file::RecordSection) -> RecordConfig {
        let mut out = RecordConfig {
            dir: r.dir.map(PathBuf::from),
            ..RecordConfig::default()
        };
        if let Some(p) = r.prefix {
            let v = p.get_ref();
            if v.is_empty() || v.contains(['/', '\\']) {
                self.err(
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
                self.err(f.span(), "flush must be longer than zero");
            } else {
                out.flush_s = f.get_ref().si;
            }
        }
        if let Some(b) = r.buffer_rows {
            match usize::try_from(*b.get_ref()) {
                Ok(n) if n > 0 => out.settings.buffer_rows = n,
                _ => self.err(b.span(), "buffer_rows must be a positive whole number"),
            }
        }
        if let Some(d) = r.derived {
            out.derived = d;
        }
        out
    }

    fn physics(&mut self, p: file::PhysicsSection) -> Physics {
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
                self.err(span, msg);
            }
        }
        if let Some(e) = p.iso_edition {
            match IsoEdition::from_year(*e.get_ref()) {
                Some(ed) => out.edition = ed,
                None => self.err(
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
                self.err(
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
                self.err(s.span(), "sticking must be greater than 0 and at most 1");
            }
        }
        out
    }

    fn mixture(&mut self, table: &GasTable, text: &toml::Spanned<String>) -> Option<Mixture> {
        match Mixture::parse(text.get_ref(), table) {
            Ok(m) => Some(m),
            Err(e) => {
                self.err(text.span(), e.to_string());
                None
            }
        }
    }

    fn custom_gas(&mut self, table: &mut GasTable, g: file::CustomGas) {
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
            self.err(g.id.span(), e.to_string());
        }
    }

    fn gauge(&mut self, config: &Config, id: String, g: file::GaugeSection) -> Option<GaugeConfig> {
        let mixture = match &g.gas {
            Some(text) => self.mixture(&config.gases, text)?,
            None => config.mixture.clone(),
        };
        let range_pa = match g.range {
            Some([lo, hi]) if lo.si >= hi.si => {
                self.err(
                    g.id.span(),
                    format!("gauge `{id}`: range must be [low, high] with low < high"),
                );
                None
            }
            Some([lo, hi]) => Some((lo.si, hi.si)),
            None => None,
        };
        let table = match &g.calibration {
            Some(c) => {
                let points: Vec<(f64, f64)> = c
                    .get_ref()
                    .points
                    .iter()
                    .map(|[a, b]| (c.get_ref().unit.to_si(*a), c.get_ref().unit.to_si(*b)))
                    .collect();
                match CalibrationTable::new(&points) {
                    Ok(t) => Some(t),
                    Err(e) => {
                        self.err(c.span(), format!("gauge `{id}` calibration: {e}"));
                        return None;
                    }
                }
            }
            None => None,
        };
        let mut overrides = GaugeOverrides {
            sensitivity: g.sensitivity.as_ref().map(|s| *s.get_ref()),
            thermal_sensitivity: g.thermal_sensitivity.as_ref().map(|s| *s.get_ref()),
            table,
            range_pa,
        };
        if let Some(cal) = &g.calibration_gas {
            let cal_gas = match config.gases.get(cal.get_ref()) {
                Ok(gas) => Mixture::pure(gas.clone()),
                Err(e) => {
                    self.err(cal.span(), e.to_string());
                    return None;
                }
            };
            // Sensitivities are relative to N2; a gauge calibrated for another
            // gas reads S_gas / S_cal of the true pressure.
            if cal_gas.components()[0].gas.id != "N2" && overrides.table.is_none() {
                let scale = |kind: GaugeKind, user: Option<f64>, this: &mut Self| {
                    let o = GaugeOverrides {
                        sensitivity: user,
                        ..GaugeOverrides::default()
                    };
                    let s_gas = GaugeModel::new(kind, &mixture, &o)
                        .ok()?
                        .correct(1.0)
                        .sensitivity?;
                    match GaugeModel::new(kind, &cal_gas, &GaugeOverrides::default()) {
                        Ok(m) => Some(s_gas / m.correct(1.0).sensitivity?),
                        Err(e) => {
                            this.err(cal.span(), format!("gauge `{id}`: {e}"));
                            None
                        }
                    }
                };
                match g.kind {
                    GaugeKind::Capacitance => {}
                    GaugeKind::Combined => {
                        overrides.sensitivity =
                            scale(GaugeKind::Ionization, overrides.sensitivity, self);
                        overrides.thermal_sensitivity =
                            scale(GaugeKind::Thermal, overrides.thermal_sensitivity, self);
                    }
                    k => overrides.sensitivity = scale(k, overrides.sensitivity, self),
                }
            }
        }
        match GaugeModel::new(g.kind, &mixture, &overrides) {
            Ok(model) => Some(GaugeConfig {
                label: g.label.unwrap_or_else(|| id.clone()),
                id,
                kind: g.kind,
                mixture,
                model,
            }),
            Err(e) => {
                let span = g
                    .sensitivity
                    .as_ref()
                    .map(|s| s.span())
                    .or(g.gas.as_ref().map(|s| s.span()))
                    .unwrap_or(g.id.span());
                self.err(span, format!("gauge `{id}` ({}): {e}", g.kind));
                None
            }
        }
    }
}

impl Config {
    /// The monitor's setup: gauges, gas, lengths, physics, the config's rules
    /// and gates, plus `extra` rules (from the command line).
    pub fn monitor_setup(&self, extra: Vec<crate::alarm::Rule>) -> crate::alarm::MonitorSetup {
        let mut rules = self.alarms.rules.clone();
        rules.extend(
            extra
                .into_iter()
                .map(|rule| crate::alarm::RuleSpec { rule, enable: None }),
        );
        crate::alarm::MonitorSetup {
            gauges: self
                .gauges
                .iter()
                .map(|g| crate::alarm::monitor::GaugeSetup {
                    id: g.id.clone(),
                    model: g.model.clone(),
                    mixture: g.mixture.clone(),
                })
                .collect(),
            mixture: self.mixture.clone(),
            lengths: self.lengths.clone(),
            physics: self.physics,
            assumed_temperature_k: self.chamber.temperature_k.unwrap_or(295.15),
            rules,
            gates: self.alarms.gates.clone(),
            stale_after_s: self.alarms.stale_after_s,
            rate_window_s: self.alarms.rate_window_s,
            input_severity: self.alarms.input_severity,
            default_gauge: self.alarms.default_gauge.clone(),
            pressure_unit: self.display.pressure_unit,
            temperature_unit: self.display.temperature_unit,
        }
    }

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
            let s = g.model.correct(1e-3).sensitivity;
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
