//! Seeking a replay through its keyframes gives what playing every row
//! from the start gives: on generated logs (v1 with bad cells, a gap, a
//! cut-off line, gas changes and a bad gas cell, a time that goes back
//! and one that repeats; a foreign log with notes and a change of UTC
//! offset) and configs with alarms and a gate, many seeks (the start, the
//! end, on a keyframe's row and either side of it, in gaps, outside the
//! log, backward and forward, between steps and played frames) leave the
//! monitor, the pipeline's counts, the trend history, the app's counters,
//! gauges, events, note and source error, the player's place and the
//! screen as a replay from the start to that time leaves them.

use std::path::{Path, PathBuf};

use chrono::{DateTime, Duration, Utc};
use ratatui::Terminal;
use ratatui::backend::TestBackend;

use rarefy::alarm::Monitor;
use rarefy::config;
use rarefy::pipeline::Operation;
use rarefy::pipeline::replay::Rows;
use rarefy::ui::app::{App, GaugeInfo, Replay, Speed};
use rarefy::ui::keyframe::MOST;
use rarefy::ui::render;
use rarefy::ui::run::{self, Player, ReplaySetup, index_every, index_keyframes, seek};

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("rarefy-seek-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("tmp");
    d
}

fn t0() -> DateTime<Utc> {
    "2026-11-09T09:00:00Z".parse().expect("time")
}

fn rfc(t: DateTime<Utc>) -> String {
    t.format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string()
}

/// A v1 log of the demo chamber at 1 Hz: a pump-down, a vent that trips
/// the ion gauge alarm, a second pump-down that opens the gate, a bake-out
/// that heats the wall; gas cells that change (and one that is no gas),
/// bad cells, a 60 s gap, a cut-off line, a blank line, a time that goes
/// back and one that repeats.
fn v1_log(dir: &Path) -> PathBuf {
    let mut s = String::from(
        "# rarefy log v1\n# chamber: seek test\n# gas: N2\n\
         time,cdg [mbar],chamber [mbar],ion [mbar],wall [C],gas\n",
    );
    let mut t = t0();
    for i in 0..3000u32 {
        let x = f64::from(i);
        let p = if i < 1200 {
            (1000.0 * (-x / 55.0).exp()).max(3e-7)
        } else if i < 1300 {
            3e-7 * (10f64).powf((x - 1200.0) / 25.0)
        } else {
            (3e-3 * (-(x - 1300.0) / 40.0).exp()).max(2e-7)
        } * (1.0 + 0.01 * (x * 0.7).sin());
        let wall = if (2000..2600).contains(&i) {
            22.0 + 60.0 * (1.0 - ((x - 2300.0) / 300.0).abs())
        } else {
            22.0 + 0.25 * (x / 100.0).sin()
        };
        let gas = match i {
            0..500 => "",
            500..900 => "N2",
            900..1500 => "Ar",
            1500..1510 => "Kr2O",
            1510..2200 => "",
            _ => "N2",
        };
        let cdg = if p > 11.0 {
            "over-range".to_string()
        } else if p < 1e-4 {
            "under-range".to_string()
        } else {
            format!("{:e}", p * 0.98)
        };
        let mut chamber = format!("{p:e}");
        if i % 397 == 0 {
            chamber = "2.3E-O-5".into();
        }
        let ion = if p > 1e-3 {
            "sensor-off".to_string()
        } else if i % 211 == 0 {
            "sensor-error".to_string()
        } else {
            format!("{:e}", p * 1.05)
        };
        t = match i {
            // A 60 s pause of the recorder.
            1700 => t + Duration::seconds(60),
            // The clock goes back 3 s, and later a time repeats.
            2500 => t - Duration::seconds(3),
            2600 => t,
            _ => t + Duration::seconds(1),
        };
        if i == 2300 {
            // A line cut off inside its time.
            s.push_str("2026-11-09T09:3\n");
            continue;
        }
        if i == 2700 {
            s.push('\n');
        }
        s.push_str(&format!(
            "{},{cdg},{chamber},{ion},{wall:e},{gas}\n",
            rfc(t)
        ));
    }
    let f = dir.join("run.csv");
    std::fs::write(&f, s).expect("write log");
    f
}

