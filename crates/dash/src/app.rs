//! The dashboard's state: plain data, updated by source events and keys,
//! drawn by [`super::render`]. Nothing here touches the terminal or a clock.

use std::collections::{BTreeMap, VecDeque};
use std::path::PathBuf;

use chrono::{DateTime, Utc};

use super::history::History;
use crate::alarm::{Actor, AlarmState, Event, Monitor};
use crate::engine::gauge::GaugeKind;
use crate::sample::{ChannelUnit, SourceEvent, SourceState, Status, same_id};
use crate::units::{PressureUnit, TemperatureUnit, UnitKind};
use rarefy_app::pipeline::{Item, Operation, Pipeline, Sink};

/// Trend windows offered by the window key, s.
pub const WINDOWS: [f64; 7] = [
    60.0,
    300.0,
    900.0,
    3600.0,
    4.0 * 3600.0,
    86_400.0,
    7.0 * 86_400.0,
];

/// Recent events the app keeps ([`App::events`]).
pub const EVENTS_KEPT: usize = 200;

/// Replay speed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Speed {
    /// Data seconds per wall second.
    Times(f64),
    /// As fast as it computes.
    Max,
}

impl Speed {
    /// The speeds offered, slowest first.
    pub const STEPS: [Speed; 6] = [
        Speed::Times(1.0),
        Speed::Times(10.0),
        Speed::Times(60.0),
        Speed::Times(300.0),
        Speed::Times(1000.0),
        Speed::Max,
    ];

    /// As shown (`60x`, `max`).
    pub fn label(self) -> String {
        match self {
            Speed::Times(x) => format!("{}x", crate::units::format_sig(x, 3)),
            Speed::Max => "max".into(),
        }
    }
}

/// Replay state.
#[derive(Debug, Clone, PartialEq)]
pub struct Replay {
    /// The log.
    pub file: PathBuf,
    /// Paused.
    pub paused: bool,
    /// Speed.
    pub speed: Speed,
    /// First and last row times.
    pub start: DateTime<Utc>,
    /// Last row time.
    pub end: DateTime<Utc>,
    /// Alarm events found in the whole log: (time, id, new state).
    pub marks: Vec<(DateTime<Utc>, String, String)>,
    /// Every event of the log, in order (the event list and its detail).
    pub events: Vec<Event>,
    /// Gaps in the log (no row for much longer than usual).
    pub gaps: Vec<(DateTime<Utc>, DateTime<Utc>)>,
    /// Rows the reader reported as bad.
    pub bad_rows: u64,
    /// Rows whose time was earlier than the row before's.
    pub times_went_back: u64,
    /// Rows whose time was the same as the row before's.
    pub times_repeated: u64,
    /// Whether the log ended.
    pub at_end: bool,
    /// Where seeks may start from other than the log's start (none for a
    /// log read from a pipe).
    pub keyframes: Option<super::keyframe::Keyframes>,
}

/// A modal overlay.
#[derive(Debug, Clone, PartialEq)]
pub enum Overlay {
    /// None.
    None,
    /// Keys and the safety caution.
    Help,
    /// Typing a time to jump to (replay).
    Goto(String),
    /// Typing how long to shelve the selected alarm.
    Shelve(String),
    /// Typing a new threshold or hold for the selected alarm or gate.
    Edit(Edit),
    /// Confirming a save to the config file.
    Confirm(Edit),
}

/// An edit of a threshold or a gate's hold, before and after confirmation.
#[derive(Debug, Clone, PartialEq)]
pub struct Edit {
    /// `alarm` or `gate`.
    pub kind: &'static str,
    /// Its id.
    pub id: String,
    /// The key edited (`above`, `below`, `hold`).
    pub key: String,
    /// The value before.
    pub old: String,
    /// What is typed.
    pub input: String,
}

/// A gauge as shown.
#[derive(Debug, Clone, PartialEq)]
pub struct GaugeInfo {
    /// Channel id.
    pub id: String,
    /// Label.
    pub label: String,
    /// Kind, when configured.
    pub kind: Option<GaugeKind>,
    /// Unit of its values.
    pub unit: ChannelUnit,
}

