//! `rarefy report`: the diagnosis of a finished run, from one pass of its
//! log(s) through the one pipeline (SPEC §7): per-gauge statistics, time in
//! range and regime, thresholds, gaps, exposure, pump-downs and rate-of-rise
//! segments, and the events.

use rarefy_core::analysis::{Analysis, Origin, Target};
use std::io::Write;
use std::path::PathBuf;

use chrono::{DateTime, Utc};
use clap::{Args, ValueEnum};
use serde_json::{Value, json};

use super::watch::log_config;
use super::{CliError, ExitCode};
use crate::pipeline::report::{
    OperatorActions, ReportOptions, ReportSink, WalkOutcome, event_logs_beside, operator_actions,
    walk,
};
use crate::report::GaugeSummary;
use crate::timefmt::write_rfc3339;
use crate::units::{PressureUnit, format_pressure};

/// Output formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// For a person.
    Text,
    /// One JSON document.
    Json,
    /// Every reading with its derived columns.
    Csv,
}

/// `rarefy report` arguments.
#[derive(Debug, Args)]
pub struct ReportArgs {
    /// The log(s): several files of a rotated recording are read as one run,
    /// in the order of their first row's time.
    #[arg(required = true)]
    logs: Vec<PathBuf>,
    /// Configuration file (alarms, lengths, gas; [log] for foreign logs);
    /// default: the config recorded in the log, else the built-in defaults.
    #[arg(long, short = 'c')]
    config: Option<PathBuf>,
    /// Report only this gauge.
    #[arg(long)]
    gauge: Option<String>,
    /// Count readings from this time (RFC 3339, or HH:MM:SS on the first day).
    #[arg(long)]
    from: Option<String>,
    /// Count readings up to this time (RFC 3339, or HH:MM:SS on the first day).
    #[arg(long)]
    to: Option<String>,
    /// A pressure to reach, e.g. "1e-5 mbar": the first time below it.
    #[arg(long)]
    target: Option<String>,
    /// Chamber volume, e.g. "85 L", for pumping speeds and leak rates
    /// (default: the config's, else the log header's).
    #[arg(long)]
    volume: Option<String>,
    /// Analyse this time range as a rate-of-rise segment, e.g.
    /// "10:02:00..10:12:00" (RFC 3339, or HH:MM:SS on the first day);
    /// repeatable.
    #[arg(long = "rate-of-rise", value_name = "T1..T2")]
    rate_of_rise: Vec<String>,
    /// Intervals longer than this are gaps, e.g. "30 s" (default: 5 × the
    /// median interval).
    #[arg(long)]
    gap: Option<String>,
    /// Event log(s) of the live run, for the operator actions beside the
    /// events (default: the `events-*.jsonl` beside the log(s)); repeatable.
    #[arg(long = "events", value_name = "F.jsonl")]
    events: Vec<PathBuf>,
    /// Output format.
    #[arg(long, value_enum, default_value = "text")]
    format: Format,
    /// Write to this file instead of stdout.
    #[arg(long, short = 'o')]
    out: Option<PathBuf>,
    /// Also draw the run as SVG: log pressure against time over the ISO
    /// 3529-1 ranges and flow regimes, thresholds, alarms, rate-of-rise
    /// segments and targets. With any --format.
    #[arg(long, value_name = "F.svg")]
    plot: Option<PathBuf>,
}

/// A writer for `--out` or stdout.
fn output(out: Option<&PathBuf>) -> Result<Box<dyn Write + Send>, CliError> {
    match out {
        Some(p) => std::fs::File::create(p)
            .map(|f| Box::new(std::io::BufWriter::new(f)) as Box<dyn Write + Send>)
            .map_err(|e| CliError::Runtime(format!("--out {}: {e}", p.display()))),
        // Buffered: the CSV is written a line at a time.
        None => Ok(Box::new(std::io::BufWriter::with_capacity(
            1 << 16,
            PipeEnd(std::io::stdout()),
        ))),
    }
}

