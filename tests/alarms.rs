//! Alarms, gates and actions through the real binary: `record` on a sample
//! log, `--exit-on-trip`, one-off `--alarm`s, `gate wait`, and commands run
//! on events (received, failing, hanging).

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::time::{Duration, Instant};

use serde_json::Value;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("rarefy-alarms-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("tmp");
    d
}

fn rarefy(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .args(args)
        .current_dir(root())
        .output()
        .expect("run rarefy")
}

fn demo_log() -> String {
    format!("file://{}", root().join("sample-logs/demo.csv").display())
}

/// The alarm, gate and gas events among stdout's JSON lines.
fn events(o: &Output) -> Vec<Value> {
    String::from_utf8_lossy(&o.stdout)
        .lines()
        .filter_map(|l| serde_json::from_str::<Value>(l).ok())
        .filter(|v| v["event"] == "alarm" || v["event"] == "gate" || v["event"] == "gas")
        .collect()
}

fn find<'a>(events: &'a [Value], id: &str, to: &str) -> Vec<&'a Value> {
    events
        .iter()
        .filter(|e| e["id"] == id && e["to"] == to)
        .collect()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

#[test]
fn record_on_a_sample_log_gives_the_expected_events() {
    let out = tempdir("record");
    let o = rarefy(&[
        "record",
        "--config",
        "config/demo.toml",
        "--source",
        &demo_log(),
        "--out",
        out.to_str().expect("utf-8"),
    ]);
    // A trip alarm was active during the run: exit 3.
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    let ev = events(&o);
    // The gate becomes ready after two minutes below 5e-6 mbar …
    let ready = find(&ev, "deposition-ready", "ready");
    assert_eq!(ready[0]["time"], "2026-11-09T09:07:42.000Z");
    assert_eq!(ready[0]["from"], "not-ready");
    // … breaks when the chamber gauge drops out, with the reason …
    let broken = find(&ev, "deposition-ready", "not-ready");
    assert_eq!(broken[0]["time"], "2026-11-09T09:15:00.000Z");
    assert!(
        broken[0]["text"]
            .as_str()
            .is_some_and(|t| t.contains("sensor-error"))
    );
    // … and the dropout is an alarm of its own, never a silent pass.
    let input = find(&ev, "chamber.input", "unacknowledged");
    assert_eq!(input[0]["time"], "2026-11-09T09:15:00.000Z");
    assert_eq!(input[0]["value_text"], "sensor-error");
    // The air burst trips the ion gauge alarm after its 10 s on-delay.
    let trip = find(&ev, "ion-high", "unacknowledged");
    assert_eq!(trip.len(), 1);
    assert_eq!(trip[0]["time"], "2026-11-09T09:31:11.000Z");
    assert_eq!(trip[0]["severity"], "trip");
    assert_eq!(trip[0]["threshold"], "pressure above 5.00e-5 mbar");
    assert!(
        trip[0]["value"].as_f64().is_some_and(|v| v > 5e-3),
        "value in Pa: {}",
        trip[0]
    );
    // While the ion gauge is switched off the rule is suppressed by design.
    assert!(!find(&ev, "ion-high", "suppressed-by-design").is_empty());
    // The argon step (20 to 28 min in the demo scenario) puts Ar in force
    // by the config's step `argon` once the capacitance gauge holds steady
    // (its 10 s rate window after the rise), and N2 returns with the step.
    let ar = find(&ev, "gas", "Ar");
    assert_eq!(ar.len(), 1, "{ar:?}");
    assert_eq!(ar[0]["time"], "2026-11-09T09:20:35.000Z");
    assert_eq!(ar[0]["value_text"], "step argon");
    let n2 = find(&ev, "gas", "N2");
    assert_eq!(n2.len(), 1, "{n2:?}");
    assert_eq!(n2[0]["time"], "2026-11-09T09:28:01.000Z");
    // The same events are in the event log beside the recording.
    let log = std::fs::read_dir(&out)
        .expect("out")
        .map(|e| e.expect("entry").path())
        .find(|p| {
            p.file_name()
                .is_some_and(|n| n.to_string_lossy().starts_with("events-"))
        })
        .expect("events file");
    let logged: Vec<Value> = std::fs::read_to_string(log)
        .expect("read")
        .lines()
        .map(|l| serde_json::from_str(l).expect("JSON line"))
        .collect();
    assert_eq!(logged.len(), ev.len());
    assert_eq!(logged[0]["id"], ev[0]["id"]);
}

#[test]
fn replaying_the_same_log_gives_the_same_events() {
    let run = || {
        let out = tempdir("again");
        let o = rarefy(&[
            "record",
            "--config",
            "config/demo.toml",
            "--source",
            &demo_log(),
            "--out",
            out.to_str().expect("utf-8"),
        ]);
        events(&o)
            .into_iter()
            .map(|mut e| {
                e.as_object_mut().map(|m| m.remove("wall_time"));
                e
            })
            .collect::<Vec<_>>()
    };
    assert_eq!(run(), run());
}

