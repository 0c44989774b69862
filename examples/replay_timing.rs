//! Times what a replay does on a large log: opening it (the index pass)
//! and seeking, backward and forward, as the dashboard does on a key.
//! Prints one JSON object: the index time, the keyframes and the bytes of
//! trend history spilled, and each seek with the player's row after it.
//! Run it with
//!
//! ```sh
//! cargo run --release --example replay_timing -- LOG [CONFIG [EVERY]]
//! ```
//!
//! `EVERY`: rows between keyframes (default: the dashboard's,
//! `rarefy::ui::keyframe::EVERY`).
//!
//! The last seek is the longest one by design: to 1 ms before the time
//! of the row that ends a keyframe interval in the middle of the log, so
//! it starts at the keyframe before and plays a whole interval but one
//! row.

use std::path::PathBuf;
use std::time::Instant;

use chrono::{DateTime, Utc};
use rarefy::alarm::Monitor;
use rarefy::config;
use rarefy::pipeline::replay::Rows;
use rarefy::ui::app::App;
use rarefy::ui::keyframe::EVERY;
use rarefy::ui::run::{Player, ReplaySetup, index_every, seek};

/// The time of row `n` (0-based, as the player counts rows).
fn row_time(setup: &ReplaySetup, n: u64) -> Result<Option<DateTime<Utc>>, String> {
    let mut rows = Rows::open(&setup.file, setup.foreign.as_ref())?;
    while rows.taken() < n {
        if rows.next_until(None).is_none() {
            return Ok(None);
        }
    }
    Ok(rows.next_time())
}

fn main() -> Result<(), String> {
    let mut args = std::env::args().skip(1);
    let usage = "usage: replay_timing LOG [CONFIG [EVERY]]";
    let file = PathBuf::from(args.next().ok_or(usage)?);
    let cfg = match args.next() {
        Some(c) => config::load(std::path::Path::new(&c)).map_err(|e| e.to_string())?,
        None => config::Config::default(),
    };
    let every = match args.next() {
        Some(n) => n.parse::<u64>().map_err(|_| usage.to_string())?,
        None => EVERY,
    };
    let setup = ReplaySetup {
        file,
        foreign: cfg.log.clone(),
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    };
    let t0 = Instant::now();
    let (replay, _) = index_every(&setup, every)?;
    let index_s = t0.elapsed().as_secs_f64();
    let (start, end) = (replay.start, replay.end);
    let (keyframes, spilled) = replay
        .keyframes
        .as_ref()
        .map_or((0, 0), |k| (k.len(), k.spilled_bytes()));
    // Not timed: where the longest seek goes.
    let middle = (keyframes as u64 / 2 + 1) * every;
    let longest =
        row_time(&setup, middle.saturating_sub(1))?.map(|t| t - chrono::Duration::milliseconds(1));
    let mut app = App::new("bench", Monitor::new(setup.monitor.clone()), Vec::new());
    app.pipeline.set_gases(setup.gases.clone());
    app.replay = Some(replay);
    let mut player = Player::open(&setup)?;
    // Seeks as a user makes them: to 90 % of the log, back to 10 %, to the
    // middle, back to the start, forward by 1 % of the log; then the
    // longest.
    let span = end - start;
    let at = |f: f64| {
        start + chrono::Duration::milliseconds((span.num_milliseconds() as f64 * f) as i64)
    };
    let mut targets = vec![
        ("forward to 90 %", at(0.9)),
        ("back to 10 %", at(0.1)),
        ("forward to 50 %", at(0.5)),
        ("back to the start", at(0.0)),
        ("forward by 1 %", at(0.01)),
    ];
    if let Some(t) = longest {
        targets.push(("to 1 ms before a keyframe's last row", t));
    }
    let mut seeks = Vec::new();
    for (what, target) in targets {
        let t = Instant::now();
        seek(&mut app, &mut player, &setup, target)?;
        let s = t.elapsed().as_secs_f64();
        seeks.push(format!(
            "{{\"seek\": \"{what}\", \"s\": {s:.4}, \"rows_from_start\": {}}}",
            player.rows_fed()
        ));
    }
    println!(
        "{{\"index_s\": {index_s:.4}, \"every\": {every}, \"keyframes\": {keyframes}, \"spilled_bytes\": {spilled}, \"seeks\": [{}]}}",
        seeks.join(", ")
    );
    Ok(())
}
