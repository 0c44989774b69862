//! What a rule or a gate condition looks at, and the thresholds it compares
//! against, with their units.

use std::fmt;

use crate::engine::regime::{FlowRegime, VacuumRange};
use crate::units::{self, LengthUnit, PressureUnit, TemperatureUnit, TimeUnit, UnitKind};

/// A quantity of one gauge that can be watched.
#[derive(Debug, Clone, PartialEq)]
pub enum Quantity {
    /// True pressure (after gas correction), Pa.
    Pressure,
    /// Temperature of a temperature channel, K.
    Temperature,
    /// Mean free path, m.
    MeanFreePath,
    /// Knudsen number for a named length.
    Knudsen(String),
    /// Wall impingement rate, 1/(m² s).
    Impingement,
    /// Time to a monolayer, s.
    MonolayerTime,
    /// Exposure since the start, Pa·s.
    Exposure,
    /// dp/dt, Pa/s.
    RateOfChange,
    /// d log10(p)/dt, decades per minute.
    DecadesPerMinute,
    /// Flow regime for a named length.
    Regime(String),
    /// ISO 3529-1 vacuum range.
    VacuumRange,
}

/// Every quantity name, as written in configs and rules.
pub const NAMES: [&str; 10] = [
    "pressure",
    "temperature",
    "mean_free_path",
    "knudsen",
    "impingement",
    "monolayer_time",
    "exposure",
    "rate_of_change",
    "regime",
    "vacuum_range",
];

impl Quantity {
    /// Reads a quantity name; `knudsen` and `regime` need a length.
    pub fn parse(name: &str, length: Option<&str>) -> Result<Quantity, String> {
        let need_length = |q: fn(String) -> Quantity| match length {
            Some(l) if !l.trim().is_empty() => Ok(q(l.trim().to_string())),
            _ => Err(format!(
                "`{name}` needs a named length, e.g. {name}(source-to-substrate)"
            )),
        };
        let no_length = |q: Quantity| match length {
            None => Ok(q),
            Some(_) => Err(format!("`{name}` takes no length")),
        };
        match name {
            "pressure" => no_length(Quantity::Pressure),
            "temperature" => no_length(Quantity::Temperature),
            "mean_free_path" => no_length(Quantity::MeanFreePath),
            "knudsen" => need_length(Quantity::Knudsen),
            "impingement" => no_length(Quantity::Impingement),
            "monolayer_time" => no_length(Quantity::MonolayerTime),
            "exposure" => no_length(Quantity::Exposure),
            "rate_of_change" => no_length(Quantity::RateOfChange),
            "regime" => need_length(Quantity::Regime),
            "vacuum_range" => no_length(Quantity::VacuumRange),
            other => {
                let hint = crate::suggest::nearest(other, NAMES)
                    .map(|s| format!(" (did you mean `{s}`?)"))
                    .unwrap_or_default();
                Err(format!(
                    "unknown quantity `{other}`{hint}; expected one of {}",
                    NAMES.join(", ")
                ))
            }
        }
    }

    /// The named length this quantity refers to.
    pub fn length(&self) -> Option<&str> {
        match self {
            Quantity::Knudsen(l) | Quantity::Regime(l) => Some(l),
            _ => None,
        }
    }

