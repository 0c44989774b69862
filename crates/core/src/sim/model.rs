//! The chamber's physics: gas balance per species, pumps and their lines,
//! valves, gas loads and wall temperature.
//!
//! Each species i obeys V dp_i/dt = Q_i − S_i p_i, where Q_i collects every
//! source (outgassing, leaks, back-flow, vent and process inflow) and S_i
//! every sink (pumps through their lines, wall re-adsorption, the vent and
//! leak terms written as conductances). Over one sub-step both are held
//! constant and the equation is solved exactly,
//!
//! p(t+dt) = p·e^(−x) + (Q dt/V)·(1 − e^(−x))/x,   x = S dt/V,
//!
//! which is stable for any step and any stiffness, so the same code runs from
//! atmosphere to 1e-11 mbar.
//!
//! Numbers marked "from memory" or "common practice, no source" are typical
//! values for a small unbaked stainless-steel chamber, not measurements.

use crate::engine::constants::{K_B, N_A, molecular_mass};
use crate::engine::kinetics::mean_speed;
use crate::gas::GasTable;
use crate::units::{ATM_PA, ZERO_CELSIUS_K};

/// Molar gas constant R = k_B N_A, J/(mol·K).
pub const R_GAS: f64 = K_B * N_A;

/// Number of gas species the model tracks.
pub const N_SPECIES: usize = 5;

/// A gas species in the simulated chamber.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Species {
    /// Atmospheric air (N2-like), from leaks, permeation and the vent.
    Air,
    /// Water vapour, desorbing from the walls.
    H2O,
    /// Argon, the process gas.
    Ar,
    /// Helium, the leak-test gas.
    He,
    /// Hydrogen, diffusing out of the steel.
    H2,
}

impl Species {
    /// Every species, in the order of [`Truth::partial_pa`](super::Truth::partial_pa).
    pub const ALL: [Species; N_SPECIES] = [
        Species::Air,
        Species::H2O,
        Species::Ar,
        Species::He,
        Species::H2,
    ];

    /// The species' id in the gas table (`air`, `H2O`, `Ar`, `He`, `H2`).
    pub fn id(self) -> &'static str {
        match self {
            Species::Air => "air",
            Species::H2O => "H2O",
            Species::Ar => "Ar",
            Species::He => "He",
            Species::H2 => "H2",
        }
    }

    /// Position in per-species arrays.
    pub fn index(self) -> usize {
        self as usize
    }

    /// Molar mass used when the gas table lacks the species, g/mol (the
    /// table's own values, repeated).
    fn fallback_molar_mass(self) -> f64 {
        match self {
            Species::Air => 28.96546,
            Species::H2O => 18.01528,
            Species::Ar => 39.948,
            Species::He => 4.002602,
            Species::H2 => 2.01588,
        }
    }
}

const AIR: usize = 0;
const H2O: usize = 1;
const AR: usize = 2;
const HE: usize = 3;
const H2: usize = 4;

/// Dynamic viscosity used for viscous conductance, Pa·s (air near 22 °C,
/// from memory; the same value is used for every species).
const VISCOSITY_PA_S: f64 = 1.8e-5;
/// Ratio below which flow through an orifice is choked (air, γ = 1.4:
/// (2/(γ+1))^(γ/(γ−1)) ≈ 0.528).
const CHOKED_RATIO: f64 = 0.528;

/// A round tube: diameter and length, m.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tube {
    /// Inner diameter, m.
    pub d_m: f64,
    /// Length, m.
    pub l_m: f64,
}

impl Tube {
    /// Conductance, m³/s, as the sum of the viscous (Poiseuille) and the
    /// molecular terms, a common interpolation across the transitional range:
    ///
    /// C = π d⁴ p̄/(128 η l) + (π d²/4)(v̄/4)/(1 + 3l/(4d)).
    ///
    /// The molecular term is the orifice conductance times an approximate
    /// transmission probability 1/(1 + 3l/(4d)) (common practice, no source).
    pub fn conductance(self, p_mean_pa: f64, mean_speed_m_s: f64) -> f64 {
        let d = self.d_m;
        let l = self.l_m.max(1e-6);
        let visc =
            std::f64::consts::PI * d.powi(4) * p_mean_pa.max(0.0) / (128.0 * VISCOSITY_PA_S * l);
        let area = std::f64::consts::PI * d * d / 4.0;
        let mol = area * mean_speed_m_s / 4.0 / (1.0 + 3.0 * l / (4.0 * d));
        visc + mol
    }
}

