//! The dashboard binary in a pseudo-terminal: what an operator sees (parsed
//! by a terminal emulator), what the keys do, resizing, signals, and the
//! terminal left as it was found on every way out.
//!
//! Assertions are on content (words, units, alarm ids and states), not on
//! layout, and every wait is a poll with a generous deadline; no timing is
//! asserted.

use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use portable_pty::{Child, CommandBuilder, MasterPty, PtySize, native_pty_system};
use regex::Regex;

const WAIT: Duration = Duration::from_secs(20);
const POLL: Duration = Duration::from_millis(50);

/// Records what the program asks of the terminal beyond the screen itself.
#[derive(Default)]
struct Asked {
    titles: Vec<String>,
    bells: usize,
}

impl vt100::Callbacks for Asked {
    fn audible_bell(&mut self, _: &mut vt100::Screen) {
        self.bells += 1;
    }
    fn set_window_title(&mut self, _: &mut vt100::Screen, title: &[u8]) {
        self.titles
            .push(String::from_utf8_lossy(title).into_owned());
    }
    fn set_window_icon_name(&mut self, _: &mut vt100::Screen, name: &[u8]) {
        self.titles.push(String::from_utf8_lossy(name).into_owned());
    }
}

type Parser = vt100::Parser<Asked>;

/// The binary running in a pty, its output parsed continuously.
struct Dash {
    parser: Arc<Mutex<Parser>>,
    raw: Arc<Mutex<Vec<u8>>>,
    reader_done: Arc<AtomicBool>,
    writer: Box<dyn Write + Send>,
    master: Box<dyn MasterPty + Send>,
    child: Box<dyn Child + Send + Sync>,
    exited: bool,
}

fn lock<T>(m: &Mutex<T>) -> std::sync::MutexGuard<'_, T> {
    m.lock().unwrap_or_else(std::sync::PoisonError::into_inner)
}

fn nz(n: u16) -> std::num::NonZeroU16 {
    std::num::NonZeroU16::new(n).expect("non-zero size")
}

impl Dash {
    fn spawn(args: &[&str], rows: u16, cols: u16) -> Dash {
        Dash::spawn_with(args, rows, cols, &[])
    }

    /// [`Dash::spawn`] with extra environment variables.
    fn spawn_with(args: &[&str], rows: u16, cols: u16, env: &[(&str, &str)]) -> Dash {
        let pty = native_pty_system();
        let pair = pty
            .openpty(PtySize {
                rows,
                cols,
                pixel_width: 0,
                pixel_height: 0,
            })
            .expect("openpty");
        let mut cmd = CommandBuilder::new(env!("CARGO_BIN_EXE_rarefy"));
        cmd.args(args);
        cmd.cwd(env!("CARGO_MANIFEST_DIR"));
        cmd.env("LANG", "C.UTF-8");
        cmd.env("TERM", "xterm-256color");
        cmd.env_remove("LC_ALL");
        cmd.env_remove("LC_CTYPE");
        cmd.env_remove("NO_COLOR");
        for (k, v) in env {
            cmd.env(k, v);
        }
        let child = pair.slave.spawn_command(cmd).expect("spawn rarefy");
        // Only the child holds the slave now, so reads end when it exits.
        drop(pair.slave);
        let parser = Arc::new(Mutex::new(vt100::Parser::new_with_callbacks(
            nz(rows),
            nz(cols),
            0,
            Asked::default(),
        )));
        let raw = Arc::new(Mutex::new(Vec::new()));
        let reader_done = Arc::new(AtomicBool::new(false));
        let mut reader = pair.master.try_clone_reader().expect("pty reader");
        {
            let (parser, raw, done) = (parser.clone(), raw.clone(), reader_done.clone());
            std::thread::spawn(move || {
                let mut buf = [0u8; 8192];
                loop {
                    match reader.read(&mut buf) {
                        Ok(0) | Err(_) => break,
                        Ok(n) => {
                            lock(&raw).extend_from_slice(&buf[..n]);
                            lock(&parser).process(&buf[..n]);
                        }
                    }
                }
                done.store(true, Ordering::SeqCst);
            });
        }
        let writer = pair.master.take_writer().expect("pty writer");
        Dash {
            parser,
            raw,
            reader_done,
            writer,
            master: pair.master,
            child,
            exited: false,
        }
    }

    fn screen(&self) -> String {
        lock(&self.parser).screen().contents()
    }

    fn raw_text(&self) -> String {
        String::from_utf8_lossy(&lock(&self.raw)).into_owned()
    }

