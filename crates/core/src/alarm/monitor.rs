//! The monitor: keeps the latest state of every gauge (true pressure, gas
//! kinetics, exposure, rate of change), drives the alarm rules and gates from
//! it, and turns their transitions into [`Event`]s. Pure: data time only.

use chrono::{DateTime, Utc};

use super::chamber::{AUTO, ChamberPressure, ChamberSource};
use super::event::{Actor, Change, EVENT_VERSION, Event, Operation};
use super::gas_step::{GasChoice, GasOrigin, GasStep};
use super::gate::{Check, Gate, GateMachine, GateState};
use super::quantity::{Class, Quantity};
use super::rate_window::RateWindow;
use super::rule::{
    AlarmState, Band, Deadband, Input, Rule, RuleMachine, Severity, Test, Transition, after,
};
use super::syntax::{CondTest, Condition};
use super::track_map::TrackMap;
use crate::engine::exposure::{Exposure, ExposureStart};
use crate::engine::gauge::GaugeSettings;
use crate::engine::mixture::Mixture;
use crate::engine::{Derived, GaugeModel, NamedLength, Physics, Precomputed};
use crate::sample::{Sample, Status};
use crate::units::{PressureUnit, TemperatureUnit};
use std::sync::Arc;

/// A rule with its optional enabling condition.
#[derive(Debug, Clone, PartialEq)]
pub struct RuleSpec {
    /// The rule.
    pub rule: Rule,
    /// While this is false the rule is suppressed by design.
    pub enable: Option<Condition>,
}

/// How a gauge's readings become true pressures.
#[derive(Debug, Clone)]
pub struct GaugeSetup {
    /// Channel id.
    pub id: String,
    /// Reading → true pressure, for the base gas.
    pub model: GaugeModel,
    /// Gas at the gauge (the base gas, or the gauge's own).
    pub mixture: Mixture,
    /// The settings the model was built from, when the gauge sees the
    /// chamber's gas: its model is rebuilt for the gas in force. `None` for a
    /// gauge with a gas of its own, whose model never changes.
    pub settings: Option<GaugeSettings>,
}

/// Everything the monitor needs, resolved from the configuration.
#[derive(Debug, Clone)]
pub struct MonitorSetup {
    /// Configured gauges; other pressure channels read true pressure in the
    /// chamber's gas.
    pub gauges: Vec<GaugeSetup>,
    /// The chamber's base gas (`[gas]`).
    pub mixture: Mixture,
    /// Gas steps: the first whose conditions hold at a row replaces the
    /// base gas.
    pub gas_steps: Vec<GasStep>,
    /// Named lengths.
    pub lengths: Vec<NamedLength>,
    /// Physics settings.
    pub physics: Physics,
    /// Temperature assumed without a temperature channel, K.
    pub assumed_temperature_k: f64,
    /// Rules.
    pub rules: Vec<RuleSpec>,
    /// Gates.
    pub gates: Vec<Gate>,
    /// A gauge with no reading for this long is stale, s.
    pub stale_after_s: f64,
    /// Window of the rate-of-change fit, s.
    pub rate_window_s: f64,
    /// Severity of the automatic bad-input alarms.
    pub input_severity: Severity,
    /// Gauge used by conditions that name none; without one they watch the
    /// chamber pressure ([`AUTO`]).
    pub default_gauge: Option<String>,
    /// How the chamber pressure is chosen.
    pub chamber: ChamberPressure,
    /// Units for event texts.
    pub pressure_unit: PressureUnit,
    /// Units for event texts.
    pub temperature_unit: TemperatureUnit,
}

impl MonitorSetup {
    /// The setup for a run that wants of the alarms only whether a trip was
    /// active (a report of the readings alone, whose events nobody reads):
    /// the rules that are not trips and the gates go, since neither the
    /// readings, their kinetics, the gas steps nor the chamber pressure
    /// depend on them. Unchanged when the bad-input alarms are trips: which
    /// gauges they watch follows from the rules and gates.
    pub fn trips_only(mut self) -> MonitorSetup {
        if self.input_severity != Severity::Trip {
            self.rules.retain(|r| r.rule.severity == Severity::Trip);
            self.gates.clear();
        }
        self
    }
}

/// What the monitor knows of one channel.
#[derive(Debug, Clone)]
pub struct GaugeTrack {
    /// Last reading's data time.
    pub last_time: Option<DateTime<Utc>>,
    /// Last reading's status.
    pub status: Status,
    /// Last valid reading as indicated, SI.
    pub indicated: Option<f64>,
    /// Whether this is a pressure channel.
    pub is_pressure: bool,
    /// True pressure of the last valid reading, Pa.
    pub pressure_pa: Option<f64>,
    /// The last reading could not be corrected for the gas in force (no
    /// factor for the gas): it has no pressure and no kinetics.
    pub uncorrectable: bool,
    /// Temperature of the last valid reading, K (temperature channels).
    pub temperature_k: Option<f64>,
    /// What the kinetics of the last valid pressure are worked out from
    /// (the gas and temperature in force then): `Some` exactly when
    /// `pressure_pa` is. The results themselves are worked out when asked
    /// ([`GaugeTrack::derived`]), not at every reading.
    kinetics: Option<Arc<Precomputed>>,
    /// Exposure since its start ([`GaugeTrack::exposure_since`]).
    pub exposure: Exposure,
    /// dp/dt, Pa/s (fitted only when some rule, enable condition or gate
    /// condition reads a rate of change; else `None`).
    pub dpdt: Option<f64>,
    /// d log10 p/dt, decades per minute (as `dpdt`).
    pub decades_per_min: Option<f64>,
    window: RateWindow,
    t0: Option<DateTime<Utc>>,
}

impl GaugeTrack {
    /// The kinetics of the last valid pressure: every quantity, worked out
    /// now (allocates; a reader at every reading takes
    /// [`GaugeTrack::kinetics`] and `Precomputed::derive_into` into a
    /// buffer of its own, or the quantities it reads alone).
    pub fn derived(&self) -> Option<Derived> {
        let (pre, p) = self.kinetics()?;
        Some(pre.derive(p))
    }

    /// The kinetics the last valid pressure is worked out with, and that
    /// pressure, Pa: for a reader of one quantity or two
    /// ([`Precomputed::vacuum_range`], [`Precomputed::lengths_into`] …).
    pub fn kinetics(&self) -> Option<(&Precomputed, f64)> {
        Some((self.kinetics.as_deref()?, self.pressure_pa?))
    }

    /// The kinetics of [`GaugeTrack::kinetics`] as shared: a reader that
    /// keeps results between readings tells by it that they still apply.
    pub fn shared_kinetics(&self) -> Option<&Arc<Precomputed>> {
        self.kinetics.as_ref()
    }

    /// Data time the exposure counts from; `None` while it waits for its
    /// start (the pressure to fall below the threshold, or a reset).
    pub fn exposure_since(&self) -> Option<DateTime<Utc>> {
        let since_ms = (self.exposure.since_s()? * 1000.0).round() as i64;
        Some(self.t0? + chrono::Duration::milliseconds(since_ms))
    }

    /// Copies the track into `copy` (reusing its allocations) for
    /// [`GaugeTrack::restore_from`], but for its rate window, which keeps
    /// an undo log from now on instead.
    fn save_into(&mut self, copy: &mut GaugeTrack) {
        // Every field named: a new one must be decided here.
        let GaugeTrack {
            last_time,
            status,
            indicated,
            is_pressure,
            pressure_pa,
            uncorrectable,
            temperature_k,
            kinetics,
            exposure,
            dpdt,
            decades_per_min,
            window,
            t0,
        } = self;
        copy.last_time = *last_time;
        copy.status = *status;
        copy.indicated = *indicated;
        copy.is_pressure = *is_pressure;
        copy.pressure_pa = *pressure_pa;
        copy.uncorrectable = *uncorrectable;
        copy.temperature_k = *temperature_k;
        copy.kinetics.clone_from(kinetics);
        copy.exposure.clone_from(exposure);
        copy.dpdt = *dpdt;
        copy.decades_per_min = *decades_per_min;
        copy.t0 = *t0;
        window.checkpoint();
    }

    /// Returns to the state [`GaugeTrack::save_into`] copied into `saved`
    /// (which is left holding this one's, its window empty).
    fn restore_from(&mut self, saved: &mut GaugeTrack) {
        let mut window = std::mem::take(&mut self.window);
        window.rollback();
        std::mem::swap(self, saved);
        self.window = window;
    }

    fn new(exposure: ExposureStart) -> Self {
        GaugeTrack {
            last_time: None,
            status: Status::Stale,
            indicated: None,
            is_pressure: true,
            pressure_pa: None,
            uncorrectable: false,
            temperature_k: None,
            kinetics: None,
            exposure: Exposure::with_start(60.0, exposure),
            dpdt: None,
            decades_per_min: None,
            window: RateWindow::default(),
            t0: None,
        }
    }

    fn fit_rates(&mut self) {
        let slopes = self.window.slopes();
        self.dpdt = slopes.map(|s| s.0);
        self.decades_per_min = slopes.map(|s| s.1);
    }
}

/// How many gas-and-temperature kinetics the monitor keeps.
const KINETICS_CACHED: usize = 16;

/// What a cached [`Precomputed`] was worked out for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct KineticsKey {
    /// The gauge whose own (fixed) gas it is; `None`: the chamber's gas.
    own_gas_of: Option<usize>,
    /// The chamber gas's generation (0 for a gauge's own gas).
    generation: u64,
    temperature_bits: u64,
}

