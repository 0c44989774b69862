//! The physics engine: from a pressure, a temperature and a gas to the
//! quantities an operator decides with. Pure: no I/O, no clock, SI inside.
//!
//! ```
//! use rarefy_core::engine::{derive, Conditions, NamedLength, Physics};
//! use rarefy_core::engine::mixture::Mixture;
//! use rarefy_core::gas::GasTable;
//!
//! let table = GasTable::builtin();
//! let n2 = Mixture::pure(table.get("N2").unwrap().clone());
//! let lengths = [NamedLength::new("chamber", 0.3)];
//! let d = derive(&Conditions::new(1e-4, 295.0), &n2, &lengths, &Physics::default());
//! assert!((d.mean_free_path_m - 66.6).abs() < 0.5);
//! assert_eq!(d.lengths[0].regime.as_str(), "molecular");
//! ```

pub mod constants;
pub mod exposure;
pub mod gauge;
pub mod kinetics;
pub mod mixture;
pub mod regime;
pub mod vapour;

use serde::{Deserialize, Serialize};
use std::fmt;

use crate::gas::Gas;
use constants::molecular_mass;
use gauge::{CalibrationTable, GaugeKind, Response, TableFit};
use mixture::Mixture;
use regime::{FlowRegime, IsoEdition, RegimeBounds, VacuumRange};

/// How the collision diameter depends on temperature.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Model {
    /// Fixed diameter, the table's value at its reference temperature.
    HardSphere,
    /// Sutherland's d(T)² = d_ref² (1 + S/T)/(1 + S/T_ref).
    #[default]
    Sutherland,
}

impl Model {
    /// The word used on the command line and in configs.
    pub fn as_str(self) -> &'static str {
        match self {
            Model::HardSphere => "hard-sphere",
            Model::Sutherland => "sutherland",
        }
    }
}

impl fmt::Display for Model {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Default adsorption-site density, 1/m² (common practice, no source).
pub const DEFAULT_SITES_PER_M2: f64 = 1e19;

/// Physics settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Physics {
    /// Diameter model.
    pub model: Model,
    /// Knudsen bounds of the flow regimes.
    pub bounds: RegimeBounds,
    /// ISO 3529-1 edition for the vacuum ranges.
    pub edition: IsoEdition,
    /// Adsorption sites per m² for the monolayer time.
    pub sites_per_m2: f64,
    /// Sticking coefficient, 0 < s ≤ 1.
    pub sticking: f64,
    /// When a monitored gauge's exposure starts counting.
    pub exposure_start: exposure::ExposureStart,
}

impl Default for Physics {
    fn default() -> Self {
        Physics {
            model: Model::default(),
            bounds: RegimeBounds::default(),
            edition: IsoEdition::default(),
            sites_per_m2: DEFAULT_SITES_PER_M2,
            sticking: 1.0,
            exposure_start: exposure::ExposureStart::default(),
        }
    }
}

/// A named length for Knudsen numbers (chamber bore, pumping line, source to
/// substrate distance …).
#[derive(Debug, Clone, PartialEq)]
pub struct NamedLength {
    /// Name shown in output.
    pub name: String,
    /// Length, m.
    pub length_m: f64,
}

impl NamedLength {
    /// A named length in metres.
    pub fn new(name: impl Into<String>, length_m: f64) -> Self {
        NamedLength {
            name: name.into(),
            length_m,
        }
    }
}

/// The state of the gas: true pressure and temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Conditions {
    /// Pa (after any gauge correction).
    pub pressure_pa: f64,
    /// K.
    pub temperature_k: f64,
}

impl Conditions {
    /// Pressure in Pa, temperature in K.
    pub fn new(pressure_pa: f64, temperature_k: f64) -> Self {
        Conditions {
            pressure_pa,
            temperature_k,
        }
    }
}

/// Something the user should know about a result: an input outside a model's
/// validity, an extrapolation, an assumption.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Warning {
    /// Stable machine-readable code, e.g. `temperature-outside-fit`.
    pub code: &'static str,
    /// Human text.
    pub message: String,
}

impl Warning {
    fn new(code: &'static str, message: String) -> Self {
        Warning { code, message }
    }
}

impl fmt::Display for Warning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

/// Derived quantities of one species.
#[derive(Debug, PartialEq, Serialize)]
pub struct SpeciesDerived {
    /// Gas id.
    pub gas: String,
    /// Mole fraction.
    pub fraction: f64,
    /// Partial pressure, Pa.
    pub partial_pressure_pa: f64,
    /// Number density, 1/m³.
    pub number_density_per_m3: f64,
    /// Mean speed, m/s.
    pub mean_speed_m_per_s: f64,
    /// Collision diameter used, m.
    pub diameter_m: f64,
    /// Mean free path of this species among all, m.
    pub mean_free_path_m: f64,
    /// Wall impingement rate, 1/(m² s).
    pub impingement_per_m2_s: f64,
    /// Time to a monolayer from this species alone, s.
    pub monolayer_time_s: f64,
}

