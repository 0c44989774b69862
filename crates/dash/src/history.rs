//! Bounded, decimated history for the trend: a pyramid of fixed rings of
//! buckets (1 s, 8 s, 64 s, 512 s wide), each bucket keeping the minimum and
//! maximum of what fell into it, so that spikes survive decimation and memory
//! stays fixed however long the dashboard runs.

use std::collections::{BTreeMap, VecDeque};

/// Bucket widths of the levels, s.
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
#[derive(Debug, Clone, Default)]
pub struct Series {
    levels: [VecDeque<Bucket>; 4],
    samples: u64,
}

impl Series {
    /// Adds a value at time `t` (seconds on the history's own origin).
    pub fn push(&mut self, t: f64, v: f64) {
        if !v.is_finite() || !t.is_finite() {
            return;
        }
        self.samples += 1;
        for (level, width) in self.levels.iter_mut().zip(LEVELS) {
            let index = (t / width).floor() as i64;
            match level.back_mut() {
                Some(b) if b.index == index => {
                    b.min = b.min.min(v);
                    b.max = b.max.max(v);
                }
                // A clock jump backwards: start again from here on this
                // level rather than mixing the order.
                Some(b) if b.index > index => {
                    level.clear();
                    level.push_back(Bucket {
                        index,
                        min: v,
                        max: v,
                    });
                }
                _ => {
                    if level.len() == CAPACITY {
                        level.pop_front();
                    }
                    level.push_back(Bucket {
                        index,
                        min: v,
                        max: v,
                    });
                }
            }
        }
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

/// The history of every channel.
#[derive(Debug, Clone, Default)]
pub struct History {
    series: BTreeMap<String, Series>,
}

impl History {
    /// Adds a value of channel `id` at `t` s.
    pub fn push(&mut self, id: &str, t: f64, v: f64) {
        if let Some(s) = self.series.get_mut(id) {
            s.push(t, v);
        } else {
            let mut s = Series::default();
            s.push(t, v);
            self.series.insert(id.to_string(), s);
        }
    }

    /// A channel's history.
    pub fn get(&self, id: &str) -> Option<&Series> {
        self.series.get(id)
    }

    /// Samples folded into buckets that already held one (shown as
    /// "decimated" on the status line).
    pub fn decimated(&self) -> u64 {
        self.series
            .values()
            .map(|s| s.samples.saturating_sub(s.levels[0].len() as u64))
            .sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

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
