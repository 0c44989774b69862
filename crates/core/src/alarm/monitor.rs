//! The monitor: keeps the latest state of every gauge (true pressure, gas
//! kinetics, exposure, rate of change), drives the alarm rules and gates from
//! it, and turns their transitions into [`Event`]s. Pure: data time only.

use std::collections::{BTreeMap, VecDeque};

use chrono::{DateTime, Utc};

use super::event::{Event, EventKind};
use super::gate::{Check, Gate, GateMachine, GateState};
use super::quantity::{Class, Quantity};
use super::rule::{AlarmState, Deadband, Input, Rule, RuleMachine, Severity, Test, Transition};
use super::syntax::{CondTest, Condition};
use crate::engine::exposure::Exposure;
use crate::engine::mixture::Mixture;
use crate::engine::{Conditions, Derived, GaugeModel, NamedLength, Physics, derive};
use crate::sample::{Sample, Status};
use crate::units::{PressureUnit, TemperatureUnit};

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
    /// Reading → true pressure.
    pub model: GaugeModel,
    /// Gas at the gauge.
    pub mixture: Mixture,
}

/// Everything the monitor needs, resolved from the configuration.
#[derive(Debug, Clone)]
pub struct MonitorSetup {
    /// Configured gauges; other pressure channels read true pressure in the
    /// chamber's gas.
    pub gauges: Vec<GaugeSetup>,
    /// The chamber's gas.
    pub mixture: Mixture,
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
    /// Gauge used by conditions that name none.
    pub default_gauge: Option<String>,
    /// Units for event texts.
    pub pressure_unit: PressureUnit,
    /// Units for event texts.
    pub temperature_unit: TemperatureUnit,
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
    /// Temperature of the last valid reading, K (temperature channels).
    pub temperature_k: Option<f64>,
    /// Kinetics of the last valid reading.
    pub derived: Option<Derived>,
    /// Exposure since the start.
    pub exposure: Exposure,
    /// dp/dt, Pa/s.
    pub dpdt: Option<f64>,
    /// d log10 p/dt, decades per minute.
    pub decades_per_min: Option<f64>,
    window: VecDeque<(f64, f64)>,
    t0: Option<DateTime<Utc>>,
}

impl GaugeTrack {
    fn new() -> Self {
        GaugeTrack {
            last_time: None,
            status: Status::Stale,
            indicated: None,
            is_pressure: true,
            pressure_pa: None,
            temperature_k: None,
            derived: None,
            exposure: Exposure::new(60.0),
            dpdt: None,
            decades_per_min: None,
            window: VecDeque::new(),
            t0: None,
        }
    }

    fn fit_rates(&mut self, window_s: f64) {
        let Some(&(t_last, _)) = self.window.back() else {
            return;
        };
        while self
            .window
            .front()
            .is_some_and(|&(t, _)| t_last - t > window_s)
        {
            self.window.pop_front();
        }
        let n = self.window.len() as f64;
        let span = t_last - self.window.front().map_or(t_last, |w| w.0);
        if self.window.len() < 2 || span < 1.0 {
            self.dpdt = None;
            self.decades_per_min = None;
            return;
        }
        // Least squares slopes of p(t) and log10 p(t).
        let mt = self.window.iter().map(|w| w.0).sum::<f64>() / n;
        let mp = self.window.iter().map(|w| w.1).sum::<f64>() / n;
        let ml = self.window.iter().map(|w| w.1.log10()).sum::<f64>() / n;
        let (mut stt, mut stp, mut stl) = (0.0, 0.0, 0.0);
        for &(t, p) in &self.window {
            stt += (t - mt) * (t - mt);
            stp += (t - mt) * (p - mp);
            stl += (t - mt) * (p.log10() - ml);
        }
        self.dpdt = Some(stp / stt);
        self.decades_per_min = Some(stl / stt * 60.0);
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
    setup: MonitorSetup,
    tracks: BTreeMap<String, GaugeTrack>,
    temperature_k: Option<f64>,
    rules: Vec<(RuleMachine, Option<Condition>)>,
    inputs: Vec<RuleMachine>,
    gates: Vec<GateMachine>,
    now: Option<DateTime<Utc>>,
    trip_seen: bool,
}

impl Monitor {
    /// A monitor in the normal state, before any data.
    pub fn new(setup: MonitorSetup) -> Self {
        let rules = setup
            .rules
            .iter()
            .map(|r| (RuleMachine::new(r.rule.clone()), r.enable.clone()))
            .collect();
        // A bad-input alarm for every gauge a rule or gate looks at.
        let mut watched: Vec<String> = setup.rules.iter().map(|r| r.rule.gauge.clone()).collect();
        for g in &setup.gates {
            for c in &g.conditions {
                if let Some(id) = c.gauge.clone().or(setup.default_gauge.clone()) {
                    watched.push(id);
                }
            }
        }
        watched.sort();
        watched.dedup();
        let inputs = watched
            .into_iter()
            .map(|g| {
                RuleMachine::new(Rule {
                    id: format!("{g}.input"),
                    label: format!("{g}: no valid reading"),
                    gauge: g,
                    quantity: Quantity::Pressure,
                    test: Test::Above(0.5),
                    deadband: Deadband::None,
                    on_delay_s: 0.0,
                    off_delay_s: 0.0,
                    severity: setup.input_severity,
                    latching: false,
                })
            })
            .collect();
        let gates = setup.gates.iter().cloned().map(GateMachine::new).collect();
        Monitor {
            setup,
            tracks: BTreeMap::new(),
            temperature_k: None,
            rules,
            inputs,
            gates,
            now: None,
            trip_seen: false,
        }
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
        self.rules.iter().map(|(r, _)| r).chain(self.inputs.iter())
    }

