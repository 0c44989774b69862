//! The run report's pure part: what one gauge's readings add up to over a
//! run, accumulated one reading at a time in memory that does not grow with
//! the log (`rarefy report`, SPEC §7).
//!
//! Time-weighted figures (time in each ISO 3529-1 range, in each flow regime
//! per named length, without a valid pressure) follow one rule: a reading's
//! state holds from its time until the next reading of the same gauge,
//! unless that interval is longer than the expected interval — then it is a
//! gap, counted on its own and in no class. So for every gauge
//! `Σ time in range + time without pressure + time in gaps = end − start`.
//!
//! The median pressure is a streaming estimate ([`P2Quantile`], the P²
//! algorithm), taken on ln p so that a run spanning many decades is
//! estimated evenly; min and max are exact. P² assumes no trend in the
//! order of the values: on a pump-down read in time order it is a rougher
//! estimate (within about half a decade in the tests), on values without a
//! trend within a few per cent.

pub mod decimate;
mod p2;

use std::collections::BTreeMap;

use chrono::{DateTime, Utc};
use serde::Serialize;

pub use decimate::Decimator;
pub use p2::P2Quantile;

use crate::engine::LengthDerived;
use crate::engine::regime::{FlowRegime, VacuumRange};
use crate::sample::Status;

/// How many gaps a gauge's report lists one by one (all are counted).
pub const GAPS_LISTED: usize = 100;

/// How many intervals between readings the expected interval is the median
/// of (the run's first ones).
const INTERVALS_KEPT: usize = 64;

/// A gap is an interval longer than this many times the median interval
/// (common practice, no source).
pub const GAP_FACTOR: f64 = 5.0;

/// Every ISO 3529-1 range (and the two classes above vacuum), in order from
/// the highest pressure.
pub const RANGES: [VacuumRange; 7] = [
    VacuumRange::AboveAtmospheric,
    VacuumRange::Atmospheric,
    VacuumRange::Low,
    VacuumRange::Medium,
    VacuumRange::High,
    VacuumRange::UltraHigh,
    VacuumRange::ExtremeHigh,
];

/// Every flow regime, in order.
pub const REGIMES: [FlowRegime; 3] = [
    FlowRegime::Viscous,
    FlowRegime::Transitional,
    FlowRegime::Molecular,
];

/// A pressure to be reached, and where it comes from.
#[derive(Debug, Clone, PartialEq)]
pub struct Threshold {
    /// Pressure, Pa.
    pub pa: f64,
    /// Where it comes from: an alarm rule's id, or `--target`.
    pub source: String,
}

/// One reading of a gauge as the report takes it: the monitor's view after
/// the reading.
#[derive(Debug, Clone, PartialEq)]
pub struct Observation<'a> {
    /// Data time.
    pub time: DateTime<Utc>,
    /// The reading's status.
    pub status: Status,
    /// True pressure of a valid pressure reading, Pa.
    pub pressure_pa: Option<f64>,
    /// Its ISO 3529-1 range.
    pub range: Option<VacuumRange>,
    /// Its flow regime per named length (the engine's per-length results).
    pub regimes: &'a [LengthDerived],
    /// The gauge's cumulative exposure after it, langmuir.
    pub exposure_langmuir: Option<f64>,
}

/// The state a reading leaves in force until the next one.
#[derive(Debug, Clone, PartialEq)]
struct Held {
    range: Option<VacuumRange>,
    /// (index into `in_regime`, regime).
    regimes: Vec<(usize, FlowRegime)>,
}

/// One gauge's report, accumulated reading by reading.
#[derive(Debug, Clone)]
pub struct GaugeAccumulator {
    id: String,
    gap_after_s: Option<f64>,
    start: Option<DateTime<Utc>>,
    end: Option<DateTime<Utc>>,
    samples: u64,
    statuses: [u64; Status::ALL.len()],
    min: Option<f64>,
    max: Option<f64>,
    /// Neumaier-compensated sum of the valid pressures, and their count.
    sum: (f64, f64),
    valid: u64,
    median: P2Quantile,
    intervals: Vec<f64>,
    /// The gap limit once [`INTERVALS_KEPT`] intervals are in.
    gap_limit_fixed: Option<f64>,
    /// Seconds in each of [`RANGES`] (same order).
    in_range: [f64; RANGES.len()],
    /// Per named length (first-seen order): seconds in each of [`REGIMES`].
    in_regime: Vec<(String, [f64; REGIMES.len()])>,
    no_pressure_s: f64,
    gap_s: f64,
    gap_count: u64,
    gaps: Vec<(DateTime<Utc>, DateTime<Utc>)>,
    thresholds: Vec<(Threshold, Option<DateTime<Utc>>)>,
    exposure: Option<f64>,
    held: Option<Held>,
}

