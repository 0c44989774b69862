//! Bounded, decimated history for the trend: a pyramid of fixed rings of
//! buckets (1 s, 8 s, 64 s, 512 s wide), each bucket keeping the minimum and
//! maximum of what fell into it, so that spikes survive decimation and memory
//! stays fixed however long the dashboard runs.

use std::collections::{BTreeMap, VecDeque};

use crate::sample::same_id;

/// Bucket widths of the levels, s: 8^l (the index of a bucket on a level
/// is that of its 1 s bucket divided by the width).
pub const LEVELS: [f64; 4] = [1.0, 8.0, 64.0, 512.0];
/// Buckets kept per level.
pub const CAPACITY: usize = 2048;

/// One bucket: its index on its level (time / width) and the range of values.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bucket {
    /// floor(t / width).
    pub index: i64,
    /// Smallest value in it.
    pub min: f64,
    /// Largest value in it.
    pub max: f64,
}

impl Bucket {
    /// Start time of the bucket, s.
    pub fn start(&self, width: f64) -> f64 {
        self.index as f64 * width
    }
}

/// The history of one channel.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Series {
    levels: [VecDeque<Bucket>; 4],
    samples: u64,
    /// Buckets begun on each level, ever: the last bucket of a level is
    /// its `started - 1`th (a replay's keyframes store the rings by these
    /// positions).
    started: [u64; 4],
}

impl Series {
    /// Adds a value at time `t` (seconds on the history's own origin).
    ///
    /// Every level's last bucket takes every value pushed since it began,
    /// and a coarser level's last bucket began no later than a finer
    /// one's (a new bucket on a level means a new one on every finer
    /// level): so it holds the finer bucket's range. A value strictly
    /// inside a level's last bucket of its own index is inside every
    /// coarser one's too, and the levels above it are not touched (most
    /// readings of a steady gauge stop at the 1 s or 8 s level). The
    /// result is that of updating every level (property-tested).
    pub fn push(&mut self, t: f64, v: f64) {
        self.push_levels::<true>(t, v);
    }

    /// [`Series::push`], stopping at a level whose bucket strictly holds
    /// the value when `STOP`, else updating every level.
    #[inline]
    fn push_levels<const STOP: bool>(&mut self, t: f64, v: f64) {
        if !v.is_finite() || !t.is_finite() {
            return;
        }
        self.samples += 1;
        let second = floor_i64(t);
        for ((l, level), started) in self.levels.iter_mut().enumerate().zip(&mut self.started) {
            let index = second >> (3 * l);
            match level.back_mut() {
                Some(b) if b.index == index => {
                    if STOP && b.min < v && v < b.max {
                        return;
                    }
                    b.min = b.min.min(v);
                    b.max = b.max.max(v);
                    continue;
                }
                // A clock jump backwards: start again from here on this
                // level rather than mixing the order.
                Some(b) if b.index > index => level.clear(),
                _ => {
                    if level.len() == CAPACITY {
                        level.pop_front();
                    }
                }
            }
            level.push_back(Bucket {
                index,
                min: v,
                max: v,
            });
            *started += 1;
        }
    }

    /// A series from its parts (as [`Series::level`], [`Series::samples`]
    /// and [`Series::started`] give them).
    pub(crate) fn from_parts(
        levels: [VecDeque<Bucket>; 4],
        samples: u64,
        started: [u64; 4],
    ) -> Self {
        Series {
            levels,
            samples,
            started,
        }
    }

    /// The buckets kept on level `l` (0: the finest), oldest first.
    pub(crate) fn level(&self, l: usize) -> &VecDeque<Bucket> {
        &self.levels[l]
    }

    /// Buckets begun on level `l`, ever.
    pub(crate) fn started(&self, l: usize) -> u64 {
        self.started[l]
    }

    /// Samples pushed.
    pub fn samples(&self) -> u64 {
        self.samples
    }

