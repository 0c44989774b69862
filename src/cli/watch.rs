//! `rarefy watch` and `rarefy replay`: the dashboard, live or over a log.

use std::path::PathBuf;

use chrono::{DateTime, Utc};
use clap::Args;

use super::{CliError, load_config};
use crate::config::{self, Config};
use crate::ingest;
use crate::logfile::open_log;
use crate::record::{Deriver, Recorder};
use crate::ui::app::{App, GaugeInfo, Speed};
use crate::ui::run::{self, ReplaySetup};

/// The demo's configuration, built in so `watch --demo` needs no files.
const DEMO_CONFIG: &str = include_str!("../../config/demo.toml");
/// The demo's source: the simulated chamber at 40× (its 40 minutes in one).
const DEMO_SOURCE: &str = "sim:demo?rate=40";

/// `rarefy watch` arguments.
#[derive(Debug, Args)]
pub struct WatchArgs {
    /// Configuration file (gauges, sources, alarms, gates, [record]).
    #[arg(long, short = 'c')]
    config: Option<PathBuf>,
    /// Run the built-in simulated chamber with its demo scenario.
    #[arg(long)]
    demo: bool,
    /// Source URI, replacing the config's sources; repeatable.
    #[arg(long, short = 's')]
    source: Vec<String>,
    /// Record to this directory while watching (also [record] dir in the config).
    #[arg(long)]
    record: Option<PathBuf>,
    /// A one-off alarm (same syntax as record --alarm); repeatable.
    #[arg(long)]
    alarm: Vec<String>,
    /// Draw with ASCII only (no braille, no box drawing).
    #[arg(long)]
    ascii: bool,
}

/// `rarefy replay` arguments.
#[derive(Debug, Args)]
pub struct ReplayArgs {
    /// The log (format v1, or another logger's CSV with a config [log] section).
    log: PathBuf,
    /// Configuration file (alarms, gates, gauges; [log] for foreign logs).
    #[arg(long, short = 'c')]
    config: Option<PathBuf>,
    /// Speed: 1 … 1000 (times real time) or max.
    #[arg(long, value_parser = speed, default_value = "60")]
    speed: Speed,
    /// Start at this time (RFC 3339, or HH:MM:SS on the log's first day).
    #[arg(long)]
    from: Option<String>,
    /// Draw with ASCII only (no braille, no box drawing).
    #[arg(long)]
    ascii: bool,
}

fn speed(s: &str) -> Result<Speed, String> {
    // "max" before trimming a trailing x ("60x"), which would eat its x.
    if s.trim() == "max" {
        return Ok(Speed::Max);
    }
    let t = s.trim().trim_end_matches('x');
    match t.parse::<f64>() {
        Ok(v) if (0.1..=1000.0).contains(&v) => Ok(Speed::Times(v)),
        _ => Err(format!(
            "\"{s}\" is not a speed; expected 1 to 1000 (times real time) or max"
        )),
    }
}

fn gauges(config: &Config) -> Vec<GaugeInfo> {
    config
        .gauges
        .iter()
        .map(|g| GaugeInfo {
            id: g.id.clone(),
            label: g.label.clone(),
            kind: Some(g.kind),
            unit: crate::sample::ChannelUnit::Pressure(config.display.pressure_unit),
        })
        .collect()
}

fn runtime() -> Result<tokio::runtime::Runtime, CliError> {
    tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .map_err(|e| CliError::Runtime(format!("cannot start the runtime: {e}")))
}

fn styled(app: &mut App, ascii: bool, config: &Config) {
    app.ascii = ascii || run::ascii_fallback();
    app.color = run::use_color();
    app.bell_enabled = config.alarms.bell;
    app.window_s = config.display.history_s.clamp(60.0, 3600.0);
}