/// Standard output that a reader may stop reading (`| head`): what comes
/// after is not wanted, so a broken pipe ends the writing quietly instead
/// of failing the run. Any other error stands.
struct PipeEnd<W>(W);

impl<W: Write> Write for PipeEnd<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        match self.0.write(buf) {
            Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(buf.len()),
            r => r,
        }
    }

    fn flush(&mut self) -> std::io::Result<()> {
        match self.0.flush() {
            Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
            r => r,
        }
    }
}

/// First row time of the first file that has one (for HH:MM:SS times).
fn first_time(
    logs: &[PathBuf],
    foreign: Option<&rarefy_core::log::ForeignLogSpec>,
) -> Option<DateTime<Utc>> {
    logs.iter()
        .filter_map(|p| {
            let mut log = crate::logfile::open_log(p, foreign).ok()?;
            log.by_ref().find_map(|r| match r {
                Ok(row) => Some(row.time),
                Err(e) => e.row.map(|r| r.time),
            })
        })
        .min()
}

/// Runs `rarefy report`.
pub fn run(args: &ReportArgs) -> Result<ExitCode, CliError> {
    // The config as replay finds it, from the first log that opens.
    let probe = args.logs.iter().find_map(|l| {
        let foreign = args
            .config
            .as_ref()
            .and_then(|c| crate::config::load(c).ok())
            .and_then(|c| c.log);
        crate::logfile::open_log(l, foreign.as_ref())
            .ok()
            .map(|_| l)
    });
    let Some(first) = probe else {
        // Nothing opens: say where each fails; nothing usable is exit 2.
        let config = match &args.config {
            Some(c) => crate::config::load(c)?,
            None => crate::config::Config::default(),
        };
        for l in &args.logs {
            if let Err(e) = crate::logfile::open_log(l, config.log.as_ref()) {
                eprintln!(
                    "rarefy: {}",
                    rarefy_core::parse::terminal_text(&e.to_string())
                );
            }
        }
        return Err(CliError::Usage("no usable rows in the log(s)".into()));
    };
    // An event log named on the command line must be there (found ones are
    // only looked for).
    for e in &args.events {
        if let Err(err) = std::fs::File::open(e) {
            return Err(CliError::Usage(format!(
                "--events {}: cannot open the event log: {err}",
                e.display()
            )));
        }
    }
    let lc = log_config(first, args.config.as_ref())?;
    if let Some(n) = &lc.note {
        crate::pipeline::sinks::say(n);
    }
    let config = lc.config;
    let start = first_time(&args.logs, config.log.as_ref());
    let time = |flag: &str, t: &Option<String>| -> Result<Option<DateTime<Utc>>, CliError> {
        match (t, start) {
            (Some(t), Some(s)) => crate::ui::keys::parse_time(t, s)
                .map(Some)
                .map_err(|e| CliError::Usage(format!("{flag}: {e}"))),
            _ => Ok(None),
        }
    };
    let target_pa = args
        .target
        .as_deref()
        .map(|t| {
            crate::units::parse::<PressureUnit>(t)
                .map(|q| q.si)
                .map_err(|e| CliError::Usage(format!("--target: {e}")))
        })
        .transpose()?;
    let gap_after_s = args
        .gap
        .as_deref()
        .map(|t| {
            crate::units::parse_duration(t)
                .map(|d| d.si)
                .map_err(|e| CliError::Usage(format!("--gap: {e}")))
        })
        .transpose()?;
    let volume_m3 = match args.volume.as_deref() {
        Some(v) => Some(
            crate::units::parse::<crate::units::VolumeUnit>(v)
                .map(|q| q.si)
                .map_err(|e| CliError::Usage(format!("--volume: {e}")))?,
        ),
        None => config.chamber.volume_m3.or_else(|| {
            crate::logfile::open_log(first, config.log.as_ref())
                .ok()
                .and_then(|l| l.meta().volume_m3)
        }),
    };
    let mut rise_ranges = Vec::new();
    for r in &args.rate_of_rise {
        let Some((a, b)) = r.split_once("..") else {
            return Err(CliError::Usage(format!(
                "--rate-of-rise {r:?}: expected two times joined by \"..\", e.g. 10:02:00..10:12:00"
            )));
        };
        let (Some(a), Some(b)) = (
            time("--rate-of-rise", &Some(a.trim().to_string()))?,
            time("--rate-of-rise", &Some(b.trim().to_string()))?,
        ) else {
            continue;
        };
        if b <= a {
            return Err(CliError::Usage(format!(
                "--rate-of-rise {r:?}: the end must be later than the start"
            )));
        }
        rise_ranges.push((a, b));
    }
    let options = ReportOptions {
        gauge: args.gauge.clone(),
        from: time("--from", &args.from)?,
        to: time("--to", &args.to)?,
        target_pa,
        gap_after_s,
        volume_m3,
        origin: start,
        rise_ranges,
        plot: args.plot.is_some(),
    };
    let csv = match args.format {
        Format::Csv => Some(output(args.out.as_ref())?),
        _ => None,
    };
    let csv_alone = csv.is_some() && args.plot.is_none();
    let mut sink = ReportSink::new(options, csv);
    if csv_alone {
        // Nothing reads the summary: its accumulators are not fed.
        sink = sink.csv_alone();
    }
    let mut setup = config.monitor_setup(lc.rules);
    if csv_alone {
        // Of the alarms, only whether a trip was active is given (the
        // exit status).
        setup = setup.trips_only();
    }
    let outcome = walk(
        &args.logs,
        config.log.as_ref(),
        &setup,
        &config.gases,
        &mut sink,
    );
    for m in outcome.messages.iter().chain(sink.notes()) {
        eprintln!("rarefy: {}", rarefy_core::parse::terminal_text(m));
    }
    if outcome.message_count > outcome.messages.len() as u64 {
        eprintln!(
            "rarefy: … and {} more messages",
            outcome.message_count - outcome.messages.len() as u64
        );
    }
    if let Some(e) = &outcome.output_error {
        // The CSV is the report: one cut short is a failed run.
        let place = args
            .out
            .as_ref()
            .map_or("stdout".to_string(), |p| format!("--out {}", p.display()));
        return Err(CliError::Runtime(format!("{place}: {e}")));
    }
    if outcome.rows == 0 {
        return Err(CliError::Usage("no usable rows in the log(s)".into()));
    }
    if let Some(g) = &args.gauge
        && !sink.gauge_seen()
    {
        let others: Vec<&str> = sink.other_channels().collect();
        let hint = crate::suggest::nearest(g, others.iter().copied())
            .map(|s| format!("; did you mean \"{s}\"?"))
            .unwrap_or_default();
        return Err(CliError::Usage(format!(
            "--gauge {g:?}: the log has no such channel (it has {}){hint}",
            others.join(", ")
        )));
    }
    if sink.span().is_none() && (args.from.is_some() || args.to.is_some()) {
        return Err(CliError::Usage(format!(
            "--from/--to: no readings between {} and {} (the log's first row is at {})",
            options_time(sink.from(), "the start"),
            options_time(sink.to(), "the end"),
            start.map_or("-".to_string(), write_rfc3339),
        )));
    }
    let ops = actions(args, &sink);
    for m in &ops.messages {
        eprintln!("rarefy: {}", rarefy_core::parse::terminal_text(m));
    }
    let unit = config.display.pressure_unit;
    match args.format {
        Format::Csv => {}
        Format::Json => {
            let text = serde_json::to_string_pretty(&to_json(&sink, &outcome, &ops))
                .map_err(|e| CliError::Runtime(e.to_string()))?;
            write_to(args.out.as_ref(), &format!("{text}\n"))?;
        }
        Format::Text => write_to(args.out.as_ref(), &to_text(&sink, &outcome, &ops, unit))?,
    }
    // After the report, so that a plot that cannot be written loses none of it.
    if let Some(path) = &args.plot {
        write_plot(path, &sink, &outcome, unit)?;
    }
    Ok(if outcome.trip_seen {
        ExitCode::Trip
    } else {
        ExitCode::Ok
    })
}

