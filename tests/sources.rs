//! Sources against real parts: a pseudo-terminal standing in for a serial
//! port (unplugged and replugged), loopback TCP servers that restart, and a
//! file that is appended, rotated and truncated while it is followed.

use std::io::Write;
use std::os::fd::OwnedFd;
use std::path::{Path, PathBuf};
use std::time::Duration;

use rarefy::parse::Decoder;
use rarefy::parse::plain::PlainDecoder;
use rarefy::parse::template::{Template, TemplateDecoder, TemplateSpec};
use rarefy::sample::{ChannelUnit, SourceEvent, SourceState, Status};
use rarefy::source::{self, Poll, SourceSpec, SourceUri};
use rarefy::units::PressureUnit;
use tokio::io::{AsyncReadExt, AsyncWriteExt};
use tokio::sync::mpsc;

const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);
const WAIT: Duration = Duration::from_secs(20);

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("rarefy-src-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("temp dir");
    d
}

/// What a test has seen from a source.
#[derive(Default, Debug)]
struct Seen {
    values: Vec<(String, Option<f64>, Status)>,
    unparsed: Vec<String>,
    states: Vec<SourceState>,
    errors: Vec<String>,
}

struct Probe {
    rx: mpsc::Receiver<SourceEvent>,
    seen: Seen,
}

impl Probe {
    fn start(
        uri: &str,
        decoder: Box<dyn Decoder>,
        poll: Option<Poll>,
    ) -> (Probe, tokio::task::JoinHandle<()>) {
        let (tx, rx) = mpsc::channel(64);
        let spec = SourceSpec {
            uri: SourceUri::parse(uri).expect("uri"),
            decoder,
            poll,
        };
        (
            Probe {
                rx,
                seen: Seen::default(),
            },
            source::spawn(spec, tx),
        )
    }

    fn take(&mut self, ev: SourceEvent) {
        match ev {
            SourceEvent::Samples(s) => self
                .seen
                .values
                .extend(s.iter().map(|s| (s.channel.clone(), s.value(), s.status()))),
            SourceEvent::Unparsed { text, .. } => self.seen.unparsed.push(text),
            SourceEvent::Status { state, .. } => self.seen.states.push(state),
            SourceEvent::Error { message, .. } => self.seen.errors.push(message),
            // None of these sources reads a log with a gas column.
            SourceEvent::Gas { .. } => {}
        }
    }

    /// Receives until `done` holds; panics after `WAIT` with what was seen.
    async fn until(&mut self, what: &str, done: impl Fn(&Seen) -> bool) {
        let deadline = tokio::time::Instant::now() + WAIT;
        while !done(&self.seen) {
            match tokio::time::timeout_at(deadline, self.rx.recv()).await {
                Ok(Some(ev)) => self.take(ev),
                Ok(None) => panic!("source ended while waiting for {what}: {:?}", self.seen),
                Err(_) => panic!("timed out waiting for {what}: {:?}", self.seen),
            }
        }
    }

    async fn connected(&mut self, n: usize) {
        self.until("connected", |s| {
            s.states
                .iter()
                .filter(|st| **st == SourceState::Connected)
                .count()
                >= n
        })
        .await;
    }

    fn values(&self) -> Vec<f64> {
        self.seen.values.iter().filter_map(|v| v.1).collect()
    }
}

fn controller_template() -> Box<dyn Decoder> {
    // The project's own invented readout: "VX G1 <value> <word> G2 <value>
    // <word>", then CR LF.
    let spec = TemplateSpec {
        pattern: r"^VX G1 (?P<a>\S+) (?P<a_status>[A-Z]+) G2 (?P<b>\S+) (?P<b_status>[A-Z]+)$"
            .into(),
        unit: Some(MBAR),
        status: [
            ("GOOD", Status::Ok),
            ("UNDR", Status::UnderRange),
            ("OVER", Status::OverRange),
        ]
        .into_iter()
        .map(|(k, v)| (k.to_string(), v))
        .collect(),
        ..TemplateSpec::default()
    };
    Box::new(TemplateDecoder::new(vec![
        Template::new(&spec).expect("valid template"),
    ]))
}

/// A pseudo-terminal whose slave is reachable at a stable symlink, as a
/// replugged USB adapter is at a stable udev name.
struct FakePort {
    master: std::fs::File,
}

impl FakePort {
    fn plug(link: &Path) -> FakePort {
        let pty = nix::pty::openpty(None, None).expect("openpty");
        let slave_path = nix::unistd::ttyname(&pty.slave).expect("ttyname");
        let _ = std::fs::remove_file(link);
        std::os::unix::fs::symlink(&slave_path, link).expect("symlink");
        // The source opens the slave by path; this end is not needed.
        drop::<OwnedFd>(pty.slave);
        FakePort {
            master: std::fs::File::from(pty.master),
        }
    }