/// Series combination 1/S = 1/a + 1/b, zero when either is zero.
fn series(a: f64, b: f64) -> f64 {
    if a <= 0.0 || b <= 0.0 {
        0.0
    } else {
        a * b / (a + b)
    }
}

/// A virtual leak: a trapped volume draining through a small conductance.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct VirtualLeak {
    /// Trapped volume, m³.
    pub volume_m3: f64,
    /// Molecular conductance for air at the reference temperature, m³/s.
    pub conductance_air_m3_s: f64,
}

/// Fixed properties of the chamber, its pumps and its loads.
#[derive(Debug, Clone, PartialEq)]
pub struct Plant {
    /// Chamber volume, m³.
    pub volume_m3: f64,
    /// Inner surface, m².
    pub area_m2: f64,
    /// Room temperature, K.
    pub ambient_k: f64,
    /// Molar masses, g/mol, per species (from the gas table).
    pub molar_mass: [f64; N_SPECIES],

    /// Roughing pump nominal speed, m³/s.
    pub rough_speed_m3_s: f64,
    /// Roughing pump ultimate pressure, Pa.
    pub rough_ultimate_pa: f64,
    /// Line between chamber and roughing pump.
    pub rough_line: Tube,

    /// High-vacuum pump nominal speed for N2, m³/s.
    pub turbo_speed_m3_s: f64,
    /// Relative high-vacuum pump speed per species.
    pub turbo_factor: [f64; N_SPECIES],
    /// Inlet pressure above which the high-vacuum pump's speed falls, Pa.
    pub turbo_knee_pa: f64,
    /// Time for the rotor to reach full speed, s.
    pub turbo_spin_up_s: f64,
    /// Time constant of the rotor coasting down, s.
    pub turbo_coast_s: f64,
    /// Gate valve and spool between chamber and high-vacuum pump.
    pub gate_line: Tube,
    /// The gate valve opens only below this chamber pressure, Pa.
    pub crossover_pa: f64,

    /// Vent inflow when choked, Pa·m³/s.
    pub vent_choked_pa_m3_s: f64,
    /// Mole fractions of the vent gas per species.
    pub vent_gas: [f64; N_SPECIES],

    /// Real leak throughput of air from atmosphere into vacuum, Pa·m³/s.
    pub leak_pa_m3_s: f64,
    /// Permeation of air through elastomer seals at `ambient_k`, Pa·m³/s.
    pub permeation_pa_m3_s: f64,
    /// Activation energy of permeation through the seals, J/mol.
    pub permeation_activation_j_mol: f64,
    /// Trapped volume behind a small gap, if any.
    pub virtual_leak: Option<VirtualLeak>,

    /// Water on the walls: amount per unit of ln τ, Pa·m³ (at the reference
    /// temperature). With a log-uniform spread of residence times this gives
    /// the outgassing rate Q(t) = n/t.
    pub water_per_ln_tau_pa_m3: f64,
    /// Residence times at `ambient_k` of the water site classes, s.
    pub water_tau_s: Vec<f64>,
    /// Desorption attempt time τ₀ in τ = τ₀ exp(E/(R T)), s.
    pub water_tau0_s: f64,
    /// Effective sticking probability of water re-adsorbing on the walls.
    pub water_sticking: f64,

    /// Hydrogen outgassing from the steel at `ambient_k`, Pa·m³/s.
    pub h2_pa_m3_s: f64,
    /// Activation energy of hydrogen diffusion in steel, J/mol.
    pub h2_activation_j_mol: f64,
    /// Rate at which a bake at `h2_deplete_at_k` depletes the near-surface
    /// hydrogen, 1/s.
    pub h2_deplete_per_s: f64,
    /// Temperature for `h2_deplete_per_s`, K.
    pub h2_deplete_at_k: f64,

    /// Process-gas flow controller full scale, Pa·m³/s.
    pub mfc_max_pa_m3_s: f64,
    /// Flow controller response time, s.
    pub mfc_tau_s: f64,
    /// Pressure controller integral time, s.
    pub pressure_loop_tau_s: f64,

