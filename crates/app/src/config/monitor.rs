//! The monitor's setup from a resolved configuration.

use super::Config;

impl Config {
    /// Each gauge's model, built by the core from its checked settings.
    pub fn gauge_models(&self) -> Vec<crate::alarm::monitor::GaugeSetup> {
        self.gauges
            .iter()
            .filter_map(|g| {
                Some(crate::alarm::monitor::GaugeSetup {
                    id: g.id.clone(),
                    model: g.model()?,
                    mixture: g.mixture.clone(),
                    settings: (!g.own_gas).then(|| g.settings()),
                })
            })
            .collect()
    }

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
            gauges: self.gauge_models(),
            mixture: self.mixture.clone(),
            gas_steps: self.gas_steps.clone(),
            lengths: self.lengths.clone(),
            physics: self.physics,
            assumed_temperature_k: self.chamber.temperature_k.unwrap_or(295.15),
            rules,
            gates: self.alarms.gates.clone(),
            stale_after_s: self.alarms.stale_after_s,
            rate_window_s: self.alarms.rate_window_s,
            input_severity: self.alarms.input_severity,
            default_gauge: self.alarms.default_gauge.clone(),
            chamber: self.chamber_pressure.clone(),
            pressure_unit: self.display.pressure_unit,
            temperature_unit: self.display.temperature_unit,
        }
    }
}
