//! The same log gives the same events, however it is driven: `rarefy record
//! --source file://LOG` (the binary, its event log), the replay index, the
//! replay played frame by frame at 1x, 60x, 1000x and max, and the pipeline
//! fed row by row. Every sample log is checked, and a log made with gaps
//! longer than `stale_after` and a dropout of bad readings.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::{Arc, Mutex};

use chrono::{DateTime, Utc};
use rarefy::alarm::{Event, Monitor};
use rarefy::config;
use rarefy::log::row_events;
use rarefy::logfile::open_log;
use rarefy::pipeline::{Item, Nowhere, Pipeline, Sink};
use rarefy::ui::app::{App, Replay, Speed};
use rarefy::ui::run::{self, Player, ReplaySetup};

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("rarefy-determinism-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("tmp");
    d
}

/// What identifies an event across drivers: id, new state, data time.
type Key = (String, String, DateTime<Utc>);

fn keys(events: &[Event]) -> Vec<Key> {
    events
        .iter()
        .map(|e| (e.id.clone(), e.to_text().to_string(), e.time))
        .collect()
}

/// Collects events into a list the test keeps a handle on.
#[derive(Clone, Default)]
struct Shared(Arc<Mutex<Vec<Event>>>);

impl Sink for Shared {
    fn accept(&mut self, item: Item<'_>, _: &Monitor) {
        if let Item::Event(e) = item {
            self.0.lock().expect("lock").push(e.clone());
        }
    }
}

impl Shared {
    fn take(&self) -> Vec<Event> {
        std::mem::take(&mut *self.0.lock().expect("lock"))
    }
}

fn setup(log: &Path) -> ReplaySetup {
    let cfg = config::load(&root().join("config/demo.toml")).expect("demo config");
    ReplaySetup {
        file: log.to_path_buf(),
        foreign: None,
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    }
}

/// The pipeline fed one row at a time, nothing else.
fn row_by_row(setup: &ReplaySetup) -> Vec<Key> {
    let mut p = Pipeline::new(Monitor::new(setup.monitor.clone()));
    p.set_gases(setup.gases.clone());
    let mut out = Vec::new();
    let mut gas = None;
    for row in open_log(&setup.file, None).expect("log") {
        let row = match row {
            Ok(r) => r,
            Err(e) => match e.row {
                Some(r) => *r,
                None => continue,
            },
        };
        for ev in row_events(row, &mut gas) {
            out.extend(p.feed(&ev, None, &mut Nowhere));
        }
    }
    keys(&out)
}

/// The replay played in frames of 100 ms of wall time at `speed`.
fn played(setup: &ReplaySetup, replay: &Replay, speed: Speed) -> Vec<Key> {
    let shared = Shared::default();
    let mut app = App::new("t", Monitor::new(setup.monitor.clone()), Vec::new());
    app.pipeline.add_sink(Box::new(shared.clone()));
    app.replay = Some(Replay {
        speed,
        ..replay.clone()
    });
    let mut player = Player::open(setup).expect("player");
    let mut head = player.next_time();
    let mut frames = 0u64;
    while app.replay.as_ref().is_some_and(|r| !r.at_end) {
        run::play(&mut app, &mut player, &mut head, 0.1);
        frames += 1;
        assert!(frames < 1_000_000, "replay does not end");
    }
    keys(&shared.take())
}

