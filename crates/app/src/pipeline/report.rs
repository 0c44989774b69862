//! The run report as one more sink of the one pipeline: every row of one
//! or more logs (a rotated recording read as one run, files in the order of
//! their first row's time) goes through a [`Pipeline`] exactly as in replay,
//! and a [`ReportSink`] accumulates each gauge from the monitor's view after
//! each reading. One pass; memory does not grow with the log (the events and
//! the first messages are kept).

use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};

use chrono::{DateTime, Utc};

use super::plot::PlotData;
use super::{Item, Pipeline, Sink};
use crate::alarm::quantity::Quantity;
use crate::alarm::rule::Test;
use crate::alarm::{Event, Monitor, MonitorSetup};
use crate::gas::GasTable;
use crate::log::{ForeignLogSpec, LogError, LogSource};
use crate::logfile::open_log;
use crate::report::{GaugeAccumulator, GaugeSummary, Observation, Threshold, Unusable};
use crate::sample::{SourceEvent, Status};
use rarefy_core::analysis::{Analysis, AnalysisOptions, Analyzer, PumpDownOptions};

/// How many reader messages a report keeps to show (all are counted).
pub const MESSAGES_KEPT: usize = 50;

/// What the report covers and how.
#[derive(Debug, Clone, Default)]
pub struct ReportOptions {
    /// Only this gauge.
    pub gauge: Option<String>,
    /// Readings before this time are not counted (they still drive alarms).
    pub from: Option<DateTime<Utc>>,
    /// Readings after this time are not counted.
    pub to: Option<DateTime<Utc>>,
    /// A pressure to reach, Pa.
    pub target_pa: Option<f64>,
    /// Intervals longer than this are gaps, s (default: 5 × the median).
    pub gap_after_s: Option<f64>,
    /// Chamber volume, m³, for pumping speeds and leak rates.
    pub volume_m3: Option<f64>,
    /// Keep a thinned copy of each gauge's pressure for a plot
    /// ([`super::plot`]); its memory does not grow with the log.
    pub plot: bool,
}

/// The pipeline's report sink: per-gauge accumulators, the events, and
/// optionally every reading with its derived values as CSV.
pub struct ReportSink {
    options: ReportOptions,
    gauges: Vec<GaugeAccumulator>,
    /// Pump-down and rate-of-rise analysis per gauge (same order).
    analyzers: Vec<Analyzer>,
    /// Time origin of the analyses' seconds: the first reading.
    origin: Option<DateTime<Utc>>,
    index: BTreeMap<String, usize>,
    events: Vec<Event>,
    notes: Vec<String>,
    csv: Option<Box<dyn Write + Send>>,
    csv_header: bool,
    csv_error: Option<String>,
    plot: Option<PlotData>,
}

impl ReportSink {
    /// An empty report; `csv`: where to write every reading with its
    /// derived columns.
    pub fn new(options: ReportOptions, csv: Option<Box<dyn Write + Send>>) -> Self {
        ReportSink {
            gauges: Vec::new(),
            analyzers: Vec::new(),
            origin: None,
            index: BTreeMap::new(),
            events: Vec::new(),
            notes: Vec::new(),
            csv,
            csv_header: false,
            csv_error: None,
            plot: options.plot.then(PlotData::default),
            options,
        }
    }

    fn in_window(&self, t: DateTime<Utc>) -> bool {
        self.options.from.is_none_or(|f| t >= f) && self.options.to.is_none_or(|e| t <= e)
    }

    fn thresholds(&self, id: &str, monitor: &Monitor) -> Vec<Threshold> {
        let mut out: Vec<Threshold> = monitor
            .setup()
            .rules
            .iter()
            .filter(|r| r.rule.gauge == id && r.rule.quantity == Quantity::Pressure)
            .filter_map(|r| match r.rule.test {
                Test::Above(v) | Test::Below(v) => Some(Threshold {
                    pa: v,
                    source: r.rule.id.clone(),
                }),
                _ => None,
            })
            .collect();
        if let Some(t) = self.options.target_pa {
            out.push(Threshold {
                pa: t,
                source: "--target".into(),
            });
        }
        out
    }