    /// Every alarm (configured rules, then bad-input alarms).
    pub fn alarms(&self) -> Vec<AlarmView<'_>> {
        self.all_rules()
            .map(|r| AlarmView {
                rule: &r.rule,
                state: r.state(),
                since: r.since(),
                value_text: if r.rule.is_input() {
                    self.tracks.get(&r.rule.gauge).map(|t| {
                        let stale = self.now.is_some_and(|n| self.stale(t, n));
                        if stale {
                            "stale".into()
                        } else {
                            t.status.as_str().to_string()
                        }
                    })
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

    /// Records a row of readings (one line or record) and evaluates.
    pub fn push(&mut self, samples: &[Sample]) -> Vec<Event> {
        let Some(time) = samples.iter().map(|s| s.time).max() else {
            return Vec::new();
        };
        for s in samples {
            self.take(s);
        }
        self.advance(time)
    }

    /// Advances data time without new readings (stale detection).
    pub fn tick(&mut self, now: DateTime<Utc>) -> Vec<Event> {
        self.advance(now)
    }

    fn take(&mut self, s: &Sample) {
        let track = self
            .tracks
            .entry(s.channel.clone())
            .or_insert_with(GaugeTrack::new);
        track.last_time = Some(s.time);
        track.status = s.status;
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
        let (p, mixture) = match self.setup.gauges.iter().find(|g| g.id == s.channel) {
            Some(g) => (g.model.correct(v).pressure_pa, &g.mixture),
            None => (v, &self.setup.mixture),
        };
        if !(p.is_finite() && p > 0.0) {
            track.pressure_pa = None;
            track.derived = None;
            return;
        }
        let t = self
            .temperature_k
            .unwrap_or(self.setup.assumed_temperature_k);
        track.pressure_pa = Some(p);
        track.derived = Some(derive(
            &Conditions::new(p, t),
            mixture,
            &self.setup.lengths,
            &self.setup.physics,
        ));
        let t0 = *track.t0.get_or_insert(s.time);
        let ts = (s.time - t0).num_milliseconds() as f64 / 1000.0;
        track.exposure.add(ts, p);
        track.window.push_back((ts, p));
        track.fit_rates(self.setup.rate_window_s);
    }

    fn stale(&self, track: &GaugeTrack, now: DateTime<Utc>) -> bool {
        track
            .last_time
            .is_none_or(|t| (now - t).num_milliseconds() as f64 / 1000.0 > self.setup.stale_after_s)
    }

    /// The input a quantity of a gauge gives now.
    fn input(&self, gauge: &str, q: &Quantity, now: DateTime<Utc>) -> Input {
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
                return Input::Value(f64::INFINITY);
            }
            Status::UnderRange if matches!(q, Quantity::Pressure | Quantity::Temperature) => {
                return Input::Value(0.0);
            }
            _ => return Input::Unusable,
        }
        let d = track.derived.as_ref();
        let length = |name: &str| d.and_then(|d| d.lengths.iter().find(|l| l.name == name));
        let v = match q {
            Quantity::Pressure => track.pressure_pa,
            Quantity::Temperature => track.temperature_k,
            Quantity::MeanFreePath => d.map(|d| d.mean_free_path_m),
            Quantity::Knudsen(l) => length(l).map(|l| l.knudsen),
            Quantity::Impingement => d.map(|d| d.impingement_per_m2_s),
            Quantity::MonolayerTime => d.map(|d| d.monolayer_time_s),
            Quantity::Exposure => track.pressure_pa.map(|_| track.exposure.pa_s()),
            Quantity::RateOfChange => track.dpdt,
            Quantity::DecadesPerMinute => track.decades_per_min,
            Quantity::Regime(l) => {
                return length(l)
                    .map_or(Input::Unusable, |l| Input::Class(Class::Regime(l.regime)));
            }
            Quantity::VacuumRange => {
                return d.map_or(Input::Unusable, |d| {
                    Input::Class(Class::Range(d.vacuum_range))
                });
            }
        };
        v.map_or(Input::Unusable, Input::Value)
    }

    fn check(&self, c: &Condition, now: DateTime<Utc>) -> Check {
        let Some(gauge) = c.gauge.as_deref().or(self.setup.default_gauge.as_deref()) else {
            return Check::Unknown("no gauge named and no default gauge".into());
        };
        let input = self.input(gauge, &c.quantity, now);
        let shown = self.input_text(&c.quantity, input).unwrap_or_default();
        let holds = match (&c.test, input) {
            (CondTest::Above(t), Input::Value(v)) => v > *t,
            (CondTest::Below(t), Input::Value(v)) => v < *t,
            (CondTest::Is(k), Input::Class(v)) => v == *k,
            (CondTest::IsNot(k), Input::Class(v)) => v != *k,
            (_, Input::Disabled) => return Check::Unknown(format!("{gauge} is switched off")),
            _ => {
                let why = match self.tracks.get(gauge) {
                    None => "no reading yet".to_string(),
                    Some(t) if self.stale(t, now) => "reading is stale".to_string(),
                    Some(t) => format!("reading is {}", t.status),
                };
                return Check::Unknown(format!("{gauge} {why}"));
            }
        };
        if holds {
            Check::Holds
        } else {
            Check::Fails(format!("{gauge} is {shown}"))
        }
    }

    fn input_text(&self, q: &Quantity, v: Input) -> Option<String> {
        match v {
            Input::Value(x) if x.is_infinite() => Some("over-range".into()),
            Input::Value(x) if x == 0.0 && matches!(q, Quantity::Pressure) => {
                Some("under-range".into())
            }
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
            time: t.time,
            kind: EventKind::Alarm,
            id: rule.id.clone(),
            label: rule.label.clone(),
            severity: Some(rule.severity),
            from: t.from.as_str().into(),
            to: t.to.as_str().into(),
            gauge: Some(rule.gauge.clone()),
            quantity: Some(rule.quantity.to_string()),
            value: match t.value {
                Some(Input::Value(v)) if v.is_finite() => Some(v),
                _ => None,
            },
            value_text,
            threshold: Some(threshold),
            user: t
                .note
                .as_ref()
                .and_then(|n| n.split(" by ").nth(1))
                .map(|s| s.split(' ').next().unwrap_or(s).to_string()),
            text,
        }
    }

    fn advance(&mut self, now: DateTime<Utc>) -> Vec<Event> {
        self.now = Some(self.now.map_or(now, |n| n.max(now)));
        let now = self.now.unwrap_or(now);
        let mut events = Vec::new();
        // Rules.
        for i in 0..self.rules.len() {
            let (rule, enable) = (&self.rules[i].0.rule, &self.rules[i].1);
            let enabled = enable.as_ref().map_or(Check::Holds, |c| self.check(c, now));
            let input = match enabled {
                Check::Holds => self.input(&rule.gauge, &rule.quantity, now),
                Check::Fails(_) => Input::Disabled,
                Check::Unknown(_) => Input::Unusable,
            };
            let ts = self.rules[i].0.update(now, input);
            for t in ts {
                events.push(self.alarm_event(&self.rules[i].0.rule, &t));
            }
        }
        // Bad-input alarms.
        for i in 0..self.inputs.len() {
            let gauge = self.inputs[i].rule.gauge.clone();
            let bad = match self.tracks.get(&gauge) {
                None => None, // never seen: nothing to judge yet
                Some(t) if self.stale(t, now) => Some(Status::Stale),
                Some(t) => match t.status {
                    Status::SensorError | Status::Stale | Status::Unparsed => Some(t.status),
                    _ => None,
                },
            };
            let input = match (bad, self.tracks.contains_key(&gauge)) {
                (_, false) => Input::Unusable,
                (Some(_), true) => Input::Value(1.0),
                (None, true) => Input::Value(0.0),
            };
            let ts = self.inputs[i].update(now, input);
            for t in ts {
                let mut e = self.alarm_event(&self.inputs[i].rule, &t);
                e.value = None;
                e.value_text = bad.map(|s| s.as_str().to_string());
                e.text = match bad {
                    Some(s) => format!("{}: {} ({s})", self.inputs[i].rule.label, t.to),
                    None => format!("{gauge}: readings valid again: {}", t.to),
                };
                events.push(e);
            }
        }
        // Gates.
        for i in 0..self.gates.len() {
            let checks: Vec<Check> = self.gates[i]
                .gate
                .conditions
                .iter()
                .map(|c| self.check(c, now))
                .collect();
            if let Some(t) = self.gates[i].update(now, &checks) {
                let g = &self.gates[i].gate;
                let text = match (&t.reason, t.to) {
                    (_, GateState::Ready) => {
                        format!("{}: ready (all conditions held {:.0} s)", g.label, g.hold_s)
                    }
                    (Some(r), _) => format!("{}: not ready: {r}", g.label),
                    (None, _) => format!("{}: not ready", g.label),
                };
                events.push(Event {
                    time: t.time,
                    kind: EventKind::Gate,
                    id: g.id.clone(),
                    label: g.label.clone(),
                    severity: None,
                    from: t.from.as_str().into(),
                    to: t.to.as_str().into(),
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
                    user: None,
                    text,
                });
            }
        }
        if self.trip_active() {
            self.trip_seen = true;
        }
        events
    }

    fn rule_mut(&mut self, id: &str) -> Result<&mut RuleMachine, String> {
        let known: Vec<String> = self.all_rules().map(|r| r.rule.id.clone()).collect();
        self.rules
            .iter_mut()
            .map(|(r, _)| r)
            .chain(self.inputs.iter_mut())
            .find(|r| r.rule.id == id)
            .ok_or_else(|| {
                let hint = crate::suggest::nearest(id, known.iter().map(String::as_str))
                    .map(|s| format!(" (did you mean `{s}`?)"))
                    .unwrap_or_default();
                format!("no alarm `{id}`{hint}")
            })
    }

    fn operated(&self, id: &str, ts: Vec<Transition>) -> Vec<Event> {
        let Some(r) = self.all_rules().find(|r| r.rule.id == id) else {
            return Vec::new();
        };
        ts.iter().map(|t| self.alarm_event(&r.rule, t)).collect()
    }

    /// Changes a rule's threshold (the value of its above/below test) in
    /// place; its state is kept.
    pub fn set_threshold(&mut self, id: &str, threshold: f64) -> Result<(), String> {
        let m = self.rule_mut(id)?;
        m.rule.test = match m.rule.test {
            Test::Above(_) => Test::Above(threshold),
            Test::Below(_) => Test::Below(threshold),
            _ => return Err(format!("{id} has no numeric threshold")),
        };
        if let Some(spec) = self.setup.rules.iter_mut().find(|r| r.rule.id == id) {
            spec.rule.test = m_test(&spec.rule.test, threshold);
        }
        Ok(())
    }

    /// Changes a gate's hold time.
    pub fn set_hold(&mut self, id: &str, hold_s: f64) -> Result<(), String> {
        let g = self
            .gates
            .iter_mut()
            .find(|g| g.gate.id == id)
            .ok_or_else(|| format!("no gate `{id}`"))?;
        g.gate.hold_s = hold_s;
        if let Some(spec) = self.setup.gates.iter_mut().find(|g| g.id == id) {
            spec.hold_s = hold_s;
        }
        Ok(())
    }

    /// Starts every gauge's exposure again from zero (a fresh substrate).
    pub fn reset_exposure(&mut self) {
        for t in self.tracks.values_mut() {
            t.exposure = Exposure::new(60.0);
        }
    }

    /// Acknowledges one alarm at data time `now`, recording `who`.
    pub fn acknowledge(
        &mut self,
        id: &str,
        who: &str,
        now: DateTime<Utc>,
    ) -> Result<Vec<Event>, String> {
        let ts = self.rule_mut(id)?.acknowledge(now, who)?;
        Ok(self.operated(id, ts))
    }

    /// Acknowledges every alarm waiting for it.
    pub fn acknowledge_all(&mut self, who: &str, now: DateTime<Utc>) -> Vec<Event> {
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
        who: &str,
        now: DateTime<Utc>,
    ) -> Result<Vec<Event>, String> {
        let until = now + chrono::Duration::milliseconds((seconds * 1000.0) as i64);
        let ts = self.rule_mut(id)?.shelve(now, until, who)?;
        Ok(self.operated(id, ts))
    }

    /// Returns a shelved alarm to service.
    pub fn unshelve(
        &mut self,
        id: &str,
        who: &str,
        now: DateTime<Utc>,
    ) -> Result<Vec<Event>, String> {
        let ts = self.rule_mut(id)?.unshelve(now, who)?;
        Ok(self.operated(id, ts))
    }
}

fn m_test(t: &Test, threshold: f64) -> Test {
    match t {
        Test::Above(_) => Test::Above(threshold),
        Test::Below(_) => Test::Below(threshold),
        other => other.clone(),
    }
}
