//! What `record`, `gate wait` and the dashboard share: choosing and starting
//! sources, one-off alarms from the command line, the data clock, and
//! printing events.

use std::io::Write;
use std::time::Instant;

use chrono::{DateTime, Utc};
use serde_json::{Value, json};
use tokio::sync::mpsc;
use tokio::task::JoinHandle;

use crate::alarm::{Event, Rule};
use crate::config::{Config, SourceConfig};
use crate::log::v1::format_time;
use crate::sample::{ChannelInfo, SourceEvent};
use crate::sim::Simulator;
use crate::source::{self, SourceKind, SourceSpec, SourceUri};

/// The sources to run: `--source` URIs (with the config's templates when a
/// config source has the same URI), else the config's, else `stdin:`.
pub fn sources(cli: &[String], config: &Config) -> Result<Vec<SourceConfig>, String> {
    if cli.is_empty() {
        if config.sources.is_empty() {
            let uri = SourceUri::parse("stdin:")?;
            return Ok(vec![SourceConfig::from_uri(uri)]);
        }
        return Ok(config.sources.clone());
    }
    cli.iter()
        .map(|text| {
            let uri = SourceUri::parse(text).map_err(|e| format!("--source: {e}"))?;
            Ok(config
                .sources
                .iter()
                .find(|s| s.uri.text == uri.text)
                .cloned()
                .unwrap_or_else(|| SourceConfig::from_uri(uri)))
        })
        .collect()
}

/// Running sources.
pub struct Started {
    /// Their events.
    pub rx: mpsc::Receiver<SourceEvent>,
    /// Their tasks.
    pub tasks: Vec<JoinHandle<()>>,
    /// Channels known in advance.
    pub channels: Vec<ChannelInfo>,
    /// Their names (URIs).
    pub names: Vec<String>,
    /// The simulated chamber, when one is a source (for its name and size).
    pub sim: Option<Simulator>,
}

impl Started {
    /// Stops every source.
    pub fn stop(&self) {
        for t in &self.tasks {
            t.abort();
        }
    }
}

/// Starts the sources (inside a tokio runtime).
pub fn start(sources: Vec<SourceConfig>, queue: usize) -> Started {
    let (tx, rx) = mpsc::channel::<SourceEvent>(queue);
    let mut channels: Vec<ChannelInfo> = Vec::new();
    let mut tasks = Vec::new();
    let names = sources.iter().map(|s| s.uri.text.clone()).collect();
    let sim = sources.iter().find_map(|s| match &s.uri.kind {
        SourceKind::Sim(settings) => source::sim::simulator(settings).ok(),
        _ => None,
    });
    for s in sources {
        let decoder = s.decoder();
        for c in decoder
            .channels()
            .into_iter()
            .chain(source::channels_of(&s.uri))
        {
            if !channels.iter().any(|k| k.id == c.id) {
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
    Started {
        rx,
        tasks,
        channels,
        names,
        sim,
    }
}

/// One-off alarms from `--alarm` texts. The gauge, when a text names none:
/// the config's default gauge, else its first gauge, else the only pressure
/// channel the sources announce.
pub fn cli_rules(
    texts: &[String],
    config: &Config,
    channels: &[ChannelInfo],
) -> Result<Vec<Rule>, String> {
    let pressure: Vec<&ChannelInfo> = channels.iter().filter(|c| c.unit.is_pressure()).collect();
    let default = config
        .alarms
        .default_gauge
        .clone()
        .or_else(|| config.gauges.first().map(|g| g.id.clone()))
        .or_else(|| match pressure.as_slice() {
            [only] => Some(only.id.clone()),
            _ => None,
        });
    let lengths = |name: &str| {
        config
            .lengths
            .iter()
            .find(|l| l.name == name)
            .map(|l| l.length_m)
    };
    texts
        .iter()
        .enumerate()
        .map(|(i, t)| {
            crate::alarm::syntax::alarm(t, default.as_deref(), i + 1, &lengths)
                .map_err(|e| format!("--alarm \"{t}\": {e}"))
        })
        .collect()
}

/// Data time as it goes on between readings: the last reading's time plus
/// the wall time since it arrived, so a silent gauge goes stale in live use
/// while a replayed file keeps its own clock.
#[derive(Debug, Default)]
pub struct DataClock {
    last: Option<(DateTime<Utc>, Instant)>,
}

impl DataClock {
    /// A reading with data time `t` arrived now.
    pub fn saw(&mut self, t: DateTime<Utc>) {
        if self.last.is_none_or(|(l, _)| t >= l) {
            self.last = Some((t, Instant::now()));
        }
    }

    /// Data time now, once anything has arrived.
    pub fn now(&self) -> Option<DateTime<Utc>> {
        self.last.map(|(t, at)| {
            t + chrono::Duration::from_std(at.elapsed())
                .unwrap_or_else(|_| chrono::Duration::zero())
        })
    }
}

/// Prints one JSON event line to stdout (wall time added).
pub fn emit(mut v: Value) {
    if let Value::Object(m) = &mut v {
        m.insert("wall_time".into(), Value::String(format_time(Utc::now())));
    }
    let mut out = std::io::stdout().lock();
    let _ = writeln!(out, "{v}");
    let _ = out.flush();
}

/// A human status line on stderr.
pub fn say(text: &str) {
    eprintln!("rarefy: {text}");
}

/// An alarm or gate event as a stdout JSON line: `{"event": "alarm", …}`.
pub fn event_json(e: &Event) -> Value {
    let mut v = serde_json::to_value(e).unwrap_or_else(|_| json!({}));
    if let Value::Object(m) = &mut v {
        let kind = m.remove("kind").unwrap_or(Value::Null);
        m.insert("event".into(), kind);
    }
    v
}

/// Metadata lines that let a replay of the log rebuild the same alarms: the
/// config file (absolute path) and each one-off `--alarm`.
pub fn alarm_meta(config: Option<&std::path::Path>, alarms: &[String]) -> Vec<(String, String)> {
    let mut out = Vec::new();
    if let Some(p) = config {
        let abs = std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf());
        out.push(("config".to_string(), abs.display().to_string()));
    }
    for (i, a) in alarms.iter().enumerate() {
        out.push((format!("alarm.{}", i + 1), a.clone()));
    }
    out
}
