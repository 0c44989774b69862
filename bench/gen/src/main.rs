//! `rarefy-bench-gen --rows N --out FILE [--seed S] [--start RFC3339]`:
//! writes a deterministic v1 log for the benchmark harness (see the crate
//! docs of `rarefy_bench_gen`).

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use chrono::{DateTime, Utc};
use rarefy_bench_gen::{Options, generate};

const USAGE: &str = "usage: rarefy-bench-gen --rows N --out FILE [--seed S] [--start RFC3339]
  --rows   data lines, e.g. 1000000 or 1e6
  --out    the log to write (\"-\" for stdout)
  --seed   noise seed (default 1)
  --start  time of the first row (default 2026-11-16T06:00:00Z)";

/// A row count written as an integer or as `1e6`.
fn parse_count(text: &str) -> Result<u64, String> {
    if let Ok(n) = text.parse::<u64>() {
        return Ok(n);
    }
    match text.parse::<f64>() {
        Ok(v) if v.is_finite() && v >= 0.0 && v.fract() == 0.0 && v < 1e15 => Ok(v as u64),
        _ => Err(format!(
            "--rows {text:?}: expected a whole number such as 1000000 or 1e6"
        )),
    }
}

fn run() -> Result<(), String> {
    let mut args = std::env::args().skip(1);
    let mut rows = None;
    let mut out: Option<PathBuf> = None;
    let mut opts = Options::new(0);
    while let Some(a) = args.next() {
        let mut value = |name: &str| args.next().ok_or(format!("{name} needs a value\n{USAGE}"));
        match a.as_str() {
            "--rows" => rows = Some(parse_count(&value("--rows")?)?),
            "--out" => out = Some(PathBuf::from(value("--out")?)),
            "--seed" => {
                let v = value("--seed")?;
                opts.seed = v
                    .parse()
                    .map_err(|_| format!("--seed {v:?}: expected a whole number"))?;
            }
            "--start" => {
                let v = value("--start")?;
                opts.start = DateTime::parse_from_rfc3339(&v)
                    .map_err(|e| format!("--start {v:?}: {e}"))?
                    .with_timezone(&Utc);
            }
            "-h" | "--help" => {
                println!("{USAGE}");
                return Ok(());
            }
            other => return Err(format!("unknown argument {other:?}\n{USAGE}")),
        }
    }
    opts.rows = rows.ok_or(format!("--rows is required\n{USAGE}"))?;
    let out = out.ok_or(format!("--out is required\n{USAGE}"))?;
    let written = if out.as_os_str() == "-" {
        generate(&opts, std::io::stdout().lock())
    } else {
        if let Some(dir) = out.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|e| format!("{}: {e}", dir.display()))?;
        }
        // Written beside the target and renamed, so an interrupted run never
        // leaves a half log under the final name.
        let tmp = out.with_extension("partial");
        let file = std::fs::File::create(&tmp).map_err(|e| format!("{}: {e}", tmp.display()))?;
        let w = generate(&opts, file).map_err(|e| format!("{}: {e}", tmp.display()))?;
        std::fs::rename(&tmp, &out).map_err(|e| format!("{}: {e}", out.display()))?;
        Ok(w)
    }
    .map_err(|e| format!("cannot write the log: {e}"))?;
    let mut err = std::io::stderr().lock();
    let _ = writeln!(
        err,
        "rarefy-bench-gen: {} lines, {} bytes; bad pressure cells {:?}, bad wall cells {}, cut line {}, gap {}",
        written.lines,
        written.bytes,
        written.bad_pressure,
        written.bad_wall,
        written.cut_line,
        written.gap
    );
    Ok(())
}

fn main() -> ExitCode {
    match run() {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("rarefy-bench-gen: {e}");
            ExitCode::from(2)
        }
    }
}