    fn send(&mut self, bytes: &[u8]) {
        self.master.write_all(bytes).expect("write to pty");
        self.master.flush().expect("flush pty");
    }

    fn unplug(self, link: &Path) {
        drop(self.master);
        let _ = std::fs::remove_file(link);
    }
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn serial_port_through_a_pty_with_unplug_and_replug() {
    let dir = tempdir("serial");
    let link = dir.join("ttyGAUGE0");
    let mut port = FakePort::plug(&link);
    let uri = format!("serial://{}?baud=9600", link.display());
    let (mut p, task) = Probe::start(&uri, controller_template(), None);
    p.connected(1).await;

    // Lines in the template, one split across writes, garbage and invalid
    // UTF-8, and a very long line.
    port.send(b"VX G1 +1.00E-06 GOOD G2 +2.00E-03 GOOD\r\n");
    port.send(b"VX G1 +1.10E-0");
    tokio::time::sleep(Duration::from_millis(50)).await;
    port.send(b"6 GOOD G2 +9.99E+02 OVER\r\n");
    port.send(b"\x1b[2J\xff\xfe garbage\r\n");
    let long = vec![b'7'; 20_000];
    port.send(&long);
    port.send(b"\r\nVX G1 +1.20E-06 GOOD G2 +1.00E-04 UNDR\r\n");
    p.until("three records", |s| s.values.len() >= 6).await;
    p.until("two unparsed", |s| s.unparsed.len() >= 2).await;
    assert_eq!(p.values(), [1.0e-6, 2.0e-3, 1.1e-6, 1.2e-6]);
    assert_eq!(p.seen.values[3].2, Status::OverRange);
    assert_eq!(p.seen.values[3].1, None);
    assert_eq!(p.seen.values[5].2, Status::UnderRange);
    assert!(
        p.seen.unparsed[0].starts_with("\\x1b[2J\\xff\\xfe garbage"),
        "{:?}",
        p.seen.unparsed
    );
    assert!(
        p.seen.unparsed[1].contains("20000 bytes"),
        "{:?}",
        p.seen.unparsed
    );

    // Unplug: the reader sees the port go and retries.
    port.unplug(&link);
    p.until("retrying", |s| {
        s.states
            .iter()
            .any(|st| matches!(st, SourceState::Retrying { .. }))
    })
    .await;
    assert!(
        p.seen.errors.iter().any(|e| e.contains("disconnected")),
        "{:?}",
        p.seen.errors
    );

    // Replug at the same path: it reconnects, and no record after that is lost.
    let mut port = FakePort::plug(&link);
    p.connected(2).await;
    let before = p.seen.values.len();
    for i in 0..200 {
        port.send(format!("VX G1 +{i}.5E-07 GOOD G2 +1.0E-03 GOOD\r\n").as_bytes());
    }
    p.until("200 records after replug", |s| {
        s.values.len() >= before + 400
    })
    .await;
    let after: Vec<f64> = p.seen.values[before..]
        .iter()
        .step_by(2)
        .filter_map(|v| v.1)
        .collect();
    let expected: Vec<f64> = (0..200)
        .map(|i| format!("{i}.5E-07").parse().expect("num"))
        .collect();
    assert_eq!(after, expected);
    task.abort();
    port.unplug(&link);
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn tcp_client_survives_server_restarts_and_polls() {
    let listener = tokio::net::TcpListener::bind("127.0.0.1:0")
        .await
        .expect("bind");
    let addr = listener.local_addr().expect("addr");
    let poll = Poll {
        bytes: b"?\r\n".to_vec(),
        every: Duration::from_millis(100),
    };
    let decoder = Box::new(PlainDecoder::new("p", MBAR));
    let (mut p, task) = Probe::start(&format!("tcp://{addr}"), decoder, Some(poll));

    // First server life: answer two polls, then close the connection.
    let (mut conn, _) = listener.accept().await.expect("accept");
    for i in 1..=2 {
        let mut buf = [0u8; 3];
        conn.read_exact(&mut buf).await.expect("poll request");
        assert_eq!(&buf, b"?\r\n");
        conn.write_all(format!("{i}e-6\n").as_bytes())
            .await
            .expect("write");
    }
    p.until("two readings", |s| s.values.len() >= 2).await;
    drop(conn);
    drop(listener);
    p.until("retrying", |s| {
        s.states
            .iter()
            .any(|st| matches!(st, SourceState::Retrying { .. }))
    })
    .await;

    // The server restarts on the same port.
    let listener = tokio::net::TcpListener::bind(addr).await.expect("rebind");
    let (mut conn, _) = listener.accept().await.expect("accept again");
    conn.write_all(b"3e-6\n4e-6\n").await.expect("write");
    p.until("two more readings", |s| s.values.len() >= 4).await;
    assert_eq!(p.values(), [1e-6, 2e-6, 3e-6, 4e-6]);
    assert_eq!(
        p.seen
            .states
            .iter()
            .filter(|s| **s == SourceState::Connected)
            .count(),
        2
    );
    task.abort();
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn followed_file_is_appended_rotated_and_truncated() {
    let dir = tempdir("follow");
    let path = dir.join("chamber.log");
    std::fs::write(&path, "1e-6\n2e-6\n").expect("write");
    let uri = format!("file://{}?follow=true", path.display());
    let (mut p, task) = Probe::start(&uri, Box::new(PlainDecoder::new("p", MBAR)), None);
    p.until("existing lines", |s| s.values.len() >= 2).await;

    let append = |text: &str| {
        let mut f = std::fs::OpenOptions::new()
            .append(true)
            .open(&path)
            .expect("open");
        f.write_all(text.as_bytes()).expect("append");
    };
    // A partial line is held back until it is complete.
    append("3e-6\n4e");
    p.until("appended line", |s| s.values.len() >= 3).await;
    tokio::time::sleep(Duration::from_millis(600)).await;
    append("-6\n");
    p.until("completed partial line", |s| s.values.len() >= 4)
        .await;

    // Rotation: the file is renamed away, its last line written just
    // before, and a new file started.
    append("5e-6\n");
    std::fs::rename(&path, dir.join("chamber.log.1")).expect("rotate");
    std::fs::write(&path, "6e-6\n").expect("new file");
    p.until("lines across rotation", |s| s.values.len() >= 6)
        .await;

    // Truncation in place.
    tokio::time::sleep(Duration::from_millis(500)).await;
    std::fs::write(&path, "").expect("truncate");
    tokio::time::sleep(Duration::from_millis(600)).await;
    append("7e-6\n");
    p.until("line after truncation", |s| s.values.len() >= 7)
        .await;

    assert_eq!(p.values(), [1e-6, 2e-6, 3e-6, 4e-6, 5e-6, 6e-6, 7e-6]);
    assert!(
        p.seen.errors.iter().any(|e| e.contains("rotated")),
        "{:?}",
        p.seen.errors
    );
    assert!(
        p.seen.errors.iter().any(|e| e.contains("truncated")),
        "{:?}",
        p.seen.errors
    );
    assert!(p.seen.unparsed.is_empty(), "{:?}", p.seen.unparsed);
    task.abort();
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_followed_file_truncated_and_regrown_at_once_is_read_again_from_its_start() {
    let dir = tempdir("regrow");
    let path = dir.join("chamber.log");
    std::fs::write(&path, "1e-6\n2e-6\n3e-6\n4e").expect("write");
    let uri = format!("file://{}?follow=true", path.display());
    let (mut p, task) = Probe::start(&uri, Box::new(PlainDecoder::new("p", MBAR)), None);
    p.until("existing lines", |s| s.values.len() >= 3).await;
    // Truncated and at once written again, longer than before, within one
    // poll: the size alone never shows the truncation.
    let burst: Vec<String> = (1..=40).map(|i| format!("{i}e-9\n")).collect();
    std::fs::write(&path, burst.concat()).expect("truncate and burst");
    p.until("every line of the burst", |s| s.values.len() >= 43)
        .await;
    let mut expected = vec![1e-6, 2e-6, 3e-6];
    expected.extend((1..=40).map(|i| format!("{i}e-9").parse::<f64>().unwrap_or(f64::NAN)));
    assert_eq!(p.values(), expected);
    assert!(
        p.seen.errors.iter().any(|e| e.contains("truncated")),
        "{:?}",
        p.seen.errors
    );
    // The unfinished line the truncation cut off is counted, not lost.
    assert_eq!(
        p.seen.unparsed,
        ["incomplete line cut off by truncation: 4e"],
        "{:?}",
        p.seen
    );
    task.abort();
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_file_read_once_ends_with_its_last_line() {
    let dir = tempdir("once");
    let path = dir.join("short.log");
    std::fs::write(&path, "1e-6\r\n2e-6\r3e-6").expect("write");
    let uri = format!("file://{}", path.display());
    let (mut p, _task) = Probe::start(&uri, Box::new(PlainDecoder::new("p", MBAR)), None);
    p.until("ended", |s| s.states.contains(&SourceState::Ended))
        .await;
    assert_eq!(p.values(), [1e-6, 2e-6, 3e-6]);
}