impl GaugeAccumulator {
    /// A gauge's empty report. `thresholds`: pressures whose first
    /// crossing from above is wanted. `gap_after_s`: intervals longer than
    /// this are gaps; `None` for [`GAP_FACTOR`] × the median of the first
    /// intervals.
    pub fn new(id: &str, thresholds: Vec<Threshold>, gap_after_s: Option<f64>) -> Self {
        GaugeAccumulator {
            id: id.to_string(),
            gap_after_s: gap_after_s.filter(|g| g.is_finite() && *g > 0.0),
            start: None,
            end: None,
            samples: 0,
            statuses: [0; Status::ALL.len()],
            min: None,
            max: None,
            sum: (0.0, 0.0),
            valid: 0,
            median: P2Quantile::new(0.5),
            intervals: Vec::new(),
            gap_limit_fixed: None,
            in_range: [0.0; RANGES.len()],
            in_regime: Vec::new(),
            no_pressure_s: 0.0,
            gap_s: 0.0,
            gap_count: 0,
            gaps: Vec::new(),
            thresholds: thresholds.into_iter().map(|t| (t, None)).collect(),
            exposure: None,
            held: None,
        }
    }

    /// The interval beyond which there is a gap, s, given the intervals so
    /// far (and this one when it is the first).
    fn gap_limit(&mut self, dt: f64) -> f64 {
        if let Some(g) = self.gap_limit_fixed {
            return g;
        }
        let limit = self.median_limit(dt);
        if self.gap_after_s.is_none() && self.intervals.len() >= INTERVALS_KEPT {
            // Every interval the median rests on is in: it is final.
            self.gap_limit_fixed = Some(limit);
        }
        limit
    }

    /// [`GaugeAccumulator::gap_limit`] without the cache.
    fn median_limit(&self, dt: f64) -> f64 {
        if let Some(g) = self.gap_after_s {
            return g;
        }
        let mut v = if self.intervals.is_empty() {
            vec![dt]
        } else {
            self.intervals.clone()
        };
        v.sort_by(f64::total_cmp);
        v[v.len() / 2] * GAP_FACTOR
    }

    /// Adds one reading.
    pub fn add(&mut self, obs: Observation<'_>) {
        self.add_reading(obs, false);
    }

    /// Adds one reading whose flow regimes are those of the reading added
    /// just before it, which had a valid pressure: the same lengths in the
    /// same regimes (`obs.regimes` is not read). A caller that keeps the
    /// regimes while they cannot change says so instead of passing them
    /// again.
    pub fn add_as_before(&mut self, obs: Observation<'_>) {
        self.add_reading(obs, true);
    }

    fn add_reading(&mut self, obs: Observation<'_>, regimes_as_before: bool) {
        self.samples += 1;
        if let Some(i) = Status::ALL.iter().position(|s| *s == obs.status) {
            self.statuses[i] += 1;
        }
        self.start.get_or_insert(obs.time);
        if let Some(end) = self.end {
            // Time moves only forward: a row earlier than the latest adds
            // no time, but its state holds from the latest time on.
            let dt = crate::timefmt::seconds_between(end, obs.time);
            if dt > 0.0 {
                let limit = self.gap_limit(dt);
                if self.gap_after_s.is_none() && self.intervals.len() < INTERVALS_KEPT {
                    self.intervals.push(dt);
                }
                if dt > limit {
                    self.gap_s += dt;
                    self.gap_count += 1;
                    if self.gaps.len() < GAPS_LISTED {
                        self.gaps.push((end, obs.time));
                    }
                } else if let Some(held) = &self.held {
                    match held.range {
                        Some(r) => {
                            if let Some(k) = RANGES.iter().position(|x| *x == r) {
                                self.in_range[k] += dt;
                            }
                        }
                        None => self.no_pressure_s += dt,
                    }
                    for &(i, regime) in &held.regimes {
                        if let (Some((_, secs)), Some(k)) = (
                            self.in_regime.get_mut(i),
                            REGIMES.iter().position(|r| *r == regime),
                        ) {
                            secs[k] += dt;
                        }
                    }
                }
                self.end = Some(obs.time);
            }
        } else {
            self.end = Some(obs.time);
        }
        let p = obs.pressure_pa.filter(|p| p.is_finite() && *p > 0.0);
        if let Some(p) = p {
            self.min = Some(self.min.map_or(p, |m| m.min(p)));
            self.max = Some(self.max.map_or(p, |m| m.max(p)));
            // Neumaier's summation: the sum of 1e7 readings over ten decades
            // keeps its last digits.
            let (sum, c) = &mut self.sum;
            let t = *sum + p;
            *c += if sum.abs() >= p.abs() {
                (*sum - t) + p
            } else {
                (p - t) + *sum
            };
            *sum = t;
            self.valid += 1;
            self.median.add(p.ln());
            for (t, first) in &mut self.thresholds {
                if first.is_none() && p < t.pa {
                    *first = Some(obs.time);
                }
            }
        }
        if obs.exposure_langmuir.is_some() {
            self.exposure = obs.exposure_langmuir;
        }
        let held = self.held.get_or_insert_with(|| Held {
            range: None,
            regimes: Vec::new(),
        });
        held.range = if p.is_some() { obs.range } else { None };
        if regimes_as_before && p.is_some() {
            return;
        }
        held.regimes.clear();
        if p.is_some() {
            for (j, l) in obs.regimes.iter().enumerate() {
                // Lengths come in the same order every time: look there
                // first.
                let i = match self.in_regime.get(j) {
                    Some((name, _)) if *name == l.name => j,
                    _ => match self.in_regime.iter().position(|(n, _)| *n == l.name) {
                        Some(i) => i,
                        None => {
                            self.in_regime.push((l.name.clone(), [0.0; REGIMES.len()]));
                            self.in_regime.len() - 1
                        }
                    },
                };
                held.regimes.push((i, l.regime));
            }
        }
    }

