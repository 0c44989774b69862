//! `rarefy gate wait NAME`: block until a readiness gate is ready, for
//! scripts that run a process step.

use std::path::PathBuf;
use std::time::{Duration, Instant};

use clap::Subcommand;

use super::{CliError, load_config};
use crate::alarm::{GateState, Monitor};
use crate::ingest::{self, DataClock, say};
use crate::sample::{SourceEvent, SourceState};
use crate::units::{self, TimeUnit};

/// `rarefy gate` subcommands.
#[derive(Debug, Subcommand)]
pub enum GateCommand {
    /// Wait until gate NAME is ready: exit 0 when it is, 3 on timeout, 1 when
    /// the sources fail. Progress (the failing condition, the time left) goes
    /// to stderr.
    Wait {
        /// The gate's id in the config.
        name: String,
        /// Configuration file with the gate.
        #[arg(long, short = 'c')]
        config: Option<PathBuf>,
        /// Source URI, replacing the config's sources; repeatable.
        #[arg(long, short = 's')]
        source: Vec<String>,
        /// Give up after this long (of data time, or of wall time, whichever
        /// comes first), e.g. "30 min". Default: wait for ever.
        #[arg(long, value_parser = duration)]
        timeout: Option<f64>,
    },
}

fn duration(s: &str) -> Result<f64, String> {
    match units::parse::<TimeUnit>(s) {
        Ok(q) if q.si > 0.0 => Ok(q.si),
        Ok(_) => Err("must be longer than zero".into()),
        Err(e) => Err(e.to_string()),
    }
}

/// Runs `rarefy gate …`.
pub fn run(command: &GateCommand) -> Result<u8, CliError> {
    let GateCommand::Wait {
        name,
        config,
        source,
        timeout,
    } = command;
    let config = load_config(config.as_ref())?;
    if !config.alarms.gates.iter().any(|g| &g.id == name) {
        let ids: Vec<&str> = config.alarms.gates.iter().map(|g| g.id.as_str()).collect();
        let hint = crate::suggest::nearest(name, ids.iter().copied())
            .map(|s| format!(" (did you mean `{s}`?)"))
            .unwrap_or_default();
        return Err(CliError::Usage(format!(
            "no gate `{name}`{hint} in the config; gates: {}",
            if ids.is_empty() {
                "none".to_string()
            } else {
                ids.join(", ")
            }
        )));
    }
    let sources = ingest::sources(source, &config).map_err(CliError::Usage)?;
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .map_err(|e| CliError::Runtime(format!("cannot start the runtime: {e}")))?;
    let result = rt.block_on(async {
        let mut started = ingest::start(sources, 1024);
        let mut monitor = Monitor::new(config.monitor_setup(Vec::new()));
        let wall_start = Instant::now();
        let mut first_data = None;
        let mut clock = DataClock::default();
        let mut ended = 0;
        let total = started.names.len();
        let mut last_said = String::new();
        let mut tick = tokio::time::interval(Duration::from_millis(500));
        let gate_state = |m: &Monitor| {
            m.gates().iter().find(|g| &g.gate.id == name).map(|g| (g.state(), g.reason().map(str::to_string)))
        };
        let code = loop {
            tokio::select! {
                ev = started.rx.recv() => match ev {
                    None => break 1,
                    Some(SourceEvent::Samples(s)) => {
                        let Some(t) = s.iter().map(|s| s.time).max() else { continue };
                        first_data.get_or_insert(t);
                        clock.saw(t);
                        monitor.push(&s);
                    }
                    Some(SourceEvent::Status { source, state: SourceState::Ended }) => {
                        ended += 1;
                        say(&format!("{source}: ended"));
                        if ended == total {
                            break 1;
                        }
                    }
                    Some(SourceEvent::Status { source, state }) => say(&format!("{source}: {state}")),
                    Some(SourceEvent::Error { source, message }) => say(&format!("{source}: {message}")),
                    Some(SourceEvent::Unparsed { .. }) => {}
                },
                _ = tick.tick() => {
                    if let Some(now) = clock.now() {
                        monitor.tick(now);
                    }
                }
            }
            if let Some((state, reason)) = gate_state(&monitor) {
                if state == GateState::Ready {
                    say(&format!("gate {name}: ready"));
                    break 0;
                }
                let text = reason.unwrap_or_default();
                if text != last_said {
                    say(&format!("gate {name}: not ready: {text}"));
                    last_said = text;
                }
            }
            if let Some(limit) = timeout {
                let data_elapsed = match (first_data, monitor.now()) {
                    (Some(a), Some(b)) => (b - a).num_milliseconds() as f64 / 1000.0,
                    _ => 0.0,
                };
                if data_elapsed >= *limit || wall_start.elapsed().as_secs_f64() >= *limit {
                    say(&format!("gate {name}: not ready after {limit} s: giving up"));
                    break if first_data.is_some() { 3 } else { 1 };
                }
            }
        };
        started.stop();
        code
    });
    rt.shutdown_background();
    if result == 1 {
        say(&format!(
            "gate {name}: the sources failed before the gate was ready"
        ));
    }
    Ok(result)
}
