//! The pipeline with real sinks: the order sinks see things in, the
//! recording thread writing the log and the event log, operator actions in
//! the audit trail, and source links on the live clock.

use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};

use chrono::{DateTime, TimeZone, Utc};

use super::sinks::Recording;
use super::{Item, Nowhere, Operation, Pipeline, Sink};
use crate::alarm::{Actor, Event, Monitor};
use crate::log::LogMeta;
use crate::record::{RecordSettings, Recorder};
use crate::sample::{ChannelInfo, ChannelUnit, Sample, SourceEvent, SourceState};
use crate::units::PressureUnit;

const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);

const CONFIG: &str = r#"
[[gauge]]
id = "g"
kind = "capacitance"

[alarms]
default_gauge = "g"
stale_after = "10 s"

[[alarm]]
id = "high"
gauge = "g"
quantity = "pressure"
above = "1e-3 mbar"
on_delay = "5 s"
severity = "warning"
"#;

fn t(s: f64) -> DateTime<Utc> {
    Utc.with_ymd_and_hms(2026, 11, 20, 8, 0, 0)
        .single()
        .expect("time")
        + chrono::Duration::milliseconds((s * 1000.0) as i64)
}

fn monitor() -> Monitor {
    let c = crate::config::parse(CONFIG, Path::new("t.toml")).unwrap_or_else(|e| panic!("{e}"));
    Monitor::new(c.monitor_setup(Vec::new()))
}

fn row(s: f64, mbar: f64) -> SourceEvent {
    SourceEvent::Samples(vec![Sample::ok(t(s), "g", mbar, MBAR)])
}

/// What a sink saw, in order, as short words.
#[derive(Clone, Default)]
struct Seen(Arc<Mutex<Vec<String>>>);

impl Sink for Seen {
    fn accept(&mut self, item: Item<'_>, _: &Monitor) {
        let word = match item {
            Item::Row(s) => format!("row {}", s[0].time.format("%S")),
            Item::Event(e) => format!("{} {} {}", e.id, e.to_text(), e.time.format("%S%.3f")),
            Item::Source(SourceEvent::Status { state, .. }) => format!("source {state}"),
            Item::Source(_) => "source".into(),
        };
        self.0.lock().expect("lock").push(word);
    }
}

impl Seen {
    fn words(&self) -> Vec<String> {
        self.0.lock().expect("lock").clone()
    }
}

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("rarefy-pipeline-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    d
}

#[test]
fn sinks_see_deadlines_before_the_row_and_its_events_after() {
    let seen = Seen::default();
    let mut also = Seen::default();
    let mut p = Pipeline::new(monitor()).with_sink(Box::new(seen.clone()));
    p.feed(&row(0.0, 1e-5), None, &mut also);
    p.feed(&row(1.0, 2e-3), None, &mut also);
    // The on-delay runs out at 6 s, between this row and the last; the gauge
    // goes stale 10 s after the row at 1 s, at 11.001 s.
    let events = p.feed(&row(20.0, 1e-5), None, &mut also);
    assert_eq!(
        seen.words(),
        vec![
            "row 00",
            "row 01",
            "high unacknowledged 06.000",
            "g.input unacknowledged 11.001",
            "row 20",
            "high returned-unacknowledged 20.000",
            "g.input returned-unacknowledged 20.000",
        ]
    );
    // The extra sink sees the same, and the caller gets the events.
    assert_eq!(also.words(), seen.words());
    assert_eq!(events.len(), 4);
    assert_eq!(p.counts().rows, 3);
}

