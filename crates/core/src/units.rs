//! Quantities with units: parsing what operators type (`"1e-6 mbar"`,
//! `" 5 mTorr "`, `"22 C"`) and printing values in engineering-friendly
//! notation (`1.23e-6 mbar`).
//!
//! Everything is converted to SI on the way in; the unit the user wrote is kept
//! so that output can be given back in it.
//!
//! Conversion factors are definitions: 1 Torr = 101325/760 Pa, 1 mbar = 100 Pa,
//! 1 atm = 101325 Pa, 1 psi = 6894.757293168 Pa (lbf/in² with g_n = 9.80665),
//! 1 micron of mercury = 1 mTorr, 1 in = 25.4 mm.

use std::fmt;

/// One Torr in pascal, exact by definition (101325/760).
pub const TORR_PA: f64 = 101_325.0 / 760.0;
/// One standard atmosphere in pascal, exact by definition.
pub const ATM_PA: f64 = 101_325.0;
/// One pound-force per square inch in pascal (exact from the inch and g_n).
pub const PSI_PA: f64 = 6_894.757_293_168;
/// One langmuir in Pa·s: 1e-6 Torr·s.
pub const LANGMUIR_PA_S: f64 = 1e-6 * TORR_PA;
/// 0 °C in kelvin.
pub const ZERO_CELSIUS_K: f64 = 273.15;

/// What went wrong reading a quantity.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum UnitError {
    /// Nothing but white space was given.
    #[error("empty {kind}; expected a number and a unit, e.g. \"{example}\"")]
    Empty {
        /// The kind of quantity expected.
        kind: &'static str,
        /// An example of a valid input.
        example: &'static str,
    },
    /// The text does not start with a number.
    #[error("\"{text}\" does not start with a number; expected a {kind} such as \"{example}\"")]
    BadNumber {
        /// The offending text.
        text: String,
        /// The kind of quantity expected.
        kind: &'static str,
        /// An example of a valid input.
        example: &'static str,
    },
    /// A number without a unit.
    #[error("{kind} \"{text}\" has no unit; expected one of {expected}")]
    MissingUnit {
        /// The offending text.
        text: String,
        /// The kind of quantity expected.
        kind: &'static str,
        /// The accepted units.
        expected: String,
    },
    /// A unit that is not one of the accepted ones.
    #[error("unknown {kind} unit \"{unit}\"{hint}; expected one of {expected}")]
    UnknownUnit {
        /// The unit as written.
        unit: String,
        /// The kind of quantity expected.
        kind: &'static str,
        /// The accepted units.
        expected: String,
        /// `" (did you mean \"mbar\"?)"` or empty.
        hint: String,
    },
    /// NaN or infinity.
    #[error("{kind} \"{text}\" is not a finite number")]
    NonFinite {
        /// The offending text.
        text: String,
        /// The kind of quantity expected.
        kind: &'static str,
    },
    /// Zero or negative where only positive values make sense.
    #[error("{kind} must be greater than zero, got \"{text}\"")]
    NotPositive {
        /// The offending text.
        text: String,
        /// The kind of quantity expected.
        kind: &'static str,
    },
    /// Negative where zero is allowed but negative is not (durations).
    #[error("{kind} must not be negative, got \"{text}\"")]
    Negative {
        /// The offending text.
        text: String,
        /// The kind of quantity expected.
        kind: &'static str,
    },
    /// A temperature at or below absolute zero.
    #[error("temperature \"{text}\" is at or below absolute zero ({kelvin:.2} K)")]
    BelowAbsoluteZero {
        /// The offending text.
        text: String,
        /// The value converted to kelvin.
        kelvin: f64,
    },
}

