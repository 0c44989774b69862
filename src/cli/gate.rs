//! `rarefy gate wait NAME`: block until a readiness gate is ready, for
//! scripts that run a process step.

use std::path::PathBuf;
use std::time::{Duration, Instant};

use clap::Subcommand;

use super::record::live_pipeline;
use super::{CliError, ExitCode, load_config};
use crate::alarm::GateState;
use crate::pipeline::sinks::say;
use crate::pipeline::{DataClock, Nowhere, Pipeline, start};
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
pub fn run(command: &GateCommand) -> Result<ExitCode, CliError> {
    let GateCommand::Wait {
        name,
        config,
        source,
        timeout,
    } = command;
    let loaded = load_config(config.as_ref())?;
    let config = &loaded.config;
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
    super::refuse_terminal_input(source, config)?;
    let sources = start::sources(source, config).map_err(CliError::Usage)?;
    let rt = super::runtime()?;
    let result = rt.block_on(async {
        let mut started = start::start(sources, 1024);
        let mut pipeline = live_pipeline(&loaded, &[], &started)?;
        let wall_start = Instant::now();
        let mut first_data = None;
        let mut clock = DataClock::start();
        if !started.finite {
            pipeline.start(clock.now(), &mut Nowhere);
        }
        let live = |clock: &DataClock| (!started.finite).then(|| clock.now());
        let mut ended = 0;
        let total = started.names.len();
        let mut last_said = String::new();
        let mut tick = tokio::time::interval(Duration::from_millis(500));
        let gate_state = |p: &Pipeline| {
            p.monitor()
                .gates()
                .iter()
                .find(|g| &g.gate.id == name)
                .map(|g| (g.state(), g.reason().map(str::to_string)))
        };
        let code = loop {
            tokio::select! {
                ev = started.rx.recv() => {
                    let Some(ev) = ev else { break ExitCode::Runtime };
                    match &ev {
                        SourceEvent::Samples(s) => {
                            if let Some(t) = s.iter().map(|s| s.time).max() {
                                first_data.get_or_insert(t);
                                clock.saw(t);
                            }
                        }
                        SourceEvent::Status { source, state: SourceState::Ended } => {
                            ended += 1;
                            say(&format!("{source}: ended"));
                        }
                        SourceEvent::Status { source, state } => say(&format!("{source}: {state}")),
                        SourceEvent::Error { source, message } => say(&format!("{source}: {message}")),
                        SourceEvent::Unparsed { .. } => {}
                    }
                    pipeline.feed(&ev, live(&clock), &mut Nowhere);
                    if ended == total && gate_state(&pipeline).is_none_or(|g| g.0 != GateState::Ready) {
                        break ExitCode::Runtime;
                    }
                },
                _ = tick.tick() => {
                    if let Some(now) = live(&clock) {
                        pipeline.advance_to(now, &mut Nowhere);
                    }
                }
            }
            if let Some((state, reason)) = gate_state(&pipeline) {
                if state == GateState::Ready {
                    say(&format!("gate {name}: ready"));
                    break ExitCode::Ok;
                }
                let text = reason.unwrap_or_default();
                if text != last_said {
                    say(&format!("gate {name}: not ready: {text}"));
                    last_said = text;
                }
            }
            if let Some(limit) = timeout {
                let data_elapsed = match (first_data, pipeline.monitor().now()) {
                    (Some(a), Some(b)) => (b - a).num_milliseconds() as f64 / 1000.0,
                    _ => 0.0,
                };
                if data_elapsed >= *limit || wall_start.elapsed().as_secs_f64() >= *limit {
                    say(&format!("gate {name}: not ready after {limit} s: giving up"));
                    break if first_data.is_some() {
                        ExitCode::Trip
                    } else {
                        ExitCode::Runtime
                    };
                }
            }
        };
        started.stop();
        Ok::<ExitCode, CliError>(code)
    });
    rt.shutdown_background();
    let result = result?;
    if result == ExitCode::Runtime {
        say(&format!(
            "gate {name}: the sources failed before the gate was ready"
        ));
    }
    Ok(result)
}
