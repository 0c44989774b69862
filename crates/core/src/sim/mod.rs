//! The simulated chamber: a physical model of a pumped vacuum chamber, its
//! gauges and scripted operator actions, so that the whole tool can be seen
//! and tested without hardware.
//!
//! Pure and deterministic: no I/O, no clock. The caller gives a start time;
//! each [`Simulator::next_samples`] call advances the chamber's own data
//! clock by the sample interval and returns one reading per channel. The same
//! seed gives the same readings; the seed only drives gauge noise, the physics
//! itself is noise-free (see [`Simulator::truth`]).
//!
//! ```
//! use rarefy_core::sim::{Scenario, SimOptions, Simulator};
//! let mut sim = Simulator::new(SimOptions { scenario: Scenario::Demo, ..SimOptions::default() });
//! let first = sim.next_samples();
//! assert_eq!(first.len(), sim.channels().len());
//! assert_eq!(sim.phase(), "roughing");
//! ```
//!
//! The model (see [`model`]): partial pressures of air, water, argon, helium
//! and hydrogen, each with V dp_i/dt = Q_i − S_i p_i solved exactly per
//! sub-step; a roughing pump with an ultimate pressure and a turbo-type pump
//! whose speed falls at high pressure, each behind a line whose conductance
//! grows with pressure in viscous flow; water on the walls as site classes
//! with a spread of desorption energies (giving the 1/t law at room
//! temperature and a steep rise and depletion when baked); hydrogen from the
//! steel; real, virtual and permeation leaks; vent and process-gas inflow.

pub mod gauges;
pub mod model;
pub mod rng;
pub mod scenario;

#[cfg(test)]
mod tests;

use chrono::{DateTime, TimeDelta, TimeZone, Utc};

use crate::sample::{ChannelInfo, Sample};
pub use gauges::GaugeId;
use gauges::{Exposure, Gauges};
use model::{FlowControl, Heater, Model, State};
pub use model::{N_SPECIES, Species, Valves};
use scenario::Action;
pub use scenario::Scenario;

/// Longest sample interval accepted, s; longer ones are shortened to it.
pub const MAX_INTERVAL_S: f64 = 3600.0;
/// Shortest sample interval accepted, s.
pub const MIN_INTERVAL_S: f64 = 1e-3;

/// How to run the simulator.
#[derive(Debug, Clone, PartialEq)]
pub struct SimOptions {
    /// Which script to run.
    pub scenario: Scenario,
    /// Seed of the gauge noise.
    pub seed: u64,
    /// Data time of the start.
    pub start: DateTime<Utc>,
    /// Data time between samples, s (clamped to
    /// [`MIN_INTERVAL_S`]…[`MAX_INTERVAL_S`]; 1 s when not a positive number).
    pub interval_s: f64,
}

impl Default for SimOptions {
    /// `pumpdown`, seed 1, start 2026-01-01T00:00:00Z, one sample a second.
    fn default() -> Self {
        SimOptions {
            scenario: Scenario::Pumpdown,
            seed: 1,
            start: Utc
                .with_ymd_and_hms(2026, 1, 1, 0, 0, 0)
                .single()
                .unwrap_or(DateTime::<Utc>::UNIX_EPOCH),
            interval_s: 1.0,
        }
    }
}

/// The true state of the chamber, as no gauge sees it.
#[derive(Debug, Clone, PartialEq)]
pub struct Truth {
    /// Data time.
    pub time: DateTime<Utc>,
    /// Seconds since the start.
    pub elapsed_s: f64,
    /// Total pressure, Pa.
    pub total_pa: f64,
    /// Partial pressures, Pa, in the order of [`Species::ALL`].
    pub partial_pa: [f64; N_SPECIES],
    /// Wall (and gas) temperature, K.
    pub wall_k: f64,
    /// What the chamber is doing (see [`Simulator::phase`]).
    pub phase: &'static str,
    /// Valve positions.
    pub valves: Valves,
    /// High-vacuum pump rotor speed as a fraction of full speed.
    pub rotor: f64,
    /// Process-gas flow, Pa·m³/s.
    pub argon_flow_pa_m3_s: f64,
    /// Water outgassing from the walls, Pa·m³/s.
    pub water_outgassing_pa_m3_s: f64,
}

impl Truth {
    /// Partial pressure of one species, Pa.
    pub fn partial(&self, s: Species) -> f64 {
        self.partial_pa[s.index()]
    }
}