    /// Wall heating time constant toward the heater's setpoint, s.
    pub heat_tau_s: f64,
    /// Wall cooling time constant toward room temperature, s.
    pub cool_tau_s: f64,
}

/// One standard cubic centimetre per minute in Pa·m³/s: 101325 Pa × 1e-6 m³
/// / 60 s (reference 0 °C; common practice, no source).
pub const SCCM_PA_M3_S: f64 = ATM_PA * 1e-6 / 60.0;

/// One mbar·L/s in Pa·m³/s.
pub const MBAR_L_S: f64 = 0.1;

impl Plant {
    /// The default chamber: 85 L, 1.6 m² of unbaked stainless steel, a dry
    /// roughing pump and a turbo-type high-vacuum pump behind a DN100 gate.
    pub fn standard() -> Self {
        let table = GasTable::builtin();
        let mut molar_mass = [0.0; N_SPECIES];
        for s in Species::ALL {
            molar_mass[s.index()] = table
                .get(s.id())
                .map(|g| g.molar_mass_g_mol)
                .unwrap_or_else(|_| s.fallback_molar_mass());
        }
        let area_m2 = 1.6;
        // Unbaked stainless steel after 1 h of pumping: about 1e-8 mbar·L/(s·cm²)
        // of mostly water (from memory) = 1e-5 Pa·m³/(s·m²). With Q(t) = n/t,
        // n = q(1 h)·A·3600 s.
        let q_1h = 1e-8 * MBAR_L_S * 1e4;
        let water_per_ln_tau_pa_m3 = q_1h * area_m2 * 3600.0;
        // Site classes with residence times 0.1 s … 1e13 s at room
        // temperature, four per decade.
        let water_tau_s = (0..=56)
            .map(|k| 10f64.powf(-1.0 + k as f64 / 4.0))
            .collect();
        Plant {
            volume_m3: 0.085,
            area_m2,
            ambient_k: ZERO_CELSIUS_K + 22.0,
            molar_mass,

            // 25 m³/h dry pump, ultimate 2e-2 mbar (common practice, no source).
            rough_speed_m3_s: 25.0 / 3600.0,
            rough_ultimate_pa: 2.0,
            rough_line: Tube {
                d_m: 0.040,
                l_m: 1.5,
            },

            // 300 L/s for N2; lighter gases are pumped somewhat slower
            // (common practice, no source).
            turbo_speed_m3_s: 0.300,
            turbo_factor: [1.0, 1.05, 0.95, 0.8, 0.65],
            // Full speed up to ~1e-2 mbar, falling steeply above (common
            // practice, no source).
            turbo_knee_pa: 2.0,
            turbo_spin_up_s: 120.0,
            turbo_coast_s: 1200.0,
            gate_line: Tube {
                d_m: 0.100,
                l_m: 0.15,
            },
            crossover_pa: 10.0,

            // A choked orifice passes about 20 L/s per cm² of air at
            // atmosphere (common practice, no source); vent orifice 0.02 cm².
            vent_choked_pa_m3_s: 20e-3 * 0.02 * ATM_PA,
            // Room air at about 50 % relative humidity, 22 °C: water partial
            // pressure ~1.3 kPa (from memory).
            vent_gas: humid_air(),

            leak_pa_m3_s: 0.0,
            // A handful of elastomer seals, each of order 1e-8 mbar·L/s
            // (from memory), rising several-fold per 50 K (own estimate).
            permeation_pa_m3_s: 5e-8 * MBAR_L_S,
            permeation_activation_j_mol: 30e3,
            virtual_leak: None,

            water_per_ln_tau_pa_m3,
            water_tau_s,
            // Typical vibrational attempt time (from memory).
            water_tau0_s: 1e-13,
            // Own estimate: re-adsorption that lets an isolated chamber's
            // water pressure level off over tens of minutes.
            water_sticking: 3e-7,

            // 1e-12 mbar·L/(s·cm²) for unbaked steel (from memory).
            h2_pa_m3_s: 1e-12 * MBAR_L_S * 1e4 * area_m2,
            // Hydrogen diffusion in austenitic steel, ~50 kJ/mol (from memory).
            h2_activation_j_mol: 50e3,
            // Own estimate: a 10 h bake at 150 °C removes about two thirds of
            // the near-surface hydrogen.
            h2_deplete_per_s: 3e-5,
            h2_deplete_at_k: ZERO_CELSIUS_K + 150.0,

            mfc_max_pa_m3_s: 100.0 * SCCM_PA_M3_S,
            mfc_tau_s: 1.5,
            pressure_loop_tau_s: 8.0,

            heat_tau_s: 900.0,
            cool_tau_s: 5400.0,
        }
    }