/// A window's end for a message: the time, else `open` (no bound).
fn options_time(t: Option<DateTime<Utc>>, open: &str) -> String {
    t.map_or(open.to_string(), write_rfc3339)
}

/// The operator actions of the run's span (and the --from/--to window).
fn actions(args: &ReportArgs, sink: &ReportSink) -> OperatorActions {
    let Some((start, end)) = sink.span() else {
        return OperatorActions::default();
    };
    let files = if args.events.is_empty() {
        event_logs_beside(&args.logs)
    } else {
        args.events.clone()
    };
    operator_actions(&files, start, end)
}

/// Draws the run and writes it to `path`; errors name the path.
fn write_plot(
    path: &std::path::Path,
    sink: &ReportSink,
    outcome: &WalkOutcome,
    unit: PressureUnit,
) -> Result<(), CliError> {
    let names: Vec<String> = outcome
        .files
        .iter()
        .map(|f| {
            f.file_name().map_or_else(
                || f.display().to_string(),
                |n| n.to_string_lossy().into_owned(),
            )
        })
        .collect();
    let title = match names.as_slice() {
        [] => "rarefy report".to_string(),
        [one] => format!("rarefy report: {one}"),
        [first, rest @ ..] => format!("rarefy report: {first} and {} more", rest.len()),
    };
    let svg = crate::pipeline::plot::render(sink, unit, &title)
        .map_err(|e| CliError::Runtime(format!("--plot {}: {e}", path.display())))?;
    std::fs::write(path, svg)
        .map_err(|e| CliError::Runtime(format!("--plot {}: {e}", path.display())))
}

