//! Times what a replay does on a large log: opening it (the index pass) and
//! seeking, backward and forward, as the dashboard does on a key. Prints
//! one JSON object. Used by `bench/run.py`; run it by hand with
//!
//! ```sh
//! cargo run --release --example replay_timing -- LOG [CONFIG]
//! ```

use std::path::PathBuf;
use std::time::Instant;

use rarefy::alarm::Monitor;
use rarefy::config;
use rarefy::ui::app::App;
use rarefy::ui::run::{Player, ReplaySetup, index, seek};

fn main() -> Result<(), String> {
    let mut args = std::env::args().skip(1);
    let file = PathBuf::from(args.next().ok_or("usage: replay_timing LOG [CONFIG]")?);
    let cfg = match args.next() {
        Some(c) => config::load(std::path::Path::new(&c)).map_err(|e| e.to_string())?,
        None => config::Config::default(),
    };
    let setup = ReplaySetup {
        file,
        foreign: cfg.log.clone(),
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    };
    let t0 = Instant::now();
    let replay = index(&setup)?;
    let index_s = t0.elapsed().as_secs_f64();
    let (start, end) = (replay.start, replay.end);
    let mut app = App::new("bench", Monitor::new(setup.monitor.clone()), Vec::new());
    app.replay = Some(replay);
    let mut player = Player::open(&setup)?;
    // Seeks as a user makes them: to 90 % of the log, back to 10 %, to the
    // middle, back to the start, forward by 1 % of the log.
    let span = end - start;
    let at = |f: f64| {
        start + chrono::Duration::milliseconds((span.num_milliseconds() as f64 * f) as i64)
    };
    let mut seeks = Vec::new();
    for (what, f) in [
        ("forward to 90 %", 0.9),
        ("back to 10 %", 0.1),
        ("forward to 50 %", 0.5),
        ("back to the start", 0.0),
        ("forward by 1 %", 0.01),
    ] {
        let t = Instant::now();
        seek(&mut app, &mut player, &setup, at(f))?;
        seeks.push(format!(
            "{{\"seek\": \"{what}\", \"s\": {:.4}}}",
            t.elapsed().as_secs_f64()
        ));
    }
    println!(
        "{{\"index_s\": {index_s:.4}, \"seeks\": [{}]}}",
        seeks.join(", ")
    );
    Ok(())
}