    fn write_csv(&mut self, obs: &Observation, id: &str, monitor: &Monitor) {
        let Some(out) = self.csv.as_mut() else {
            return;
        };
        if self.csv_error.is_some() {
            return;
        }
        let lengths = &monitor.setup().lengths;
        let mut line = String::new();
        if !self.csv_header {
            self.csv_header = true;
            line.push_str("time,gauge,status,pressure_pa,number_density_per_m3,mean_free_path_m");
            for l in lengths {
                line.push_str(&format!(",knudsen {0},regime {0}", csv_text(&l.name)));
            }
            line.push_str(",impingement_per_m2_s,monolayer_time_s,range\n");
        }
        let track = monitor.track(id);
        let derived = track
            .and_then(|t| t.derived.as_ref())
            .filter(|_| obs.pressure_pa.is_some());
        let num = |v: Option<f64>| v.map(|v| format!("{v:e}")).unwrap_or_default();
        line.push_str(&format!(
            "{},{},{},{},{},{}",
            crate::timefmt::write_rfc3339(obs.time),
            csv_text(id),
            obs.status.as_str(),
            num(obs.pressure_pa),
            num(derived.map(|d| d.number_density_per_m3)),
            num(derived.map(|d| d.mean_free_path_m)),
        ));
        for l in lengths {
            let d = derived.and_then(|d| d.lengths.iter().find(|x| x.name == l.name));
            line.push_str(&format!(
                ",{},{}",
                num(d.map(|d| d.knudsen)),
                d.map(|d| d.regime.as_str()).unwrap_or_default()
            ));
        }
        line.push_str(&format!(
            ",{},{},{}\n",
            num(derived.map(|d| d.impingement_per_m2_s)),
            num(derived.map(|d| d.monolayer_time_s)),
            derived.map(|d| d.vacuum_range.as_str()).unwrap_or_default()
        ));
        if let Err(e) = out.write_all(line.as_bytes()) {
            self.csv_error = Some(format!("cannot write the CSV: {e}"));
        }
    }

    /// Each gauge's report, in the order gauges first appeared.
    pub fn summaries(&self) -> Vec<GaugeSummary> {
        self.gauges.iter().map(|g| g.summary()).collect()
    }

    /// Each gauge's pump-downs and rate-of-rise segments so far, in the
    /// order of [`ReportSink::summaries`].
    pub fn analyses(&self) -> Vec<Analysis> {
        self.analyzers
            .iter()
            .cloned()
            .map(Analyzer::finish)
            .collect()
    }

    /// The data time the analyses' seconds count from.
    pub fn origin(&self) -> Option<DateTime<Utc>> {
        self.origin
    }

    /// The events the pipeline gave (alarms, gates, gas changes) within the
    /// window.
    pub fn events(&self) -> &[Event] {
        &self.events
    }

    /// What was kept for the plot, when [`ReportOptions::plot`] asked.
    pub fn plot_data(&self) -> Option<&PlotData> {
        self.plot.as_ref()
    }

    /// Problems the pipeline reported (a gas column naming no gas …).
    pub fn notes(&self) -> &[String] {
        &self.notes
    }
}

/// A CSV cell: quoted when it holds a comma, quote or line break.
fn csv_text(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

impl Sink for ReportSink {
    fn accept(&mut self, item: Item<'_>, monitor: &Monitor) {
        match item {
            Item::Row(samples) => {
                for s in samples {
                    if self.options.gauge.as_ref().is_some_and(|g| *g != s.channel)
                        || !self.in_window(s.time)
                    {
                        continue;
                    }
                    let track = monitor.track(&s.channel);
                    let status = s.reading.status();
                    let usable =
                        track.filter(|t| status == Status::Ok && t.is_pressure && !t.uncorrectable);
                    let pressure_pa = usable.and_then(|t| t.pressure_pa);
                    let derived = usable.and_then(|t| t.derived.as_ref());
                    let obs = Observation {
                        time: s.time,
                        status,
                        pressure_pa,
                        range: derived.map(|d| d.vacuum_range),
                        regimes: derived
                            .map(|d| {
                                d.lengths
                                    .iter()
                                    .map(|l| (l.name.clone(), l.regime))
                                    .collect()
                            })
                            .unwrap_or_default(),
                        exposure_langmuir: track
                            .filter(|t| t.is_pressure)
                            .map(|t| t.exposure.langmuir()),
                    };
                    self.write_csv(&obs, &s.channel, monitor);
                    let i = match self.index.get(&s.channel) {
                        Some(i) => *i,
                        None => {
                            let th = self.thresholds(&s.channel, monitor);
                            self.gauges.push(GaugeAccumulator::new(
                                &s.channel,
                                th,
                                self.options.gap_after_s,
                            ));
                            self.analyzers.push(Analyzer::new(AnalysisOptions {
                                volume_m3: self.options.volume_m3,
                                pumpdown: PumpDownOptions {
                                    target_pa: self.options.target_pa,
                                    ..PumpDownOptions::default()
                                },
                                ..AnalysisOptions::default()
                            }));
                            if let Some(plot) = self.plot.as_mut() {
                                plot.add_gauge(monitor.setup());
                            }
                            self.index.insert(s.channel.clone(), self.gauges.len() - 1);
                            self.gauges.len() - 1
                        }
                    };
                    // The gauge's true pressure, on seconds from the first
                    // reading, to the pump-down and rate-of-rise analysis.
                    let origin = *self.origin.get_or_insert(s.time);
                    let t_s = (s.time - origin).num_milliseconds() as f64 / 1000.0;
                    if let (Some(p), Some(a)) = (pressure_pa, self.analyzers.get_mut(i)) {
                        a.push(t_s, p);
                    }
                    if let (Some(p), Some(plot)) = (pressure_pa, self.plot.as_mut()) {
                        plot.push(i, t_s, p, derived.map(|d| d.mean_free_path_m * p));
                    }
                    if let Some(g) = self.gauges.get_mut(i) {
                        g.add(obs);
                    }
                }
            }
            Item::Event(e) => {
                if self.in_window(e.time) {
                    self.events.push(e.clone());
                }
            }
            Item::Source(SourceEvent::Error { message, .. }) => {
                if self.notes.len() < MESSAGES_KEPT {
                    self.notes.push(message.clone());
                }
            }
            Item::Source(_) => {}
        }
    }

    fn flush(&mut self) {
        if let Some(out) = self.csv.as_mut()
            && let Err(e) = out.flush()
        {
            self.csv_error
                .get_or_insert(format!("cannot write the CSV: {e}"));
        }
    }

    fn finish(&mut self) -> Result<(), String> {
        self.flush();
        match self.csv_error.take() {
            Some(e) => Err(e),
            None => Ok(()),
        }
    }
}

/// What reading the files gave besides the readings.
#[derive(Debug, Clone, Default)]
pub struct WalkOutcome {
    /// The files, in the order read (by their first row's time).
    pub files: Vec<PathBuf>,
    /// Rows read (used whole or in part).
    pub rows: u64,
    /// Rows not used, or used without some cells, by cause.
    pub unusable: Unusable,
    /// Rows used whose time was earlier than the row before's.
    pub times_went_back: u64,
    /// Rows used whose time repeated the row before's.
    pub times_repeated: u64,
    /// Rows used whose local time was ambiguous.
    pub ambiguous_times: u64,
    /// Located messages from the readers (the first [`MESSAGES_KEPT`]).
    pub messages: Vec<String>,
    /// Messages in all.
    pub message_count: u64,
    /// Whether a trip alarm was active at any time.
    pub trip_seen: bool,
}

impl WalkOutcome {
    fn say(&mut self, e: &LogError) {
        self.message_count += 1;
        if self.messages.len() < MESSAGES_KEPT {
            self.messages.push(e.to_string());
        }
    }
}

/// The cause a reader's error is counted under.
fn cause_of(e: &LogError) -> &'static str {
    let m = e.message.as_str();
    if e.row.is_some() {
        "a cell could not be read (row used without it)"
    } else if m.contains("cells; the header has") {
        "wrong number of cells (a cut-off line?)"
    } else if m.contains("longer than") {
        "line too long"
    } else if m.contains("UTF-8") || m.contains("encoding") {
        "not in the file's encoding"
    } else if e.column == Some(1) {
        "time could not be read"
    } else {
        "row could not be read"
    }
}