/// A family of units for one kind of quantity.
pub trait UnitKind: Copy + PartialEq + fmt::Debug + 'static {
    /// Name of the quantity, used in messages ("pressure").
    const KIND: &'static str;
    /// An example input, used in messages.
    const EXAMPLE: &'static str;
    /// Every unit of the family, in the order they are listed in messages.
    const ALL: &'static [Self];
    /// The canonical symbol, as printed.
    fn symbol(self) -> &'static str;
    /// Other spellings accepted on input (exact, case-sensitive).
    fn aliases(self) -> &'static [&'static str] {
        &[]
    }
    /// Converts a value in this unit to SI.
    fn to_si(self, value: f64) -> f64;
    /// Converts an SI value to this unit.
    fn value_of(self, si: f64) -> f64;
    /// Checks the SI value for physical sense. The default requires > 0.
    fn check(si: f64, text: &str) -> Result<(), UnitError> {
        if si > 0.0 {
            Ok(())
        } else {
            Err(UnitError::NotPositive {
                text: text.trim().to_string(),
                kind: Self::KIND,
            })
        }
    }

    /// Looks a unit up by symbol or alias; exact match first, then a
    /// case-insensitive match when that is unambiguous.
    fn lookup(text: &str) -> Option<Self> {
        let exact = Self::ALL
            .iter()
            .copied()
            .find(|u| u.symbol() == text || u.aliases().contains(&text));
        if exact.is_some() {
            return exact;
        }
        let mut found = Self::ALL.iter().copied().filter(|u| {
            u.symbol().eq_ignore_ascii_case(text)
                || u.aliases().iter().any(|a| a.eq_ignore_ascii_case(text))
        });
        let first = found.next()?;
        // Ambiguous when two different units match ignoring case (mPa/MPa).
        if found.any(|u| u != first) {
            None
        } else {
            Some(first)
        }
    }

    /// The list of canonical symbols for messages.
    fn expected() -> String {
        Self::ALL
            .iter()
            .map(|u| u.symbol())
            .collect::<Vec<_>>()
            .join(", ")
    }
}

