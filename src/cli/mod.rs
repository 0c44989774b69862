//! The `rarefy` command line: argument definitions and dispatch. Each command
//! lives in its own module and ends in an [`ExitCode`], or a [`CliError`]
//! that maps to one.

mod calc;
mod config_cmd;
mod gases;
mod gate;
mod record;
mod report;
mod simulate;
mod watch;

use std::io::Write;
use std::path::PathBuf;

use clap::{CommandFactory, Parser, Subcommand};

use crate::config::{self, Config, ConfigErrors};

pub use rarefy_core::CAUTION;

const LONG_ABOUT: &str = "Gas kinetics, alarms and run diagnoses from vacuum-gauge readings.

The configuration file is --config FILE, else $RAREFY_CONFIG, else ./rarefy.toml, \
else $XDG_CONFIG_HOME/rarefy/rarefy.toml (~/.config/rarefy/rarefy.toml); without \
one the built-in defaults apply. Each command names the file it used on stderr.";

#[derive(Debug, Parser)]
#[command(
    name = "rarefy",
    version,
    about = "Gas kinetics, alarms and run diagnoses from vacuum-gauge readings",
    long_about = LONG_ABOUT,
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
    /// The diagnosis of a finished run: per gauge, time in each range and regime, thresholds, gaps, events.
    Report(Box<report::ReportArgs>),
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
    /// Print a shell completion script to stdout, e.g.
    /// `rarefy completions bash > ~/.local/share/bash-completion/completions/rarefy`.
    Completions {
        /// The shell: bash, zsh, fish, elvish or powershell.
        shell: clap_complete::Shell,
    },
    /// Print the manual page (roff) to stdout, e.g. `rarefy man | man -l -`.
    Man,
}

/// Writes the completion script for `shell` to stdout.
fn completions(shell: clap_complete::Shell) -> Result<ExitCode, CliError> {
    let mut out = Vec::new();
    clap_complete::generate(shell, &mut Cli::command(), "rarefy", &mut out);
    write_out(&String::from_utf8_lossy(&out))?;
    Ok(ExitCode::Ok)
}

/// Writes the manual page, made from the argument definitions, to stdout:
/// the command with every subcommand's own section.
fn man_page() -> Result<ExitCode, CliError> {
    let cmd = Cli::command();
    let mut out = Vec::new();
    clap_mangen::Man::new(cmd.clone()).render(&mut out)?;
    for sub in cmd.get_subcommands().filter(|s| s.get_name() != "help") {
        render_sub(&mut out, sub, "rarefy")?;
    }
    write_out(&String::from_utf8_lossy(&out))?;
    Ok(ExitCode::Ok)
}

/// Appends a subcommand's (and its subcommands') synopsis, description
/// and options to the page under a `rarefy-NAME` heading.
fn render_sub(out: &mut Vec<u8>, cmd: &clap::Command, parent: &str) -> std::io::Result<()> {
    let name = format!("{parent}-{}", cmd.get_name());
    let cmd = cmd.clone().bin_name(name.replace('-', " "));
    let man = clap_mangen::Man::new(cmd.clone());
    writeln!(out, ".SH \"{}\"", name.to_uppercase())?;
    man.render_description_section(out)?;
    man.render_synopsis_section(out)?;
    man.render_options_section(out)?;
    if cmd.has_subcommands() {
        for sub in cmd.get_subcommands().filter(|s| s.get_name() != "help") {
            render_sub(out, sub, &name)?;
        }
    }
    Ok(())
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

/// Where a configuration file was found, in the order they are tried.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum ConfigFrom {
    /// `--config F`.
    Flag,
    /// The `RAREFY_CONFIG` environment variable.
    Env,
    /// `./rarefy.toml` in the working directory.
    WorkingDir,
    /// `$XDG_CONFIG_HOME/rarefy/rarefy.toml` (or `~/.config/rarefy/rarefy.toml`).
    UserDir,
}

impl ConfigFrom {
    /// How the file was found, for messages.
    pub(crate) fn as_str(self) -> &'static str {
        match self {
            ConfigFrom::Flag => "--config",
            ConfigFrom::Env => "RAREFY_CONFIG",
            ConfigFrom::WorkingDir => "the working directory",
            ConfigFrom::UserDir => "the user config directory",
        }
    }
}

/// Finds the configuration file: `--config`, then `RAREFY_CONFIG`, then
/// `./rarefy.toml`, then `$XDG_CONFIG_HOME/rarefy/rarefy.toml` (when
/// `XDG_CONFIG_HOME` is unset or not absolute,
/// `$HOME/.config/rarefy/rarefy.toml`). The first two are used as given
/// (a missing file is an error); the others only when the file exists.
/// `None`: no file, the built-in defaults.
pub(crate) fn find_config(flag: Option<&PathBuf>) -> Option<(PathBuf, ConfigFrom)> {
    if let Some(p) = flag {
        return Some((p.clone(), ConfigFrom::Flag));
    }
    let var = |name: &str| std::env::var_os(name).filter(|v| !v.is_empty());
    if let Some(p) = var("RAREFY_CONFIG") {
        return Some((PathBuf::from(p), ConfigFrom::Env));
    }
    let here = PathBuf::from("rarefy.toml");
    if here.is_file() {
        return Some((here, ConfigFrom::WorkingDir));
    }
    let base = var("XDG_CONFIG_HOME")
        .map(PathBuf::from)
        .filter(|p| p.is_absolute())
        .or_else(|| var("HOME").map(|h| PathBuf::from(h).join(".config")))?;
    let user = base.join("rarefy").join("rarefy.toml");
    user.is_file().then_some((user, ConfigFrom::UserDir))
}

/// Loads the configuration file [`find_config`] finds, or the built-in
/// defaults without one, and says on stderr which file it used. The file is
/// read once: what is resolved is exactly the text a recording keeps.
fn load_config(path: Option<&PathBuf>) -> Result<LoadedConfig, CliError> {
    match find_config(path) {
        Some((p, from)) => {
            let text = config::read_text(&p)?;
            let config = config::parse(&text, &p)?;
            say_config(&p, from);
            Ok(LoadedConfig {
                config,
                file: Some((p, text)),
            })
        }
        None => Ok(LoadedConfig {
            config: Config::default(),
            file: None,
        }),
    }
}

/// The stderr line naming the configuration file in use.
fn say_config(path: &std::path::Path, from: ConfigFrom) {
    crate::pipeline::sinks::say(&format!(
        "config: {} (from {})",
        path.display(),
        from.as_str()
    ));
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
        Command::Report(args) => report::run(&args),
        Command::Simulate(args) => simulate::run(&args),
        Command::Config { command } => config_cmd::run(&command),
        Command::Gate { command } => gate::run(&command),
        Command::Completions { shell } => completions(shell),
        Command::Man => man_page(),
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