#[derive(Debug, Clone)]
struct CachedKinetics {
    key: KineticsKey,
    /// Shared with the monitor's clones (a replay's keyframes, a frozen
    /// display): never changed once made.
    pre: Arc<Precomputed>,
    /// Worked out from the gas alone (`Precomputed::new`: a mixture's most
    /// probable speed searched for), not scaled from another temperature.
    /// Such an entry is the one other temperatures of its gas are scaled
    /// from, and is kept when the cache is full.
    base: bool,
}

/// A copy of a [`Monitor`] without its rate windows' points, which went to
/// bytes kept elsewhere ([`Monitor::pack`]): most of a monitor's size, and
/// nothing a stored copy needs until it is used again.
#[derive(Debug, Clone)]
pub struct PackedMonitor(Monitor);

impl PackedMonitor {
    /// The monitor again, with the points [`Monitor::pack`] wrote to
    /// `points`.
    pub fn unpack(&self, mut points: &[u8]) -> Result<Monitor, String> {
        let mut m = self.0.clone();
        for (_, t) in m.tracks.iter_mut() {
            t.window.read_points(&mut points)?;
        }
        if !points.is_empty() {
            return Err("the rate windows' points are longer than the monitor's".into());
        }
        Ok(m)
    }
}

/// A view of one alarm for displays.
#[derive(Debug, Clone)]
pub struct AlarmView<'a> {
    /// The rule.
    pub rule: &'a Rule,
    /// Its state.
    pub state: AlarmState,
    /// Since when.
    pub since: Option<DateTime<Utc>>,
    /// The last value, for people.
    pub value_text: Option<String>,
    /// The test, for people.
    pub threshold_text: String,
    /// End of a shelving.
    pub shelved_until: Option<DateTime<Utc>>,
}

/// The monitor.
#[derive(Debug, Clone)]
pub struct Monitor {
    /// Shared with the monitor's clones until an edit (a threshold or a
    /// hold) changes it.
    setup: std::sync::Arc<MonitorSetup>,
    tracks: TrackMap<GaugeTrack>,
    temperature_k: Option<f64>,
    /// Kinetics per gas and temperature, worked out once
    /// ([`Precomputed`]).
    kinetics: Vec<CachedKinetics>,
    /// The time [`Monitor::advance_to`] last went to, until the next push.
    advanced_to: Option<DateTime<Utc>>,
    /// No deadline falls before this time: what [`Monitor::advance_to`]
    /// needs not look for at each reading. Worked out after a search that
    /// found nothing due, it stays a lower bound while the only changes are
    /// readings in time order and evaluations in which no machine moves
    /// (a deadline then only moves later); everything else clears it.
    deadline_floor: Option<DateTime<Utc>>,
    /// A reading before this time would go stale before the floor: it
    /// clears the floor.
    floor_readings_from: DateTime<Utc>,
    /// Use [`Monitor::deadline_floor`] (off in tests that compare against a
    /// search at every reading).
    floor_on: bool,
    /// Every gauge an input alarm watches has a track (no "never seen"
    /// deadline to look for).
    inputs_seen: bool,
    /// A row's tracks as they were before it, while a gas step is decided
    /// on it (whether each existed, and its copy), kept for the copies'
    /// allocations.
    trial: Scratch<(bool, GaugeTrack)>,
    rules: Vec<(RuleMachine, Option<Condition>)>,
    /// Per rule, the first rule on the same gauge and quantity (its input
    /// is read once per evaluation).
    rule_input: Vec<usize>,
    /// When every rule compares a value with a threshold and none has an
    /// enable condition: the rules grouped by input (gauge and quantity),
    /// each group in order. While each group's value stays in the band in
    /// which every rule of it is quiet, the rules are passed over with one
    /// test per group ([`Bands`]); else none.
    groups: Vec<Vec<usize>>,
    /// Per rule, its group.
    group_of: Vec<Option<usize>>,
    bands: Bands,
    inputs: Vec<RuleMachine>,
    gates: Vec<GateMachine>,
    links: Vec<Link>,
    /// Data time of the first evaluation: a watched gauge that has sent
    /// nothing since then goes stale after `stale_after`.
    origin: Option<DateTime<Utc>>,
    /// Data time of the last evaluation.
    evaluated: Option<DateTime<Utc>>,
    /// The clock was started by [`Monitor::start`] (live, before any data);
    /// the first row's own time takes over from it.
    provisional: bool,
    now: Option<DateTime<Utc>>,
    trip_seen: bool,
    /// Whether any alarm has the trip severity: the configured rules their
    /// own (edits change thresholds and holds, not severities), the
    /// automatic ones the input severity.
    has_trips: bool,
    /// Whether anything reads a rate of change (a rule, an enable
    /// condition, a gate condition): only then are the rate windows kept
    /// and fitted at each reading (edits change thresholds, not
    /// quantities).
    fit_rates: bool,
    gas: GasNow,
}

/// The gas in force and each configured gauge's model for it.
#[derive(Debug, Clone)]
struct GasNow {
    mixture: Mixture,
    origin: GasOrigin,
    /// The operator's choice and who made it.
    choice: (GasChoice, String),
    /// The gas the log's gas column gave last.
    log: Option<Mixture>,
    /// Per configured gauge (same order): its model for the gas in force,
    /// `None` when none can be built (its readings are uncorrectable).
    models: Vec<Option<GaugeModel>>,
    /// Counts the changes of `mixture` (for the kinetics cache).
    generation: u64,
}

/// Each gauge's model for `gas`.
fn models_for(gauges: &[GaugeSetup], base: &Mixture, gas: &Mixture) -> Vec<Option<GaugeModel>> {
    gauges
        .iter()
        .map(|g| match &g.settings {
            Some(_) if gas == base => Some(g.model.clone()),
            Some(s) => GaugeModel::for_gas(
                &g.id,
                &GaugeSettings {
                    mixture: gas.clone(),
                    ..s.clone()
                },
            )
            .ok(),
            None => Some(g.model.clone()),
        })
        .collect()
}

/// A source's connection, watched by a `<id>.link` alarm.
#[derive(Debug, Clone)]
struct Link {
    machine: RuleMachine,
    up: bool,
}

/// Rules for the automatic alarms: a gauge without valid readings
/// (`<gauge>.input`) and a source that is not connected (`<source>.link`).
fn automatic_rule(
    id: String,
    label: String,
    gauge: String,
    severity: Severity,
    on_delay_s: f64,
) -> Rule {
    Rule {
        id,
        label,
        gauge,
        quantity: Quantity::Pressure,
        test: Test::Above(0.5),
        deadband: Deadband::None,
        on_delay_s,
        off_delay_s: 0.0,
        severity,
        latching: false,
    }
}

impl Monitor {
    /// A monitor in the normal state, before any data.
    pub fn new(setup: MonitorSetup) -> Self {
        let rules = setup
            .rules
            .iter()
            .map(|r| (RuleMachine::new(r.rule.clone()), r.enable.clone()))
            .collect();
        let rule_input: Vec<usize> = setup
            .rules
            .iter()
            .map(|r| {
                setup
                    .rules
                    .iter()
                    .position(|o| {
                        o.rule.gauge == r.rule.gauge && o.rule.quantity == r.rule.quantity
                    })
                    .unwrap_or(0)
            })
            .collect();
        // Grouped only when every rule is: a value against a threshold, with
        // no enable condition. Then a row in every group's band passes over
        // all the rules with a test per group; with other rules among them
        // the rules are taken one by one (each quiet test costs about what
        // a band test does).
        let mut groups: Vec<Vec<usize>> = Vec::new();
        let mut group_of = vec![None; setup.rules.len()];
        let groupable = |r: &RuleSpec| {
            r.enable.is_none() && matches!(r.rule.test, Test::Above(_) | Test::Below(_))
        };
        let grouped = if setup.rules.iter().all(groupable) {
            setup.rules.len()
        } else {
            0
        };
        for i in 0..grouped {
            let input = rule_input[i];
            let g = match groups.iter().position(|g| rule_input[g[0]] == input) {
                Some(g) => g,
                None => {
                    groups.push(Vec::new());
                    groups.len() - 1
                }
            };
            groups[g].push(i);
            group_of[i] = Some(g);
        }
        let bands = Bands {
            on: !groups.is_empty(),
            band: vec![None; groups.len()],
            passed: vec![false; groups.len()],
        };
        // A bad-input alarm for every configured gauge and every gauge a
        // rule or gate looks at.
        let mut watched: Vec<String> = setup
            .gauges
            .iter()
            .map(|g| g.id.clone())
            .chain(setup.rules.iter().map(|r| r.rule.gauge.clone()))
            .collect();
        for g in &setup.gates {
            for c in &g.conditions {
                if let Some(id) = c.gauge.clone().or(setup.default_gauge.clone()) {
                    watched.push(id);
                }
            }
        }
        watched.extend(setup.chamber.order.iter().cloned());
        watched.extend(setup.chamber.fixed.values().cloned());
        watched.retain(|g| g != AUTO);
        watched.sort();
        watched.dedup();
        let inputs = watched
            .into_iter()
            .map(|g| RuleMachine::new(input_rule(&g, setup.input_severity)))
            .collect();
        let gates = setup.gates.iter().cloned().map(GateMachine::new).collect();
        let gas = GasNow {
            mixture: setup.mixture.clone(),
            origin: GasOrigin::Base,
            choice: (GasChoice::Auto, String::new()),
            log: None,
            models: setup.gauges.iter().map(|g| Some(g.model.clone())).collect(),
            generation: 0,
        };
        let has_trips = setup.input_severity == Severity::Trip
            || setup
                .rules
                .iter()
                .any(|r| r.rule.severity == Severity::Trip);
        let is_rate =
            |q: &Quantity| matches!(q, Quantity::RateOfChange | Quantity::DecadesPerMinute);
        // Every reader of a rate: rules, their enable conditions, gates and
        // gas steps (a step on a steady pressure, say).
        let fit_rates = setup.rules.iter().any(|r| {
            is_rate(&r.rule.quantity) || r.enable.as_ref().is_some_and(|c| is_rate(&c.quantity))
        }) || setup
            .gates
            .iter()
            .any(|g| g.conditions.iter().any(|c| is_rate(&c.quantity)))
            || setup
                .gas_steps
                .iter()
                .any(|g| g.when.iter().any(|c| is_rate(&c.quantity)));
        Monitor {
            has_trips,
            fit_rates,
            gas,
            setup: std::sync::Arc::new(setup),
            tracks: TrackMap::default(),
            temperature_k: None,
            kinetics: Vec::new(),
            advanced_to: None,
            deadline_floor: None,
            floor_readings_from: DateTime::<Utc>::MAX_UTC,
            floor_on: true,
            inputs_seen: false,
            trial: Scratch::default(),
            rules,
            rule_input,
            groups,
            group_of,
            bands,
            inputs,
            gates,
            links: Vec::new(),
            origin: None,
            evaluated: None,
            provisional: false,
            now: None,
            trip_seen: false,
        }
    }