    /// The finest level that covers `[from, to]` (or the coarsest), with its
    /// bucket width, and the buckets in that span.
    pub fn span(&self, from: f64, to: f64) -> (f64, Vec<Bucket>) {
        let mut chosen = LEVELS.len() - 1;
        for (i, (level, width)) in self.levels.iter().zip(LEVELS).enumerate() {
            let covers =
                level.front().is_some_and(|b| b.start(width) <= from) || level.len() < CAPACITY;
            if covers {
                chosen = i;
                break;
            }
        }
        let width = LEVELS[chosen];
        let buckets = self.levels[chosen]
            .iter()
            .filter(|b| b.start(width) + width > from && b.start(width) <= to)
            .copied()
            .collect();
        (width, buckets)
    }

    /// Buckets in memory, all levels.
    pub fn buckets(&self) -> usize {
        self.levels.iter().map(VecDeque::len).sum()
    }
}

/// `t.floor() as i64` for a finite `t` without a call into the C
/// library (x86-64's baseline has no rounding instruction): the cast
/// truncates toward zero and saturates, and a negative `t` with a fraction
/// is one below its truncation.
#[inline]
fn floor_i64(t: f64) -> i64 {
    let s = t as i64;
    if (s as f64) > t {
        s.saturating_sub(1)
    } else {
        s
    }
}

/// The history of every channel.
#[derive(Debug, Clone, Default)]
pub struct History {
    /// Every channel's series, sorted by id.
    series: Vec<(String, Series)>,
    /// Where [`History::push`] looks first: the entry after the one it
    /// found last. Rows name their channels in the same order each time, so
    /// this is nearly always the one (a lookup by name otherwise).
    next: usize,
}

/// Two histories are equal when their series are: where the next lookup
/// starts is no part of what they hold.
impl PartialEq for History {
    fn eq(&self, other: &Self) -> bool {
        self.series == other.series
    }
}

impl History {
    /// Adds a value of channel `id` at `t` s.
    pub fn push(&mut self, id: &str, t: f64, v: f64) {
        let i = match self.series.get(self.next) {
            Some((k, _)) if same_id(k, id) => self.next,
            _ => match self.find(id) {
                Ok(i) => i,
                Err(i) => {
                    self.series.insert(i, (id.to_string(), Series::default()));
                    i
                }
            },
        };
        self.series[i].1.push(t, v);
        self.next = if i + 1 < self.series.len() { i + 1 } else { 0 };
    }

    /// Where `id` is, or where it would go.
    fn find(&self, id: &str) -> Result<usize, usize> {
        self.series.binary_search_by(|(k, _)| k.as_str().cmp(id))
    }

    /// A channel's history.
    pub fn get(&self, id: &str) -> Option<&Series> {
        self.find(id).ok().map(|i| &self.series[i].1)
    }

    /// Every channel's history, by id.
    pub fn series(&self) -> impl Iterator<Item = (&String, &Series)> {
        self.series.iter().map(|(id, s)| (id, s))
    }

    /// A history of these series.
    pub(crate) fn from_series(series: BTreeMap<String, Series>) -> Self {
        History {
            series: series.into_iter().collect(),
            next: 0,
        }
    }

