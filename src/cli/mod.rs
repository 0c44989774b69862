//! The `rarefy` command line: argument definitions and dispatch. Each command
//! lives in its own module and ends in an [`ExitCode`], or a [`CliError`]
//! that maps to one.

mod calc;
mod config_cmd;
mod gases;
mod gate;
mod record;
mod simulate;
mod watch;

use std::io::Write;
use std::path::PathBuf;

use clap::{Parser, Subcommand};

use crate::config::{self, Config, ConfigErrors};

pub use rarefy_core::CAUTION;

#[derive(Debug, Parser)]
#[command(
    name = "rarefy",
    version,
    about = "Gas kinetics, alarms and run diagnoses from vacuum-gauge readings",
    after_help = CAUTION,
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// The live dashboard; --demo runs the simulated chamber.
    Watch(Box<watch::WatchArgs>),
    /// The dashboard over a recorded log, on data time.
    Replay(Box<watch::ReplayArgs>),
    /// One-shot derived quantities for a pressure, temperature and gas.
    #[command(long_about = calc::LONG_ABOUT)]
    Calc(Box<calc::CalcArgs>),
    /// The built-in gas table with every value's source.
    Gases(gases::GasesArgs),
    /// Headless ingest and recording: the log goes to --out DIR, events to stdout as JSON lines.
    Record(Box<record::RecordArgs>),
    /// Write a log of the simulated chamber (log format v1), as fast as it computes.
    Simulate(Box<simulate::SimulateArgs>),
    /// Readiness gates, for scripts.
    Gate {
        #[command(subcommand)]
        command: gate::GateCommand,
    },
    /// Work with configuration files.
    Config {
        #[command(subcommand)]
        command: config_cmd::ConfigCommand,
    },
}

/// A failed command, with the exit code it maps to.
#[derive(Debug, thiserror::Error)]
pub enum CliError {
    /// Bad arguments: exit 2.
    #[error("{0}")]
    Usage(String),
    /// Bad configuration: exit 2.
    #[error("{0}")]
    Config(#[from] ConfigErrors),
    /// Something failed at run time: exit 1.
    #[error("{0}")]
    Runtime(String),
}

/// The product's exit codes, in one place.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ExitCode {
    /// 0: done.
    Ok = 0,
    /// 1: something failed at run time (a source, a file, lost data).
    Runtime = 1,
    /// 2: bad arguments or a bad configuration.
    Usage = 2,
    /// 3: an alarm of severity trip was active (`record`, `report`), or a
    /// gate was not ready in time (`gate wait`).
    Trip = 3,
}

impl From<ExitCode> for std::process::ExitCode {
    fn from(c: ExitCode) -> Self {
        std::process::ExitCode::from(c as u8)
    }
}

impl CliError {
    fn exit_code(&self) -> ExitCode {
        match self {
            CliError::Usage(_) | CliError::Config(_) => ExitCode::Usage,
            CliError::Runtime(_) => ExitCode::Runtime,
        }
    }
}

impl From<std::io::Error> for CliError {
    fn from(e: std::io::Error) -> Self {
        CliError::Runtime(e.to_string())
    }
}

/// A resolved configuration and, when it came from a file, the file's path
/// and text (which a recording keeps in its header).
pub(crate) struct LoadedConfig {
    /// The resolved configuration.
    pub config: Config,
    /// Where it came from, and its text as read.
    pub file: Option<(PathBuf, String)>,
}

/// Loads `--config F`, or the built-in defaults without one. The file is
/// read once: what is resolved is exactly the text a recording keeps.
fn load_config(path: Option<&PathBuf>) -> Result<LoadedConfig, CliError> {
    match path {
        Some(p) => {
            let text = config::read_text(p)?;
            Ok(LoadedConfig {
                config: config::parse(&text, p)?,
                file: Some((p.clone(), text)),
            })
        }
        None => Ok(LoadedConfig {
            config: Config::default(),
            file: None,
        }),
    }
}

/// With no source named (no `--source`, no `[[source]]`), a live command
/// reads a pipe on stdin; a terminal there is the keyboard, not a gauge, and
/// is refused (exit 2) rather than read silently.
fn refuse_terminal_input(sources: &[String], config: &Config) -> Result<(), CliError> {
    if sources.is_empty()
        && config.sources.is_empty()
        && std::io::IsTerminal::is_terminal(&std::io::stdin())
    {
        return Err(CliError::Usage(
            "no source: give --source URI or a --config with [[source]] (or pipe readings into stdin)"
                .into(),
        ));
    }
    Ok(())
}

/// The runtime every live command runs on.
fn runtime() -> Result<tokio::runtime::Runtime, CliError> {
    tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .map_err(|e| CliError::Runtime(format!("cannot start the runtime: {e}")))
}

/// Writes text to stdout, escaping what could act on a terminal (device
/// text, names and arguments echoed in tables); a closed pipe
/// (`rarefy gases | head`) is not an error.
fn print_out(text: &str) -> Result<(), CliError> {
    write_out(&rarefy_core::parse::terminal_text(text))
}

/// Writes JSON text to stdout, as [`print_out`] does, keeping it the same
/// JSON.
fn print_json(json: &str) -> Result<(), CliError> {
    write_out(&rarefy_core::parse::terminal_json(json))
}

fn write_out(text: &str) -> Result<(), CliError> {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(e.into()),
        _ => Ok(()),
    }
}

/// Runs the command line and returns the process exit code.
pub fn main() -> std::process::ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            // Prints help/version to stdout (exit 0) or the error (exit 2);
            // an error echoes the arguments, so it is escaped.
            if e.use_stderr() {
                eprint!(
                    "{}",
                    rarefy_core::parse::terminal_text(&e.render().to_string())
                );
                return ExitCode::Usage.into();
            }
            let _ = e.print();
            return ExitCode::Ok.into();
        }
    };
    let result = match cli.command {
        Command::Calc(args) => calc::run(&args),
        Command::Watch(args) => watch::watch(&args),
        Command::Replay(args) => watch::replay(&args),
        Command::Gases(args) => gases::run(&args),
        Command::Record(args) => record::run(&args),
        Command::Simulate(args) => simulate::run(&args),
        Command::Config { command } => config_cmd::run(&command),
        Command::Gate { command } => gate::run(&command),
    };
    match result {
        Ok(code) => code.into(),
        Err(e) => {
            eprintln!(
                "error: {}",
                rarefy_core::parse::terminal_text(&e.to_string())
            );
            e.exit_code().into()
        }
    }
}