fn write_to(out: Option<&PathBuf>, text: &str) -> Result<(), CliError> {
    match out {
        Some(p) => std::fs::write(p, text)
            .map_err(|e| CliError::Runtime(format!("--out {}: {e}", p.display()))),
        None => super::print_out(text),
    }
}

fn time_json(t: Option<DateTime<Utc>>) -> Value {
    t.map_or(Value::Null, |t| Value::String(write_rfc3339(t)))
}

/// The JSON document (SPEC §7, issue shape).
pub fn to_json(sink: &ReportSink, outcome: &WalkOutcome, ops: &OperatorActions) -> Value {
    let analyses = sink.analyses();
    let origin = sink.origin();
    let gauges: Vec<Value> = sink
        .summaries()
        .iter()
        .zip(&analyses)
        .map(|(g, a)| gauge_json(g, a, origin))
        .collect();
    let alarms: Vec<Value> = sink
        .events()
        .iter()
        .map(|e| {
            json!({
                "time": write_rfc3339(e.time),
                "kind": e.kind().as_str(),
                "id": e.id,
                "from": e.from_text(),
                "to": e.to_text(),
                "value": e.value_text.clone().or_else(|| e.value.map(|v| format!("{v:e}"))),
            })
        })
        .collect();
    let chamber = sink.chamber_analysis().map(|a| {
        let mut used: Vec<&str> = a
            .rises
            .iter()
            .map(|r| r.source.as_str())
            .chain(a.pumpdowns.iter().flat_map(|p| {
                p.roughing
                    .iter()
                    .map(|r| r.source.as_str())
                    .chain(p.tail.iter().map(|t| t.source.as_str()))
            }))
            .collect();
        used.sort_unstable();
        used.dedup();
        json!({
            "method": "the best gauge in its range at each reading; no fit spans two gauges or elements",
            "gauges_used": used,
            "pumpdowns": pumpdowns_json(&a, origin),
            "rate_of_rise": rises_json(&a, origin),
        })
    });
    json!({
        "files": outcome.files.iter().map(|f| f.display().to_string()).collect::<Vec<_>>(),
        "rows": outcome.rows,
        "unusable_rows": outcome.unusable.causes,
        "times_went_back": outcome.times_went_back,
        "times_repeated": outcome.times_repeated,
        "ambiguous_times": outcome.ambiguous_times,
        "time_offset_changes": outcome.time_offset_changes,
        "median_method": "P² streaming estimate (Jain & Chlamtac 1985) on ln p",
        "gauges": gauges,
        "chamber": chamber,
        "alarms": alarms,
        "event_logs": ops.files.iter().map(|f| f.display().to_string()).collect::<Vec<_>>(),
        "operator_actions": ops.actions.iter().map(|(f, e)| json!({
            "time": write_rfc3339(e.time),
            "wall_time": time_json(e.wall_time),
            "user": e.user,
            "operation": e.operation.map(|o| o.as_str()),
            "id": e.id,
            "from": e.from_text(),
            "to": e.to_text(),
            "file": f.display().to_string(),
        })).collect::<Vec<_>>(),
    })
}