    /// Samples folded into buckets that already held one (shown as
    /// "decimated" on the status line).
    pub fn decimated(&self) -> u64 {
        self.series
            .iter()
            .map(|(_, s)| s.samples.saturating_sub(s.levels[0].len() as u64))
            .sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        /// The history found by its lookup hint is the one a map by name
        /// gives: channels in a fixed order, in any order, new ones coming
        /// late, and names that share their start.
        #[test]
        fn the_lookup_hint_finds_what_the_name_does(
            pushes in proptest::collection::vec((0usize..6, 0u8..3, -5.0f64..5.0), 0..400),
            fixed in any::<bool>(),
        ) {
            const IDS: [&str; 6] = ["wall", "a", "chamber", "chamber2", "ch", "z"];
            let mut history = History::default();
            let mut by_name: BTreeMap<String, Series> = BTreeMap::new();
            for (n, &(k, dt, v)) in pushes.iter().enumerate() {
                // In the fixed case, every row names its channels in turn.
                let id = if fixed { IDS[n % IDS.len()] } else { IDS[k] };
                let t = n as f64 * 0.5 + f64::from(dt);
                history.push(id, t, v);
                by_name.entry(id.to_string()).or_default().push(t, v);
            }
            for id in IDS {
                prop_assert_eq!(history.get(id), by_name.get(id));
            }
            let ids: Vec<&String> = history.series().map(|(id, _)| id).collect();
            prop_assert_eq!(ids, by_name.keys().collect::<Vec<_>>());
            prop_assert_eq!(&history, &History::from_series(by_name));
        }
    }

    #[test]
    fn spikes_survive_decimation() {
        let mut s = Series::default();
        for i in 0..100_000 {
            let v = if i == 50_000 { 1e-2 } else { 1e-6 };
            s.push(i as f64 * 0.1, v);
        }
        // Whole span: the coarsest level, still holding the spike.
        let (width, b) = s.span(0.0, 10_000.0);
        assert!(width >= 8.0);
        assert!(b.iter().any(|b| b.max == 1e-2));
        assert!(b.iter().all(|b| b.min == 1e-6));
    }

    #[test]
    fn memory_is_fixed() {
        let mut s = Series::default();
        for i in 0..2_000_000 {
            s.push(i as f64, 1.0);
        }
        assert!(s.buckets() <= CAPACITY * LEVELS.len());
        // A short recent window comes from the finest level.
        let (width, b) = s.span(1_999_000.0, 2_000_000.0);
        assert_eq!(width, 1.0);
        assert_eq!(b.len(), 1000);
    }

    /// Two weeks of one gauge at 10 Hz in data time (a week is 6 048 000
    /// samples): the finer levels are full after the first hour or so and
    /// stay at their capacity; the coarsest (512 s) fills in its 12 days and
    /// then stops growing. Allocations are bounded too, not only lengths.
    #[test]
    fn memory_stays_bounded_over_weeks_at_10_hz() {
        const DAY: usize = 864_000;
        let mut s = Series::default();
        let mut per_day = Vec::new();
        for i in 0..14 * DAY {
            // A slow ripple on a base pressure, never equal twice in a row.
            let t = i as f64 / 10.0;
            s.push(t, 1e-6 * (1.5 + (t / 3600.0).sin()));
            if (i + 1) % DAY == 0 {
                let lens: Vec<usize> = s.levels.iter().map(VecDeque::len).collect();
                for (l, level) in s.levels.iter().enumerate() {
                    assert!(level.len() <= CAPACITY, "level {l}: {lens:?}");
                    assert!(level.capacity() <= 2 * CAPACITY, "level {l}");
                }
                per_day.push(lens);
            }
        }
        assert_eq!(s.samples(), 14 * DAY as u64);
        // Levels 0–2 (1 s, 8 s, 64 s: 34 min, 4.6 h, 36 h of history) are
        // full from the second day on.
        for lens in &per_day[1..] {
            assert_eq!(lens[..3], [CAPACITY; 3], "{per_day:?}");
        }
        // The 512 s level holds a week whole, then tops out at its capacity.
        assert_eq!(per_day[6][3], (7 * 86_400) / 512 + 1, "{per_day:?}");
        assert_eq!(per_day[12][3], CAPACITY);
        assert_eq!(per_day[13][3], CAPACITY);
        assert_eq!(s.buckets(), CAPACITY * LEVELS.len());
        // A week's window still comes whole from the coarsest level.
        let now = 14.0 * 86_400.0;
        let (width, b) = s.span(now - 7.0 * 86_400.0, now);
        assert_eq!(width, 512.0);
        assert!(b.len() >= 7 * 86_400 / 512, "{}", b.len());
    }