/// Knudsen number and regime for one named length.
#[derive(Debug, PartialEq, Serialize)]
pub struct LengthDerived {
    /// Name.
    pub name: String,
    /// Length, m.
    pub length_m: f64,
    /// Kn = λ/L.
    pub knudsen: f64,
    /// Flow regime.
    pub regime: FlowRegime,
}

// `clone_from` keeps the name's buffer: the engine refreshes its results
// in place on every reading (`Precomputed::derive_into`) without
// allocating.
impl Clone for SpeciesDerived {
    fn clone(&self) -> Self {
        SpeciesDerived {
            gas: self.gas.clone(),
            ..*self
        }
    }

    fn clone_from(&mut self, source: &Self) {
        let mut gas = std::mem::take(&mut self.gas);
        gas.clone_from(&source.gas);
        *self = SpeciesDerived {
            gas: String::new(),
            ..*source
        };
        self.gas = gas;
    }
}

impl Clone for LengthDerived {
    fn clone(&self) -> Self {
        LengthDerived {
            name: self.name.clone(),
            ..*self
        }
    }

    fn clone_from(&mut self, source: &Self) {
        self.name.clone_from(&source.name);
        self.length_m = source.length_m;
        self.knudsen = source.knudsen;
        self.regime = source.regime;
    }
}

/// Everything the engine derives from one state of the gas.
#[derive(Debug, PartialEq, Serialize)]
pub struct Derived {
    /// Total number density, 1/m³.
    pub number_density_per_m3: f64,
    /// Mean speed over all molecules (Σ x_i v̄_i), m/s.
    pub mean_speed_m_per_s: f64,
    /// Most probable speed: the mode of the mixture's speed distribution
    /// (the number-weighted sum of the species' Maxwell–Boltzmann
    /// distributions), m/s.
    pub most_probable_speed_m_per_s: f64,
    /// RMS speed over all molecules (√Σ x_i v²_rms,i), m/s.
    pub rms_speed_m_per_s: f64,
    /// Mean free path; for a mixture the mole-fraction-weighted mean of the
    /// species values, m.
    pub mean_free_path_m: f64,
    /// Total wall impingement rate (sum over species), 1/(m² s).
    pub impingement_per_m2_s: f64,
    /// Time to a monolayer from all species, s.
    pub monolayer_time_s: f64,
    /// ISO 3529-1 vacuum range.
    pub vacuum_range: VacuumRange,
    /// Per species.
    pub species: Vec<SpeciesDerived>,
    /// Per named length.
    pub lengths: Vec<LengthDerived>,
    /// Inputs outside a model's validity, and the like.
    pub warnings: Vec<Warning>,
}

// `clone_from` reuses the lists' allocations (and their entries' names):
// the monitor copies a track's result into the same buffer on every row
// that may change the gas.
impl Clone for Derived {
    fn clone(&self) -> Self {
        Derived {
            species: self.species.clone(),
            lengths: self.lengths.clone(),
            warnings: self.warnings.clone(),
            ..*self
        }
    }

    fn clone_from(&mut self, source: &Self) {
        // Every field named: a new one must be decided here.
        let Derived {
            number_density_per_m3,
            mean_speed_m_per_s,
            most_probable_speed_m_per_s,
            rms_speed_m_per_s,
            mean_free_path_m,
            impingement_per_m2_s,
            monolayer_time_s,
            vacuum_range,
            species,
            lengths,
            warnings,
        } = source;
        self.number_density_per_m3 = *number_density_per_m3;
        self.mean_speed_m_per_s = *mean_speed_m_per_s;
        self.most_probable_speed_m_per_s = *most_probable_speed_m_per_s;
        self.rms_speed_m_per_s = *rms_speed_m_per_s;
        self.mean_free_path_m = *mean_free_path_m;
        self.impingement_per_m2_s = *impingement_per_m2_s;
        self.monolayer_time_s = *monolayer_time_s;
        self.vacuum_range = *vacuum_range;
        self.species.clone_from(species);
        self.lengths.clone_from(lengths);
        self.warnings.clone_from(warnings);
    }
}

/// How far (relative, in λ) a fixed diameter may be from the Sutherland one
/// before the hard-sphere model is flagged: 5 % (common practice, no source).
pub const HARD_SPHERE_TOLERANCE: f64 = 0.05;

