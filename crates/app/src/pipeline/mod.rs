//! The one ingest pipeline that every command drives:
//!
//! ```text
//! sources ──SourceEvent──▶ Pipeline { Monitor (kinetics, rules, gates) } ──Item──▶ sinks
//! ```
//!
//! `record`, `watch` (with or without `--record`), `gate wait`, `replay` and
//! the replay index all feed a [`Pipeline`]; what differs between them is
//! only which [`Sink`]s are attached and who calls [`Pipeline::advance_to`].
//!
//! Time: the monitor runs on data time and knows its next deadline (a gauge
//! going stale, an on- or off-delay running out, a shelving expiring, a
//! gate's hold completing). Before each row the pipeline advances it to the
//! row's time, so every deadline in between is evaluated at its own time
//! whatever the driver. Wall time enters only in live mode, through
//! [`DataClock`], as "no data has arrived by now".

mod clock;
pub mod csv_out;
pub mod plot;
pub mod read_ahead;
pub mod replay;
pub mod report;
pub mod sinks;
pub mod start;
pub mod tally;
mod worker;

use chrono::{DateTime, Utc};

use crate::alarm::{Actor, Event, Monitor};
use crate::engine::mixture::Mixture;
use crate::gas::GasTable;
use crate::sample::{Sample, SourceEvent, SourceState};

pub use clock::DataClock;