    /// Mean molecular speed of a species at temperature `t_k`, m/s.
    pub fn mean_speed(&self, i: usize, t_k: f64) -> f64 {
        mean_speed(t_k, molecular_mass(self.molar_mass[i]))
    }

    /// Amount of water the walls hold when every site is filled, Pa·m³.
    pub fn water_capacity(&self) -> Vec<f64> {
        // Each class spans Δln τ = ln 10 / 4.
        let width = std::f64::consts::LN_10 / 4.0;
        vec![self.water_per_ln_tau_pa_m3 * width; self.water_tau_s.len()]
    }

    /// Desorption energies of the water site classes, J/mol, from
    /// τ = τ₀ exp(E/(R T)) at room temperature.
    pub fn water_energy(&self) -> Vec<f64> {
        self.water_tau_s
            .iter()
            .map(|tau| R_GAS * self.ambient_k * (tau / self.water_tau0_s).ln())
            .collect()
    }

    /// Speed at which water re-adsorbs on fully vacant walls, m³/s:
    /// s·A·v̄/4.
    pub fn water_wall_speed(&self, t_k: f64) -> f64 {
        self.water_sticking * self.area_m2 * self.mean_speed(H2O, t_k) / 4.0
    }
}

/// Mole fractions of air carrying water vapour at mole fraction `x_w`.
pub fn air_with_water(x_w: f64) -> [f64; N_SPECIES] {
    let x_w = if x_w.is_finite() {
        x_w.clamp(0.0, 0.1)
    } else {
        0.0
    };
    let mut x = [0.0; N_SPECIES];
    x[AIR] = 1.0 - x_w;
    x[H2O] = x_w;
    x
}

/// Mole fractions of humid room air: about 50 % relative humidity at
/// 22 °C, water partial pressure ~1.3 kPa (from memory).
pub fn humid_air() -> [f64; N_SPECIES] {
    air_with_water(1.3e3 / ATM_PA)
}

/// Mole fractions of dry vent nitrogen, water ~1e-4 (common practice, no
/// source); treated as air, which it resembles for every gauge here.
pub fn dry_vent_gas() -> [f64; N_SPECIES] {
    air_with_water(1e-4)
}

/// The heater: a setpoint ramped toward a target.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Heater {
    /// Final setpoint, K.
    pub target_k: f64,
    /// Ramp rate of the setpoint, K/s.
    pub ramp_k_s: f64,
    /// Present setpoint, K.
    pub setpoint_k: f64,
}

/// The process-gas pressure controller.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FlowControl {
    /// Pressure setpoint, Pa.
    pub setpoint_pa: f64,
    /// Commanded flow, Pa·m³/s.
    pub command_pa_m3_s: f64,
}

/// Valve positions.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Valves {
    /// Roughing valve (chamber to roughing pump) open.
    pub roughing: bool,
    /// High-vacuum gate valve open.
    pub gate: bool,
    /// Gate opening as a fraction of its full conductance (throttling).
    pub gate_position: f64,
    /// Vent valve open.
    pub vent: bool,
}

/// The changing state of the chamber.
#[derive(Debug, Clone, PartialEq)]
pub struct State {
    /// Data time since the start, s.
    pub t_s: f64,
    /// Partial pressures, Pa.
    pub p: [f64; N_SPECIES],
    /// Partial pressures in the virtual leak's trapped volume, Pa.
    pub trap: [f64; N_SPECIES],
    /// Water on the walls per site class, Pa·m³ (at room temperature).
    pub water: Vec<f64>,
    /// Fraction of the near-surface hydrogen left.
    pub h2_left: f64,
    /// Wall temperature, K.
    pub wall_k: f64,
    /// Heater, when on.
    pub heater: Option<Heater>,
    /// Valves.
    pub valves: Valves,
    /// High-vacuum pump commanded on.
    pub turbo_on: bool,
    /// Rotor speed as a fraction of full speed.
    pub rotor: f64,
    /// Waiting for the chamber to fall below crossover to switch pumps.
    pub pending_crossover: bool,
    /// Process-gas controller, when flowing.
    pub flow: Option<FlowControl>,
    /// Actual process-gas flow, Pa·m³/s.
    pub argon_pa_m3_s: f64,
    /// Helium sprayed on the real leak.
    pub helium_spray: bool,
    /// A transient air burst: initial throughput, Pa·m³/s, start time, s,
    /// and decay time, s.
    pub burst: Option<(f64, f64, f64)>,
}