fn demo_setup(file: &Path) -> (ReplaySetup, Vec<GaugeInfo>) {
    let cfg = config::load(&root().join("config/demo.toml")).expect("demo config");
    let gauges = GaugeInfo::configured(&cfg)
        .into_iter()
        .filter(|g| g.id != "ion")
        .collect();
    let setup = ReplaySetup {
        file: file.to_path_buf(),
        foreign: cfg.log.clone(),
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    };
    (setup, gauges)
}

/// An app over `replay`, as `rarefy replay` makes it.
fn app(setup: &ReplaySetup, gauges: &[GaugeInfo], replay: &Replay) -> App {
    let mut app = App::new("seek", Monitor::new(setup.monitor.clone()), gauges.to_vec());
    app.pipeline.set_gases(setup.gases.clone());
    app.color = false;
    app.replay = Some(replay.clone());
    app
}

/// The screen at 120×40 with the trend over `window_s`.
fn screen(app: &mut App, window_s: f64) -> String {
    let was = app.window_s;
    app.window_s = window_s;
    let mut t = Terminal::new(TestBackend::new(120, 40)).expect("terminal");
    t.draw(|f| render::draw(f, app)).expect("draw");
    app.window_s = was;
    format!("{}", t.backend())
}

/// Everything of the app and player that playback decides, but for the
/// bell and the status message (which depend on the seeks made before).
fn assert_same(what: &str, a: &mut App, pa: &Player, b: &mut App, pb: &Player) {
    assert_eq!(
        format!("{:?}", a.monitor()),
        format!("{:?}", b.monitor()),
        "{what}: monitor"
    );
    assert_eq!(a.pipeline.counts(), b.pipeline.counts(), "{what}: counts");
    assert!(a.history == b.history, "{what}: trend history");
    assert_eq!(a.origin, b.origin, "{what}: origin");
    assert_eq!(a.gauges, b.gauges, "{what}: gauges");
    assert_eq!(a.counters, b.counters, "{what}: counters");
    assert_eq!(a.events, b.events, "{what}: recent events");
    assert_eq!(a.events_seen, b.events_seen, "{what}: events seen");
    assert_eq!(a.note, b.note, "{what}: note");
    assert_eq!(a.source_error, b.source_error, "{what}: source error");
    assert_eq!(pa.next_time(), pb.next_time(), "{what}: next row");
    assert_eq!(pa.rows_fed(), pb.rows_fed(), "{what}: rows fed");
    let (ra, rb) = (a.replay.as_ref(), b.replay.as_ref());
    assert_eq!(ra.map(|r| r.at_end), rb.map(|r| r.at_end), "{what}: at end");
    for w in [60.0, 3600.0] {
        let (sa, sb) = (screen(a, w), screen(b, w));
        if sa != sb {
            panic!("{what}: screen with a {w} s window differs:\n{sa}\n----\n{sb}");
        }
    }
}

/// What a user does between seeks.
#[derive(Debug, Clone, Copy)]
enum Step {
    Seek(DateTime<Utc>),
    /// One row forward (`r`).
    Row,
    /// Frames of 100 ms at this speed.
    Play(Speed, u32),
}

/// Runs `steps` on a replay with keyframes every `every` rows and on one
/// without; after each seek both equal each other (bell and message too)
/// and a replay played from the start to the seek's time.
fn check(setup: &ReplaySetup, gauges: &[GaugeInfo], every: u64, steps: &[Step]) -> usize {
    check_most(setup, gauges, every, MOST, steps)
}