/// Collision diameter of `gas` at `t_k` under `model`, with a warning when the
/// temperature is outside the range the diameter was fitted over, and when a
/// fixed (hard-sphere) diameter of a gas with a known Sutherland constant is
/// used so far from its reference temperature that the mean free path is off
/// by more than [`HARD_SPHERE_TOLERANCE`].
pub fn diameter(gas: &Gas, model: Model, t_k: f64, warnings: &mut Vec<Warning>) -> f64 {
    let (lo, hi) = gas.fit_range_k;
    if !(lo..=hi).contains(&t_k) {
        warnings.push(Warning::new(
            "temperature-outside-fit",
            format!(
                "{t:.1} K is outside {lo:.2}-{hi:.0} K, where the {} diameter of {} was fitted; \
                 its mean free path is extrapolated",
                model.as_str(),
                gas.id,
                t = t_k
            ),
        ));
    }
    match (model, gas.sutherland_k) {
        (Model::HardSphere, Some(s)) => {
            // λ_hs/λ_sutherland = d_S(T)²/d_ref² = (1 + S/T)/(1 + S/T_ref).
            let ratio = (1.0 + s / t_k) / (1.0 + s / gas.reference_temperature_k);
            if (ratio - 1.0).abs() > HARD_SPHERE_TOLERANCE {
                let (how, pct) = if ratio < 1.0 {
                    ("shorter", (1.0 - ratio) * 100.0)
                } else {
                    ("longer", (ratio - 1.0) * 100.0)
                };
                warnings.push(Warning::new(
                    "hard-sphere-far-from-reference",
                    format!(
                        "the hard-sphere diameter of {} is its value at {:.2} K; at {t_k:.1} K \
                         its Sutherland constant ({s:.0} K) puts the mean free path {pct:.0} % \
                         {how} than shown (use the sutherland model)",
                        gas.id, gas.reference_temperature_k
                    ),
                ));
            }
            gas.diameter_m
        }
        (Model::HardSphere, None) => gas.diameter_m,
        (Model::Sutherland, Some(s)) => {
            kinetics::sutherland_diameter(gas.diameter_m, gas.reference_temperature_k, s, t_k)
        }
        (Model::Sutherland, None) => {
            warnings.push(Warning::new(
                "no-sutherland-constant",
                format!(
                    "{} has no Sutherland constant; its diameter is held fixed (hard-sphere)",
                    gas.id
                ),
            ));
            gas.diameter_m
        }
    }
}

/// `n` pairs, in `small` when they fit, else in `large`.
fn slots<'a>(
    small: &'a mut [(f64, f64); 8],
    large: &'a mut Vec<(f64, f64)>,
    n: usize,
) -> &'a mut [(f64, f64)] {
    if n <= small.len() {
        &mut small[..n]
    } else {
        large.resize(n, (0.0, 0.0));
        large
    }
}

/// Derives every quantity for a gas or mixture in the given state.
///
/// Mixtures (per species i, over species j):
/// λ_i = 1 / Σ_j n_j π d_ij² √(1 + m_i/m_j), d_ij = (d_i + d_j)/2;
/// Φ_i = p_i/√(2π m_i k_B T); τ = N_s/(s Σ Φ_i).
///
/// The same as [`Precomputed::new`] at the temperature, then
/// [`Precomputed::derive`] at the pressure.
pub fn derive(
    conditions: &Conditions,
    mixture: &Mixture,
    lengths: &[NamedLength],
    physics: &Physics,
) -> Derived {
    Precomputed::new(conditions.temperature_k, mixture, lengths, physics)
        .derive(conditions.pressure_pa)
}

/// The kinetics of one gas or mixture at one temperature, worked out once
/// at 1 Pa. At a fixed temperature every quantity is a power of the
/// pressure: n, p_i and Φ grow as p; λ and τ as 1/p; the speeds not at all.
/// So a reading costs a few multiplications (and the range, regime and
/// pressure warnings), not a new derivation: what the monitor does on every
/// reading.
#[derive(Debug, Clone, PartialEq)]
pub struct Precomputed {
    temperature_k: f64,
    /// Everything at 1 Pa; its warnings are those that do not depend on the
    /// pressure.
    unit: Derived,
    /// Per species with a saturation vapour pressure: (index, gas id,
    /// saturation pressure Pa, its source).
    saturation: Vec<(usize, String, f64, &'static str)>,
    bounds: RegimeBounds,
    edition: IsoEdition,
    /// Shared by every kinetics scaled from one another with the same
    /// lengths and physics: they classify the same way
    /// ([`Precomputed::same_classes`] without comparing them).
    classes: std::sync::Arc<()>,
}

impl Precomputed {
    /// The kinetics of `mixture` at `t_k` for these lengths and physics.
    pub fn new(t_k: f64, mixture: &Mixture, lengths: &[NamedLength], physics: &Physics) -> Self {
        Self::build(t_k, mixture, lengths, physics, None, None)
    }

