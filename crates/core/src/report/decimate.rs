//! A time series thinned to a bounded number of time buckets, for drawing a
//! run of any length (`rarefy report --plot`).
//!
//! Time is cut into buckets of equal width; each bucket keeps four points of
//! what fell into it: the earliest, the latest, the smallest value and the
//! largest value. Joined in time order they draw the same envelope as every
//! point would at the bucket's width, so a one-reading spike survives. When
//! the points span more buckets than the capacity, the width doubles and
//! neighbouring buckets merge (two buckets' four points merge into four), so
//! memory never grows past the capacity, however long the log. A log that
//! fits (fewer readings than the capacity, at the finest width) is kept
//! whole.

/// Buckets a plot keeps per series: enough for a line as wide as a page at
/// better than one bucket per pixel column.
pub const PLOT_BUCKETS: usize = 2000;

/// Width of the buckets before any merge, s: finer than any log's interval,
/// so that a short log keeps every reading.
pub const FINEST_WIDTH_S: f64 = 1e-3;

/// A point: time (s) and value.
pub type Point = (f64, f64);

#[derive(Debug, Clone, Copy, PartialEq)]
struct Bucket {
    /// Index: the bucket covers `[k·w, (k+1)·w)`.
    k: i64,
    first: Point,
    last: Point,
    min: Point,
    max: Point,
}

impl Bucket {
    fn new(k: i64, p: Point) -> Self {
        Bucket {
            k,
            first: p,
            last: p,
            min: p,
            max: p,
        }
    }

    fn add(&mut self, p: Point) {
        if p.0 < self.first.0 {
            self.first = p;
        }
        if p.0 >= self.last.0 {
            self.last = p;
        }
        // Ties keep the earlier point, so the result does not depend on
        // the order points arrive in.
        if p.1 < self.min.1 || (p.1 == self.min.1 && p.0 < self.min.0) {
            self.min = p;
        }
        if p.1 > self.max.1 || (p.1 == self.max.1 && p.0 < self.max.0) {
            self.max = p;
        }
    }

    fn merge(&mut self, other: &Bucket) {
        for p in [other.first, other.min, other.max, other.last] {
            self.add(p);
        }
    }

    /// Its distinct points in time order.
    fn points(&self, out: &mut Vec<Point>) {
        let mut ps = [self.first, self.min, self.max, self.last];
        ps.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
        let start = out.len();
        for p in ps {
            if out[start..].last() != Some(&p) {
                out.push(p);
            }
        }
    }
}

/// A bounded min/max-per-bucket thinning of one series (see the module
/// documentation).
#[derive(Debug, Clone, PartialEq)]
pub struct Decimator {
    capacity: usize,
    width_s: f64,
    /// Ordered by `k`; `last.k − first.k < capacity`.
    buckets: Vec<Bucket>,
    points_seen: u64,
}

impl Default for Decimator {
    fn default() -> Self {
        Decimator::new(PLOT_BUCKETS)
    }
}

impl Decimator {
    /// An empty series of at most `capacity` buckets (at least 2) starting
    /// at [`FINEST_WIDTH_S`].
    pub fn new(capacity: usize) -> Self {
        Decimator::with_width(capacity, FINEST_WIDTH_S)
    }

    /// An empty series of at most `capacity` buckets (at least 2) of
    /// `width_s` to start with.
    pub fn with_width(capacity: usize, width_s: f64) -> Self {
        Decimator {
            capacity: capacity.max(2),
            width_s: if width_s.is_finite() && width_s > 0.0 {
                width_s
            } else {
                FINEST_WIDTH_S
            },
            buckets: Vec::new(),
            points_seen: 0,
        }
    }

