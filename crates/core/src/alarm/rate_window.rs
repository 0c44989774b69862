//! The rate of change of one gauge over a sliding window of data time: the
//! least-squares slopes of p(t) and log10 p(t), updated in O(1) per reading.
//! The logarithmic fit runs on ln p and is converted once per slope
//! (d log10 p/dt = (d ln p/dt) / ln 10): the natural logarithm costs a
//! third of the decimal one, at every reading.
//!
//! Means and co-moments follow Welford's update for a point in and its
//! reverse for a point out (x̄ₙ₋₁ = x̄ₙ − (x − x̄ₙ)/(n − 1),
//! Sxy −= (x − x̄ₙ₋₁)(y − ȳₙ)); rounding drifts a little with every pair of
//! updates, so the sums are recomputed from the kept points every
//! [`REFRESH`] removals.

use std::collections::VecDeque;

/// Removals between recomputations of the sums from the points.
pub const REFRESH: u32 = 1024;

/// Running co-moments of (t, p) and (t, ln p).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct Sums {
    n: f64,
    mt: f64,
    mp: f64,
    ml: f64,
    stt: f64,
    stp: f64,
    stl: f64,
}

impl Sums {
    fn add(&mut self, t: f64, p: f64, l: f64) {
        self.n += 1.0;
        let dt = t - self.mt;
        self.mt += dt / self.n;
        self.mp += (p - self.mp) / self.n;
        self.ml += (l - self.ml) / self.n;
        self.stt += dt * (t - self.mt);
        self.stp += dt * (p - self.mp);
        self.stl += dt * (l - self.ml);
    }

    fn remove(&mut self, t: f64, p: f64, l: f64) {
        if self.n <= 1.0 {
            *self = Sums::default();
            return;
        }
        let n1 = self.n - 1.0;
        let mt = self.mt - (t - self.mt) / n1;
        let mp = self.mp - (p - self.mp) / n1;
        let ml = self.ml - (l - self.ml) / n1;
        let dt = t - mt;
        self.stt -= dt * (t - self.mt);
        self.stp -= dt * (p - self.mp);
        self.stl -= dt * (l - self.ml);
        (self.n, self.mt, self.mp, self.ml) = (n1, mt, mp, ml);
    }
}

/// The points of the last `window_s` seconds and their slopes.
#[derive(Debug, Clone, Default)]
pub struct RateWindow {
    points: VecDeque<(f64, f64, f64)>,
    sums: Sums,
    removals: u32,
    mark: Option<Mark>,
    /// The undo buffer between checkpoints, kept for its allocation.
    spare: Vec<(f64, f64, f64)>,
}

/// What [`RateWindow::rollback`] needs to undo the changes since
/// [`RateWindow::checkpoint`] without a copy of the points.
#[derive(Debug, Clone, Default)]
struct Mark {
    sums: Sums,
    removals: u32,
    pushed: usize,
    /// Points dropped from the front, oldest last.
    popped: Vec<(f64, f64, f64)>,
    /// The points as they were, when the window was cleared.
    cleared: Option<VecDeque<(f64, f64, f64)>>,
}

impl RateWindow {
    /// Forgets every point (a bad reading breaks the series).
    pub fn clear(&mut self) {
        if self.mark.as_ref().is_some_and(|m| m.cleared.is_none()) {
            // Keep the points as they were at the checkpoint.
            self.undo_points();
            if let Some(m) = self.mark.as_mut() {
                m.cleared = Some(std::mem::take(&mut self.points));
            }
        }
        self.points.clear();
        self.sums = Sums::default();
        self.removals = 0;
    }

    /// Remembers the window as it is, so that [`RateWindow::rollback`] can
    /// return to it; [`RateWindow::commit`] keeps the changes instead.
    pub fn checkpoint(&mut self) {
        let mut popped = std::mem::take(&mut self.spare);
        popped.clear();
        self.mark = Some(Mark {
            sums: self.sums,
            removals: self.removals,
            pushed: 0,
            popped,
            cleared: None,
        });
    }