macro_rules! unit_family {
    (
        $(#[$meta:meta])*
        $name:ident, $kind:literal, $example:literal $(, check = $check:path)? {
            $( $(#[$vmeta:meta])* $variant:ident => $symbol:literal [$($alias:literal),*] * $factor:expr ),+ $(,)?
        }
    ) => {
        $(#[$meta])*
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
        pub enum $name {
            $( $(#[$vmeta])* $variant ),+
        }

        impl UnitKind for $name {
            const KIND: &'static str = $kind;
            const EXAMPLE: &'static str = $example;
            const ALL: &'static [Self] = &[$($name::$variant),+];
            fn symbol(self) -> &'static str {
                match self { $($name::$variant => $symbol),+ }
            }
            fn aliases(self) -> &'static [&'static str] {
                match self { $($name::$variant => &[$($alias),*]),+ }
            }
            fn to_si(self, value: f64) -> f64 {
                match self { $($name::$variant => value * $factor),+ }
            }
            fn value_of(self, si: f64) -> f64 {
                match self { $($name::$variant => si / $factor),+ }
            }
            $(
            fn check(si: f64, text: &str) -> Result<(), UnitError> {
                $check(si, text)
            }
            )?
        }

        impl<'de> serde::Deserialize<'de> for $name {
            fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
                deserialize_unit(d)
            }
        }
    };
}

unit_family! {
    /// Pressure units.
    PressureUnit, "pressure", "1e-6 mbar" {
        /// pascal
        Pa => "Pa" [] * 1.0,
        /// kilopascal
        KPa => "kPa" [] * 1e3,
        /// hectopascal
        HPa => "hPa" [] * 1e2,
        /// millibar
        Mbar => "mbar" ["mb"] * 1e2,
        /// bar
        Bar => "bar" [] * 1e5,
        /// torr
        Torr => "Torr" ["torr"] * TORR_PA,
        /// millitorr
        MTorr => "mTorr" ["mtorr"] * (TORR_PA * 1e-3),
        /// micron of mercury (= mTorr)
        Micron => "micron" ["microns", "um Hg", "µm Hg", "umHg", "µmHg"] * (TORR_PA * 1e-3),
        /// standard atmosphere
        Atm => "atm" [] * ATM_PA,
        /// pound-force per square inch
        Psi => "psi" [] * PSI_PA,
    }
}

unit_family! {
    /// Length units.
    LengthUnit, "length", "0.3 m" {
        /// metre
        M => "m" [] * 1.0,
        /// centimetre
        Cm => "cm" [] * 1e-2,
        /// millimetre
        Mm => "mm" [] * 1e-3,
        /// micrometre
        Um => "um" ["µm", "μm"] * 1e-6,
        /// nanometre
        Nm => "nm" [] * 1e-9,
        /// inch
        In => "in" ["inch", "\""] * 0.0254,
    }
}

unit_family! {
    /// Volume units.
    VolumeUnit, "volume", "85 L" {
        /// cubic metre
        M3 => "m3" ["m^3", "m³"] * 1.0,
        /// litre
        L => "L" ["l", "litre", "liter"] * 1e-3,
        /// cubic centimetre
        Cm3 => "cm3" ["cm^3", "cm³", "mL", "ml"] * 1e-6,
    }
}

unit_family! {
    /// Area units.
    AreaUnit, "area", "1.6 m2" {
        /// square metre
        M2 => "m2" ["m^2", "m²"] * 1.0,
        /// square centimetre
        Cm2 => "cm2" ["cm^2", "cm²"] * 1e-4,
    }
}

unit_family! {
    /// Time (duration) units.
    TimeUnit, "duration", "120 s", check = check_duration {
        /// second
        S => "s" ["sec", "second", "seconds"] * 1.0,
        /// millisecond
        Ms => "ms" [] * 1e-3,
        /// minute
        Min => "min" ["minute", "minutes"] * 60.0,
        /// hour
        H => "h" ["hour", "hours"] * 3600.0,
        /// day
        D => "d" ["day", "days"] * 86400.0,
    }
}

unit_family! {
    /// Data size units (decimal and binary prefixes).
    SizeUnit, "size", "64 MB" {
        /// byte
        B => "B" ["bytes"] * 1.0,
        /// kilobyte
        KB => "kB" ["KB"] * 1e3,
        /// megabyte
        MB => "MB" [] * 1e6,
        /// gigabyte
        GB => "GB" [] * 1e9,
        /// kibibyte
        KiB => "KiB" [] * 1024.0,
        /// mebibyte
        MiB => "MiB" [] * 1_048_576.0,
        /// gibibyte
        GiB => "GiB" [] * 1_073_741_824.0,
    }
}

/// Temperature units; these have offsets, so they are written out by hand.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum TemperatureUnit {
    /// kelvin
    K,
    /// degree Celsius
    C,
    /// degree Fahrenheit
    F,
}

impl UnitKind for TemperatureUnit {
    const KIND: &'static str = "temperature";
    const EXAMPLE: &'static str = "22 C";
    const ALL: &'static [Self] = &[TemperatureUnit::K, TemperatureUnit::C, TemperatureUnit::F];
    fn symbol(self) -> &'static str {
        match self {
            TemperatureUnit::K => "K",
            TemperatureUnit::C => "C",
            TemperatureUnit::F => "F",
        }
    }
    fn aliases(self) -> &'static [&'static str] {
        match self {
            TemperatureUnit::K => &["kelvin"],
            TemperatureUnit::C => &["°C", "degC", "celsius", "℃"],
            TemperatureUnit::F => &["°F", "degF", "fahrenheit", "℉"],
        }
    }
    fn to_si(self, value: f64) -> f64 {
        match self {
            TemperatureUnit::K => value,
            TemperatureUnit::C => value + ZERO_CELSIUS_K,
            TemperatureUnit::F => (value - 32.0) * 5.0 / 9.0 + ZERO_CELSIUS_K,
        }
    }
    fn value_of(self, si: f64) -> f64 {
        match self {
            TemperatureUnit::K => si,
            TemperatureUnit::C => si - ZERO_CELSIUS_K,
            TemperatureUnit::F => (si - ZERO_CELSIUS_K) * 9.0 / 5.0 + 32.0,
        }
    }
    fn check(si: f64, text: &str) -> Result<(), UnitError> {
        if si > 0.0 {
            Ok(())
        } else {
            Err(UnitError::BelowAbsoluteZero {
                text: text.trim().to_string(),
                kelvin: si,
            })
        }
    }
}