    /// Polls the parsed screen until `done` holds; panics after [`WAIT`]
    /// (or if the program exits first) with the screen as it was.
    fn wait_for(&mut self, what: &str, done: impl Fn(&str) -> bool) -> String {
        let deadline = Instant::now() + WAIT;
        loop {
            let text = self.screen();
            if done(&text) {
                return text;
            }
            if let Ok(Some(status)) = self.child.try_wait() {
                self.exited = true;
                // Let the last output arrive before showing it.
                self.drain();
                panic!(
                    "rarefy exited ({status:?}) while waiting for {what}; screen:\n{}\nraw tail:\n{}",
                    self.screen(),
                    tail(&self.raw_text())
                );
            }
            if Instant::now() > deadline {
                panic!("timed out waiting for {what}; screen:\n{text}");
            }
            std::thread::sleep(POLL);
        }
    }

    fn wait_text(&mut self, needle: &str) -> String {
        self.wait_for(&format!("{needle:?}"), |s| s.contains(needle))
    }

    fn send(&mut self, bytes: &[u8]) {
        self.writer.write_all(bytes).expect("write to pty");
        self.writer.flush().expect("flush pty");
    }

    fn resize(&mut self, rows: u16, cols: u16) {
        // The emulator first, so the redraw after SIGWINCH lands on a screen
        // of the new size.
        lock(&self.parser).screen_mut().set_size(nz(rows), nz(cols));
        self.master
            .resize(PtySize {
                rows,
                cols,
                pixel_width: 0,
                pixel_height: 0,
            })
            .expect("resize pty");
    }

    fn pid(&self) -> i32 {
        self.child.process_id().expect("child pid") as i32
    }

    /// Waits for the output to end (the child gone and the pty closed).
    fn drain(&self) {
        let deadline = Instant::now() + WAIT;
        while !self.reader_done.load(Ordering::SeqCst) && Instant::now() < deadline {
            std::thread::sleep(POLL);
        }
    }

    /// Waits for the program to exit, then for the rest of its output.
    fn wait_exit(&mut self) -> portable_pty::ExitStatus {
        let deadline = Instant::now() + WAIT;
        loop {
            match self.child.try_wait().expect("try_wait") {
                Some(status) => {
                    self.exited = true;
                    self.drain();
                    return status;
                }
                None if Instant::now() > deadline => {
                    panic!("rarefy did not exit; screen:\n{}", self.screen())
                }
                None => std::thread::sleep(POLL),
            }
        }
    }

    /// Asserts a clean exit (code 0, no signal) and a restored terminal.
    fn assert_clean_exit(&mut self) {
        let status = self.wait_exit();
        let raw = self.raw_text();
        assert!(
            status.success() && status.signal().is_none(),
            "exit status {status:?}; output tail:\n{}",
            tail(&raw)
        );
        assert!(!raw.contains("panicked"), "a panic:\n{}", tail(&raw));
        let p = lock(&self.parser);
        assert!(
            !p.screen().alternate_screen(),
            "still on the alternate screen"
        );
        assert!(!p.screen().hide_cursor(), "cursor left hidden");
    }
}

impl Drop for Dash {
    fn drop(&mut self) {
        if !self.exited {
            let _ = self.child.kill();
            let _ = self.child.wait();
        }
    }
}

fn tail(s: &str) -> String {
    let chars: Vec<char> = s.chars().collect();
    let from = chars.len().saturating_sub(2000);
    chars[from..]
        .iter()
        .collect::<String>()
        .replace('\x1b', "\\e")
}

/// Pressure readings of the demo's gauges as shown: (gauge, value, unit).
fn readings(screen: &str) -> Vec<(String, String, String)> {
    let re = Regex::new(r"\b(cdg|chamber|ion)\s+(-?\d\.\d\de[-+]?\d+) (mbar|Pa|Torr|mTorr|hPa)\b")
        .expect("regex");
    re.captures_iter(screen)
        .map(|c| (c[1].to_string(), c[2].to_string(), c[3].to_string()))
        .collect()
}

/// The chamber gauge's reading as shown (value and unit), if on screen.
fn chamber_reading(screen: &str) -> Option<(String, String)> {
    readings(screen)
        .into_iter()
        .find(|r| r.0 == "chamber")
        .map(|r| (r.1, r.2))
}