/// What a sink is given, in order.
#[derive(Debug, Clone, Copy)]
pub enum Item<'a> {
    /// One row of readings (a line or record), after the monitor took it.
    Row(&'a [Sample]),
    /// An alarm, gate or operator event.
    Event(&'a Event),
    /// A source changed state, sent an unreadable line, or reported a
    /// problem.
    Source(&'a SourceEvent),
}

/// Where the pipeline's output goes: the recorder, the event log, actions,
/// stdout JSON lines, the dashboard, a collecting test.
pub trait Sink {
    /// Takes one item. `monitor` is the state after it (for sinks that show
    /// kinetics); sinks that only store items ignore it.
    fn accept(&mut self, item: Item<'_>, monitor: &Monitor);

    /// Writes out what is buffered (called on the driver's flush interval).
    fn flush(&mut self) {}

    /// The run is over: flush and close. Returns what the user must hear
    /// (rows that could not be written …) as an error.
    fn finish(&mut self) -> Result<(), String> {
        Ok(())
    }
}

/// An operator's request from the dashboard (or a script).
#[derive(Debug, Clone, PartialEq)]
pub enum Operation {
    /// Acknowledge one alarm.
    Acknowledge(String),
    /// Acknowledge every alarm that waits for it.
    AcknowledgeAll,
    /// Shelve an alarm for this many seconds of data time.
    Shelve(String, f64),
    /// Return a shelved alarm to service.
    Unshelve(String),
    /// Change an alarm's threshold (SI).
    SetThreshold(String, f64),
    /// Change a gate's hold time, s.
    SetHold(String, f64),
    /// Start the exposure count again.
    ResetExposure,
    /// Choose the gas in force, or "auto" (config steps, the log, the base
    /// gas).
    SetGas(crate::alarm::GasChoice),
}

/// Counts of what went through.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Counts {
    /// Rows (lines or records with readings).
    pub rows: u64,
    /// Readings.
    pub samples: u64,
    /// Lines no template matched.
    pub unparsed: u64,
}

/// The pipeline: a monitor and the sinks its output goes to.
pub struct Pipeline {
    monitor: Monitor,
    sinks: Vec<Box<dyn Sink + Send>>,
    /// Source name → the id of its link alarm (live sources only).
    links: Vec<(String, String)>,
    counts: Counts,
    /// Operator requests carried out since the start or the last
    /// [`Pipeline::reset`] (or [`Pipeline::restore`]).
    operations: u64,
    /// Gases a log's `gas` column may name (the built-in table and the
    /// config's own).
    gases: GasTable,
}

impl Pipeline {
    /// A pipeline around `monitor`, with no sinks yet.
    pub fn new(monitor: Monitor) -> Self {
        Pipeline {
            monitor,
            sinks: Vec::new(),
            links: Vec::new(),
            counts: Counts::default(),
            operations: 0,
            gases: GasTable::builtin(),
        }
    }

    /// The gases a log's `gas` column may name: the config's table.
    pub fn set_gases(&mut self, gases: GasTable) {
        self.gases = gases;
    }

    /// Adds a sink; items go to sinks in the order they were added.
    pub fn add_sink(&mut self, sink: Box<dyn Sink + Send>) {
        self.sinks.push(sink);
    }

    /// Adds a sink (builder form).
    pub fn with_sink(mut self, sink: Box<dyn Sink + Send>) -> Self {
        self.add_sink(sink);
        self
    }

    /// The monitor: gauges, kinetics, alarms, gates.
    pub fn monitor(&self) -> &Monitor {
        &self.monitor
    }

    /// Replaces the monitor (a replay starting over); sinks stay.
    pub fn reset(&mut self, monitor: Monitor) {
        self.restore(monitor, Counts::default());
    }

    /// Replaces the monitor and the counts with those of a pipeline that
    /// went through part of a log (a replay jumping to a keyframe the index
    /// kept); sinks stay.
    pub fn restore(&mut self, monitor: Monitor, counts: Counts) {
        self.monitor = monitor;
        self.counts = counts;
        self.operations = 0;
        for (name, id) in &self.links {
            self.monitor.add_link(id, name);
        }
    }

    /// What went through so far.
    pub fn counts(&self) -> Counts {
        self.counts
    }

    /// How many operator requests ([`Pipeline::operate`]) were carried out
    /// since the start or the last reset: while none were, the monitor's
    /// state is the one its input alone gives.
    pub fn operations(&self) -> u64 {
        self.operations
    }

    /// Watches a live source's connection: a `source-N.link` alarm is
    /// active while it has not been connected for `stale_after`.
    pub fn watch_link(&mut self, source: &str) {
        let id = format!("source-{}", self.links.len() + 1);
        self.monitor.add_link(&id, source);
        self.links.push((source.to_string(), id));
    }

    /// Starts the data clock without data (live mode): gauges and sources
    /// that never send anything go stale from `t`.
    pub fn start(&mut self, t: DateTime<Utc>, also: &mut dyn Sink) -> Vec<Event> {
        let events = self.monitor.start(t);
        self.dispatch_events_also(&events, also);
        events
    }

    /// Takes one source event. `now` is the live data clock (`None` when
    /// replaying or reading a finished file: then only rows move time).
    /// Returns the alarm and gate events it caused, which the sinks have
    /// also been given.
    pub fn feed(
        &mut self,
        ev: &SourceEvent,
        now: Option<DateTime<Utc>>,
        also: &mut dyn Sink,
    ) -> Vec<Event> {
        match ev {
            SourceEvent::Samples(samples) => self.feed_samples(samples, also),
            SourceEvent::Status { source, state } => {
                let mut events = Vec::new();
                if let (Some(now), Some((_, id))) =
                    (now, self.links.iter().find(|(name, _)| name == source))
                {
                    let up = *state == SourceState::Connected;
                    events = self.monitor.set_link(&id.clone(), up, now);
                }
                self.dispatch_source(ev, also);
                self.dispatch_events_also(&events, also);
                events
            }
            SourceEvent::Gas { time, text } => {
                let mut events = self.monitor.advance_to(*time);
                self.dispatch_events_also(&events, also);
                let mixture = match text.as_deref().map(|t| Mixture::parse(t, &self.gases)) {
                    None => None,
                    Some(Ok(m)) => Some(m),
                    Some(Err(e)) => {
                        // Not a gas: said, and the gas in force stays.
                        let bad = SourceEvent::Error {
                            source: "log".into(),
                            message: format!(
                                "gas column at {}: \"{}\" is not a gas or mixture: {e}",
                                crate::timefmt::write_rfc3339(*time),
                                crate::sample::escape_bytes(
                                    text.as_deref().unwrap_or_default().as_bytes()
                                )
                            ),
                        };
                        self.dispatch_source(&bad, also);
                        return events;
                    }
                };
                let changed = self.monitor.set_log_gas(mixture, *time);
                self.dispatch_source(ev, also);
                self.dispatch_events_also(&changed, also);
                events.extend(changed);
                events
            }
            SourceEvent::Unparsed { .. } => {
                self.counts.unparsed += 1;
                self.dispatch_source(ev, also);
                Vec::new()
            }
            SourceEvent::Error { .. } => {
                self.dispatch_source(ev, also);
                Vec::new()
            }
        }
    }

    /// Takes one row of readings (what [`SourceEvent::Samples`] carries).
    fn feed_samples(&mut self, samples: &[Sample], also: &mut dyn Sink) -> Vec<Event> {
        let Some(t) = samples.iter().map(|s| s.time).max() else {
            return Vec::new();
        };
        // Deadlines up to the row first, at their own times …
        let mut events = self.monitor.advance_to(t);
        self.dispatch_events_also(&events, also);
        // … then the row and what it caused.
        let caused = self.monitor.push(samples);
        self.counts.rows += 1;
        self.counts.samples += samples.len() as u64;
        let item = Item::Row(samples);
        for s in &mut self.sinks {
            s.accept(item, &self.monitor);
        }
        also.accept(item, &self.monitor);
        self.dispatch_events_also(&caused, also);
        events.extend(caused);
        events
    }

    /// Takes one row of a log read back (no live clock): a change of its
    /// `gas` cell from the row before's (`gas`, updated) first, then its
    /// readings; the same as feeding [`crate::log::row_events`] without
    /// giving up the row (a reader reuses its buffers).
    pub fn feed_log_row(
        &mut self,
        row: &crate::log::Row,
        gas: &mut Option<String>,
        also: &mut dyn Sink,
    ) -> Vec<Event> {
        let mut events = match crate::log::gas_event(row, gas) {
            Some(change) => self.feed(&change, None, also),
            None => Vec::new(),
        };
        events.extend(self.feed_samples(&row.samples, also));
        events
    }

    /// Moves data time to `t` without readings: every deadline up to `t` is
    /// evaluated at its own time. Returns the events.
    pub fn advance_to(&mut self, t: DateTime<Utc>, also: &mut dyn Sink) -> Vec<Event> {
        let events = self.monitor.advance_to(t);
        self.dispatch_events_also(&events, also);
        events
    }

    /// Carries out an operator's request at data time `now`; the resulting
    /// events (the alarm transitions, or the setting change) carry the
    /// operator's name and wall time and go to every sink like any other.
    pub fn operate(
        &mut self,
        op: &Operation,
        who: &Actor,
        now: DateTime<Utc>,
        also: &mut dyn Sink,
    ) -> Result<Vec<Event>, String> {
        let m = &mut self.monitor;
        let events = match op {
            Operation::Acknowledge(id) => m.acknowledge(id, who, now)?,
            Operation::AcknowledgeAll => m.acknowledge_all(who, now),
            Operation::Shelve(id, s) => m.shelve(id, *s, who, now)?,
            Operation::Unshelve(id) => m.unshelve(id, who, now)?,
            Operation::SetThreshold(id, v) => vec![m.set_threshold(id, *v, who, now)?],
            Operation::SetHold(id, s) => vec![m.set_hold(id, *s, who, now)?],
            Operation::ResetExposure => m.reset_exposure(who, now),
            Operation::SetGas(c) => m.set_gas(c.clone(), who, now),
        };
        self.operations += 1;
        self.dispatch_events_also(&events, also);
        Ok(events)
    }

    /// Asks every sink to write out what it holds.
    pub fn flush(&mut self) {
        for s in &mut self.sinks {
            s.flush();
        }
    }

    /// Ends the run: every sink flushes, closes and is dropped (the monitor
    /// stays readable). Returns every sink's complaint.
    pub fn finish(&mut self) -> Vec<String> {
        std::mem::take(&mut self.sinks)
            .into_iter()
            .filter_map(|mut s| s.finish().err())
            .collect()
    }

    fn dispatch_events_also(&mut self, events: &[Event], also: &mut dyn Sink) {
        for e in events {
            for s in &mut self.sinks {
                s.accept(Item::Event(e), &self.monitor);
            }
            also.accept(Item::Event(e), &self.monitor);
        }
    }

    fn dispatch_source(&mut self, ev: &SourceEvent, also: &mut dyn Sink) {
        for s in &mut self.sinks {
            s.accept(Item::Source(ev), &self.monitor);
        }
        also.accept(Item::Source(ev), &self.monitor);
    }
}

/// A sink that drops everything: for drivers with no extra sink.
#[derive(Debug, Default, Clone, Copy)]
pub struct Nowhere;

impl Sink for Nowhere {
    fn accept(&mut self, _: Item<'_>, _: &Monitor) {}
}

#[cfg(test)]
mod tests;
