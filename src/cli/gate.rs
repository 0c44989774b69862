//! `rarefy gate wait NAME`: block until a readiness gate is ready, for
//! scripts that run a process step.

use std::path::PathBuf;

use chrono::{DateTime, Utc};
use std::time::{Duration, Instant};

use clap::Subcommand;

use super::record::live_pipeline;
use super::{CliError, ExitCode, load_config};
use crate::alarm::{GateMachine, GateState};
use crate::pipeline::sinks::say;
use crate::pipeline::{DataClock, Nowhere, Pipeline, start};
use crate::sample::{SourceEvent, SourceState};
use crate::units::{self, TimeUnit};

/// `rarefy gate` subcommands.
#[derive(Debug, Subcommand)]
pub enum GateCommand {
    /// Wait until gate NAME is ready: exit 0 when it is, 3 on timeout (also
    /// while a source is retrying or before any data), 1 when every source
    /// has ended or failed first. Progress goes to stderr when the state or
    /// the failing condition changes, and at most every 5 s otherwise.
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
        /// Also print the progress to stdout as JSON lines (`gate`, `state`,
        /// `reason`, `time_left_s`, `data_time`; the last line adds
        /// `outcome`: ready, timeout or sources-ended).
        #[arg(long)]
        json: bool,
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
        json,
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
        let mut progress = Progress::new(name, *json);
        let mut tick = tokio::time::interval(Duration::from_millis(500));
        // The gate and why it is not ready.
        let gate_of = |p: &Pipeline| -> Option<(GateMachine, Option<String>)> {
            let m = p.monitor();
            let i = m.gates().iter().position(|g| &g.gate.id == name)?;
            Some((m.gates()[i].clone(), m.gate_reason(i)))
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
                        SourceEvent::Unparsed { .. } | SourceEvent::Gas { .. } => {}
                    }
                    pipeline.feed(&ev, live(&clock), &mut Nowhere);
                    if ended == total && gate_of(&pipeline).is_none_or(|(g, _)| g.state() != GateState::Ready) {
                        break ExitCode::Runtime;
                    }
                },
                _ = tick.tick() => {
                    if let Some(now) = live(&clock) {
                        pipeline.advance_to(now, &mut Nowhere);
                    }
                }
            }
            let data_now = pipeline.monitor().now();
            if let Some((g, reason)) = gate_of(&pipeline) {
                progress.report(&g, reason, data_now)?;
                if g.state() == GateState::Ready {
                    break ExitCode::Ok;
                }
            }
            if let Some(limit) = timeout {
                let data_elapsed = match (first_data, data_now) {
                    (Some(a), Some(b)) => (b - a).num_milliseconds() as f64 / 1000.0,
                    _ => 0.0,
                };
                if data_elapsed >= *limit || wall_start.elapsed().as_secs_f64() >= *limit {
                    say(&format!("gate {name}: not ready after {limit} s: giving up"));
                    break ExitCode::Trip;
                }
            }
        };
        let data_now = pipeline.monitor().now();
        if let Some((g, reason)) = gate_of(&pipeline) {
            progress.finish(&g, reason, data_now, code)?;
        }
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

/// What `gate wait` says about the gate: on every change of state or of the
/// failing condition, and otherwise at most every [`Progress::EVERY`].
struct Progress<'a> {
    name: &'a str,
    json: bool,
    last_key: Option<(GateState, Option<usize>)>,
    last_at: Instant,
}

impl<'a> Progress<'a> {
    /// The longest a wait stays silent while nothing changes.
    const EVERY: Duration = Duration::from_secs(5);

    fn new(name: &'a str, json: bool) -> Self {
        Progress {
            name,
            json,
            last_key: None,
            last_at: Instant::now(),
        }
    }

    /// The reason and time left of `g` at data time `now`.
    fn describe(
        g: &GateMachine,
        reason: Option<String>,
        now: Option<DateTime<Utc>>,
    ) -> (Option<String>, Option<f64>) {
        let left = now.and_then(|n| g.time_left_at(n)).or(g.time_left_s());
        match (g.state(), g.failing(), left) {
            (GateState::Ready, ..) => (None, Some(0.0)),
            (_, None, Some(left)) => (
                Some(format!(
                    "all conditions hold; {:.0} s of {:.0} s to go",
                    left.ceil(),
                    g.gate.hold_s
                )),
                Some(left),
            ),
            _ => (reason, None),
        }
    }

    fn report(
        &mut self,
        g: &GateMachine,
        reason: Option<String>,
        now: Option<DateTime<Utc>>,
    ) -> Result<(), CliError> {
        let key = (g.state(), g.failing());
        if self.last_key == Some(key) && self.last_at.elapsed() < Self::EVERY {
            return Ok(());
        }
        self.last_key = Some(key);
        self.last_at = Instant::now();
        self.write(g, reason, now, None)
    }

    fn finish(
        &mut self,
        g: &GateMachine,
        reason: Option<String>,
        now: Option<DateTime<Utc>>,
        code: ExitCode,
    ) -> Result<(), CliError> {
        if !self.json {
            return Ok(());
        }
        let outcome = match code {
            ExitCode::Ok => "ready",
            ExitCode::Trip => "timeout",
            _ => "sources-ended",
        };
        self.write(g, reason, now, Some(outcome))
    }

    fn write(
        &self,
        g: &GateMachine,
        reason: Option<String>,
        now: Option<DateTime<Utc>>,
        outcome: Option<&str>,
    ) -> Result<(), CliError> {
        let (reason, left) = Self::describe(g, reason, now);
        let name = self.name;
        if outcome.is_none() {
            match (&reason, g.state()) {
                (_, GateState::Ready) => say(&format!("gate {name}: ready")),
                (Some(r), _) => say(&format!("gate {name}: not ready: {r}")),
                (None, _) => say(&format!("gate {name}: not ready")),
            }
        }
        if self.json {
            let mut line = serde_json::json!({
                "gate": name,
                "state": g.state().as_str(),
                "reason": reason,
                "time_left_s": left,
                "data_time": now.map(|t| t.to_rfc3339_opts(chrono::SecondsFormat::Millis, true)),
            });
            if let Some(o) = outcome {
                line["outcome"] = o.into();
            }
            super::print_json(&format!("{line}\n"))?;
        }
        Ok(())
    }
}