/// `rarefy record --source file://LOG`, read back from its event log.
fn recorded(log: &Path, tag: &str) -> Vec<Key> {
    let out = tempdir(&format!("{tag}-record"));
    let o = Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .args(["record", "--config", "config/demo.toml", "--source"])
        .arg(format!("file://{}", log.display()))
        .arg("--out")
        .arg(&out)
        .current_dir(root())
        .output()
        .expect("run rarefy");
    assert!(
        matches!(o.status.code(), Some(0 | 3)),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let mut events = Vec::new();
    for entry in std::fs::read_dir(&out).expect("out") {
        let path = entry.expect("entry").path();
        let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("");
        if name.starts_with("events-") {
            let text = std::fs::read_to_string(&path).expect("events");
            for line in text.lines() {
                events.push(Event::from_json(line).unwrap_or_else(|e| panic!("{e}: {line}")));
            }
        }
    }
    keys(&events)
}

fn check(log: &Path, tag: &str) -> usize {
    let setup = setup(log);
    let reference = row_by_row(&setup);
    let (replay, index) = run::index_events(&setup).expect("index");
    assert_eq!(keys(&index), reference, "{tag}: replay index");
    let marks: Vec<Key> = replay
        .marks
        .iter()
        .map(|(t, id, to)| (id.clone(), to.clone(), *t))
        .collect();
    assert_eq!(marks, reference, "{tag}: timeline marks");
    for speed in [
        Speed::Times(1.0),
        Speed::Times(60.0),
        Speed::Times(1000.0),
        Speed::Max,
    ] {
        assert_eq!(
            played(&setup, &replay, speed),
            reference,
            "{tag}: replay at {}",
            speed.label()
        );
    }
    assert_eq!(recorded(log, tag), reference, "{tag}: record");
    reference.len()
}

#[test]
fn every_sample_log_gives_the_same_events_every_way() {
    let mut total = 0;
    for name in [
        "demo.csv",
        "pumpdown.csv",
        "leak-check.csv",
        "outgassing.csv",
        "process.csv",
        "bakeout.csv",
    ] {
        total += check(&root().join("sample-logs").join(name), name);
    }
    assert!(total > 20, "the sample logs should raise events: {total}");
}

#[test]
fn a_log_with_gaps_and_a_dropout_gives_the_same_events_every_way() {
    // demo.csv with two gaps longer than stale_after (10 s) and a run of
    // sensor errors on the chamber gauge.
    let text = std::fs::read_to_string(root().join("sample-logs/demo.csv")).expect("demo");
    let mut out = String::new();
    for line in text.lines() {
        let t = line.get(11..19).unwrap_or("");
        if line.starts_with("2026-")
            && (("09:20:00".."09:20:47").contains(&t) || ("09:33:10".."09:33:31").contains(&t))
        {
            continue;
        }
        if line.starts_with("2026-") && ("09:25:00".."09:25:20").contains(&t) {
            // time, cdg, chamber, ion, wall: the chamber gauge fails.
            let mut cells: Vec<&str> = line.split(',').collect();
            cells[2] = "sensor-error";
            out.push_str(&cells.join(","));
        } else {
            out.push_str(line);
        }
        out.push('\n');
    }
    let dir = tempdir("gaps");
    let log = dir.join("gaps.csv");
    std::fs::write(&log, out).expect("write");
    let reference = row_by_row(&setup(&log));
    let stale: Vec<&Key> = reference
        .iter()
        .filter(|k| k.0.ends_with(".input") && k.1 == "unacknowledged")
        .collect();
    assert!(
        stale.len() >= 3,
        "gaps and the dropout raise input alarms: {reference:?}"
    );
    check(&log, "gaps");
}

#[test]
fn a_log_with_a_gas_column_gives_the_same_gas_changes_every_way() {
    // process.csv with a `gas` column: Ar written from 07:20 to 07:40, empty
    // otherwise (the config's gas steps decide there).
    let text = std::fs::read_to_string(root().join("sample-logs/process.csv")).expect("log");
    let mut out = String::new();
    for line in text.lines() {
        if line.starts_with("time,") {
            out.push_str(line);
            out.push_str(",gas\n");
            continue;
        }
        out.push_str(line);
        if line.starts_with("2026-") {
            let t = line.get(11..19).unwrap_or("");
            out.push_str(if ("07:20:00".."07:40:00").contains(&t) {
                ",Ar"
            } else {
                ","
            });
        }
        out.push('\n');
    }
    let dir = tempdir("gas-column");
    let log = dir.join("gas.csv");
    std::fs::write(&log, out).expect("write");
    let reference = row_by_row(&setup(&log));
    let gas: Vec<&Key> = reference.iter().filter(|k| k.0 == "gas").collect();
    assert!(
        gas.iter()
            .any(|k| k.1 == "Ar" && k.2.format("%H:%M:%S").to_string() == "07:20:00"),
        "the column's Ar is an event at its row: {gas:?}"
    );
    check(&log, "gas-column");
}