    /// The report so far.
    pub fn summary(&self) -> GaugeSummary {
        let secs = |a: Option<DateTime<Utc>>, b: Option<DateTime<Utc>>| match (a, b) {
            (Some(a), Some(b)) => crate::timefmt::seconds_between(a, b),
            _ => 0.0,
        };
        GaugeSummary {
            id: self.id.clone(),
            samples: self.samples,
            statuses: Status::ALL
                .iter()
                .zip(self.statuses)
                .filter(|(_, n)| *n > 0)
                .map(|(s, n)| (s.as_str().to_string(), n))
                .collect(),
            start: self.start,
            end: self.end,
            duration_s: secs(self.start, self.end),
            min_pa: self.min,
            max_pa: self.max,
            mean_pa: (self.valid > 0).then(|| (self.sum.0 + self.sum.1) / self.valid as f64),
            median_pa: self.median.estimate().map(f64::exp),
            time_in_range_s: RANGES.iter().copied().zip(self.in_range).collect(),
            time_in_regime_s: {
                let mut v: Vec<(String, Vec<(FlowRegime, f64)>)> = self
                    .in_regime
                    .iter()
                    .map(|(name, secs)| {
                        (
                            name.clone(),
                            REGIMES.iter().copied().zip(secs.iter().copied()).collect(),
                        )
                    })
                    .collect();
                v.sort_by(|a, b| a.0.cmp(&b.0));
                v
            },
            time_without_pressure_s: self.no_pressure_s,
            gap_after_s: self
                .gap_after_s
                .or_else(|| (!self.intervals.is_empty()).then(|| self.median_limit(0.0))),
            gap_count: self.gap_count,
            gap_s: self.gap_s,
            gaps: self.gaps.clone(),
            thresholds: self.thresholds.clone(),
            exposure_langmuir: self.exposure,
        }
    }
}

/// One gauge's report.
#[derive(Debug, Clone, PartialEq)]
pub struct GaugeSummary {
    /// Gauge (channel) id.
    pub id: String,
    /// Readings.
    pub samples: u64,
    /// Readings per status word (those that occurred).
    pub statuses: Vec<(String, u64)>,
    /// First reading's time.
    pub start: Option<DateTime<Utc>>,
    /// Latest reading's time.
    pub end: Option<DateTime<Utc>>,
    /// `end − start`, s.
    pub duration_s: f64,
    /// Lowest valid pressure, Pa.
    pub min_pa: Option<f64>,
    /// Highest valid pressure, Pa.
    pub max_pa: Option<f64>,
    /// Mean of the valid pressures (each reading counts once), Pa.
    pub mean_pa: Option<f64>,
    /// Median valid pressure, Pa: a P² estimate.
    pub median_pa: Option<f64>,
    /// Seconds in each range, every range listed.
    pub time_in_range_s: Vec<(VacuumRange, f64)>,
    /// Seconds in each regime, per named length.
    pub time_in_regime_s: Vec<(String, Vec<(FlowRegime, f64)>)>,
    /// Seconds whose reading had no valid pressure.
    pub time_without_pressure_s: f64,
    /// Intervals longer than this were gaps, s.
    pub gap_after_s: Option<f64>,
    /// How many gaps.
    pub gap_count: u64,
    /// Seconds in gaps.
    pub gap_s: f64,
    /// The first [`GAPS_LISTED`] gaps: last reading before, first after.
    pub gaps: Vec<(DateTime<Utc>, DateTime<Utc>)>,
    /// Each threshold with the first time a valid pressure was below it.
    pub thresholds: Vec<(Threshold, Option<DateTime<Utc>>)>,
    /// Cumulative exposure at the end, langmuir.
    pub exposure_langmuir: Option<f64>,
}

impl GaugeSummary {
    /// Seconds accounted for: in ranges, without pressure and in gaps
    /// (equals `duration_s`).
    pub fn accounted_s(&self) -> f64 {
        self.time_in_range_s.iter().map(|(_, s)| s).sum::<f64>()
            + self.time_without_pressure_s
            + self.gap_s
    }
}

/// Rows the report could not use, or used in part, by cause.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Unusable {
    /// Counts per cause (the reader's message with the place left out).
    pub causes: BTreeMap<String, u64>,
}

impl Unusable {
    /// Counts one row under `cause`.
    pub fn count(&mut self, cause: &str) {
        *self.causes.entry(cause.to_string()).or_default() += 1;
    }

    /// Every row counted.
    pub fn total(&self) -> u64 {
        self.causes.values().sum()
    }
}

#[cfg(test)]
mod tests;
