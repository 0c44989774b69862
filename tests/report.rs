//! `rarefy report` on real logs: the binary's outputs and exit codes, and
//! the report sink against the replay index.

use std::path::{Path, PathBuf};
use std::process::Command;

use rarefy::config;
use rarefy::pipeline::replay::index;
use rarefy::pipeline::report::{ReportOptions, ReportSink, walk};
use serde_json::Value;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn report(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .arg("report")
        .args(args)
        .current_dir(root())
        .output()
        .expect("run");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn json(args: &[&str]) -> Value {
    let mut a = args.to_vec();
    a.extend(["--format", "json"]);
    let (code, out, err) = report(&a);
    assert!(code == 0 || code == 3, "exit {code}: {err}");
    serde_json::from_str(&out).expect("json")
}

fn temp(name: &str, text: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("rarefy-report-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("dir");
    let p = dir.join(name);
    std::fs::write(&p, text).expect("write");
    p
}

fn sums_hold(v: &Value) {
    for g in v["gauges"].as_array().expect("gauges") {
        let ranges: f64 = g["time_in_range_s"]
            .as_object()
            .expect("ranges")
            .values()
            .map(|x| x.as_f64().expect("s"))
            .sum();
        let total = ranges
            + g["time_without_pressure_s"].as_f64().expect("s")
            + g["gap_s"].as_f64().expect("s");
        let d = g["duration_s"].as_f64().expect("d");
        assert!((total - d).abs() < 1e-6, "{}: {total} vs {d}", g["id"]);
    }
}

#[test]
fn time_in_range_sums_to_the_duration_on_every_sample_log() {
    for f in std::fs::read_dir(root().join("sample-logs")).expect("dir") {
        let p = f.expect("entry").path();
        if p.extension().is_some_and(|e| e == "csv") {
            let v = json(&[p.to_str().expect("path"), "--config", "config/demo.toml"]);
            sums_hold(&v);
        }
    }
    let v = json(&[
        "sample-logs/foreign/marrowgate-ml3.csv",
        "--config",
        "sample-logs/foreign/marrowgate-ml3.toml",
    ]);
    assert!(!v["gauges"].as_array().expect("gauges").is_empty());
    sums_hold(&v);
}

#[test]
fn json_has_the_issue_shape() {
    let v = json(&[
        "sample-logs/demo.csv",
        "--config",
        "config/demo.toml",
        "--target",
        "1e-5 mbar",
    ]);
    for k in ["files", "gauges", "alarms"] {
        assert!(v.get(k).is_some(), "{k}");
    }
    let g = &v["gauges"][1];
    for k in [
        "id",
        "samples",
        "start",
        "end",
        "min_pa",
        "max_pa",
        "median_pa",
        "time_in_range_s",
        "time_in_regime_s",
        "thresholds",
        "pumpdowns",
        "rate_of_rise",
        "exposure_langmuir",
    ] {
        assert!(g.get(k).is_some(), "{k}");
    }
    for r in ["low", "medium", "high", "ultra-high", "extreme-high"] {
        assert!(g["time_in_range_s"].get(r).is_some(), "{r}");
    }
    let t = g["thresholds"].as_array().expect("thresholds");
    assert!(t.iter().any(|t| t["source"] == "--target"));
    for a in v["alarms"].as_array().expect("alarms") {
        for k in ["time", "id", "from", "to", "value"] {
            assert!(a.get(k).is_some(), "{k}");
        }
    }
}

#[test]
fn events_equal_the_replay_index() {
    let cfg = config::load(&root().join("config/demo.toml")).expect("config");
    let setup = cfg.monitor_setup(Vec::new());
    for name in ["demo.csv", "leak-check.csv"] {
        let log = root().join("sample-logs").join(name);
        let idx = index(&log, None, &setup, &cfg.gases).expect("index");
        let mut sink = ReportSink::new(ReportOptions::default(), None);
        let out = walk(
            std::slice::from_ref(&log),
            None,
            &setup,
            &cfg.gases,
            &mut sink,
        );
        assert!(out.rows > 0);
        assert_eq!(sink.events(), idx.events.as_slice(), "{name}");
        assert!(!sink.events().is_empty());
    }
}

fn split_log(src: &Path) -> (String, String) {
    let text = std::fs::read_to_string(src).expect("log");
    let lines: Vec<&str> = text.lines().collect();
    let header_end = lines
        .iter()
        .position(|l| l.starts_with("time,"))
        .expect("header")
        + 1;
    let mid = header_end + (lines.len() - header_end) / 2;
    let head = lines[..header_end].join("\n");
    let a = format!("{}\n", lines[..mid].join("\n"));
    let b = format!("{head}\n{}\n", lines[mid..].join("\n"));
    (a, b)
}

#[test]
fn a_rotated_recording_reports_as_one_file() {
    let log = root().join("sample-logs/demo.csv");
    let (a, b) = split_log(&log);
    // Named so that the later half sorts first by name.
    let pa = temp("z-part1.csv", &a);
    let pb = temp("a-part2.csv", &b);
    let mut one = json(&[log.to_str().expect("p"), "--config", "config/demo.toml"]);
    let mut two = json(&[
        pb.to_str().expect("p"),
        pa.to_str().expect("p"),
        "--config",
        "config/demo.toml",
    ]);
    assert_eq!(two["files"][0], pa.to_str().expect("p"));
    one["files"] = Value::Null;
    two["files"] = Value::Null;
    assert_eq!(one, two);
}

const THREE: &str = "# rarefy log v1
time,chamber [Pa]
2026-01-01T00:00:00.000Z,5e4
2026-01-01T00:00:10.000Z,5e1
2026-01-01T00:00:20.000Z,5e-2
";

#[test]
fn three_rows_by_hand() {
    // 5e4 Pa is low vacuum for 10 s, 50 Pa medium for 10 s, 0.05 Pa high at
    // the end (ISO 3529-1:2019); 1e-1 Pa is first undercut at the third row.
    let p = temp("three.csv", THREE);
    let v = json(&[p.to_str().expect("p"), "--target", "0.1 Pa"]);
    let g = &v["gauges"][0];
    assert_eq!(g["samples"], 3);
    assert_eq!(g["duration_s"], 20.0);
    assert_eq!(g["time_in_range_s"]["low"], 10.0);
    assert_eq!(g["time_in_range_s"]["medium"], 10.0);
    assert_eq!(g["time_in_range_s"]["high"], 0.0);
    assert_eq!(
        g["thresholds"][0]["first_below"],
        "2026-01-01T00:00:20.000Z"
    );
    assert_eq!(g["min_pa"], 0.05);
    assert_eq!(g["max_pa"], 5e4);
    // A fall from 5e4 Pa is a pump-down; too few points to fit, but the
    // target was reached at the third row.
    let pd = g["pumpdowns"].as_array().expect("pump-downs");
    assert_eq!(pd.len(), 1, "{pd:?}");
    assert_eq!(pd[0]["target_reached"], "2026-01-01T00:00:20.000Z");
    assert_eq!(pd[0]["tau_s"], Value::Null);
}

#[test]
fn an_empty_file_is_exit_2_and_located() {
    let p = temp("empty.csv", "");
    let (code, _, err) = report(&[p.to_str().expect("p")]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains(&format!("{}:", p.display())), "{err}");
}

#[test]
fn a_cut_off_last_line_is_counted() {
    let p = temp("cut.csv", &format!("{THREE}2026-01-01T00:00:3"));
    let (code, out, err) = report(&[p.to_str().expect("p"), "--format", "json"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains(&format!("{}:6", p.display())), "{err}");
    let v: Value = serde_json::from_str(&out).expect("json");
    let total: u64 = v["unusable_rows"]
        .as_object()
        .expect("causes")
        .values()
        .map(|n| n.as_u64().expect("n"))
        .sum();
    assert_eq!(total, 1);
    assert_eq!(
        v["unusable_rows"]["fewer cells than the header (a cut-off line?)"],
        1
    );
    assert_eq!(v["gauges"][0]["samples"], 3);
}

#[test]
fn text_and_csv_outputs() {
    let (code, out, _) = report(&["sample-logs/demo.csv", "--config", "config/demo.toml"]);
    assert!(code == 0 || code == 3, "{code}");
    assert!(out.contains("Gauge chamber") && out.contains("P²"), "{out}");
    let p = temp("three-in.csv", THREE);
    let csv = temp("three-out.csv", "");
    let (code, _, err) = report(&[
        p.to_str().expect("p"),
        "--format",
        "csv",
        "--out",
        csv.to_str().expect("p"),
    ]);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(&csv).expect("csv");
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 4, "{text}");
    assert!(
        lines[0]
            .starts_with("time,gauge,status,pressure_pa,number_density_per_m3,mean_free_path_m")
    );
    assert!(lines[1].ends_with(",low"), "{}", lines[1]);
}

fn gauge<'a>(v: &'a Value, id: &str) -> &'a Value {
    v["gauges"]
        .as_array()
        .expect("gauges")
        .iter()
        .find(|g| g["id"] == id)
        .unwrap_or_else(|| panic!("no gauge {id}"))
}