impl GaugeInfo {
    /// The gauges a configuration declares, as shown: its labels and kinds,
    /// in its display pressure unit.
    pub fn configured(config: &rarefy_app::config::Config) -> Vec<GaugeInfo> {
        config
            .gauges
            .iter()
            .map(|g| GaugeInfo {
                id: g.id.clone(),
                label: g.label.clone(),
                kind: Some(g.kind),
                unit: ChannelUnit::Pressure(config.display.pressure_unit),
            })
            .collect()
    }
}

/// Counters shown on the status line.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Counters {
    /// Rows received.
    pub rows: u64,
    /// Samples received.
    pub samples: u64,
    /// Lines no template matched.
    pub unparsed: u64,
    /// Readings waiting in the queue when last looked (display behind).
    pub behind: usize,
    /// Rows per second of wall time, recently (live).
    pub rate: f64,
}

/// What a frozen display shows: the monitor, history and time at freezing.
pub type Frozen = Box<(Monitor, History, Option<DateTime<Utc>>)>;

/// The dashboard state.
pub struct App {
    /// Who operates the dashboard (for the audit trail).
    pub user: String,
    /// Chamber name.
    pub title: String,
    /// `None` live; replay state otherwise.
    pub replay: Option<Replay>,
    /// The pipeline: the monitor (alarms, gates, per-gauge kinetics) and,
    /// live, the recording and action sinks.
    pub pipeline: Pipeline,
    /// Trend history.
    pub history: History,
    /// Origin of the history's seconds.
    pub origin: Option<DateTime<Utc>>,
    /// Gauges in display order.
    pub gauges: Vec<GaugeInfo>,
    /// Source states by name.
    pub sources: BTreeMap<String, SourceState>,
    /// The last source error, escaped.
    pub source_error: Option<String>,
    /// The file being recorded.
    pub log_file: Option<PathBuf>,
    /// Counters.
    pub counters: Counters,
    /// Pressure unit shown.
    pub pressure_unit: PressureUnit,
    /// Temperature unit shown.
    pub temperature_unit: TemperatureUnit,
    /// Trend window, s.
    pub window_s: f64,
    /// A frozen copy shown while data keeps coming.
    pub frozen: Option<Frozen>,
    /// Modal overlay.
    pub overlay: Overlay,
    /// Selected alarm (index into `monitor.alarms()`).
    pub selected: usize,
    /// A message for the status line.
    pub message: Option<String>,
    /// The last unparsed line, escaped.
    pub last_unparsed: Option<String>,
    /// Replay: the latest operator note at or before the playhead — its row
    /// time, column and text (as read; escape before showing).
    pub note: Option<(DateTime<Utc>, String, String)>,
    /// Show the event list where the trend is (small screens; key `v`).
    pub show_events: bool,
    /// Recent events, newest last.
    pub events: VecDeque<Event>,
    /// Events taken since the start (a replay: since the start of the
    /// log), however many `events` still holds.
    pub events_seen: usize,
    /// A new alarm asks for the bell.
    pub bell: bool,
    /// Whether the bell is wanted at all.
    pub bell_enabled: bool,
    /// Draw with ASCII only.
    pub ascii: bool,
    /// Use colour.
    pub color: bool,
    /// Config file, for saving edits.
    pub config_path: Option<PathBuf>,
    /// Whether something changed since the last draw.
    pub dirty: bool,
    /// First line of the help screen shown (it scrolls on small terminals).
    pub help_scroll: usize,
    /// The open prompt still holds its suggestion (the first key typed
    /// replaces it; Backspace edits it).
    pub suggested: bool,
    /// How far the help screen can scroll, as last drawn.
    pub help_max: std::cell::Cell<usize>,
    /// The gauge the kinetics and flow-regime panels follow; `None`: the
    /// chamber pressure (the best gauge in range at each moment).
    pub follow: Option<String>,
}

/// What a key asks the loop around the app to do.
#[derive(Debug, Clone, PartialEq)]
pub enum Effect {
    /// Nothing beyond redrawing.
    None,
    /// Leave.
    Quit,
    /// Write this text to the config file.
    Save(PathBuf, String),
    /// Replay: go to this data time.
    Seek(DateTime<Utc>),
    /// Replay: one row forward while paused.
    Step,
}

impl App {
    /// A dashboard over `monitor`, with no sinks.
    pub fn new(title: impl Into<String>, monitor: Monitor, gauges: Vec<GaugeInfo>) -> Self {
        App::with_pipeline(title, Pipeline::new(monitor), gauges)
    }