/// Seconds on the analyses' origin as an RFC 3339 time.
fn at(origin: Option<DateTime<Utc>>, s: f64) -> Value {
    time_json(origin.map(|o| o + chrono::Duration::milliseconds((s * 1000.0).round() as i64)))
}

fn pumpdowns_json(a: &Analysis, origin: Option<DateTime<Utc>>) -> Vec<Value> {
    a.pumpdowns
        .iter()
        .map(|p| {
            let (reached, predicted, band) = match &p.target {
                Some(Target::Reached { at_s, .. }) => (at(origin, *at_s), Value::Null, Value::Null),
                Some(Target::Predicted {
                    after_s,
                    after_low_s,
                    after_high_s,
                    ..
                }) => (
                    Value::Null,
                    at(origin, p.start_s + after_s),
                    json!([at(origin, p.start_s + after_low_s), at(origin, p.start_s + after_high_s)]),
                ),
                Some(Target::NotPredictable { reason }) => {
                    (Value::Null, Value::Null, json!(format!("not predictable: {reason}")))
                }
                None => (Value::Null, Value::Null, Value::Null),
            };
            json!({
                "start": at(origin, p.start_s),
                "start_pa": p.start_pa,
                "min_pa": p.min_pa,
                "tau_s": p.roughing.as_ref().map(|r| r.tau_s),
                "tau_gauge": p.roughing.as_ref().map(|r| r.source.clone()),
                "tau_r2": p.roughing.as_ref().map(|r| r.r2),
                "pumping_speed_m3_per_s": p.roughing.as_ref().and_then(|r| r.pumping_speed_m3_per_s),
                "tail_alpha": p.tail.as_ref().map(|t| t.alpha),
                "tail_r2": p.tail.as_ref().map(|t| t.r2),
                "tail_gauge": p.tail.as_ref().map(|t| t.source.clone()),
                "target_reached": reached,
                "target_predicted": predicted,
                "target_band": band,
                "notes": p.notes,
            })
        })
        .collect()
}

fn rises_json(a: &Analysis, origin: Option<DateTime<Utc>>) -> Vec<Value> {
    a.rises
        .iter()
        .map(|r| {
            json!({
                "origin": match r.origin { Origin::Given => "given", Origin::Found => "found" },
                "gauge": r.source,
                "points": r.points,
                "points_left_out": r.left_out,
                "start": at(origin, r.from_s),
                "end": at(origin, r.to_s),
                "start_pa": r.start_pa,
                "end_pa": r.end_pa,
                "dp_dt_pa_per_s": r.dp_dt_pa_per_s,
                "r2": r.r2,
                "leak_rate_pa_m3_per_s": r.leak_rate.as_ref().map(|l| l.pa_m3_per_s),
                "leak_rate_mbar_l_per_s": r.leak_rate.as_ref().map(|l| l.mbar_l_per_s),
                "verdict": r.verdict.as_str(),
                "slope_ratio_last_to_first": r.shape.as_ref().map(|s| s.ratio),
                "notes": r.notes,
            })
        })
        .collect()
}