/// Runs `rarefy watch`.
pub fn watch(args: &WatchArgs) -> Result<u8, CliError> {
    let (config, config_path) = match (&args.config, args.demo) {
        (Some(p), _) => (load_config(Some(p))?, Some(p.clone())),
        (None, true) => (
            config::parse(
                DEMO_CONFIG,
                std::path::Path::new("config/demo.toml (built in)"),
            )?,
            None,
        ),
        (None, false) => (Config::default(), None),
    };
    let mut sources_cli = args.source.clone();
    if args.demo && sources_cli.is_empty() {
        sources_cli.push(DEMO_SOURCE.into());
    }
    // With no source named, watch reads a pipe on stdin; a terminal there is
    // the keyboard, not a gauge.
    if sources_cli.is_empty()
        && config.sources.is_empty()
        && std::io::IsTerminal::is_terminal(&std::io::stdin())
    {
        return Err(CliError::Usage(
            "no source: give --source URI, a --config with [[source]], or --demo (or pipe readings into stdin)".into(),
        ));
    }
    let sources = ingest::sources(&sources_cli, &config).map_err(CliError::Usage)?;
    let rt = runtime()?;
    let result = rt.block_on(async {
        let started = ingest::start(sources, 8192);
        let rules =
            ingest::cli_rules(&args.alarm, &config, &started.channels).map_err(CliError::Usage)?;
        let monitor = crate::alarm::Monitor::new(config.monitor_setup(rules));
        let title = match (&started.sim, config.chamber.name.is_empty()) {
            (_, false) => config.chamber.name.clone(),
            (Some(sim), true) => sim.chamber_name().to_string(),
            (None, true) => "chamber".to_string(),
        };
        let mut app = App::new(title, monitor, gauges(&config));
        styled(&mut app, args.ascii, &config);
        app.config_path = config_path.clone();
        let record_dir =
            args.record
                .clone()
                .or(config.record.dir.clone().filter(|_| args.config.is_some()));
        let recorder = record_dir.map(|dir| {
            let mut settings = config.record.settings.clone();
            settings.dir = dir;
            let meta = crate::log::LogMeta {
                chamber: Some(app.title.clone()),
                gas: Some(config.mixture.label()),
                source: Some(started.names.join(" ")),
                extra: ingest::alarm_meta(args.config.as_deref(), &args.alarm),
                ..Default::default()
            };
            let r = Recorder::new(settings, meta, &started.channels);
            if config.record.derived {
                r.with_derived(Deriver::from_config(&config))
            } else {
                r
            }
        });
        if let Some(r) = &recorder {
            app.log_file = Some(r.dir().to_path_buf());
        }
        let ingest::Started { rx, tasks, .. } = started;
        let out = run::live(app, rx, recorder)
            .await
            .map_err(CliError::Runtime);
        for t in tasks {
            t.abort();
        }
        out
    });
    rt.shutdown_background();
    result.map(|()| 0)
}

/// Reads `--from`: RFC 3339, or HH:MM[:SS] on the log's first day.
fn from_time(text: &str, start: DateTime<Utc>) -> Result<DateTime<Utc>, CliError> {
    crate::ui::keys::parse_time(text, start).map_err(|e| CliError::Usage(format!("--from: {e}")))
}

/// Runs `rarefy replay`.
pub fn replay(args: &ReplayArgs) -> Result<u8, CliError> {
    let mut config = load_config(args.config.as_ref())?;
    let meta = open_log(&args.log, config.log.as_ref())
        .map_err(|e| CliError::Runtime(e.to_string()))?
        .meta()
        .clone();
    let recorded = |key: &str| {
        meta.extra
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v.clone())
    };
    // Without --config: the config the log was recorded with, when it is
    // still there, so the replay gives the same alarms and gates.
    let mut note = None;
    let mut config_path = args.config.clone();
    if args.config.is_none()
        && let Some(p) = recorded("config").map(PathBuf::from)
    {
        match config::load(&p) {
            Ok(c) => {
                note = Some(format!("config named in the log: {}", p.display()));
                config = c;
                config_path = Some(p);
            }
            Err(_) => {
                note = Some(format!(
                    "the log names {}, which cannot be read; no alarms",
                    p.display()
                ))
            }
        }
    }
    let one_offs: Vec<String> = meta
        .extra
        .iter()
        .filter(|(k, _)| k.starts_with("alarm."))
        .map(|(_, v)| v.clone())
        .collect();
    if config_path.is_none() {
        if let Some(g) = &meta.gas
            && let Ok(m) = crate::engine::mixture::Mixture::parse(g, &config.gases)
        {
            config.mixture = m;
        }
        if let Some(c) = &meta.chamber {
            // Text from a file is escaped before it is drawn.
            config.chamber.name = crate::sample::escape_bytes(c.as_bytes());
        }
    }
    let channels: Vec<crate::sample::ChannelInfo> = open_log(&args.log, config.log.as_ref())
        .map(|l| l.channels())
        .unwrap_or_default();
    let rules = ingest::cli_rules(&one_offs, &config, &channels).map_err(CliError::Usage)?;
    let setup = ReplaySetup {
        file: args.log.clone(),
        foreign: config.log.clone(),
        monitor: config.monitor_setup(rules),
    };
    let mut replay = run::index(&setup).map_err(CliError::Runtime)?;
    replay.speed = args.speed;
    let from = args
        .from
        .as_deref()
        .map(|t| from_time(t, replay.start))
        .transpose()?;
    let title = if config.chamber.name.is_empty() {
        args.log.display().to_string()
    } else {
        config.chamber.name.clone()
    };
    let mut app = App::new(
        title,
        crate::alarm::Monitor::new(setup.monitor.clone()),
        gauges(&config),
    );
    styled(&mut app, args.ascii, &config);
    app.config_path = config_path;
    app.message = note;
    app.replay = Some(replay);
    let rt = runtime()?;
    let result = rt.block_on(run::replay(app, setup, from));
    rt.shutdown_background();
    result.map_err(CliError::Runtime).map(|()| 0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn speeds_parse() {
        assert_eq!(speed("max"), Ok(Speed::Max));
        assert_eq!(speed(" max "), Ok(Speed::Max));
        assert_eq!(speed("60"), Ok(Speed::Times(60.0)));
        assert_eq!(speed("60x"), Ok(Speed::Times(60.0)));
        assert!(speed("maxx").is_err());
        assert!(speed("2000").is_err());
    }
}