    /// Returns to the last checkpoint (nothing without one).
    pub fn rollback(&mut self) {
        self.undo_points();
        if let Some(mut m) = self.mark.take() {
            if let Some(points) = m.cleared.take() {
                self.points = points;
            }
            self.sums = m.sums;
            self.removals = m.removals;
            m.popped.clear();
            self.spare = m.popped;
        }
    }

    /// Keeps the changes since the last checkpoint.
    pub fn commit(&mut self) {
        if let Some(mut m) = self.mark.take() {
            m.popped.clear();
            self.spare = m.popped;
        }
    }

    /// Undoes the pushes and drops since the checkpoint on the points (not
    /// on the sums), unless the window was cleared since.
    fn undo_points(&mut self) {
        if let Some(m) = self.mark.as_mut()
            && m.cleared.is_none()
        {
            for _ in 0..m.pushed {
                self.points.pop_back();
            }
            while let Some(p) = m.popped.pop() {
                self.points.push_front(p);
            }
            m.pushed = 0;
        }
    }

    /// Adds a reading (time s, pressure Pa, in time order) and drops those
    /// older than `window_s` before it.
    pub fn push(&mut self, t: f64, p: f64, window_s: f64) {
        let l = p.ln();
        self.points.push_back((t, p, l));
        self.sums.add(t, p, l);
        // Under a checkpoint, note what to undo.
        let mut undo = self.mark.as_mut().filter(|m| m.cleared.is_none());
        if let Some(m) = undo.as_mut() {
            m.pushed += 1;
        }
        while let Some(&(t0, p0, l0)) = self.points.front() {
            if t - t0 <= window_s {
                break;
            }
            self.points.pop_front();
            if let Some(m) = undo.as_mut() {
                m.popped.push((t0, p0, l0));
            }
            self.sums.remove(t0, p0, l0);
            self.removals += 1;
        }
        if self.removals >= REFRESH {
            self.removals = 0;
            self.sums = Sums::default();
            for &(t, p, l) in &self.points {
                self.sums.add(t, p, l);
            }
        }
    }

    /// (dp/dt in Pa/s, d log10 p/dt in decades per minute), when the window
    /// holds two points or more spanning at least a second.
    pub fn slopes(&self) -> Option<(f64, f64)> {
        let first = self.points.front()?.0;
        let last = self.points.back()?.0;
        if self.points.len() < 2 || last - first < 1.0 || self.sums.stt <= 0.0 {
            return None;
        }
        Some((
            self.sums.stp / self.sums.stt,
            self.sums.stl / self.sums.stt * 60.0 / std::f64::consts::LN_10,
        ))
    }

    /// Appends the points to `out` (their count, then each as three
    /// little-endian `f64`s) and lets go of them: the window keeps its sums
    /// and must get them back ([`RateWindow::read_points`]) before use.
    pub(crate) fn write_points(&mut self, out: &mut Vec<u8>) {
        out.extend_from_slice(&(self.points.len() as u64).to_le_bytes());
        for (t, p, l) in std::mem::take(&mut self.points) {
            for v in [t, p, l] {
                out.extend_from_slice(&v.to_bits().to_le_bytes());
            }
        }
    }

    /// Takes back the points [`RateWindow::write_points`] wrote, from the
    /// front of `bytes` (advanced past them).
    pub(crate) fn read_points(&mut self, bytes: &mut &[u8]) -> Result<(), String> {
        fn word(bytes: &mut &[u8]) -> Result<u64, String> {
            let (w, rest) = bytes
                .split_first_chunk::<8>()
                .ok_or("the rate window's points are cut short")?;
            *bytes = rest;
            Ok(u64::from_le_bytes(*w))
        }
        let n = word(bytes)?;
        if n > (bytes.len() / 24) as u64 {
            return Err("the rate window's points are cut short".into());
        }
        let mut points = VecDeque::with_capacity(n as usize);
        for _ in 0..n {
            let t = f64::from_bits(word(bytes)?);
            let p = f64::from_bits(word(bytes)?);
            let l = f64::from_bits(word(bytes)?);
            points.push_back((t, p, l));
        }
        self.points = points;
        Ok(())
    }

    /// Points in the window.
    pub fn len(&self) -> usize {
        self.points.len()
    }