/// A duration may be zero (no delay) but not negative.
pub fn check_duration(si: f64, text: &str) -> Result<(), UnitError> {
    if si >= 0.0 {
        Ok(())
    } else {
        Err(UnitError::Negative {
            text: text.trim().to_string(),
            kind: TimeUnit::KIND,
        })
    }
}

/// A value in SI together with the unit it was written in.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Quantity<U> {
    /// The value in SI units (Pa, K, m, m³, m², s).
    pub si: f64,
    /// The unit the value was written in.
    pub unit: U,
}

impl<U: UnitKind> Quantity<U> {
    /// Builds a quantity from an SI value, to be shown in `unit`.
    pub fn from_si(si: f64, unit: U) -> Self {
        Quantity { si, unit }
    }

    /// The value expressed in the quantity's own unit.
    pub fn in_own_unit(&self) -> f64 {
        self.unit.value_of(self.si)
    }
}

impl<U: UnitKind> fmt::Display for Quantity<U> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} {}",
            format_sig(self.in_own_unit(), 3),
            self.unit.symbol()
        )
    }
}

/// A pressure, e.g. `"1e-6 mbar"`.
pub type Pressure = Quantity<PressureUnit>;
/// A temperature, e.g. `"22 C"`.
pub type Temperature = Quantity<TemperatureUnit>;
/// A length, e.g. `"0.3 m"`.
pub type Length = Quantity<LengthUnit>;
/// A volume, e.g. `"85 L"`.
pub type Volume = Quantity<VolumeUnit>;
/// An area, e.g. `"1.6 m2"`.
pub type Area = Quantity<AreaUnit>;
/// A duration, e.g. `"2 min"`.
pub type Duration = Quantity<TimeUnit>;
/// A data size, e.g. `"64 MB"`.
pub type Size = Quantity<SizeUnit>;

/// Splits `" 1e-6mbar "` into `("1e-6", "mbar")`: the longest leading run that
/// parses as a number, and the rest with white space trimmed.
fn split_number(text: &str) -> Option<(f64, &str)> {
    let t = text.trim();
    let numeric_end = t
        .char_indices()
        .find(|&(_, c)| !(c.is_ascii_digit() || matches!(c, '.' | '+' | '-' | 'e' | 'E')))
        .map_or(t.len(), |(i, _)| i);
    // Back off until the prefix parses ("2e" in "2em" is not a number, "2" is).
    let mut end = numeric_end;
    while end > 0 {
        if let Ok(v) = t[..end].parse::<f64>() {
            return Some((v, t[end..].trim()));
        }
        end -= 1;
        while end > 0 && !t.is_char_boundary(end) {
            end -= 1;
        }
    }
    // Words Rust parses as numbers: reported as non-finite by the caller.
    let word_end = t.find(char::is_whitespace).unwrap_or(t.len());
    let word = &t[..word_end];
    match word.parse::<f64>() {
        Ok(v) if !v.is_finite() => Some((v, t[word_end..].trim())),
        _ => None,
    }
}

/// Parses a number followed by a unit of family `U`, checks it for physical
/// sense, and returns it in SI.
pub fn parse<U: UnitKind>(text: &str) -> Result<Quantity<U>, UnitError> {
    parse_with(text, U::check)
}

