//! A replay's keyframes: the index pass plays the log through an [`App`]
//! exactly as playback does and, every so many rows, keeps what is needed
//! to go on from there — where the reader stands and what it carries, the
//! monitor, the pipeline's counts, the last gas cell, and what the app
//! shows (its trend history, counters, gauges, the latest note and source
//! error, how many events had come). A seek restores the last keyframe at
//! or before its target and plays at most that many rows, and the result
//! is the one a replay from the start gives.
//!
//! The trend history is the one large part (up to 8 192 buckets a
//! channel), so it is not kept in memory: at each keyframe the buckets of
//! its rings not written before are written to a spill file (unlinked at
//! once, so it goes when the replay ends), and a keyframe keeps only where
//! each ring starts and ends and its last, still open, bucket. Rings move
//! forward, so a bucket is written once however many keyframes hold it.
//! The monitor's rate windows (every reading of the last window, per
//! gauge: most of a monitor's size) go to the same file, a keyframe
//! keeping the rest of the monitor ([`PackedMonitor`]).
//!
//! Keyframes need a plain file to reopen at a byte offset; a log read
//! from a pipe or device, or a spill file that cannot be made, gives none,
//! and seeks play from the start as before; so do they once the file's
//! length or modification time is no longer what the index saw.

use std::collections::{BTreeMap, HashMap, VecDeque};
use std::fs::File;
use std::os::unix::fs::FileExt;
use std::sync::{Arc, Mutex};

use chrono::{DateTime, Utc};

use super::app::{App, EVENTS_KEPT, GaugeInfo};
use super::history::{Bucket, History, Series};
use super::run::{Player, ReplaySetup};
use crate::alarm::{AlarmState, Event, Monitor, PackedMonitor};
use crate::sample::ChannelUnit;
use rarefy_app::pipeline::replay::{LogIndex, Resume, Rows};
use rarefy_app::pipeline::{Counts, Item, Sink};

/// Rows between keyframes: a seek plays at most this many. About 25 ms of
/// playback on the project's machine.
pub const EVERY: u64 = 50_000;

/// Keyframes kept at most: when there would be more, every other one goes
/// and the spacing doubles, so that a replay's memory does not grow with
/// the log (each keyframe is a few KiB; 128 at most, and a seek in a log of
/// ten million rows plays at most 100 000 rows, about 50 ms).
pub const MOST: usize = 128;

/// Bytes of one bucket in the spill file.
const BUCKET_BYTES: usize = 24;

/// Where one level's ring of one channel stood at a keyframe.
#[derive(Debug, Clone, Copy, PartialEq)]
struct RingMark {
    /// Buckets begun on the level, ever ([`Series::started`]).
    started: u64,
    /// Buckets in the ring.
    len: usize,
    /// The last bucket, which later rows may still widen.
    last: Bucket,
}

/// Where one channel's history stood at a keyframe.
#[derive(Debug, Clone, PartialEq)]
struct SeriesMark {
    id: String,
    samples: u64,
    rings: [RingMark; 4],
}

/// The state a seek can start from.
#[derive(Debug, Clone)]
struct Keyframe {
    /// The latest row time before it: a seek to this time or later may
    /// start here.
    latest: DateTime<Utc>,
    /// Where reading goes on.
    at: Resume,
    /// The last row's gas cell.
    gas: Option<String>,
    /// The monitor, its rate windows' points in the spill file at
    /// `points` (offset, length): most of its size.
    monitor: PackedMonitor,
    points: (u64, u64),
    counts: Counts,
    /// The app's row and sample counters.
    rows: u64,
    samples: u64,
    /// How many of [`Inner::channels`] had come.
    channels: usize,
    origin: Option<DateTime<Utc>>,
    note: Option<(DateTime<Utc>, String, String)>,
    source_error: Option<String>,
    /// How many of the log's events had come.
    events: usize,
    history: Vec<SeriesMark>,
}