    /// A dashboard over a pipeline (live, with its recording and actions).
    pub fn with_pipeline(
        title: impl Into<String>,
        pipeline: Pipeline,
        gauges: Vec<GaugeInfo>,
    ) -> Self {
        let setup = pipeline.monitor().setup();
        let (pressure_unit, temperature_unit) = (setup.pressure_unit, setup.temperature_unit);
        App {
            user: "unknown".into(),
            title: title.into(),
            replay: None,
            pipeline,
            history: History::default(),
            origin: None,
            gauges,
            sources: BTreeMap::new(),
            source_error: None,
            log_file: None,
            counters: Counters::default(),
            pressure_unit,
            temperature_unit,
            window_s: 900.0,
            frozen: None,
            overlay: Overlay::None,
            selected: 0,
            message: None,
            last_unparsed: None,
            note: None,
            show_events: false,
            events: VecDeque::new(),
            events_seen: 0,
            bell: false,
            bell_enabled: true,
            ascii: false,
            color: true,
            config_path: None,
            dirty: true,
            help_scroll: 0,
            suggested: false,
            help_max: std::cell::Cell::new(0),
            follow: None,
        }
    }

    /// The monitor, history and time being shown (frozen or live).
    pub fn shown(&self) -> (&Monitor, &History, Option<DateTime<Utc>>) {
        match &self.frozen {
            Some(f) => (&f.0, &f.1, f.2),
            None => (self.monitor(), &self.history, self.monitor().now()),
        }
    }

    /// The live monitor.
    pub fn monitor(&self) -> &Monitor {
        self.pipeline.monitor()
    }

    /// Carries out an operator's request at the monitor's data time; the
    /// events carry the user's name and `wall_time` and reach every sink
    /// (the event log among them).
    pub fn operate(
        &mut self,
        op: &Operation,
        now: DateTime<Utc>,
        wall_time: Option<DateTime<Utc>>,
    ) -> Result<Vec<Event>, String> {
        let who = Actor {
            user: self.user.clone(),
            wall_time,
        };
        let (pipeline, mut view) = self.split();
        let events = pipeline.operate(op, &who, now, &mut view)?;
        self.dirty = true;
        Ok(events)
    }

    /// The pipeline, and the rest of the app as the pipeline's extra sink.
    fn split(&mut self) -> (&mut Pipeline, View<'_>) {
        (
            &mut self.pipeline,
            View {
                history: &mut self.history,
                origin: &mut self.origin,
                gauges: &mut self.gauges,
                sources: &mut self.sources,
                source_error: &mut self.source_error,
                counters: &mut self.counters,
                last_unparsed: &mut self.last_unparsed,
                events: &mut self.events,
                events_seen: &mut self.events_seen,
                bell: &mut self.bell,
                bell_enabled: self.bell_enabled,
                dirty: &mut self.dirty,
            },
        )
    }

    /// Seconds of `t` on the history's origin.
    pub fn secs(&self, t: DateTime<Utc>) -> f64 {
        self.origin
            .map_or(0.0, |o| rarefy_core::timefmt::seconds_between(o, t))
    }

    /// Takes one source event. `now` is the live data clock (`None` in
    /// replay).
    pub fn ingest(&mut self, ev: &SourceEvent, now: Option<DateTime<Utc>>) {
        let (pipeline, mut view) = self.split();
        pipeline.feed(ev, now, &mut view);
        *view.dirty = true;
    }

    /// Starts the live data clock at `t` (nothing has arrived yet).
    pub fn start(&mut self, t: DateTime<Utc>) {
        let (pipeline, mut view) = self.split();
        pipeline.start(t, &mut view);
    }

    /// Advances data time without readings: every deadline up to `now`.
    pub fn tick(&mut self, now: DateTime<Utc>) {
        let (pipeline, mut view) = self.split();
        pipeline.advance_to(now, &mut view);
    }

    /// Ids of the alarms, in display order.
    pub fn alarm_ids(&self) -> Vec<String> {
        self.monitor()
            .alarms()
            .iter()
            .map(|a| a.rule.id.clone())
            .collect()
    }