    /// The same monitor taking every rule at every evaluation (the
    /// reference the groups' bands are tested against).
    #[cfg(test)]
    pub(crate) fn without_bands(mut self) -> Self {
        self.bands.on = false;
        self.bands.forget();
        self
    }

    /// The same monitor looking for deadlines at every reading (the
    /// reference [`Monitor::deadline_floor`] is tested against).
    #[cfg(test)]
    pub(crate) fn without_deadline_floor(mut self) -> Self {
        self.floor_on = false;
        self.deadline_floor = None;
        self
    }

    /// Watches a channel a source announced before sending anything: from
    /// now on it has a `<id>.input` alarm, so silence is an alarm too.
    pub fn expect_channel(&mut self, id: &str) {
        self.deadline_floor = None;
        if !self.inputs.iter().any(|r| r.rule.gauge == id) {
            self.inputs
                .push(RuleMachine::new(input_rule(id, self.setup.input_severity)));
            self.inputs_seen = self.tracks.contains_key(id) && self.inputs_seen;
        }
    }

    /// Watches a source's connection with a `<id>.link` alarm, active once
    /// the source has not been connected for `stale_after` of data time.
    pub fn add_link(&mut self, id: &str, label: &str) {
        self.deadline_floor = None;
        if self.links.iter().any(|l| l.machine.rule.gauge == id) {
            return;
        }
        self.links.push(Link {
            machine: RuleMachine::new(automatic_rule(
                format!("{id}.link"),
                format!("{label}: not connected"),
                id.to_string(),
                self.setup.input_severity,
                self.setup.stale_after_s,
            )),
            up: false,
        });
    }

    /// A source connected or disconnected at data time `now` (the live data
    /// clock). The alarm follows on the next evaluation.
    pub fn set_link(&mut self, id: &str, up: bool, now: DateTime<Utc>) -> Vec<Event> {
        let mut events = self.advance_to(now);
        self.deadline_floor = None;
        if let Some(l) = self.links.iter_mut().find(|l| l.machine.rule.gauge == id)
            && l.up != up
        {
            l.up = up;
            let now = self.now.unwrap_or(now);
            events.extend(self.evaluate(now));
        }
        events
    }

    /// Starts the data clock at `t` without a reading (live mode: the time
    /// the sources were started), so that gauges and sources that never send
    /// anything go stale from then.
    pub fn start(&mut self, t: DateTime<Utc>) -> Vec<Event> {
        if self.origin.is_some() {
            return Vec::new();
        }
        self.deadline_floor = None;
        self.origin = Some(t);
        self.provisional = true;
        self.now = Some(self.now.map_or(t, |n| n.max(t)));
        self.evaluate(t)
    }

    /// The first row arrived after a provisional start: when the data's
    /// clock is behind the one that started the monitor (a device clock, a
    /// followed file of older rows), the data's clock takes over, and every
    /// running delay starts again on it.
    fn take_over_clock(&mut self, t: DateTime<Utc>) {
        if !std::mem::take(&mut self.provisional) || self.now.is_none_or(|n| t >= n) {
            return;
        }
        self.origin = Some(t);
        self.now = Some(t);
        self.evaluated = None;
        self.deadline_floor = None;
        self.bands.forget();
        for (r, _) in &mut self.rules {
            r.restart_delays();
        }
        for r in &mut self.inputs {
            r.restart_delays();
        }
        for l in &mut self.links {
            l.machine.restart_delays();
        }
        for g in &mut self.gates {
            g.restart_hold();
        }
    }

    /// A copy of the monitor with its rate windows' points appended to
    /// `points` instead ([`PackedMonitor::unpack`] gives it back).
    pub fn pack(&self, points: &mut Vec<u8>) -> PackedMonitor {
        let mut m = self.clone();
        for (_, t) in m.tracks.iter_mut() {
            t.window.write_points(points);
        }
        PackedMonitor(m)
    }

    /// The setup it runs with.
    pub fn setup(&self) -> &MonitorSetup {
        &self.setup
    }

    /// Latest data time seen.
    pub fn now(&self) -> Option<DateTime<Utc>> {
        self.now
    }

    /// What is known of a channel.
    pub fn track(&self, id: &str) -> Option<&GaugeTrack> {
        self.tracks.get(id)
    }

    /// Every channel seen, by id.
    pub fn tracks(&self) -> impl Iterator<Item = (&String, &GaugeTrack)> {
        self.tracks.iter()
    }

    /// Whether a trip alarm has been active at any time.
    pub fn trip_seen(&self) -> bool {
        self.trip_seen
    }

    /// Whether a trip alarm is active now.
    pub fn trip_active(&self) -> bool {
        self.all_rules()
            .any(|r| r.rule.severity == Severity::Trip && r.state().is_active())
    }

    fn all_rules(&self) -> impl Iterator<Item = &RuleMachine> {
        self.rules
            .iter()
            .map(|(r, _)| r)
            .chain(self.inputs.iter())
            .chain(self.links.iter().map(|l| &l.machine))
    }