fn parse_with<U: UnitKind>(
    text: &str,
    check: fn(f64, &str) -> Result<(), UnitError>,
) -> Result<Quantity<U>, UnitError> {
    if text.trim().is_empty() {
        return Err(UnitError::Empty {
            kind: U::KIND,
            example: U::EXAMPLE,
        });
    }
    let Some((value, unit_text)) = split_number(text) else {
        return Err(UnitError::BadNumber {
            text: text.trim().to_string(),
            kind: U::KIND,
            example: U::EXAMPLE,
        });
    };
    if !value.is_finite() {
        return Err(UnitError::NonFinite {
            text: text.trim().to_string(),
            kind: U::KIND,
        });
    }
    if unit_text.is_empty() {
        return Err(UnitError::MissingUnit {
            text: text.trim().to_string(),
            kind: U::KIND,
            expected: U::expected(),
        });
    }
    let Some(unit) = U::lookup(unit_text) else {
        let candidates = U::ALL.iter().map(|u| u.symbol());
        let hint = crate::suggest::nearest(unit_text, candidates)
            .map(|s| format!(" (did you mean \"{s}\"?)"))
            .unwrap_or_default();
        return Err(UnitError::UnknownUnit {
            unit: unit_text.to_string(),
            kind: U::KIND,
            expected: U::expected(),
            hint,
        });
    };
    let si = unit.to_si(value);
    if !si.is_finite() {
        return Err(UnitError::NonFinite {
            text: text.trim().to_string(),
            kind: U::KIND,
        });
    }
    check(si, text)?;
    Ok(Quantity { si, unit })
}

/// Parses a duration (`"120 s"`, `"2 min"`, `"0 s"`); zero is allowed.
pub fn parse_duration(text: &str) -> Result<Duration, UnitError> {
    parse::<TimeUnit>(text)
}

/// Deserializes a unit symbol (`"mbar"`) of family `U`.
fn deserialize_unit<'de, U: UnitKind, D: serde::Deserializer<'de>>(d: D) -> Result<U, D::Error> {
    let text = <String as serde::Deserialize>::deserialize(d)?;
    U::lookup(text.trim()).ok_or_else(|| {
        let hint = crate::suggest::nearest(&text, U::ALL.iter().map(|u| u.symbol()))
            .map(|s| format!(" (did you mean \"{s}\"?)"))
            .unwrap_or_default();
        serde::de::Error::custom(format!(
            "unknown {} unit \"{text}\"{hint}; expected one of {}",
            U::KIND,
            U::expected()
        ))
    })
}

impl<'de> serde::Deserialize<'de> for TemperatureUnit {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        deserialize_unit(d)
    }
}

impl<'de, U: UnitKind> serde::Deserialize<'de> for Quantity<U> {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V<U>(std::marker::PhantomData<U>);
        impl<U: UnitKind> serde::de::Visitor<'_> for V<U> {
            type Value = Quantity<U>;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                write!(f, "a {} with its unit, e.g. \"{}\"", U::KIND, U::EXAMPLE)
            }
            fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<Self::Value, E> {
                parse::<U>(v).map_err(E::custom)
            }
        }
        d.deserialize_str(V(std::marker::PhantomData))
    }
}

/// Parses a plain positive finite number (no unit), e.g. a site density.
pub fn parse_positive(text: &str, kind: &'static str) -> Result<f64, UnitError> {
    let t = text.trim();
    if t.is_empty() {
        return Err(UnitError::Empty {
            kind,
            example: "1e19",
        });
    }
    let v: f64 = t.parse().map_err(|_| UnitError::BadNumber {
        text: t.to_string(),
        kind,
        example: "1e19",
    })?;
    if !v.is_finite() {
        return Err(UnitError::NonFinite {
            text: t.to_string(),
            kind,
        });
    }
    if v <= 0.0 {
        return Err(UnitError::NotPositive {
            text: t.to_string(),
            kind,
        });
    }
    Ok(v)
}