/// Buckets written for one level of one channel: `count` buckets from
/// position `first` on, at byte `offset` of the spill file.
#[derive(Debug, Clone, Copy)]
struct Segment {
    first: u64,
    count: u64,
    offset: u64,
}

/// The spill file of the history's buckets.
struct Spill {
    file: File,
    len: u64,
    /// Per channel and level: what was written, in order of position.
    segments: HashMap<(String, usize), Vec<Segment>>,
}

impl Spill {
    /// An unnamed file in the temporary directory.
    fn create() -> std::io::Result<Spill> {
        static N: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
        let n = N.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        let path =
            std::env::temp_dir().join(format!("rarefy-replay-{}-{n}.spill", std::process::id()));
        let file = std::fs::OpenOptions::new()
            .read(true)
            .write(true)
            .create_new(true)
            .open(&path)?;
        // Gone from the directory now; the space is freed when it closes.
        std::fs::remove_file(&path)?;
        Ok(Spill {
            file,
            len: 0,
            segments: HashMap::new(),
        })
    }

    /// Writes what the history's rings hold that was not written before
    /// (the open last buckets apart), and gives where each ring stands.
    fn mark(&mut self, history: &History) -> std::io::Result<Vec<SeriesMark>> {
        let mut marks = Vec::new();
        let mut bytes = Vec::new();
        for (id, series) in history.series() {
            let mut rings = [RingMark {
                started: 0,
                len: 0,
                last: Bucket {
                    index: 0,
                    min: 0.0,
                    max: 0.0,
                },
            }; 4];
            for (l, ring) in rings.iter_mut().enumerate() {
                let level = series.level(l);
                let started = series.started(l);
                let Some(last) = level.back() else { continue };
                *ring = RingMark {
                    started,
                    len: level.len(),
                    last: *last,
                };
                // Positions of the ring: first..started; the last is open.
                let first = started - level.len() as u64;
                let segments = self.segments.entry((id.clone(), l)).or_default();
                let written = segments.last().map_or(0, |s| s.first + s.count);
                let from = first.max(written);
                let to = started - 1;
                if from >= to {
                    continue;
                }
                bytes.clear();
                for b in level.range((from - first) as usize..(to - first) as usize) {
                    bytes.extend_from_slice(&b.index.to_le_bytes());
                    bytes.extend_from_slice(&b.min.to_bits().to_le_bytes());
                    bytes.extend_from_slice(&b.max.to_bits().to_le_bytes());
                }
                self.file.write_all_at(&bytes, self.len)?;
                segments.push(Segment {
                    first: from,
                    count: to - from,
                    offset: self.len,
                });
                self.len += bytes.len() as u64;
            }
            marks.push(SeriesMark {
                id: id.clone(),
                samples: series.samples(),
                rings,
            });
        }
        Ok(marks)
    }

    /// Appends `bytes`; gives where they are (offset, length).
    fn put(&mut self, bytes: &[u8]) -> std::io::Result<(u64, u64)> {
        self.file.write_all_at(bytes, self.len)?;
        let at = (self.len, bytes.len() as u64);
        self.len += bytes.len() as u64;
        Ok(at)
    }

    /// The bytes [`Spill::put`] put at `at`.
    fn get(&self, at: (u64, u64)) -> std::io::Result<Vec<u8>> {
        let len = usize::try_from(at.1).map_err(std::io::Error::other)?;
        let mut bytes = vec![0; len];
        self.file.read_exact_at(&mut bytes, at.0)?;
        Ok(bytes)
    }

