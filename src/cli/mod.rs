//! The `rarefy` command line: argument definitions and dispatch. Each command
//! lives in its own module and returns a [`CliError`] that maps to the exit
//! codes of the product: 0 ok, 1 runtime failure, 2 usage or config error.

mod calc;
mod config_cmd;
mod gases;
mod gate;
mod record;
mod simulate;
mod watch;

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

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

impl CliError {
    fn exit_code(&self) -> u8 {
        match self {
            CliError::Usage(_) | CliError::Config(_) => 2,
            CliError::Runtime(_) => 1,
        }
    }
}

impl From<std::io::Error> for CliError {
    fn from(e: std::io::Error) -> Self {
        CliError::Runtime(e.to_string())
    }
}

/// Loads `--config F`, or the built-in defaults without one.
fn load_config(path: Option<&PathBuf>) -> Result<Config, CliError> {
    match path {
        Some(p) => Ok(config::load(p)?),
        None => Ok(Config::default()),
    }
}

/// Writes to stdout; a closed pipe (`rarefy gases | head`) is not an error.
fn print_out(text: &str) -> Result<(), CliError> {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(e.into()),
        _ => Ok(()),
    }
}

/// Runs the command line and returns the process exit code.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            // Prints help/version to stdout (exit 0) or the error (exit 2).
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() { 2 } else { 0 });
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
        Ok(code) => ExitCode::from(code),
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(e.exit_code())
        }
    }
}