    /// The kinetics of the same `mixture` (and lengths and physics) as
    /// `self`, at another temperature. The mixture's most probable speed,
    /// a numerical search over its speed distribution, is not searched
    /// again: every term of the distribution depends on v only through
    /// m·v²/(2 k_B T), so its mode grows exactly as √T.
    pub fn at_temperature(
        &self,
        t_k: f64,
        mixture: &Mixture,
        lengths: &[NamedLength],
        physics: &Physics,
    ) -> Self {
        let mode = self.unit.most_probable_speed_m_per_s * (t_k / self.temperature_k).sqrt();
        let same_classes = self.edition == physics.edition
            && self.bounds == physics.bounds
            && self.unit.lengths.len() == lengths.len()
            && self
                .unit
                .lengths
                .iter()
                .zip(lengths)
                .all(|(a, b)| a.length_m.to_bits() == b.length_m.to_bits() && a.name == b.name);
        Self::build(
            t_k,
            mixture,
            lengths,
            physics,
            Some(mode).filter(|m| m.is_finite()),
            same_classes.then(|| std::sync::Arc::clone(&self.classes)),
        )
    }

    fn build(
        t_k: f64,
        mixture: &Mixture,
        lengths: &[NamedLength],
        physics: &Physics,
        mode: Option<f64>,
        classes: Option<std::sync::Arc<()>>,
    ) -> Self {
        let t = t_k;
        let mut warnings = Vec::new();
        let n_unit = kinetics::number_density(1.0, t);
        let comps = mixture.components();
        // Per species, on the stack for up to eight (worked out again at
        // every new temperature a monitor meets).
        let (mut small, mut large) = ([(0.0, 0.0); 8], Vec::new());
        let per_species = slots(&mut small, &mut large, comps.len());
        for (slot, c) in per_species.iter_mut().zip(comps) {
            *slot = (
                molecular_mass(c.gas.molar_mass_g_mol),
                diameter(&c.gas, physics.model, t, &mut warnings),
            );
        }
        let per_species = &*per_species;
        let mass = |i: usize| per_species[i].0;
        let dia = |i: usize| per_species[i].1;
        let mut saturation = Vec::new();
        let mut species = Vec::with_capacity(comps.len());
        for (i, c) in comps.iter().enumerate() {
            let inv_mfp: f64 = comps
                .iter()
                .enumerate()
                .map(|(j, cj)| {
                    let d_ij = 0.5 * (dia(i) + dia(j));
                    n_unit
                        * cj.fraction
                        * std::f64::consts::PI
                        * d_ij
                        * d_ij
                        * (1.0 + mass(i) / mass(j)).sqrt()
                })
                .sum();
            if let Some(sat) = vapour::saturation(&c.gas.id, t) {
                saturation.push((i, c.gas.id.clone(), sat.pressure_pa, sat.source));
            }
            let phi = kinetics::impingement_rate(c.fraction, t, mass(i));
            species.push(SpeciesDerived {
                gas: c.gas.id.clone(),
                fraction: c.fraction,
                partial_pressure_pa: c.fraction,
                number_density_per_m3: n_unit * c.fraction,
                mean_speed_m_per_s: kinetics::mean_speed(t, mass(i)),
                diameter_m: dia(i),
                mean_free_path_m: 1.0 / inv_mfp,
                impingement_per_m2_s: phi,
                monolayer_time_s: kinetics::monolayer_time(
                    physics.sites_per_m2,
                    physics.sticking,
                    phi,
                ),
            });
        }
        let weighted = |f: &dyn Fn(usize, &SpeciesDerived) -> f64| -> f64 {
            species
                .iter()
                .enumerate()
                .map(|(i, s)| s.fraction * f(i, s))
                .sum()
        };
        let mean_free_path_m = weighted(&|_, s| s.mean_free_path_m);
        let mean_speed = weighted(&|_, s| s.mean_speed_m_per_s);
        let rms_sq = weighted(&|i, _| kinetics::rms_speed(t, mass(i)).powi(2));
        let impingement: f64 = species.iter().map(|s| s.impingement_per_m2_s).sum();
        let lengths = lengths
            .iter()
            .map(|l| LengthDerived {
                name: l.name.clone(),
                length_m: l.length_m,
                knudsen: regime::knudsen(mean_free_path_m, l.length_m),
                regime: physics
                    .bounds
                    .classify(regime::knudsen(mean_free_path_m, l.length_m)),
            })
            .collect();
        Precomputed {
            temperature_k: t,
            unit: Derived {
                number_density_per_m3: n_unit,
                mean_speed_m_per_s: mean_speed,
                most_probable_speed_m_per_s: match mode {
                    // A pure gas's mode is a closed form: no need to scale.
                    Some(m) if comps.len() > 1 => m,
                    _ => {
                        // (number fraction, mass), on the stack as above.
                        let (mut small, mut large) = ([(0.0, 0.0); 8], Vec::new());
                        let by_number = slots(&mut small, &mut large, comps.len());
                        for (i, (slot, c)) in by_number.iter_mut().zip(comps).enumerate() {
                            *slot = (c.fraction, mass(i));
                        }
                        kinetics::mixture_most_probable_speed(t, by_number)
                    }
                },
                rms_speed_m_per_s: rms_sq.sqrt(),
                mean_free_path_m,
                impingement_per_m2_s: impingement,
                monolayer_time_s: kinetics::monolayer_time(
                    physics.sites_per_m2,
                    physics.sticking,
                    impingement,
                ),
                vacuum_range: physics.edition.classify(1.0),
                species,
                lengths,
                warnings,
            },
            saturation,
            bounds: physics.bounds,
            edition: physics.edition,
            classes: classes.unwrap_or_default(),
        }
    }