impl State {
    /// A chamber at atmosphere filled with `gas`, walls in equilibrium with it.
    pub fn at_atmosphere(plant: &Plant, gas: [f64; N_SPECIES]) -> Self {
        let t = plant.ambient_k;
        let mut p = [0.0; N_SPECIES];
        for i in 0..N_SPECIES {
            p[i] = gas[i] * ATM_PA;
        }
        let water = equilibrium_coverage(plant, p[H2O], t);
        State {
            t_s: 0.0,
            p,
            trap: p,
            water,
            h2_left: 1.0,
            wall_k: t,
            heater: None,
            valves: Valves {
                roughing: false,
                gate: false,
                gate_position: 1.0,
                vent: false,
            },
            turbo_on: false,
            rotor: 0.0,
            pending_crossover: false,
            flow: None,
            argon_pa_m3_s: 0.0,
            helium_spray: false,
            burst: None,
        }
    }

    /// Total pressure, Pa.
    pub fn total(&self) -> f64 {
        self.p.iter().sum()
    }
}

/// Wall coverage in Langmuir equilibrium with water vapour at `p_w`:
/// θ/(1 − θ) = S_w p_w τ/N_tot for each site class.
fn equilibrium_coverage(plant: &Plant, p_w: f64, t_k: f64) -> Vec<f64> {
    let cap = plant.water_capacity();
    let total: f64 = cap.iter().sum();
    let sw = plant.water_wall_speed(t_k);
    plant
        .water_tau_s
        .iter()
        .zip(&cap)
        .map(|(tau, c)| {
            let k = sw * p_w * tau / total.max(1e-30);
            c * k / (1.0 + k)
        })
        .collect()
}

/// (1 − e^(−x))/x and (1 − that)/x, with their series for small x.
fn decay_factors(x: f64) -> (f64, f64) {
    if x < 1e-6 {
        (1.0 - x / 2.0 + x * x / 6.0, 0.5 - x / 6.0)
    } else {
        let g = -(-x).exp_m1() / x;
        (g, (1.0 - g) / x)
    }
}

/// Exact step of V dp/dt = Q − S p: returns (new p, mean p over the step).
fn exact_step(p0: f64, q: f64, s: f64, dt: f64, v: f64) -> (f64, f64) {
    let x = (s * dt / v).max(0.0);
    let (g, h) = decay_factors(x);
    let fill = q * dt / v;
    let p1 = p0 * (-x).exp() + fill * g;
    let mean = p0 * g + fill * h;
    (p1.max(0.0), mean.max(0.0))
}

/// Replaces a non-finite or negative rate by zero.
fn clean(x: f64) -> f64 {
    if x.is_finite() && x > 0.0 { x } else { 0.0 }
}