    /// Every alarm (configured rules, then bad-input alarms, then source
    /// links).
    pub fn alarms(&self) -> Vec<AlarmView<'_>> {
        self.all_rules()
            .map(|r| AlarmView {
                rule: &r.rule,
                state: r.state(),
                since: r.since(),
                value_text: if r.rule.is_link() {
                    self.links
                        .iter()
                        .find(|l| l.machine.rule.id == r.rule.id)
                        .map(|l| if l.up { "connected" } else { "not connected" }.to_string())
                } else if r.rule.is_input() {
                    match self.tracks.get(&r.rule.gauge) {
                        Some(t) if self.now.is_some_and(|n| self.stale(t, n)) => {
                            Some("stale".into())
                        }
                        Some(t) => Some(t.status.as_str().to_string()),
                        None if self.never_seen_stale() => Some("no data".into()),
                        None => None,
                    }
                } else {
                    r.last_value()
                        .and_then(|v| self.input_text(&r.rule.quantity, v))
                },
                threshold_text: self.test_text(&r.rule),
                shelved_until: r.shelved_until(),
            })
            .collect()
    }

    /// Every gate.
    pub fn gates(&self) -> &[GateMachine] {
        &self.gates
    }

    /// Why gate `index` (of [`Monitor::gates`]) is not ready, as of the last
    /// evaluation: its first failing condition and the value that fails
    /// it, or how long its conditions still have to hold. `None` when it is
    /// ready. Worked out when asked: the gates are checked without it at
    /// every reading.
    pub fn gate_reason(&self, index: usize) -> Option<String> {
        let g = self.gates.get(index)?;
        if g.state() == GateState::Ready {
            return None;
        }
        if let (Some((j, held)), Some(now)) = (g.failing_held(), self.evaluated)
            && let Some(c) = g.gate.conditions.get(j)
            && let Check::Fails(why) | Check::Unknown(why) = self.check(c, now, held, true)
        {
            return Some(format!("{}: {why}", c.text));
        }
        g.reason()
    }

    /// Records a row of readings (one line or record) and evaluates: first
    /// every deadline up to the row's time is run (so a delay or a staleness
    /// that ran out between rows has its event at its own time), then the
    /// row is taken and the rules evaluated at its time.
    pub fn push(&mut self, samples: &[Sample]) -> Vec<Event> {
        let Some(time) = samples.iter().map(|s| s.time).max() else {
            return Vec::new();
        };
        self.take_over_clock(time);
        // A caller that has just advanced to the row's time (the pipeline
        // does, to pass on deadline events before the row) need not again.
        let mut events = if self.advanced_to.take() == Some(time) {
            Vec::new()
        } else {
            self.advance_to(time)
        };
        let now = self.now.map_or(time, |n| n.max(time));
        // Gas steps are decided on the row taken with the gas in force;
        // when they change the gas, the row is taken again with the new one.
        let steps = !self.setup.gas_steps.is_empty()
            && self.gas.choice.0 == GasChoice::Auto
            && self.gas.log.is_none();
        // Only the row's tracks change: each is copied into the trial
        // buffer (whose allocations are reused), its rate window keeping an
        // undo log rather than being copied.
        let start = self.setup.physics.exposure_start;
        let saved_temperature = steps.then(|| {
            for (k, id) in first_channels(samples).enumerate() {
                if self.trial.0.len() == k {
                    self.trial.0.push((false, GaugeTrack::new(start)));
                }
                let (existed, copy) = &mut self.trial.0[k];
                *existed = match self.tracks.get_mut(id) {
                    Some(t) => {
                        t.save_into(copy);
                        true
                    }
                    None => false,
                };
            }
            self.temperature_k
        });
        for s in samples {
            self.take(s);
        }
        if let Some(temperature_k) = saved_temperature {
            // Compared where they lie: the gas is copied only on a change.
            let change = match self.stepped_gas(now) {
                Some(step) => {
                    step.mixture != self.gas.mixture
                        || !matches!(&self.gas.origin, GasOrigin::Step(id) if *id == step.id)
                }
                None => {
                    self.setup.mixture != self.gas.mixture || self.gas.origin != GasOrigin::Base
                }
            };
            // Decided on the row taken, before the tracks go back.
            let wanted = change.then(|| self.wanted_gas(now));
            for (k, id) in first_channels(samples).enumerate() {
                let (existed, copy) = &mut self.trial.0[k];
                match (self.tracks.get_mut(id), *existed) {
                    (Some(t), true) if change => t.restore_from(copy),
                    (Some(_), false) if change => {
                        self.tracks.remove(id);
                        self.inputs_seen = false;
                    }
                    (Some(t), _) => t.window.commit(),
                    (None, _) => {}
                }
            }
            if let Some((mixture, origin)) = wanted {
                // Tracks went back to their state before the row.
                self.deadline_floor = None;
                self.temperature_k = temperature_k;
                events.push(self.apply_gas(mixture, origin, None, now));
                for s in samples {
                    self.take(s);
                }
            }
        }
        events.extend(self.evaluate(now));
        events
    }

    /// The gas in force and where it came from.
    pub fn gas(&self) -> (&Mixture, &GasOrigin) {
        (&self.gas.mixture, &self.gas.origin)
    }

    /// The operator's choice of gas ([`GasChoice::Auto`] unless changed).
    pub fn gas_choice(&self) -> &GasChoice {
        &self.gas.choice.0
    }

    /// The gas a configured gauge sees now.
    pub fn gauge_gas(&self, id: &str) -> Option<&Mixture> {
        let g = self.setup.gauges.iter().find(|g| g.id == id)?;
        Some(if g.settings.is_some() {
            &self.gas.mixture
        } else {
            &g.mixture
        })
    }

    /// The gas that should be in force at `now`: the operator's fixed
    /// choice, else the log's gas, else the first step that holds, else
    /// the base gas.
    fn wanted_gas(&self, now: DateTime<Utc>) -> (Mixture, GasOrigin) {
        if let (GasChoice::Fixed(m), who) = &self.gas.choice {
            return (m.clone(), GasOrigin::Operator(who.clone()));
        }
        if let Some(m) = &self.gas.log {
            return (m.clone(), GasOrigin::Log);
        }
        self.stepped_gas(now)
            .map_or((self.setup.mixture.clone(), GasOrigin::Base), |step| {
                (step.mixture.clone(), GasOrigin::Step(step.id.clone()))
            })
    }

    /// The first configured gas step whose window and conditions hold at
    /// `now`; `None`: the base gas.
    fn stepped_gas(&self, now: DateTime<Utc>) -> Option<&super::gas_step::GasStep> {
        self.setup.gas_steps.iter().find(|step| {
            step.in_window(now)
                && step
                    .when
                    .iter()
                    .all(|c| matches!(self.check(c, now, false, false), Check::Holds))
        })
    }

    /// Puts `mixture` in force: rebuilds the models of the gauges that see
    /// the chamber's gas and restarts their rate fits (a rate across a change
    /// of correction is not the chamber's). Returns the event.
    fn apply_gas(
        &mut self,
        mixture: Mixture,
        origin: GasOrigin,
        who: Option<&Actor>,
        now: DateTime<Utc>,
    ) -> Event {
        self.deadline_floor = None;
        let from = self.gas.mixture.label();
        let to = mixture.label();
        self.gas.models = models_for(&self.setup.gauges, &self.setup.mixture, &mixture);
        self.gas.mixture = mixture;
        self.gas.generation += 1;
        self.gas.origin = origin;
        for g in self
            .setup
            .gauges
            .iter()
            .filter(|g| g.settings.is_some() && g.model.kind.is_gas_dependent())
        {
            if let Some(t) = self.tracks.get_mut(&g.id) {
                t.window.clear();
                t.dpdt = None;
                t.decades_per_min = None;
            }
        }
        let origin = self.gas.origin.to_string();
        let by = who.map(|w| format!(" by {}", w.user)).unwrap_or_default();
        Event {
            v: EVENT_VERSION,
            time: now,
            wall_time: who.and_then(|w| w.wall_time),
            text: format!("Gas in force: {from} -> {to} ({origin}){by}"),
            change: Change::Gas { from, to },
            id: "gas".into(),
            label: "Gas in force".into(),
            severity: None,
            gauge: None,
            quantity: None,
            value: None,
            value_text: Some(origin),
            threshold: None,
            operation: who.map(|_| Operation::SetGas),
            user: who.map(|w| w.user.clone()),
        }
    }

    /// Corrects every channel's last valid reading again (after an
    /// operator's change of gas between rows); exposure and rate windows
    /// keep what they counted.
    fn recorrect_latest(&mut self) {
        let latest: Vec<(String, f64)> = self
            .tracks
            .iter()
            .filter(|(_, t)| t.is_pressure && t.status == Status::Ok)
            .filter_map(|(id, t)| Some((id.clone(), t.indicated?)))
            .collect();
        for (id, v) in latest {
            let c = self.corrected(&id, v);
            if let Some(t) = self.tracks.get_mut(&id) {
                t.uncorrectable = c == Err(true);
                t.pressure_pa = c.as_ref().ok().map(|c| c.0);
                t.kinetics = c.ok().map(|c| c.1);
            }
        }
    }

    /// An operator chooses the gas: one gas or mixture until changed, or
    /// [`GasChoice::Auto`] (config steps, the log, the base gas). The
    /// latest readings are corrected again at once. Returns the audit event.
    pub fn set_gas(&mut self, choice: GasChoice, who: &Actor, now: DateTime<Utc>) -> Vec<Event> {
        let now = self.op_time(now);
        self.gas.choice = (choice, who.user.clone());
        let (mixture, origin) = self.wanted_gas(now);
        let e = self.apply_gas(mixture, origin, Some(who), now);
        self.recorrect_latest();
        vec![e]
    }

    /// The log's gas column gave `mixture` at data time `now` (`None`: the
    /// column is empty, the config decides again). Returns the event of a
    /// change.
    pub fn set_log_gas(&mut self, mixture: Option<Mixture>, now: DateTime<Utc>) -> Vec<Event> {
        if self.gas.log == mixture {
            return Vec::new();
        }
        self.gas.log = mixture;
        let (m, origin) = self.wanted_gas(now);
        if m == self.gas.mixture && origin == self.gas.origin {
            return Vec::new();
        }
        let e = self.apply_gas(m, origin, None, now);
        self.recorrect_latest();
        vec![e]
    }

    /// True pressure and kinetics of reading `v` (SI) of pressure channel
    /// `channel` with the gas in force; `None` when it is not a usable
    /// pressure, with whether that is because no correction exists for the
    /// gas (the reading is uncorrectable).
    fn corrected(&mut self, channel: &str, v: f64) -> Result<(f64, Arc<Precomputed>), bool> {
        let (p, i) = self.corrected_at(channel, v)?;
        Ok((p, Arc::clone(&self.kinetics[i].pre)))
    }

    /// The true pressure of reading `v` of `channel`, and the index in the
    /// kinetics cache of the gas and temperature it is derived with.
    fn corrected_at(&mut self, channel: &str, v: f64) -> Result<(f64, usize), bool> {
        let gauge = self.setup.gauges.iter().position(|g| g.id == channel);
        let (p, mixture) = match gauge {
            Some(i) => {
                let g = &self.setup.gauges[i];
                let mixture = if g.settings.is_some() {
                    &self.gas.mixture
                } else {
                    &g.mixture
                };
                let p = self
                    .gas
                    .models
                    .get(i)
                    .and_then(Option::as_ref)
                    .map_or(f64::NAN, |m| m.true_pressure(v));
                (p, mixture)
            }
            None => (v, &self.gas.mixture),
        };
        if !(p.is_finite() && p > 0.0) {
            return Err(p.is_nan());
        }
        let t = self
            .temperature_k
            .unwrap_or(self.setup.assumed_temperature_k);
        // The gauge's own gas does not change; the chamber's gas is told
        // apart by its generation.
        let own = gauge.filter(|i| self.setup.gauges[*i].settings.is_none());
        let key = KineticsKey {
            own_gas_of: own,
            generation: if own.is_some() {
                0
            } else {
                self.gas.generation
            },
            temperature_bits: t.to_bits(),
        };
        if let Some(i) = self.kinetics.iter().position(|k| k.key == key) {
            return Ok((p, i));
        }
        // The same gas at another temperature scales what it can, always
        // from the gas's base (so that a temperature new at every row does
        // not search a mixture's speed distribution again whenever the
        // cache fills, and every temperature is scaled from the same one).
        let base = self.kinetics.iter().find(|k| {
            k.base && k.key.own_gas_of == key.own_gas_of && k.key.generation == key.generation
        });
        let (pre, is_base) = match base {
            Some(k) => (
                k.pre
                    .at_temperature(t, mixture, &self.setup.lengths, &self.setup.physics),
                false,
            ),
            None => (
                Precomputed::new(t, mixture, &self.setup.lengths, &self.setup.physics),
                true,
            ),
        };
        if self.kinetics.len() >= KINETICS_CACHED {
            // Full: the bases stay (unless the gas has changed so often
            // that they alone would fill half of it).
            self.kinetics.retain(|k| k.base);
            if self.kinetics.len() >= KINETICS_CACHED / 2 {
                self.kinetics.clear();
            }
        }
        self.kinetics.push(CachedKinetics {
            key,
            pre: Arc::new(pre),
            base: is_base,
        });
        Ok((p, self.kinetics.len() - 1))
    }

    /// Advances data time to `t` without new readings: evaluates at each
    /// deadline up to `t`, in order, and nowhere else. How often this is
    /// called does not change the events (replay at any speed, record and
    /// the report give the same list for the same log).
    pub fn advance_to(&mut self, t: DateTime<Utc>) -> Vec<Event> {
        let mut events = Vec::new();
        if self.origin.is_none() {
            self.origin = Some(t);
            self.deadline_floor = None;
        }
        if !(self.floor_on && self.deadline_floor.is_some_and(|f| t < f)) {
            while let Some(d) = self.next_deadline_by(t) {
                events.extend(self.evaluate(d));
            }
            // Links and gates are updated at every evaluation and clear the
            // floor each time: with them, working one out is wasted.
            if self.floor_on && self.links.is_empty() && self.gates.is_empty() {
                let floor = self
                    .deadline_search(None)
                    .unwrap_or(DateTime::<Utc>::MAX_UTC);
                self.deadline_floor = Some(floor);
                self.floor_readings_from = floor
                    .checked_sub_signed(chrono::Duration::milliseconds(self.stale_ms() + 1))
                    .unwrap_or(DateTime::<Utc>::MIN_UTC);
            }
        }
        self.now = Some(self.now.map_or(t, |n| n.max(t)));
        self.advanced_to = Some(t);
        events
    }

    /// Same as [`Monitor::advance_to`].
    pub fn tick(&mut self, now: DateTime<Utc>) -> Vec<Event> {
        self.advance_to(now)
    }

    /// The next data time after the last evaluation at which something
    /// changes without a new reading: a gauge goes stale, an on- or
    /// off-delay runs out, a shelving expires, a gate's hold is complete.
    pub fn next_deadline(&self) -> Option<DateTime<Utc>> {
        self.deadline_search(None)
    }

    /// [`Monitor::next_deadline`] when it is at or before `t`, else `None`:
    /// what [`Monitor::advance_to`] asks at every reading. The stale
    /// deadlines are then tested by the time since the reading (no date
    /// arithmetic unless one is due).
    fn next_deadline_by(&self, t: DateTime<Utc>) -> Option<DateTime<Utc>> {
        self.deadline_search(Some(t))
    }

    /// The earliest deadline after the last evaluation (and at or before
    /// `by`, when given).
    fn deadline_search(&self, by: Option<DateTime<Utc>>) -> Option<DateTime<Utc>> {
        let stale_ms = self.stale_ms();
        // Stale is "more than stale_after since", so one millisecond past.
        let stale_at = |since: DateTime<Utc>| {
            if by.is_some_and(|t| crate::timefmt::millis_between(since, t) <= stale_ms) {
                return None;
            }
            since.checked_add_signed(chrono::Duration::milliseconds(stale_ms + 1))
        };
        // Adding the same span keeps the order: the earliest reading goes
        // stale first.
        let mut earliest: Option<DateTime<Utc>> = None;
        for t in self.tracks.values() {
            if let Some(l) = t.last_time
                && earliest.is_none_or(|e| l < e)
            {
                earliest = Some(l);
            }
        }
        let mut first = earliest.and_then(stale_at);
        if first.is_some_and(|d| self.evaluated.is_some_and(|e| d <= e)) {
            // The earliest reading went stale at an evaluation already
            // made (a channel that stopped): the next is another's.
            first = self
                .tracks
                .values()
                .filter_map(|t| t.last_time)
                .filter_map(stale_at)
                .filter(|d| self.evaluated.is_none_or(|e| *d > e))
                .min();
        }
        let mut best = None;
        let mut consider = |d: DateTime<Utc>| {
            if by.is_none_or(|t| d <= t)
                && self.evaluated.is_none_or(|e| d > e)
                && best.is_none_or(|b| d < b)
            {
                best = Some(d);
            }
        };
        if let Some(d) = first {
            consider(d);
        }
        if !self.inputs_seen
            && self
                .inputs
                .iter()
                .any(|r| !self.tracks.contains_key(&r.rule.gauge))
            && let Some(d) = self.origin.and_then(stale_at)
        {
            consider(d);
        }
        for (r, _) in &self.rules {
            if let Some(d) = r.deadline() {
                consider(d);
            }
        }
        for r in &self.inputs {
            if let Some(d) = r.deadline() {
                consider(d);
            }
        }
        for l in &self.links {
            if let Some(d) = l.machine.deadline() {
                consider(d);
            }
        }
        for g in &self.gates {
            if let Some(d) = g.deadline() {
                consider(d);
            }
        }
        best
    }

    /// `stale_after` in whole milliseconds.
    fn stale_ms(&self) -> i64 {
        let stale_ms = (self.setup.stale_after_s * 1000.0 + 1e-6).floor();
        if stale_ms.is_finite() && stale_ms < 1e15 {
            stale_ms as i64
        } else {
            1_000_000_000_000_000
        }
    }

    fn never_seen_stale(&self) -> bool {
        match (self.origin, self.now) {
            (Some(o), Some(n)) => crate::timefmt::seconds_between(o, n) > self.setup.stale_after_s,
            _ => false,
        }
    }

    fn take(&mut self, s: &Sample) {
        let corrected = s
            .si()
            .filter(|_| s.unit.is_pressure())
            .map(|v| self.corrected_at(&s.channel, v));
        let start = self.setup.physics.exposure_start;
        let (at, made) = self
            .tracks
            .get_or_insert_with(&s.channel, || GaugeTrack::new(start));
        if made {
            self.inputs_seen = self
                .inputs
                .iter()
                .all(|r| self.tracks.contains_key(&r.rule.gauge));
        }
        let Some(track) = self.tracks.at_mut(at) else {
            return;
        };
        // A new channel, or a reading that goes stale before the floor
        // (time went back, a channel that had stopped).
        if made || s.time < self.floor_readings_from {
            self.deadline_floor = None;
        }
        track.last_time = Some(s.time);
        track.status = s.status();
        track.is_pressure = s.unit.is_pressure();
        let Some(v) = s.si() else {
            track.exposure.interrupt();
            track.window.clear();
            track.dpdt = None;
            track.decades_per_min = None;
            return;
        };
        track.indicated = Some(v);
        if !s.unit.is_pressure() {
            track.temperature_k = Some(v);
            self.temperature_k = Some(v);
            return;
        }
        let Some(Ok((p, k))) = corrected else {
            track.uncorrectable = corrected == Some(Err(true));
            if track.uncorrectable {
                // No pressure to count or fit until it can be corrected.
                track.exposure.interrupt();
                track.window.clear();
                track.dpdt = None;
                track.decades_per_min = None;
            }
            track.pressure_pa = None;
            track.kinetics = None;
            return;
        };
        track.uncorrectable = false;
        track.pressure_pa = Some(p);
        // The results are worked out when asked; the kinetics they come
        // from is shared (and changes only with the gas or temperature).
        match self.kinetics.get(k).map(|c| &c.pre) {
            Some(pre) if !track.kinetics.as_ref().is_some_and(|t| Arc::ptr_eq(t, pre)) => {
                track.kinetics = Some(Arc::clone(pre));
            }
            Some(_) => {}
            None => track.kinetics = None,
        }
        let t0 = *track.t0.get_or_insert(s.time);
        let ts = crate::timefmt::seconds_between(t0, s.time);
        track.exposure.add(ts, p);
        if self.fit_rates {
            track.window.push(ts, p, self.setup.rate_window_s);
            track.fit_rates();
        }
    }

    /// The temperatures of the kinetics worked out from the gas alone
    /// (the bases the others are scaled from), in the cache's order.
    #[cfg(test)]
    pub(crate) fn kinetics_bases(&self) -> Vec<f64> {
        self.kinetics
            .iter()
            .filter(|k| k.base)
            .map(|k| f64::from_bits(k.key.temperature_bits))
            .collect()
    }

    /// Where the chamber pressure of quantity `q` comes from at the
    /// monitor's data time: the gauge the configuration fixes for it, else
    /// the best gauge in its range (see [`super::chamber`]). `None` while no
    /// gauge is in range.
    pub fn chamber_source(&self, q: &Quantity) -> Option<ChamberSource> {
        self.chamber_at(q, self.now?)
    }

    /// The track of the chamber pressure for quantity `q` now, with its
    /// source.
    pub fn chamber_track(&self, q: &Quantity) -> Option<(ChamberSource, &GaugeTrack)> {
        let source = self.chamber_source(q)?;
        let track = self.tracks.get(&source.gauge)?;
        Some((source, track))
    }

    /// Gauges the chamber pressure may come from, best first.
    pub fn chamber_candidates(&self) -> Vec<String> {
        self.candidate_ids().map(str::to_string).collect()
    }

    /// [`Monitor::chamber_candidates`], borrowed: the configured order when
    /// there is one, else the configured gas-independent gauges, the
    /// gas-dependent ones, then any other pressure channel seen.
    fn candidate_ids(&self) -> impl Iterator<Item = &str> {
        let order = &self.setup.chamber.order;
        let configured = &self.setup.gauges;
        let by_kind = order.is_empty();
        let independent = configured
            .iter()
            .filter(move |g| by_kind && !g.model.kind.is_gas_dependent());
        let dependent = configured
            .iter()
            .filter(move |g| by_kind && g.model.kind.is_gas_dependent());
        let others = self
            .tracks
            .iter()
            .filter(move |(id, t)| {
                by_kind && t.is_pressure && !configured.iter().any(|g| g.id == **id)
            })
            .map(|(id, _)| id.as_str());
        order
            .iter()
            .map(String::as_str)
            .chain(independent.chain(dependent).map(|g| g.id.as_str()))
            .chain(others)
    }

    /// Whether gauge `id` reads a usable pressure at `now`: fresh, `ok`,
    /// inside its configured range, with kinetics.
    fn in_range(&self, id: &str, now: DateTime<Utc>) -> bool {
        let Some(t) = self.tracks.get(id) else {
            return false;
        };
        let inside = match (self.setup.gauges.iter().find(|g| g.id == id), t.indicated) {
            (Some(g), Some(v)) => g
                .model
                .range_pa
                .is_none_or(|(lo, hi)| (lo..=hi).contains(&v)),
            (_, v) => v.is_some(),
        };
        t.is_pressure
            && t.status == Status::Ok
            && !self.stale(t, now)
            && inside
            && t.kinetics().is_some()
    }

    fn chamber_at(&self, q: &Quantity, now: DateTime<Utc>) -> Option<ChamberSource> {
        self.chamber_gauge(q, now)
            .map(|(gauge, fixed)| ChamberSource {
                gauge: gauge.to_string(),
                fixed,
            })
    }

    /// [`Monitor::chamber_at`] without copying: the gauge's id, and whether
    /// the configuration fixes it. The candidates are taken in the order
    /// [`Monitor::chamber_candidates`] lists them.
    fn chamber_gauge(&self, q: &Quantity, now: DateTime<Utc>) -> Option<(&str, bool)> {
        if let Some(g) = self.setup.chamber.fixed_for(q) {
            return Some((g, true));
        }
        if q.is_temperature() {
            // The first temperature channel with a fresh valid reading.
            return self
                .tracks
                .iter()
                .find(|(_, t)| {
                    !t.is_pressure
                        && t.status == Status::Ok
                        && t.temperature_k.is_some()
                        && !self.stale(t, now)
                })
                .map(|(id, _)| (id.as_str(), false));
        }
        self.candidate_ids()
            .find(|id| self.in_range(id, now))
            .map(|id| (id, false))
    }

    fn stale(&self, track: &GaugeTrack, now: DateTime<Utc>) -> bool {
        match track.last_time {
            None => true,
            // A reading of this very time (the row being evaluated): no
            // time has passed (0 s is not more than a `stale_after` of 0 s
            // or more), without the date arithmetic.
            Some(t) if t == now && self.setup.stale_after_s >= 0.0 => false,
            Some(t) => crate::timefmt::seconds_between(t, now) > self.setup.stale_after_s,
        }
    }

    /// The input a quantity of a gauge gives now.
    fn input(&self, gauge: &str, q: &Quantity, now: DateTime<Utc>) -> Input {
        if gauge == AUTO {
            return match self.chamber_gauge(q, now) {
                Some((g, _)) if g != AUTO => self.input(g, q, now),
                _ => Input::Unusable,
            };
        }
        let Some(track) = self.tracks.get(gauge) else {
            return Input::Unusable;
        };
        if self.stale(track, now) {
            return Input::Unusable;
        }
        match track.status {
            Status::Ok => {}
            Status::SensorOff => return Input::Disabled,
            // Off the scale: the pressure is beyond the gauge's range, which
            // answers above/below on pressure and temperature.
            Status::OverRange if matches!(q, Quantity::Pressure | Quantity::Temperature) => {
                return Input::OverRange;
            }
            Status::UnderRange if matches!(q, Quantity::Pressure | Quantity::Temperature) => {
                return Input::UnderRange;
            }
            _ => return Input::Unusable,
        }
        let k = track.kinetics();
        let length = |name: &str| k.and_then(|(k, p)| k.length(p, name));
        let v = match q {
            Quantity::Pressure => track.pressure_pa,
            Quantity::Temperature => track.temperature_k,
            Quantity::MeanFreePath => k.map(|(k, p)| k.mean_free_path_m(p)),
            Quantity::Knudsen(l) => length(l).map(|l| l.0),
            Quantity::Impingement => k.map(|(k, p)| k.impingement_per_m2_s(p)),
            Quantity::MonolayerTime => k.map(|(k, p)| k.monolayer_time_s(p)),
            Quantity::Exposure => track.pressure_pa.map(|_| track.exposure.pa_s()),
            Quantity::RateOfChange => track.dpdt,
            Quantity::DecadesPerMinute => track.decades_per_min,
            Quantity::Regime(l) => {
                return length(l).map_or(Input::Unusable, |l| Input::Class(Class::Regime(l.1)));
            }
            Quantity::VacuumRange => {
                return k.map_or(Input::Unusable, |(k, p)| {
                    Input::Class(Class::Range(k.vacuum_range(p)))
                });
            }
        };
        v.map_or(Input::Unusable, Input::Value)
    }

    /// Judges condition `c` at `now`; `held` says it held at the last
    /// evaluation, so its deadband applies. `explain`: whether the caller
    /// shows why it fails (else the reasons are left empty, unformatted).
    fn check(&self, c: &Condition, now: DateTime<Utc>, held: bool, explain: bool) -> Check {
        let named = c
            .gauge
            .as_deref()
            .or(self.setup.default_gauge.as_deref())
            .unwrap_or(AUTO);
        // The chamber pressure is reported as the gauge it comes from.
        let source = (named == AUTO)
            .then(|| self.chamber_gauge(&c.quantity, now))
            .flatten();
        if named == AUTO && source.is_none() {
            return Check::Unknown(if explain {
                "no gauge in range for the chamber pressure".into()
            } else {
                String::new()
            });
        }
        // The texts only when they are said (not on every evaluation).
        let shown_name = || match source {
            Some((g, _)) => format!("chamber pressure ({g})"),
            None => named.to_string(),
        };
        let gauge = source.map_or(named, |(g, _)| g);
        let input = self.input(gauge, &c.quantity, now);
        let holds = match (&c.test, input) {
            (CondTest::Above(t), Input::Value(v)) if held => v > c.deadband.clear_level(*t, true),
            (CondTest::Below(t), Input::Value(v)) if held => v < c.deadband.clear_level(*t, false),
            (CondTest::Above(t), Input::Value(v)) => v > *t,
            (CondTest::Below(t), Input::Value(v)) => v < *t,
            (CondTest::Above(_), Input::OverRange) | (CondTest::Below(_), Input::UnderRange) => {
                true
            }
            (CondTest::Above(_), Input::UnderRange) | (CondTest::Below(_), Input::OverRange) => {
                false
            }
            (CondTest::Is(k), Input::Class(v)) => v == *k,
            (CondTest::IsNot(k), Input::Class(v)) => v != *k,
            (_, Input::Disabled) if !explain => return Check::Unknown(String::new()),
            (_, Input::Disabled) => {
                return Check::Unknown(format!("{} is switched off", shown_name()));
            }
            _ if !explain => return Check::Unknown(String::new()),
            _ => {
                let why = match self.tracks.get(gauge) {
                    None => "no reading yet".to_string(),
                    Some(t) if self.stale(t, now) => "reading is stale".to_string(),
                    Some(t) => format!("reading is {}", t.status),
                };
                return Check::Unknown(format!("{} {why}", shown_name()));
            }
        };
        if holds {
            Check::Holds
        } else if !explain {
            Check::Fails(String::new())
        } else {
            let shown = self.input_text(&c.quantity, input).unwrap_or_default();
            Check::Fails(format!("{} is {shown}", shown_name()))
        }
    }

    fn input_text(&self, q: &Quantity, v: Input) -> Option<String> {
        match v {
            Input::OverRange => Some(Status::OverRange.as_str().into()),
            Input::UnderRange => Some(Status::UnderRange.as_str().into()),
            Input::Value(x) => {
                Some(q.show(x, self.setup.pressure_unit, self.setup.temperature_unit))
            }
            Input::Class(c) => Some(c.as_str().into()),
            Input::Unusable | Input::Disabled => None,
        }
    }

    fn test_text(&self, r: &Rule) -> String {
        let show = |x: f64| {
            r.quantity
                .show(x, self.setup.pressure_unit, self.setup.temperature_unit)
        };
        match &r.test {
            _ if r.is_input() => "valid readings".into(),
            _ if r.is_link() => "connected".into(),
            Test::Above(t) => format!("{} above {}", r.quantity, show(*t)),
            Test::Below(t) => format!("{} below {}", r.quantity, show(*t)),
            Test::Enters(c) => format!("{} enters {}", r.quantity, c.as_str()),
            Test::Leaves(c) => format!("{} leaves {}", r.quantity, c.as_str()),
            Test::Crosses(a, b) => format!("{} crosses {}/{}", r.quantity, a.as_str(), b.as_str()),
        }
    }

    fn alarm_event(&self, rule: &Rule, t: &Transition) -> Event {
        let value_text = t.value.and_then(|v| self.input_text(&rule.quantity, v));
        let threshold = self.test_text(rule);
        let text = match (&t.note, &value_text) {
            (Some(n), _) => format!("{}: {} ({n})", rule.label, t.to),
            (None, Some(v)) => format!("{}: {} at {v} ({threshold})", rule.label, t.to),
            (None, None) => format!("{}: {}", rule.label, t.to),
        };
        Event {
            v: EVENT_VERSION,
            time: t.time,
            wall_time: None,
            change: Change::Alarm {
                from: t.from,
                to: t.to,
            },
            id: rule.id.clone(),
            label: rule.label.clone(),
            severity: Some(rule.severity),
            gauge: Some(rule.gauge.clone()),
            quantity: Some(rule.quantity.to_string()),
            value: match t.value {
                Some(Input::Value(v)) if v.is_finite() => Some(v),
                _ => None,
            },
            value_text,
            threshold: Some(threshold),
            operation: None,
            user: None,
            text,
        }
    }

    /// Evaluates the rules not passed over in their group's band (in
    /// order, so that their events come in order), then works out the band
    /// of each group taken.
    fn evaluate_rules(&mut self, now: DateTime<Utc>) -> Vec<Event> {
        let mut events = Vec::new();
        // Rules on the same gauge and quantity one after the other
        // (thresholds of one pressure) read the input once: the tracks do
        // not change while the rules are evaluated.
        let mut last_input: Option<(usize, Input)> = None;
        for i in 0..self.rules.len() {
            if let Some(g) = self.group_of[i]
                && self.bands.passed[g]
            {
                continue;
            }
            let (rule, enable) = (&self.rules[i].0.rule, &self.rules[i].1);
            let enabled = enable
                .as_ref()
                .map_or(Check::Holds, |c| self.check(c, now, false, false));
            let same_input = self.rule_input[i];
            let input = match enabled {
                Check::Holds => match last_input {
                    Some((j, input)) if j == same_input => input,
                    _ => {
                        let input = self.input(&rule.gauge, &rule.quantity, now);
                        last_input = Some((same_input, input));
                        input
                    }
                },
                Check::Fails(_) => Input::Disabled,
                Check::Unknown(_) => Input::Unusable,
            };
            if self.rules[i].0.quiet(input) {
                continue;
            }
            // A machine that moves may start or end a delay.
            self.deadline_floor = None;
            let ts = self.rules[i].0.update(now, input);
            for t in ts {
                events.push(self.alarm_event(&self.rules[i].0.rule, &t));
            }
        }
        if self.bands.on {
            for g in 0..self.groups.len() {
                if !self.bands.passed[g] {
                    self.bands.band[g] = self.groups[g].iter().try_fold(Band::ALL, |b, &i| {
                        self.rules[i].0.quiet_values().map(|q| b.and(q))
                    });
                }
            }
        }
        events
    }

    /// Evaluates every rule, bad-input alarm, link and gate at data time
    /// `now`. Called only at row times and at deadlines.
    fn evaluate(&mut self, now: DateTime<Utc>) -> Vec<Event> {
        self.now = Some(self.now.map_or(now, |n| n.max(now)));
        let now = self.now.unwrap_or(now);
        self.origin.get_or_insert(now);
        self.evaluated = Some(now);
        // Groups of rules whose input is a value in their band: passed over
        // (each rule would be quiet; the value becomes its last value).
        let mut all_passed = self.bands.on;
        for g in 0..self.groups.len() {
            let passed = match self.bands.band[g] {
                Some(band) if self.bands.on => {
                    let r = &self.rules[self.groups[g][0]].0.rule;
                    match self.input(&r.gauge, &r.quantity, now) {
                        Input::Value(v) if band.contains(v) => {
                            for &i in &self.groups[g] {
                                self.rules[i].0.note_quiet(v);
                            }
                            true
                        }
                        _ => false,
                    }
                }
                _ => false,
            };
            self.bands.passed[g] = passed;
            all_passed &= passed;
        }
        let mut events = if all_passed {
            Vec::new()
        } else {
            self.evaluate_rules(now)
        };
        // Bad-input alarms.
        for i in 0..self.inputs.len() {
            let gauge = self.inputs[i].rule.gauge.as_str();
            let seen = self.tracks.get(gauge);
            let bad = match seen {
                // Never sent anything: bad once the data clock has run for
                // longer than stale_after.
                None => self
                    .origin
                    .is_some_and(|o| {
                        crate::timefmt::seconds_between(o, now) > self.setup.stale_after_s
                    })
                    .then_some("no data"),
                Some(t) if self.stale(t, now) => Some("stale"),
                Some(t) => match t.status {
                    Status::SensorError | Status::Stale | Status::Unparsed => {
                        Some(t.status.as_str())
                    }
                    _ => None,
                },
            };
            let input = match (bad, seen.is_some()) {
                (Some(_), _) => Input::Value(1.0),
                (None, true) => Input::Value(0.0),
                (None, false) => Input::Unusable,
            };
            if self.inputs[i].quiet(input) {
                continue;
            }
            self.deadline_floor = None;
            let ts = self.inputs[i].update(now, input);
            for t in ts {
                let mut e = self.alarm_event(&self.inputs[i].rule, &t);
                e.value = None;
                e.value_text = bad.map(str::to_string);
                e.text = match bad {
                    Some(s) => format!("{}: {} ({s})", self.inputs[i].rule.label, t.to),
                    None => format!(
                        "{}: readings valid again: {}",
                        self.inputs[i].rule.gauge, t.to
                    ),
                };
                events.push(e);
            }
        }
        // Source links and gates are updated at every evaluation.
        if !(self.links.is_empty() && self.gates.is_empty()) {
            self.deadline_floor = None;
        }
        // Source links.
        for i in 0..self.links.len() {
            let up = self.links[i].up;
            let ts = self.links[i]
                .machine
                .update(now, Input::Value(if up { 0.0 } else { 1.0 }));
            for t in ts {
                let mut e = self.alarm_event(&self.links[i].machine.rule, &t);
                e.value = None;
                e.gauge = None;
                e.quantity = None;
                e.value_text = Some(if up { "connected" } else { "not connected" }.into());
                e.threshold = Some("connected".into());
                e.text = match t.note.as_deref() {
                    Some(n) => format!("{}: {} ({n})", self.links[i].machine.rule.label, t.to),
                    None => format!("{}: {}", self.links[i].machine.rule.label, t.to),
                };
                events.push(e);
            }
        }
        // Gates: checked unexplained (their reasons are worked out when
        // asked, `gate_reason`, or when the state changes).
        for i in 0..self.gates.len() {
            let checks: Vec<Check> = self.gates[i]
                .gate
                .conditions
                .iter()
                .enumerate()
                .map(|(j, c)| self.check(c, now, self.gates[i].was_holding(j), false))
                .collect();
            if let Some(mut t) = self.gates[i].update(now, &checks) {
                if t.to == GateState::NotReady && t.reason.is_none() {
                    t.reason = self.gate_reason(i);
                }
                let g = &self.gates[i].gate;
                let text = match (&t.reason, t.to) {
                    (_, GateState::Ready) => {
                        format!("{}: ready (all conditions held {:.0} s)", g.label, g.hold_s)
                    }
                    (Some(r), _) => format!("{}: not ready: {r}", g.label),
                    (None, _) => format!("{}: not ready", g.label),
                };
                events.push(Event {
                    v: EVENT_VERSION,
                    time: t.time,
                    wall_time: None,
                    change: Change::Gate {
                        from: t.from,
                        to: t.to,
                    },
                    id: g.id.clone(),
                    label: g.label.clone(),
                    severity: None,
                    gauge: None,
                    quantity: None,
                    value: None,
                    value_text: t.reason.clone(),
                    threshold: Some(
                        g.conditions
                            .iter()
                            .map(|c| c.text.as_str())
                            .collect::<Vec<_>>()
                            .join(" and ")
                            + &format!(" for {:.0} s", g.hold_s),
                    ),
                    operation: None,
                    user: None,
                    text,
                });
            }
        }
        if !self.trip_seen && self.has_trips && self.trip_active() {
            self.trip_seen = true;
        }
        events
    }

    fn rule_mut(&mut self, id: &str) -> Result<&mut RuleMachine, String> {
        self.deadline_floor = None;
        self.bands.forget();
        let known: Vec<String> = self.all_rules().map(|r| r.rule.id.clone()).collect();
        self.rules
            .iter_mut()
            .map(|(r, _)| r)
            .chain(self.inputs.iter_mut())
            .chain(self.links.iter_mut().map(|l| &mut l.machine))
            .find(|r| r.rule.id == id)
            .ok_or_else(|| {
                let hint = crate::suggest::nearest(id, known.iter().map(String::as_str))
                    .map(|s| format!(" (did you mean `{s}`?)"))
                    .unwrap_or_default();
                format!("no alarm `{id}`{hint}")
            })
    }

    /// Events for transitions an operator caused.
    fn operated(&self, id: &str, ts: Vec<Transition>, op: Operation, who: &Actor) -> Vec<Event> {
        let Some(r) = self.all_rules().find(|r| r.rule.id == id) else {
            return Vec::new();
        };
        ts.iter()
            .map(|t| {
                let mut e = self.alarm_event(&r.rule, t);
                e.operation = Some(op);
                e.user = Some(who.user.clone());
                e.wall_time = who.wall_time;
                e
            })
            .collect()
    }

    /// A setting an operator changed, as an event.
    fn setting_event(
        &self,
        (id, label): (&str, &str),
        (from, to): (String, String),
        op: Operation,
        who: &Actor,
        now: DateTime<Utc>,
    ) -> Event {
        Event {
            v: EVENT_VERSION,
            time: now,
            wall_time: who.wall_time,
            text: format!("{label}: {} {from} -> {to} by {}", op.as_str(), who.user),
            change: Change::Setting { from, to },
            id: id.to_string(),
            label: label.to_string(),
            severity: None,
            gauge: None,
            quantity: None,
            value: None,
            value_text: None,
            threshold: None,
            operation: Some(op),
            user: Some(who.user.clone()),
        }
    }

    /// Data time for an operator action: the monitor's, else `fallback`.
    fn op_time(&self, fallback: DateTime<Utc>) -> DateTime<Utc> {
        self.now.map_or(fallback, |n| n.max(fallback))
    }

    /// Changes a rule's threshold (the value of its above/below test) in
    /// place; its state is kept. Returns the audit event.
    pub fn set_threshold(
        &mut self,
        id: &str,
        threshold: f64,
        who: &Actor,
        now: DateTime<Utc>,
    ) -> Result<Event, String> {
        let (pu, tu) = (self.setup.pressure_unit, self.setup.temperature_unit);
        let m = self.rule_mut(id)?;
        let old = match m.rule.test {
            Test::Above(t) | Test::Below(t) => t,
            _ => return Err(format!("{id} has no numeric threshold")),
        };
        m.rule.test = m_test(&m.rule.test, threshold);
        let (label, q) = (m.rule.label.clone(), m.rule.quantity.clone());
        if let Some(spec) = std::sync::Arc::make_mut(&mut self.setup)
            .rules
            .iter_mut()
            .find(|r| r.rule.id == id)
        {
            spec.rule.test = m_test(&spec.rule.test, threshold);
        }
        let mut e = self.setting_event(
            (id, &label),
            (q.show(old, pu, tu), q.show(threshold, pu, tu)),
            Operation::SetThreshold,
            who,
            self.op_time(now),
        );
        e.quantity = Some(q.to_string());
        Ok(e)
    }

    /// Changes a gate's hold time. Returns the audit event.
    pub fn set_hold(
        &mut self,
        id: &str,
        hold_s: f64,
        who: &Actor,
        now: DateTime<Utc>,
    ) -> Result<Event, String> {
        let g = self
            .gates
            .iter_mut()
            .find(|g| g.gate.id == id)
            .ok_or_else(|| format!("no gate `{id}`"))?;
        let old = std::mem::replace(&mut g.gate.hold_s, hold_s);
        self.deadline_floor = None;
        let label = g.gate.label.clone();
        if let Some(spec) = std::sync::Arc::make_mut(&mut self.setup)
            .gates
            .iter_mut()
            .find(|g| g.id == id)
        {
            spec.hold_s = hold_s;
        }
        let show = |s: f64| format!("{} s", crate::units::format_sig(s, 6));
        Ok(self.setting_event(
            (id, &label),
            (show(old), show(hold_s)),
            Operation::SetHold,
            who,
            self.op_time(now),
        ))
    }

    /// Starts every gauge's exposure again from zero (a fresh substrate),
    /// counting from the reset's data time whatever the start threshold.
    /// Returns an audit event per gauge that had counted any.
    pub fn reset_exposure(&mut self, who: &Actor, now: DateTime<Utc>) -> Vec<Event> {
        let now = self.op_time(now);
        self.deadline_floor = None;
        let mut old = Vec::new();
        for (id, t) in self.tracks.iter_mut() {
            if t.is_pressure && t.exposure.pa_s() > 0.0 {
                old.push((id.clone(), t.exposure.langmuir()));
            }
            let t0 = *t.t0.get_or_insert(now);
            t.exposure.restart(crate::timefmt::seconds_between(t0, now));
        }
        old.into_iter()
            .map(|(id, langmuir)| {
                let show = |x: f64| format!("{} L", crate::units::format_sig(x, 4));
                let mut e = self.setting_event(
                    (&format!("{id}.exposure"), &format!("{id} exposure")),
                    (show(langmuir), show(0.0)),
                    Operation::ResetExposure,
                    who,
                    now,
                );
                e.gauge = Some(id);
                e.quantity = Some("exposure".into());
                e
            })
            .collect()
    }

    /// Acknowledges one alarm at data time `now`.
    pub fn acknowledge(
        &mut self,
        id: &str,
        who: &Actor,
        now: DateTime<Utc>,
    ) -> Result<Vec<Event>, String> {
        let now = self.op_time(now);
        let ts = self.rule_mut(id)?.acknowledge(now, &who.user)?;
        Ok(self.operated(id, ts, Operation::Acknowledge, who))
    }

    /// Acknowledges every alarm waiting for it.
    pub fn acknowledge_all(&mut self, who: &Actor, now: DateTime<Utc>) -> Vec<Event> {
        let ids: Vec<String> = self
            .all_rules()
            .filter(|r| {
                matches!(
                    r.state(),
                    AlarmState::Unacknowledged | AlarmState::ReturnedUnacknowledged
                )
            })
            .map(|r| r.rule.id.clone())
            .collect();
        ids.iter()
            .filter_map(|id| self.acknowledge(id, who, now).ok())
            .flatten()
            .collect()
    }

    /// Shelves an alarm for `seconds` of data time.
    pub fn shelve(
        &mut self,
        id: &str,
        seconds: f64,
        who: &Actor,
        now: DateTime<Utc>,
    ) -> Result<Vec<Event>, String> {
        let now = self.op_time(now);
        let until = after(now, seconds);
        let ts = self.rule_mut(id)?.shelve(now, until, &who.user)?;
        Ok(self.operated(id, ts, Operation::Shelve, who))
    }

    /// Returns a shelved alarm to service.
    pub fn unshelve(
        &mut self,
        id: &str,
        who: &Actor,
        now: DateTime<Utc>,
    ) -> Result<Vec<Event>, String> {
        let now = self.op_time(now);
        let ts = self.rule_mut(id)?.unshelve(now, &who.user)?;
        Ok(self.operated(id, ts, Operation::Unshelve, who))
    }
}