#[test]
fn the_leak_check_finds_the_simulated_leak_and_the_roughing_time_constant() {
    // Truth: the leak-check scenario's real leak is 2e-3 mbar·L/s =
    // 2e-4 Pa·m³/s (crates/core/src/sim/scenario.rs); the log's header gives
    // the volume, 85 L.
    let v = json(&["sample-logs/leak-check.csv", "--config", "config/demo.toml"]);
    let cdg = gauge(&v, "cdg");
    let rises = cdg["rate_of_rise"].as_array().expect("rises");
    assert_eq!(rises.len(), 1, "{rises:?}");
    assert_eq!(rises[0]["verdict"], "leak");
    let q = rises[0]["leak_rate_pa_m3_per_s"].as_f64().expect("Q");
    assert!((q / 2e-4 - 1.0).abs() < 0.05, "Q {q} vs 2e-4 Pa·m³/s");
    let mbar_l = rises[0]["leak_rate_mbar_l_per_s"].as_f64().expect("Q");
    // 1 mbar·L/s = 0.1 Pa·m³/s (definitions of the units).
    assert!((mbar_l - q * 10.0).abs() < 1e-12);
    // The roughing pump behind its line: τ = V/S_eff, about 12.25 s for
    // the model's pump (derived in crates/core/src/analysis/tests.rs).
    let pd = gauge(&v, "chamber")["pumpdowns"]
        .as_array()
        .expect("pump-downs");
    assert_eq!(pd.len(), 1, "{pd:?}");
    let tau = pd[0]["tau_s"].as_f64().expect("tau");
    assert!((tau / 12.25 - 1.0).abs() < 0.05, "τ {tau} s");
    let s = pd[0]["pumping_speed_m3_per_s"].as_f64().expect("S");
    assert!((s - 0.085 / tau).abs() < 1e-9, "S = V/τ");
}

#[test]
fn an_outgassing_rise_is_called_outgassing_and_no_volume_asks_for_one() {
    let v = json(&["sample-logs/outgassing.csv", "--config", "config/demo.toml"]);
    let rises = gauge(&v, "cdg")["rate_of_rise"].as_array().expect("rises");
    assert!(
        rises.iter().any(|r| r["verdict"] == "outgassing"),
        "{rises:?}"
    );
    // Without a volume anywhere: dp/dt, and the text asks for the volume.
    let text = std::fs::read_to_string(root().join("sample-logs/leak-check.csv"))
        .expect("log")
        .lines()
        .filter(|l| !l.starts_with("# volume"))
        .collect::<Vec<_>>()
        .join("\n");
    let log = temp("no-volume.csv", &text);
    let (code, out, err) = report(&[log.to_str().expect("utf-8")]);
    assert!(code == 0 || code == 3, "{err}");
    assert!(out.contains("give --volume for the leak rate"), "{out}");
    let (_, out, _) = report(&[log.to_str().expect("utf-8"), "--volume", "85 L"]);
    assert!(out.contains("mbar·L/s; verdict leak"), "{out}");
}

