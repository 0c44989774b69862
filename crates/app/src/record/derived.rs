//! Derived columns for the recorder: gas kinetics of every pressure channel,
//! computed by the engine from the same configuration as the dashboard.

use crate::engine::mixture::Mixture;
use crate::engine::{Conditions, Derived, GaugeModel, NamedLength, Physics, derive};
use crate::log::v1::{Cell, Column, ColumnKind};
use crate::sample::{ChannelInfo, ChannelUnit};

/// Computes derived cells for a row.
#[derive(Debug, Clone)]
pub struct Deriver {
    mixture: Mixture,
    gauges: Vec<(String, GaugeModel, Mixture)>,
    lengths: Vec<NamedLength>,
    physics: Physics,
    assumed_temperature_k: f64,
    last_temperature_k: Option<f64>,
}

/// Derived quantities per pressure channel: (suffix, unit).
const QUANTITIES: [(&str, &str); 4] = [
    ("number_density", "1/m3"),
    ("mean_free_path", "m"),
    ("impingement", "1/(m2 s)"),
    ("monolayer_time", "s"),
];

impl Deriver {
    /// From a resolved configuration.
    pub fn from_config(config: &crate::config::Config) -> Self {
        Deriver {
            mixture: config.mixture.clone(),
            gauges: config
                .gauge_models()
                .into_iter()
                .map(|g| (g.id, g.model, g.mixture))
                .collect(),
            lengths: config.lengths.clone(),
            physics: config.physics,
            assumed_temperature_k: config.chamber.temperature_k.unwrap_or(295.15),
            last_temperature_k: None,
        }
    }

    /// The derived columns for these channels, in the order `derive` fills them.
    pub fn columns(&self, channels: &[ChannelInfo]) -> Vec<Column> {
        let mut out = Vec::new();
        for c in channels.iter().filter(|c| c.unit.is_pressure()) {
            for (q, unit) in QUANTITIES {
                out.push(Column {
                    name: format!("{}.{q}", c.id),
                    kind: ColumnKind::Derived(unit.into()),
                });
            }
            for l in &self.lengths {
                out.push(Column {
                    name: format!("{}.knudsen.{}", c.id, l.name),
                    kind: ColumnKind::Derived("1".into()),
                });
            }
        }
        out
    }

    /// Derived cells for one row from kinetics already computed (by the
    /// monitor, with the gas in force and the gauge corrections for it): a
    /// pressure channel without an entry gets empty cells.
    pub fn from_kinetics(
        &self,
        channels: &[ChannelInfo],
        kinetics: &[(String, Derived)],
    ) -> Vec<Cell> {
        let per_channel = QUANTITIES.len() + self.lengths.len();
        let mut out = Vec::new();
        for c in channels.iter().filter(|c| c.unit.is_pressure()) {
            match kinetics.iter().find(|(id, _)| id == &c.id) {
                Some((_, d)) => {
                    let cell = Cell::Derived;
                    out.push(cell(d.number_density_per_m3));
                    out.push(cell(d.mean_free_path_m));
                    out.push(cell(d.impingement_per_m2_s));
                    out.push(cell(d.monolayer_time_s));
                    // Kn per configured length, in the configured order.
                    for l in &self.lengths {
                        let kn = d
                            .lengths
                            .iter()
                            .find(|x| x.name == l.name)
                            .map(|x| x.knudsen);
                        out.push(kn.map_or(Cell::Empty, cell));
                    }
                }
                None => out.extend(std::iter::repeat_n(Cell::Empty, per_channel)),
            }
        }
        out
    }

    /// Derived cells for one row given as (channel index, cell) pairs.
    pub fn derive(&mut self, channels: &[ChannelInfo], cells: &[(usize, Cell)]) -> Vec<Cell> {
        // The row's temperature, else the last one seen, else the assumption.
        for &(i, c) in cells {
            if let (ChannelUnit::Temperature(_), Cell::Value(v)) = (channels[i].unit, c) {
                self.last_temperature_k = Some(channels[i].unit.to_si(v));
            }
        }
        let t = self
            .last_temperature_k
            .unwrap_or(self.assumed_temperature_k);
        let per_channel = QUANTITIES.len() + self.lengths.len();
        let mut out = Vec::new();
        for (i, c) in channels
            .iter()
            .enumerate()
            .filter(|(_, c)| c.unit.is_pressure())
        {
            let value = cells
                .iter()
                .find(|(j, _)| *j == i)
                .and_then(|(_, cell)| match cell {
                    Cell::Value(v) => Some(c.unit.to_si(*v)),
                    _ => None,
                });
            let Some(indicated) = value.filter(|p| *p > 0.0) else {
                out.extend(std::iter::repeat_n(Cell::Empty, per_channel));
                continue;
            };
            let (p, mixture) = match self.gauges.iter().find(|(id, _, _)| id == &c.id) {
                Some((_, model, mix)) => (model.correct(indicated).pressure_pa, mix),
                None => (indicated, &self.mixture),
            };
            let d = derive(
                &Conditions::new(p, t),
                mixture,
                &self.lengths,
                &self.physics,
            );
            let cell = Cell::Derived;
            out.push(cell(d.number_density_per_m3));
            out.push(cell(d.mean_free_path_m));
            out.push(cell(d.impingement_per_m2_s));
            out.push(cell(d.monolayer_time_s));
            out.extend(d.lengths.iter().map(|l| cell(l.knudsen)));
        }
        out
    }
}
