//! Scenarios: a chamber, its starting state and a script of operator actions
//! at data times.

use std::fmt;
use std::str::FromStr;

use super::gauges::GaugeId;
use super::model::{
    MBAR_L_S, N_SPECIES, Plant, VirtualLeak, air_with_water, dry_vent_gas, humid_air,
};
use crate::units::ZERO_CELSIUS_K;

/// A scripted run of the simulated chamber.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub enum Scenario {
    /// From atmosphere: roughing, crossover, then hours of high-vacuum tail.
    #[default]
    Pumpdown,
    /// A chamber with a real leak: pump down, spray helium, isolate; the
    /// pressure rises linearly.
    LeakCheck,
    /// A tight chamber with a trapped volume: isolate; the rise flattens.
    Outgassing,
    /// Pump down to base, hold argon at a set pressure, stop, recover.
    Process,
    /// Pump down, bake the walls at 150 °C, cool, reach a lower base pressure.
    Bakeout,
    /// Everything at once in 40 minutes, for a first look at the tool.
    Demo,
}

impl Scenario {
    /// Every scenario.
    pub const ALL: [Scenario; 6] = [
        Scenario::Pumpdown,
        Scenario::LeakCheck,
        Scenario::Outgassing,
        Scenario::Process,
        Scenario::Bakeout,
        Scenario::Demo,
    ];

    /// The scenario's name on the command line.
    pub fn as_str(self) -> &'static str {
        match self {
            Scenario::Pumpdown => "pumpdown",
            Scenario::LeakCheck => "leak-check",
            Scenario::Outgassing => "outgassing",
            Scenario::Process => "process",
            Scenario::Bakeout => "bakeout",
            Scenario::Demo => "demo",
        }
    }

    /// One line on what the scenario shows.
    pub fn description(self) -> &'static str {
        match self {
            Scenario::Pumpdown => {
                "8 h pump-down from atmosphere: roughing, crossover at 0.1 mbar, water-dominated 1/t tail"
            }
            Scenario::LeakCheck => {
                "2.5 h: pump-down stalls near 1e-5 mbar, helium spray at the leak, 10 min rate-of-rise (linear)"
            }
            Scenario::Outgassing => {
                "3 h: pump-down, 40 min rate-of-rise that flattens (outgassing and a virtual leak, no real leak)"
            }
            Scenario::Process => {
                "2.5 h: pump-down, 30 min argon at 5e-3 mbar with the gate throttled, recovery"
            }
            Scenario::Bakeout => {
                "22 h: 4 h pump-down, 10 h bake at 150 C, 8 h cool-down to a lower base pressure"
            }
            Scenario::Demo => {
                "40 min: pump-down, base below 5e-6 mbar, gauge fault, argon step, air burst, vent"
            }
        }
    }
}

impl fmt::Display for Scenario {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for Scenario {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let s = s.trim();
        Scenario::ALL
            .into_iter()
            .find(|sc| sc.as_str().eq_ignore_ascii_case(s))
            .ok_or_else(|| {
                let hint = crate::suggest::nearest(s, Scenario::ALL.iter().map(|sc| sc.as_str()))
                    .map(|n| format!(" (did you mean \"{n}\"?)"))
                    .unwrap_or_default();
                format!(
                    "unknown scenario \"{s}\"{hint}; expected one of {}",
                    Scenario::ALL.map(Scenario::as_str).join(", ")
                )
            })
    }
}

/// An operator action.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Action {
    /// Start the high-vacuum pump, close the vent and pump: rough first when
    /// above crossover, then open the gate once below it with the pump at
    /// speed.
    Pump,
    /// Close the gate and the roughing valve (rate-of-rise test).
    Isolate,
    /// Set the gate opening, 0…1.
    Throttle(f64),
    /// Start argon, the flow controlled to hold this total pressure, Pa.
    ArgonOn(f64),
    /// Stop argon.
    ArgonOff,
    /// Heat the walls toward a temperature, K, ramping the setpoint at K/s.
    HeaterOn {
        /// Target, K.
        target_k: f64,
        /// Setpoint ramp, K/s.
        ramp_k_s: f64,
    },
    /// Heater off; the walls cool toward room temperature.
    HeaterOff,
    /// Spray helium on the real leak (true) or stop (false).
    HeliumSpray(bool),
    /// An air burst starting at this throughput, Pa·m³/s, and decaying with
    /// this time constant, s.
    Burst(f64, f64),
    /// A gauge fault lasting this long, s.
    Dropout(GaugeId, f64),
    /// Close gate and roughing valve, stop the high-vacuum pump, open the vent.
    Vent,
}