    /// The temperature it was worked out for, K.
    pub fn temperature_k(&self) -> f64 {
        self.temperature_k
    }

    /// Every quantity at pressure `p` Pa.
    pub fn derive(&self, p: f64) -> Derived {
        let mut d = self.unit.clone();
        self.derive_into(p, &mut d);
        d
    }

    // One quantity at a time, for a reader that needs only some of them
    // (the report's summary, a rule): each is the expression
    // `derive_into` itself uses, so the value is the same bit for bit.

    /// Total number density at pressure `p` Pa, 1/m³.
    #[inline]
    pub fn number_density_per_m3(&self, p: f64) -> f64 {
        self.unit.number_density_per_m3 * p
    }

    /// Mean free path at pressure `p` Pa, m.
    #[inline]
    pub fn mean_free_path_m(&self, p: f64) -> f64 {
        self.unit.mean_free_path_m / p
    }

    /// Total wall impingement rate at pressure `p` Pa, 1/(m² s).
    #[inline]
    pub fn impingement_per_m2_s(&self, p: f64) -> f64 {
        self.unit.impingement_per_m2_s * p
    }

    /// Time to a monolayer at pressure `p` Pa, s.
    #[inline]
    pub fn monolayer_time_s(&self, p: f64) -> f64 {
        self.unit.monolayer_time_s / p
    }

    /// ISO 3529-1 range of pressure `p` Pa.
    #[inline]
    pub fn vacuum_range(&self, p: f64) -> VacuumRange {
        self.edition.classify(p)
    }

    /// The named length `name`'s Knudsen number and flow regime at
    /// pressure `p` Pa; `None` for a name it was not worked out for.
    pub fn length(&self, p: f64, name: &str) -> Option<(f64, FlowRegime)> {
        let unit = self.unit.lengths.iter().find(|l| l.name == name)?;
        let knudsen = regime::knudsen(self.mean_free_path_m(p), unit.length_m);
        Some((knudsen, self.bounds.classify(knudsen)))
    }

    /// Every named length's results at pressure `p` Pa into `out` (as
    /// [`Derived::lengths`], reusing its allocations and names).
    #[inline]
    pub fn lengths_into(&self, p: f64, out: &mut Vec<LengthDerived>) {
        let mean_free_path_m = self.mean_free_path_m(p);
        refresh_each(
            out,
            &self.unit.lengths,
            |l| l.name.as_str(),
            |l, unit| {
                let knudsen = regime::knudsen(mean_free_path_m, unit.length_m);
                *l = LengthDerived {
                    name: std::mem::take(&mut l.name),
                    length_m: unit.length_m,
                    knudsen,
                    regime: self.bounds.classify(knudsen),
                };
            },
        );
    }

    /// Where the range and every length's regime surely stay those at
    /// pressure `p` (a positive number): a reader that wants those alone
    /// may keep them while the readings stay inside (and work out the
    /// Knudsen numbers themselves, one division each). The band may be
    /// empty, and need not hold `p` itself when `p` is next to a regime's
    /// limit.
    pub fn steady_band(&self, p: f64) -> SteadyBand {
        const EMPTY: SteadyBand = SteadyBand::EMPTY;
        let pressure_pa = self.edition.band(p);
        let mean_free_path_m = self.mean_free_path_m(p);
        let (mut lo, mut hi) = (0.0, f64::INFINITY);
        for l in &self.unit.lengths {
            let regime = self
                .bounds
                .classify(regime::knudsen(mean_free_path_m, l.length_m));
            let (l_lo, l_hi) = self.bounds.steady_band(l.length_m, regime);
            // NaN ends make the band empty (`max`/`min` would drop them).
            if l_lo.is_nan() || l_hi.is_nan() {
                return EMPTY;
            }
            lo = f64::max(lo, l_lo);
            hi = f64::min(hi, l_hi);
        }
        if pressure_pa.0.is_nan() || pressure_pa.1.is_nan() {
            return EMPTY;
        }
        SteadyBand {
            pressure_pa,
            mean_free_path_m: (lo, hi),
        }
    }

