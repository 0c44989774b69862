//! `rarefy record`: headless ingest and recording, for systemd or tmux.
//! Human status lines go to stderr; machine-readable events to stdout as
//! JSON lines.

use std::io::Write;
use std::path::PathBuf;
use std::time::Duration;

use clap::Args;
use serde_json::{Value, json};
use tokio::signal::unix::{SignalKind, signal};
use tokio::sync::mpsc;

use super::{CliError, load_config};
use crate::config::{Config, SourceConfig};
use crate::log::v1::{LogMeta, format_time};
use crate::record::{Deriver, RecordEvent, Recorder};
use crate::sample::{ChannelInfo, SourceEvent, SourceState};
use crate::source::{self, SourceSpec, SourceUri};
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

/// Prints one JSON event line to stdout (wall time added).
fn emit(mut v: Value) {
    if let Value::Object(m) = &mut v {
        m.insert(
            "wall_time".into(),
            Value::String(format_time(chrono::Utc::now())),
        );
    }
    let mut out = std::io::stdout().lock();
    let _ = writeln!(out, "{v}");
    let _ = out.flush();
}

fn say(text: &str) {
    eprintln!("rarefy: {text}");
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

/// The sources to run: `--source` URIs (with the config's templates when a
/// config source has the same URI), else the config's, else `stdin:`.
fn sources(args: &RecordArgs, config: &Config) -> Result<Vec<SourceConfig>, CliError> {
    if args.source.is_empty() {
        if config.sources.is_empty() {
            let uri = SourceUri::parse("stdin:").map_err(CliError::Usage)?;
            return Ok(vec![SourceConfig::from_uri(uri)]);
        }
        return Ok(config.sources.clone());
    }
    args.source
        .iter()
        .map(|text| {
            let uri =
                SourceUri::parse(text).map_err(|e| CliError::Usage(format!("--source: {e}")))?;
            Ok(config
                .sources
                .iter()
                .find(|s| s.uri.text == uri.text)
                .cloned()
                .unwrap_or_else(|| SourceConfig::from_uri(uri)))
        })
        .collect()
}

/// Runs `rarefy record`.
pub fn run(args: &RecordArgs) -> Result<u8, CliError> {
    let config = load_config(args.config.as_ref())?;
    let sources = sources(args, &config)?;
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

    let mut channels = Vec::new();
    let (tx, mut rx) = mpsc::channel::<SourceEvent>(4096);
    let mut tasks = Vec::new();
    let names: Vec<String> = sources.iter().map(|s| s.uri.text.clone()).collect();
    let sim_meta = sources.iter().find_map(|s| match &s.uri.kind {
        crate::source::SourceKind::Sim(settings) => source::sim::simulator(settings).ok(),
        _ => None,
    });
    for s in sources {
        let decoder = s.decoder();
        for c in decoder
            .channels()
            .into_iter()
            .chain(source::channels_of(&s.uri))
        {
            if !channels.iter().any(|k: &ChannelInfo| k.id == c.id) {
                channels.push(c);
            }
        }
        tasks.push(source::spawn(
            SourceSpec {
                uri: s.uri,
                decoder,
                poll: s.poll,
            },
            tx.clone(),
        ));
    }
    drop(tx);

    let mut meta = LogMeta {
        chamber: (!config.chamber.name.is_empty()).then(|| config.chamber.name.clone()),
        volume_m3: config.chamber.volume_m3,
        surface_area_m2: config.chamber.surface_area_m2,
        gas: Some(config.mixture.label()),
        source: Some(names.join(" ")),
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
    loop {
        tokio::select! {
            biased;
            _ = sigterm.recv() => { stopped_by = Some("SIGTERM"); break; }
            _ = sigint.recv() => { stopped_by = Some("SIGINT"); break; }
            ev = rx.recv() => {
                let Some(ev) = ev else { break };
                handle(ev, &mut recorder, &mut samples, &mut unparsed);
            }
            _ = tick.tick() => {
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
    if stopped_by.is_some() {
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
    Ok(0)
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
