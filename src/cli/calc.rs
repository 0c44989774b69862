//! `rarefy calc`: derived quantities for one state of the gas.

use std::path::PathBuf;

use clap::{Args, ValueEnum};
use serde::Serialize;

use super::{CliError, ExitCode, load_config, print_json, print_out};
use crate::engine::gauge::GaugeKind;
use crate::engine::mixture::Mixture;
use crate::engine::{
    Conditions, Derived, GaugeModel, GaugeOverrides, Model, NamedLength, Warning, derive,
};
use crate::units::{
    self, Duration, Length, LengthUnit, Pressure, PressureUnit, Temperature, TemperatureUnit,
    UnitKind, format_pressure, format_sig, format_temperature,
};

pub(super) const LONG_ABOUT: &str = "\
One-shot derived quantities: number density, mean, most probable and rms \
speeds, mean free path, wall impingement rate, time to a monolayer, the ISO \
3529-1 vacuum range, and a Knudsen number and flow regime for every --length.

Vacuum range: ISO 3529-1 (edition from the config's [physics] iso_edition, \
default 2019); a pressure at a limit belongs to the range above it (1e-9 Pa \
is ultra-high), and the limit is compared after conversion to Pa within 1 \
part in 1e9, so 1e-11 mbar and 1e-9 Pa get the same range. At and above the \
standard atmosphere there is no vacuum: the range is `atmospheric` up to \
1.05 atm and `above-atmospheric` beyond.

With --gauge thermal|ionization|combined the pressure is taken as the gauge's \
N2-equivalent reading and corrected for the gas (p = p_ind / S, S = Σ x_i S_i \
for a mixture). A combined gauge reads on its ionization element below 0.1 Pa \
(indicated) and on its thermal element at and above: --sensitivity sets the \
ionization element's factor, --thermal-sensitivity the thermal one's. Only \
the element that reads needs a factor (argon has no tabulated thermal factor, \
so an argon reading at 10 Pa asks for --thermal-sensitivity); a factor given \
for the other element is not applied and a sensitivity-not-applied warning \
says so.

For a mixture (--mix) every species gets its own mean free path, impingement \
rate and monolayer time. The top-level numbers: mean speed is the mean over \
all molecules (Σ x_i v̄_i); rms speed is over all molecules (√Σ x_i v²_rms,i); \
most probable speed is the mode of the mixture's speed distribution (the \
number-weighted sum of the species' Maxwell-Boltzmann distributions, found \
numerically; it sits at one species' peak when the masses are far apart); \
mean free path is the mole-fraction-weighted mean of the species values; \
impingement rate is the sum over species; the monolayer time is that of the \
summed rate.

Warnings (text, and `warnings` with a code in --json) include: \
above-saturation (a species' partial pressure above its saturation vapour \
pressure at the temperature; water, IAPWS equations), \
hard-sphere-far-from-reference (--model hard-sphere where the fixed diameter \
puts the mean free path more than 5 % from the Sutherland value), \
thermal-factor-nonlinear (a thermal gauge's gas factor used above about \
1 mbar of true pressure), temperature-outside-fit, gauge-out-of-range, \
above-atmospheric.

The temperature defaults to the config's [chamber] temperature, else 22 C, and \
is then reported as assumed.";

/// `rarefy calc` arguments.
#[derive(Debug, Args)]
pub struct CalcArgs {
    /// Pressure with its unit, e.g. "1e-6 mbar" (Pa, kPa, hPa, mbar, bar, Torr, mTorr, micron, atm, psi).
    #[arg(long, short = 'p', value_parser = quantity::<PressureUnit>, allow_hyphen_values = true)]
    pressure: Pressure,
    /// Gas temperature, e.g. "22 C" (K, C, F). Default: the config's, else 22 C (assumed).
    #[arg(long, short = 't', value_parser = quantity::<TemperatureUnit>, allow_hyphen_values = true)]
    temperature: Option<Temperature>,
    /// A single gas, e.g. N2, Ar, H2O (see `rarefy gases`). Default: the config's gas, else N2.
    #[arg(long, short = 'g', conflicts_with = "mix")]
    gas: Option<String>,
    /// A mixture of mole fractions, e.g. "H2=0.6,H2O=0.3,N2=0.1".
    #[arg(long)]
    mix: Option<String>,
    /// A named length for a Knudsen number, "name=0.3 m" or "0.3 m"; repeatable.
    #[arg(long, short = 'l', value_parser = named_length)]
    length: Vec<NamedLength>,
    /// The gauge the pressure was read on; gas-dependent gauges are corrected.
    #[arg(long, value_enum)]
    gauge: Option<GaugeArg>,
    /// Gauge sensitivity relative to N2 (reading / true pressure), replacing the table's.
    /// For a combined gauge: its ionization element's (readings below 0.1 Pa).
    #[arg(long, allow_hyphen_values = true, value_parser = positive_number, requires = "gauge")]
    sensitivity: Option<f64>,
    /// A combined gauge's thermal-element sensitivity (readings at or above 0.1 Pa),
    /// replacing the table's.
    #[arg(long, allow_hyphen_values = true, value_parser = positive_number, requires = "gauge")]
    thermal_sensitivity: Option<f64>,
    /// Diameter model.
    #[arg(long, value_enum)]
    model: Option<ModelArg>,
    /// Viscosity diameter at 273.15 K replacing the table's, e.g. "0.36 nm" (single gas only).
    #[arg(long, value_parser = quantity::<LengthUnit>, conflicts_with = "mix")]
    diameter: Option<Length>,
    /// Adsorption sites per m² for the monolayer time (default 1e19).
    #[arg(long, allow_hyphen_values = true, value_parser = positive_number)]
    sites: Option<f64>,
    /// Sticking coefficient, 0 < s ≤ 1 (default 1).
    #[arg(long, allow_hyphen_values = true, value_parser = sticking)]
    sticking: Option<f64>,
    /// Also give the exposure for holding this pressure this long, e.g. "10 min".
    #[arg(long = "for", value_parser = quantity::<units::TimeUnit>)]
    duration: Option<Duration>,
    /// Pressure unit of the output (default: the unit of --pressure).
    #[arg(long, value_parser = unit::<PressureUnit>)]
    unit: Option<PressureUnit>,
    /// Configuration file: user gases, lengths, physics settings.
    #[arg(long, short = 'c')]
    config: Option<PathBuf>,
    /// Print JSON instead of a table.
    #[arg(long)]
    json: bool,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
enum GaugeArg {
    Capacitance,
    Thermal,
    Ionization,
    Combined,
}

impl From<GaugeArg> for GaugeKind {
    fn from(g: GaugeArg) -> Self {
        match g {
            GaugeArg::Capacitance => GaugeKind::Capacitance,
            GaugeArg::Thermal => GaugeKind::Thermal,
            GaugeArg::Ionization => GaugeKind::Ionization,
            GaugeArg::Combined => GaugeKind::Combined,
        }
    }
}

#[derive(Debug, Clone, Copy, ValueEnum)]
enum ModelArg {
    HardSphere,
    Sutherland,
}

fn quantity<U: UnitKind>(s: &str) -> Result<units::Quantity<U>, String> {
    units::parse::<U>(s).map_err(|e| e.to_string())
}

fn unit<U: UnitKind>(s: &str) -> Result<U, String> {
    U::lookup(s.trim()).ok_or_else(|| {
        format!(
            "unknown {} unit \"{s}\"; expected one of {}",
            U::KIND,
            U::expected()
        )
    })
}

fn positive_number(s: &str) -> Result<f64, String> {
    units::parse_positive(s, "number").map_err(|e| e.to_string())
}

fn sticking(s: &str) -> Result<f64, String> {
    let v = units::parse_positive(s, "sticking coefficient").map_err(|e| e.to_string())?;
    if v > 1.0 {
        return Err(format!("sticking coefficient must be at most 1, got {s}"));
    }
    Ok(v)
}

fn named_length(s: &str) -> Result<NamedLength, String> {
    let (name, value) = match s.split_once('=') {
        Some((n, v)) if !n.trim().is_empty() => (n.trim().to_string(), v),
        Some(_) => {
            return Err(format!(
                "length \"{s}\" has an empty name; write name=0.3 m"
            ));
        }
        None => (String::new(), s),
    };
    let q = quantity::<LengthUnit>(value)?;
    Ok(NamedLength::new(name, q.si))
}

#[derive(Serialize)]
struct Inputs {
    pressure_pa: f64,
    indicated_pa: f64,
    temperature_k: f64,
    temperature_assumed: bool,
    gas: String,
    model: Model,
    gauge: Option<GaugeKind>,
    sensitivity: Option<f64>,
    sites_per_m2: f64,
    sticking: f64,
    iso_edition: u16,
    viscous_below: f64,
    molecular_above: f64,
}

#[derive(Serialize)]
struct Exposure {
    duration_s: f64,
    pa_s: f64,
    langmuir: f64,
}

#[derive(Serialize)]
struct Output {
    inputs: Inputs,
    #[serde(flatten)]
    derived: Derived,
    #[serde(skip_serializing_if = "Option::is_none")]
    exposure: Option<Exposure>,
}

/// Runs `rarefy calc`.
pub fn run(args: &CalcArgs) -> Result<ExitCode, CliError> {
    let config = load_config(args.config.as_ref())?.config;
    let usage = |e: &dyn std::fmt::Display, arg: &str| CliError::Usage(format!("{arg}: {e}"));

    let mut mixture = match (&args.gas, &args.mix) {
        (Some(g), _) => Mixture::pure(config.gases.get(g).map_err(|e| usage(&e, "--gas"))?.clone()),
        (None, Some(m)) => Mixture::parse(m, &config.gases).map_err(|e| usage(&e, "--mix"))?,
        (None, None) => config.mixture.clone(),
    };
    if let Some(d) = args.diameter {
        if !mixture.is_pure() {
            return Err(CliError::Usage(
                "--diameter: applies to a single gas; the config's gas is a mixture".into(),
            ));
        }
        let mut gas = mixture.components()[0].gas.clone();
        gas.diameter_m = d.si;
        gas.reference_temperature_k = crate::gas::T_REF_K;
        gas.sources.diameter = "given on the command line".into();
        mixture = Mixture::pure(gas);
    }

    let mut physics = config.physics;
    if let Some(m) = args.model {
        physics.model = match m {
            ModelArg::HardSphere => Model::HardSphere,
            ModelArg::Sutherland => Model::Sutherland,
        };
    }
    if let Some(s) = args.sites {
        physics.sites_per_m2 = s;
    }
    if let Some(s) = args.sticking {
        physics.sticking = s;
    }

    let (temperature_k, temperature_assumed) = match args.temperature {
        Some(t) => (t.si, false),
        None => (config.chamber.temperature_k.unwrap_or(295.15), true),
    };

    // Lengths: the config's, then the command line's (replacing by name).
    // A name given twice on the command line is a mistake, not a replacement.
    let mut lengths = config.lengths.clone();
    let mut given: Vec<String> = Vec::new();
    for (i, l) in args.length.iter().enumerate() {
        let name = if l.name.is_empty() {
            format!("L{}", i + 1)
        } else {
            l.name.clone()
        };
        if given.contains(&name) {
            return Err(CliError::Usage(format!(
                "--length: the name `{}` is given twice (--length number {}); give each length its own name",
                crate::sample::escape_bytes(name.as_bytes()),
                i + 1
            )));
        }
        given.push(name.clone());
        lengths.retain(|x| x.name != name);
        lengths.push(NamedLength::new(name, l.length_m));
    }

    let indicated_pa = args.pressure.si;
    let mut gauge_warnings: Vec<Warning> = Vec::new();
    let (pressure_pa, sensitivity) = match args.gauge {
        Some(kind) => {
            let kind = GaugeKind::from(kind);
            if args.thermal_sensitivity.is_some() && kind != GaugeKind::Combined {
                return Err(CliError::Usage(format!(
                    "--thermal-sensitivity: applies to a combined gauge; for a {kind} gauge give --sensitivity"
                )));
            }
            let overrides = GaugeOverrides {
                sensitivity: args.sensitivity,
                thermal_sensitivity: args.thermal_sensitivity,
                ..GaugeOverrides::default()
            };
            let element = kind.element(indicated_pa);
            let flag = if element == GaugeKind::Thermal && kind == GaugeKind::Combined {
                "--thermal-sensitivity"
            } else {
                "--sensitivity"
            };
            let model = GaugeModel::new(kind, &mixture, &overrides).map_err(|e| {
                CliError::Usage(format!("--gauge: {e}; on the command line: {flag} S"))
            })?;
            let c = model.correct(indicated_pa);
            if !c.pressure_pa.is_finite() {
                // Only a combined gauge's element without a factor gets here.
                let why = c
                    .warnings
                    .iter()
                    .find(|w| w.code == "no-gauge-sensitivity")
                    .map_or_else(|| "cannot correct the reading".into(), |w| w.to_string());
                return Err(CliError::Usage(format!(
                    "--gauge {kind}: {why}; on the command line: {flag} S"
                )));
            }
            gauge_warnings = c.warnings;
            // A combined gauge's factor for the element that did not read is
            // not silently dropped: say so.
            let unused = match element {
                GaugeKind::Thermal => args.sensitivity.map(|s| ("--sensitivity", s, "ionization")),
                _ => args
                    .thermal_sensitivity
                    .map(|s| ("--thermal-sensitivity", s, "thermal")),
            };
            if kind == GaugeKind::Combined
                && let Some((flag, s, other)) = unused
            {
                gauge_warnings.push(Warning {
                    code: "sensitivity-not-applied",
                    message: format!(
                        "{flag} {s} is the combined gauge's {other}-element factor; this reading \
                         ({indicated_pa:.3e} Pa, crossover {} Pa) comes from the {element} element \
                         and was corrected with that element's factor",
                        crate::engine::gauge::COMBINED_CROSSOVER_PA
                    ),
                });
            }
            (c.pressure_pa, c.sensitivity)
        }
        None => (indicated_pa, None),
    };

    let mut derived = derive(
        &Conditions::new(pressure_pa, temperature_k),
        &mixture,
        &lengths,
        &physics,
    );
    gauge_warnings.append(&mut derived.warnings);
    derived.warnings = gauge_warnings;

    let exposure = args.duration.map(|d| {
        let pa_s = crate::engine::exposure::constant_exposure(pressure_pa, d.si);
        Exposure {
            duration_s: d.si,
            pa_s,
            langmuir: pa_s / units::LANGMUIR_PA_S,
        }
    });

    let out = Output {
        inputs: Inputs {
            pressure_pa,
            indicated_pa,
            temperature_k,
            temperature_assumed,
            gas: mixture.label(),
            model: physics.model,
            gauge: args.gauge.map(Into::into),
            sensitivity,
            sites_per_m2: physics.sites_per_m2,
            sticking: physics.sticking,
            iso_edition: physics.edition.year(),
            viscous_below: physics.bounds.viscous_below,
            molecular_above: physics.bounds.molecular_above,
        },
        derived,
        exposure,
    };
    if args.json {
        let mut text = serde_json::to_string_pretty(&out)
            .map_err(|e| CliError::Runtime(format!("cannot write JSON: {e}")))?;
        text.push('\n');
        print_json(&text)?;
    } else {
        let unit = args.unit.unwrap_or(args.pressure.unit);
        let temp_unit = args
            .temperature
            .map_or(config.display.temperature_unit, |t| t.unit);
        print_out(&table(&out, unit, temp_unit))?;
    }
    Ok(ExitCode::Ok)
}

fn table(out: &Output, unit: PressureUnit, temp_unit: TemperatureUnit) -> String {
    let i = &out.inputs;
    let d = &out.derived;
    let mut s = String::new();
    let mut row = |label: &str, value: String| {
        s.push_str(&format!("  {label:<20} {value}\n"));
    };
    let p = |pa: f64| format_pressure(pa, unit);
    let mixture = d.species.len() > 1;

    row("gas", i.gas.clone());
    row("pressure", p(i.pressure_pa));
    if let Some(g) = i.gauge {
        let how = match i.sensitivity {
            Some(s) if g.is_gas_dependent() => format!("N2-equivalent, corrected with S = {s:.3}"),
            Some(_) => "reads true pressure".to_string(),
            None => "corrected with a calibration table".to_string(),
        };
        row(
            "indicated",
            format!("{} ({g} gauge), {how}", p(i.indicated_pa)),
        );
    }
    let assumed = if i.temperature_assumed {
        " (assumed)"
    } else {
        ""
    };
    row(
        "temperature",
        format!(
            "{}{assumed}",
            format_temperature(i.temperature_k, temp_unit)
        ),
    );
    row(
        "vacuum range",
        format!("{} (ISO 3529-1:{})", d.vacuum_range, i.iso_edition),
    );
    row(
        "number density",
        format!("{} m^-3", format_sig(d.number_density_per_m3, 4)),
    );
    row(
        "mean speed",
        format!(
            "{} m/s   (most probable {} m/s, rms {} m/s)",
            format_sig(d.mean_speed_m_per_s, 4),
            format_sig(d.most_probable_speed_m_per_s, 4),
            format_sig(d.rms_speed_m_per_s, 4)
        ),
    );
    let weighted = if mixture {
        "   (mole-fraction-weighted mean)"
    } else {
        ""
    };
    row(
        "mean free path",
        format!("{}{weighted}", length(d.mean_free_path_m)),
    );
    row(
        "impingement rate",
        format!("{} m^-2 s^-1", format_sig(d.impingement_per_m2_s, 4)),
    );
    row(
        "monolayer time",
        format!(
            "{}   ({:e} sites/m2, sticking {})",
            time(d.monolayer_time_s),
            i.sites_per_m2,
            i.sticking
        ),
    );
    if let Some(e) = &out.exposure {
        row(
            "exposure",
            format!(
                "{} Pa·s = {} L over {}",
                format_sig(e.pa_s, 4),
                format_sig(e.langmuir, 4),
                time(e.duration_s)
            ),
        );
    }
    row("model", i.model.to_string());

    if !d.lengths.is_empty() {
        s.push_str(&format!(
            "\n  {:<20} {:>10} {:>10}  regime (viscous < {} <= transitional <= {} < molecular)\n",
            "length", "L", "Kn", i.viscous_below, i.molecular_above
        ));
        for l in &d.lengths {
            s.push_str(&format!(
                "  {:<20} {:>10} {:>10}  {}\n",
                l.name,
                length(l.length_m),
                format_sig(l.knudsen, 3),
                l.regime
            ));
        }
    }
    if mixture {
        s.push_str(&format!(
            "\n  {:<8} {:>8} {:>14} {:>12} {:>14} {:>12}\n",
            "species", "x", "partial p", "mfp", "Φ m^-2 s^-1", "monolayer"
        ));
        for sp in &d.species {
            s.push_str(&format!(
                "  {:<8} {:>8} {:>14} {:>12} {:>14} {:>12}\n",
                sp.gas,
                format_sig(sp.fraction, 3),
                p(sp.partial_pressure_pa),
                length(sp.mean_free_path_m),
                format_sig(sp.impingement_per_m2_s, 3),
                time(sp.monolayer_time_s)
            ));
        }
    }
    for w in &d.warnings {
        s.push_str(&format!("\nwarning: {w}"));
    }
    if !d.warnings.is_empty() {
        s.push('\n');
    }
    s
}

/// A length in the most readable of nm, µm, mm, m, km.
fn length(m: f64) -> String {
    let (v, u) = match m {
        m if m < 1e-6 => (m * 1e9, "nm"),
        m if m < 1e-3 => (m * 1e6, "um"),
        m if m < 0.1 => (m * 1e3, "mm"),
        m if m < 1e4 => (m, "m"),
        m => (m * 1e-3, "km"),
    };
    format!("{} {u}", format_sig(v, 3))
}

/// A duration in the most readable of s, min, h, d, years.
fn time(s: f64) -> String {
    let (v, u) = match s {
        s if s < 120.0 => (s, "s"),
        s if s < 7200.0 => (s / 60.0, "min"),
        s if s < 172_800.0 => (s / 3600.0, "h"),
        s if s < 3.156e7 * 2.0 => (s / 86400.0, "d"),
        s => (s / 3.156e7, "years"),
    };
    format!("{} {u}", format_sig(v, 3))
}