    /// The history as it stood at `marks`.
    fn history(&self, marks: &[SeriesMark]) -> std::io::Result<History> {
        let mut series = BTreeMap::new();
        let mut bytes = Vec::new();
        for m in marks {
            let mut levels: [VecDeque<Bucket>; 4] = Default::default();
            let mut started = [0; 4];
            for (l, ring) in m.rings.iter().enumerate() {
                started[l] = ring.started;
                if ring.len == 0 {
                    continue;
                }
                let level = &mut levels[l];
                level.reserve_exact(ring.len);
                let mut at = ring.started - ring.len as u64;
                let end = ring.started - 1;
                let segments = self
                    .segments
                    .get(&(m.id.clone(), l))
                    .map_or(&[][..], Vec::as_slice);
                // The segment holding `at`, and those after it.
                let mut i = segments.partition_point(|s| s.first + s.count <= at);
                while at < end {
                    let s = segments.get(i).filter(|s| s.first <= at).ok_or_else(|| {
                        std::io::Error::other("a keyframe's bucket was never written")
                    })?;
                    let n = (s.first + s.count).min(end) - at;
                    bytes.resize(n as usize * BUCKET_BYTES, 0);
                    self.file.read_exact_at(
                        &mut bytes,
                        s.offset + (at - s.first) * BUCKET_BYTES as u64,
                    )?;
                    for c in bytes.chunks_exact(BUCKET_BYTES) {
                        let word = |k: usize| {
                            let mut w = [0u8; 8];
                            w.copy_from_slice(&c[k * 8..k * 8 + 8]);
                            u64::from_le_bytes(w)
                        };
                        level.push_back(Bucket {
                            index: word(0) as i64,
                            min: f64::from_bits(word(1)),
                            max: f64::from_bits(word(2)),
                        });
                    }
                    at += n;
                    i += 1;
                }
                level.push_back(ring.last);
            }
            series.insert(m.id.clone(), Series::from_parts(levels, m.samples, started));
        }
        Ok(History::from_series(series))
    }
}

struct Inner {
    frames: Vec<Keyframe>,
    /// The log file's length and modification time after the index pass:
    /// its offsets hold while they are the same.
    file: (u64, Option<std::time::SystemTime>),
    /// Channels in the order the log's rows first gave them.
    channels: Vec<(String, ChannelUnit)>,
    spill: Spill,
}

/// A replay's keyframes (cheap to clone: shared).
#[derive(Clone)]
pub struct Keyframes(Arc<Inner>);

impl std::fmt::Debug for Keyframes {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "Keyframes({} keyframes, {} bytes spilled)",
            self.0.frames.len(),
            self.0.spill.len
        )
    }
}

/// The same keyframes (of the same index pass).
impl PartialEq for Keyframes {
    fn eq(&self, other: &Self) -> bool {
        Arc::ptr_eq(&self.0, &other.0)
    }
}

impl Keyframes {
    /// How many there are.
    pub fn len(&self) -> usize {
        self.0.frames.len()
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.0.frames.is_empty()
    }

    /// Bytes written to the spill file.
    pub fn spilled_bytes(&self) -> u64 {
        self.0.spill.len
    }

    /// The last keyframe a seek to `t` may start from: every row before
    /// it is at or before `t`.
    pub(crate) fn last_before(&self, t: DateTime<Utc>) -> Option<usize> {
        self.0
            .frames
            .partition_point(|k| k.latest <= t)
            .checked_sub(1)
    }

    /// Rows before keyframe `i`.
    pub(crate) fn rows_before(&self, i: usize) -> u64 {
        self.0.frames[i].at.taken
    }