/// Sources (Pa·m³/s) and sinks (m³/s) per species at the present state,
/// except water desorption and re-adsorption.
fn loads(plant: &Plant, st: &State) -> ([f64; N_SPECIES], [f64; N_SPECIES]) {
    let mut q = [0.0; N_SPECIES];
    let mut s = [0.0; N_SPECIES];
    let p = st.total();
    let t = st.wall_k;

    // Roughing pump through its line. Its ultimate pressure is written as a
    // back-flow S·p_ult, so that the net speed S(1 − p_ult/p) falls to zero
    // at the ultimate pressure and never becomes negative.
    if st.valves.roughing {
        for (i, s_i) in s.iter_mut().enumerate() {
            let v = plant.mean_speed(i, t);
            let s0 = plant.rough_speed_m3_s;
            // Mean line pressure: the pump inlet sits below the chamber by
            // the drop across the line; two fixed-point passes suffice.
            let mut p_mean = p;
            let mut c = plant.rough_line.conductance(p_mean, v);
            for _ in 0..2 {
                let p_inlet = p * c / (c + s0);
                p_mean = 0.5 * (p + p_inlet);
                c = plant.rough_line.conductance(p_mean, v);
            }
            *s_i += series(s0, c);
        }
        q[AIR] += s[AIR] * plant.rough_ultimate_pa;
    }

    // High-vacuum pump: S = S₀ φ_i f_rotor / (1 + (p/p_knee)²), through the
    // gate (scaled by its opening) and spool.
    if st.valves.gate && st.valves.gate_position > 0.0 {
        let slow = 1.0 / (1.0 + (p / plant.turbo_knee_pa).powi(2));
        for (i, s_i) in s.iter_mut().enumerate() {
            let v = plant.mean_speed(i, t);
            let c = plant.gate_line.conductance(p, v) * st.valves.gate_position.min(1.0);
            let pump = plant.turbo_speed_m3_s * plant.turbo_factor[i] * st.rotor * slow;
            *s_i += series(pump, c);
        }
    }

    // Vent valve, written as a conductance toward atmosphere so that the
    // pressure approaches 101325 Pa without overshoot: C_v = Q(r)/(p_atm − p),
    // with Q choked below r = p/p_atm = 0.528 and tapering to zero at r = 1.
    if st.valves.vent {
        let r = (p / ATM_PA).clamp(0.0, 1.0);
        let taper = if r <= CHOKED_RATIO {
            1.0
        } else {
            let u = (r - CHOKED_RATIO) / (1.0 - CHOKED_RATIO);
            (1.0 - u * u).max(0.0).sqrt()
        };
        let c_max = plant.vent_choked_pa_m3_s / (0.02 * ATM_PA);
        let c = (plant.vent_choked_pa_m3_s * taper / (ATM_PA - p).max(1.0)).min(c_max);
        let c = if p >= ATM_PA { c_max } else { c };
        for i in 0..N_SPECIES {
            q[i] += c * plant.vent_gas[i] * ATM_PA;
            s[i] += c;
        }
    }

    // Real leak, as a conductance from atmosphere: Q = C_L (p_atm − p).
    // Sprayed helium replaces the air at the leak; a molecular leak passes
    // it faster by √(M_air/M_He).
    if plant.leak_pa_m3_s > 0.0 {
        let c_air = plant.leak_pa_m3_s / ATM_PA;
        if st.helium_spray {
            let c_he = c_air * (plant.molar_mass[AIR] / plant.molar_mass[HE]).sqrt();
            q[HE] += c_he * ATM_PA;
            s[HE] += c_he;
        } else {
            q[AIR] += c_air * ATM_PA;
            s[AIR] += c_air;
        }
    }

    q[AIR] +=
        plant.permeation_pa_m3_s * arrhenius(plant.permeation_activation_j_mol, plant.ambient_k, t);

    // A burst decays as Q₀ exp(−(t − t₀)/τ).
    if let Some((rate, t0, tau)) = st.burst {
        q[AIR] += rate * (-(st.t_s - t0).max(0.0) / tau.max(1e-3)).exp();
    }

    // Virtual leak: Q_i = C_i (p_trap,i − p_i), C_i ∝ v̄_i.
    if let Some(vl) = plant.virtual_leak {
        let v_air = plant.mean_speed(AIR, plant.ambient_k);
        for i in 0..N_SPECIES {
            let c = vl.conductance_air_m3_s * plant.mean_speed(i, t) / v_air;
            q[i] += c * st.trap[i];
            s[i] += c;
        }
    }

    // Hydrogen from the steel: Arrhenius in the wall temperature, times the
    // fraction not yet removed by baking.
    q[H2] +=
        plant.h2_pa_m3_s * arrhenius(plant.h2_activation_j_mol, plant.ambient_k, t) * st.h2_left;

    q[AR] += st.argon_pa_m3_s;

    for i in 0..N_SPECIES {
        q[i] = clean(q[i]);
        s[i] = clean(s[i]);
    }
    (q, s)
}

/// exp(−E/R (1/T − 1/T_ref)): a rate at T relative to its value at T_ref.
fn arrhenius(e_j_mol: f64, t_ref: f64, t: f64) -> f64 {
    (-(e_j_mol / R_GAS) * (1.0 / t.max(1.0) - 1.0 / t_ref)).exp()
}

/// Pressure-independent precomputed values used on every sub-step.
#[derive(Debug, Clone, PartialEq)]
pub struct Model {
    /// The fixed plant.
    pub plant: Plant,
    capacity: Vec<f64>,
    energy: Vec<f64>,
}