    /// Whether `other` was scaled from the same kinetics as this (or this
    /// from it, or one from the other) with the same lengths and physics:
    /// the quick answer of [`Precomputed::same_classes`], by pointer.
    #[inline]
    pub fn shares_classes(&self, other: &Precomputed) -> bool {
        std::sync::Arc::ptr_eq(&self.classes, &other.classes)
    }

    /// Whether `other` classifies as this does: the same ISO edition,
    /// regime bounds and named lengths (so a [`SteadyBand`] of one holds
    /// for the other, whatever their gas and temperature).
    pub fn same_classes(&self, other: &Precomputed) -> bool {
        if self.shares_classes(other) {
            return true;
        }
        self.edition == other.edition
            && self.bounds == other.bounds
            && self.unit.lengths.len() == other.unit.lengths.len()
            && self
                .unit
                .lengths
                .iter()
                .zip(&other.unit.lengths)
                .all(|(a, b)| a.length_m.to_bits() == b.length_m.to_bits() && a.name == b.name)
    }

    /// [`Precomputed::derive`] into `out`, reusing its allocations (it may
    /// hold an earlier result of any gas).
    pub fn derive_into(&self, p: f64, out: &mut Derived) {
        let u = &self.unit;
        out.number_density_per_m3 = self.number_density_per_m3(p);
        out.mean_speed_m_per_s = u.mean_speed_m_per_s;
        out.most_probable_speed_m_per_s = u.most_probable_speed_m_per_s;
        out.rms_speed_m_per_s = u.rms_speed_m_per_s;
        out.mean_free_path_m = self.mean_free_path_m(p);
        out.impingement_per_m2_s = self.impingement_per_m2_s(p);
        out.monolayer_time_s = self.monolayer_time_s(p);
        out.vacuum_range = self.vacuum_range(p);
        refresh_each(
            &mut out.species,
            &u.species,
            |s| s.gas.as_str(),
            |s, unit| {
                // Every field named: a new one must be decided here.
                *s = SpeciesDerived {
                    gas: std::mem::take(&mut s.gas),
                    fraction: unit.fraction,
                    mean_speed_m_per_s: unit.mean_speed_m_per_s,
                    diameter_m: unit.diameter_m,
                    partial_pressure_pa: unit.partial_pressure_pa * p,
                    number_density_per_m3: unit.number_density_per_m3 * p,
                    mean_free_path_m: unit.mean_free_path_m / p,
                    impingement_per_m2_s: unit.impingement_per_m2_s * p,
                    monolayer_time_s: unit.monolayer_time_s / p,
                };
            },
        );
        self.lengths_into(p, &mut out.lengths);
        out.warnings.clear();
        if p > regime::ABOVE_ATMOSPHERIC_PA {
            out.warnings.push(Warning::new(
                "above-atmospheric",
                format!("{p:.3e} Pa is above atmospheric pressure: not a vacuum"),
            ));
        }
        out.warnings.extend(u.warnings.iter().cloned());
        let t = self.temperature_k;
        for (i, gas, sat, source) in &self.saturation {
            let p_i = out.species.get(*i).map_or(0.0, |s| s.partial_pressure_pa);
            if p_i > *sat {
                out.warnings.push(Warning::new(
                    "above-saturation",
                    format!(
                        "{gas} partial pressure {p_i:.3e} Pa is above its saturation vapour \
                         pressure {sat:.3e} Pa at {t:.2} K ({source}): it condenses on surfaces \
                         at this temperature, and the numbers shown assume it stays a gas"
                    ),
                ));
            }
        }
    }
}

/// Where a reading's range and flow regimes surely stay as they are
/// ([`Precomputed::steady_band`]): pressures `[lo, hi)`, Pa, and mean free
/// paths `[lo, hi)`, m.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SteadyBand {
    /// The pressures of the range.
    pub pressure_pa: (f64, f64),
    /// The mean free paths of every length's regime.
    pub mean_free_path_m: (f64, f64),
}

impl SteadyBand {
    /// A band that holds nothing.
    pub const EMPTY: SteadyBand = SteadyBand {
        pressure_pa: (f64::NAN, f64::NAN),
        mean_free_path_m: (f64::NAN, f64::NAN),
    };