    /// Puts `app` and `player` where keyframe `i` is: as a replay from the
    /// start (`rewound`: the app was not reset yet) or from where they are
    /// (an earlier point) would have them after its rows. Nothing changes
    /// when it fails.
    pub(crate) fn restore(
        &self,
        i: usize,
        app: &mut App,
        player: &mut Player,
        setup: &ReplaySetup,
        rewound: bool,
    ) -> Result<(), String> {
        let k = &self.0.frames[i];
        if file_stamp(&setup.file) != Some(self.0.file) {
            return Err(format!(
                "{} changed since it was indexed",
                setup.file.display()
            ));
        }
        let history = self
            .0
            .spill
            .history(&k.history)
            .map_err(|e| format!("cannot read the replay's spill file: {e}"))?;
        let monitor = self
            .0
            .spill
            .get(k.points)
            .map_err(|e| format!("cannot read the replay's spill file: {e}"))
            .and_then(|bytes| k.monitor.unpack(&bytes))?;
        player.rows.resume(&setup.file, &k.at)?;
        player.gas.clone_from(&k.gas);
        if rewound {
            super::run::reset(app, setup);
        }
        app.pipeline.restore(monitor, k.counts);
        app.history = history;
        app.origin = k.origin;
        for (id, unit) in &self.0.channels[..k.channels] {
            if !app.gauges.iter().any(|g| g.id == *id) {
                app.gauges.push(GaugeInfo {
                    id: id.clone(),
                    label: id.clone(),
                    kind: None,
                    unit: *unit,
                });
            }
        }
        app.counters.rows = k.rows;
        app.counters.samples = k.samples;
        let kept: Vec<Event> = {
            let all = app.replay.as_ref().map_or(&[][..], |r| r.events.as_slice());
            let all = &all[..k.events.min(all.len())];
            let passed = &all[app.events_seen.min(all.len())..];
            if passed
                .iter()
                .any(|e| e.change.alarm_to() == Some(AlarmState::Unacknowledged))
            {
                app.bell = app.bell_enabled;
            }
            all[all.len().saturating_sub(EVENTS_KEPT)..].to_vec()
        };
        // The events the playhead passed, and those before, as the list
        // holds them after playing every row.
        if app.events_seen < k.events {
            app.events = kept.into();
        }
        app.events_seen = k.events;
        app.note.clone_from(&k.note);
        app.source_error.clone_from(&k.source_error);
        app.dirty = true;
        Ok(())
    }
}

/// A file's length and modification time.
fn file_stamp(file: &std::path::Path) -> Option<(u64, Option<std::time::SystemTime>)> {
    std::fs::metadata(file)
        .ok()
        .map(|m| (m.len(), m.modified().ok()))
}

/// Collects every event of the index pass.
#[derive(Clone, Default)]
struct Events(Arc<Mutex<Vec<Event>>>);

impl Events {
    fn len(&self) -> usize {
        self.0.lock().map_or(0, |e| e.len())
    }

    fn take(&self) -> Vec<Event> {
        self.0
            .lock()
            .map(|mut e| std::mem::take(&mut *e))
            .unwrap_or_default()
    }
}

impl Sink for Events {
    fn accept(&mut self, item: Item<'_>, _: &Monitor) {
        if let Item::Event(e) = item
            && let Ok(mut all) = self.0.lock()
        {
            all.push(e.clone());
        }
    }
}