    /// The quantity's name as written in configs (`knudsen`, `regime` without
    /// their length; both rate forms are `rate_of_change`).
    pub fn name(&self) -> &'static str {
        match self {
            Quantity::Pressure => "pressure",
            Quantity::Temperature => "temperature",
            Quantity::MeanFreePath => "mean_free_path",
            Quantity::Knudsen(_) => "knudsen",
            Quantity::Impingement => "impingement",
            Quantity::MonolayerTime => "monolayer_time",
            Quantity::Exposure => "exposure",
            Quantity::RateOfChange | Quantity::DecadesPerMinute => "rate_of_change",
            Quantity::Regime(_) => "regime",
            Quantity::VacuumRange => "vacuum_range",
        }
    }

    /// Whether the quantity is a class (regime, range) rather than a number.
    pub fn is_class(&self) -> bool {
        matches!(self, Quantity::Regime(_) | Quantity::VacuumRange)
    }

    /// Whether the quantity is read off a temperature channel.
    pub fn is_temperature(&self) -> bool {
        matches!(self, Quantity::Temperature)
    }

    /// Parses a threshold for this quantity into SI (see [`Threshold`]).
    pub fn threshold(&self, text: &str) -> Result<f64, String> {
        let t = text.trim();
        let wrong =
            |what: &str, e: String| format!("threshold \"{t}\" for {self}: {e}; expected {what}");
        match self {
            Quantity::Pressure => units::parse::<PressureUnit>(t)
                .map(|q| q.si)
                .map_err(|e| wrong("a pressure such as \"5e-6 mbar\"", e.to_string())),
            Quantity::Temperature => units::parse::<TemperatureUnit>(t)
                .map(|q| q.si)
                .map_err(|e| wrong("a temperature such as \"40 C\"", e.to_string())),
            Quantity::MeanFreePath => units::parse::<LengthUnit>(t)
                .map(|q| q.si)
                .map_err(|e| wrong("a length such as \"1.2 m\"", e.to_string())),
            Quantity::MonolayerTime => units::parse::<TimeUnit>(t)
                .map(|q| q.si)
                .map_err(|e| wrong("a duration such as \"10 min\"", e.to_string())),
            Quantity::Knudsen(_) => plain(t).map_err(|e| wrong("a number such as 0.5", e)),
            Quantity::Impingement => per_area_time(t)
                .map_err(|e| wrong("a rate such as \"1e17 /m2/s\" or \"1e13 /cm2/s\"", e)),
            Quantity::Exposure => {
                exposure(t).map_err(|e| wrong("an exposure such as \"1e-3 Pa s\" or \"10 L\"", e))
            }
            Quantity::RateOfChange | Quantity::DecadesPerMinute => rate(t)
                .map(|(v, _)| v)
                .map_err(|e| wrong("a rate such as \"1e-6 mbar/s\" or \"0.5 decade/min\"", e)),
            Quantity::Regime(_) | Quantity::VacuumRange => Err(format!(
                "{self} is compared with enters, leaves or crosses, not a number"
            )),
        }
    }

    /// Formats an SI value of this quantity for people, in `unit` for
    /// pressures.
    pub fn show(&self, si: f64, unit: PressureUnit, tunit: TemperatureUnit) -> String {
        match self {
            Quantity::Pressure => units::format_pressure(si, unit),
            Quantity::Temperature => units::format_temperature(si, tunit),
            Quantity::MeanFreePath => format!("{} m", units::format_sig(si, 3)),
            Quantity::Knudsen(_) => units::format_sig(si, 3),
            Quantity::Impingement => format!("{} /m2/s", units::format_sig(si, 3)),
            Quantity::MonolayerTime => format!("{} s", units::format_sig(si, 3)),
            Quantity::Exposure => format!(
                "{} Pa·s ({} L)",
                units::format_sig(si, 3),
                units::format_sig(si / units::LANGMUIR_PA_S, 3)
            ),
            Quantity::RateOfChange => format!(
                "{} {}/s",
                units::format_sig(unit.value_of(si), 3),
                unit.symbol()
            ),
            Quantity::DecadesPerMinute => format!("{} decade/min", units::format_sig(si, 3)),
            Quantity::Regime(_) | Quantity::VacuumRange => units::format_sig(si, 3),
        }
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Quantity::Pressure => f.write_str("pressure"),
            Quantity::Temperature => f.write_str("temperature"),
            Quantity::MeanFreePath => f.write_str("mean_free_path"),
            Quantity::Knudsen(l) => write!(f, "knudsen({l})"),
            Quantity::Impingement => f.write_str("impingement"),
            Quantity::MonolayerTime => f.write_str("monolayer_time"),
            Quantity::Exposure => f.write_str("exposure"),
            Quantity::RateOfChange => f.write_str("rate_of_change"),
            Quantity::DecadesPerMinute => f.write_str("rate_of_change (decades)"),
            Quantity::Regime(l) => write!(f, "regime({l})"),
            Quantity::VacuumRange => f.write_str("vacuum_range"),
        }
    }
}