    /// Whether a reading at `pressure_pa` with mean free path
    /// `mean_free_path_m` is inside.
    #[inline]
    pub fn holds(&self, pressure_pa: f64, mean_free_path_m: f64) -> bool {
        let inside = |(lo, hi): (f64, f64), x: f64| lo <= x && x < hi;
        inside(self.pressure_pa, pressure_pa) && inside(self.mean_free_path_m, mean_free_path_m)
    }
}

/// Makes `out` as long as `units`, each entry refreshed by `fill` from its
/// unit, reusing what `out` holds: an entry's name is compared, and copied
/// (into its buffer) only when it differs, as when the gas changes. The
/// engine does this on every reading.
#[inline]
fn refresh_each<T: Clone>(
    out: &mut Vec<T>,
    units: &[T],
    name: fn(&T) -> &str,
    mut fill: impl FnMut(&mut T, &T),
) {
    out.truncate(units.len());
    for (i, unit) in units.iter().enumerate() {
        match out.get_mut(i) {
            Some(o) if crate::sample::same_id(name(o), name(unit)) => {}
            Some(o) => o.clone_from(unit),
            None => out.push(unit.clone()),
        }
        fill(&mut out[i], unit);
    }
}

/// Upper end of a thermal gauge's linear range, true pressure, Pa (about
/// 1 mbar; common practice, no source).
pub const THERMAL_LINEAR_BELOW_PA: f64 = 100.0;

/// What stops a gauge's reading from being corrected for the gas.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum GaugeError {
    /// A gas in the mixture has no sensitivity for this gauge element.
    #[error(
        "no {element} gauge sensitivity is known for {gas}; give one (reading / true pressure, relative to N2) or a calibration table"
    )]
    NoSensitivity {
        /// Gauge element.
        element: GaugeKind,
        /// Gas id.
        gas: String,
    },
    /// A user sensitivity that is not a positive number.
    #[error("gauge sensitivity must be a positive number, got {0}")]
    BadSensitivity(f64),
}

/// A gauge set up for the chamber's gas: how to turn its readings into true
/// pressure, and the range it can be trusted in.
#[derive(Debug, Clone, PartialEq)]
pub struct GaugeModel {
    /// Kind of gauge.
    pub kind: GaugeKind,
    /// Response of the ionization element (ionization and combined gauges).
    ionization: Response,
    /// Response of the thermal element (thermal and combined gauges).
    thermal: Response,
    /// Range in which readings are trusted, Pa (low, high).
    pub range_pa: Option<(f64, f64)>,
}

/// Overrides for a gauge's gas response.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct GaugeOverrides {
    /// Sensitivity of the ionization element (or of a thermal gauge's only
    /// element), replacing the table's.
    pub sensitivity: Option<f64>,
    /// Sensitivity of a combined gauge's thermal element.
    pub thermal_sensitivity: Option<f64>,
    /// A calibration table replacing any factor.
    pub table: Option<CalibrationTable>,
    /// Trusted range, Pa, replacing the kind's typical range.
    pub range_pa: Option<(f64, f64)>,
}

/// A reading corrected for the gas.
#[derive(Debug, Clone, PartialEq)]
pub struct Corrected {
    /// True pressure, Pa.
    pub pressure_pa: f64,
    /// Sensitivity factor applied (1 for a direct reading), or `None` for a
    /// calibration table.
    pub sensitivity: Option<f64>,
    /// Range and extrapolation warnings.
    pub warnings: Vec<Warning>,
}

impl GaugeModel {
    /// Resolves a gauge's response for `mixture` from the gas table and the
    /// overrides.
    pub fn new(
        kind: GaugeKind,
        mixture: &Mixture,
        overrides: &GaugeOverrides,
    ) -> Result<Self, GaugeError> {
        for s in [overrides.sensitivity, overrides.thermal_sensitivity]
            .into_iter()
            .flatten()
        {
            if !(s.is_finite() && s > 0.0) {
                return Err(GaugeError::BadSensitivity(s));
            }
        }
        let factor = |element: GaugeKind, user: Option<f64>| -> Result<Response, GaugeError> {
            if let Some(table) = &overrides.table {
                return Ok(Response::Table(table.clone()));
            }
            if let Some(s) = user {
                return Ok(Response::Sensitivity(s));
            }
            let parts = mixture
                .components()
                .iter()
                .map(|c| {
                    let s = match element {
                        GaugeKind::Ionization => c.gas.ion_sensitivity,
                        _ => c.gas.thermal_sensitivity,
                    };
                    s.map(|s| (c.fraction, s))
                        .ok_or_else(|| GaugeError::NoSensitivity {
                            element,
                            gas: c.gas.id.clone(),
                        })
                })
                .collect::<Result<Vec<_>, _>>()?;
            Ok(Response::Sensitivity(gauge::mixture_sensitivity(parts)))
        };
        let (ionization, thermal) = match kind {
            GaugeKind::Capacitance => (Response::Direct, Response::Direct),
            GaugeKind::Ionization => {
                let r = factor(GaugeKind::Ionization, overrides.sensitivity)?;
                (r.clone(), r)
            }
            GaugeKind::Thermal => {
                let r = factor(GaugeKind::Thermal, overrides.sensitivity)?;
                (r.clone(), r)
            }
            // Each element of a combined gauge reads its own decades: a gas
            // with no factor for one element still has corrected readings
            // from the other.
            GaugeKind::Combined => {
                let ion = factor(GaugeKind::Ionization, overrides.sensitivity);
                let thermal = factor(GaugeKind::Thermal, overrides.thermal_sensitivity);
                match (ion, thermal) {
                    (Err(e), Err(_)) => return Err(e),
                    (ion, thermal) => (
                        ion.unwrap_or_else(Response::Missing),
                        thermal.unwrap_or_else(Response::Missing),
                    ),
                }
            }
        };
        Ok(GaugeModel {
            kind,
            ionization,
            thermal,
            range_pa: overrides.range_pa.or(kind.typical_range_pa()),
        })
    }

