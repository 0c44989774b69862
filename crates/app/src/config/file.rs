//! What a configuration file may contain. Every section refuses unknown keys;
//! quantities are strings with their unit (`"0.3 m"`, `"5e-6 mbar"`).

use serde::Deserialize;
use toml::Spanned;

use crate::engine::Model;
use crate::engine::gauge::GaugeKind;
use crate::units::{
    Area, Duration, Length, Pressure, PressureUnit, Temperature, TemperatureUnit, Volume,
};

/// The whole file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ConfigFile {
    /// `[chamber]`
    pub chamber: Option<ChamberSection>,
    /// `[[gauge]]`
    #[serde(default)]
    pub gauge: Vec<GaugeSection>,
    /// `[gas]`
    pub gas: Option<GasSection>,
    /// `[[length]]`
    #[serde(default)]
    pub length: Vec<LengthSection>,
    /// `[physics]`
    pub physics: Option<PhysicsSection>,
    /// `[display]`
    pub display: Option<DisplaySection>,
    /// `[[source]]`
    #[serde(default)]
    pub source: Vec<SourceSection>,
    /// `[record]`
    pub record: Option<RecordSection>,
    /// `[log]`: how to read another logger's CSV export.
    pub log: Option<crate::log::foreign::LogSection>,
    /// `[[alarm]]`
    #[serde(default)]
    pub alarm: Vec<AlarmSection>,
    /// `[[gate]]`
    #[serde(default)]
    pub gate: Vec<GateSection>,
    /// `[alarms]`: settings shared by all alarms and gates.
    pub alarms: Option<AlarmsSection>,
    /// `[chamber_pressure]`: which gauge the chamber pressure comes from.
    pub chamber_pressure: Option<ChamberPressureSection>,
}

/// `[chamber_pressure]`: the order of preference of the gauges, and a gauge
/// fixed for a quantity (keys are the quantity names rules use).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChamberPressureSection {
    /// Gauges in order of preference (default: capacitance first, then the
    /// gas-dependent gauges in config order).
    pub gauges: Option<Spanned<Vec<Spanned<String>>>>,
    /// Gauge for `pressure`.
    pub pressure: Option<Spanned<String>>,
    /// Gauge for `mean_free_path`.
    pub mean_free_path: Option<Spanned<String>>,
    /// Gauge for `knudsen` (every length).
    pub knudsen: Option<Spanned<String>>,
    /// Gauge for `impingement`.
    pub impingement: Option<Spanned<String>>,
    /// Gauge for `monolayer_time`.
    pub monolayer_time: Option<Spanned<String>>,
    /// Gauge for `exposure`.
    pub exposure: Option<Spanned<String>>,
    /// Gauge for `rate_of_change`.
    pub rate_of_change: Option<Spanned<String>>,
    /// Gauge for `regime` (every length).
    pub regime: Option<Spanned<String>>,
    /// Gauge for `vacuum_range`.
    pub vacuum_range: Option<Spanned<String>>,
}

/// `[[alarm]]`: one alarm rule.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AlarmSection {
    /// Id, unique among alarms.
    pub id: Spanned<String>,
    /// Human label.
    pub label: Option<String>,
    /// The whole rule as one text, read as `--alarm` texts are:
    /// `"chamber mean free path above 10 x source-to-substrate for 5 s as
    /// warning"`. Instead of the keys from `gauge` to `latching`.
    pub condition: Option<Spanned<String>>,
    /// Gauge watched (default: `[alarms] default_gauge`).
    pub gauge: Option<Spanned<String>>,
    /// `pressure`, `temperature`, `mean_free_path`, `knudsen`, `impingement`,
    /// `monolayer_time`, `exposure`, `rate_of_change`, `regime`, `vacuum_range`.
    pub quantity: Option<Spanned<String>>,
    /// Named length, for `knudsen` and `regime`.
    pub length: Option<Spanned<String>>,
    /// In alarm above this value (with unit, or `"10 x LENGTH"` for a mean
    /// free path).
    pub above: Option<Spanned<String>>,
    /// In alarm below this value (with unit, or `"10 x LENGTH"` for a mean
    /// free path).
    pub below: Option<Spanned<String>>,
    /// In alarm while the regime or range is this one.
    pub enters: Option<Spanned<String>>,
    /// In alarm while the regime or range is not this one.
    pub leaves: Option<Spanned<String>>,
    /// In alarm at each crossing of this boundary, `"transitional/molecular"`.
    pub crosses: Option<Spanned<String>>,
    /// `"10 %"`, `"0.1 decade"` or a value with unit.
    pub deadband: Option<Spanned<String>>,
    /// The condition must hold this long first.
    pub on_delay: Option<Spanned<Duration>>,
    /// The condition must be clear this long before the return.
    pub off_delay: Option<Spanned<Duration>>,
    /// `notice`, `warning` (default) or `trip`.
    pub severity: Option<Spanned<crate::alarm::Severity>>,
    /// Stays in alarm until acknowledged.
    pub latching: Option<Spanned<bool>>,
    /// The rule is suppressed by design while this condition is false.
    pub enable: Option<Spanned<String>>,
    /// A command run on each of this alarm's events: program and arguments.
    pub command: Option<Spanned<Vec<String>>>,
    /// The command is stopped after this long (default 10 s).
    pub command_timeout: Option<Spanned<Duration>>,
    /// At most one run of the command this often (default 60 s).
    pub repeat_after: Option<Spanned<Duration>>,
}