/// Reads the whole log once, played through an app as playback plays it:
/// start, end, gaps and every event, and a keyframe every `every` rows
/// (`None` for a log that is not a plain file, or when the spill file
/// cannot be written).
///
/// At most `most` keyframes are kept: past that, every other one is
/// dropped and keyframes are taken half as often from then on.
pub fn index(
    setup: &ReplaySetup,
    every: u64,
    most: usize,
) -> Result<(LogIndex, Option<Keyframes>), String> {
    let mut app = App::new("", Monitor::new(setup.monitor.clone()), Vec::new());
    app.pipeline.set_gases(setup.gases.clone());
    let events = Events::default();
    app.pipeline.add_sink(Box::new(events.clone()));
    let mut player = Player {
        rows: Rows::open_indexing(&setup.file, setup.foreign.as_ref(), every)?,
        gas: None,
    };
    let mut spill = if Rows::can_resume(&setup.file) {
        Spill::create().ok()
    } else {
        None
    };
    let mut frames = Vec::new();
    let batch = usize::try_from(every.max(1)).unwrap_or(usize::MAX);
    // A keyframe after every `stride`-th batch of rows.
    let (mut batches, mut stride) = (0u64, 1u64);
    loop {
        player.feed(&mut app, None, batch);
        if player.next_time().is_none() {
            break;
        }
        batches += 1;
        if batches % stride != 0 {
            continue;
        }
        let Some(s) = &mut spill else { continue };
        if frames.len() >= most.max(2) {
            // Keyframe i came after batch (i + 1) · stride: those after a
            // multiple of twice the stride stay.
            let mut i = 0;
            frames.retain(|_| {
                i += 1;
                i % 2 == 0
            });
            stride *= 2;
            if batches % stride != 0 {
                continue;
            }
        }
        let (Some(at), Some(latest)) = (
            player.rows.resume_point(),
            player.rows.span().and_then(|s| s.end),
        ) else {
            continue;
        };
        let mut bytes = Vec::new();
        let monitor = app.monitor().pack(&mut bytes);
        match s.mark(&app.history).and_then(|h| Ok((h, s.put(&bytes)?))) {
            Ok((history, points)) => frames.push(Keyframe {
                latest,
                at: at.clone(),
                gas: player.gas.clone(),
                monitor,
                points,
                counts: app.pipeline.counts(),
                rows: app.counters.rows,
                samples: app.counters.samples,
                channels: app.gauges.len(),
                origin: app.origin,
                note: app.note.clone(),
                source_error: app.source_error.clone(),
                events: events.len(),
                history,
            }),
            Err(_) => {
                // No room for the spill: seeks play from the start.
                spill = None;
                frames.clear();
            }
        }
    }
    let ix = LogIndex::of(&player.rows, events.take(), &setup.file)?;
    let stamp = file_stamp(&setup.file);
    let keyframes = spill.zip(stamp).map(|(spill, file)| {
        Keyframes(Arc::new(Inner {
            frames,
            file,
            channels: app.gauges.iter().map(|g| (g.id.clone(), g.unit)).collect(),
            spill,
        }))
    });
    Ok((ix, keyframes))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Histories whose rings are full on every level, marked at many
    /// points (with clocks jumping back, channels appearing late, marks
    /// close together and far apart), read back from the spill equal to
    /// the history at each mark.
    #[test]
    fn the_spill_gives_back_every_marked_history() {
        let mut spill = Spill::create().expect("spill");
        let mut history = History::default();
        let mut kept = Vec::new();
        let mut t = 0.0;
        let mut x: u64 = 1;
        for i in 0..1_200_000u64 {
            x = x
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            let r = x >> 40;
            t += match i {
                300_000 | 600_000 => -50_000.0,
                _ if r.is_multiple_of(10_000) => 3_000.0,
                _ => (r % 7) as f64,
            };
            let v = 1e-6 * (1.0 + (r % 1000) as f64);
            history.push("a", t, v);
            if i.is_multiple_of(3) {
                history.push("b", t, v * 2.0);
            }
            if i > 700_000 {
                history.push("late", t, v / 3.0);
            }
            if i.is_multiple_of(37_813) || (650_000..650_050).contains(&i) {
                let marks = spill.mark(&history).expect("mark");
                kept.push((marks, history.clone()));
            }
        }
        assert!(kept.len() > 60);
        let full = history.get("a").expect("a");
        for l in 0..4 {
            assert_eq!(full.level(l).len(), crate::history::CAPACITY, "level {l}");
        }
        for (n, (marks, want)) in kept.iter().enumerate() {
            let got = spill.history(marks).expect("read");
            assert!(got == *want, "mark {n}");
        }
        // Each bucket is written once: less than every ring at every mark.
        let rings: u64 = kept
            .iter()
            .flat_map(|(m, _)| m.iter().flat_map(|s| s.rings.iter().map(|r| r.len as u64)))
            .sum();
        assert!(
            spill.len < rings * BUCKET_BYTES as u64 / 2,
            "{} bytes",
            spill.len
        );
    }
}