#[test]
fn a_log_that_starts_mid_fall_still_has_its_pump_down() {
    // pumpdown.csv starts at 445 mbar, already falling. Same roughing plant
    // as the leak-check: τ = V/S_eff ≈ 12.25 s (derived in
    // crates/core/src/analysis/tests.rs).
    let v = json(&[
        "sample-logs/pumpdown.csv",
        "--config",
        "config/demo.toml",
        "--target",
        "1e-5 mbar",
    ]);
    let pd = gauge(&v, "chamber")["pumpdowns"]
        .as_array()
        .expect("pump-downs");
    assert_eq!(pd.len(), 1, "{pd:?}");
    let tau = pd[0]["tau_s"].as_f64().expect("tau");
    assert!((tau / 12.25 - 1.0).abs() < 0.05, "τ {tau} s");
    assert!(pd[0]["target_reached"].is_string(), "{pd:?}");
}

#[test]
fn given_rate_of_rise_ranges_and_the_gauge_behind_each_number() {
    // The leak-check's isolation starts at 09:00 (2 h after 07:00); its
    // real leak is 2e-4 Pa·m³/s in 85 L (crates/core/src/sim/scenario.rs).
    let v = json(&[
        "sample-logs/leak-check.csv",
        "--config",
        "config/demo.toml",
        "--rate-of-rise",
        "09:02:00..09:09:00",
    ]);
    let given = &gauge(&v, "cdg")["rate_of_rise"][0];
    assert_eq!(given["origin"], "given");
    assert_eq!(given["gauge"], "cdg");
    assert_eq!(given["start"], "2026-11-03T09:02:00.000Z");
    assert_eq!(given["end"], "2026-11-03T09:09:00.000Z");
    assert_eq!(given["verdict"], "leak");
    let q = given["leak_rate_pa_m3_per_s"].as_f64().expect("Q");
    assert!((q / 2e-4 - 1.0).abs() < 0.05, "Q {q}");
    // The combined gauge: roughing on its thermal element, the tail on its
    // ionization element, and a found rise split where the elements hand
    // over (1e-3 mbar).
    let chamber = gauge(&v, "chamber");
    let pd = &chamber["pumpdowns"][0];
    assert_eq!(pd["tau_gauge"], "chamber (thermal)");
    assert_eq!(pd["tail_gauge"], "chamber (ionization)");
    let found: Vec<&Value> = chamber["rate_of_rise"]
        .as_array()
        .expect("rises")
        .iter()
        .filter(|r| r["origin"] == "found")
        .collect();
    assert!(found.len() >= 2, "{found:?}");
    for pair in found.windows(2) {
        assert_ne!(pair[0]["gauge"], pair[1]["gauge"], "{found:?}");
    }
    // The chamber pressure's analysis: the capacitance gauge comes first
    // whenever it is in range, so the isolation is fitted on it.
    let cp = &v["chamber"];
    assert_eq!(cp["rate_of_rise"][0]["origin"], "given");
    assert_eq!(cp["rate_of_rise"][0]["gauge"], "cdg");
    let last = cp["rate_of_rise"]
        .as_array()
        .and_then(|r| r.last())
        .expect("a found rise");
    assert_eq!(last["gauge"], "cdg");
    assert_eq!(last["verdict"], "leak");
    assert!(
        cp["gauges_used"]
            .as_array()
            .expect("list")
            .iter()
            .any(|g| g == "cdg")
    );
}

#[test]
fn a_given_range_across_an_element_change_is_fitted_on_one_element() {
    // The combined gauge hands over from ionization to thermal at 1e-3 mbar
    // shortly after 09:00:40 in this log.
    let v = json(&[
        "sample-logs/leak-check.csv",
        "--config",
        "config/demo.toml",
        "--rate-of-rise",
        "09:00:00..09:09:00",
    ]);
    let r = &gauge(&v, "chamber")["rate_of_rise"][0];
    assert_eq!(r["origin"], "given");
    assert_eq!(r["gauge"], "chamber (thermal)", "{r}");
    assert!(r["points_left_out"].as_u64().expect("n") > 0, "{r}");
    assert!(
        r["notes"].as_array().expect("notes").iter().any(|n| n
            .as_str()
            .is_some_and(|n| n.contains("from chamber (ionization)"))),
        "{r}"
    );
}

#[test]
fn a_bad_rate_of_rise_range_is_a_usage_error() {
    for (arg, says) in [
        ("09:02:00", "two times joined by"),
        ("09:09:00..09:02:00", "end must be later"),
        ("09:02:00..soon", "--rate-of-rise"),
    ] {
        let (code, _, err) = report(&["sample-logs/leak-check.csv", "--rate-of-rise", arg]);
        assert_eq!(code, 2, "{arg}: {err}");
        assert!(err.contains(says), "{arg}: {err}");
    }
}