    /// Adds a point at `t_s` seconds (any origin; times may go back). Points
    /// with a time or value that is not finite are ignored.
    pub fn push(&mut self, t_s: f64, value: f64) {
        if !t_s.is_finite() || !value.is_finite() {
            return;
        }
        self.points_seen += 1;
        let p = (t_s, value);
        let k = self.index(t_s);
        match self.buckets.last_mut() {
            Some(b) if b.k == k => b.add(p),
            Some(b) if b.k < k => self.buckets.push(Bucket::new(k, p)),
            None => self.buckets.push(Bucket::new(k, p)),
            // Time went back: find or make its bucket.
            Some(_) => match self.buckets.binary_search_by_key(&k, |b| b.k) {
                Ok(i) => {
                    if let Some(b) = self.buckets.get_mut(i) {
                        b.add(p);
                    }
                }
                Err(i) => self.buckets.insert(i, Bucket::new(k, p)),
            },
        }
        while self.span() >= self.capacity as i64 {
            self.coarsen();
        }
    }

    fn index(&self, t_s: f64) -> i64 {
        // Saturating: a time beyond ±9e18 widths lands in the end bucket.
        (t_s / self.width_s).floor() as i64
    }

    /// Buckets between the first and the last, both counted, less one.
    fn span(&self) -> i64 {
        match (self.buckets.first(), self.buckets.last()) {
            (Some(a), Some(b)) => b.k.saturating_sub(a.k),
            _ => 0,
        }
    }

    /// Doubles the width: bucket k goes into k div 2.
    fn coarsen(&mut self) {
        self.width_s *= 2.0;
        let mut merged: Vec<Bucket> = Vec::with_capacity(self.buckets.len() / 2 + 1);
        for mut b in self.buckets.drain(..) {
            b.k = b.k.div_euclid(2);
            match merged.last_mut() {
                Some(m) if m.k == b.k => m.merge(&b),
                _ => merged.push(b),
            }
        }
        self.buckets = merged;
    }

    /// The kept points in time order: each bucket's earliest, smallest,
    /// largest and latest, without repeats.
    pub fn points(&self) -> Vec<Point> {
        let mut out = Vec::with_capacity(self.buckets.len() * 4);
        for b in &self.buckets {
            b.points(&mut out);
        }
        out
    }

    /// Buckets in use (at most the capacity).
    pub fn buckets(&self) -> usize {
        self.buckets.len()
    }

    /// The capacity, buckets.
    pub fn capacity(&self) -> usize {
        self.capacity
    }

    /// The present bucket width, s.
    pub fn width_s(&self) -> f64 {
        self.width_s
    }

    /// Points added (finite ones).
    pub fn points_seen(&self) -> u64 {
        self.points_seen
    }

    /// Whether no point was added.
    pub fn is_empty(&self) -> bool {
        self.buckets.is_empty()
    }

    /// The smallest and the largest value added.
    pub fn value_range(&self) -> Option<(f64, f64)> {
        let lo = self
            .buckets
            .iter()
            .map(|b| b.min.1)
            .min_by(f64::total_cmp)?;
        let hi = self
            .buckets
            .iter()
            .map(|b| b.max.1)
            .max_by(f64::total_cmp)?;
        Some((lo, hi))
    }