/// The automatic bad-input alarm of a gauge.
/// Per group of rules on one input ([`Monitor`]'s `groups`), the values
/// for which every rule of it is quiet, as of the last evaluation that took
/// them one by one (`None`: there are none, or an edit or a clock change
/// came since), and whether the evaluation under way passed the group
/// over. A cache, not part of the state: `Debug` shows none of it.
#[derive(Clone, Default)]
struct Bands {
    /// Use the bands (off in tests that compare against taking every rule
    /// at every evaluation).
    on: bool,
    band: Vec<Option<Band>>,
    passed: Vec<bool>,
}

impl Bands {
    /// Forgets every band: a rule's state or test may have changed.
    fn forget(&mut self) {
        self.band.fill(None);
    }
}

impl std::fmt::Debug for Bands {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Bands")
    }
}

/// Room kept for its allocations between rows, not part of the state: a
/// clone starts empty and `Debug` shows none of it, so two monitors in the
/// same state look the same whatever they worked through.
struct Scratch<T>(Vec<T>);

impl<T> Default for Scratch<T> {
    fn default() -> Self {
        Scratch(Vec::new())
    }
}

impl<T> Clone for Scratch<T> {
    fn clone(&self) -> Self {
        Scratch::default()
    }
}

impl<T> std::fmt::Debug for Scratch<T> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Scratch")
    }
}

/// The channels of a row, each once, in the order they first come.
fn first_channels(samples: &[Sample]) -> impl Iterator<Item = &str> {
    samples
        .iter()
        .enumerate()
        .filter(|(i, s)| samples[..*i].iter().all(|o| o.channel != s.channel))
        .map(|(_, s)| s.channel.as_str())
}

fn input_rule(gauge: &str, severity: Severity) -> Rule {
    automatic_rule(
        format!("{gauge}.input"),
        format!("{gauge}: no valid reading"),
        gauge.to_string(),
        severity,
        0.0,
    )
}

fn m_test(t: &Test, threshold: f64) -> Test {
    match t {
        Test::Above(_) => Test::Above(threshold),
        Test::Below(_) => Test::Below(threshold),
        other => other.clone(),
    }
}