#[test]
fn operator_actions_from_the_event_log_stand_beside_the_events() {
    // A live run's event log beside its recording: an acknowledgement and a
    // threshold change inside the run, one action after it (another run),
    // and a line that is not an event. Lines as `rarefy record` writes
    // them (docs/event.schema.json).
    let log = std::fs::read_to_string(root().join("sample-logs/leak-check.csv")).expect("log");
    let dir = std::env::temp_dir().join(format!("rarefy-report-ops-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("dir");
    let path = dir.join("leak-check.csv");
    std::fs::write(&path, log).expect("write");
    let events = [
        r#"{"v":1,"time":"2026-11-03T09:04:00.000Z","wall_time":"2026-11-03T09:04:01.250Z","kind":"alarm","from":"unacknowledged","to":"acknowledged","id":"cdg-rise","label":"Leak-check rise","operation":"acknowledge","user":"tamsin","text":"acknowledged by tamsin"}"#,
        "not an event",
        r#"{"v":1,"time":"2026-11-03T09:06:30.000Z","wall_time":"2026-11-03T09:06:31.000Z","kind":"setting","from":"5.00e-3 mbar","to":"8.00e-3 mbar","id":"cdg-rise","label":"Leak-check rise","operation":"set-threshold","user":"tamsin","text":"threshold changed"}"#,
        r#"{"v":1,"time":"2026-11-04T10:00:00.000Z","kind":"setting","from":"1 h","to":"2 h","id":"g","label":"g","operation":"set-hold","user":"ines","text":"later run"}"#,
    ];
    for e in [events[0], events[2], events[3]] {
        rarefy::alarm::Event::from_json(e).expect("a real event line");
    }
    let ev_path = dir.join("events-20261103T090400Z.jsonl");
    std::fs::write(&ev_path, events.join("\n") + "\n").expect("write");
    let p = path.to_str().expect("utf-8");
    let (code, out, err) = report(&[p, "--config", "config/demo.toml", "--format", "json"]);
    assert!(code == 0 || code == 3, "{err}");
    assert!(
        err.contains("events-20261103T090400Z.jsonl:2: expected an event"),
        "{err}"
    );
    let v: Value = serde_json::from_str(&out).expect("json");
    let ops = v["operator_actions"].as_array().expect("actions");
    assert_eq!(ops.len(), 2, "{ops:?}");
    assert_eq!(ops[0]["operation"], "acknowledge");
    assert_eq!(ops[0]["user"], "tamsin");
    assert_eq!(ops[1]["operation"], "set-threshold");
    assert_eq!(ops[1]["to"], "8.00e-3 mbar");
    // Text: the actions in the event list, in time order.
    let (_, out, _) = report(&[p, "--config", "config/demo.toml"]);
    let ack = out
        .find("operator tamsin: acknowledge cdg-rise")
        .expect(&out);
    let set = out
        .find("operator tamsin: set-threshold cdg-rise")
        .expect(&out);
    assert!(ack < set);
    assert!(!out.contains("operator ines"), "{out}");
    // --events names the log explicitly; one that cannot be opened is a
    // usage error, before any work.
    let (code, _, err) = report(&[p, "--events", "no-such-events.jsonl"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("--events no-such-events.jsonl: cannot open the event log"),
        "{err}"
    );
}

// ---- The rate-of-rise fit against a reference library ----

fn close(got: f64, want: f64, tol: f64, what: &str) {
    let err = ((got - want) / want).abs();
    assert!(err <= tol, "{what}: {got:e} vs {want:e} (relative {err:e})");
}

#[test]
fn the_rate_of_rise_fit_equals_scipy_linregress_on_the_reference_fixture() {
    // tests/fixtures/ror_reference.csv is a seeded noisy, slightly
    // flattening rise from 1e-2 Pa; ror_reference.json holds the least-
    // squares line scipy.stats.linregress (scipy 1.17.1) fits to its rows,
    // both written by tests/reference/check_rate_of_rise.py, which .ci/run
    // also runs against the binary.
    let want: Value = serde_json::from_str(
        &std::fs::read_to_string(root().join("tests/fixtures/ror_reference.json"))
            .expect("fixture numbers"),
    )
    .expect("json");
    let num = |k: &str| want[k].as_f64().unwrap_or_else(|| panic!("{k}"));
    let log = root().join("tests/fixtures/ror_reference.csv");
    let volume = want["volume"].as_str().expect("volume");
    let v = json(&[log.to_str().expect("path"), "--volume", volume]);
    let rises = v["gauges"][0]["rate_of_rise"].as_array().expect("rises");
    assert_eq!(rises.len(), 1, "{rises:?}");
    let r = &rises[0];
    assert_eq!(r["start"], want["segment_start"]);
    assert_eq!(r["end"], want["segment_end"]);
    assert_eq!(r["start_pa"], want["start_pa"]);
    assert_eq!(r["end_pa"], want["end_pa"]);
    let got = |k: &str| r[k].as_f64().unwrap_or_else(|| panic!("{k}: {r}"));
    close(got("dp_dt_pa_per_s"), num("slope_pa_per_s"), 1e-9, "dp/dt");
    close(got("r2"), num("r2"), 1e-9, "R²");
    let q = got("leak_rate_pa_m3_per_s");
    close(
        q,
        num("volume_m3") * num("slope_pa_per_s"),
        1e-9,
        "Q = V·dp/dt",
    );
    close(q, num("leak_rate_pa_m3_per_s"), 1e-9, "Q");
    // 1 mbar·L/s = 100 Pa × 1e-3 m³/s = 0.1 Pa·m³/s (definitions of the units).
    close(
        got("leak_rate_mbar_l_per_s"),
        q / 0.1,
        1e-12,
        "Q in mbar·L/s",
    );
    close(
        got("leak_rate_mbar_l_per_s"),
        num("leak_rate_mbar_l_per_s"),
        1e-9,
        "Q in mbar·L/s",
    );
    // The core's line over the same points, on seconds from the first row,
    // also gives linregress's intercept and standard errors.
    let file = std::fs::File::open(&log).expect("fixture log");
    let reader = rarefy::log::LogReader::new(std::io::BufReader::new(file), "ror_reference.csv")
        .expect("v1 log");
    let mut points = Vec::new();
    let mut t0 = None;
    for row in reader {
        let row = row.expect("row");
        let t0 = *t0.get_or_insert(row.time);
        let x = (row.time - t0).num_milliseconds() as f64 / 1000.0;
        points.push((x, row.samples[0].value().expect("pressure")));
    }
    assert_eq!(
        points.len() as u64,
        want["points"].as_u64().expect("points")
    );
    let line = rarefy_core::analysis::fit::Line::of(&points).expect("a line");
    close(line.slope, num("slope_pa_per_s"), 1e-9, "slope");
    close(line.intercept, num("intercept_pa"), 1e-9, "intercept");
    close(
        line.slope_se,
        num("slope_stderr_pa_per_s"),
        1e-9,
        "SE(slope)",
    );
    close(
        line.intercept_se,
        num("intercept_stderr_pa"),
        1e-9,
        "SE(intercept)",
    );
    close(line.r2, num("r2"), 1e-9, "R²");
}

// ---- Bad logs: each problem located, unusable rows counted by cause ----

/// Runs `report LOG… --format json`: exit code, the JSON (when any) and
/// stderr.
fn bad(files: &[&Path]) -> (i32, Value, String) {
    let mut args: Vec<&str> = files.iter().map(|p| p.to_str().expect("path")).collect();
    args.extend(["--format", "json"]);
    let (code, out, err) = report(&args);
    let v = if out.trim().is_empty() {
        Value::Null
    } else {
        serde_json::from_str(&out).expect("json")
    };
    (code, v, err)
}

/// Whether stderr locates a message at `path:line` containing `text`.
fn located(err: &str, path: &Path, line: u64, text: &str) -> bool {
    let at = format!("{}:{line}", path.display());
    err.lines()
        .any(|l| l.contains(&format!("{at}:")) && l.contains(text))
}

const RISE: &str = "# rarefy log v1
time,chamber [Pa]
";

#[test]
fn a_row_with_more_cells_than_the_header_is_located_and_counted() {
    // The header names one channel; a logger that gained a column writes
    // two from line 5 on.
    let p = temp(
        "more-cells.csv",
        &format!(
            "{RISE}2026-01-01T00:00:00.000Z,5e1\n2026-01-01T00:00:10.000Z,4e1\n\
             2026-01-01T00:00:20.000Z,3e1,2.1e1\n2026-01-01T00:00:30.000Z,2e1,2.1e1\n"
        ),
    );
    let (code, v, err) = bad(&[&p]);
    assert_eq!(code, 0, "{err}");
    assert!(
        located(&err, &p, 5, "row has 3 cells; the header has 2"),
        "{err}"
    );
    assert!(located(&err, &p, 6, "row has 3 cells"), "{err}");
    assert_eq!(
        v["unusable_rows"]["more cells than the header (a header that does not match the rows?)"],
        2,
        "{v}"
    );
    assert_eq!(v["rows"], 2);
}

#[test]
fn a_pressure_not_above_zero_is_located_counted_and_kept_without_kinetics() {
    // A gauge's zero drift: the second reading is below zero.
    let p = temp(
        "below-zero.csv",
        &format!(
            "{RISE}2026-01-01T00:00:00.000Z,5e1\n2026-01-01T00:00:10.000Z,-1.5e-2\n\
             2026-01-01T00:00:20.000Z,3e1\n"
        ),
    );
    let (code, v, err) = bad(&[&p]);
    assert_eq!(code, 0, "{err}");
    assert!(
        located(&err, &p, 4, "pressure \"-1.5e-2\" Pa is not above zero"),
        "{err}"
    );
    assert_eq!(
        v["unusable_rows"]["a pressure not above zero (reading kept, without kinetics)"], 1,
        "{v}"
    );
    // Kept as a reading, but not a pressure: the extremes are the others'.
    let g = &v["gauges"][0];
    assert_eq!(g["samples"], 3, "{v}");
    assert_eq!(g["min_pa"], 30.0, "{v}");
    assert_eq!(g["max_pa"], 50.0, "{v}");
}

#[test]
fn a_cell_that_is_not_utf8_costs_that_reading_only() {
    // A flipped byte in the pressure cell of line 4: the row's wall
    // reading is still used, the pressure counted as unparsed.
    let p = temp("not-utf8.csv", "");
    let mut bytes = b"# rarefy log v1\ntime,chamber [Pa],wall [C]\n\
        2026-01-01T00:00:00.000Z,5e1,21\n2026-01-01T00:00:10.000Z,4"
        .to_vec();
    bytes.extend_from_slice(b"\xff5,22\n2026-01-01T00:00:20.000Z,3e1,23\n");
    std::fs::write(&p, bytes).expect("write");
    let (code, v, err) = bad(&[&p]);
    assert_eq!(code, 0, "{err}");
    assert!(
        located(
            &err,
            &p,
            4,
            "invalid UTF-8 (byte 0xff after \"4\") in cell 2"
        ),
        "{err}"
    );
    assert_eq!(v["rows"], 3, "{v}");
    assert_eq!(
        v["unusable_rows"]["a cell could not be read (row used without it)"], 1,
        "{v}"
    );
    let wall = gauge(&v, "wall");
    assert_eq!(wall["samples"], 3, "{v}");
    let chamber = gauge(&v, "chamber");
    assert_eq!(chamber["samples"], 3, "{v}");
    assert_eq!(chamber["statuses"]["unparsed"], 1, "{v}");
}

#[test]
fn a_header_with_an_unknown_unit_is_located_and_its_rows_counted() {
    let unknown = temp(
        "unknown-unit.csv",
        "# rarefy log v1\ntime,chamber [Pa],foreline [mbr]\n\
         2026-01-01T00:00:00.000Z,5e1,1\n2026-01-01T00:00:10.000Z,4e1,1\n",
    );
    let good = temp(
        "after-unknown-unit.csv",
        &format!("{RISE}2026-01-01T00:01:00.000Z,5e1\n2026-01-01T00:01:10.000Z,4e1\n"),
    );
    // Alone: nothing usable, exit 2, the header cell located.
    let (code, _, err) = bad(&[&unknown]);
    assert_eq!(code, 2, "{err}");
    assert!(
        located(
            &err,
            &unknown,
            2,
            "unknown unit \"mbr\" in header cell \"foreline [mbr]\""
        ) && err.contains("did you mean \"mbar\"?"),
        "{err}"
    );
    // Beside a good file: the good one is reported, the other's two rows
    // are counted, not silently dropped.
    let (code, v, err) = bad(&[&unknown, &good]);
    assert_eq!(code, 0, "{err}");
    assert!(located(&err, &unknown, 2, "unknown unit"), "{err}");
    assert_eq!(
        v["unusable_rows"]["in a file whose header could not be read (file skipped)"], 2,
        "{v}"
    );
    assert_eq!(v["rows"], 2);
    assert_eq!(
        v["files"],
        serde_json::json!([good.to_str().expect("path")])
    );
    // A header row that does not start with `time`: the same.
    let stamp = temp(
        "no-time-header.csv",
        "# rarefy log v1\nstamp,chamber [Pa]\n2026-01-01T00:00:00.000Z,5e1\n",
    );
    let (code, _, err) = bad(&[&stamp]);
    assert_eq!(code, 2, "{err}");
    assert!(located(&err, &stamp, 2, "must start with `time`"), "{err}");
}

#[test]
fn times_that_go_back_or_repeat_are_located_and_counted() {
    let p = temp(
        "clock.csv",
        &format!(
            "{RISE}2026-01-01T00:00:00.000Z,5e1\n2026-01-01T00:00:10.000Z,4e1\n\
             2026-01-01T00:00:05.000Z,3e1\n2026-01-01T00:00:05.000Z,3e1\n\
             2026-01-01T00:00:20.000Z,2e1\n"
        ),
    );
    let (code, v, err) = bad(&[&p]);
    assert_eq!(code, 0, "{err}");
    assert!(
        located(
            &err,
            &p,
            5,
            "time 2026-01-01T00:00:05.000Z is earlier than the row before's \
             (2026-01-01T00:00:10.000Z, line 4)"
        ),
        "{err}"
    );
    assert!(located(&err, &p, 6, "repeats the row before's"), "{err}");
    assert_eq!(v["times_went_back"], 1);
    assert_eq!(v["times_repeated"], 1);
    // Both rows are used (their readings count) but add no time.
    assert_eq!(v["rows"], 5);
    assert_eq!(v["gauges"][0]["samples"], 5);
    assert_eq!(v["gauges"][0]["duration_s"], 20.0);
    assert_eq!(v["unusable_rows"], serde_json::json!({}));
}

#[test]
fn mixed_utc_offsets_are_read_as_utc_located_and_counted() {
    // One clock, 10 s a row: written at +01:00, then +02:00 (a daylight-
    // saving switch), then Z, then +05:30. In UTC the rows stay 10 s apart.
    let p = temp(
        "offsets.csv",
        &format!(
            "{RISE}2026-03-29T01:59:40.000+01:00,5e1\n2026-03-29T01:59:50+01:00,4e1\n\
             2026-03-29T03:00:00+02:00,3e1\n2026-03-29T03:00:10+02:00,2e1\n\
             2026-03-29T01:00:20Z,1e1\n2026-03-29T06:30:30+05:30,5e0\n"
        ),
    );
    let (code, v, err) = bad(&[&p]);
    assert_eq!(code, 0, "{err}");
    assert!(
        located(&err, &p, 5, "UTC offset changes from +01:00 to +02:00"),
        "{err}"
    );
    assert!(
        located(&err, &p, 7, "UTC offset changes from +02:00 to +00:00"),
        "{err}"
    );
    assert!(
        located(&err, &p, 8, "UTC offset changes from +00:00 to +05:30"),
        "{err}"
    );
    assert_eq!(v["time_offset_changes"], 3);
    assert_eq!(v["rows"], 6);
    assert_eq!(v["times_went_back"], 0);
    assert_eq!(v["unusable_rows"], serde_json::json!({}));
    let g = &v["gauges"][0];
    assert_eq!(g["start"], "2026-03-29T00:59:40.000Z");
    assert_eq!(g["end"], "2026-03-29T01:00:30.000Z");
    assert_eq!(g["duration_s"], 50.0);
    assert_eq!(g["gap_count"], 0);
    // The text report says it too.
    let (_, out, _) = report(&[p.to_str().expect("path")]);
    assert!(
        out.contains("rows whose time's UTC offset changed: 3"),
        "{out}"
    );
}

#[test]
fn a_time_without_an_offset_among_offset_times_is_located_and_counted() {
    let p = temp(
        "no-offset.csv",
        &format!(
            "{RISE}2026-01-01T01:00:00+01:00,5e1\n2026-01-01T01:00:10,4e1\n\
             2026-01-01T01:00:20+01:00,3e1\n2026-01-01 01:00:30,2e1\n"
        ),
    );
    let (code, v, err) = bad(&[&p]);
    assert_eq!(code, 0, "{err}");
    for line in [4, 6] {
        assert!(
            located(
                &err,
                &p,
                line,
                "has no UTC offset, unlike the times before it (at +01:00)"
            ),
            "{err}"
        );
    }
    assert_eq!(v["unusable_rows"]["time without a UTC offset"], 2, "{v}");
    assert_eq!(v["rows"], 2);
    assert_eq!(v["time_offset_changes"], 0);
    // No time with an offset at all: nothing usable.
    let p = temp(
        "no-offsets.csv",
        &format!("{RISE}2026-01-01T01:00:00,5e1\n2026-01-01T01:00:10,4e1\n"),
    );
    let (code, _, err) = bad(&[&p]);
    assert_eq!(code, 2, "{err}");
    assert!(located(&err, &p, 3, "has no UTC offset"), "{err}");
    assert!(located(&err, &p, 4, "has no UTC offset"), "{err}");
}

#[test]
fn a_log_with_only_a_header_is_exit_2_and_located() {
    let p = temp(
        "header-only.csv",
        "# rarefy log v1\n# gas: N2\ntime,chamber [Pa]\n\n",
    );
    let (code, v, err) = bad(&[&p]);
    assert_eq!(code, 2, "{err}");
    assert_eq!(v, Value::Null);
    assert!(
        located(&err, &p, 3, "no data rows after its header row"),
        "{err}"
    );
    // Beside a log with rows: reported, exit 0.
    let good = temp(
        "beside-header-only.csv",
        &format!("{RISE}2026-01-01T00:00:00.000Z,5e1\n2026-01-01T00:00:10.000Z,4e1\n"),
    );
    let (code, v, err) = bad(&[&p, &good]);
    assert_eq!(code, 0, "{err}");
    assert!(located(&err, &p, 3, "no data rows"), "{err}");
    assert_eq!(v["rows"], 2);
}

#[test]
fn an_empty_file_beside_a_good_one_is_located_and_the_rest_reported() {
    let empty = temp("empty-beside.csv", "");
    let good = temp(
        "beside-empty.csv",
        &format!("{RISE}2026-01-01T00:00:00.000Z,5e1\n2026-01-01T00:00:10.000Z,4e1\n"),
    );
    let (code, v, err) = bad(&[&empty, &good]);
    assert_eq!(code, 0, "{err}");
    assert!(located(&err, &empty, 1, "the file is empty"), "{err}");
    assert_eq!(v["rows"], 2);
    assert_eq!(v["unusable_rows"], serde_json::json!({}));
}

mod plot {
    use super::*;
    use rarefy::pipeline::plot::{
        CLEAR_COLOUR, GAUGE_COLOURS, RAISE_COLOUR, RANGE_FILLS, REGIME_FILLS, RISE_COLOUR,
        THRESHOLD_COLOUR, hex,
    };
    use rarefy::report::decimate::PLOT_BUCKETS;

    /// The SVG's elements named `tag`.
    fn elements<'a>(doc: &'a roxmltree::Document<'a>, tag: &str) -> Vec<roxmltree::Node<'a, 'a>> {
        doc.descendants().filter(|n| n.has_tag_name(tag)).collect()
    }

    fn texts(doc: &roxmltree::Document<'_>) -> Vec<String> {
        elements(doc, "text")
            .iter()
            .filter_map(|n| n.text())
            .map(|t| t.trim().to_string())
            .collect()
    }

    fn strokes<'a>(doc: &'a roxmltree::Document<'a>, colour: &str) -> Vec<roxmltree::Node<'a, 'a>> {
        elements(doc, "polyline")
            .into_iter()
            .filter(|n| n.attribute("stroke") == Some(colour))
            .collect()
    }

    fn points(n: &roxmltree::Node<'_, '_>) -> Vec<(i32, i32)> {
        n.attribute("points")
            .unwrap_or_default()
            .split_whitespace()
            .map(|p| {
                let (x, y) = p.split_once(',').expect("x,y");
                (x.parse().expect("x"), y.parse().expect("y"))
            })
            .collect()
    }

    #[test]
    fn the_plot_is_valid_svg_with_every_mark() {
        let svg = temp("leak-plot.svg", "");
        let (code, out, err) = report(&[
            "sample-logs/leak-check.csv",
            "--config",
            "config/demo.toml",
            "--target",
            "1e-5 mbar",
            "--plot",
            svg.to_str().expect("p"),
        ]);
        assert!(code == 0 || code == 3, "exit {code}: {err}");
        assert!(out.contains("Run report"), "the text report still goes out");
        let text = std::fs::read_to_string(&svg).expect("svg");
        let doc = roxmltree::Document::parse(&text).expect("the plot is well-formed XML");
        let root = doc.root_element();
        assert!(root.has_tag_name("svg"), "{:?}", root.tag_name());
        assert_eq!(
            root.tag_name().namespace(),
            Some("http://www.w3.org/2000/svg")
        );

        // Each pressure gauge (cdg, chamber, ion; not the wall thermometer)
        // is a line in its colour.
        for c in &GAUGE_COLOURS[..3] {
            let lines = strokes(&doc, &hex(*c));
            assert!(
                lines.iter().any(|l| points(l).len() > 100),
                "a pressure series in {}",
                hex(*c)
            );
        }
        assert!(strokes(&doc, &hex(GAUGE_COLOURS[3])).is_empty());

        let texts = texts(&doc);
        let has = |t: &str| texts.iter().any(|x| x == t);
        let contains = |t: &str| texts.iter().any(|x| x.contains(t));
        // A label per decade, 1e-6 to 1e3 mbar.
        for d in ["1e-6", "1e-5", "1e-3", "1e0", "1e3"] {
            assert!(has(d), "decade label {d}: {texts:?}");
        }
        assert!(contains("pressure, mbar"), "{texts:?}");
        // ISO 3529-1 range bands: filled rectangles, named.
        let bands = elements(&doc, "rect")
            .into_iter()
            .filter(|r| {
                RANGE_FILLS
                    .iter()
                    .any(|c| r.attribute("fill") == Some(&*hex(*c)))
            })
            .count();
        assert!(bands >= 3, "{bands} range bands");
        for r in ["low vacuum", "medium vacuum", "high vacuum"] {
            assert!(has(r), "{r}: {texts:?}");
        }
        // Regime columns for the named lengths.
        let regimes = elements(&doc, "rect")
            .into_iter()
            .filter(|r| {
                REGIME_FILLS
                    .iter()
                    .any(|c| r.attribute("fill") == Some(&*hex(*c)))
            })
            .count();
        assert_eq!(regimes, 9, "three regimes for each of three lengths");
        assert!(has("chamber bore") && has("viscous") && has("molecular"));
        // Thresholds: dashed lines, labelled with the rule and the pressure.
        assert!(strokes(&doc, &hex(THRESHOLD_COLOUR)).len() > 10, "dashes");
        assert!(has("ion-high 5.00e-5 mbar"), "{texts:?}");
        assert!(has("--target 1.00e-5 mbar"), "{texts:?}");
        // Alarm marks: raised and cleared, with the rule ids.
        assert!(!strokes(&doc, &hex(RAISE_COLOUR)).is_empty());
        assert!(!strokes(&doc, &hex(CLEAR_COLOUR)).is_empty());
        assert!(has("fast-rise") && has("line-regime"), "{texts:?}");
        // The capacitance gauge's rate of rise and its verdict.
        assert!(!strokes(&doc, &hex(RISE_COLOUR)).is_empty());
        assert!(contains("cdg: rate of rise, leak, Q 2.0"), "{texts:?}");
        assert!(has("target reached"), "{texts:?}");
        for t in ["alarm raised", "alarm cleared", "threshold", "rate of rise"] {
            assert!(has(t), "legend {t}");
        }
    }

    #[test]
    fn a_plot_that_cannot_be_written_names_its_path_and_keeps_the_report() {
        let (code, out, err) = report(&[
            "sample-logs/pumpdown.csv",
            "--config",
            "config/demo.toml",
            "--plot",
            "/nonexistent/dir/x.svg",
        ]);
        assert_eq!(code, 1, "{err}");
        assert!(err.contains("--plot /nonexistent/dir/x.svg"), "{err}");
        assert!(
            out.contains("Run report") && out.contains("pump-down"),
            "{out}"
        );
        // JSON too.
        let (code, out, _) = report(&[
            "sample-logs/pumpdown.csv",
            "--format",
            "json",
            "--plot",
            "/nonexistent/dir/x.svg",
        ]);
        assert_eq!(code, 1);
        let v: Value = serde_json::from_str(&out).expect("the JSON report is whole");
        assert!(v["rows"].as_u64().expect("rows") > 0);
    }

    #[test]
    fn a_long_log_draws_in_bounded_points_and_keeps_its_spike() {
        // 40 000 readings at 1 s; one reading of 500 Pa in a run near 1e-4 Pa.
        let mut log = String::from("# rarefy log v1\ntime,chamber [Pa]\n");
        for i in 0..40_000u32 {
            let (d, r) = (1 + i / 86_400, i % 86_400);
            let p = if i == 23_456 {
                500.0
            } else {
                1e-4 * (1.0 + 0.2 * (f64::from(i) * 0.01).sin())
            };
            log.push_str(&format!(
                "2026-01-{d:02}T{:02}:{:02}:{:02}.000Z,{p:e}\n",
                r / 3600,
                r / 60 % 60,
                r % 60
            ));
        }
        let p = temp("long.csv", &log);
        let svg = temp("long.svg", "");
        let (code, _, err) = report(&[
            p.to_str().expect("p"),
            "--format",
            "json",
            "--plot",
            svg.to_str().expect("p"),
        ]);
        assert_eq!(code, 0, "{err}");
        let text = std::fs::read_to_string(&svg).expect("svg");
        let doc = roxmltree::Document::parse(&text).expect("xml");
        // The line (the legend's sample is a polyline of two points).
        let series: Vec<(i32, i32)> = strokes(&doc, &hex(GAUGE_COLOURS[0]))
            .iter()
            .map(points)
            .filter(|p| p.len() > 2)
            .flatten()
            .collect();
        assert!(series.len() > 1000, "{}", series.len());
        assert!(
            series.len() <= 4 * PLOT_BUCKETS,
            "{} points for 40 000 readings",
            series.len()
        );
        assert!(series.windows(2).all(|w| w[0].0 <= w[1].0), "time order");
        // The spike is still drawn: far above the rest of the line.
        let mut ys: Vec<i32> = series.iter().map(|p| p.1).collect();
        ys.sort_unstable();
        let median = ys[ys.len() / 2];
        assert!(ys[0] < median - 300, "spike at {} vs {median}", ys[0]);
    }
}

#[test]
fn a_gauge_the_log_does_not_have_is_a_usage_error() {
    let (code, out, err) = report(&["sample-logs/leak-check.csv", "--gauge", "chambr"]);
    assert_eq!(code, 2, "{out}");
    assert!(
        err.contains("--gauge \"chambr\": the log has no such channel (it has cdg, chamber, ion, wall); did you mean \"chamber\"?"),
        "{err}"
    );
}

#[test]
fn a_window_without_readings_is_a_usage_error() {
    // Also for the CSV alone, which keeps no summary.
    for format in ["text", "csv"] {
        let (code, out, err) = report(&[
            "sample-logs/leak-check.csv",
            "--from",
            "23:00:00",
            "--format",
            format,
        ]);
        assert_eq!(code, 2, "{format}: {err}");
        assert!(
            err.contains("--from/--to: no readings between 2026-11-03T23:00:00.000Z and the end (the log's first row is at 2026-11-03T07:00:05.000Z)"),
            "{format}: {err}"
        );
        assert!(!out.contains("2026-11-03T"), "{format}: {out}");
    }
}

/// A CSV that cannot be written in full (a full disk) fails the run, naming
/// where it went; the other output is not lost.
#[test]
fn a_csv_cut_short_fails_the_run_and_names_the_output() {
    if !Path::new("/dev/full").exists() {
        return;
    }
    let (code, _, err) = report(&[
        "sample-logs/pumpdown.csv",
        "--format",
        "csv",
        "--out",
        "/dev/full",
    ]);
    assert_eq!(code, 1, "{err}");
    assert!(
        err.contains("--out /dev/full: cannot write the CSV"),
        "{err}"
    );
}
