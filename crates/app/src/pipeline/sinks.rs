//! The sinks every driver picks from: the recording (log rows and the event
//! log, written on a thread of their own), actions, JSON lines on stdout,
//! and a collector.

use std::fs::{File, OpenOptions};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::mpsc as sync;
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;

use chrono::Utc;
use serde_json::{Value, json};
use tokio::sync::mpsc;

use super::{Item, Sink};
use crate::action::ActionRunner;
use crate::alarm::{Event, EventKind, Monitor};
use crate::engine::Derived;
use crate::log::v1::format_time;
use crate::record::{RecordEvent, Recorder};
use crate::sample::{Sample, SourceEvent, SourceState};

/// Rows queued for the writing thread before the pipeline waits for it.
/// The pipeline waits rather than drop: no recorded row is ever lost here.
const QUEUE: usize = 8192;

enum Msg {
    /// A row, with the monitor's kinetics of its pressure readings when the
    /// log has derived columns.
    Row(Vec<Sample>, Option<Vec<(String, Derived)>>),
    Event(Box<Event>),
    Flush,
}

/// What the recording says while it runs.
#[derive(Debug, Clone, PartialEq)]
pub enum RecordingNote {
    /// Something the recorder did (a file opened, a write failed …).
    Recorder(RecordEvent),
    /// The event log could not be written.
    EventLog(String),
}

/// The recording's state, for status lines.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RecordingState {
    /// The log file being written.
    pub path: Option<PathBuf>,
    /// The event log, once the first event came.
    pub event_log: Option<PathBuf>,
    /// Whether writing fails now.
    pub failing: bool,
    /// Rows waiting in memory.
    pub buffered: usize,
    /// What the recording did, once it has ended.
    pub summary: Option<RecordingSummary>,
}

/// What a finished recording did.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RecordingSummary {
    /// Rows written to log files.
    pub rows_written: u64,
    /// Rows the memory buffer could not hold while writing failed.
    pub rows_lost: u64,
    /// Rows still unwritten at the end.
    pub rows_unwritten: usize,
    /// Events written to the event log.
    pub events_written: u64,
}

/// The recording: log rows through the [`Recorder`] and events into the
/// event log `events-<time>.jsonl` beside them, both written (and fsynced)
/// on a thread of their own so that file work never runs on a driver's
/// loop (the dashboard's least of all).
pub struct Recording {
    tx: Option<sync::SyncSender<Msg>>,
    thread: Option<JoinHandle<RecordingSummary>>,
    state: Arc<Mutex<RecordingState>>,
    summary: Option<RecordingSummary>,
    derived: bool,
}

impl Recording {
    /// Starts the writing thread. Notes arrive on the returned receiver.
    pub fn start(recorder: Recorder) -> (Recording, mpsc::UnboundedReceiver<RecordingNote>) {
        let derived = recorder.has_derived();
        let (tx, rx) = sync::sync_channel::<Msg>(QUEUE);
        let (notes_tx, notes_rx) = mpsc::unbounded_channel();
        let state = Arc::new(Mutex::new(RecordingState::default()));
        let shared = Arc::clone(&state);
        let thread = std::thread::Builder::new()
            .name("recording".into())
            .spawn(move || write_loop(recorder, rx, notes_tx, shared))
            .ok();
        (
            Recording {
                tx: Some(tx),
                thread,
                state,
                summary: None,
                derived,
            },
            notes_rx,
        )
    }

    /// A handle on the recording's state.
    pub fn state(&self) -> Arc<Mutex<RecordingState>> {
        Arc::clone(&self.state)
    }

    /// What the finished recording did (after [`Sink::finish`]).
    pub fn summary(&self) -> Option<&RecordingSummary> {
        self.summary.as_ref()
    }

    fn send(&mut self, msg: Msg) {
        if let Some(tx) = &self.tx
            && tx.send(msg).is_err()
        {
            // The thread is gone; finish() reports what it wrote.
            self.tx = None;
        }
    }