    /// The panels follow the next pressure gauge: auto, each gauge in
    /// display order, auto again.
    pub fn next_follow(&mut self) {
        let ids: Vec<&String> = self
            .gauges
            .iter()
            .filter(|g| g.unit.is_pressure())
            .map(|g| &g.id)
            .collect();
        let next = match &self.follow {
            None => ids.first().map(|s| s.to_string()),
            Some(f) => ids
                .iter()
                .position(|g| *g == f)
                .and_then(|i| ids.get(i + 1))
                .map(|s| s.to_string()),
        };
        self.message = Some(match &next {
            Some(g) => format!("kinetics follow {g}"),
            None => format!(
                "kinetics follow {} (the best gauge in range)",
                crate::alarm::AUTO
            ),
        });
        self.follow = next;
    }

    /// Switches to the next pressure unit.
    pub fn next_unit(&mut self) {
        const CYCLE: [PressureUnit; 5] = [
            PressureUnit::Mbar,
            PressureUnit::Pa,
            PressureUnit::Torr,
            PressureUnit::MTorr,
            PressureUnit::HPa,
        ];
        let i = CYCLE
            .iter()
            .position(|u| *u == self.pressure_unit)
            .map_or(0, |i| i + 1);
        self.pressure_unit = CYCLE[i % CYCLE.len()];
        self.message = Some(format!("pressure in {}", self.pressure_unit.symbol()));
    }
}

/// The dashboard as the pipeline's sink: the parts of [`App`] that rows,
/// events and source changes update.
struct View<'a> {
    history: &'a mut History,
    origin: &'a mut Option<DateTime<Utc>>,
    gauges: &'a mut Vec<GaugeInfo>,
    sources: &'a mut BTreeMap<String, SourceState>,
    source_error: &'a mut Option<String>,
    counters: &'a mut Counters,
    last_unparsed: &'a mut Option<String>,
    events: &'a mut VecDeque<Event>,
    events_seen: &'a mut usize,
    bell: &'a mut bool,
    bell_enabled: bool,
    dirty: &'a mut bool,
}

impl Sink for View<'_> {
    fn accept(&mut self, item: Item<'_>, monitor: &Monitor) {
        *self.dirty = true;
        match item {
            Item::Row(samples) => {
                self.counters.rows += 1;
                self.counters.samples += samples.len() as u64;
                for s in samples {
                    if !self.gauges.iter().any(|g| same_id(&g.id, &s.channel)) {
                        self.gauges.push(GaugeInfo {
                            id: s.channel.clone(),
                            label: s.channel.clone(),
                            kind: None,
                            unit: s.unit,
                        });
                    }
                }
                let origin = *self.origin.get_or_insert_with(|| {
                    samples
                        .first()
                        .map_or(DateTime::<Utc>::UNIX_EPOCH, |s| s.time)
                });
                // A row's samples mostly share its time: its seconds are
                // worked out once.
                let mut last: Option<(DateTime<Utc>, f64)> = None;
                for s in samples {
                    let t = match last {
                        Some((time, t)) if time == s.time => t,
                        _ => {
                            let t = rarefy_core::timefmt::seconds_between(origin, s.time);
                            last = Some((s.time, t));
                            t
                        }
                    };
                    let v = match (s.status(), monitor.track(&s.channel)) {
                        (Status::Ok, Some(track)) if s.unit.is_pressure() => track.pressure_pa,
                        (Status::Ok, Some(track)) => track.temperature_k,
                        _ => None,
                    };
                    if let Some(v) = v {
                        self.history.push(&s.channel, t, v);
                    }
                }
            }
            Item::Event(e) => {
                if e.change.alarm_to() == Some(AlarmState::Unacknowledged) {
                    *self.bell = self.bell_enabled;
                }
                if self.events.len() >= EVENTS_KEPT {
                    self.events.pop_front();
                }
                self.events.push_back(e.clone());
                *self.events_seen += 1;
            }
            Item::Source(SourceEvent::Status { source, state }) => {
                self.sources.insert(source.clone(), *state);
            }
            Item::Source(SourceEvent::Unparsed { text, .. }) => {
                self.counters.unparsed += 1;
                // Device text is escaped by the decoder; keep it short.
                *self.last_unparsed = Some(text.chars().take(200).collect());
            }
            Item::Source(SourceEvent::Error { message, .. }) => {
                *self.source_error = Some(crate::sample::escape_bytes(message.as_bytes()));
            }
            Item::Source(SourceEvent::Samples(_) | SourceEvent::Gas { .. }) => {}
        }
    }
}