fn plain(t: &str) -> Result<f64, String> {
    let v: f64 = t.parse().map_err(|_| format!("\"{t}\" is not a number"))?;
    if v.is_finite() {
        Ok(v)
    } else {
        Err("not a finite number".into())
    }
}

fn split_value(t: &str) -> Result<(f64, &str), String> {
    let t = t.trim();
    let end = t
        .find(|c: char| c.is_whitespace() || c == '/')
        .unwrap_or(t.len());
    let v = plain(&t[..end])?;
    Ok((v, t[end..].trim()))
}

/// `1e17`, `1e17 /m2/s`, `1e13 /cm2/s`.
fn per_area_time(t: &str) -> Result<f64, String> {
    let (v, unit) = split_value(t)?;
    let compact: String = unit.chars().filter(|c| !c.is_whitespace()).collect();
    match compact.as_str() {
        "" | "/m2/s" | "m-2s-1" | "/(m2s)" => Ok(v),
        "/cm2/s" | "cm-2s-1" | "/(cm2s)" => Ok(v * 1e4),
        other => Err(format!("unknown unit \"{other}\"")),
    }
}

/// `1e-3 Pa s`, `1e-3 Pa·s`, `10 L`, `10 langmuir`, `1e-6 Torr s`, `1e-5 mbar s`.
fn exposure(t: &str) -> Result<f64, String> {
    let (v, unit) = split_value(t)?;
    let unit = unit.replace('·', " ");
    let mut words = unit.split_whitespace();
    match (words.next(), words.next(), words.next()) {
        (Some("L" | "langmuir"), None, None) => Ok(v * units::LANGMUIR_PA_S),
        (Some(p), Some("s"), None) => {
            let u =
                PressureUnit::lookup(p).ok_or_else(|| format!("unknown pressure unit \"{p}\""))?;
            Ok(u.to_si(v))
        }
        _ => Err(format!("unknown unit \"{unit}\"")),
    }
}

/// `1e-6 mbar/s`, `2e-4 Pa/min` → Pa/s; `0.5 decade/min` → decades/min.
/// The flag says whether it is a decade rate.
pub fn rate(t: &str) -> Result<(f64, bool), String> {
    let t = t.trim();
    let (value_unit, per) = t
        .rsplit_once('/')
        .ok_or_else(|| format!("\"{t}\" needs a unit per time, e.g. mbar/s"))?;
    let per_s = match per.trim() {
        "s" => 1.0,
        "min" => 60.0,
        "h" => 3600.0,
        other => {
            return Err(format!(
                "unknown time unit \"{other}\" after '/'; expected s, min or h"
            ));
        }
    };
    let (v, unit) = split_value(value_unit)?;
    match unit {
        "decade" | "decades" => Ok((v * 60.0 / per_s, true)),
        u => {
            let pu = PressureUnit::lookup(u).ok_or_else(|| format!("unknown unit \"{u}\""))?;
            Ok((pu.to_si(v) / per_s, false))
        }
    }
}

/// A class value of a regime or range quantity.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Class {
    /// A flow regime.
    Regime(FlowRegime),
    /// A vacuum range.
    Range(VacuumRange),
}