/// Formats `x` with `sig` significant digits: plain decimals between 1e-3 and
/// 1e5, scientific notation (`1.23e-6`) outside, so that a column of pressures
/// spanning twelve decades stays readable.
pub fn format_sig(x: f64, sig: usize) -> String {
    let sig = sig.max(1);
    if x == 0.0 {
        return "0".to_string();
    }
    if !x.is_finite() {
        return format!("{x}");
    }
    let a = x.abs();
    if (1e-3..1e5).contains(&a) {
        let exponent = a.log10().floor() as i32;
        let decimals = (sig as i32 - 1 - exponent).max(0) as usize;
        // Rounding can carry into a new digit (9.995 -> 10.00); that only adds
        // a trailing digit, which is harmless for display.
        format!("{x:.decimals$}")
    } else {
        format!("{:.*e}", sig - 1, x)
    }
}

/// Formats a pressure in pascal in `unit`, scientific with three significant
/// digits (`1.23e-6 mbar`).
pub fn format_pressure(pa: f64, unit: PressureUnit) -> String {
    format!("{:.2e} {}", unit.value_of(pa), unit.symbol())
}

/// Formats a temperature in kelvin in `unit` with one decimal (`22.0 C`).
pub fn format_temperature(kelvin: f64, unit: TemperatureUnit) -> String {
    format!("{:.1} {}", unit.value_of(kelvin), unit.symbol())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pa(text: &str) -> f64 {
        parse::<PressureUnit>(text).expect(text).si
    }

    fn same(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-14 * a.abs().max(b.abs())
    }

    #[test]
    fn pressure_spellings_parse() {
        assert!(same(pa("1e-6 mbar"), 1e-4));
        assert!(same(pa("1e-6mbar"), 1e-4));
        assert!(same(pa(" 5 mTorr "), 5e-3 * TORR_PA));
        assert!(same(pa("5 micron"), pa("5 mTorr")));
        assert!(same(pa("1 atm"), 101_325.0));
        assert!(same(pa("2.5E-3 Torr"), 2.5e-3 * TORR_PA));
        assert!(same(pa("1 TORR"), TORR_PA));
        assert!(same(pa("3 hPa"), 300.0));
        assert!(same(pa("0.1 kPa"), 100.0));
        assert!(same(pa("1 bar"), 1e5));
        assert!(same(pa(".5 Pa"), 0.5));
    }

    #[test]
    fn conversion_factors_match_their_definitions() {
        // Source: definitions (1 Torr = 101325/760 Pa exactly; 1 psi from
        // 1 lbf = 0.45359237 kg × 9.80665 m/s² over (0.0254 m)²).
        assert!((TORR_PA - 133.322_368_421).abs() < 1e-9);
        let psi = 0.453_592_37 * 9.806_65 / (0.0254 * 0.0254);
        assert!((PSI_PA - psi).abs() / psi < 1e-12);
        // 1 langmuir = 1e-6 Torr·s (usual definition, from memory).
        assert!((LANGMUIR_PA_S - 1.333_224e-4).abs() < 1e-9);
    }

    #[test]
    fn temperatures_parse_with_offsets() {
        let t = |s: &str| parse::<TemperatureUnit>(s).expect(s).si;
        assert!((t("22 C") - 295.15).abs() < 1e-12);
        assert!((t("22 °C") - 295.15).abs() < 1e-12);
        assert!((t("32 F") - 273.15).abs() < 1e-12);
        assert!((t("212 °F") - 373.15).abs() < 1e-9);
        assert_eq!(t("300 K"), 300.0);
    }

    #[test]
    fn bad_inputs_say_what_is_accepted() {
        let e = parse::<PressureUnit>("1e-6 mbr").unwrap_err().to_string();
        assert!(e.contains("unknown pressure unit \"mbr\""), "{e}");
        assert!(e.contains("did you mean \"mbar\""), "{e}");
        assert!(e.contains("Pa, kPa, hPa, mbar"), "{e}");
        let e = parse::<PressureUnit>("1e-6").unwrap_err().to_string();
        assert!(e.contains("has no unit"), "{e}");
        assert!(matches!(
            parse::<PressureUnit>("0 Pa"),
            Err(UnitError::NotPositive { .. })
        ));
        assert!(matches!(
            parse::<PressureUnit>("-1 Pa"),
            Err(UnitError::NotPositive { .. })
        ));
        assert!(matches!(
            parse::<PressureUnit>("NaN Pa"),
            Err(UnitError::NonFinite { .. })
        ));
        assert!(matches!(
            parse::<PressureUnit>("inf Pa"),
            Err(UnitError::NonFinite { .. })
        ));
        assert!(matches!(
            parse::<PressureUnit>("1e400 Pa"),
            Err(UnitError::NonFinite { .. })
        ));
        assert!(matches!(
            parse::<PressureUnit>("mbar"),
            Err(UnitError::BadNumber { .. })
        ));
        assert!(matches!(
            parse::<PressureUnit>("   "),
            Err(UnitError::Empty { .. })
        ));
        assert!(matches!(
            parse::<TemperatureUnit>("-300 C"),
            Err(UnitError::BelowAbsoluteZero { .. })
        ));
        assert!(matches!(
            parse::<TemperatureUnit>("0 K"),
            Err(UnitError::BelowAbsoluteZero { .. })
        ));
        assert!(matches!(
            parse::<LengthUnit>("0 m"),
            Err(UnitError::NotPositive { .. })
        ));
        assert!(matches!(
            parse::<LengthUnit>("-2 cm"),
            Err(UnitError::NotPositive { .. })
        ));
        assert!(matches!(
            parse_duration("-2 s"),
            Err(UnitError::Negative { .. })
        ));
        assert_eq!(parse_duration("0 s").map(|d| d.si), Ok(0.0));
        assert_eq!(parse_duration("2 min").map(|d| d.si), Ok(120.0));
    }

    #[test]
    fn other_kinds_parse() {
        assert_eq!(parse::<LengthUnit>("30 cm").map(|q| q.si), Ok(0.3));
        assert_eq!(parse::<LengthUnit>("1 in").map(|q| q.si), Ok(0.0254));
        assert!((parse::<LengthUnit>("0.36 nm").expect("nm").si - 0.36e-9).abs() < 1e-24);
        assert_eq!(parse::<VolumeUnit>("85 L").map(|q| q.si), Ok(0.085));
        assert_eq!(parse::<VolumeUnit>("2 m3").map(|q| q.si), Ok(2.0));
        assert_eq!(parse::<AreaUnit>("1e4 cm2").map(|q| q.si), Ok(1.0));
        assert_eq!(parse::<TimeUnit>("1 h").map(|q| q.si), Ok(3600.0));
    }

    #[test]
    fn ambiguous_case_folding_is_refused() {
        // "MBAR" folds to mbar only; "M" folds to m for length.
        assert_eq!(PressureUnit::lookup("MBAR"), Some(PressureUnit::Mbar));
        assert_eq!(LengthUnit::lookup("M"), Some(LengthUnit::M));
        assert_eq!(PressureUnit::lookup("pA"), Some(PressureUnit::Pa));
    }

    #[test]
    fn formatting_is_engineering_friendly() {
        assert_eq!(
            format_pressure(1.234e-4, PressureUnit::Mbar),
            "1.23e-6 mbar"
        );
        assert_eq!(format_temperature(295.15, TemperatureUnit::C), "22.0 C");
        assert_eq!(format_sig(0.3, 3), "0.300");
        assert_eq!(format_sig(222.0, 3), "222");
        assert_eq!(format_sig(66.6123, 3), "66.6");
        assert_eq!(format_sig(2.455e16, 4), "2.455e16");
        assert_eq!(format_sig(1.5e-7, 3), "1.50e-7");
        let q = parse::<PressureUnit>("5 mTorr").expect("5 mTorr");
        assert_eq!(q.to_string(), "5.00 mTorr");
    }
}
