//! The run report as one more sink of the one pipeline: every row of one
//! or more logs (a rotated recording read as one run, files in the order of
//! their first row's time) goes through a [`Pipeline`] exactly as in replay,
//! and a [`ReportSink`] accumulates each gauge from the monitor's view after
//! each reading. One pass; memory does not grow with the log (the events and
//! the first messages are kept).

use std::io::Write;
use std::path::{Path, PathBuf};

use chrono::{DateTime, Utc};

use super::csv_out::{CsvOut, DerivedCells, Record};
use super::plot::PlotData;
use super::read_ahead::ReadMode;
use super::tally::{Counted, Element, Labels, Msg, TallyOut};
use super::{Item, Pipeline, Sink};
use crate::alarm::quantity::Quantity;
use crate::alarm::rule::Test;
use crate::alarm::track_map::{TrackMap, same_id};
use crate::alarm::{Event, Monitor, MonitorSetup};
use crate::gas::GasTable;
use crate::log::{ForeignLogSpec, LogError, LogSource};
use crate::logfile::open_log;
use crate::report::{GaugeAccumulator, GaugeSummary, Observation, Threshold, Unusable};
use crate::sample::{SourceEvent, Status};
use rarefy_core::alarm::monitor::GaugeTrack;
use rarefy_core::analysis::{Analysis, AnalysisOptions, Analyzer, PumpDownOptions, RiseOptions};
use rarefy_core::engine::gauge::GaugeKind;
use rarefy_core::engine::regime::{VacuumRange, knudsen};
use rarefy_core::engine::{Derived, LengthDerived, Precomputed, SteadyBand};
use std::sync::Arc;

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
    /// Time the analyses' seconds count from (default: the first reading
    /// counted).
    pub origin: Option<DateTime<Utc>>,
    /// Time ranges to analyse as rate-of-rise segments, whatever the
    /// pressure does.
    pub rise_ranges: Vec<(DateTime<Utc>, DateTime<Utc>)>,
    /// Keep a thinned copy of each gauge's pressure for a plot
    /// ([`super::plot`]); its memory does not grow with the log.
    pub plot: bool,
}

/// The pipeline's report sink: per-gauge accumulators, the events, and
/// optionally every reading with its derived values as CSV.
pub struct ReportSink {
    options: ReportOptions,
    /// The per-gauge accumulators and analyses, and the analysis of the
    /// chamber pressure (at each reading, the best gauge in its range,
    /// [`crate::alarm::chamber`]): fed from here, on a second core when
    /// there is one.
    tally: TallyOut,
    /// The chamber pressure's analysis has started.
    chamber_started: bool,
    /// Pressure gauges seen.
    pressure_gauges: usize,
    /// Each gauge's source names in its analyzer (in the order first seen).
    labels: Vec<Labels>,
    /// With `gauge` given: the channels the log has besides it.
    other_channels: TrackMap<()>,
    /// A reading of a channel the report covers was seen (in the time
    /// window or not).
    gauge_seen: bool,
    /// Time origin of the analyses' seconds: the first reading.
    origin: Option<DateTime<Utc>>,
    index: TrackMap<usize>,
    events: Vec<Event>,
    notes: Vec<String>,
    /// Where the CSV goes, until its first row.
    csv_to: Option<Box<dyn Write + Send>>,
    /// The CSV, from its first row.
    csv: Option<CsvOut>,
    /// Write the CSV on a thread of its own.
    csv_thread: bool,
    plot: Option<PlotData>,
    /// Feed the accumulators and analyses (not when the CSV alone is
    /// wanted: [`ReportSink::csv_alone`]).
    summary: bool,
    /// The earliest of the gauges' first readings counted and the latest
    /// reading counted.
    span: Option<(DateTime<Utc>, DateTime<Utc>)>,
    /// Buffers for a reading's kinetics, reused (boxed: lent out for
    /// each row by moving a pointer).
    scratch: Option<Box<Scratch>>,
    /// Derive every reading in full and pass its results on each time
    /// (the straightforward path the shortcuts are tested against).
    straightforward: bool,
}

/// The [`ReportSink`]'s buffers for a reading's kinetics.
#[derive(Default)]
struct Scratch {
    /// All of it (the straightforward path only).
    derived: Option<Derived>,
    /// Per gauge (by index), the range and per-length results, for the
    /// summary and the CSV.
    steady: Vec<Option<Steady>>,
}

/// A gauge's range and per-length results for the summary, kept while its
/// readings stay where they cannot change: at most readings only the
/// Knudsen numbers are worked out again, not the classes.
struct Steady {
    /// A kinetics they were worked out with (kept alive, so that one made
    /// later cannot be taken for it); any other that classifies the same
    /// way ([`Precomputed::same_classes`]: a new temperature) will do.
    pre: Arc<Precomputed>,
    /// [`Precomputed::steady_band`] of the reading they were worked out at.
    band: SteadyBand,
    range: VacuumRange,
    lengths: Vec<LengthDerived>,
    /// The gauge's last reading passed these on to the tally: the next
    /// may say "as before" while the classes stay (the tally reads the
    /// names and regimes, not the Knudsen numbers).
    passed: bool,
}

