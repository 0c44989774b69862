//! `rarefy record`: headless ingest and recording, for systemd or tmux.
//! Human status lines go to stderr; machine-readable events to stdout as
//! JSON lines.

use std::path::PathBuf;
use std::time::Duration;

use clap::Args;
use serde_json::json;
use tokio::signal::unix::{SignalKind, signal};

use super::{CliError, ExitCode, LoadedConfig, load_config};
use crate::action::ActionRunner;
use crate::alarm::Monitor;
use crate::config::SourceConfig;
use crate::log::v1::format_time;
use crate::pipeline::sinks::{Actions, JsonLines, Recording, RecordingNote, emit, say};
use crate::pipeline::start::{self, ConfigFile};
use crate::pipeline::{DataClock, Nowhere, Pipeline};
use crate::record::{Deriver, RecordEvent, Recorder};
use crate::units::{self, SizeUnit, TimeUnit};

/// `rarefy record` arguments.
#[derive(Debug, Args)]
pub struct RecordArgs {
    /// Configuration file (gauges, sources, templates, [record] settings).
    #[arg(long, short = 'c')]
    config: Option<PathBuf>,
    /// Source URI, replacing the config's sources; repeatable. Default: the
    /// config's sources, else stdin: in the plain format.
    #[arg(long, short = 's')]
    source: Vec<String>,
    /// Directory for the log files (created if missing).
    #[arg(long, short = 'o')]
    out: Option<PathBuf>,
    /// Also write derived columns (number density, mean free path, impingement, monolayer time, Kn).
    #[arg(long)]
    derived: bool,
    /// Start a new file at this size, e.g. "64 MB".
    #[arg(long, value_parser = size)]
    max_size: Option<u64>,
    /// How often rows are written to the OS, e.g. "1 s".
    #[arg(long, value_parser = duration)]
    flush: Option<f64>,
    /// Rows kept in memory while writing fails.
    #[arg(long)]
    buffer_rows: Option<usize>,
    /// A one-off alarm, e.g. "pressure above 2e-5 mbar for 10 s as trip"; repeatable (see the README).
    #[arg(long)]
    alarm: Vec<String>,
    /// Exit 3 as soon as an alarm of severity trip is active.
    #[arg(long)]
    exit_on_trip: bool,
}

fn size(s: &str) -> Result<u64, String> {
    units::parse::<SizeUnit>(s)
        .map(|q| q.si as u64)
        .map_err(|e| e.to_string())
}

fn duration(s: &str) -> Result<f64, String> {
    match units::parse::<TimeUnit>(s) {
        Ok(q) if q.si > 0.0 => Ok(q.si),
        Ok(_) => Err("must be longer than zero".into()),
        Err(e) => Err(e.to_string()),
    }
}

/// Tells the user what the recording did: stderr for people, stdout JSON.
pub(crate) fn report(note: RecordingNote) {
    match note {
        RecordingNote::Recorder(RecordEvent::Opened { path, reason }) => {
            say(&format!("recording to {} ({reason})", path.display()));
            emit(json!({"event": "file-opened", "path": path, "reason": reason}));
        }
        RecordingNote::Recorder(RecordEvent::Closed { path, rows }) => {
            emit(json!({"event": "file-closed", "path": path, "rows": rows}));
        }
        RecordingNote::Recorder(RecordEvent::WriteFailed {
            path,
            error,
            buffered,
        }) => {
            say(&format!(
                "WRITE FAILED: {}: {error}; {buffered} rows kept in memory, retrying",
                path.display()
            ));
            emit(
                json!({"event": "write-failed", "path": path, "error": error, "buffered": buffered}),
            );
        }
        RecordingNote::Recorder(RecordEvent::Recovered { path }) => {
            say(&format!("writing again, to {}", path.display()));
            emit(json!({"event": "write-recovered", "path": path}));
        }
        RecordingNote::Recorder(RecordEvent::Lost {
            rows,
            total,
            from,
            to,
        }) => {
            let (from, to) = (format_time(from), format_time(to));
            say(&format!(
                "DATA LOST: memory buffer full while writing failed, {rows} rows dropped, data time {from} to {to} ({total} in all)"
            ));
            emit(
                json!({"event": "rows-lost", "rows": rows, "total": total, "from": from, "to": to}),
            );
        }
        RecordingNote::EventLog(message) => {
            say(&message);
            emit(json!({"event": "event-log-failed", "message": message}));
        }
    }
}

fn report_outcome(o: &crate::action::Outcome) {
    if o.status != "ok" {
        say(&format!("action for {}: {}: {}", o.id, o.status, o.message));
    }
    emit(json!({"event": "action", "id": o.id, "status": o.status, "message": o.message}));
}