fn gauge_json(g: &GaugeSummary, a: &Analysis, origin: Option<DateTime<Utc>>) -> Value {
    let ranges: serde_json::Map<String, Value> = g
        .time_in_range_s
        .iter()
        .map(|(r, s)| (r.as_str().to_string(), json!(s)))
        .collect();
    let regimes: serde_json::Map<String, Value> = g
        .time_in_regime_s
        .iter()
        .map(|(name, m)| {
            let m: serde_json::Map<String, Value> = m
                .iter()
                .map(|(r, s)| (r.as_str().to_string(), json!(s)))
                .collect();
            (name.clone(), Value::Object(m))
        })
        .collect();
    json!({
        "id": g.id,
        "samples": g.samples,
        "statuses": g.statuses.iter().map(|(s, n)| (s.clone(), json!(n))).collect::<serde_json::Map<_, _>>(),
        "start": time_json(g.start),
        "end": time_json(g.end),
        "duration_s": g.duration_s,
        "min_pa": g.min_pa,
        "max_pa": g.max_pa,
        "mean_pa": g.mean_pa,
        "median_pa": g.median_pa,
        "time_in_range_s": ranges,
        "time_in_regime_s": regimes,
        "time_without_pressure_s": g.time_without_pressure_s,
        "gap_after_s": g.gap_after_s,
        "gap_count": g.gap_count,
        "gap_s": g.gap_s,
        "gaps": g.gaps.iter().map(|(a, b)| json!([write_rfc3339(*a), write_rfc3339(*b)])).collect::<Vec<_>>(),
        "thresholds": g.thresholds.iter().map(|(t, first)| json!({
            "pa": t.pa, "source": t.source, "first_below": time_json(*first),
        })).collect::<Vec<_>>(),
        "pumpdowns": pumpdowns_json(a, origin),
        "rate_of_rise": rises_json(a, origin),
        "exposure_langmuir": g.exposure_langmuir,
    })
}

/// One operator action in the event list.
fn action_line(s: &mut String, a: &crate::alarm::Event) {
    use std::fmt::Write as _;
    let _ = writeln!(
        s,
        "  {} operator {}: {} {} ({} → {})",
        write_rfc3339(a.time),
        a.user.as_deref().unwrap_or("?"),
        a.operation.map_or("?", |o| o.as_str()),
        a.id,
        a.from_text(),
        a.to_text()
    );
}

/// ", from GAUGE" when the fit names its gauge.
fn from_gauge(source: &str) -> String {
    if source.is_empty() {
        String::new()
    } else {
        format!(", from {source}")
    }
}

