//! Alarm actions: a command run with an argument vector (never through a
//! shell) on an alarm's or gate's events, with the event as JSON on its stdin
//! and in environment variables, a timeout, and a rate limit. A failing or
//! hanging command is reported, and never stalls ingest: each run is its own
//! task.

use std::collections::HashMap;
use std::process::Stdio;
use std::time::{Duration, Instant};

use tokio::io::AsyncWriteExt;
use tokio::sync::mpsc;

use crate::alarm::Event;
use crate::config::ActionSpec;

/// How a run ended.
#[derive(Debug, Clone, PartialEq)]
pub struct Outcome {
    /// Rule or gate id.
    pub id: String,
    /// `ok`, `failed`, `timeout`, `skipped` (rate-limited).
    pub status: &'static str,
    /// Details: exit code, error, stderr's first line.
    pub message: String,
}

/// Runs the configured commands for events.
pub struct ActionRunner {
    specs: Vec<ActionSpec>,
    last: HashMap<String, Instant>,
    tx: mpsc::UnboundedSender<Outcome>,
    running: Vec<tokio::task::JoinHandle<()>>,
}

impl ActionRunner {
    /// A runner; outcomes arrive on the returned receiver.
    pub fn new(specs: Vec<ActionSpec>) -> (Self, mpsc::UnboundedReceiver<Outcome>) {
        let (tx, rx) = mpsc::unbounded_channel();
        (
            ActionRunner {
                specs,
                last: HashMap::new(),
                tx,
                running: Vec::new(),
            },
            rx,
        )
    }

    /// Starts the command for this event's rule or gate, if one is set and
    /// it has not run within its `repeat_after`.
    pub fn fire(&mut self, event: &Event) {
        let Some(spec) = self.specs.iter().find(|s| s.id == event.id).cloned() else {
            return;
        };
        let now = Instant::now();
        if let Some(t) = self.last.get(&spec.id)
            && now.duration_since(*t).as_secs_f64() < spec.repeat_after_s
        {
            let _ = self.tx.send(Outcome {
                id: spec.id.clone(),
                status: "skipped",
                message: format!(
                    "not run for {} -> {}: ran less than {} s ago",
                    event.from_text(),
                    event.to_text(),
                    spec.repeat_after_s
                ),
            });
            return;
        }
        self.last.insert(spec.id.clone(), now);
        let tx = self.tx.clone();
        let json = event.to_json();
        let event = event.clone();
        self.running.retain(|h| !h.is_finished());
        self.running.push(tokio::spawn(async move {
            let outcome = run(&spec, &event, json).await;
            let _ = tx.send(outcome);
        }));
    }

    /// Waits for the commands still running (each is bounded by its own
    /// timeout), so that their outcomes are reported before exit.
    pub async fn finish(&mut self) {
        for h in self.running.drain(..) {
            let _ = h.await;
        }
    }
}

async fn run(spec: &ActionSpec, event: &Event, json: String) -> Outcome {
    let outcome = |status, message: String| Outcome {
        id: spec.id.clone(),
        status,
        message,
    };
    let mut cmd = tokio::process::Command::new(&spec.argv[0]);
    cmd.args(&spec.argv[1..])
        .stdin(Stdio::piped())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .kill_on_drop(true)
        .env("RAREFY_EVENT_KIND", event.kind().as_str())
        .env("RAREFY_EVENT_ID", &event.id)
        .env("RAREFY_EVENT_LABEL", &event.label)
        .env("RAREFY_EVENT_FROM", event.from_text())
        .env("RAREFY_EVENT_TO", event.to_text())
        .env("RAREFY_EVENT_TIME", crate::log::v1::format_time(event.time))
        .env("RAREFY_EVENT_TEXT", &event.text)
        .env(
            "RAREFY_EVENT_SEVERITY",
            event.severity.map_or("", |s| s.as_str()),
        )
        .env(
            "RAREFY_EVENT_VALUE",
            event.value_text.clone().unwrap_or_default(),
        );
    let mut child = match cmd.spawn() {
        Ok(c) => c,
        Err(e) => return outcome("failed", format!("cannot start {}: {e}", spec.argv[0])),
    };
    if let Some(mut stdin) = child.stdin.take() {
        // A command that does not read its stdin is fine.
        let _ = stdin.write_all(json.as_bytes()).await;
        let _ = stdin.write_all(b"\n").await;
    }
    let timeout = Duration::from_secs_f64(spec.timeout_s);
    match tokio::time::timeout(timeout, child.wait_with_output()).await {
        Err(_) => outcome(
            "timeout",
            format!(
                "{} did not finish within {} s and was stopped",
                spec.argv[0], spec.timeout_s
            ),
        ),
        Ok(Err(e)) => outcome("failed", format!("{}: {e}", spec.argv[0])),
        Ok(Ok(out)) if out.status.success() => outcome("ok", format!("{} done", spec.argv[0])),
        Ok(Ok(out)) => {
            let err = String::from_utf8_lossy(&out.stderr);
            let first = crate::sample::escape_bytes(err.lines().next().unwrap_or("").as_bytes());
            outcome(
                "failed",
                format!("{} exited with {}: {first}", spec.argv[0], out.status),
            )
        }
    }
}
