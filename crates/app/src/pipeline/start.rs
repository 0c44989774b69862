//! Choosing and starting sources, and one-off alarms from the command line:
//! what every live driver of the pipeline does first.

use tokio::sync::mpsc;
use tokio::task::JoinHandle;

use crate::alarm::Rule;
use crate::config::{Config, SourceConfig};
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
    /// Whether every source is a finished file read once: then rows alone
    /// move data time, and wall time never enters.
    pub finite: bool,
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
    let finite = sources
        .iter()
        .all(|s| matches!(s.uri.kind, SourceKind::File { follow: false, .. }));
    let sim = sources.iter().find_map(|s| match &s.uri.kind {
        SourceKind::Sim(settings) => source::sim::simulator(settings).ok(),
        _ => None,
    });
    for s in sources {
        let decoder = match crate::parse::decoder(&s.decoding) {
            Ok(d) => d,
            // The config checked the templates; should one still fail, the
            // source reports it and does not start.
            Err(message) => {
                let _ = tx.try_send(SourceEvent::Error {
                    source: s.uri.text.clone(),
                    message,
                });
                continue;
            }
        };
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
        finite,
    }
}

/// One-off alarms from `--alarm` texts. The gauge, when a text names none:
/// the config's default gauge, else the chamber pressure (`auto`) when the
/// config has gauges, else the only pressure channel the sources announce.
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
        .or_else(|| (!config.gauges.is_empty()).then(|| crate::alarm::AUTO.to_string()))
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
    let rules = texts
        .iter()
        .enumerate()
        .map(|(i, t)| {
            crate::alarm::syntax::alarm(t, default.as_deref(), i + 1, &lengths)
                .map_err(|e| format!("--alarm \"{t}\": {e}"))
        })
        .collect::<Result<Vec<Rule>, String>>()?;
    // The gauges and channels known before any data: a rule on none of
    // them would never fire. (Plain input announces its channels only as
    // they come: with nothing known, nothing is refused.)
    let known: Vec<&str> = config
        .gauges
        .iter()
        .map(|g| g.id.as_str())
        .chain(channels.iter().map(|c| c.id.as_str()))
        .collect();
    let mut ids: Vec<&str> = config
        .alarms
        .rules
        .iter()
        .map(|r| r.rule.id.as_str())
        .collect();
    for (rule, text) in rules.iter().zip(texts) {
        if !known.is_empty() && !known.contains(&rule.gauge.as_str()) {
            let hint = crate::suggest::nearest(&rule.gauge, known.iter().copied())
                .map(|s| format!("; did you mean `{s}`?"))
                .unwrap_or_default();
            return Err(format!(
                "--alarm \"{text}\": no gauge or channel `{}`{hint} (known: {})",
                rule.gauge,
                known.join(", ")
            ));
        }
        if ids.contains(&rule.id.as_str()) {
            return Err(format!(
                "--alarm \"{text}\": the id `{}` is already used by another alarm",
                rule.id
            ));
        }
        ids.push(&rule.id);
    }
    Ok(rules)
}

/// The configuration a run was started with, as the log header keeps it.
#[derive(Debug, Clone, Copy)]
pub struct ConfigFile<'a> {
    /// Where it was read from.
    pub path: &'a std::path::Path,
    /// Its text, exactly as read.
    pub text: &'a str,
}

/// The log header of a recording: the chamber (from the config, else the
/// simulated chamber's), the gas, the sources, and what a replay needs to
/// rebuild the same alarms even after the config file has changed: the
/// config's path and its whole text (`config-toml`, one JSON string), and
/// each one-off `--alarm`.
pub fn log_meta(
    config: &Config,
    file: Option<ConfigFile<'_>>,
    alarms: &[String],
    started: &Started,
) -> crate::log::LogMeta {
    let mut extra = Vec::new();
    if let Some(f) = file {
        let abs = std::fs::canonicalize(f.path).unwrap_or_else(|_| f.path.to_path_buf());
        extra.push(("config".to_string(), abs.display().to_string()));
        extra.push((
            CONFIG_TEXT_KEY.to_string(),
            serde_json::to_string(f.text).unwrap_or_default(),
        ));
    }
    for (i, a) in alarms.iter().enumerate() {
        extra.push((format!("alarm.{}", i + 1), a.clone()));
    }
    let mut meta = crate::log::LogMeta {
        chamber: (!config.chamber.name.is_empty()).then(|| config.chamber.name.clone()),
        volume_m3: config.chamber.volume_m3,
        surface_area_m2: config.chamber.surface_area_m2,
        gas: Some(config.mixture.label()),
        source: Some(started.names.join(" ")),
        extra,
        ..Default::default()
    };
    // Recording the simulated chamber: its own name and size, unless the
    // config describes the chamber.
    if let Some(sim) = started.sim.as_ref().filter(|_| meta.chamber.is_none()) {
        meta.chamber = Some(sim.chamber_name().to_string());
        meta.volume_m3 = Some(sim.volume_m3());
        meta.surface_area_m2 = Some(sim.surface_area_m2());
    }
    meta
}

/// The header key under which a log keeps its config's text.
pub const CONFIG_TEXT_KEY: &str = "config-toml";

/// The config text a log's header keeps, when it keeps one.
pub fn recorded_config(meta: &crate::log::LogMeta) -> Option<String> {
    meta.extra
        .iter()
        .find(|(k, _)| k == CONFIG_TEXT_KEY)
        .and_then(|(_, v)| serde_json::from_str::<String>(v).ok())
}