impl Steady {
    /// The range and per-length results of `track`'s last valid pressure
    /// (none without kinetics), from `slot` while they still apply, else
    /// worked out into it; and whether they are the ones the tally was
    /// passed last (so the same names and regimes). `passing`: they will
    /// be passed now.
    fn at<'a>(
        slot: &'a mut Option<Steady>,
        track: &GaugeTrack,
        passing: bool,
    ) -> Option<(VacuumRange, &'a [LengthDerived], bool)> {
        let (Some(pre), Some(p)) = (track.shared_kinetics(), track.pressure_pa) else {
            Steady::not_passed(slot);
            return None;
        };
        // The same expressions as `Precomputed::lengths_into`.
        let mean_free_path_m = pre.mean_free_path_m(p);
        let inside = slot
            .as_mut()
            .is_some_and(|st| st.band.holds(p, mean_free_path_m) && st.classifies_as(pre));
        match slot {
            Some(st) if inside => {
                for l in &mut st.lengths {
                    l.knudsen = knudsen(mean_free_path_m, l.length_m);
                }
            }
            Some(st) => {
                if !Arc::ptr_eq(&st.pre, pre) {
                    st.pre = Arc::clone(pre);
                }
                st.refresh(p);
                st.passed = false;
            }
            None => {
                slot.insert(Steady {
                    pre: Arc::clone(pre),
                    band: SteadyBand::EMPTY,
                    range: VacuumRange::Low,
                    lengths: Vec::new(),
                    passed: false,
                })
                .refresh(p);
            }
        }
        let st = slot.as_mut()?;
        let as_before = st.passed;
        st.passed = passing;
        Some((st.range, &st.lengths, as_before))
    }

    /// Whether `pre` classifies as the kinetics the results were worked
    /// out with. One that does only after comparing the lengths (a new
    /// gas) is kept instead, so that the readings after it compare by
    /// pointer.
    fn classifies_as(&mut self, pre: &Arc<Precomputed>) -> bool {
        if Arc::ptr_eq(&self.pre, pre) || self.pre.shares_classes(pre) {
            true
        } else if self.pre.same_classes(pre) {
            self.pre = Arc::clone(pre);
            true
        } else {
            false
        }
    }

    /// The tally is passed other per-length results than `slot`'s.
    fn not_passed(slot: &mut Option<Steady>) {
        if let Some(st) = slot {
            st.passed = false;
        }
    }

    /// Everything worked out again at `p`.
    fn refresh(&mut self, p: f64) {
        self.pre.lengths_into(p, &mut self.lengths);
        self.range = self.pre.vacuum_range(p);
        self.band = self.pre.steady_band(p);
    }
}

impl ReportSink {
    /// An empty report; `csv`: where to write every reading with its
    /// derived columns.
    pub fn new(options: ReportOptions, csv: Option<Box<dyn Write + Send>>) -> Self {
        ReportSink {
            origin: options.origin,
            tally: TallyOut::new(two_cores()),
            chamber_started: false,
            pressure_gauges: 0,
            labels: Vec::new(),
            other_channels: TrackMap::default(),
            gauge_seen: false,
            index: TrackMap::default(),
            events: Vec::new(),
            notes: Vec::new(),
            csv_to: csv,
            csv: None,
            csv_thread: two_cores(),
            plot: options.plot.then(PlotData::default),
            summary: true,
            span: None,
            scratch: None,
            straightforward: false,
            options,
        }
    }

    /// Derives every reading in full and passes its results on each time:
    /// the straightforward path, which the tests hold the shortcuts to.
    #[cfg(test)]
    fn straightforward(mut self) -> Self {
        self.straightforward = true;
        self
    }

    /// Writes the CSV and keeps the events and messages, but feeds no
    /// accumulator or analysis: [`ReportSink::summaries`],
    /// [`ReportSink::analyses`] and [`ReportSink::chamber_analysis`] give
    /// nothing, [`ReportSink::span`] still does. For a CSV report with no
    /// plot, where nothing reads them. Call before the first item.
    pub fn csv_alone(mut self) -> Self {
        self.summary = false;
        self
    }

