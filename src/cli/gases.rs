//! `rarefy gases`: the gas table with every value's source.

use std::path::PathBuf;

use clap::Args;

use super::{CliError, ExitCode, load_config, print_json, print_out};
use crate::units::format_sig;

/// `rarefy gases` arguments.
#[derive(Debug, Args)]
pub struct GasesArgs {
    /// Include the gases a configuration file adds.
    #[arg(long, short = 'c')]
    config: Option<PathBuf>,
    /// Print JSON instead of a table.
    #[arg(long)]
    json: bool,
}

/// Runs `rarefy gases`.
pub fn run(args: &GasesArgs) -> Result<ExitCode, CliError> {
    let config = load_config(args.config.as_ref())?.config;
    let gases: Vec<_> = config.gases.iter().collect();
    if args.json {
        let mut text = serde_json::to_string_pretty(&gases)
            .map_err(|e| CliError::Runtime(format!("cannot write JSON: {e}")))?;
        text.push('\n');
        return print_json(&text).map(|()| ExitCode::Ok);
    }
    let opt = |v: Option<f64>, sig: usize| v.map_or("-".to_string(), |v| format_sig(v, sig));
    let mut s = format!(
        "{:<6} {:<18} {:>10} {:>9} {:>7} {:>11} {:>9} {:>9}\n",
        "gas", "name", "M g/mol", "d nm", "T_ref K", "Sutherland K", "ion S", "thermal S"
    );
    for g in &gases {
        s.push_str(&format!(
            "{:<6} {:<18} {:>10} {:>9} {:>7} {:>12} {:>9} {:>9}\n",
            g.id,
            g.name,
            g.molar_mass_g_mol,
            format!("{:.5}", g.diameter_m * 1e9),
            g.reference_temperature_k,
            g.sutherland_k
                .map_or("-".to_string(), |v| format!("{v:.2}")),
            opt(g.ion_sensitivity, 3),
            opt(g.thermal_sensitivity, 3),
        ));
    }
    s.push_str("\nSources\n");
    for g in &gases {
        let (lo, hi) = g.fit_range_k;
        s.push_str(&format!("  {}:\n", g.id));
        s.push_str(&format!("    molar mass      {}\n", g.sources.molar_mass));
        s.push_str(&format!(
            "    diameter, S     {} (valid {lo}-{hi} K)\n",
            g.sources.diameter
        ));
        s.push_str(&format!(
            "    ion S           {}\n",
            g.sources.ion_sensitivity
        ));
        s.push_str(&format!(
            "    thermal S       {}\n",
            g.sources.thermal_sensitivity
        ));
    }
    s.push_str(
        "\nS is a gauge's sensitivity relative to N2 (reading / true pressure); \
         the CRC table warns that individual ionization gauges differ by up to 15 %.\n",
    );
    print_out(&s).map(|()| ExitCode::Ok)
}