    /// Ends the recording and waits for the thread; returns its summary.
    pub fn close(&mut self) -> RecordingSummary {
        self.tx = None;
        let summary = self
            .thread
            .take()
            .and_then(|t| t.join().ok())
            .unwrap_or_default();
        self.summary = Some(summary.clone());
        summary
    }
}

impl Sink for Recording {
    fn accept(&mut self, item: Item<'_>, monitor: &Monitor) {
        match item {
            Item::Row(samples) => {
                // Derived columns use the monitor's kinetics of this row's
                // readings: the gas in force, the corrections for it, and
                // nothing for a reading it could not correct.
                let kinetics = self.derived.then(|| {
                    samples
                        .iter()
                        .filter(|s| s.unit.is_pressure() && s.si().is_some())
                        .filter_map(|s| {
                            let t = monitor.track(&s.channel)?;
                            if t.uncorrectable || t.last_time != Some(s.time) {
                                return None;
                            }
                            Some((s.channel.clone(), t.derived()?))
                        })
                        .collect()
                });
                self.send(Msg::Row(samples.to_vec(), kinetics));
            }
            Item::Event(e) => self.send(Msg::Event(Box::new(e.clone()))),
            Item::Source(_) => {}
        }
    }

    fn flush(&mut self) {
        self.send(Msg::Flush);
    }

    fn finish(&mut self) -> Result<(), String> {
        let s = self.close();
        if s.rows_lost > 0 || s.rows_unwritten > 0 {
            return Err(format!(
                "DATA LOST: {} rows dropped, {} rows could not be written",
                s.rows_lost, s.rows_unwritten
            ));
        }
        Ok(())
    }
}

impl Drop for Recording {
    fn drop(&mut self) {
        if self.thread.is_some() {
            self.close();
        }
    }
}

fn write_loop(
    mut recorder: Recorder,
    rx: sync::Receiver<Msg>,
    notes: mpsc::UnboundedSender<RecordingNote>,
    state: Arc<Mutex<RecordingState>>,
) -> RecordingSummary {
    let mut events = EventLog::new(recorder.dir());
    let publish = |r: &mut Recorder, events: &EventLog| {
        for e in r.take_events() {
            let _ = notes.send(RecordingNote::Recorder(e));
        }
        if let Ok(mut s) = state.lock() {
            s.path = r.current_path().map(Path::to_path_buf);
            s.event_log = events.path.clone();
            s.failing = r.is_failing();
            s.buffered = r.buffered();
        }
    };
    while let Ok(msg) = rx.recv() {
        match msg {
            Msg::Row(samples, kinetics) => {
                if recorder.push_row_with(&samples, kinetics.as_deref()) {
                    recorder.flush();
                    publish(&mut recorder, &events);
                }
            }
            Msg::Event(e) => {
                if let Err(err) = events.write(&e) {
                    let _ = notes.send(RecordingNote::EventLog(err));
                }
            }
            Msg::Flush => {
                recorder.flush();
                events.sync();
                publish(&mut recorder, &events);
            }
        }
    }
    let unwritten = recorder.close();
    events.sync();
    publish(&mut recorder, &events);
    let summary = RecordingSummary {
        rows_written: recorder.rows_written(),
        rows_lost: recorder.rows_lost(),
        rows_unwritten: unwritten,
        events_written: events.written,
    };
    if let Ok(mut s) = state.lock() {
        s.summary = Some(summary.clone());
    }
    summary
}

/// The run's event log beside the recording: `events-<time of the first
/// event>.jsonl`, one [`Event`] per line.
struct EventLog {
    dir: PathBuf,
    path: Option<PathBuf>,
    file: Option<File>,
    written: u64,
}

impl EventLog {
    fn new(dir: &Path) -> Self {
        EventLog {
            dir: dir.to_path_buf(),
            path: None,
            file: None,
            written: 0,
        }
    }