/// `[[gate]]`: a readiness gate.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GateSection {
    /// Id, unique among gates.
    pub id: Spanned<String>,
    /// Human label.
    pub label: Option<String>,
    /// Conditions, each `[gauge] quantity above|below|is VALUE`.
    pub conditions: Vec<Spanned<String>>,
    /// How long they must all hold, `"120 s"`.
    pub hold: Spanned<Duration>,
    /// A command run on each of this gate's events.
    pub command: Option<Spanned<Vec<String>>>,
    /// The command is stopped after this long (default 10 s).
    pub command_timeout: Option<Spanned<Duration>>,
}

/// `[alarms]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AlarmsSection {
    /// Gauge for rules and conditions that name none.
    pub default_gauge: Option<Spanned<String>>,
    /// A gauge with no reading for this long is stale (default 10 s).
    pub stale_after: Option<Spanned<Duration>>,
    /// Window of the rate-of-change fit (default 10 s).
    pub rate_window: Option<Spanned<Duration>>,
    /// Severity of the automatic no-valid-reading alarms (default warning).
    pub input_severity: Option<crate::alarm::Severity>,
    /// Ring the terminal bell on new alarms in the dashboard (default true).
    pub bell: Option<bool>,
}

/// `[[source]]`: one gauge controller or data feed.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SourceSection {
    /// `serial:///dev/ttyUSB0?baud=9600`, `tcp://host:port`, `file:///…`, `stdin:`, `sim:`.
    pub uri: Spanned<String>,
    /// A request sent every `poll_interval`, with escapes (`":VX GET\\r"`).
    pub poll: Option<Spanned<String>>,
    /// How often to send `poll` (default 1 s).
    pub poll_interval: Option<Spanned<Duration>>,
    /// `[[source.template]]`: how to read its lines; none = the plain format.
    #[serde(default)]
    pub template: Vec<Spanned<TemplateSection>>,
}

/// `[[source.template]]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TemplateSection {
    /// Regular expression with a named group per channel.
    pub pattern: Spanned<String>,
    /// Unit of every channel without an entry in `units`.
    pub unit: Option<Spanned<String>>,
    /// Unit per channel.
    #[serde(default)]
    pub units: std::collections::BTreeMap<String, Spanned<String>>,
    /// Device words mapped to statuses.
    #[serde(default)]
    pub status: std::collections::BTreeMap<String, crate::sample::Status>,
    /// Format of the `time` group: `"rfc3339"`, `"epoch-s"`, `"epoch-ms"`
    /// or a strftime pattern (checked as `[log]`'s time format is).
    pub time_format: Option<Spanned<String>>,
    /// Zone of a pattern without an offset: an IANA name or `"+01:00"`
    /// (default UTC).
    pub timezone: Option<Spanned<String>>,
}

/// `[record]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RecordSection {
    /// Directory for the log files.
    pub dir: Option<String>,
    /// File name prefix (default `rarefy`).
    pub prefix: Option<Spanned<String>>,
    /// Start a new file at this size, `"64 MB"`.
    pub max_size: Option<crate::units::Size>,
    /// Start a new file when the UTC day changes (default true).
    pub rotate_daily: Option<bool>,
    /// How often rows are written to the OS (default `"1 s"`).
    pub flush: Option<Spanned<Duration>>,
    /// Rows kept in memory while writing fails (default 200000).
    pub buffer_rows: Option<Spanned<i64>>,
    /// Also write derived columns (default false).
    pub derived: Option<bool>,
}

/// `[chamber]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChamberSection {
    /// Name shown on screen and written into logs.
    pub name: Option<String>,
    /// `"85 L"`
    pub volume: Option<Volume>,
    /// `"1.6 m2"`
    pub surface_area: Option<Area>,
    /// Gas temperature to assume when no gauge measures it, `"22 C"`.
    pub temperature: Option<Temperature>,
}

