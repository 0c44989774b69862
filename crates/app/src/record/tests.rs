use super::*;
use crate::sample::{ChannelUnit, Fault};
use crate::units::{PressureUnit, TemperatureUnit};
use chrono::TimeZone;

const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);

/// A fresh directory under the system temp dir.
fn tempdir(tag: &str) -> PathBuf {
    use std::sync::atomic::{AtomicU32, Ordering};
    static N: AtomicU32 = AtomicU32::new(0);
    let d = std::env::temp_dir().join(format!(
        "rarefy-rec-{tag}-{}-{}",
        std::process::id(),
        N.fetch_add(1, Ordering::Relaxed)
    ));
    let _ = std::fs::remove_dir_all(&d);
    d
}

fn t(s: i64) -> DateTime<Utc> {
    Utc.timestamp_opt(1_780_000_000 + s, 0)
        .single()
        .expect("valid")
}

fn settings(dir: &Path) -> RecordSettings {
    RecordSettings {
        dir: dir.to_path_buf(),
        ..RecordSettings::default()
    }
}

/// (files, data rows per file) in name order.
fn files(dir: &Path) -> Vec<(PathBuf, Vec<String>)> {
    let mut paths: Vec<PathBuf> = std::fs::read_dir(dir)
        .expect("dir")
        .map(|e| e.expect("entry").path())
        .collect();
    paths.sort();
    paths
        .into_iter()
        .map(|p| {
            let text = std::fs::read_to_string(&p).expect("read");
            let rows = text
                .lines()
                .skip_while(|l| l.starts_with('#'))
                .skip(1)
                .map(str::to_string)
                .collect();
            (p, rows)
        })
        .collect()
}

#[test]
fn samples_of_one_line_share_a_row() {
    let dir = tempdir("rows");
    let chans = [ChannelInfo::new("a", MBAR), ChannelInfo::new("b", MBAR)];
    let mut r = Recorder::new(settings(&dir), LogMeta::default(), &chans);
    r.push_row(&[
        Sample::ok(t(0), "a", 1e-3, MBAR),
        Sample::ok(t(0), "b", 2e-3, MBAR),
    ]);
    r.push(&Sample::bad(t(1), "b", MBAR, Fault::OverRange));
    r.push(&Sample::ok(t(1), "b", 5.0, MBAR)); // another line at the same time
    assert_eq!(r.close(), 0);
    let f = files(&dir);
    assert_eq!(f.len(), 1);
    assert_eq!(
        f[0].1,
        [
            "2026-05-28T20:26:40.000Z,1e-3,2e-3",
            "2026-05-28T20:26:41.000Z,,over-range",
            "2026-05-28T20:26:41.000Z,,5e0"
        ]
    );
    assert_eq!(r.rows_written(), 3);
}

#[test]
fn rotates_by_size_with_a_header_in_every_file() {
    let dir = tempdir("size");
    let mut s = settings(&dir);
    s.max_bytes = Some(2000);
    let mut r = Recorder::new(s, LogMeta::default(), &[ChannelInfo::new("p", MBAR)]);
    for i in 0..500 {
        r.push(&Sample::ok(t(i), "p", 1e-6 * (i + 1) as f64, MBAR));
        if i % 10 == 0 {
            r.flush();
        }
    }
    r.close();
    let f = files(&dir);
    assert!(f.len() > 5, "{} files", f.len());
    let total: usize = f.iter().map(|(_, rows)| rows.len()).sum();
    assert_eq!(total, 500);
    for (p, _) in &f {
        let text = std::fs::read_to_string(p).expect("read");
        assert!(text.starts_with("# rarefy log v1\n"), "{}", p.display());
    }
}