#[test]
fn exit_on_trip_stops_at_the_trip() {
    let out = tempdir("trip");
    let o = rarefy(&[
        "record",
        "--config",
        "config/demo.toml",
        "--source",
        &demo_log(),
        "--out",
        out.to_str().expect("utf-8"),
        "--exit-on-trip",
    ]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    let ev = events(&o);
    assert_eq!(
        ev.last().map(|e| e["id"].clone()),
        Some(Value::from("ion-high"))
    );
    // Everything up to the trip was recorded, nothing after it (the log has
    // 2400 rows; the trip is at 31:11).
    let text = std::fs::read_dir(&out)
        .expect("out")
        .map(|e| e.expect("entry").path())
        .filter(|p| p.extension().is_some_and(|e| e == "csv"))
        .map(|p| std::fs::read_to_string(p).expect("read"))
        .collect::<String>();
    let rows = text.lines().filter(|l| l.starts_with("2026-")).count();
    assert!((1800..2400).contains(&rows), "{rows}");
    assert!(text.contains("2026-11-09T09:31:11.000Z"));
}

#[test]
fn one_off_alarms_on_the_command_line() {
    let out = tempdir("oneoff");
    let o = rarefy(&[
        "record",
        "--source",
        &demo_log(),
        "--out",
        out.to_str().expect("utf-8"),
        "--alarm",
        "cdg pressure below 1 mbar for 5 s as notice named rough-done",
        "--alarm",
        "chamber vacuum_range crosses medium/high",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let ev = events(&o);
    let done = find(&ev, "rough-done", "unacknowledged");
    assert_eq!(done.len(), 1, "{ev:?}");
    assert_eq!(done[0]["severity"], "notice");
    assert!(!find(&ev, "cli-2", "unacknowledged").is_empty(), "{ev:?}");
    let o = rarefy(&[
        "record",
        "--source",
        "stdin:",
        "--out",
        "/tmp/x",
        "--alarm",
        "pressure over 1 mbar",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("--alarm \"pressure over 1 mbar\""),
        "{}",
        stderr(&o)
    );
}

#[test]
fn gate_wait_returns_0_when_ready_3_on_timeout_1_when_the_source_fails() {
    let o = rarefy(&[
        "gate",
        "wait",
        "deposition-ready",
        "--config",
        "config/demo.toml",
        "--source",
        "sim:demo?rate=max",
        "--timeout",
        "30 min",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(
        err.contains(
            "gate deposition-ready: not ready: chamber pressure below 5e-6 mbar: chamber is"
        ),
        "{err}"
    );
    assert!(err.contains("s of 120 s to go"), "{err}");
    assert!(err.contains("gate deposition-ready: ready"), "{err}");
    // A chamber with a real leak never gets below 5e-6 mbar.
    let o = rarefy(&[
        "gate",
        "wait",
        "deposition-ready",
        "--config",
        "config/demo.toml",
        "--source",
        "sim:leak-check?rate=max",
        "--timeout",
        "20 min",
    ]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    // A source that cannot deliver.
    let o = rarefy(&[
        "gate",
        "wait",
        "deposition-ready",
        "--config",
        "config/demo.toml",
        "--source",
        "file:///nonexistent/rarefy.csv",
    ]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let o = rarefy(&[
        "gate",
        "wait",
        "deposition-redy",
        "--config",
        "config/demo.toml",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("did you mean `deposition-ready`?"));
}

fn action_config(dir: &Path, command: &str, timeout: &str) -> PathBuf {
    let path = dir.join("actions.toml");
    std::fs::write(
        &path,
        format!(
            "[[alarm]]\nid = \"high\"\ngauge = \"p\"\nquantity = \"pressure\"\nabove = \"1e-3 mbar\"\n\
             command = {command}\ncommand_timeout = \"{timeout}\"\nrepeat_after = \"0 s\"\n"
        ),
    )
    .expect("config");
    path
}

fn record_stdin(config: &Path, out: &Path, input: &str) -> (Output, Duration) {
    let start = Instant::now();
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_rarefy"));
    cmd.args(["record", "--source", "stdin:?channel=p", "--config"])
        .arg(config)
        .arg("--out")
        .arg(out);
    let o = common::run_piped(cmd, input.as_bytes());
    (o, start.elapsed())
}

fn action_outcomes(o: &Output) -> Vec<Value> {
    String::from_utf8_lossy(&o.stdout)
        .lines()
        .filter_map(|l| serde_json::from_str::<Value>(l).ok())
        .filter(|v| v["event"] == "action")
        .collect()
}

#[test]
fn the_action_command_receives_the_event() {
    let dir = tempdir("action");
    let got = dir.join("received.json");
    let cfg = action_config(&dir, &format!("[\"tee\", \"{}\"]", got.display()), "10 s");
    // The action runs while the recorder works; give it a moment to finish
    // by keeping stdin open briefly.
    let (o, _) = record_stdin(&cfg, &dir.join("out"), "1e-4\n5e-3\n");
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let deadline = Instant::now() + Duration::from_secs(10);
    while !got.exists() && Instant::now() < deadline {
        std::thread::sleep(Duration::from_millis(50));
    }
    let text = std::fs::read_to_string(&got).expect("the command wrote what it got");
    let event: Value = serde_json::from_str(text.trim()).expect("event JSON on stdin");
    assert_eq!(event["id"], "high");
    assert_eq!(event["to"], "unacknowledged");
}

#[test]
fn failing_and_hanging_actions_are_reported_and_do_not_stall_ingest() {
    let dir = tempdir("badaction");
    let cfg = action_config(&dir, "[\"false\"]", "10 s");
    let input: String = (0..2000)
        .map(|i| {
            if i == 10 {
                "5e-3\n".to_string()
            } else {
                "1e-4\n".to_string()
            }
        })
        .collect();
    let (o, _) = record_stdin(&cfg, &dir.join("out1"), &input);
    let outcomes = action_outcomes(&o);
    assert!(
        outcomes.iter().any(|v| v["status"] == "failed"),
        "{outcomes:?} {}",
        stderr(&o)
    );

    let cfg = action_config(&dir, "[\"sleep\", \"30\"]", "1 s");
    let (o, took) = record_stdin(&cfg, &dir.join("out2"), &input);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // All rows are recorded though the command hangs.
    let summary: Value = String::from_utf8_lossy(&o.stdout)
        .lines()
        .filter_map(|l| serde_json::from_str::<Value>(l).ok())
        .find(|v| v["event"] == "summary")
        .expect("summary");
    assert_eq!(summary["rows"], 2000);
    assert!(
        took < Duration::from_secs(25),
        "ingest waited for the hanging command: {took:?}"
    );
    let missing = dir.join("nope");
    let cfg = action_config(&dir, &format!("[\"{}\"]", missing.display()), "1 s");
    let (o, _) = record_stdin(&cfg, &dir.join("out3"), &input);
    let outcomes = action_outcomes(&o);
    assert!(
        outcomes.iter().any(|v| v["status"] == "failed"
            && v["message"]
                .as_str()
                .is_some_and(|m| m.contains("cannot start"))),
        "{outcomes:?}"
    );
}

#[test]
fn gate_wait_times_out_with_3_while_a_source_retries_and_no_data_came() {
    // Nothing listens on a port just freed: the source keeps retrying.
    let port = std::net::TcpListener::bind("127.0.0.1:0")
        .and_then(|l| l.local_addr())
        .expect("port")
        .port();
    let o = rarefy(&[
        "gate",
        "wait",
        "deposition-ready",
        "--config",
        "config/demo.toml",
        "--source",
        &format!("tcp://127.0.0.1:{port}"),
        "--timeout",
        "2 s",
    ]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    assert!(stderr(&o).contains("giving up"), "{}", stderr(&o));
}

#[test]
fn gate_wait_json_lines_and_progress_only_on_change_or_every_few_seconds() {
    let started = Instant::now();
    let o = rarefy(&[
        "gate",
        "wait",
        "deposition-ready",
        "--config",
        "config/demo.toml",
        "--source",
        "sim:demo?rate=max",
        "--timeout",
        "30 min",
        "--json",
    ]);
    let wall = started.elapsed().as_secs_f64();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let lines: Vec<Value> = String::from_utf8_lossy(&o.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).expect("a JSON line"))
        .collect();
    assert!(lines.len() >= 2, "{lines:?}");
    for l in &lines {
        assert_eq!(l["gate"], "deposition-ready");
        assert!(l["state"] == "ready" || l["state"] == "not-ready", "{l}");
        assert!(
            l.get("reason").is_some() && l.get("time_left_s").is_some(),
            "{l}"
        );
        assert!(
            l["data_time"].is_string() || l["data_time"].is_null(),
            "{l}"
        );
    }
    let last = lines.last().expect("lines");
    assert_eq!(
        (&last["state"], &last["outcome"]),
        (&"ready".into(), &"ready".into())
    );
    assert_eq!(last["time_left_s"], 0.0);
    assert!(
        lines.iter().any(|l| l["time_left_s"]
            .as_f64()
            .is_some_and(|t| t > 0.0 && t <= 120.0)),
        "the hold's time left is given: {lines:?}"
    );
    // Two minutes of holding pass in data time: the time left and the
    // failing value are not repeated for every reading, only when the state
    // or the failing condition changes, or after 5 s of wall time.
    let kind = |l: &Value| {
        let reason = l["reason"].as_str().unwrap_or("");
        let cut = reason
            .find(':')
            .or(reason.find(';'))
            .unwrap_or(reason.len());
        (l["state"].clone(), reason[..cut].to_string())
    };
    let repeats = lines
        .windows(2)
        .filter(|w| w[1].get("outcome").is_none() && kind(&w[0]) == kind(&w[1]))
        .count();
    assert!(
        repeats as f64 <= 1.0 + wall / 5.0,
        "{repeats} repeated lines in {wall:.1} s: {lines:?}"
    );
}