/// The simulated chamber.
#[derive(Debug, Clone)]
pub struct Simulator {
    opts: SimOptions,
    chamber_name: &'static str,
    duration_s: f64,
    model: Model,
    state: State,
    gauges: Gauges,
    script: Vec<(f64, Action)>,
    next_action: usize,
    steps: u64,
}

impl Simulator {
    /// A simulator at the start of its scenario.
    pub fn new(opts: SimOptions) -> Self {
        let mut opts = opts;
        opts.interval_s = if opts.interval_s.is_finite() && opts.interval_s > 0.0 {
            opts.interval_s.clamp(MIN_INTERVAL_S, MAX_INTERVAL_S)
        } else {
            1.0
        };
        let setup = scenario::setup(opts.scenario);
        let model = Model::new(setup.plant);
        let state = model.at_atmosphere(setup.initial_gas);
        let mut sim = Simulator {
            chamber_name: setup.chamber_name,
            duration_s: setup.duration_s,
            gauges: Gauges::new(opts.seed),
            opts,
            model,
            state,
            script: setup.script,
            next_action: 0,
            steps: 0,
        };
        sim.run_due_actions();
        sim
    }

    /// The options in use (with the interval as clamped).
    pub fn options(&self) -> &SimOptions {
        &self.opts
    }

    /// The channels, in the order of [`Simulator::next_samples`]:
    /// `cdg`, `chamber`, `ion` (mbar) and `wall` (°C).
    pub fn channels(&self) -> Vec<ChannelInfo> {
        Gauges::channels()
    }

    /// The chamber's name.
    pub fn chamber_name(&self) -> &str {
        self.chamber_name
    }

    /// Chamber volume, m³.
    pub fn volume_m3(&self) -> f64 {
        self.model.plant.volume_m3
    }

    /// Inner surface area, m².
    pub fn surface_area_m2(&self) -> f64 {
        self.model.plant.area_m2
    }

    /// The residual gas now, as a mixture in the `--mix` syntax
    /// (`H2O=0.712,air=0.281,H2=0.007`): species above 0.5 %, three decimals,
    /// summing to 1.
    pub fn gas_label(&self) -> String {
        let total = self.state.total();
        if total.is_nan() || total <= 0.0 {
            return "air".to_string();
        }
        let mut parts: Vec<(&'static str, f64)> = Species::ALL
            .iter()
            .map(|s| (s.id(), self.state.p[s.index()] / total))
            .filter(|(_, x)| *x >= 0.005)
            .collect();
        parts.sort_by(|a, b| b.1.total_cmp(&a.1));
        let sum: f64 = parts.iter().map(|(_, x)| x).sum();
        let mut rounded: Vec<(&str, f64)> = parts
            .iter()
            .map(|(id, x)| (*id, (x / sum * 1000.0).round() / 1000.0))
            .collect();
        let r_sum: f64 = rounded.iter().map(|(_, x)| x).sum();
        if let Some(first) = rounded.first_mut() {
            first.1 = ((first.1 + 1.0 - r_sum) * 1000.0).round() / 1000.0;
        }
        if rounded.len() == 1 {
            return rounded[0].0.to_string();
        }
        rounded
            .iter()
            .map(|(id, x)| format!("{id}={x:.3}"))
            .collect::<Vec<_>>()
            .join(",")
    }

    /// The scenario being run.
    pub fn scenario(&self) -> Scenario {
        self.opts.scenario
    }

    /// Advances the chamber by one interval and returns one sample per
    /// channel at the new data time, in the order of
    /// [`Simulator::channels`]. Readings out of range, from a switched-off
    /// sensor or from a faulty one carry that status and no value.
    pub fn next_samples(&mut self) -> Vec<Sample> {
        let t_end = (self.steps + 1) as f64 * self.opts.interval_s;
        let mut guard = 0u32;
        while self.state.t_s < t_end - 1e-9 && guard < 1_000_000 {
            guard += 1;
            self.run_due_actions();
            let mut dt = self
                .model
                .max_substep(&self.state)
                .min(t_end - self.state.t_s);
            if let Some((t_next, _)) = self.script.get(self.next_action) {
                let until = t_next - self.state.t_s;
                if until > 1e-9 {
                    dt = dt.min(until);
                }
            }
            self.model.step(&mut self.state, dt.max(1e-9));
        }
        self.steps += 1;
        self.state.t_s = t_end;
        self.run_due_actions();
        let time = self.time();
        let exposure = Exposure {
            t_s: self.state.t_s,
            time,
            p: &self.state.p,
            wall_k: self.state.wall_k,
        };
        self.gauges.read(exposure)
    }

    /// Data time now.
    pub fn time(&self) -> DateTime<Utc> {
        let us = (self.state.t_s * 1e6).round();
        let us = if us.is_finite() { us as i64 } else { 0 };
        self.opts
            .start
            .checked_add_signed(TimeDelta::microseconds(us))
            .unwrap_or(DateTime::<Utc>::MAX_UTC)
    }

    /// Data time since the start, s.
    pub fn elapsed_s(&self) -> f64 {
        self.state.t_s
    }

    /// Length of the scenario's script, s; the chamber can be run past it
    /// and then just keeps pumping (or sitting) as it was left.
    pub fn natural_duration_s(&self) -> f64 {
        self.duration_s
    }

    /// Whether the script has run to its end.
    pub fn is_finished(&self) -> bool {
        self.state.t_s >= self.duration_s - 1e-9
    }

    /// The true state now.
    pub fn truth(&self) -> Truth {
        Truth {
            time: self.time(),
            elapsed_s: self.state.t_s,
            total_pa: self.state.total(),
            partial_pa: self.state.p,
            wall_k: self.state.wall_k,
            phase: self.phase(),
            valves: self.state.valves,
            rotor: self.state.rotor,
            argon_flow_pa_m3_s: self.state.argon_pa_m3_s,
            water_outgassing_pa_m3_s: self.model.water_desorption(&self.state),
        }
    }

    /// What the chamber is doing: `vent`, `process`, `bakeout`, `leak-test`
    /// (helium at the leak), `roughing`, `cool-down`, `high-vacuum`,
    /// `isolated` (pumps valved off under vacuum) or `atmosphere`.
    pub fn phase(&self) -> &'static str {
        let st = &self.state;
        let hot = st.wall_k > self.model.plant.ambient_k + 15.0;
        if st.valves.vent {
            "vent"
        } else if st.flow.is_some() {
            "process"
        } else if st.heater.is_some() {
            "bakeout"
        } else if st.helium_spray {
            "leak-test"
        } else if st.valves.roughing {
            "roughing"
        } else if st.valves.gate && hot {
            "cool-down"
        } else if st.valves.gate {
            "high-vacuum"
        } else if st.total() < 0.5 * crate::units::ATM_PA {
            "isolated"
        } else {
            "atmosphere"
        }
    }