impl Model {
    /// A model of `plant`.
    pub fn new(plant: Plant) -> Self {
        let capacity = plant.water_capacity();
        let energy = plant.water_energy();
        Model {
            plant,
            capacity,
            energy,
        }
    }

    /// Initial state for a chamber at atmosphere filled with `gas`.
    pub fn at_atmosphere(&self, gas: [f64; N_SPECIES]) -> State {
        State::at_atmosphere(&self.plant, gas)
    }

    /// The largest sub-step to use now: short while pressures change fast.
    pub fn max_substep(&self, st: &State) -> f64 {
        let busy = st.valves.gate || st.valves.vent || st.valves.roughing || st.flow.is_some();
        if busy && st.total() > 1e-2 { 0.25 } else { 1.0 }
    }

    /// Whether the high-vacuum pump may take over now.
    pub fn crossover_allowed(&self, st: &State) -> bool {
        st.total() < self.plant.crossover_pa && st.rotor >= 0.95 && !st.valves.vent
    }

    /// Water outgassing rate now (net desorption), Pa·m³/s.
    pub fn water_desorption(&self, st: &State) -> f64 {
        let t = st.wall_k;
        st.water
            .iter()
            .zip(&self.energy)
            .map(|(n, e)| n * self.rate(*e, t))
            .sum::<f64>()
            * t
            / self.plant.ambient_k
    }

    /// Desorption rate 1/τ = exp(−E/(R T))/τ₀ of a site class, 1/s.
    fn rate(&self, e: f64, t: f64) -> f64 {
        (-e / (R_GAS * t)).exp() / self.plant.water_tau0_s
    }