impl Class {
    /// Reads a class word for `q`.
    pub fn parse(q: &Quantity, word: &str) -> Result<Class, String> {
        let w = word.trim();
        match q {
            Quantity::Regime(_) => [FlowRegime::Viscous, FlowRegime::Transitional, FlowRegime::Molecular]
                .into_iter()
                .find(|r| r.as_str() == w)
                .map(Class::Regime)
                .ok_or_else(|| format!("unknown regime \"{w}\"; expected viscous, transitional or molecular")),
            Quantity::VacuumRange => [
                VacuumRange::AboveAtmospheric,
                VacuumRange::Atmospheric,
                VacuumRange::Low,
                VacuumRange::Medium,
                VacuumRange::High,
                VacuumRange::UltraHigh,
                VacuumRange::ExtremeHigh,
            ]
            .into_iter()
            .find(|r| r.as_str() == w)
            .map(Class::Range)
            .ok_or_else(|| {
                format!("unknown vacuum range \"{w}\"; expected above-atmospheric, atmospheric, low, medium, high, ultra-high or extreme-high")
            }),
            other => Err(format!("{other} is a number; compare it with above or below")),
        }
    }

    /// Order along falling pressure (viscous → molecular, low → extreme-high).
    pub fn rank(self) -> u8 {
        match self {
            Class::Regime(r) => r as u8,
            Class::Range(r) => r as u8,
        }
    }

    /// The word.
    pub fn as_str(self) -> &'static str {
        match self {
            Class::Regime(r) => r.as_str(),
            Class::Range(r) => r.as_str(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thresholds_in_their_units() {
        assert!((Quantity::Pressure.threshold("2e-5 mbar").expect("p") - 2e-3).abs() < 1e-15);
        assert_eq!(Quantity::MeanFreePath.threshold("120 cm"), Ok(1.2));
        assert_eq!(Quantity::Knudsen("x".into()).threshold("0.5"), Ok(0.5));
        assert_eq!(Quantity::Impingement.threshold("1e13 /cm2/s"), Ok(1e17));
        assert_eq!(Quantity::MonolayerTime.threshold("2 min"), Ok(120.0));
        assert!(
            (Quantity::Exposure.threshold("10 L").expect("L") - 10.0 * units::LANGMUIR_PA_S).abs()
                < 1e-15
        );
        assert_eq!(Quantity::Exposure.threshold("1e-3 Pa·s"), Ok(1e-3));
        let (r, decades) = rate("1e-6 mbar/s").expect("rate");
        assert!((r - 1e-4).abs() < 1e-18 && !decades);
        assert_eq!(rate("6 Pa/min"), Ok((0.1, false)));
        assert_eq!(rate("0.5 decade/min"), Ok((0.5, true)));
        assert_eq!(rate("1 decade/s"), Ok((60.0, true)));
    }

    #[test]
    fn wrong_kinds_of_threshold_are_refused() {
        let e = Quantity::MeanFreePath
            .threshold("5 mbar")
            .expect_err("wrong kind");
        assert!(e.contains("expected a length"), "{e}");
        let e = Quantity::Pressure.threshold("3 m").expect_err("wrong kind");
        assert!(e.contains("unknown pressure unit \"m\""), "{e}");
        assert!(Quantity::Regime("x".into()).threshold("1").is_err());
        assert!(rate("1e-6 mbar").is_err());
        let e = Quantity::parse("presure", None).expect_err("typo");
        assert!(e.contains("did you mean `pressure`?"), "{e}");
        assert!(Quantity::parse("knudsen", None).is_err());
        assert!(Quantity::parse("pressure", Some("bore")).is_err());
    }

    #[test]
    fn classes() {
        let r = Quantity::Regime("x".into());
        assert_eq!(
            Class::parse(&r, "molecular"),
            Ok(Class::Regime(FlowRegime::Molecular))
        );
        assert!(Class::parse(&r, "turbulent").is_err());
        assert!(Class::parse(&Quantity::VacuumRange, "ultra-high").is_ok());
        assert!(
            Class::Regime(FlowRegime::Viscous).rank() < Class::Regime(FlowRegime::Molecular).rank()
        );
    }
}