#[test]
fn rotates_when_the_data_day_changes_and_when_a_channel_appears() {
    let dir = tempdir("day");
    let mut r = Recorder::new(
        settings(&dir),
        LogMeta::default(),
        &[ChannelInfo::new("p", MBAR)],
    );
    let day = 86_400;
    r.push(&Sample::ok(t(0), "p", 1.0, MBAR));
    r.push(&Sample::ok(t(day), "p", 2.0, MBAR));
    r.flush();
    let wall = ChannelUnit::Temperature(TemperatureUnit::C);
    r.push(&Sample::ok(t(day + 1), "wall", 22.0, wall));
    r.close();
    let f = files(&dir);
    assert_eq!(f.len(), 3, "{f:?}");
    assert_eq!(f.iter().map(|(_, r)| r.len()).sum::<usize>(), 3);
    let last = std::fs::read_to_string(&f[2].0).expect("read");
    assert!(last.contains("time,p [mbar],wall [C]"), "{last}");
}

#[test]
fn a_removed_directory_is_survived_without_loss() {
    let dir = tempdir("gone");
    let mut r = Recorder::new(
        settings(&dir),
        LogMeta::default(),
        &[ChannelInfo::new("p", MBAR)],
    );
    for i in 0..10 {
        r.push(&Sample::ok(t(i), "p", 1.0, MBAR));
    }
    assert!(r.flush());
    std::fs::remove_dir_all(&dir).expect("remove");
    for i in 10..20 {
        r.push(&Sample::ok(t(i), "p", 1.0, MBAR));
    }
    // The old file is gone with its directory; the next rows go to a new
    // file in a recreated directory.
    r.flush();
    r.close();
    let f = files(&dir);
    assert_eq!(f.iter().map(|(_, r)| r.len()).sum::<usize>(), 10);
    assert_eq!(r.rows_lost(), 0);
}

#[test]
fn an_unwritable_place_buffers_then_counts_losses_exactly() {
    let dir = tempdir("blocked");
    std::fs::write(&dir, b"a file where the directory should be").expect("block");
    let mut s = settings(&dir);
    s.buffer_rows = 100;
    let mut r = Recorder::new(s, LogMeta::default(), &[ChannelInfo::new("p", MBAR)]);
    for i in 0..150 {
        r.push(&Sample::ok(t(i), "p", 1.0, MBAR));
        r.flush();
    }
    assert!(r.is_failing());
    let events = r.take_events();
    assert!(
        events
            .iter()
            .any(|e| matches!(e, RecordEvent::WriteFailed { .. })),
        "{events:?}"
    );
    // Nothing is reported row by row while the spell lasts.
    assert!(
        !events.iter().any(|e| matches!(e, RecordEvent::Lost { .. })),
        "{events:?}"
    );
    // 150 rows, 100 kept.
    assert_eq!(r.buffered(), 100);
    assert_eq!(r.rows_lost(), 50);
    // Once the place is writable again everything kept is written, and the
    // loss is reported once: its count and the data times it covers.
    std::fs::remove_file(&dir).expect("unblock");
    assert!(r.flush());
    let events = r.take_events();
    let lost: Vec<_> = events
        .iter()
        .filter(|e| matches!(e, RecordEvent::Lost { .. }))
        .collect();
    assert_eq!(
        lost,
        [&RecordEvent::Lost {
            rows: 50,
            total: 50,
            from: t(0),
            to: t(49),
        }],
        "{events:?}"
    );
    assert!(
        events
            .iter()
            .any(|e| matches!(e, RecordEvent::Recovered { .. }))
    );
    r.close();
    assert_eq!(files(&dir).iter().map(|(_, r)| r.len()).sum::<usize>(), 100);
}

#[test]
fn rows_lost_until_the_end_are_reported_once_at_close() {
    let dir = tempdir("blocked-to-the-end");
    std::fs::write(&dir, b"a file where the directory should be").expect("block");
    let mut s = settings(&dir);
    s.buffer_rows = 10;
    let mut r = Recorder::new(s, LogMeta::default(), &[ChannelInfo::new("p", MBAR)]);
    for i in 0..1000 {
        r.push(&Sample::ok(t(i), "p", 1.0, MBAR));
        r.flush();
    }
    assert_eq!(r.close(), 10);
    let lost: Vec<_> = r
        .take_events()
        .into_iter()
        .filter(|e| matches!(e, RecordEvent::Lost { .. }))
        .collect();
    assert_eq!(
        lost,
        [RecordEvent::Lost {
            rows: 990,
            total: 990,
            from: t(0),
            to: t(989),
        }]
    );
}
