//! `rarefy record`: headless ingest and recording, for systemd or tmux.
//! Human status lines go to stderr; machine-readable events to stdout as
//! JSON lines.

use std::io::Write;
use std::path::PathBuf;
use std::time::Duration;

use clap::Args;
use serde_json::json;
use tokio::signal::unix::{SignalKind, signal};

use super::{CliError, load_config};
use crate::action::ActionRunner;
use crate::alarm::{Event, Monitor};
use crate::config::{Config, SourceConfig};
use crate::ingest::{self, DataClock, emit, event_json, say};
use crate::log::v1::{LogMeta, format_time};
use crate::record::{Deriver, RecordEvent, Recorder};
use crate::sample::{SourceEvent, SourceState};
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

fn report(events: Vec<RecordEvent>) {
    for e in events {
        match e {
            RecordEvent::Opened { path, reason } => {
                say(&format!("recording to {} ({reason})", path.display()));
                emit(json!({"event": "file-opened", "path": path, "reason": reason}));
            }
            RecordEvent::Closed { path, rows } => {
                emit(json!({"event": "file-closed", "path": path, "rows": rows}));
            }
            RecordEvent::WriteFailed {
                path,
                error,
                buffered,
            } => {
                say(&format!(
                    "WRITE FAILED: {}: {error}; {buffered} rows kept in memory, retrying",
                    path.display()
                ));
                emit(
                    json!({"event": "write-failed", "path": path, "error": error, "buffered": buffered}),
                );
            }
            RecordEvent::Recovered { path } => {
                say(&format!("writing again, to {}", path.display()));
                emit(json!({"event": "write-recovered", "path": path}));
            }
            RecordEvent::Lost { rows, total } => {
                say(&format!(
                    "DATA LOST: memory buffer full, {rows} rows dropped ({total} in all)"
                ));
                emit(json!({"event": "rows-lost", "rows": rows, "total": total}));
            }
        }
    }
}

/// Runs `rarefy record`.
pub fn run(args: &RecordArgs) -> Result<u8, CliError> {
    let config = load_config(args.config.as_ref())?;
    let sources = ingest::sources(&args.source, &config).map_err(CliError::Usage)?;
    let dir = args
        .out
        .clone()
        .or(config.record.dir.clone())
        .ok_or_else(|| {
            CliError::Usage("--out DIR is required (or [record] dir in the config)".into())
        })?;
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .map_err(|e| CliError::Runtime(format!("cannot start the runtime: {e}")))?;
    let result = rt.block_on(record(args, &config, sources, dir));
    // A blocking read of an open stdin would hold a normal shutdown forever.
    rt.shutdown_background();
    result
}