/// The line of the screen mentioning `id`, if any: its row in the alarm
/// table (which starts at a panel's edge) before any other.
fn line_of<'a>(screen: &'a str, id: &str) -> Option<&'a str> {
    let row = [
        format!("│>{id} "),
        format!("│ {id} "),
        format!("|>{id} "),
        format!("| {id} "),
    ];
    screen
        .lines()
        .find(|l| row.iter().any(|r| l.contains(r.as_str())))
        .or_else(|| screen.lines().find(|l| l.contains(id)))
}

fn alarm_is(screen: &str, id: &str, states: &[&str]) -> bool {
    line_of(screen, id).is_some_and(|l| {
        l.split_whitespace()
            .any(|w| states.iter().any(|s| w.trim_matches('│') == *s))
    })
}

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("rarefy-pty-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("temp dir");
    d
}

#[test]
fn watch_demo_live_keys_and_clean_quit() {
    let mut d = Dash::spawn(&["watch", "--demo"], 24, 80);
    d.wait_text("LIVE");

    // Numbers change: the chamber reading at two moments differs.
    let first = chamber_reading(&d.wait_for("a chamber reading", |s| chamber_reading(s).is_some()))
        .expect("reading");
    assert_eq!(first.1, "mbar", "demo config shows mbar");
    d.wait_for("the chamber reading to change", |s| {
        chamber_reading(s).is_some_and(|r| r.0 != first.0)
    });

    // Help with the caution, closed by any key.
    d.send(b"?");
    let help = d.wait_text("CAUTION");
    assert!(help.contains("not a safety interlock"), "{help}");
    d.send(b"x");
    d.wait_for("help to close", |s| !s.contains("CAUTION"));

    // The unit key: mbar -> Pa.
    d.send(b"u");
    d.wait_for("the reading in Pa", |s| {
        chamber_reading(s).is_some_and(|r| r.1 == "Pa")
    });
    let s = d.screen();
    assert!(
        readings(&s).iter().all(|r| r.2 == "Pa"),
        "a reading not in Pa:\n{s}"
    );

    // An alarm raised by the demo, then acknowledged with A.
    d.wait_for("line-regime to alarm", |s| {
        alarm_is(s, "line-regime", &["unack", "rtn-unack"])
    });
    // A new alarm rings the bell (written just after its frame).
    let deadline = Instant::now() + WAIT;
    while lock(&d.parser).callbacks().bells == 0 {
        assert!(Instant::now() < deadline, "no bell for a new alarm");
        std::thread::sleep(POLL);
    }
    d.send(b"A");
    d.wait_for("line-regime acknowledged", |s| {
        alarm_is(s, "line-regime", &["acked", "normal"])
    });

    d.send(b"q");
    d.assert_clean_exit();
}

#[test]
fn resize_redraws_without_crashing() {
    let mut d = Dash::spawn(&["watch", "--demo"], 24, 80);
    d.wait_text("LIVE");
    for (rows, cols) in [(40, 120), (12, 50), (5, 18), (30, 100), (24, 80)] {
        d.resize(rows, cols);
        if rows < 6 || cols < 20 {
            d.wait_text("rarefy: terminal");
        } else {
            d.wait_for(&format!("LIVE at {cols}x{rows}"), |s| {
                s.contains("LIVE") && !s.contains("too small")
            });
        }
    }
    d.wait_for("a reading after resizing", |s| chamber_reading(s).is_some());
    d.send(b"q");
    d.assert_clean_exit();
}

#[test]
fn replay_goto_time_shows_the_trip_alarm() {
    let mut d = Dash::spawn(
        &[
            "replay",
            "sample-logs/demo.csv",
            "--config",
            "config/demo.toml",
            "--speed",
            "1",
        ],
        24,
        80,
    );
    d.wait_text("REPLAY");
    d.wait_text("2026-11-09 09:00");
    d.send(b"t");
    d.wait_text("go to time");
    d.send(b"09:31:15\r");
    let s = d.wait_for("ion-high unacknowledged", |s| {
        alarm_is(s, "ion-high", &["unack"])
    });
    assert!(s.contains("2026-11-09 09:31:1"), "title time:\n{s}");

    // Back to the start, then the alarm events one by one: the trip is
    // among them and shows as ALARM on the way.
    d.send(b"g");
    d.wait_for("back at the start", |s| {
        !alarm_is(s, "ion-high", &["unack"])
    });
    d.send(b" ");
    d.wait_text("PAUSED");
    let mut seen = false;
    for _ in 0..40 {
        let before = d.screen();
        d.send(b"n");
        // Wait until the screen changes (the jump drawn) or the events end.
        let deadline = Instant::now() + Duration::from_secs(2);
        while d.screen() == before && Instant::now() < deadline {
            std::thread::sleep(POLL);
        }
        if alarm_is(&d.screen(), "ion-high", &["unack"]) {
            seen = true;
            break;
        }
    }
    assert!(
        seen,
        "n never reached ion-high unacknowledged:\n{}",
        d.screen()
    );
    d.send(b"q");
    d.assert_clean_exit();
}