/// Pump-downs and rate-of-rise segments as text lines, each number with
/// the gauge it came from.
fn analysis_text(
    s: &mut String,
    a: &Analysis,
    when: &dyn Fn(f64) -> String,
    p: &dyn Fn(Option<f64>) -> String,
) {
    use std::fmt::Write as _;
    for pd in &a.pumpdowns {
        let _ = write!(
            s,
            "  pump-down from {} at {}",
            p(Some(pd.start_pa)),
            when(pd.start_s)
        );
        if let Some(r) = &pd.roughing {
            let _ = write!(
                s,
                ": roughing τ {:.1} s (R² {:.4}{})",
                r.tau_s,
                r.r2,
                from_gauge(&r.source)
            );
            if let Some(sp) = r.pumping_speed_m3_per_s {
                let _ = write!(s, ", pumping speed {:.3} L/s", sp * 1000.0);
            }
        }
        if let Some(tl) = &pd.tail {
            let _ = write!(
                s,
                "; tail p ∝ t^-{:.2} (R² {:.3}{})",
                tl.alpha,
                tl.r2,
                from_gauge(&tl.source)
            );
        }
        match &pd.target {
            Some(Target::Reached { at_s, .. }) => {
                let _ = write!(s, "; target reached {}", when(*at_s));
            }
            Some(Target::Predicted {
                after_s,
                after_low_s,
                after_high_s,
                ..
            }) => {
                let _ = write!(
                    s,
                    "; target predicted {} ({} to {})",
                    when(pd.start_s + after_s),
                    when(pd.start_s + after_low_s),
                    when(pd.start_s + after_high_s)
                );
            }
            Some(Target::NotPredictable { reason }) => {
                let _ = write!(s, "; target not predictable: {reason}");
            }
            None => {}
        }
        let _ = writeln!(s);
        for n in &pd.notes {
            let _ = writeln!(s, "    note: {n}");
        }
    }
    for r in &a.rises {
        let _ = write!(
            s,
            "  rate of rise {} → {}{}{}: ",
            when(r.from_s),
            when(r.to_s),
            if r.origin == Origin::Given {
                " (given)"
            } else {
                ""
            },
            if r.source.is_empty() {
                String::new()
            } else {
                format!(" on {}", r.source)
            }
        );
        if let Some(d) = r.dp_dt_pa_per_s {
            let _ = write!(s, "dp/dt {d:.3e} Pa/s");
        }
        match &r.leak_rate {
            Some(l) => {
                let _ = write!(
                    s,
                    ", Q {:.3e} Pa·m³/s = {:.3e} mbar·L/s",
                    l.pa_m3_per_s, l.mbar_l_per_s
                );
            }
            None => {
                let _ = write!(s, " (give --volume for the leak rate)");
            }
        }
        let _ = write!(s, "; verdict {}", r.verdict.as_str());
        if let Some(sh) = &r.shape {
            let _ = write!(s, " (late/early slope {:.2})", sh.ratio);
        }
        let _ = writeln!(s);
        for n in r.notes.iter().filter(|n| n.starts_with("fitted on")) {
            let _ = writeln!(s, "    note: {n}");
        }
    }
}

