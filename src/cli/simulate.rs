//! `rarefy simulate`: write a log of the simulated chamber, as fast as it
//! computes, for demos, tests and trying out alarms and reports.

use std::io::{BufWriter, Write};
use std::path::PathBuf;

use chrono::{DateTime, Utc};
use clap::Args;

use super::{CliError, ExitCode, print_out};
use crate::log::v1::{self, Cell, Column, LogMeta};
use crate::sim::{Scenario, SimOptions, Simulator};
use crate::units::{self, TimeUnit};

/// `rarefy simulate` arguments.
#[derive(Debug, Args)]
pub struct SimulateArgs {
    /// Scenario: pumpdown, leak-check, outgassing, process, bakeout or demo.
    #[arg(long)]
    scenario: String,
    /// Data time to simulate, e.g. "2 h" (default: the scenario's length).
    #[arg(long, value_parser = duration)]
    duration: Option<f64>,
    /// Output file (log format v1).
    #[arg(long, short = 'o')]
    out: PathBuf,
    /// Seed of the gauge noise.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Data time between samples, e.g. "10 s".
    #[arg(long, value_parser = duration, default_value = "1 s")]
    interval: f64,
    /// Data time of the first sample (RFC 3339), default 2026-01-01T00:00:00Z.
    #[arg(long, value_parser = start_time)]
    start: Option<DateTime<Utc>>,
}

fn duration(s: &str) -> Result<f64, String> {
    match units::parse::<TimeUnit>(s) {
        Ok(q) if q.si > 0.0 => Ok(q.si),
        Ok(_) => Err("must be longer than zero".into()),
        Err(e) => Err(e.to_string()),
    }
}

fn start_time(s: &str) -> Result<DateTime<Utc>, String> {
    DateTime::parse_from_rfc3339(s.trim())
        .map(|t| t.with_timezone(&Utc))
        .map_err(|e| format!("expected an RFC 3339 time such as 2026-03-01T08:00:00Z ({e})"))
}

/// Runs `rarefy simulate`.
pub fn run(args: &SimulateArgs) -> Result<ExitCode, CliError> {
    let scenario: Scenario = args
        .scenario
        .parse()
        .map_err(|e| CliError::Usage(format!("--scenario: {e}")))?;
    let defaults = SimOptions::default();
    let mut sim = Simulator::new(SimOptions {
        scenario,
        seed: args.seed,
        start: args.start.unwrap_or(defaults.start),
        interval_s: args.interval,
    });
    let end_s = args.duration.unwrap_or_else(|| sim.natural_duration_s());
    let channels = sim.channels();
    let columns: Vec<Column> = channels.iter().map(Column::channel).collect();
    let meta = LogMeta {
        chamber: Some(sim.chamber_name().to_string()),
        volume_m3: Some(sim.volume_m3()),
        surface_area_m2: Some(sim.surface_area_m2()),
        gas: Some("N2".into()),
        source: Some(format!(
            "sim:{scenario}?seed={}&interval={} s",
            args.seed, args.interval
        )),
        started: Some(sim.time()),
        extra: vec![(
            "note".into(),
            "simulated chamber; gauge readings are N2-equivalent".into(),
        )],
    };

    // Write beside the target and rename, so a failed run leaves no half file.
    let tmp = args.out.with_extension("csv.partial");
    let fail =
        |e: std::io::Error| CliError::Runtime(format!("cannot write {}: {e}", args.out.display()));
    let file = std::fs::File::create(&tmp).map_err(fail)?;
    let mut w = BufWriter::new(file);
    w.write_all(v1::header(&meta, &columns).as_bytes())
        .map_err(fail)?;
    let mut rows = 0u64;
    let mut line = String::new();
    let mut cells = vec![Cell::Empty; columns.len()];
    while sim.elapsed_s() < end_s {
        let samples = sim.next_samples();
        let Some(time) = samples.first().map(|s| s.time) else {
            break;
        };
        cells.iter_mut().for_each(|c| *c = Cell::Empty);
        for s in &samples {
            if let Some(i) = channels.iter().position(|c| c.id == s.channel) {
                cells[i] = Cell::of(s);
            }
        }
        line.clear();
        v1::write_row(&mut line, time, &cells);
        w.write_all(line.as_bytes()).map_err(fail)?;
        rows += 1;
    }
    let file = w.into_inner().map_err(|e| fail(e.into_error()))?;
    file.sync_all().map_err(fail)?;
    std::fs::rename(&tmp, &args.out)
        .map_err(|e| CliError::Runtime(format!("{}: {e}", args.out.display())))?;
    print_out(&format!(
        "{}: {rows} rows, {} of data time, scenario {scenario}\n",
        args.out.display(),
        crate::units::format_sig(end_s / 60.0, 3) + " min"
    ))?;
    Ok(ExitCode::Ok)
}