    fn run_due_actions(&mut self) {
        while let Some((t, action)) = self.script.get(self.next_action).copied() {
            if t > self.state.t_s + 1e-9 {
                break;
            }
            self.apply(action);
            self.next_action += 1;
        }
    }

    fn apply(&mut self, action: Action) {
        let st = &mut self.state;
        match action {
            Action::Pump => {
                st.valves.vent = false;
                st.turbo_on = true;
                if self.model.crossover_allowed(st) {
                    st.valves.roughing = false;
                    st.valves.gate = true;
                } else {
                    st.valves.gate = false;
                    st.valves.roughing = true;
                    st.pending_crossover = true;
                }
            }
            Action::Isolate => {
                st.valves.gate = false;
                st.valves.roughing = false;
                st.pending_crossover = false;
            }
            Action::Throttle(x) => {
                st.valves.gate_position = if x.is_finite() {
                    x.clamp(0.0, 1.0)
                } else {
                    1.0
                };
            }
            Action::ArgonOn(setpoint_pa) => {
                st.flow = Some(FlowControl {
                    setpoint_pa,
                    // Start from a tenth of full scale.
                    command_pa_m3_s: 0.1 * self.model.plant.mfc_max_pa_m3_s,
                });
            }
            Action::ArgonOff => {
                st.flow = None;
                st.argon_pa_m3_s = 0.0;
            }
            Action::HeaterOn { target_k, ramp_k_s } => {
                st.heater = Some(Heater {
                    target_k,
                    ramp_k_s,
                    setpoint_k: st.wall_k,
                });
            }
            Action::HeaterOff => st.heater = None,
            Action::HeliumSpray(on) => st.helium_spray = on,
            Action::Burst(rate, tau) => st.burst = Some((rate, st.t_s, tau)),
            Action::Dropout(gauge, duration) => self.gauges.add_dropout(gauge, st.t_s, duration),
            Action::Vent => {
                st.valves.gate = false;
                st.valves.roughing = false;
                st.pending_crossover = false;
                st.turbo_on = false;
                st.flow = None;
                st.argon_pa_m3_s = 0.0;
                st.valves.vent = true;
            }
        }
    }
}