fn to_text(
    sink: &ReportSink,
    outcome: &WalkOutcome,
    ops: &OperatorActions,
    unit: PressureUnit,
) -> String {
    use std::fmt::Write as _;
    let p = |v: Option<f64>| v.map_or("-".to_string(), |v| format_pressure(v, unit));
    let t = |v: Option<DateTime<Utc>>| v.map_or("never".to_string(), write_rfc3339);
    let mut s = String::new();
    let _ = writeln!(s, "Run report");
    for f in &outcome.files {
        let _ = writeln!(s, "  file: {}", f.display());
    }
    let _ = writeln!(s, "  rows: {}", outcome.rows);
    for (cause, n) in &outcome.unusable.causes {
        let _ = writeln!(s, "  rows with problems: {n} × {cause}");
    }
    if outcome.times_went_back + outcome.times_repeated > 0 {
        let _ = writeln!(
            s,
            "  rows whose time went back: {}, repeated: {}",
            outcome.times_went_back, outcome.times_repeated
        );
    }
    if outcome.ambiguous_times > 0 {
        let _ = writeln!(
            s,
            "  rows with an ambiguous local time: {}",
            outcome.ambiguous_times
        );
    }
    if outcome.time_offset_changes > 0 {
        let _ = writeln!(
            s,
            "  rows whose time's UTC offset changed: {}",
            outcome.time_offset_changes
        );
    }
    let analyses = sink.analyses();
    let origin = sink.origin();
    let when = |secs: f64| {
        origin.map_or("-".to_string(), |o| {
            write_rfc3339(o + chrono::Duration::milliseconds((secs * 1000.0).round() as i64))
        })
    };
    for (g, a) in sink.summaries().iter().zip(&analyses) {
        let _ = writeln!(s, "\nGauge {}", g.id);
        let _ = writeln!(
            s,
            "  {} → {} ({:.0} s), {} readings",
            t(g.start),
            t(g.end),
            g.duration_s,
            g.samples
        );
        let statuses: Vec<String> = g.statuses.iter().map(|(k, n)| format!("{k} {n}")).collect();
        let _ = writeln!(s, "  statuses: {}", statuses.join(", "));
        if g.min_pa.is_some() {
            let _ = writeln!(
                s,
                "  pressure: min {}, max {}, mean {}, median {} (P² estimate)",
                p(g.min_pa),
                p(g.max_pa),
                p(g.mean_pa),
                p(g.median_pa)
            );
        }
        let _ = writeln!(s, "  time in range:");
        for (r, secs) in g.time_in_range_s.iter().filter(|(_, x)| *x > 0.0) {
            let _ = writeln!(s, "    {:<18} {secs:>10.0} s", r.as_str());
        }
        if g.time_without_pressure_s > 0.0 {
            let _ = writeln!(
                s,
                "    {:<18} {:>10.0} s",
                "no valid pressure", g.time_without_pressure_s
            );
        }
        for (name, m) in &g.time_in_regime_s {
            let parts: Vec<String> = m
                .iter()
                .map(|(r, x)| format!("{} {x:.0} s", r.as_str()))
                .collect();
            let _ = writeln!(s, "  regime ({name}): {}", parts.join(", "));
        }
        let _ = writeln!(
            s,
            "  gaps: {} ({:.0} s; longer than {})",
            g.gap_count,
            g.gap_s,
            g.gap_after_s
                .map_or("-".to_string(), |x| format!("{x:.1} s"))
        );
        for (a, b) in &g.gaps {
            let _ = writeln!(s, "    {} → {}", write_rfc3339(*a), write_rfc3339(*b));
        }
        for (th, first) in &g.thresholds {
            let _ = writeln!(
                s,
                "  first below {} ({}): {}",
                p(Some(th.pa)),
                th.source,
                t(*first)
            );
        }
        if let Some(e) = g.exposure_langmuir {
            let _ = writeln!(s, "  exposure: {e:.3e} L");
        }
        analysis_text(&mut s, a, &when, &p);
    }
    if let Some(a) = sink.chamber_analysis() {
        let _ = writeln!(
            s,
            "\nChamber pressure (the best gauge in range at each reading; no fit spans two gauges)"
        );
        analysis_text(&mut s, &a, &when, &p);
    }
    // The replay's events and the operators' actions, merged in time order
    // (an action first when both have the same time).
    let _ = writeln!(
        s,
        "\nEvents ({}, from the rules replayed over the log; operator actions: {})",
        sink.events().len(),
        ops.actions.len()
    );
    let mut actions = ops.actions.iter().map(|(_, e)| e).peekable();
    for e in sink.events() {
        while let Some(a) = actions.next_if(|a| a.time <= e.time) {
            action_line(&mut s, a);
        }
        let _ = writeln!(
            s,
            "  {} {} {} → {} {}",
            write_rfc3339(e.time),
            e.id,
            e.from_text(),
            e.to_text(),
            e.value_text.clone().unwrap_or_default()
        );
    }
    for a in actions {
        action_line(&mut s, a);
    }
    if !ops.files.is_empty() {
        let names: Vec<String> = ops.files.iter().map(|f| f.display().to_string()).collect();
        let _ = writeln!(s, "  (operator actions from {})", names.join(", "));
    }
    let _ = writeln!(
        s,
        "\nMedian: P² streaming estimate (Jain & Chlamtac 1985) on ln p."
    );
    s
}