    /// Whether the window is empty.
    pub fn is_empty(&self) -> bool {
        self.points.is_empty()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The two-pass least-squares slopes, as a reference.
    fn two_pass(points: &[(f64, f64)]) -> (f64, f64) {
        let n = points.len() as f64;
        let mt = points.iter().map(|w| w.0).sum::<f64>() / n;
        let mp = points.iter().map(|w| w.1).sum::<f64>() / n;
        let ml = points.iter().map(|w| w.1.log10()).sum::<f64>() / n;
        let (mut stt, mut stp, mut stl) = (0.0, 0.0, 0.0);
        for &(t, p) in points {
            stt += (t - mt) * (t - mt);
            stp += (t - mt) * (p - mp);
            stl += (t - mt) * (p.log10() - ml);
        }
        (stp / stt, stl / stt * 60.0)
    }

    #[test]
    fn sliding_slopes_match_two_pass_over_a_long_series() {
        // A pump-down over 8 decades with noise, at 10 Hz for 30 000 s:
        // many refreshes and hundreds of thousands of removals. The two
        // agree to 1e-7 relative (the noise makes the slope ill-conditioned;
        // both sides round differently).
        let mut w = RateWindow::default();
        let mut all = Vec::new();
        let mut seed = 0x2545_f491_u64;
        for i in 0..300_000 {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            let noise = 1.0 + 0.01 * ((seed % 1000) as f64 / 500.0 - 1.0);
            let t = 1.0e6 + i as f64 * 0.1;
            let p = 1e5 * (-(i as f64) / 20_000.0).exp() * noise;
            w.push(t, p, 30.0);
            all.push((t, p));
            if i % 997 == 0 && i > 400 {
                let inside: Vec<(f64, f64)> = all
                    .iter()
                    .copied()
                    .filter(|&(t0, _)| t - t0 <= 30.0)
                    .collect();
                let (a, b) = two_pass(&inside);
                let (x, y) = w.slopes().expect("slopes");
                assert!((x - a).abs() <= 1e-7 * a.abs() + 1e-15, "{x} vs {a}");
                assert!((y - b).abs() <= 1e-7 * b.abs() + 1e-12, "{y} vs {b}");
                all.drain(..all.len() - inside.len());
            }
        }
    }

    #[test]
    fn rollback_returns_to_the_checkpoint_and_commit_keeps() {
        let mut w = RateWindow::default();
        for i in 0..100 {
            w.push(i as f64, 1.0 + i as f64, 30.0);
        }
        let before: Vec<_> = w.points.iter().copied().collect();
        let slopes = w.slopes();
        // A push that drops old points, then rolled back.
        w.checkpoint();
        w.push(150.0, 7.0, 30.0);
        assert_eq!(w.len(), 1);
        w.rollback();
        assert_eq!(w.points.iter().copied().collect::<Vec<_>>(), before);
        assert_eq!(w.slopes(), slopes);
        // Pushes then a clear, rolled back.
        w.checkpoint();
        w.push(100.0, 2.0, 30.0);
        w.clear();
        w.push(101.0, 3.0, 30.0);
        w.rollback();
        assert_eq!(w.points.iter().copied().collect::<Vec<_>>(), before);
        assert_eq!(w.slopes(), slopes);
        // Committed: the push stays.
        w.checkpoint();
        w.push(100.0, 101.0, 30.0);
        w.commit();
        assert_eq!(w.len(), before.len());
        assert_eq!(w.points.back().map(|p| p.0), Some(100.0));
        w.rollback();
        assert_eq!(w.points.back().map(|p| p.0), Some(100.0), "no mark: no-op");
    }

    #[test]
    fn too_few_points_or_too_short_a_span_give_none() {
        let mut w = RateWindow::default();
        assert_eq!(w.slopes(), None);
        w.push(0.0, 1.0, 30.0);
        assert_eq!(w.slopes(), None);
        w.push(0.5, 2.0, 30.0);
        assert_eq!(w.slopes(), None, "span under a second");
        w.push(1.0, 3.0, 30.0);
        let (d, _) = w.slopes().expect("slopes");
        assert!((d - 2.0).abs() < 1e-12);
        w.clear();
        assert!(w.is_empty() && w.slopes().is_none());
    }
}