    /// The earliest of the gauges' first readings in the window and the
    /// latest reading in it (the summaries' earliest start and latest
    /// end); `None` when no reading was counted.
    pub fn span(&self) -> Option<(DateTime<Utc>, DateTime<Utc>)> {
        self.span
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

    /// Writes the CSV on a thread of its own (`true`, the default on a
    /// machine with two cores or more) or on the caller's; the bytes are
    /// the same.
    pub fn csv_on_own_thread(mut self, yes: bool) -> Self {
        self.csv_thread = yes;
        self
    }

    /// Feeds the accumulators and analyses on a thread of their own
    /// (`true`, the default on a machine with two cores or more) or on the
    /// caller's; the results are the same. Call before the first item.
    pub fn tally_on_own_thread(mut self, yes: bool) -> Self {
        self.tally = TallyOut::new(yes);
        self
    }

    /// `derived`: the reading's CSV cells, when its pressure is usable;
    /// the per-length cells come from `obs.regimes`.
    fn write_csv(
        &mut self,
        obs: &Observation,
        id: &str,
        derived: Option<DerivedCells>,
        monitor: &Monitor,
    ) {
        let lengths = &monitor.setup().lengths;
        if let Some(out) = self.csv_to.take() {
            let names: Vec<String> = lengths.iter().map(|l| l.name.clone()).collect();
            self.csv = Some(CsvOut::new(out, &names, self.csv_thread));
        }
        let Some(csv) = self.csv.as_mut() else {
            return;
        };
        let gauge = csv.gauge(id);
        let record = Record {
            time: obs.time,
            gauge,
            status: obs.status,
            pressure_pa: obs.pressure_pa,
            derived,
        };
        let cells = lengths.iter().enumerate().map(|(i, l)| {
            // The engine gives the lengths in the setup's order.
            let d = match obs.regimes.get(i) {
                Some(x) if same_id(&x.name, &l.name) => Some(x),
                _ => obs.regimes.iter().find(|x| same_id(&x.name, &l.name)),
            };
            d.map(|d| (d.knudsen, d.regime.as_str()))
        });
        csv.push(record, cells);
    }

    /// One reading of a row: to the CSV and the tally. `scratch`: the
    /// sink's buffers, lent for the row.
    fn take_sample(&mut self, s: &crate::sample::Sample, monitor: &Monitor, scratch: &mut Scratch) {
        let Scratch { derived, steady } = scratch;
        if let Some(g) = &self.options.gauge
            && !same_id(g, &s.channel)
        {
            // Wanted only while the gauge has not come.
            if !self.gauge_seen {
                self.other_channels.get_or_insert_with(&s.channel, || ());
            }
            return;
        }
        self.gauge_seen = true;
        if !self.in_window(s.time) {
            return;
        }
        let track = monitor.track(&s.channel);
        let i = match self.index.get(&s.channel) {
            Some(i) => {
                if let Some((_, end)) = self.span.as_mut()
                    && s.time > *end
                {
                    *end = s.time;
                }
                *i
            }
            None => {
                // The span starts at the earliest of the gauges'
                // first readings (as the summaries' starts do).
                self.span = Some(match self.span {
                    Some((start, end)) => (start.min(s.time), end.max(s.time)),
                    None => (s.time, s.time),
                });
                self.origin.get_or_insert(s.time);
                let labels = Labels::new(&s.channel, gauge_kind(&s.channel, monitor));
                self.labels.push(labels.clone());
                if self.summary {
                    let th = self.thresholds(&s.channel, monitor);
                    let acc = GaugeAccumulator::new(&s.channel, th, self.options.gap_after_s);
                    let a = self.analyzer();
                    self.tally
                        .send(Msg::Gauge(Some(Box::new((acc, a, labels)))));
                }
                if track.is_some_and(|t| t.is_pressure) {
                    self.pressure_gauges += 1;
                }
                if let Some(plot) = self.plot.as_mut() {
                    plot.add_gauge(monitor.setup());
                }
                self.index
                    .get_or_insert_with(&s.channel, || self.labels.len() - 1);
                self.labels.len() - 1
            }
        };
        let status = s.reading.status();
        let usable = track.filter(|t| status == Status::Ok && t.is_pressure && !t.uncorrectable);
        let pressure_pa = usable.and_then(|t| t.pressure_pa);
        // Only what is read is worked out (the straightforward path, for
        // the tests, derives everything).
        let kinetics = usable.and_then(|t| t.kinetics());
        let derived: Option<&Derived> = match kinetics {
            Some((k, p)) if self.straightforward => Some(match derived {
                Some(d) => {
                    k.derive_into(p, d);
                    d
                }
                None => derived.insert(k.derive(p)),
            }),
            _ => None,
        };
        if steady.len() <= i {
            steady.resize_with(i + 1, || None);
        }
        // `as_before`: the tally has these per-length results already
        // (the gauge's last reading passed it the same kept ones).
        let (range, regimes, as_before): (_, &[LengthDerived], _) = match (derived, usable) {
            (None, Some(t)) => match Steady::at(&mut steady[i], t, self.summary) {
                Some((range, lengths, as_before)) => (Some(range), lengths, as_before),
                None => (None, &[], false),
            },
            (Some(d), _) => {
                Steady::not_passed(&mut steady[i]);
                (Some(d.vacuum_range), &d.lengths, false)
            }
            (None, None) => {
                Steady::not_passed(&mut steady[i]);
                (None, &[], false)
            }
        };
        // The CSV's cells (when there is a CSV): each quantity alone, by
        // the expression the full derivation uses.
        let wants_csv = self.csv.is_some() || self.csv_to.is_some();
        let cells = match (derived, kinetics) {
            _ if !wants_csv => None,
            (Some(d), _) => Some(DerivedCells {
                number_density_per_m3: d.number_density_per_m3,
                mean_free_path_m: d.mean_free_path_m,
                impingement_per_m2_s: d.impingement_per_m2_s,
                monolayer_time_s: d.monolayer_time_s,
                range: d.vacuum_range.as_str(),
            }),
            (None, Some((k, p))) => Some(DerivedCells {
                number_density_per_m3: k.number_density_per_m3(p),
                mean_free_path_m: k.mean_free_path_m(p),
                impingement_per_m2_s: k.impingement_per_m2_s(p),
                monolayer_time_s: k.monolayer_time_s(p),
                range: range.unwrap_or_else(|| k.vacuum_range(p)).as_str(),
            }),
            (None, None) => None,
        };
        let obs = Observation {
            time: s.time,
            status,
            pressure_pa,
            range,
            regimes,
            exposure_langmuir: track
                .filter(|t| t.is_pressure)
                .map(|t| t.exposure.langmuir()),
        };
        self.write_csv(&obs, &s.channel, cells, monitor);
        if !self.summary {
            return;
        }
        // The gauge's true pressure, on seconds from the first
        // reading, to the pump-down and rate-of-rise analysis (worked out
        // by the tally, off this thread).
        let origin = *self.origin.get_or_insert(s.time);
        if let (Some(p), Some(plot)) = (pressure_pa, self.plot.as_mut()) {
            plot.push(
                i,
                crate::timefmt::seconds_between(origin, s.time),
                p,
                kinetics.map(|(k, kp)| k.mean_free_path_m(kp) * p),
            );
        }
        let element = match (pressure_pa, self.labels.get(i)) {
            (Some(_), Some(l)) => l.element(track.and_then(|t| t.indicated)),
            _ => Element::Whole,
        };
        let counted = Counted {
            gauge: i,
            time: obs.time,
            origin,
            status: obs.status,
            pressure_pa: obs.pressure_pa,
            range: obs.range,
            exposure_langmuir: obs.exposure_langmuir,
            element,
        };
        self.tally
            .reading(counted, (!as_before).then_some(obs.regimes));
    }

    /// Each gauge's report, in the order gauges first appeared (complete
    /// once the sink is finished).
    pub fn summaries(&self) -> Vec<GaugeSummary> {
        self.tally
            .tally()
            .map(|t| t.gauges.iter().map(|g| g.summary()).collect())
            .unwrap_or_default()
    }

    /// Each gauge's pump-downs and rate-of-rise segments, in the order of
    /// [`ReportSink::summaries`] (complete once the sink is finished).
    pub fn analyses(&self) -> Vec<Analysis> {
        self.tally
            .tally()
            .map(|t| t.analyzers.iter().cloned().map(Analyzer::finish).collect())
            .unwrap_or_default()
    }

    /// The analysis of the chamber pressure (the best gauge in range at
    /// each reading, no fit spanning two gauges), when the log has more than
    /// one pressure gauge (complete once the sink is finished).
    pub fn chamber_analysis(&self) -> Option<Analysis> {
        self.tally
            .tally()
            .and_then(|t| t.chamber.clone())
            .filter(|_| self.pressure_gauges > 1)
            .map(Analyzer::finish)
    }

    /// A new analyzer with the report's options (the origin is known).
    fn analyzer(&self) -> Analyzer {
        let origin = self.origin;
        let secs = |t: DateTime<Utc>| origin.map_or(0.0, |o| crate::timefmt::seconds_between(o, t));
        Analyzer::new(AnalysisOptions {
            volume_m3: self.options.volume_m3,
            pumpdown: PumpDownOptions {
                target_pa: self.options.target_pa,
                ..PumpDownOptions::default()
            },
            rise: RiseOptions {
                ranges: self
                    .options
                    .rise_ranges
                    .iter()
                    .map(|(a, b)| (secs(*a), secs(*b)))
                    .collect(),
                ..RiseOptions::default()
            },
        })
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

    /// With [`ReportOptions::gauge`] given and never seen: the log's other
    /// channels (to say what there is when the gauge is not among them;
    /// once the gauge came, those before it).
    pub fn other_channels(&self) -> impl Iterator<Item = &str> {
        self.other_channels.iter().map(|(id, _)| id.as_str())
    }

    /// The window's start ([`ReportOptions::from`]).
    pub fn from(&self) -> Option<DateTime<Utc>> {
        self.options.from
    }

    /// The window's end ([`ReportOptions::to`]).
    pub fn to(&self) -> Option<DateTime<Utc>> {
        self.options.to
    }

    /// Whether a reading of a channel the report covers came (in the time
    /// window or not).
    pub fn gauge_seen(&self) -> bool {
        self.gauge_seen
    }

    /// Problems the pipeline reported (a gas column naming no gas …).
    pub fn notes(&self) -> &[String] {
        &self.notes
    }
}

impl ReportSink {
    /// Feeds the chamber pressure to its analysis when this row holds a
    /// reading of the gauge it comes from now.
    fn push_chamber(&mut self, samples: &[crate::sample::Sample], monitor: &Monitor) {
        // With one pressure gauge it is that gauge's analysis (counted from
        // when a second one appears).
        if self.pressure_gauges < 2 {
            return;
        }
        let Some((source, track)) = monitor.chamber_track(&Quantity::Pressure) else {
            return;
        };
        let Some(s) = samples.iter().find(|s| s.channel == source.gauge) else {
            return;
        };
        let (Some(p), Some(origin)) = (track.pressure_pa, self.origin) else {
            return;
        };
        if !self.in_window(s.time) || track.uncorrectable {
            return;
        }
        // The gauge was counted just before (this row, in the window).
        let Some(&gauge) = self.index.get(&s.channel) else {
            return;
        };
        if !self.chamber_started {
            self.chamber_started = true;
            let a = self.analyzer();
            self.tally.send(Msg::ChamberStart(Some(Box::new(a))));
        }
        let element = self
            .labels
            .get(gauge)
            .map_or(Element::Whole, |l| l.element(track.indicated));
        self.tally.send(Msg::Chamber {
            gauge,
            element,
            t_s: crate::timefmt::seconds_between(origin, s.time),
            p,
        });
    }
}

/// Whether the machine has a second core for the report's helper threads.
fn two_cores() -> bool {
    std::thread::available_parallelism().is_ok_and(|n| n.get() >= 2)
}

fn gauge_kind(id: &str, monitor: &Monitor) -> Option<GaugeKind> {
    monitor
        .setup()
        .gauges
        .iter()
        .find(|g| g.id == id)
        .map(|g| g.model.kind)
}

impl Sink for ReportSink {
    fn accept(&mut self, item: Item<'_>, monitor: &Monitor) {
        match item {
            Item::Row(samples) => {
                let mut scratch = self.scratch.take().unwrap_or_default();
                for s in samples {
                    self.take_sample(s, monitor, &mut scratch);
                }
                self.scratch = Some(scratch);
                if self.summary {
                    self.push_chamber(samples, monitor);
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
        if let Some(csv) = self.csv.as_mut() {
            csv.flush();
        }
    }

    fn finish(&mut self) -> Result<(), String> {
        let tally = self.tally.settle();
        let csv = match (self.csv.as_mut(), self.csv_to.as_mut()) {
            (Some(csv), _) => csv.finish(),
            (None, Some(out)) => out
                .flush()
                .map_err(|e| format!("cannot write the CSV: {e}")),
            (None, None) => Ok(()),
        };
        if !tally {
            return Err("the report's accumulators stopped unexpectedly".into());
        }
        csv
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
    /// Rows used whose time carried a different UTC offset from the row
    /// before's.
    pub time_offset_changes: u64,
    /// Located messages from the readers (the first [`MESSAGES_KEPT`]).
    pub messages: Vec<String>,
    /// Messages in all.
    pub message_count: u64,
    /// Whether a trip alarm was active at any time.
    pub trip_seen: bool,
    /// The report's own output (the CSV) could not be written in full.
    pub output_error: Option<String>,
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
    if e.row.is_some() && m.contains(" is not above zero: kept as read") {
        "a pressure not above zero (reading kept, without kinetics)"
    } else if e.row.is_some() {
        "a cell could not be read (row used without it)"
    } else if let Some((n, header)) = cell_counts(m) {
        if n < header {
            "fewer cells than the header (a cut-off line?)"
        } else {
            "more cells than the header (a header that does not match the rows?)"
        }
    } else if m.contains("longer than") {
        "line too long"
    } else if m.contains("UTF-8") || m.contains("encoding") {
        "not in the file's encoding"
    } else if m.contains("has no UTC offset") {
        "time without a UTC offset"
    } else if e.column == Some(1) || m.starts_with("time \"") {
        "time could not be read"
    } else {
        "row could not be read"
    }
}

/// The row's and the header's cell counts from a v1 reader's message
/// "row has N cells; the header has M (…)".
fn cell_counts(message: &str) -> Option<(usize, usize)> {
    let rest = message.strip_prefix("row has ")?;
    let (n, rest) = rest.split_once(" cells; the header has ")?;
    let header = rest.split_whitespace().next()?;
    Some((n.parse().ok()?, header.parse().ok()?))
}

/// The cause the lines of a file that could not be opened as a log are
/// counted under.
const FILE_SKIPPED: &str = "in a file whose header could not be read (file skipped)";

/// The lines of a file that could not be opened as a log that may have held
/// rows: those after the line the error is on that are neither blank nor
/// `#` lines. 0 when the file cannot be read. Streams the file in the
/// reader's buffer, whatever the length of its lines.
fn lines_after(path: &Path, line: Option<u64>) -> u64 {
    use std::io::BufRead;
    let Ok(file) = std::fs::File::open(path) else {
        return 0;
    };
    let after = line.unwrap_or(0);
    let mut reader = std::io::BufReader::new(file);
    let (mut n, mut number) = (0, 1u64);
    // The first byte of the line that is not white space.
    let mut first: Option<u8> = None;
    let counts = |number: u64, first: Option<u8>| {
        u64::from(number > after && first.is_some_and(|c| c != b'#'))
    };
    loop {
        let buf = match reader.fill_buf() {
            Ok(b) if !b.is_empty() => b,
            _ => break,
        };
        for &b in buf {
            if b == b'\n' {
                n += counts(number, first);
                number += 1;
                first = None;
            } else if first.is_none() && !b.is_ascii_whitespace() {
                first = Some(b);
            }
        }
        let used = buf.len();
        reader.consume(used);
    }
    n + counts(number, first)
}

/// Walks `files` as one run through a pipeline with `setup`'s monitor,
/// giving `sink` every item. Files that cannot be opened are reported and
/// skipped. Rows are read ahead on a second core when there is one.
pub fn walk(
    files: &[PathBuf],
    foreign: Option<&ForeignLogSpec>,
    setup: &MonitorSetup,
    gases: &GasTable,
    sink: &mut ReportSink,
) -> WalkOutcome {
    walk_with(files, foreign, setup, gases, sink, ReadMode::auto())
}

/// [`walk`], reading the rows as `mode` says (the result is the same).
pub fn walk_with(
    files: &[PathBuf],
    foreign: Option<&ForeignLogSpec>,
    setup: &MonitorSetup,
    gases: &GasTable,
    sink: &mut ReportSink,
    mode: ReadMode,
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
            Err(e) => {
                out.say(&e);
                for _ in 0..lines_after(f, e.line) {
                    out.unusable.count(FILE_SKIPPED);
                }
            }
        }
    }
    order.sort_by_key(|(t, i)| (*t, *i));
    let mut pipeline = Pipeline::new(crate::alarm::Monitor::new(setup.clone()));
    pipeline.set_gases(gases.clone());
    let mut gas = None;
    for (_, i) in order {
        let Some(path) = files.get(i) else { continue };
        match open_log(path, foreign) {
            Ok(log) => read_one(path, log, mode, &mut pipeline, &mut gas, sink, &mut out),
            Err(e) => out.say(&e),
        }
    }
    if let Err(e) = sink.finish() {
        out.output_error = Some(e);
    }
    out.trip_seen = pipeline.monitor().trip_seen();
    out
}

fn read_one(
    path: &Path,
    log: Box<dyn LogSource>,
    mode: ReadMode,
    pipeline: &mut Pipeline,
    gas: &mut Option<String>,
    sink: &mut ReportSink,
    out: &mut WalkOutcome,
) {
    out.files.push(path.to_path_buf());
    for w in log.warnings().to_vec() {
        out.say(&w);
    }
    let name = path.display().to_string();
    let mut items = 0u64;
    // The row before's line and time, for the messages.
    let mut before: Option<(u64, DateTime<Utc>)> = None;
    let log = super::read_ahead::read_rows(log, mode, |slot| {
        items += 1;
        let row = match slot {
            Ok(r) => r,
            Err(e) => {
                out.say(e);
                out.unusable.count(cause_of(e));
                match &e.row {
                    Some(r) => r,
                    None => return,
                }
            }
        };
        say_time_order(&name, row, before, out);
        before = Some((row.line, row.time));
        out.rows += 1;
        pipeline.feed_log_row(row, gas, sink);
    });
    if items == 0 {
        let e = match log.header_line() {
            Some(h) => LogError::at(
                &name,
                h,
                None,
                "the log has no data rows after its header row",
            ),
            None => LogError::file(&name, "the log has no data rows"),
        };
        out.say(&e);
    }
    out.times_went_back += log.times_went_back();
    out.times_repeated += log.times_repeated();
    out.ambiguous_times += log.ambiguous_times();
    out.time_offset_changes += log.time_offset_changes();
}

/// Located messages for a row used whose time went back or repeated, or
/// whose UTC offset changed (each also counted by the reader).
fn say_time_order(
    name: &str,
    row: &crate::log::Row,
    before: Option<(u64, DateTime<Utc>)>,
    out: &mut WalkOutcome,
) {
    if !(row.time_went_back || row.time_repeated || row.offset_change.is_some()) {
        return;
    }
    let t = crate::timefmt::write_rfc3339;
    let prev = before.map_or_else(String::new, |(line, time)| {
        format!(" ({}, line {line})", t(time))
    });
    if row.time_went_back {
        out.say(&LogError::at(
            name,
            row.line,
            None,
            format!(
                "time {} is earlier than the row before's{prev}: the clock went back; \
                 the row is used but adds no time (counted in times_went_back)",
                t(row.time)
            ),
        ));
    }
    if row.time_repeated {
        out.say(&LogError::at(
            name,
            row.line,
            None,
            format!(
                "time {} repeats the row before's{prev}: a stuck clock or a row written twice; \
                 the row is used but adds no time (counted in times_repeated)",
                t(row.time)
            ),
        ));
    }
    if let Some(c) = row.offset_change {
        out.say(&LogError::at(
            name,
            row.line,
            None,
            format!(
                "the times' UTC offset changes from {} to {} (a logger's clock or its \
                 daylight-saving setting changed mid-run?); times are read as UTC, so the row \
                 is used (counted in time_offset_changes)",
                c.from, c.to
            ),
        ));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_lines_of_a_skipped_file_are_counted_after_its_error() {
        let dir = std::env::temp_dir().join(format!("rarefy-skipped-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("dir");
        let p = dir.join("skipped.csv");
        std::fs::write(
            &p,
            "# rarefy log v1\r\ntime,a [furlong]\r\n1,2\r\n\r\n  \r\n# late\r\n3,4\r\n5,6",
        )
        .expect("write");
        assert_eq!(lines_after(&p, Some(2)), 3);
        assert_eq!(lines_after(&p, Some(7)), 1);
        assert_eq!(lines_after(&p, None), 4);
        assert_eq!(lines_after(&dir.join("missing.csv"), Some(1)), 0);
        std::fs::write(&p, "").expect("write");
        assert_eq!(lines_after(&p, Some(1)), 0);
        let _ = std::fs::remove_dir_all(&dir);
    }

    /// The repository's demo config, which these tests run with.
    fn demo_config() -> crate::config::Config {
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
        crate::config::load(&root.join("config/demo.toml")).expect("demo config")
    }

    /// [`walk_with`] on this thread, with the gases of `cfg`.
    fn walk_here(
        files: &[PathBuf],
        setup: &MonitorSetup,
        cfg: &crate::config::Config,
        sink: &mut ReportSink,
    ) -> WalkOutcome {
        walk_with(files, None, setup, &cfg.gases, sink, ReadMode::SameThread)
    }

    /// Everything a report gives, as text: the summaries, analyses, events,
    /// the reader's counts and messages, and the CSV.
    fn whole_report(files: &[PathBuf], mode: ReadMode, threads: (bool, bool)) -> String {
        let cfg = demo_config();
        let setup = cfg.monitor_setup(Vec::new());
        let csv = crate::pipeline::csv_out::tests::Shared::default();
        let options = ReportOptions {
            plot: true,
            ..ReportOptions::default()
        };
        let mut sink = ReportSink::new(options, Some(Box::new(csv.clone())))
            .csv_on_own_thread(threads.0)
            .tally_on_own_thread(threads.1);
        let out = walk_with(files, None, &setup, &cfg.gases, &mut sink, mode);
        let csv = csv.text();
        format!(
            "{:?}\n{:?}\n{:?}\n{:?}\n{:?}\n{:?}\n{csv}",
            sink.summaries(),
            sink.analyses(),
            sink.chamber_analysis(),
            sink.events(),
            sink.notes(),
            out
        )
    }

    /// A test log's gas cell at row `i`: argon on the rows of `argon`.
    fn gas_at(i: u32, argon: std::ops::Range<u32>) -> &'static str {
        if argon.contains(&i) { "Ar" } else { "N2" }
    }

    /// The summaries and analyses of a report, and its CSV (with
    /// `with_csv`), by the straightforward path or the shortcuts.
    fn report_of(
        files: &[PathBuf],
        straightforward: bool,
        with_csv: bool,
        tally_thread: bool,
    ) -> String {
        let cfg = demo_config();
        let setup = cfg.monitor_setup(Vec::new());
        let csv = crate::pipeline::csv_out::tests::Shared::default();
        let out: Option<Box<dyn Write + Send>> = with_csv.then(|| Box::new(csv.clone()) as _);
        let mut sink = ReportSink::new(ReportOptions::default(), out)
            .csv_on_own_thread(false)
            .tally_on_own_thread(tally_thread);
        if straightforward {
            sink = sink.straightforward();
        }
        walk_here(files, &setup, &cfg, &mut sink);
        format!(
            "{:?}\n{:?}\n{:?}\n{}",
            sink.summaries(),
            sink.analyses(),
            sink.chamber_analysis(),
            csv.text()
        )
    }

    /// Differential test of the report's shortcuts: a gauge's range and
    /// regimes kept while its readings stay inside their steady band, the
    /// CSV's quantities worked out one at a time, and the tally told "as
    /// before" instead of being passed them again; against the
    /// straightforward path, where every reading is derived in full and
    /// its results passed on. The summaries and the CSV must be the same,
    /// on the sample logs (three gauges, a wall temperature that changes)
    /// and on a log that falls through every range and regime with bad
    /// cells, gaps and gas changes.
    #[test]
    fn the_shortcuts_give_the_report_of_the_full_derivation() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
        let dir = std::env::temp_dir().join(format!("rarefy-steady-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("dir");
        let odd = dir.join("falls.csv");
        let mut text = String::from("# rarefy log v1\n# gas: N2\ntime,chamber [Pa],wall [C],gas\n");
        for i in 0..6000u32 {
            let t = format!(
                "2026-11-16T{:02}:{:02}:{:02}.000Z",
                6 + i / 3600,
                i / 60 % 60,
                i % 60
            );
            // Ten decades down, with a wobble that goes back and forth
            // across the limits; every 13th reading another temperature.
            let p = 1e5 * (-f64::from(i) / 260.0).exp() * (1.0 + 0.3 * (f64::from(i) / 3.0).sin());
            let wall = 22.0 + f64::from(i % 13) * 0.37;
            let gas = gas_at(i, 2500..2700);
            match i % 97 {
                3 => text.push_str(&format!("{t},sensor-error,{wall},{gas}\n")),
                5 => text.push_str(&format!("{t},,{wall},{gas}\n")),
                _ => text.push_str(&format!("{t},{p:e},{wall},{gas}\n")),
            }
        }
        std::fs::write(&odd, text).expect("write");
        let samples: Vec<PathBuf> = ["pumpdown", "process", "leak-check", "bakeout", "demo"]
            .iter()
            .map(|n| root.join(format!("sample-logs/{n}.csv")))
            .collect();
        for files in [samples, vec![odd]] {
            for (with_csv, thread) in [(false, false), (false, true), (true, false), (true, true)] {
                let full = report_of(&files, true, with_csv, thread);
                let kept = report_of(&files, false, with_csv, thread);
                // The log's summaries hold every regime and range.
                for word in ["Viscous", "Transitional", "Molecular", "Medium", "High"] {
                    assert!(full.contains(word), "no {word}");
                }
                if with_csv {
                    assert!(full.contains(",transitional,"), "no CSV");
                }
                assert!(
                    full == kept,
                    "{files:?}, CSV {with_csv}, tally thread {thread}: the reports differ"
                );
            }
        }
        std::fs::remove_dir_all(&dir).ok();
    }

    /// Reading ahead on a second core, writing the CSV and feeding the
    /// accumulators on threads of their own, give the same report as one
    /// thread, whatever the batch size:
    /// on every sample log read as one
    /// run, and on a log with bad cells, cut-off lines, repeated and
    /// backward times and gas changes falling on and across batch edges.
    #[test]
    fn reading_ahead_gives_the_same_report_as_one_thread() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
        let samples: Vec<PathBuf> = ["pumpdown", "process", "leak-check", "bakeout"]
            .iter()
            .map(|n| root.join(format!("sample-logs/{n}.csv")))
            .collect();
        let dir = std::env::temp_dir().join(format!("rarefy-ahead-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("dir");
        let odd = dir.join("odd.csv");
        let mut text = String::from("# rarefy log v1\n# gas: N2\ntime,chamber [Pa],wall [C],gas\n");
        for i in 0..3000u32 {
            let s = 1000 + i / 2 - u32::from(i % 97 == 5) * 3;
            let t = format!(
                "2026-11-16T06:{:02}:{:02}.{:03}Z",
                s / 60 % 60,
                s % 60,
                i % 2 * 500
            );
            let p = 1e5 * (-f64::from(i) / 200.0).exp() + 1e-4;
            let gas = gas_at(i, 1000..1400);
            match i % 11 {
                3 => text.push_str(&format!("{t},2.5E-O-5,22,{gas}\n")),
                5 => text.push_str("2026-11-16T0\n"),
                7 => text.push_str(&format!("{t},over-range,sensor-error,{gas}\n")),
                _ => text.push_str(&format!("{t},{p:e},22.5,{gas}\n")),
            }
        }
        std::fs::write(&odd, text).expect("write");
        let odd_report = whole_report(
            std::slice::from_ref(&odd),
            ReadMode::SameThread,
            (false, false),
        );
        let samples_report = whole_report(&samples, ReadMode::SameThread, (false, false));
        assert!(samples_report.contains("RateOfRise {"), "no rate-of-rise");
        assert!(
            samples_report.contains("\nSome(Analysis {"),
            "no chamber analysis"
        );
        assert!(odd_report.contains("row has 1 cells"), "no cut-off line");
        assert!(odd_report.contains("2.5E-O-5"), "no bad cell");
        for files in [samples, vec![odd]] {
            let one = whole_report(&files, ReadMode::SameThread, (false, false));
            // The logs hold what the batches must carry across.
            assert!(one.contains("Event {"), "no events");
            assert!(one.contains("PumpDown {"), "no pump-down");
            assert!(one.len() > 100_000, "a short report");
            for batch in [1, 2, 7, 1024] {
                for threads in [(false, true), (true, false), (true, true)] {
                    let ahead = whole_report(&files, ReadMode::Ahead { batch }, threads);
                    assert!(
                        one == ahead,
                        "batch {batch}, {threads:?}: the reports differ"
                    );
                }
            }
        }
        let _ = std::fs::remove_dir_all(&dir);
    }

    /// A CSV report with nothing reading its summary ([`ReportSink::csv_alone`])
    /// writes the same CSV, gives the same events, messages and counts, and
    /// the same span as the summaries' starts and ends, inside a time window
    /// or not, also where a gauge first appears after the time went back.
    #[test]
    fn the_csv_alone_is_the_same_csv_with_the_same_span() {
        let cfg = demo_config();
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
        let setup = cfg.monitor_setup(Vec::new());
        let dir = std::env::temp_dir().join(format!("rarefy-alone-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("dir");
        let back = dir.join("back.csv");
        std::fs::write(
            &back,
            "# rarefy log v1\n# gas: N2\ntime,a [Pa],b [Pa]\n\
             2026-11-16T06:00:10Z,1e-3,\n2026-11-16T06:00:11Z,2e-3,\n\
             2026-11-16T06:00:05Z,3e-3,4e-3\n2026-11-16T06:00:12Z,5e-3,6e-3\n",
        )
        .expect("write");
        let t = |s: &str| {
            crate::timefmt::parse_rfc3339(s)
                .expect("time")
                .with_timezone(&Utc)
        };
        let logs: Vec<Vec<PathBuf>> = vec![
            ["pumpdown", "process", "leak-check"]
                .iter()
                .map(|n| root.join(format!("sample-logs/{n}.csv")))
                .collect(),
            vec![back],
        ];
        let windows = [
            (None, None),
            (
                Some(t("2026-11-05T06:00:00Z")),
                Some(t("2026-11-05T07:00:00Z")),
            ),
            (Some(t("2026-11-16T06:00:06Z")), None),
            (Some(t("2030-01-01T00:00:00Z")), None),
        ];
        let mut spans = 0;
        for files in &logs {
            for (from, to) in windows {
                let run = |alone: bool| {
                    let csv = crate::pipeline::csv_out::tests::Shared::default();
                    let options = ReportOptions {
                        from,
                        to,
                        ..ReportOptions::default()
                    };
                    let mut sink = ReportSink::new(options, Some(Box::new(csv.clone())));
                    if alone {
                        sink = sink.csv_alone();
                    }
                    let out = walk_here(files, &setup, &cfg, &mut sink);
                    (sink, format!("{out:?}"), csv.text())
                };
                let (full, full_out, full_csv) = run(false);
                let (alone, alone_out, alone_csv) = run(true);
                assert_eq!(full_csv, alone_csv, "{files:?} {from:?} {to:?}");
                assert_eq!(full_out, alone_out);
                assert_eq!(full.events(), alone.events());
                assert_eq!(full.notes(), alone.notes());
                let summaries = full.summaries();
                let from_summaries = summaries
                    .iter()
                    .filter_map(|g| g.start)
                    .min()
                    .zip(summaries.iter().filter_map(|g| g.end).max());
                assert_eq!(full.span(), from_summaries, "{files:?} {from:?} {to:?}");
                assert_eq!(alone.span(), from_summaries);
                assert!(alone.summaries().is_empty() && alone.analyses().is_empty());
                spans += usize::from(from_summaries.is_some());
            }
        }
        // Each log with and without a window that holds readings.
        assert_eq!(spans, 4, "windows with readings");
        // A gauge whose first reading came after the time went back.
        let mut sink = ReportSink::new(ReportOptions::default(), None).csv_alone();
        walk_here(&logs[1], &setup, &cfg, &mut sink);
        assert_eq!(
            sink.span(),
            Some((t("2026-11-16T06:00:05Z"), t("2026-11-16T06:00:12Z")))
        );
        let _ = std::fs::remove_dir_all(&dir);
    }

    /// A report of the readings alone, with the setup cut to its trips
    /// ([`MonitorSetup::trips_only`]), writes the same CSV and sees a trip
    /// exactly when the whole setup does: with notice and warning rules and
    /// a gate, with trip rules among them, and with bad-input alarms that
    /// are trips.
    #[test]
    fn a_csv_alone_with_the_trips_only_is_the_same() {
        let cfg = demo_config();
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
        let whole = cfg.monitor_setup(Vec::new());
        assert!(!whole.rules.is_empty() && !whole.gates.is_empty());
        let mut trips = whole.clone();
        for r in trips.rules.iter_mut().step_by(2) {
            r.rule.severity = crate::alarm::Severity::Trip;
        }
        let mut inputs = whole.clone();
        inputs.input_severity = crate::alarm::Severity::Trip;
        let logs: Vec<PathBuf> = ["pumpdown", "process", "leak-check", "bakeout", "demo"]
            .iter()
            .map(|n| root.join(format!("sample-logs/{n}.csv")))
            .collect();
        let mut tripped = 0;
        for setup in [whole, trips, inputs] {
            for log in &logs {
                let run = |setup: &MonitorSetup| {
                    let csv = crate::pipeline::csv_out::tests::Shared::default();
                    let mut sink =
                        ReportSink::new(ReportOptions::default(), Some(Box::new(csv.clone())))
                            .csv_alone();
                    let files = std::slice::from_ref(log);
                    let out = walk_here(files, setup, &cfg, &mut sink);
                    (format!("{out:?}"), csv.text(), out.trip_seen)
                };
                let (out, csv, trip) = run(&setup);
                let lean = setup.clone().trips_only();
                assert_eq!(run(&lean), (out, csv, trip), "{log:?}");
                tripped += usize::from(trip);
            }
        }
        assert!(tripped >= 2, "trips seen in {tripped} runs");
    }

    #[test]
    fn causes_tell_a_cut_off_line_from_a_header_that_does_not_match() {
        let e = |m: &str, col| LogError::at("x.csv", 3, Some(col), m);
        let few = e("row has 1 cells; the header has 2 (time and 1 columns)", 2);
        assert_eq!(
            cause_of(&few),
            "fewer cells than the header (a cut-off line?)"
        );
        let more = e("row has 3 cells; the header has 2 (time and 1 columns)", 3);
        assert!(cause_of(&more).starts_with("more cells than the header"));
        let no_offset = e("time \"2026-01-01T00:00:00\" has no UTC offset: …", 1);
        assert_eq!(cause_of(&no_offset), "time without a UTC offset");
        let foreign_time = e("time \"x\" in column \"T\" does not match format", 3);
        assert_eq!(cause_of(&foreign_time), "time could not be read");
    }
}

/// Operator actions (acknowledge, shelve, threshold and gas changes …) read
/// from the event logs a live run wrote: replay re-runs the rules but not
/// what people did, so the report lists these beside the events.
#[derive(Debug, Clone, Default)]
pub struct OperatorActions {
    /// The event logs read.
    pub files: Vec<PathBuf>,
    /// Each action within the span, with the file it came from, in time
    /// order.
    pub actions: Vec<(PathBuf, Event)>,
    /// Located messages about lines that are not events.
    pub messages: Vec<String>,
}

/// The event logs (`events-*.jsonl`) in the directories of `logs`, where a
/// recording writes them, sorted by name.
pub fn event_logs_beside(logs: &[PathBuf]) -> Vec<PathBuf> {
    let mut dirs: Vec<PathBuf> = logs
        .iter()
        .map(|l| match l.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        })
        .collect();
    dirs.sort();
    dirs.dedup();
    let mut out: Vec<PathBuf> = dirs
        .iter()
        .filter_map(|d| std::fs::read_dir(d).ok())
        .flatten()
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter(|p| {
            p.file_name()
                .and_then(|n| n.to_str())
                .is_some_and(|n| n.starts_with("events-") && n.ends_with(".jsonl"))
        })
        .collect();
    out.sort();
    out
}

/// Reads the operator actions in `files` whose data time lies in
/// `from ..= to`.
pub fn operator_actions(
    files: &[PathBuf],
    from: DateTime<Utc>,
    to: DateTime<Utc>,
) -> OperatorActions {
    let mut out = OperatorActions::default();
    for f in files {
        let file = match std::fs::File::open(f) {
            Ok(file) => file,
            Err(e) => {
                out.messages
                    .push(format!("{}: cannot open the event log: {e}", f.display()));
                continue;
            }
        };
        out.files.push(f.clone());
        let reader = std::io::BufReader::new(file);
        for r in crate::alarm::event::read_event_log(reader) {
            match r {
                Ok(e) if e.is_operator_action() && e.time >= from && e.time <= to => {
                    out.actions.push((f.clone(), e));
                }
                Ok(_) => {}
                Err((line, msg)) => {
                    if out.messages.len() < MESSAGES_KEPT {
                        out.messages.push(format!("{}:{line}: {msg}", f.display()));
                    }
                }
            }
        }
    }
    out.actions.sort_by_key(|(_, e)| e.time);
    out
}