#[test]
fn sigterm_exits_zero_and_restores_the_terminal() {
    let mut d = Dash::spawn(&["watch", "--demo"], 24, 80);
    d.wait_text("LIVE");
    d.wait_for("a reading", |s| chamber_reading(s).is_some());
    nix::sys::signal::kill(
        nix::unistd::Pid::from_raw(d.pid()),
        nix::sys::signal::Signal::SIGTERM,
    )
    .expect("kill");
    d.assert_clean_exit();
}

#[test]
fn sigint_exits_zero_and_restores_the_terminal() {
    // Ctrl-C in raw mode is a key; a SIGINT from elsewhere (kill -INT, a
    // supervisor) must leave the same way.
    let mut d = Dash::spawn(&["watch", "--demo"], 24, 80);
    d.wait_text("LIVE");
    nix::sys::signal::kill(
        nix::unistd::Pid::from_raw(d.pid()),
        nix::sys::signal::Signal::SIGINT,
    )
    .expect("kill");
    d.assert_clean_exit();
}

/// The settled screen at the end of the log after `G`.
fn replay_end_screen() -> String {
    let mut d = Dash::spawn(
        &[
            "replay",
            "sample-logs/demo.csv",
            "--config",
            "config/demo.toml",
            "--speed",
            "max",
        ],
        24,
        80,
    );
    d.wait_text("REPLAY");
    d.send(b"G");
    d.wait_text("end of log");
    // Settle: the same screen on two polls a little apart.
    let mut last = d.screen();
    let deadline = Instant::now() + WAIT;
    loop {
        std::thread::sleep(Duration::from_millis(400));
        let now = d.screen();
        if now == last || Instant::now() > deadline {
            last = now;
            break;
        }
        last = now;
    }
    d.send(b"q");
    d.assert_clean_exit();
    last
}

#[test]
fn replay_is_deterministic() {
    let a = replay_end_screen();
    let b = replay_end_screen();
    assert!(a.contains("ion-high"), "{a}");
    assert_eq!(a, b, "two replays of the same log differ");
}

#[test]
fn device_escape_sequences_are_shown_escaped() {
    let dir = tempdir("esc");
    let f = dir.join("f.log");
    std::fs::write(&f, b"1e-6\n\x1b[2J\x1b]0;pwned\x07junk\n2e-6\n").expect("write");
    let uri = format!("file://{}?follow=true", f.display());
    let mut d = Dash::spawn(&["watch", "--source", &uri], 40, 120);
    d.wait_text("LIVE");
    let s = d.wait_text("last unparsed:");
    assert!(s.contains(r"\x1b[2J\x1b]0;pwned\x07junk"), "{s}");
    // The reading after the bad line arrived, and nothing was cleared.
    d.wait_text("2.00e-6 mbar");
    assert!(d.screen().contains("LIVE"));
    {
        let p = lock(&d.parser);
        assert!(
            !p.callbacks().titles.iter().any(|t| t.contains("pwned")),
            "window title set by device text: {:?}",
            p.callbacks().titles
        );
    }
    assert!(
        !d.raw_text().contains("\x1b]0;pwned"),
        "the device's sequence reached the terminal"
    );
    d.send(b"q");
    d.assert_clean_exit();
    let _ = std::fs::remove_dir_all(&dir);
}

fn write_rough_log(path: &Path) {
    // The chamber name comes from the file too, with a sequence in it.
    let mut s = String::from(
        "# rarefy log v1\n# chamber: rough \x1b]0;pwned\x07\x1b[2J test\ntime,p [mbar],q [mbar]\n",
    );
    let row = |s: &mut String, t: &str, p: &str, q: &str| {
        s.push_str(&format!("{t},{p},{q}\n"));
    };
    for i in 0..30 {
        let p = if i % 7 == 3 {
            "over-range".to_string()
        } else {
            format!("{}e-5", 1 + i % 9)
        };
        let q = if i % 5 == 0 {
            String::new()
        } else {
            "2e-3".into()
        };
        row(&mut s, &format!("2026-05-01T10:00:{i:02}.000Z"), &p, &q);
    }
    // Ten minutes without a row.
    row(
        &mut s,
        "2026-05-01T10:10:30.000Z",
        "over-range",
        "under-range",
    );
    row(&mut s, "2026-05-01T10:10:31.000Z", "3e-5", "sensor-off");
    // The clock jumps back.
    row(&mut s, "2026-05-01T10:05:00.000Z", "4e-5", "2e-3");
    row(&mut s, "2026-05-01T10:10:33.500Z", "5e-5", "stale");
    row(
        &mut s,
        "2026-05-01T10:10:34.000Z",
        "over-range",
        "over-range",
    );
    std::fs::write(path, s).expect("write log");
}