/// Walks `files` as one run through a pipeline with `setup`'s monitor,
/// giving `sink` every item. Files that cannot be opened are reported and
/// skipped.
pub fn walk(
    files: &[PathBuf],
    foreign: Option<&ForeignLogSpec>,
    setup: &MonitorSetup,
    gases: &GasTable,
    sink: &mut ReportSink,
) -> WalkOutcome {
    let mut out = WalkOutcome::default();
    // Each file's first row time, for the order: one short read per file.
    let mut order: Vec<(Option<DateTime<Utc>>, usize)> = Vec::new();
    for (i, f) in files.iter().enumerate() {
        match open_log(f, foreign) {
            Ok(mut log) => {
                let first = log.by_ref().find_map(|r| match r {
                    Ok(row) => Some(row.time),
                    Err(e) => e.row.map(|r| r.time),
                });
                order.push((first, i));
            }
            Err(e) => out.say(&e),
        }
    }
    order.sort_by_key(|(t, i)| (*t, *i));
    let mut pipeline = Pipeline::new(crate::alarm::Monitor::new(setup.clone()));
    pipeline.set_gases(gases.clone());
    let mut gas = None;
    for (_, i) in order {
        let Some(path) = files.get(i) else { continue };
        match open_log(path, foreign) {
            Ok(log) => read_one(path, log, &mut pipeline, &mut gas, sink, &mut out),
            Err(e) => out.say(&e),
        }
    }
    if let Err(e) = sink.finish() {
        out.messages.push(e);
        out.message_count += 1;
    }
    out.trip_seen = pipeline.monitor().trip_seen();
    out
}

fn read_one(
    path: &Path,
    mut log: Box<dyn LogSource>,
    pipeline: &mut Pipeline,
    gas: &mut Option<String>,
    sink: &mut ReportSink,
    out: &mut WalkOutcome,
) {
    out.files.push(path.to_path_buf());
    for w in log.warnings().to_vec() {
        out.say(&w);
    }
    for row in log.by_ref() {
        let row = match row {
            Ok(r) => r,
            Err(e) => {
                out.say(&e);
                out.unusable.count(cause_of(&e));
                match e.row {
                    Some(r) => *r,
                    None => continue,
                }
            }
        };
        out.rows += 1;
        for ev in crate::log::row_events(row, gas) {
            pipeline.feed(&ev, None, sink);
        }
    }
    out.times_went_back += log.times_went_back();
    out.times_repeated += log.times_repeated();
    out.ambiguous_times += log.ambiguous_times();
}
