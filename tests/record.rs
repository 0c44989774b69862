//! The real `rarefy record` binary: exact row counts, SIGTERM in the middle,
//! and a file-size limit.

mod common;

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_rarefy")
}

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("rarefy-record-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    d
}

/// Data rows of every log file in `dir`, in file-name order, checking that
/// each file is a complete v1 log whose rows all have the header's width.
fn rows(dir: &Path) -> Vec<String> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .expect("out dir")
        .map(|e| e.expect("entry").path())
        .filter(|p| p.extension().is_some_and(|e| e == "csv"))
        .collect();
    files.sort();
    let mut out = Vec::new();
    for f in files {
        let text = std::fs::read_to_string(&f).expect("read log");
        assert!(text.starts_with("# rarefy log v1\n"), "{}", f.display());
        assert!(
            text.is_empty() || text.ends_with('\n'),
            "{} ends mid-row",
            f.display()
        );
        let mut lines = text.lines().skip_while(|l| l.starts_with('#'));
        let header = lines.next().expect("header row");
        let width = header.split(',').count();
        for l in lines {
            assert_eq!(l.split(',').count(), width, "{}: {l}", f.display());
            out.push(l.to_string());
        }
    }
    out
}

fn wait(child: &mut Child, limit: Duration) -> std::process::ExitStatus {
    let start = Instant::now();
    loop {
        if let Some(status) = child.try_wait().expect("wait") {
            return status;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            panic!("rarefy record did not exit within {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

/// `rarefy record ARGS --out DIR` fed `input` on stdin to its end.
fn record_piped(args: &[&str], dir: &Path, input: &[u8]) -> std::process::Output {
    let mut cmd = Command::new(bin());
    cmd.arg("record").args(args).arg("--out").arg(dir);
    common::run_piped(cmd, input)
}

#[test]
fn stdin_n_lines_give_exactly_n_rows() {
    let dir = tempdir("stdin");
    let n = 5000;
    let mut child = Command::new(bin())
        .args([
            "record",
            "--source",
            "stdin:?channel=chamber&unit=mbar",
            "--out",
        ])
        .arg(&dir)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    {
        let mut stdin = child.stdin.take().expect("stdin");
        for i in 0..n {
            writeln!(stdin, "{}e-7", i + 1).expect("write");
        }
    }
    let out = child.wait_with_output().expect("wait");
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let rows = rows(&dir);
    assert_eq!(rows.len(), n);
    for (i, r) in rows.iter().enumerate() {
        let v: f64 = r.split(',').nth(1).expect("cell").parse().expect("number");
        let expect: f64 = format!("{}e-7", i + 1).parse().expect("number");
        assert_eq!(v, expect, "row {i}");
    }
    // The summary on stdout is a JSON line with the counts.
    let stdout = String::from_utf8_lossy(&out.stdout);
    let summary: serde_json::Value = stdout
        .lines()
        .filter_map(|l| serde_json::from_str(l).ok())
        .find(|v: &serde_json::Value| v["event"] == "summary")
        .expect("summary event");
    assert_eq!(summary["rows"], n);
    assert_eq!(summary["rows_lost"], 0);
}

#[test]
fn unparsed_lines_are_counted_and_reported_not_dropped() {
    let dir = tempdir("unparsed");
    let out = record_piped(&[], &dir, b"1e-6\n\x1b[31mjunk\xff\n2e-6\n");
    assert_eq!(out.status.code(), Some(0));
    assert_eq!(rows(&dir).len(), 2);
    let stdout = String::from_utf8_lossy(&out.stdout);
    let unparsed: Vec<serde_json::Value> = stdout
        .lines()
        .filter_map(|l| serde_json::from_str(l).ok())
        .filter(|v: &serde_json::Value| v["event"] == "unparsed")
        .collect();
    assert_eq!(unparsed.len(), 1);
    assert!(
        unparsed[0]["text"]
            .as_str()
            .is_some_and(|t| t.starts_with("\\x1b[31mjunk\\xff"))
    );
    // Terminal control never reaches stderr unescaped.
    assert!(!out.stderr.contains(&0x1b));
}

/// A pressure not above zero from a live source is recorded as read, and
/// said once for each stretch of such readings (not at every one).
#[test]
fn a_pressure_not_above_zero_is_recorded_and_said_once_a_stretch() {
    let dir = tempdir("zero");
    let out = record_piped(
        &["--source", "stdin:?channel=chamber&unit=mbar"],
        &dir,
        b"1e-6\n-2e-8\n-1e-8\n3e-6\n0\n",
    );
    assert_eq!(out.status.code(), Some(0));
    let cells: Vec<String> = rows(&dir)
        .iter()
        .map(|r| r.split(',').nth(1).expect("cell").to_string())
        .collect();
    let values: Vec<f64> = cells.iter().map(|c| c.parse().expect(c)).collect();
    assert_eq!(values, [1e-6, -2e-8, -1e-8, 3e-6, 0.0]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    let said: Vec<String> = stdout
        .lines()
        .filter_map(|l| serde_json::from_str::<serde_json::Value>(l).ok())
        .filter(|v| v["event"] == "source-error")
        .map(|v| v["message"].as_str().unwrap_or_default().to_string())
        .collect();
    assert_eq!(said.len(), 2, "{said:?}");
    assert!(
        said[0].starts_with("chamber: pressure -2e-8 mbar at ")
            && said[0].contains("is not above zero: kept as read"),
        "{said:?}"
    );
    assert!(
        said[1].starts_with("chamber: pressure 0 mbar at "),
        "{said:?}"
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(stderr.matches("is not above zero").count(), 2, "{stderr}");
}

#[test]
fn sigterm_in_the_middle_keeps_every_row_sent_before_it() {
    let dir = tempdir("sigterm");
    let mut child = Command::new(bin())
        .args(["record", "--source", "stdin:", "--out"])
        .arg(&dir)
        .stdin(Stdio::piped())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("spawn");
    let mut stdin = child.stdin.take().expect("stdin");
    let n = 3000;
    for i in 0..n {
        writeln!(stdin, "{}e-8", i + 1).expect("write");
    }
    stdin.flush().expect("flush");
    std::thread::sleep(Duration::from_millis(300));
    let pid = nix::unistd::Pid::from_raw(child.id() as i32);
    nix::sys::signal::kill(pid, nix::sys::signal::Signal::SIGTERM).expect("SIGTERM");
    let status = wait(&mut child, Duration::from_secs(20));
    assert_eq!(status.code(), Some(0));
    // stdin is still open: the recorder stopped on the signal, not at EOF.
    drop(stdin);
    assert_eq!(rows(&dir).len(), n);
}

#[test]
fn a_file_size_limit_is_reported_and_survived_in_new_files() {
    let dir = tempdir("fsize");
    let n = 4000;
    // prlimit (util-linux) sets RLIMIT_FSIZE for the child only.
    let mut child = Command::new("prlimit")
        .arg("--fsize=20000")
        .arg(bin())
        .args(["record", "--source", "stdin:", "--out"])
        .arg(&dir)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn prlimit");
    {
        let mut stdin = child.stdin.take().expect("stdin");
        for i in 0..n {
            writeln!(stdin, "{}e-9", i + 1).expect("write");
        }
    }
    let out = child.wait_with_output().expect("wait");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{stderr}");
    assert!(stderr.contains("WRITE FAILED"), "{stderr}");
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(stdout.contains("\"event\":\"write-failed\""), "{stdout}");
    // Every file stays under the limit and ends on a complete row; together
    // they hold every row.
    for e in std::fs::read_dir(&dir).expect("dir") {
        let len = e.expect("entry").metadata().expect("meta").len();
        assert!(len <= 20000, "{len}");
    }
    let rows = rows(&dir);
    assert_eq!(rows.len(), n);
}

#[test]
fn rows_lost_to_a_full_buffer_are_one_event_with_count_and_time_range() {
    let dir = tempdir("lost");
    // A file where the output directory should be: nothing can be written.
    let out_dir = dir.join("blocked");
    std::fs::create_dir_all(&dir).expect("dir");
    std::fs::write(&out_dir, "not a directory").expect("block");
    let mut child = Command::new(bin())
        .args([
            "record",
            "--source",
            "stdin:",
            "--buffer-rows",
            "10",
            "--out",
        ])
        .arg(&out_dir)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    {
        let mut stdin = child.stdin.take().expect("stdin");
        for i in 0..200 {
            writeln!(stdin, "{}e-8", i + 1).expect("write");
        }
    }
    let out = child.wait_with_output().expect("wait");
    let stderr = String::from_utf8_lossy(&out.stderr);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    let lost: Vec<serde_json::Value> = stdout
        .lines()
        .filter_map(|l| serde_json::from_str::<serde_json::Value>(l).ok())
        .filter(|v| v["event"] == "rows-lost")
        .collect();
    assert_eq!(lost.len(), 1, "{stdout}");
    assert_eq!(lost[0]["rows"], 190, "{stdout}");
    assert_eq!(lost[0]["total"], 190, "{stdout}");
    let (from, to) = (lost[0]["from"].as_str(), lost[0]["to"].as_str());
    assert!(from.is_some_and(|f| to.is_some_and(|t| f <= t)), "{stdout}");
    assert_eq!(stderr.matches("memory buffer full").count(), 1, "{stderr}");
}

#[test]
fn record_needs_an_output_directory() {
    let out = Command::new(bin())
        .args(["record", "--source", "stdin:"])
        .stdin(Stdio::null())
        .output()
        .expect("run");
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--out DIR"));
    let out = Command::new(bin())
        .args([
            "record",
            "--source",
            "serial:///dev/x?bauds=9600",
            "--out",
            "/tmp/x",
        ])
        .output()
        .expect("run");
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("did you mean `baud`?"));
}

#[test]
fn a_file_that_cannot_be_read_is_a_runtime_failure() {
    let dir = tempdir("unreadable");
    let out = Command::new(bin())
        .args(["record", "--source", "file:///nonexistent/run.csv", "--out"])
        .arg(&dir)
        .output()
        .expect("run");
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("cannot open /nonexistent/run.csv"), "{err}");
    assert!(err.contains("no readings: the sources failed"), "{err}");
}

#[test]
fn with_no_source_a_terminal_on_stdin_is_refused_not_read() {
    let dir = tempdir("terminal");
    let pty = nix::pty::openpty(None, None).expect("openpty");
    let gates = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("config/demo.toml");
    let commands: [Vec<std::ffi::OsString>; 2] = [
        vec!["record".into(), "--out".into(), dir.clone().into()],
        vec![
            "gate".into(),
            "wait".into(),
            "deposition-ready".into(),
            "--config".into(),
            gates.into(),
            "--timeout".into(),
            "1 s".into(),
        ],
    ];
    for args in commands {
        let stdin = pty.slave.try_clone().expect("pty");
        let out = Command::new(bin())
            .args(&args)
            .stdin(Stdio::from(stdin))
            .output()
            .expect("run");
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
        assert!(err.contains("no source"), "{args:?}: {err}");
    }
}

#[test]
fn a_log_row_with_a_bad_cell_is_one_row_not_also_an_unparsed_line() {
    let dir = tempdir("badcell");
    let out = record_piped(
        &["--source", "stdin:"],
        &dir,
        b"# rarefy log v1\ntime,a [mbar],b [mbar]\n\
          2026-01-01T00:00:01.000Z,1e-6,2e-6\n\
          2026-01-01T00:00:02.000Z,1.5e-6,1.2.3\n\
          2026-01-01T00:00:02.000Z,1.4e-6,2e-6\n\
          2026-01-01T00:00:01.500Z,1.3e-6,2e-6\n",
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{stderr}");
    let rows = rows(&dir);
    assert_eq!(rows.len(), 4, "{rows:?}");
    // The bad cell is recorded as its status, next to the good one.
    assert!(rows[1].contains(",1.5e-6,unparsed"), "{rows:?}");
    let stdout = String::from_utf8_lossy(&out.stdout);
    let json: Vec<serde_json::Value> = stdout
        .lines()
        .filter_map(|l| serde_json::from_str(l).ok())
        .collect();
    let summary = json
        .iter()
        .find(|v| v["event"] == "summary")
        .expect("summary");
    assert_eq!(summary["rows"], 4);
    assert_eq!(summary["unparsed"], 0);
    // The bad cell, the repeated time and the time going back are each
    // reported on stderr and as a JSON line.
    let reports: Vec<&str> = json
        .iter()
        .filter(|v| v["event"] == "source-error")
        .filter_map(|v| v["message"].as_str())
        .collect();
    assert_eq!(reports.len(), 3, "{reports:?}");
    assert!(reports[0].contains("log line 4, cell 3"), "{reports:?}");
    assert!(
        reports[1].contains("repeats the row before's"),
        "{reports:?}"
    );
    assert!(
        reports[2].contains("earlier than the row before"),
        "{reports:?}"
    );
    assert!(stderr.contains("earlier than the row before"), "{stderr}");
}

#[test]
fn derived_columns_follow_the_gas_in_force() {
    // process.csv with the demo config: its argon step puts Ar in force at
    // 07:25, where the capacitance gauge reads 5e-3 mbar.
    let dir = tempdir("derived-gas");
    let log = format!(
        "file://{}/sample-logs/process.csv",
        env!("CARGO_MANIFEST_DIR")
    );
    let out = Command::new(bin())
        .args([
            "record",
            "--config",
            "config/demo.toml",
            "--derived",
            "--source",
            &log,
            "--out",
        ])
        .arg(&dir)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("run");
    assert!(
        matches!(out.status.code(), Some(0 | 3)),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text: String = std::fs::read_dir(&dir)
        .expect("dir")
        .map(|e| e.expect("entry").path())
        .filter(|p| p.extension().is_some_and(|e| e == "csv"))
        .map(|p| std::fs::read_to_string(p).expect("read"))
        .collect();
    let header: Vec<&str> = text
        .lines()
        .find(|l| l.starts_with("time,"))
        .expect("header")
        .split(',')
        .collect();
    let row: Vec<&str> = text
        .lines()
        .find(|l| l.starts_with("2026-11-05T07:25:00.000Z"))
        .expect("the 07:25 row")
        .split(',')
        .collect();
    let cell = |name: &str| {
        let i = header
            .iter()
            .position(|h| h.starts_with(name))
            .unwrap_or_else(|| panic!("no column {name} in {header:?}"));
        row[i]
    };
    // λ of Ar at 5e-3 mbar and the wall's 21.9 C, from the engine itself.
    let ar = rarefy::engine::mixture::Mixture::pure(
        rarefy::gas::GasTable::builtin()
            .get("Ar")
            .expect("Ar")
            .clone(),
    );
    let expect = rarefy::engine::derive(
        &rarefy::engine::Conditions::new(0.5, 273.15 + 21.9),
        &ar,
        &[],
        &rarefy::engine::Physics::default(),
    )
    .mean_free_path_m;
    let got: f64 = cell("cdg.mean_free_path").parse().expect("a number");
    assert!(
        (got - expect).abs() / expect < 1e-3,
        "{got} vs {expect} (Ar)"
    );
    // The combined gauge has no thermal factor for Ar: no number at all.
    assert_eq!(cell("chamber.mean_free_path"), "", "{row:?}");
    let _ = std::fs::remove_dir_all(&dir);
}