async fn record(
    args: &RecordArgs,
    config: &Config,
    sources: Vec<SourceConfig>,
    dir: PathBuf,
) -> Result<u8, CliError> {
    // A file-size limit must give EFBIG, not kill the process.
    let _xfsz = signal(SignalKind::from_raw(nix_sigxfsz()))
        .map_err(|e| CliError::Runtime(format!("cannot handle SIGXFSZ: {e}")))?;
    let mut sigterm = signal(SignalKind::terminate())
        .map_err(|e| CliError::Runtime(format!("cannot handle SIGTERM: {e}")))?;
    let mut sigint = signal(SignalKind::interrupt())
        .map_err(|e| CliError::Runtime(format!("cannot handle SIGINT: {e}")))?;

    let mut settings = config.record.settings.clone();
    settings.dir = dir;
    if let Some(m) = args.max_size {
        settings.max_bytes = Some(m);
    }
    if let Some(b) = args.buffer_rows {
        settings.buffer_rows = b.max(1);
    }
    let flush_s = args.flush.unwrap_or(config.record.flush_s);

    let started = ingest::start(sources, 4096);
    let rules =
        ingest::cli_rules(&args.alarm, config, &started.channels).map_err(CliError::Usage)?;
    let mut monitor = Monitor::new(config.monitor_setup(rules));
    let (mut actions, mut outcomes) = ActionRunner::new(config.alarms.actions.clone());
    let ingest::Started {
        mut rx,
        tasks,
        channels,
        names,
        sim: sim_meta,
    } = started;
    let mut events_file: Option<(PathBuf, std::fs::File)> = None;
    let mut clock = DataClock::default();

    let mut meta = LogMeta {
        chamber: (!config.chamber.name.is_empty()).then(|| config.chamber.name.clone()),
        volume_m3: config.chamber.volume_m3,
        surface_area_m2: config.chamber.surface_area_m2,
        gas: Some(config.mixture.label()),
        source: Some(names.join(" ")),
        extra: ingest::alarm_meta(args.config.as_deref(), &args.alarm),
        ..LogMeta::default()
    };
    // Recording the simulated chamber: its own name and size, unless the
    // config describes the chamber.
    if let Some(sim) = sim_meta.as_ref().filter(|_| meta.chamber.is_none()) {
        meta.chamber = Some(sim.chamber_name().to_string());
        meta.volume_m3 = Some(sim.volume_m3());
        meta.surface_area_m2 = Some(sim.surface_area_m2());
    }
    let mut recorder = Recorder::new(settings, meta, &channels);
    if args.derived || config.record.derived {
        recorder = recorder.with_derived(Deriver::from_config(config));
    }

    let mut tick = tokio::time::interval(Duration::from_secs_f64(flush_s));
    tick.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
    let mut samples: u64 = 0;
    let mut unparsed: u64 = 0;
    let mut last_reminder = std::time::Instant::now();
    let mut stopped_by = None;
    let events_dir = recorder_dir(&recorder);
    let mut on_events = |events: Vec<Event>, actions: &mut ActionRunner| {
        for e in events {
            say(&format!(
                "{} {}: {}",
                e.time.format("%H:%M:%S"),
                e.id,
                e.text
            ));
            emit(event_json(&e));
            write_event(&mut events_file, &events_dir, &e);
            actions.fire(&e);
        }
    };
    loop {
        tokio::select! {
            biased;
            _ = sigterm.recv() => { stopped_by = Some("SIGTERM"); break; }
            _ = sigint.recv() => { stopped_by = Some("SIGINT"); break; }
            ev = rx.recv() => {
                let Some(ev) = ev else { break };
                if let SourceEvent::Samples(s) = &ev {
                    if let Some(t) = s.iter().map(|s| s.time).max() {
                        clock.saw(t);
                    }
                    on_events(monitor.push(s), &mut actions);
                }
                handle(ev, &mut recorder, &mut samples, &mut unparsed);
                if args.exit_on_trip && monitor.trip_active() {
                    stopped_by = Some("a trip alarm");
                    break;
                }
            }
            Some(o) = outcomes.recv() => {
                if o.status != "ok" {
                    say(&format!("action for {}: {}: {}", o.id, o.status, o.message));
                }
                emit(json!({"event": "action", "id": o.id, "status": o.status, "message": o.message}));
            }
            _ = tick.tick() => {
                if let Some(now) = clock.now() {
                    on_events(monitor.tick(now), &mut actions);
                }
                recorder.flush();
                report(recorder.take_events());
                if recorder.is_failing() && last_reminder.elapsed() > Duration::from_secs(10) {
                    last_reminder = std::time::Instant::now();
                    say(&format!("still cannot write; {} rows in memory", recorder.buffered()));
                }
            }
        }
        if recorder.buffered() >= 4096 {
            recorder.flush();
            report(recorder.take_events());
        }
    }
    // On a signal, first take in what the sources already have in hand (a
    // pipe's unread lines, a burst on the wire): until they are quiet for a
    // moment, at most two seconds. Then stop them and keep whatever is queued.
    if stopped_by.is_some_and(|s| s.starts_with("SIG")) {
        let deadline = tokio::time::Instant::now() + Duration::from_secs(2);
        while let Ok(Some(ev)) = tokio::time::timeout_at(
            deadline.min(tokio::time::Instant::now() + Duration::from_millis(200)),
            rx.recv(),
        )
        .await
        {
            handle(ev, &mut recorder, &mut samples, &mut unparsed);
        }
    }
    for t in &tasks {
        t.abort();
    }
    while let Ok(ev) = rx.try_recv() {
        handle(ev, &mut recorder, &mut samples, &mut unparsed);
    }
    let left = recorder.close();
    report(recorder.take_events());
    actions.finish().await;
    while let Ok(o) = outcomes.try_recv() {
        if o.status != "ok" {
            say(&format!("action for {}: {}: {}", o.id, o.status, o.message));
        }
        emit(json!({"event": "action", "id": o.id, "status": o.status, "message": o.message}));
    }
    if let Some(sig) = stopped_by {
        say(&format!("{sig}: stopped"));
    }
    emit(json!({
        "event": "summary",
        "samples": samples,
        "rows": recorder.rows_written(),
        "unparsed": unparsed,
        "rows_lost": recorder.rows_lost(),
        "rows_unwritten": left,
    }));
    say(&format!(
        "{samples} samples in {} rows written; {unparsed} unparsed lines",
        recorder.rows_written()
    ));
    if left > 0 || recorder.rows_lost() > 0 {
        say(&format!(
            "DATA LOST: {} rows dropped, {left} rows could not be written",
            recorder.rows_lost()
        ));
        return Ok(1);
    }
    if monitor.trip_seen() {
        say("a trip alarm was active: exit code 3");
        return Ok(3);
    }
    Ok(0)
}

fn recorder_dir(r: &Recorder) -> PathBuf {
    r.dir().to_path_buf()
}

/// Appends an event to the run's event log beside the recording,
/// `events-<time of the first event>.jsonl`.
fn write_event(file: &mut Option<(PathBuf, std::fs::File)>, dir: &std::path::Path, e: &Event) {
    if file.is_none() {
        let path = dir.join(format!("events-{}.jsonl", e.time.format("%Y%m%dT%H%M%SZ")));
        match std::fs::create_dir_all(dir).and_then(|()| {
            std::fs::OpenOptions::new()
                .create(true)
                .append(true)
                .open(&path)
        }) {
            Ok(f) => *file = Some((path, f)),
            Err(err) => {
                say(&format!(
                    "cannot write the event log {}: {err}",
                    path.display()
                ));
                return;
            }
        }
    }
    if let Some((path, f)) = file.as_mut()
        && let Err(err) = writeln!(f, "{}", e.to_json())
    {
        say(&format!(
            "cannot write the event log {}: {err}",
            path.display()
        ));
    }
}

fn handle(ev: SourceEvent, recorder: &mut Recorder, samples: &mut u64, unparsed: &mut u64) {
    match ev {
        SourceEvent::Samples(s) => {
            *samples += s.len() as u64;
            if recorder.push_row(&s) {
                recorder.flush();
                report(recorder.take_events());
            }
        }
        SourceEvent::Status { source, state } => {
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
        SourceEvent::Unparsed { source, time, text } => {
            *unparsed += 1;
            say(&format!("{source}: unparsed line: {text}"));
            emit(
                json!({"event": "unparsed", "source": source, "time": format_time(time), "text": text}),
            );
        }
        SourceEvent::Error { source, message } => {
            say(&format!("{source}: {message}"));
            emit(json!({"event": "source-error", "source": source, "message": message}));
        }
    }
}

/// SIGXFSZ's number (25 on Linux for every architecture rarefy builds on).
fn nix_sigxfsz() -> i32 {
    25
}