/// Runs `rarefy record`.
pub fn run(args: &RecordArgs) -> Result<ExitCode, CliError> {
    let loaded = load_config(args.config.as_ref())?;
    super::refuse_terminal_input(&args.source, &loaded.config)?;
    let sources = start::sources(&args.source, &loaded.config).map_err(CliError::Usage)?;
    let dir = args
        .out
        .clone()
        .or(loaded.config.record.dir.clone())
        .ok_or_else(|| {
            CliError::Usage("--out DIR is required (or [record] dir in the config)".into())
        })?;
    let rt = super::runtime()?;
    let result = rt.block_on(record(args, &loaded, sources, dir));
    // A blocking read of an open stdin would hold a normal shutdown forever.
    rt.shutdown_background();
    result
}

/// What a recording run is made of, for `record` and `watch --record`
/// alike: the same header, the same sinks.
pub(crate) struct RecordPlan<'a> {
    pub loaded: &'a LoadedConfig,
    pub alarms: &'a [String],
    pub dir: PathBuf,
    pub derived: bool,
    pub max_size: Option<u64>,
    pub buffer_rows: Option<usize>,
}

impl RecordPlan<'_> {
    /// The recorder for these sources.
    pub fn recorder(&self, started: &start::Started) -> Recorder {
        let config = &self.loaded.config;
        let mut settings = config.record.settings.clone();
        settings.dir = self.dir.clone();
        if let Some(m) = self.max_size {
            settings.max_bytes = Some(m);
        }
        if let Some(b) = self.buffer_rows {
            settings.buffer_rows = b.max(1);
        }
        let file = self
            .loaded
            .file
            .as_ref()
            .map(|(path, text)| ConfigFile { path, text });
        let meta = start::log_meta(config, file, self.alarms, started);
        let recorder = Recorder::new(settings, meta, &started.channels);
        if self.derived || config.record.derived {
            recorder.with_derived(Deriver::from_config(config))
        } else {
            recorder
        }
    }
}

/// The pipeline every live driver starts with: the config's rules and the
/// one-off alarms, every announced channel watched for silence, every live
/// source's connection watched.
pub(crate) fn live_pipeline(
    loaded: &LoadedConfig,
    alarms: &[String],
    started: &start::Started,
) -> Result<Pipeline, CliError> {
    let rules =
        start::cli_rules(alarms, &loaded.config, &started.channels).map_err(CliError::Usage)?;
    let mut monitor = Monitor::new(loaded.config.monitor_setup(rules));
    for c in &started.channels {
        monitor.expect_channel(&c.id);
    }
    let mut pipeline = Pipeline::new(monitor);
    pipeline.set_gases(loaded.config.gases.clone());
    if !started.finite {
        for name in &started.names {
            pipeline.watch_link(name);
        }
    }
    Ok(pipeline)
}

