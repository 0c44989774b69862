//! `rarefy watch` and `rarefy replay`: the dashboard, live or over a log.

use std::path::PathBuf;

use chrono::{DateTime, Utc};
use clap::Args;

use super::record::{RecordPlan, live_pipeline};
use super::{CliError, ExitCode, LoadedConfig, load_config};
use crate::action::ActionRunner;
use crate::config::{self, Config};
use crate::logfile::open_log;
use crate::operator::local_user;
use crate::pipeline::sinks::{Actions, Recording};
use crate::pipeline::start;
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
    GaugeInfo::configured(config)
}

fn styled(app: &mut App, ascii: bool, config: &Config) {
    app.ascii = ascii || run::ascii_fallback();
    app.color = run::use_color();
    app.bell_enabled = config.alarms.bell;
    app.window_s = config.display.history_s.clamp(60.0, 3600.0);
}

/// Runs `rarefy watch`.
pub fn watch(args: &WatchArgs) -> Result<ExitCode, CliError> {
    let loaded = match (&args.config, args.demo) {
        (Some(p), _) => load_config(Some(p))?,
        (None, true) => {
            let path = PathBuf::from("config/demo.toml (built in)");
            LoadedConfig {
                config: config::parse(DEMO_CONFIG, &path)?,
                file: Some((path, DEMO_CONFIG.to_string())),
            }
        }
        (None, false) => load_config(None)?,
    };
    let config = &loaded.config;
    // The file in use (none for the built-in demo config), for the status
    // line, saving edits and the recording directory.
    let found = if args.demo && args.config.is_none() {
        None
    } else {
        super::find_config(args.config.as_ref())
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
    let sources = start::sources(&sources_cli, config).map_err(CliError::Usage)?;
    let rt = super::runtime()?;
    let result = rt.block_on(async {
        let mut started = start::start(sources, 8192);
        let mut pipeline = live_pipeline(&loaded, &args.alarm, &started)?;
        let title = match (&started.sim, config.chamber.name.is_empty()) {
            (_, false) => config.chamber.name.clone(),
            (Some(sim), true) => sim.chamber_name().to_string(),
            (None, true) => "chamber".to_string(),
        };
        // Recording while watching: the same header and the same sinks as
        // `rarefy record` (log, event log, actions), on their own thread.
        let record_dir =
            args.record
                .clone()
                .or(config.record.dir.clone().filter(|_| found.is_some()));
        let (mut notes, mut recording, mut outcomes) = (None, None, None);
        if let Some(dir) = record_dir.clone() {
            let plan = RecordPlan {
                loaded: &loaded,
                alarms: &args.alarm,
                dir,
                derived: false,
                max_size: None,
                buffer_rows: None,
            };
            let (rec, n) = Recording::start(plan.recorder(&started));
            recording = Some(rec.state());
            notes = Some(n);
            pipeline.add_sink(Box::new(rec));
            let (actions, o) = ActionRunner::new(config.alarms.actions.clone());
            outcomes = Some(o);
            pipeline.add_sink(Box::new(Actions(actions)));
        }
        let mut app = App::with_pipeline(title, pipeline, gauges(config));
        app.user = local_user();
        styled(&mut app, args.ascii, config);
        if let Some((path, from)) = &found {
            app.config_path = Some(path.clone());
            app.message = Some(format!(
                "config: {} (from {})",
                path.display(),
                from.as_str()
            ));
        }
        app.log_file = record_dir;
        let rx = std::mem::replace(&mut started.rx, tokio::sync::mpsc::channel(1).1);
        let out = run::live(
            app,
            run::LiveInput {
                rx,
                finite: started.finite,
                notes,
                recording,
                outcomes,
            },
        )
        .await
        .map_err(CliError::Runtime);
        started.stop();
        out
    });
    rt.shutdown_background();
    let problems = result?;
    for p in &problems {
        eprintln!("rarefy: {}", rarefy_core::parse::terminal_text(p));
    }
    Ok(if problems.is_empty() {
        ExitCode::Ok
    } else {
        ExitCode::Runtime
    })
}

/// Reads `--from`: RFC 3339, or HH:MM[:SS] on the log's first day.
fn from_time(text: &str, start: DateTime<Utc>) -> Result<DateTime<Utc>, CliError> {
    crate::ui::keys::parse_time(text, start).map_err(|e| CliError::Usage(format!("--from: {e}")))
}

/// The configuration a log is replayed (and reported) with: `--config`,
/// else the config text recorded in the log's header, else the file the log
/// names, else the defaults (with the log's gas and chamber name).
pub(crate) struct LogConfig {
    /// The resolved configuration.
    pub config: Config,
    /// What was used, for the user.
    pub note: Option<String>,
    /// The config file, when one exists.
    pub path: Option<PathBuf>,
    /// The rules: the config's and the log's one-off alarms.
    pub rules: Vec<crate::alarm::Rule>,
}

/// Resolves [`LogConfig`] for `log`.
pub(crate) fn log_config(
    log: &std::path::Path,
    flag: Option<&PathBuf>,
) -> Result<LogConfig, CliError> {
    // The log keeps the config it was recorded with: only --config replaces
    // it, never a config file found elsewhere.
    let mut config = match flag {
        Some(p) => load_config(Some(p))?.config,
        None => crate::config::Config::default(),
    };
    let meta = open_log(log, config.log.as_ref())
        .map_err(|e| CliError::Runtime(e.to_string()))?
        .meta()
        .clone();
    let recorded = |key: &str| {
        meta.extra
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v.clone())
    };
    // Without --config: the config the log was recorded with. Its text is
    // in the header, so editing the file since cannot change what the replay
    // rebuilds; older logs only name the file.
    let mut note = None;
    let mut config_path = flag.cloned();
    let kept = start::recorded_config(&meta);
    if flag.is_none()
        && let Some(text) = kept
    {
        let name = PathBuf::from(format!("{} (config recorded in the log)", log.display()));
        config = config::parse(&text, &name)?;
        let named = recorded("config").unwrap_or_default();
        note = Some(format!(
            "config named in the log, as recorded in it: {named}"
        ));
        config_path = Some(PathBuf::from(named)).filter(|p| p.is_file());
    } else if flag.is_none()
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
    let channels: Vec<crate::sample::ChannelInfo> = open_log(log, config.log.as_ref())
        .map(|l| l.channels())
        .unwrap_or_default();
    let rules = start::cli_rules(&one_offs, &config, &channels).map_err(CliError::Usage)?;
    Ok(LogConfig {
        config,
        note,
        path: config_path,
        rules,
    })
}

/// Runs `rarefy replay`.
pub fn replay(args: &ReplayArgs) -> Result<ExitCode, CliError> {
    let LogConfig {
        config,
        note,
        path: config_path,
        rules,
    } = log_config(&args.log, args.config.as_ref())?;
    let setup = ReplaySetup {
        file: args.log.clone(),
        foreign: config.log.clone(),
        monitor: config.monitor_setup(rules),
        gases: config.gases.clone(),
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
    app.pipeline.set_gases(config.gases.clone());
    styled(&mut app, args.ascii, &config);
    app.config_path = config_path;
    app.message = note;
    app.replay = Some(replay);
    let rt = super::runtime()?;
    let result = rt.block_on(run::replay(app, setup, from));
    rt.shutdown_background();
    result.map_err(CliError::Runtime).map(|()| ExitCode::Ok)
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