    fn write(&mut self, e: &Event) -> Result<(), String> {
        if self.file.is_none() {
            let path = self
                .dir
                .join(format!("events-{}.jsonl", e.time.format("%Y%m%dT%H%M%SZ")));
            let file = std::fs::create_dir_all(&self.dir)
                .and_then(|()| OpenOptions::new().create(true).append(true).open(&path))
                .map_err(|err| format!("cannot write the event log {}: {err}", path.display()))?;
            self.file = Some(file);
            self.path = Some(path);
        }
        if let (Some(f), Some(path)) = (self.file.as_mut(), self.path.as_ref()) {
            writeln!(f, "{}", e.to_json())
                .map_err(|err| format!("cannot write the event log {}: {err}", path.display()))?;
            self.written += 1;
        }
        Ok(())
    }

    fn sync(&mut self) {
        if let Some(f) = &self.file {
            let _ = f.sync_data();
        }
    }
}

/// Runs the configured commands on alarm and gate events.
pub struct Actions(pub ActionRunner);

impl Sink for Actions {
    fn accept(&mut self, item: Item<'_>, _: &Monitor) {
        if let Item::Event(e) = item
            && matches!(e.kind(), EventKind::Alarm | EventKind::Gate)
        {
            self.0.fire(e);
        }
    }
}

/// Events and source changes as JSON lines on stdout (with the wall time),
/// and a human line for each on stderr: `rarefy record`'s output.
#[derive(Debug, Default)]
pub struct JsonLines;

impl Sink for JsonLines {
    fn accept(&mut self, item: Item<'_>, _: &Monitor) {
        match item {
            Item::Row(_) => {}
            Item::Event(e) => {
                say(&format!(
                    "{} {}: {}",
                    e.time.format("%H:%M:%S"),
                    e.id,
                    e.text
                ));
                emit(event_json(e));
            }
            Item::Source(SourceEvent::Status { source, state }) => {
                say(&format!("{source}: {state}"));
                let mut v = json!({"event": "source", "source": source, "state": match state {
                    SourceState::Connected => "connected",
                    SourceState::Retrying { .. } => "retrying",
                    SourceState::Ended => "ended",
                }});
                if let SourceState::Retrying { in_s } = state {
                    v["retry_in_s"] = json!(in_s);
                }
                emit(v);
            }
            Item::Source(SourceEvent::Unparsed { source, time, text }) => {
                say(&format!("{source}: unparsed line: {text}"));
                emit(
                    json!({"event": "unparsed", "source": source, "time": format_time(*time), "text": text}),
                );
            }
            Item::Source(SourceEvent::Error { source, message }) => {
                say(&format!("{source}: {message}"));
                emit(json!({"event": "source-error", "source": source, "message": message}));
            }
            Item::Source(SourceEvent::Samples(_) | SourceEvent::Gas { .. }) => {}
        }
    }
}

/// Keeps every event: for the replay index and tests.
#[derive(Debug, Default, Clone)]
pub struct Collect(pub Vec<Event>);

impl Sink for Collect {
    fn accept(&mut self, item: Item<'_>, _: &Monitor) {
        if let Item::Event(e) = item {
            self.0.push(e.clone());
        }
    }
}

/// Prints one JSON line to stdout, with the wall time added.
pub fn emit(mut v: Value) {
    if let Value::Object(m) = &mut v
        && !m.contains_key("wall_time")
    {
        m.insert("wall_time".into(), Value::String(format_time(Utc::now())));
    }
    let mut out = std::io::stdout().lock();
    let _ = writeln!(out, "{}", crate::parse::terminal_json(&v.to_string()));
    let _ = out.flush();
}

/// A human status line on stderr; what could act on a terminal (device
/// text, names, paths) is escaped.
pub fn say(text: &str) {
    eprintln!("rarefy: {}", crate::parse::terminal_text(text));
}

/// An event as a stdout JSON line: `{"event": "alarm", …}` (the event log
/// writes the same object with `"kind"`).
pub fn event_json(e: &Event) -> Value {
    let mut v = serde_json::to_value(e).unwrap_or_else(|_| json!({}));
    if let Value::Object(m) = &mut v {
        let kind = m.remove("kind").unwrap_or(Value::Null);
        m.insert("event".into(), kind);
    }
    v
}