#[test]
fn the_recording_writes_rows_and_events_off_the_loop() {
    let dir = tempdir("recording");
    let settings = RecordSettings {
        dir: dir.clone(),
        ..RecordSettings::default()
    };
    let recorder = Recorder::new(settings, LogMeta::default(), &[ChannelInfo::new("g", MBAR)]);
    let (recording, _notes) = Recording::start(recorder);
    let state = recording.state();
    let mut p = Pipeline::new(monitor()).with_sink(Box::new(recording));
    for i in 0..100 {
        let mbar = if (20..40).contains(&i) { 5e-3 } else { 1e-5 };
        p.feed(&row(f64::from(i), mbar), None, &mut Nowhere);
    }
    let who = Actor {
        user: "op-wren".into(),
        wall_time: Some(t(3600.0)),
    };
    let ev = p
        .operate(
            &Operation::Acknowledge("high".into()),
            &who,
            t(99.0),
            &mut Nowhere,
        )
        .expect("acknowledge");
    assert_eq!(ev.len(), 1);
    let threshold = p
        .operate(
            &Operation::SetThreshold("high".into(), 0.2),
            &who,
            t(99.0),
            &mut Nowhere,
        )
        .expect("edit");
    assert_eq!(threshold.len(), 1);
    assert!(p.finish().is_empty());
    let summary = state
        .lock()
        .expect("state")
        .summary
        .clone()
        .expect("summary");
    assert_eq!(summary.rows_written, 100);
    assert_eq!(
        summary.events_written, 4,
        "two alarm transitions, ack, edit"
    );

    let mut csv = 0;
    let mut events = Vec::new();
    for entry in std::fs::read_dir(&dir).expect("dir") {
        let path = entry.expect("entry").path();
        let text = std::fs::read_to_string(&path).expect("read");
        if path.extension().is_some_and(|e| e == "csv") {
            csv += text.lines().filter(|l| l.starts_with("2026-")).count();
        } else {
            events.extend(
                text.lines()
                    .map(|l| Event::from_json(l).unwrap_or_else(|e| panic!("{e}: {l}"))),
            );
        }
    }
    assert_eq!(csv, 100);
    let ops: Vec<_> = events.iter().filter(|e| e.operation.is_some()).collect();
    assert_eq!(ops.len(), 2, "{events:?}");
    for e in ops {
        assert_eq!(e.user.as_deref(), Some("op-wren"));
        assert_eq!(e.wall_time, Some(t(3600.0)));
        assert_eq!(e.time, t(99.0));
    }
    let edit = events
        .iter()
        .find(|e| e.kind() == crate::alarm::EventKind::Setting)
        .expect("the edit");
    assert_eq!(
        (edit.from_text(), edit.to_text()),
        ("1.00e-3 mbar", "2.00e-3 mbar")
    );
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn a_live_source_link_follows_the_data_clock() {
    let seen = Seen::default();
    let mut p = Pipeline::new(monitor()).with_sink(Box::new(seen.clone()));
    p.watch_link("tcp://192.0.2.7:4001");
    p.start(t(0.0), &mut Nowhere);
    let retry = SourceEvent::Status {
        source: "tcp://192.0.2.7:4001".into(),
        state: SourceState::Retrying { in_s: 1.0 },
    };
    p.feed(&retry, Some(t(3.0)), &mut Nowhere);
    let ev = p.advance_to(t(12.0), &mut Nowhere);
    let ids: Vec<&str> = ev.iter().map(|e| e.id.as_str()).collect();
    // The link's 10 s ran out at 10 s; the silent gauge is stale just after.
    assert_eq!(ids, ["source-1.link", "g.input"], "{ev:?}");
    assert_eq!(ev[0].time, t(10.0));
    assert_eq!(
        ev[0].text,
        "tcp://192.0.2.7:4001: not connected: unacknowledged"
    );
    let up = SourceEvent::Status {
        source: "tcp://192.0.2.7:4001".into(),
        state: SourceState::Connected,
    };
    let ev = p.feed(&up, Some(t(13.0)), &mut Nowhere);
    assert_eq!(ev.len(), 1);
    assert_eq!(ev[0].to_text(), "returned-unacknowledged");
    // A replay starting over keeps watching the same links.
    p.reset(monitor());
    assert!(
        p.monitor()
            .alarms()
            .iter()
            .any(|a| a.rule.id == "source-1.link")
    );
    // Without a live clock (a finished file) a status change moves nothing.
    let mut q = Pipeline::new(monitor());
    q.watch_link("file:///x.csv");
    assert!(q.feed(&retry, None, &mut Nowhere).is_empty());
}

#[test]
fn a_logs_gas_column_changes_the_gas_and_a_bad_one_is_said() {
    let seen = Seen::default();
    let mut p = Pipeline::new(monitor()).with_sink(Box::new(seen.clone()));
    p.feed(&row(0.0, 1e-5), None, &mut Nowhere);
    let to_ar = SourceEvent::Gas {
        time: t(1.0),
        text: Some("Ar".into()),
    };
    let ev = p.feed(&to_ar, None, &mut Nowhere);
    assert_eq!(ev.len(), 1, "{ev:?}");
    assert_eq!((ev[0].id.as_str(), ev[0].to_text()), ("gas", "Ar"));
    assert_eq!(ev[0].value_text.as_deref(), Some("log"));
    let bad = SourceEvent::Gas {
        time: t(2.0),
        text: Some("unobtainium".into()),
    };
    assert!(p.feed(&bad, None, &mut Nowhere).is_empty());
    assert!(
        seen.words().iter().any(|w| w == "source"),
        "the bad gas is reported: {:?}",
        seen.words()
    );
    // An empty cell: the configuration decides again.
    let back = SourceEvent::Gas {
        time: t(3.0),
        text: None,
    };
    let ev = p.feed(&back, None, &mut Nowhere);
    assert_eq!(ev[0].to_text(), "N2");
}
