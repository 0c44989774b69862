//! `rarefy config …`: checking configuration files.

use std::path::PathBuf;

use clap::Subcommand;

use super::{CliError, ExitCode, print_out};
use crate::config;

/// `rarefy config` subcommands.
#[derive(Debug, Subcommand)]
pub enum ConfigCommand {
    /// Validate a configuration file and print a summary; every problem is
    /// reported with its line and column.
    Check {
        /// The file to check.
        file: PathBuf,
    },
}

/// Runs `rarefy config …`.
pub fn run(command: &ConfigCommand) -> Result<ExitCode, CliError> {
    match command {
        ConfigCommand::Check { file } => {
            let c = config::load(file)?;
            print_out(&format!("{}: ok\n{}", file.display(), c.summary()))?;
            Ok(ExitCode::Ok)
        }
    }
}