    /// The earliest and the latest time added.
    pub fn time_range(&self) -> Option<(f64, f64)> {
        let lo = self
            .buckets
            .iter()
            .map(|b| b.first.0)
            .min_by(f64::total_cmp)?;
        let hi = self
            .buckets
            .iter()
            .map(|b| b.last.0)
            .max_by(f64::total_cmp)?;
        Some((lo, hi))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sorted(ps: &[Point]) -> bool {
        ps.windows(2).all(|w| w[0].0 <= w[1].0)
    }

    #[test]
    fn a_short_series_is_kept_whole() {
        let mut d = Decimator::new(100);
        let pts: Vec<Point> = (0..50).map(|i| (i as f64 * 5.0, 1e-3 * i as f64)).collect();
        for &(t, v) in &pts {
            d.push(t, v);
        }
        assert_eq!(d.points(), pts);
        assert_eq!(d.points_seen(), 50);
    }

    #[test]
    fn a_long_series_stays_within_the_capacity() {
        let mut d = Decimator::new(200);
        for i in 0..1_000_000u32 {
            d.push(f64::from(i) * 0.5, (f64::from(i) * 0.01).sin() + 2.0);
            assert!(d.buckets() <= 200);
        }
        assert!(d.buckets() <= 200 && d.buckets() > 100, "{}", d.buckets());
        let ps = d.points();
        assert!(ps.len() <= 4 * 200, "{}", ps.len());
        assert!(sorted(&ps));
        // The ends survive.
        assert_eq!(ps.first().map(|p| p.0), Some(0.0));
        assert_eq!(ps.last().map(|p| p.0), Some(999_999.0 * 0.5));
        assert_eq!(d.time_range(), Some((0.0, 999_999.0 * 0.5)));
    }

    #[test]
    fn spikes_up_and_down_survive() {
        let mut d = Decimator::new(50);
        for i in 0..100_000u32 {
            let t = f64::from(i);
            let v = match i {
                31_337 => 1e3,
                77_001 => 1e-9,
                _ => 1e-5,
            };
            d.push(t, v);
        }
        let ps = d.points();
        assert!(ps.contains(&(31_337.0, 1e3)), "max kept");
        assert!(ps.contains(&(77_001.0, 1e-9)), "min kept");
        assert_eq!(d.value_range(), Some((1e-9, 1e3)));
        assert!(ps.len() <= 200);
    }

    #[test]
    fn every_bucket_keeps_its_min_and_max() {
        // Against a brute force at the final width: each bucket of the raw
        // points has its min and max among the kept points.
        let mut d = Decimator::new(64);
        let raw: Vec<Point> = (0..20_000u32)
            .map(|i| {
                let t = f64::from(i) * 0.37;
                (t, ((f64::from(i) * 7.3).sin() * 1e3).round())
            })
            .collect();
        for &(t, v) in &raw {
            d.push(t, v);
        }
        let w = d.width_s();
        let kept = d.points();
        let mut by: std::collections::BTreeMap<i64, Vec<Point>> = Default::default();
        for &p in &raw {
            by.entry((p.0 / w).floor() as i64).or_default().push(p);
        }
        assert!(by.len() <= 64);
        for ps in by.values() {
            let lo = ps.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
            let hi = ps.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
            let t0 = ps.iter().map(|p| p.0).fold(f64::INFINITY, f64::min);
            let t1 = ps.iter().map(|p| p.0).fold(f64::NEG_INFINITY, f64::max);
            let inside = |p: &&Point| p.0 >= t0 && p.0 <= t1;
            assert!(kept.iter().filter(inside).any(|p| p.1 == lo));
            assert!(kept.iter().filter(inside).any(|p| p.1 == hi));
        }
    }

    #[test]
    fn times_that_go_back_keep_the_output_in_time_order() {
        let mut d = Decimator::new(20);
        for i in 0..1000 {
            let t = if i % 7 == 0 {
                f64::from(i) - 50.0
            } else {
                f64::from(i)
            };
            d.push(t, f64::from(i % 13));
        }
        d.push(-500.0, 99.0);
        assert!(d.buckets() <= 20);
        let ps = d.points();
        assert!(sorted(&ps), "{ps:?}");
        assert_eq!(ps.first(), Some(&(-500.0, 99.0)));
    }

    #[test]
    fn a_jump_far_ahead_coarsens_at_once() {
        let mut d = Decimator::new(10);
        d.push(0.0, 1.0);
        d.push(86_400.0 * 365.0, 2.0);
        assert_eq!(d.buckets(), 2);
        assert_eq!(d.points(), vec![(0.0, 1.0), (86_400.0 * 365.0, 2.0)]);
    }

    #[test]
    fn points_that_are_not_finite_are_ignored() {
        let mut d = Decimator::new(10);
        d.push(f64::NAN, 1.0);
        d.push(1.0, f64::INFINITY);
        assert!(d.is_empty());
        assert_eq!(d.value_range(), None);
        d.push(1.0, 2.0);
        assert_eq!(d.points(), vec![(1.0, 2.0)]);
    }
}