/// `[[gauge]]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GaugeSection {
    /// Short id (the channel name in logs).
    pub id: Spanned<String>,
    /// Human label.
    pub label: Option<String>,
    /// `capacitance`, `thermal`, `ionization` or `combined`.
    pub kind: GaugeKind,
    /// Gas the gauge's readings are calibrated for (default N2).
    pub calibration_gas: Option<Spanned<String>>,
    /// Trusted range `["1e-9 mbar", "1e-2 mbar"]`.
    pub range: Option<[Pressure; 2]>,
    /// Gas at this gauge, overriding `[gas]` (`"Ar"` or a mixture).
    pub gas: Option<Spanned<String>>,
    /// Relative sensitivity (reading / true pressure) of a thermal or
    /// ionization gauge, or of a combined gauge's ionization element.
    pub sensitivity: Option<Spanned<f64>>,
    /// Relative sensitivity of a combined gauge's thermal element.
    pub thermal_sensitivity: Option<Spanned<f64>>,
    /// A calibration table for the gauge in this gas.
    pub calibration: Option<Spanned<CalibrationSection>>,
}

/// `calibration = { unit = "mbar", points = [[indicated, true], …] }`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalibrationSection {
    /// Unit of both columns.
    pub unit: PressureUnit,
    /// (indicated, true) pairs, increasing.
    pub points: Vec<[f64; 2]>,
}

/// `[gas]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GasSection {
    /// A single gas, `"N2"`.
    pub species: Option<Spanned<String>>,
    /// A mixture, `"H2=0.6,H2O=0.3,N2=0.1"`.
    pub mix: Option<Spanned<String>>,
    /// `[[gas.custom]]`: user gases.
    #[serde(default)]
    pub custom: Vec<CustomGas>,
    /// `[[gas.step]]`: gases that replace the base gas while a condition
    /// holds or inside a data-time window.
    #[serde(default)]
    pub step: Vec<GasStepSection>,
}

/// `[[gas.step]]`: a gas in force while all its conditions hold and data
/// time is inside its window; the first step that matches wins.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GasStepSection {
    /// Id, unique among steps, shown as where the gas came from.
    pub id: Spanned<String>,
    /// A single gas, `"Ar"`.
    pub species: Option<Spanned<String>>,
    /// A mixture, `"Ar=0.9,O2=0.1"`.
    pub mix: Option<Spanned<String>>,
    /// Conditions that must all hold, each `[gauge] quantity above|below|is VALUE`.
    #[serde(default)]
    pub when: Vec<Spanned<String>>,
    /// Data time from which the step may apply, RFC 3339.
    pub from: Option<Spanned<String>>,
    /// Data time until which the step may apply, RFC 3339.
    pub until: Option<Spanned<String>>,
}

/// `[[gas.custom]]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CustomGas {
    /// Id used in `species`, `mix` and on the command line.
    pub id: Spanned<String>,
    /// Human name.
    pub name: Option<String>,
    /// g/mol
    pub molar_mass: f64,
    /// Viscosity diameter, `"0.51 nm"`.
    pub diameter: Length,
    /// Temperature the diameter holds at (default 273.15 K).
    pub reference_temperature: Option<Temperature>,
    /// Sutherland constant, `"200 K"`.
    pub sutherland: Option<Temperature>,
    /// Temperature range the values hold over.
    pub valid_range: Option<[Temperature; 2]>,
    /// Ionization-gauge sensitivity relative to N2.
    pub ion_sensitivity: Option<f64>,
    /// Thermal-gauge sensitivity relative to N2.
    pub thermal_sensitivity: Option<f64>,
    /// Where the numbers come from.
    pub source: Option<String>,
}

/// `[[length]]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LengthSection {
    /// Name, e.g. `"source-to-substrate"`.
    pub name: Spanned<String>,
    /// `"0.25 m"`
    pub length: Length,
}

/// `[physics]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PhysicsSection {
    /// `sutherland` (default) or `hard-sphere`.
    pub model: Option<Model>,
    /// Kn below which flow is viscous (default 0.01).
    pub viscous_below: Option<Spanned<f64>>,
    /// Kn above which flow is molecular (default 0.5).
    pub molecular_above: Option<Spanned<f64>>,
    /// ISO 3529-1 edition, 2019 (default) or 1981.
    pub iso_edition: Option<Spanned<i64>>,
    /// Adsorption sites per m² (default 1e19).
    pub sites_per_m2: Option<Spanned<f64>>,
    /// Sticking coefficient (default 1).
    pub sticking: Option<Spanned<f64>>,
    /// When exposure starts counting: `"below 0.1 Pa"` (default), `"reset"`
    /// or `"first reading"`.
    pub exposure_start: Option<Spanned<String>>,
}

/// `[display]`
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DisplaySection {
    /// `"mbar"`
    pub pressure_unit: Option<PressureUnit>,
    /// `"C"`
    pub temperature_unit: Option<TemperatureUnit>,
    /// Trend history, `"1 h"`.
    pub history: Option<Spanned<Duration>>,
}