async fn record(
    args: &RecordArgs,
    loaded: &LoadedConfig,
    sources: Vec<SourceConfig>,
    dir: PathBuf,
) -> Result<ExitCode, CliError> {
    // A file-size limit must give EFBIG, not kill the process.
    let _xfsz = signal(SignalKind::from_raw(nix_sigxfsz()))
        .map_err(|e| CliError::Runtime(format!("cannot handle SIGXFSZ: {e}")))?;
    let mut sigterm = signal(SignalKind::terminate())
        .map_err(|e| CliError::Runtime(format!("cannot handle SIGTERM: {e}")))?;
    let mut sigint = signal(SignalKind::interrupt())
        .map_err(|e| CliError::Runtime(format!("cannot handle SIGINT: {e}")))?;
    let config = &loaded.config;
    let flush_s = args.flush.unwrap_or(config.record.flush_s);

    let mut started = start::start(sources, 4096);
    let plan = RecordPlan {
        loaded,
        alarms: &args.alarm,
        dir,
        derived: args.derived,
        max_size: args.max_size,
        buffer_rows: args.buffer_rows,
    };
    let mut pipeline = live_pipeline(loaded, &args.alarm, &started)?;
    let (recording, mut notes) = Recording::start(plan.recorder(&started));
    let recording_state = recording.state();
    let (actions, mut outcomes) = ActionRunner::new(config.alarms.actions.clone());
    pipeline.add_sink(Box::new(recording));
    pipeline.add_sink(Box::new(JsonLines));
    pipeline.add_sink(Box::new(Actions(actions)));

    let mut clock = DataClock::start();
    if !started.finite {
        pipeline.start(clock.now(), &mut Nowhere);
    }
    let mut tick = tokio::time::interval(Duration::from_secs_f64(flush_s.min(1.0)));
    tick.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
    let mut last_flush = std::time::Instant::now();
    let mut last_reminder = std::time::Instant::now();
    let mut stopped_by = None;
    let mut source_errors = 0u64;
    let live = |clock: &DataClock, finite: bool| (!finite).then(|| clock.now());
    loop {
        tokio::select! {
            biased;
            _ = sigterm.recv() => { stopped_by = Some("SIGTERM"); break; }
            _ = sigint.recv() => { stopped_by = Some("SIGINT"); break; }
            ev = started.rx.recv() => {
                let Some(ev) = ev else { break };
                match &ev {
                    crate::sample::SourceEvent::Samples(s) => {
                        if let Some(t) = s.iter().map(|s| s.time).max() {
                            clock.saw(t);
                        }
                    }
                    crate::sample::SourceEvent::Error { .. } => source_errors += 1,
                    _ => {}
                }
                pipeline.feed(&ev, live(&clock, started.finite), &mut Nowhere);
                if args.exit_on_trip && pipeline.monitor().trip_active() {
                    stopped_by = Some("a trip alarm");
                    break;
                }
            }
            Some(o) = outcomes.recv() => report_outcome(&o),
            Some(n) = notes.recv() => report(n),
            _ = tick.tick() => {
                // Live only: no data by now is news too.
                if !started.finite {
                    pipeline.advance_to(clock.now(), &mut Nowhere);
                    if args.exit_on_trip && pipeline.monitor().trip_active() {
                        stopped_by = Some("a trip alarm");
                        break;
                    }
                }
                if last_flush.elapsed().as_secs_f64() >= flush_s {
                    pipeline.flush();
                    last_flush = std::time::Instant::now();
                }
                let failing = recording_state.lock().map(|s| (s.failing, s.buffered)).unwrap_or_default();
                if failing.0 && last_reminder.elapsed() > Duration::from_secs(10) {
                    last_reminder = std::time::Instant::now();
                    say(&format!("still cannot write; {} rows in memory", failing.1));
                }
            }
        }
    }
    // On a signal, first take in what the sources already have in hand (a
    // pipe's unread lines, a burst on the wire): until they are quiet for a
    // moment, at most two seconds. Then stop them and keep whatever is queued.
    if stopped_by.is_some_and(|s| s.starts_with("SIG")) {
        let deadline = tokio::time::Instant::now() + Duration::from_secs(2);
        while let Ok(Some(ev)) = tokio::time::timeout_at(
            deadline.min(tokio::time::Instant::now() + Duration::from_millis(200)),
            started.rx.recv(),
        )
        .await
        {
            pipeline.feed(&ev, live(&clock, started.finite), &mut Nowhere);
        }
    }
    started.stop();
    // Stopped by a trip: the run ends at the trip, so rows read after it
    // are not part of it. Otherwise keep whatever is queued.
    if stopped_by != Some("a trip alarm") {
        while let Ok(ev) = started.rx.try_recv() {
            pipeline.feed(&ev, live(&clock, started.finite), &mut Nowhere);
        }
    }
    // Every sink closes: the recording's thread writes what is left.
    let problems = pipeline.finish();
    while let Ok(n) = notes.try_recv() {
        report(n);
    }
    // The action runner went with its sink; wait for the commands still
    // running (each bounded by its timeout) so their outcomes are reported.
    while let Some(o) = outcomes.recv().await {
        report_outcome(&o);
    }
    if let Some(sig) = stopped_by {
        say(&format!("{sig}: stopped"));
    }
    let counts = pipeline.counts();
    let summary = recording_state
        .lock()
        .ok()
        .and_then(|s| s.summary.clone())
        .unwrap_or_default();
    emit(json!({
        "event": "summary",
        "samples": counts.samples,
        "rows": summary.rows_written,
        "unparsed": counts.unparsed,
        "rows_lost": summary.rows_lost,
        "rows_unwritten": summary.rows_unwritten,
        "events": summary.events_written,
    }));
    say(&format!(
        "{} samples in {} rows written; {} unparsed lines",
        counts.samples, summary.rows_written, counts.unparsed
    ));
    for p in &problems {
        say(p);
    }
    if !problems.is_empty() {
        return Ok(ExitCode::Runtime);
    }
    if counts.rows == 0 && source_errors > 0 {
        say("no readings: the sources failed");
        return Ok(ExitCode::Runtime);
    }
    if pipeline.monitor().trip_seen() {
        say("a trip alarm was active: exit code 3");
        return Ok(ExitCode::Trip);
    }
    Ok(ExitCode::Ok)
}

/// SIGXFSZ's number (25 on Linux for every architecture rarefy builds on).
fn nix_sigxfsz() -> i32 {
    25
}