    /// Why one element of a combined gauge has no correction, if so. A
    /// monitored gauge needs both (a config refuses it); a single reading
    /// needs only the element that reads it.
    pub fn missing(&self) -> Option<&GaugeError> {
        [&self.ionization, &self.thermal]
            .into_iter()
            .find_map(|r| match r {
                Response::Missing(e) => Some(e),
                _ => None,
            })
    }

    /// The true pressure of an indicated reading, as [`GaugeModel::correct`]
    /// gives it, without working out its warnings (what the monitor needs
    /// on every reading).
    pub fn true_pressure(&self, indicated_pa: f64) -> f64 {
        self.response(indicated_pa).correct(indicated_pa).0
    }

    /// The response of the element that reads `indicated_pa`.
    fn response(&self, indicated_pa: f64) -> &Response {
        match self.kind.element(indicated_pa) {
            GaugeKind::Ionization => &self.ionization,
            _ => &self.thermal,
        }
    }

    /// Corrects an indicated reading, flagging one outside the gauge's range
    /// or outside its calibration table. A reading from a combined gauge's
    /// element with no factor comes back as NaN with a `no-gauge-sensitivity`
    /// warning: a number that cannot be corrected is never passed off as one.
    pub fn correct(&self, indicated_pa: f64) -> Corrected {
        let mut warnings = Vec::new();
        let pressure_pa = self.true_pressure(indicated_pa);
        if let Some((lo, hi)) = self.range_pa
            && !(lo..=hi).contains(&indicated_pa)
        {
            let source = if self.range_pa == self.kind.typical_range_pa() {
                "the usual range of a"
            } else {
                "the configured range of this"
            };
            warnings.push(Warning::new(
                "gauge-out-of-range",
                format!(
                    "reading {indicated_pa:.3e} Pa is outside {source} {} gauge ({lo:.0e}-{hi:.1e} Pa)",
                    self.kind
                ),
            ));
        }
        let response = self.response(indicated_pa);
        let (_, fit) = response.correct(indicated_pa);
        if let TableFit::Extrapolated { min_pa, max_pa } = fit {
            warnings.push(Warning::new(
                "calibration-extrapolated",
                format!(
                    "reading {indicated_pa:.3e} Pa is outside the calibration table \
                     ({min_pa:.3e}-{max_pa:.3e} Pa); the end segment was extended"
                ),
            ));
        }
        if let Response::Missing(e) = response {
            warnings.push(Warning::new(
                "no-gauge-sensitivity",
                format!(
                    "reading {indicated_pa:.3e} Pa comes from the {} element: {e}",
                    self.kind.element(indicated_pa)
                ),
            ));
        }
        // Linearity is a property of the true pressure in the gauge, not of
        // the N2-equivalent number it shows.
        if self.kind.element(indicated_pa) == GaugeKind::Thermal
            && let Response::Sensitivity(s) = response
            && *s != 1.0
            && pressure_pa > THERMAL_LINEAR_BELOW_PA
        {
            warnings.push(Warning::new(
                "thermal-factor-nonlinear",
                format!(
                    "true pressure {pressure_pa:.3e} Pa: a constant gas factor for a thermal \
                     gauge holds only in its linear range (below about 1 mbar); above, use a \
                     calibration table"
                ),
            ));
        }
        let sensitivity = match response {
            Response::Direct => Some(1.0),
            Response::Sensitivity(s) => Some(*s),
            Response::Table(_) | Response::Missing(_) => None,
        };
        Corrected {
            pressure_pa,
            sensitivity,
            warnings,
        }
    }
}

#[cfg(test)]
mod tests;