    #[test]
    fn bucket_indices_are_the_time_over_the_width_rounded_down() {
        let mut x: u64 = 3;
        for i in 0..200_000 {
            x = x
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            let u = (x >> 11) as f64 / (1u64 << 53) as f64;
            let t = match i % 4 {
                0 => (u - 0.5) * 4096.0,
                1 => (u - 0.5) * 1e15,
                2 => ((u * 1e6).round() - 5e5) * 8.0,
                _ => (u - 0.5) * 1e-300,
            };
            let mut s = Series::default();
            s.push(t, 1.0);
            for (l, width) in LEVELS.iter().enumerate() {
                assert_eq!(
                    s.levels[l][0].index,
                    (t / width).floor() as i64,
                    "{t} {width}"
                );
            }
        }
    }

    #[test]
    fn floor_is_the_library_floor() {
        let mut x: u64 = 11;
        let mut ts = vec![
            0.0,
            -0.0,
            0.5,
            -0.5,
            -1.0,
            -1.5,
            1e-300,
            -1e-300,
            f64::MIN_POSITIVE,
            -4.9e-324,
            9.2e18,
            9.3e18,
            -9.2e18,
            -9.3e18,
            i64::MIN as f64,
            i64::MAX as f64,
            f64::MAX,
            f64::MIN,
            4503599627370495.5,
            -4503599627370495.5,
        ];
        for _ in 0..100_000 {
            x = x
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            ts.push(f64::from_bits(x));
            ts.push(((x >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 1e7);
        }
        for t in ts.into_iter().filter(|t| t.is_finite()) {
            assert_eq!(floor_i64(t), t.floor() as i64, "{t:e}");
        }
    }

    /// Pushes that stop at the first level whose bucket holds the value
    /// leave the series as pushing on every level does: steady noise,
    /// equal and signed-zero values, clock jumps back and forward, rings
    /// that wrap.
    #[test]
    fn stopping_early_is_pushing_everywhere() {
        let mut x: u64 = 5;
        let mut next = || {
            x = x
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (x >> 11) as f64 / (1u64 << 53) as f64
        };
        for run in 0..40 {
            let (mut fast, mut every) = (Series::default(), Series::default());
            let mut t = (next() - 0.5) * 1e4;
            for i in 0..6_000 {
                t += match (run + i) % 97 {
                    0 => -(next() * 3_000.0),
                    1 => next() * 20_000.0,
                    _ => 0.1 * next() * f64::from(run % 4),
                };
                let v = match run % 5 {
                    0 => 1e-6 * (1.0 + 0.01 * (next() - 0.5)),
                    1 => [0.0, -0.0, 1.0][(next() * 3.0) as usize % 3],
                    2 => (t / 60.0).sin(),
                    3 => (next() * 4.0).floor(),
                    _ => next() * 1e-3,
                };
                fast.push(t, v);
                every.push_levels::<false>(t, v);
                if i % 500 == 0 {
                    assert_eq!(fast, every, "run {run}, push {i}");
                }
            }
            assert_eq!(fast, every, "run {run}");
            for l in 0..LEVELS.len() {
                assert_eq!(fast.started(l), every.started(l));
            }
        }
    }

    #[test]
    fn gaps_show_as_missing_buckets() {
        let mut s = Series::default();
        for t in [0.0, 1.0, 2.0, 30.0, 31.0] {
            s.push(t, 1.0);
        }
        let (_, b) = s.span(0.0, 40.0);
        let idx: Vec<i64> = b.iter().map(|b| b.index).collect();
        assert_eq!(idx, [0, 1, 2, 30, 31]);
    }

    #[test]
    fn clock_jumps_back_do_not_panic() {
        let mut s = Series::default();
        s.push(100.0, 1.0);
        s.push(10.0, 2.0);
        s.push(11.0, f64::NAN);
        let (_, b) = s.span(0.0, 200.0);
        assert_eq!(b.len(), 1);
    }
}