/// [`check`] with at most `most` keyframes.
fn check_most(
    setup: &ReplaySetup,
    gauges: &[GaugeInfo],
    every: u64,
    most: usize,
    steps: &[Step],
) -> usize {
    let (with, _) = index_keyframes(setup, every, most).expect("index");
    let keyframes = with.keyframes.clone().expect("keyframes of a plain file");
    assert!(keyframes.len() >= 5, "{keyframes:?}");
    assert!(keyframes.len() <= most, "{keyframes:?}");
    let without = Replay {
        keyframes: None,
        ..with.clone()
    };
    let mut a = app(setup, gauges, &with);
    let mut pa = Player::open(setup).expect("player");
    let mut b = app(setup, gauges, &without);
    let mut pb = Player::open(setup).expect("player");
    let (mut ha, mut hb) = (pa.next_time(), pb.next_time());
    let mut seeks = 0;
    for (n, step) in steps.iter().enumerate() {
        match *step {
            Step::Seek(t) => {
                a.bell = false;
                b.bell = false;
                seek(&mut a, &mut pa, setup, t).expect("seek");
                seek(&mut b, &mut pb, setup, t).expect("seek");
                ha = Some(t);
                hb = Some(t);
                let what = format!("step {n}: seek to {}", rfc(t));
                assert_same(&what, &mut a, &pa, &mut b, &pb);
                assert_eq!(a.bell, b.bell, "{what}: bell");
                assert_eq!(a.message, b.message, "{what}: message");
                // And from the start, on a new app.
                let mut c = app(setup, gauges, &without);
                let mut pc = Player::open(setup).expect("player");
                seek(&mut c, &mut pc, setup, t).expect("seek");
                // What the user set and was told are the sequence's.
                c.message.clone_from(&a.message);
                if let (Some(rc), Some(ra)) = (&mut c.replay, &a.replay) {
                    (rc.paused, rc.speed) = (ra.paused, ra.speed);
                }
                assert_same(
                    &format!("{what} (from the start)"),
                    &mut a,
                    &pa,
                    &mut c,
                    &pc,
                );
                seeks += 1;
            }
            Step::Row => {
                for (app, p, h) in [(&mut a, &mut pa, &mut ha), (&mut b, &mut pb, &mut hb)] {
                    if let Some(r) = &mut app.replay {
                        r.paused = true;
                    }
                    p.feed(app, None, 1);
                    *h = app.monitor().now();
                }
            }
            Step::Play(speed, frames) => {
                for (app, p, h) in [(&mut a, &mut pa, &mut ha), (&mut b, &mut pb, &mut hb)] {
                    if let Some(r) = &mut app.replay {
                        r.paused = false;
                        r.speed = speed;
                    }
                    for _ in 0..frames {
                        run::play(app, p, h, 0.1);
                    }
                }
                assert_same(&format!("step {n}: played"), &mut a, &pa, &mut b, &pb);
            }
        }
    }
    seeks
}

/// The time of every row the player takes, in order.
fn row_times(setup: &ReplaySetup) -> Vec<DateTime<Utc>> {
    let mut rows = Rows::open(&setup.file, setup.foreign.as_ref()).expect("rows");
    let mut out = Vec::new();
    while let Some(r) = rows.next_until(None) {
        out.push(r.time);
    }
    out
}

/// Seeks at and around every `every`th row (where the keyframes are), to
/// the start and end and beyond, in the gap, in an order that goes back
/// and forth, with steps and played frames between some.
fn steps_for(times: &[DateTime<Utc>], every: usize) -> Vec<Step> {
    let ms = Duration::milliseconds;
    let (first, last) = (times[0], times[times.len() - 1]);
    let mut targets = vec![first, last, first - ms(5000), last + ms(5000)];
    for k in (every..times.len()).step_by(every) {
        for j in [k - 1, k, k + 1] {
            if let Some(&t) = times.get(j) {
                targets.extend([t, t - ms(1), t + ms(500)]);
            }
        }
    }
    // Inside the gap, and the times around the clock going back.
    targets.push(t0() + Duration::seconds(1730));
    targets.push(t0() + Duration::seconds(2557));
    targets.push(t0() + Duration::seconds(2559));
    // A fixed shuffle: forward and backward, near and far.
    let mut order: Vec<usize> = (0..targets.len()).collect();
    let mut x: u64 = 0x5eed;
    for i in (1..order.len()).rev() {
        x = x
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        order.swap(i, (x >> 33) as usize % (i + 1));
    }
    let mut steps = Vec::new();
    for (n, i) in order.into_iter().enumerate() {
        steps.push(Step::Seek(targets[i]));
        match n % 9 {
            2 => steps.push(Step::Row),
            5 => steps.push(Step::Play(Speed::Times(60.0), 3)),
            7 => steps.push(Step::Play(Speed::Max, 1)),
            _ => {}
        }
    }
    // Straight after one another: the start, forward to the end, back.
    steps.extend([
        Step::Seek(first),
        Step::Seek(last),
        Step::Seek(times[every]),
        Step::Seek(times[3 * every + 7]),
        Step::Seek(first),
    ]);
    steps
}