/// A scenario made concrete.
#[derive(Debug, Clone, PartialEq)]
pub struct Setup {
    /// Chamber name.
    pub chamber_name: &'static str,
    /// The plant.
    pub plant: Plant,
    /// Gas filling the chamber at the start (mole fractions, at atmosphere).
    pub initial_gas: [f64; N_SPECIES],
    /// Length of the script, s.
    pub duration_s: f64,
    /// Actions at data times, s, in order.
    pub script: Vec<(f64, Action)>,
}

/// Hours to seconds.
const H: f64 = 3600.0;
/// Minutes to seconds.
const MIN: f64 = 60.0;

/// The setup of a scenario.
pub fn setup(scenario: Scenario) -> Setup {
    let standard = Plant::standard();
    let base = Setup {
        chamber_name: "Coater C-2, thin-film bay (simulated)",
        plant: standard.clone(),
        initial_gas: humid_air(),
        duration_s: 0.0,
        script: vec![(0.0, Action::Pump)],
    };
    let process_pa = 5e-3 * 100.0;
    match scenario {
        Scenario::Pumpdown => Setup {
            duration_s: 8.0 * H,
            ..base
        },
        Scenario::LeakCheck => Setup {
            plant: Plant {
                leak_pa_m3_s: 2e-3 * MBAR_L_S,
                ..standard
            },
            duration_s: 2.5 * H,
            script: vec![
                (0.0, Action::Pump),
                (1.5 * H, Action::HeliumSpray(true)),
                (1.5 * H + 2.0 * MIN, Action::HeliumSpray(false)),
                (2.0 * H, Action::Isolate),
                (2.0 * H + 10.0 * MIN, Action::Pump),
            ],
            ..base
        },
        Scenario::Outgassing => Setup {
            plant: Plant {
                // 50 cm³ trapped behind a gap of 4e-8 m³/s: drains with a
                // time constant of about 20 min (own estimate).
                virtual_leak: Some(VirtualLeak {
                    volume_m3: 50e-6,
                    conductance_air_m3_s: 4e-8,
                }),
                ..standard
            },
            duration_s: 3.0 * H,
            script: vec![
                (0.0, Action::Pump),
                (2.0 * H, Action::Isolate),
                (2.0 * H + 40.0 * MIN, Action::Pump),
            ],
            ..base
        },
        Scenario::Process => Setup {
            duration_s: 2.5 * H,
            script: vec![
                (0.0, Action::Pump),
                (1.5 * H, Action::Throttle(0.25)),
                (1.5 * H, Action::ArgonOn(process_pa)),
                (2.0 * H, Action::ArgonOff),
                (2.0 * H, Action::Throttle(1.0)),
            ],
            ..base
        },
        Scenario::Bakeout => Setup {
            duration_s: 22.0 * H,
            script: vec![
                (0.0, Action::Pump),
                (
                    4.0 * H,
                    Action::HeaterOn {
                        target_k: ZERO_CELSIUS_K + 150.0,
                        ramp_k_s: 2.0 / MIN,
                    },
                ),
                (14.0 * H, Action::HeaterOff),
            ],
            ..base
        },
        Scenario::Demo => Setup {
            // Vented with dry nitrogen and opened only briefly, so the walls
            // hold less water (as if in equilibrium with ~80 Pa of water
            // vapour) and base pressure comes within minutes; vented with
            // dry nitrogen again at the end.
            plant: Plant {
                vent_gas: dry_vent_gas(),
                ..standard
            },
            initial_gas: air_with_water(80.0 / crate::units::ATM_PA),
            duration_s: 40.0 * MIN,
            script: vec![
                (0.0, Action::Pump),
                (15.0 * MIN, Action::Dropout(GaugeId::Chamber, 20.0)),
                (20.0 * MIN, Action::Throttle(0.25)),
                (20.0 * MIN, Action::ArgonOn(process_pa)),
                (28.0 * MIN, Action::ArgonOff),
                (28.0 * MIN, Action::Throttle(1.0)),
                (31.0 * MIN, Action::Burst(5e-2 * MBAR_L_S, 15.0)),
                (35.0 * MIN, Action::Vent),
            ],
            ..base
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_round_trip() {
        for s in Scenario::ALL {
            assert_eq!(s.as_str().parse::<Scenario>(), Ok(s));
            assert!(!s.description().is_empty());
        }
        let err = "leakcheck".parse::<Scenario>().expect_err("not a name");
        assert!(err.contains("leak-check"), "{err}");
    }

    #[test]
    fn scripts_are_in_time_order_and_inside_the_run() {
        for s in Scenario::ALL {
            let setup = setup(s);
            assert!(setup.script.windows(2).all(|w| w[0].0 <= w[1].0), "{s}");
            assert!(
                setup.script.iter().all(|(t, _)| *t < setup.duration_s),
                "{s}"
            );
        }
    }
}