    /// Advances the state by `dt` seconds (one sub-step).
    pub fn step(&self, st: &mut State, dt: f64) {
        let plant = &self.plant;
        let v = plant.volume_m3;
        let t = st.wall_k;
        let gas_per_wall = t / plant.ambient_k;
        let (mut q, s) = loads(plant, st);

        // Water: desorption from each site class, exact over the step.
        let mut desorbed = 0.0;
        for (n, e) in st.water.iter_mut().zip(&self.energy) {
            let k = self.rate(*e, t);
            let d = *n * -(-k * dt).exp_m1();
            *n -= d;
            desorbed += d;
        }
        q[H2O] += clean(desorbed * gas_per_wall / dt);

        // Re-adsorption on vacant sites (Langmuir): S_w·(vacant/total).
        let total_cap: f64 = self.capacity.iter().sum();
        let vacancy: f64 = self
            .capacity
            .iter()
            .zip(&st.water)
            .map(|(c, n)| (c - n).max(0.0))
            .sum();
        let s_wall = clean(plant.water_wall_speed(t) * vacancy / total_cap.max(1e-30));

        let mut mean_water = 0.0;
        for i in 0..N_SPECIES {
            let s_i = if i == H2O { s[i] + s_wall } else { s[i] };
            let (p1, mean) = exact_step(st.p[i], q[i], s_i, dt, v);
            st.p[i] = p1;
            if i == H2O {
                mean_water = mean;
            }
        }
        let readsorbed = s_wall * mean_water * dt / gas_per_wall;
        if readsorbed > 0.0 && vacancy > 0.0 {
            for (n, c) in st.water.iter_mut().zip(&self.capacity) {
                let room = (c - *n).max(0.0);
                *n = (*n + readsorbed * room / vacancy).min(*c);
            }
        }

        // Virtual-leak trap: V_t dp_t/dt = C (p − p_t), exact.
        if let Some(vl) = plant.virtual_leak {
            let v_air = plant.mean_speed(AIR, plant.ambient_k);
            for i in 0..N_SPECIES {
                let c = vl.conductance_air_m3_s * plant.mean_speed(i, t) / v_air;
                let x = c * dt / vl.volume_m3.max(1e-12);
                st.trap[i] = st.p[i] + (st.trap[i] - st.p[i]) * (-x).exp();
            }
        }

        // Hydrogen depletion during a bake.
        let k_dep =
            plant.h2_deplete_per_s * arrhenius(plant.h2_activation_j_mol, plant.h2_deplete_at_k, t);
        st.h2_left *= (-k_dep * dt).exp();

        // Wall temperature: first order toward the heater's ramped setpoint,
        // or toward room temperature. Gas at constant amount follows p ∝ T.
        let (target, tau) = match st.heater.as_mut() {
            Some(h) => {
                let step = h.ramp_k_s * dt;
                h.setpoint_k = if h.setpoint_k < h.target_k {
                    (h.setpoint_k + step).min(h.target_k)
                } else {
                    (h.setpoint_k - step).max(h.target_k)
                };
                (h.setpoint_k, plant.heat_tau_s)
            }
            None => (plant.ambient_k, plant.cool_tau_s),
        };
        let t_new = target + (t - target) * (-dt / tau).exp();
        if t_new.is_finite() && t_new > 0.0 {
            let ratio = t_new / t;
            for i in 0..N_SPECIES {
                st.p[i] *= ratio;
                st.trap[i] *= ratio;
            }
            st.wall_k = t_new;
        }

        // Rotor: linear spin-up, exponential coast-down.
        if st.turbo_on {
            st.rotor = (st.rotor + dt / plant.turbo_spin_up_s).min(1.0);
        } else {
            st.rotor *= (-dt / plant.turbo_coast_s).exp();
        }

        // Process gas: the pressure loop integrates ln(p_set/p) (a
        // multiplicative integral, so its speed does not depend on the pumping
        // speed), the flow controller follows with a first-order lag.
        let p_now = st.total();
        match st.flow.as_mut() {
            Some(fc) => {
                let err = (fc.setpoint_pa / p_now.max(1e-12)).ln();
                let change = (err * dt / plant.pressure_loop_tau_s).clamp(-0.5, 0.5);
                fc.command_pa_m3_s = (fc.command_pa_m3_s * change.exp())
                    .clamp(plant.mfc_max_pa_m3_s * 1e-3, plant.mfc_max_pa_m3_s);
                let cmd = fc.command_pa_m3_s;
                st.argon_pa_m3_s = cmd + (st.argon_pa_m3_s - cmd) * (-dt / plant.mfc_tau_s).exp();
            }
            None => st.argon_pa_m3_s = 0.0,
        }

        if let Some((_, t0, tau)) = st.burst
            && st.t_s + dt >= t0 + 30.0 * tau
        {
            st.burst = None;
        }

        st.t_s += dt;

        if st.pending_crossover && self.crossover_allowed(st) {
            st.valves.roughing = false;
            st.valves.gate = true;
            st.pending_crossover = false;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_step_reaches_equilibrium_and_never_goes_negative() {
        let (p, _) = exact_step(1e5, 1e-6, 0.2, 1e3, 0.085);
        assert!((p - 1e-6 / 0.2).abs() < 1e-12);
        let (p, mean) = exact_step(1.0, 0.0, 0.0, 1.0, 0.085);
        assert_eq!(p, 1.0);
        assert_eq!(mean, 1.0);
        let (p, _) = exact_step(0.0, 0.085, 0.0, 1.0, 0.085);
        assert!((p - 1.0).abs() < 1e-12);
    }

    #[test]
    fn tube_conductance_grows_with_pressure_and_is_molecular_at_low_pressure() {
        let tube = Tube {
            d_m: 0.1,
            l_m: 0.15,
        };
        let low = tube.conductance(1e-6, 463.0);
        let high = tube.conductance(100.0, 463.0);
        assert!(high > 100.0 * low);
        // DN100 spool, air: ~0.43 m³/s molecular.
        assert!((low - 0.428).abs() < 0.01, "{low}");
    }

    #[test]
    fn water_load_falls_as_one_over_t_when_pumped_hard() {
        let model = Model::new(Plant::standard());
        let mut st = model.at_atmosphere(humid_air());
        st.p = [1e-6; N_SPECIES];
        let mut q = Vec::new();
        for hour in 1..=4 {
            while st.t_s < hour as f64 * 3600.0 {
                // Strip the water away as if pumped infinitely fast.
                model.step(&mut st, 1.0);
                st.p = [1e-6; N_SPECIES];
            }
            q.push(model.water_desorption(&st));
        }
        // q(1 h) ≈ 1e-5 Pa·m³/(s·m²) × 1.6 m².
        assert!((q[0] / 1.6e-5 - 1.0).abs() < 0.1, "{}", q[0]);
        assert!((q[0] / q[3] - 4.0).abs() < 0.2, "{q:?}");
    }
}