#[test]
fn seeks_through_keyframes_equal_a_replay_from_the_start_v1() {
    let dir = tempdir("v1");
    let file = v1_log(&dir);
    let (setup, gauges) = demo_setup(&file);
    let times = row_times(&setup);
    let every = 97;
    let steps = steps_for(&times, every);
    let n = check(&setup, &gauges, every as u64, &steps);
    assert!(n > 100, "{n} seeks");
    // The log gives what the test is about.
    let (replay, events) = index_every(&setup, every as u64).expect("index");
    // The cut-off line and the garbled chamber cells (every 397th row).
    assert_eq!(replay.bad_rows, 1 + 8, "bad rows");
    assert_eq!(replay.gaps.len(), 1, "{:?}", replay.gaps);
    assert_eq!((replay.times_went_back, replay.times_repeated), (1, 1));
    for id in [
        "ion-high",
        "fast-rise",
        "line-regime",
        "wall-hot",
        "deposition-ready",
    ] {
        assert!(events.iter().any(|e| e.id == id), "no event of {id}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// More keyframes than are kept: every other one goes and the spacing
/// doubles, again and again; seeks still equal a replay from the start.
#[test]
fn seeks_through_thinned_keyframes_equal_a_replay_from_the_start() {
    let dir = tempdir("thinned");
    let file = v1_log(&dir);
    let (setup, gauges) = demo_setup(&file);
    let times = row_times(&setup);
    // 3000 rows: 428 batches of 7, thinned from 16 keyframes five times.
    let (every, most) = (7, 16);
    let (replay, _) = index_keyframes(&setup, every, most).expect("index");
    let kept = replay.keyframes.as_ref().map_or(0, |k| k.len());
    assert!((most / 2..=most).contains(&kept), "{kept} keyframes");
    let steps = steps_for(&times, 97);
    let n = check_most(&setup, &gauges, every, most, &steps);
    assert!(n > 100, "{n} seeks");
    let _ = std::fs::remove_dir_all(&dir);
}

/// A foreign log (semicolons, notes, times with a UTC offset that
/// changes), read through its `[log]` section, with an alarm.
#[test]
fn seeks_through_keyframes_equal_a_replay_from_the_start_foreign() {
    let dir = tempdir("foreign");
    let file = dir.join("export.csv");
    let mut s = String::from("Logger export\nTime;P;Remark\n");
    let start = t0();
    for i in 0..1500i64 {
        let t = start + Duration::seconds(i);
        let (offset, local) = if i < 700 {
            ("+02:00", t + Duration::hours(2))
        } else {
            ("+01:00", t + Duration::hours(1))
        };
        let p = 1e-3 * (1.0 + 50.0 * f64::from(u8::from((400..460).contains(&i))));
        let p = if i % 151 == 0 {
            "n/a".to_string()
        } else {
            format!("{p:e}")
        };
        let remark = if i % 173 == 5 {
            format!("step {i}")
        } else {
            String::new()
        };
        s.push_str(&format!(
            "{}{offset};{p};{remark}\n",
            local.format("%Y-%m-%dT%H:%M:%S")
        ));
    }
    std::fs::write(&file, s).expect("write");
    let text = r#"
[log]
delimiter = ";"
skip_rows = 1
time = { column = "Time", format = "rfc3339" }
notes = ["Remark"]

[[log.column]]
name = "P"
channel = "p"
unit = "mbar"

[alarms]
stale_after = "10 s"

[[alarm]]
id = "p-high"
gauge = "p"
quantity = "pressure"
above = "1e-2 mbar"
on_delay = "5 s"
off_delay = "3 s"
severity = "warning"
"#;
    let cfg = config::parse(text, Path::new("export.toml")).expect("config");
    let setup = ReplaySetup {
        file: file.clone(),
        foreign: cfg.log.clone(),
        monitor: cfg.monitor_setup(Vec::new()),
        gases: cfg.gases.clone(),
    };
    let times = row_times(&setup);
    let every = 61;
    let steps = steps_for(&times, every);
    assert!(check(&setup, &[], every as u64, &steps) > 50);
    let (replay, events) = index_every(&setup, every as u64).expect("index");
    assert!(replay.bad_rows >= 9, "{}", replay.bad_rows);
    assert!(events.iter().any(|e| e.id == "p-high"));
    let _ = std::fs::remove_dir_all(&dir);
}

/// Two replays of the same log, each with its player: the first with
/// keyframes every 97 rows, the second without any.
fn with_and_without_keyframes(
    setup: &ReplaySetup,
    gauges: &[GaugeInfo],
) -> (App, Player, App, Player) {
    let (with, _) = index_every(setup, 97).expect("index");
    let without = Replay {
        keyframes: None,
        ..with.clone()
    };
    (
        app(setup, gauges, &with),
        Player::open(setup).expect("player"),
        app(setup, gauges, &without),
        Player::open(setup).expect("player"),
    )
}

/// After an operator's action in a replay, a seek forward plays on from
/// the playhead (the action's effect carries on) rather than jumping to a
/// keyframe; a seek back starts over, through a keyframe, as before.
#[test]
fn an_operators_action_carries_on_forward() {
    let dir = tempdir("operate");
    let file = v1_log(&dir);
    let (setup, gauges) = demo_setup(&file);
    let (mut a, mut pa, mut b, mut pb) = with_and_without_keyframes(&setup, &gauges);
    let at = |s: i64| t0() + Duration::seconds(s);
    for (app, p) in [(&mut a, &mut pa), (&mut b, &mut pb)] {
        seek(app, p, &setup, at(300)).expect("seek");
        // A threshold lowered: later rows are judged against it.
        app.operate(
            &Operation::SetThreshold("ion-high".into(), 1e-4),
            at(300),
            None,
        )
        .expect("operate");
        seek(app, p, &setup, at(1290)).expect("seek");
    }
    assert_same("forward after an edit", &mut a, &pa, &mut b, &pb);
    assert!(
        a.events
            .iter()
            .any(|e| e.id == "ion-high" && e.time < at(1250)),
        "the lowered threshold trips earlier"
    );
    for (app, p) in [(&mut a, &mut pa), (&mut b, &mut pb)] {
        seek(app, p, &setup, at(800)).expect("seek");
        seek(app, p, &setup, at(2000)).expect("seek");
    }
    assert_same("back, then forward", &mut a, &pa, &mut b, &pb);
    let _ = std::fs::remove_dir_all(&dir);
}

/// A log that changed after its index (rows appended) is no longer
/// resumed at the index's offsets: seeks play it from the start, as a
/// replay without keyframes does.
#[test]
fn a_log_changed_after_its_index_plays_from_the_start() {
    let dir = tempdir("changed");
    let file = v1_log(&dir);
    let (setup, gauges) = demo_setup(&file);
    let (mut a, mut pa, mut b, mut pb) = with_and_without_keyframes(&setup, &gauges);
    let at = |s: i64| t0() + Duration::seconds(s);
    // The first rows rewritten with other values, the length kept.
    let text = std::fs::read_to_string(&file).expect("read");
    std::fs::write(&file, text.replacen(",N2\n", ",Ar\n", 50)).expect("write");
    for s in [2000, 500, 1500] {
        seek(&mut a, &mut pa, &setup, at(s)).expect("seek");
        seek(&mut b, &mut pb, &setup, at(s)).expect("seek");
        assert_same(&format!("seek to {s} s"), &mut a, &pa, &mut b, &pb);
    }
    let _ = std::fs::remove_dir_all(&dir);
}