#[test]
fn a_rough_log_replays_without_panic() {
    let dir = tempdir("rough");
    let log = dir.join("rough.csv");
    write_rough_log(&log);
    let path = log.display().to_string();
    let mut d = Dash::spawn(&["replay", &path, "--speed", "max"], 24, 80);
    d.wait_text("end of log");
    // Move about the log with the keys: start, end, back, forward, alarms.
    for k in [
        &b"g"[..],
        b"G",
        b"{",
        b"[",
        b"\x1b[D",
        b"]",
        b"n",
        b"p",
        b"<",
        b">",
    ] {
        d.send(k);
        std::thread::sleep(Duration::from_millis(100));
    }
    d.send(b"G");
    d.wait_text("end of log");
    d.wait_text("rough");
    d.send(b"q");
    d.assert_clean_exit();
    assert!(
        !lock(&d.parser)
            .callbacks()
            .titles
            .iter()
            .any(|t| t.contains("pwned")),
        "window title set by the log's chamber name"
    );
    assert!(!d.raw_text().contains("\x1b]0;pwned"));
    let _ = std::fs::remove_dir_all(&dir);
}

/// A log recorded with `--config` and `--alarm` names them in its header, so
/// a replay without `--config` rebuilds the same alarms.
#[test]
fn replay_without_config_uses_the_one_named_in_the_log() {
    let dir = tempdir("named-config");
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .args([
            "record",
            "--config",
            "config/demo.toml",
            "--alarm",
            "cdg pressure below 1 mbar named rough-done",
            "--source",
        ])
        .arg(format!(
            "file://{}/sample-logs/demo.csv",
            env!("CARGO_MANIFEST_DIR")
        ))
        .arg("--out")
        .arg(&dir)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("record");
    assert_eq!(
        out.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let log = std::fs::read_dir(&dir)
        .expect("dir")
        .map(|e| e.expect("entry").path())
        .find(|p| p.extension().is_some_and(|e| e == "csv"))
        .expect("log");
    let text = std::fs::read_to_string(&log).expect("read");
    assert!(
        text.contains("# alarm.1: cdg pressure below 1 mbar named rough-done"),
        "{}",
        &text[..400]
    );
    assert!(
        text.lines()
            .any(|l| l.starts_with("# config: /") && l.ends_with("config/demo.toml"))
    );
    let mut d = Dash::spawn(
        &["replay", log.to_str().expect("utf-8"), "--speed", "max"],
        40,
        120,
    );
    d.wait_text("config named in the log");
    d.wait_text("end of log");
    let s = d.screen();
    assert!(line_of(&s, "ion-high").is_some(), "{s}");
    assert!(line_of(&s, "rough-done").is_some(), "{s}");
    d.send(b"q");
    d.assert_clean_exit();
}

/// `watch` with no source and a terminal on stdin says what to give, rather
/// than reading the keyboard as a gauge.
#[test]
fn watch_without_a_source_on_a_terminal_says_what_to_give() {
    let mut d = Dash::spawn(&["watch"], 24, 80);
    let status = d.wait_exit();
    assert_eq!(status.exit_code(), 2);
    assert!(d.raw_text().contains("no source"), "{}", d.raw_text());
}

/// Every file of a recording directory with the given extension, by name.
fn files(dir: &Path, ext: &str) -> Vec<(String, String)> {
    let mut out: Vec<(String, String)> = std::fs::read_dir(dir)
        .expect("dir")
        .map(|e| e.expect("entry").path())
        .filter(|p| p.extension().is_some_and(|e| e == ext))
        .map(|p| {
            (
                p.file_name().expect("name").to_string_lossy().into_owned(),
                std::fs::read_to_string(&p).expect("read"),
            )
        })
        .collect();
    out.sort();
    out
}

fn event_lines(dir: &Path) -> Vec<serde_json::Value> {
    files(dir, "jsonl")
        .iter()
        .flat_map(|(_, text)| {
            text.lines()
                .map(|l| serde_json::from_str(l).expect("event json"))
                .collect::<Vec<_>>()
        })
        .collect()
}

#[test]
fn watch_record_writes_what_record_writes_and_keeps_the_audit_trail() {
    let log = format!("file://{}/sample-logs/demo.csv", env!("CARGO_MANIFEST_DIR"));
    let by_record = tempdir("by-record");
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .args([
            "record",
            "--config",
            "config/demo.toml",
            "--source",
            &log,
            "--out",
        ])
        .arg(&by_record)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("record");
    assert_eq!(
        out.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );

    let by_watch = tempdir("by-watch");
    let dir = by_watch.to_str().expect("utf-8");
    let mut d = Dash::spawn_with(
        &[
            "watch",
            "--config",
            "config/demo.toml",
            "--source",
            &log,
            "--record",
            dir,
        ],
        40,
        120,
        &[("USER", "op-kestrel"), ("LOGNAME", "op-kestrel")],
    );
    d.wait_text("all sources ended");
    // Acknowledge everything waiting: each acknowledgement is an event in
    // the event log, with who did it.
    d.send(b"A");
    d.wait_for("the acknowledgements", |s| {
        s.lines()
            .any(|l| l.contains(" acknowledged") && !l.contains(" 0 acknowledged"))
    });
    d.send(b"q");
    d.assert_clean_exit();

    // The same log, byte for byte.
    let (a, b) = (files(&by_record, "csv"), files(&by_watch, "csv"));
    assert_eq!(a.len(), 1, "{a:?}");
    assert_eq!(a, b);
    // The same alarm and gate events; the watch's log has the operator's
    // acknowledgements besides.
    let strip = |v: &serde_json::Value| {
        let mut v = v.clone();
        v.as_object_mut().map(|m| m.remove("wall_time"));
        v
    };
    let recorded: Vec<_> = event_lines(&by_record).iter().map(strip).collect();
    let watched = event_lines(&by_watch);
    let automatic: Vec<_> = watched
        .iter()
        .filter(|e| e.get("operation").is_none())
        .map(strip)
        .collect();
    assert!(recorded.len() > 10, "{recorded:?}");
    assert_eq!(automatic, recorded);
    let acks: Vec<_> = watched
        .iter()
        .filter(|e| e["operation"] == "acknowledge")
        .collect();
    assert!(!acks.is_empty(), "{watched:?}");
    for e in acks {
        assert_eq!(e["user"], "op-kestrel", "{e}");
        // Acknowledged while active; back to normal once it had returned.
        assert!(e["to"] == "acknowledged" || e["to"] == "normal", "{e}");
        assert!(e["wall_time"].is_string(), "{e}");
        assert_eq!(e["v"], 1, "{e}");
    }
}

#[test]
fn a_source_that_never_connects_raises_alarms_after_stale_after() {
    let dir = tempdir("never-connects");
    let config = dir.join("quiet.toml");
    std::fs::write(
        &config,
        "[[gauge]]\nid = \"chamber\"\nkind = \"capacitance\"\n\n[alarms]\nstale_after = \"2 s\"\n",
    )
    .expect("config");
    // A port nothing listens on: the source retries and never connects.
    let port = std::net::TcpListener::bind("127.0.0.1:0")
        .expect("bind")
        .local_addr()
        .expect("addr")
        .port();
    let source = format!("tcp://127.0.0.1:{port}");
    let mut d = Dash::spawn(
        &[
            "watch",
            "--config",
            config.to_str().expect("utf-8"),
            "--source",
            &source,
        ],
        30,
        120,
    );
    d.wait_text("LIVE");
    let s = d.wait_for("the input and link alarms", |s| {
        alarm_is(s, "chamber.input", &["unacknowledged"])
            && alarm_is(s, "source-1.link", &["unacknowledged"])
    });
    assert!(
        line_of(&s, "chamber.input").is_some_and(|l| l.contains("no data")),
        "{s}"
    );
    assert!(
        line_of(&s, "source-1.link").is_some_and(|l| l.contains("not connected")),
        "{s}"
    );
    d.send(b"q");
    d.assert_clean_exit();
}

#[test]
fn at_80x24_alarm_rows_are_readable_and_help_scrolls() {
    let mut d = Dash::spawn(&["watch", "--demo"], 24, 80);
    d.wait_text("LIVE");
    // Each alarm row: id, severity, state word, value. The severities show
    // from the start; the states and values once the first readings are in
    // (on a loaded machine, a while after the first frame).
    let s = d.wait_for("the alarm rows with readings", |s| {
        line_of(s, "ion-high").is_some_and(|l| l.contains("trip"))
            && line_of(s, "line-regime").is_some_and(|l| l.contains("note"))
            && alarm_is(s, "wall-hot", &["normal"])
            && line_of(s, "wall-hot").is_some_and(|l| l.contains(" C"))
    });
    // Rows below the fold are announced.
    assert!(s.contains("more ↓"), "{s}");
    // Length names whole, regime words in their short form.
    assert!(s.contains("source-to-substrate"), "{s}");
    // Help scrolls to the legend of the short forms, and closes.
    d.send(b"?");
    d.wait_text("CAUTION");
    for _ in 0..5 {
        d.send(b"\x1b[6~");
    }
    let s = d.wait_text("Short forms");
    assert!(s.contains("rtn-unack"), "{s}");
    d.send(b"x");
    d.wait_for("help to close", |s| !s.contains("Short forms"));
    d.send(b"q");
    d.assert_clean_exit();
}

#[test]
fn replay_at_80x24_steps_with_r_names_events_and_keeps_quit() {
    let mut d = Dash::spawn(
        &[
            "replay",
            "sample-logs/demo.csv",
            "--config",
            "config/demo.toml",
            "--speed",
            "1",
        ],
        24,
        80,
    );
    // The footer may be drawn after the title on a loaded machine.
    d.wait_for("the replay's title and footer", |s| {
        let footer = s.lines().last().unwrap_or("");
        s.contains("REPLAY") && footer.contains("q:quit") && footer.contains("r:step")
    });
    // The window fits the 40-minute log: one hour.
    d.wait_text("last 60 min");
    d.send(b"r");
    d.wait_text("PAUSED");
    d.send(b"n");
    let s = d.wait_text("alarm event 1 of");
    assert!(s.contains("line-regime"), "{s}");
    // A time after the log's end goes to the end, and says so.
    d.send(b"t");
    d.wait_text("go to time");
    d.send(b"23:59\r");
    d.wait_text("after the log");
    d.send(b"q");
    d.assert_clean_exit();
}

/// SGR parameters that set a colour (foreground or background).
fn colour_codes(raw: &str) -> Vec<String> {
    let re = Regex::new(r"\x1b\[([0-9;]*)m").expect("regex");
    re.captures_iter(raw)
        .map(|c| c[1].to_string())
        .filter(|p| {
            p.split(';').any(|n| {
                matches!(
                    n.parse::<u32>(),
                    Ok(30..=38 | 40..=48 | 90..=97 | 100..=107)
                )
            })
        })
        .collect()
}

#[test]
fn term_dumb_and_no_color_send_no_colour_and_keep_series_apart() {
    for env in [&[("TERM", "dumb")][..], &[("NO_COLOR", "1")][..]] {
        let mut d = Dash::spawn_with(&["watch", "--demo"], 24, 80, env);
        d.wait_text("LIVE");
        // The series are told apart by their marks in the legend.
        d.wait_for("the trend legend", |s| s.contains("o chamber"));
        d.send(b"q");
        d.assert_clean_exit();
        let codes = colour_codes(&d.raw_text());
        assert!(codes.is_empty(), "{env:?}: colour codes {codes:?}");
    }
}
/// The mean free path shown in the kinetics panel, in metres.
fn shown_mean_free_path(screen: &str) -> Option<f64> {
    let re = Regex::new(r"λ mfp\s+(\d[\d.e+-]*) (nm|um|mm|m|km)\b").expect("regex");
    let c = re.captures(screen)?;
    let v: f64 = c[1].parse().ok()?;
    let scale = match &c[2] {
        "nm" => 1e-9,
        "um" => 1e-6,
        "mm" => 1e-3,
        "m" => 1.0,
        _ => 1e3,
    };
    Some(v * scale)
}

/// Late in a pump-down the capacitance gauge is under its range. The
/// kinetics panel follows the chamber pressure (the best gauge in range,
/// here the combined gauge) instead of the capacitance gauge's last valid
/// value, and says so; `c` cycles auto → each gauge → auto.
#[test]
fn kinetics_follow_the_chamber_pressure_and_c_picks_a_gauge() {
    let mut d = Dash::spawn(
        &[
            "replay",
            "sample-logs/pumpdown.csv",
            "--config",
            "config/demo.toml",
            "--from",
            "10:00",
            "--speed",
            "1",
        ],
        40,
        120,
    );
    d.wait_text("REPLAY");
    d.send(b" ");
    let s = d.wait_for("paused on the chamber pressure", |s| {
        s.contains("PAUSED") && s.contains("gas kinetics · auto: chamber")
    });
    // λ shown is the engine's for the combined gauge's reading and the
    // measured wall temperature as shown (3 significant digits each).
    let (p, want) = engine_mean_free_path(&s, "chamber", "N2");
    let shown = shown_mean_free_path(&s).expect("λ line");
    assert!(
        (shown / want - 1.0).abs() < 0.01,
        "λ shown {shown} m, engine {want} m at {p} mbar:\n{s}"
    );
    assert!(shown > 100.0, "hundreds of metres at 2e-7 mbar:\n{s}");
    // `c`: the capacitance gauge itself, frozen on its last valid value.
    d.send(b"c");
    let s = d.wait_text("gas kinetics · cdg · last valid");
    assert!(shown_mean_free_path(&s).is_some_and(|m| m < 1e-2), "{s}");
    d.send(b"c");
    d.wait_for("the combined gauge", |s| {
        s.contains("gas kinetics · chamber") && !s.contains("auto: chamber")
    });
    d.send(b"c");
    d.wait_text("gas kinetics · ion");
    d.send(b"c");
    d.wait_text("gas kinetics · auto: chamber");
    d.send(b"q");
    d.assert_clean_exit();
}

/// During the argon step of `process.csv` the demo config's gas step
/// `argon` puts Ar in force: the combined gauge (no thermal factor for Ar
/// above its crossover) is uncorrectable and the kinetics follow the
/// capacitance gauge, with λ the engine's for Ar at its reading (14.2 mm
/// at 5e-3 mbar and 22 C, as `rarefy calc -p "5e-3 mbar" --gas Ar` gives).
/// `m` is an audited choice of gas: the base gas N2 by the operator.
#[test]
fn replay_argon_step_shows_ar_and_m_changes_the_gas() {
    let mut d = Dash::spawn(
        &[
            "replay",
            "sample-logs/process.csv",
            "--config",
            "config/demo.toml",
            "--from",
            "07:25",
            "--speed",
            "1",
        ],
        40,
        120,
    );
    d.wait_text("REPLAY");
    d.send(b" ");
    let s = d.wait_for("paused on the argon step", |s| {
        s.contains("PAUSED") && s.contains("gas kinetics · auto: cdg")
    });
    assert!(s.contains("Ar (step argon)"), "{s}");
    let (p, want) = engine_mean_free_path(&s, "cdg", "Ar");
    let shown = shown_mean_free_path(&s).expect("λ line");
    assert!(
        (shown / want - 1.0).abs() < 0.01,
        "λ shown {shown} m, engine {want} m for Ar at {p} mbar:\n{s}"
    );
    assert!((shown - 14.2e-3).abs() < 0.3e-3, "about 14.2 mm:\n{s}");
    // `m`: auto → the base gas, chosen by the operator.
    d.send(b"m");
    let s = d.wait_text("N2 (operator");
    assert!(s.contains("gas: N2"), "{s}");
    d.send(b"m");
    d.wait_text("Ar (operator");
    d.send(b"m");
    d.wait_text("Ar (step argon)");
    d.send(b"q");
    d.assert_clean_exit();
}

/// The engine's mean free path in `gas` at `gauge`'s reading and the wall
/// temperature, both as the screen shows them (mbar, C): the shown reading
/// and the expected λ in metres.
fn engine_mean_free_path(screen: &str, gauge: &str, gas: &str) -> (String, f64) {
    let (p, unit) = readings(screen)
        .into_iter()
        .find(|r| r.0 == gauge)
        .map(|r| (r.1, r.2))
        .unwrap_or_else(|| panic!("no {gauge} reading:\n{screen}"));
    assert_eq!(unit, "mbar");
    let p_pa: f64 = p.parse::<f64>().expect("number") * 100.0;
    let t_c: f64 = Regex::new(r"wall\s+(-?\d+\.\d) C")
        .expect("regex")
        .captures(screen)
        .expect("wall temperature")[1]
        .parse()
        .expect("number");
    let mixture = rarefy::engine::mixture::Mixture::pure(
        rarefy::gas::GasTable::builtin()
            .get(gas)
            .unwrap_or_else(|e| panic!("no gas {gas}: {e}"))
            .clone(),
    );
    let want = rarefy::engine::derive(
        &rarefy::engine::Conditions::new(p_pa, t_c + 273.15),
        &mixture,
        &[],
        &rarefy::engine::Physics::default(),
    )
    .mean_free_path_m;
    (p, want)
}
