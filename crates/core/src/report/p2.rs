//! A streaming quantile estimate in constant memory: the P² algorithm of
//! R. Jain and I. Chlamtac, "The P² algorithm for dynamic calculation of
//! quantiles and histograms without storing observations", Communications
//! of the ACM 28(10), 1985. Five markers follow the minimum, the p/2, p and
//! (1+p)/2 quantiles and the maximum; each new value moves the markers'
//! counts, and a marker that drifts from its desired count by one or more is
//! adjusted by a piecewise-parabolic (P²) prediction, or a linear one when
//! the parabola would leave the neighbours' order.

/// A P² estimate of one quantile.
#[derive(Debug, Clone, PartialEq)]
pub struct P2Quantile {
    p: f64,
    /// Marker heights.
    q: [f64; 5],
    /// Marker positions (1-based counts).
    n: [f64; 5],
    /// Desired positions.
    want: [f64; 5],
    /// Increments of the desired positions per value.
    step: [f64; 5],
    count: u64,
}

impl P2Quantile {
    /// An estimate of the `p` quantile (0 < p < 1; clamped into it).
    pub fn new(p: f64) -> Self {
        let p = if p.is_finite() {
            p.clamp(1e-6, 1.0 - 1e-6)
        } else {
            0.5
        };
        P2Quantile {
            p,
            q: [0.0; 5],
            n: [1.0, 2.0, 3.0, 4.0, 5.0],
            want: [1.0, 1.0 + 2.0 * p, 1.0 + 4.0 * p, 3.0 + 2.0 * p, 5.0],
            step: [0.0, p / 2.0, p, (1.0 + p) / 2.0, 1.0],
            count: 0,
        }
    }

    /// How many values were added.
    pub fn count(&self) -> u64 {
        self.count
    }

    /// Adds a value; values that are not finite are ignored.
    pub fn add(&mut self, x: f64) {
        if !x.is_finite() {
            return;
        }
        if self.count < 5 {
            self.q[self.count as usize] = x;
            self.count += 1;
            if self.count == 5 {
                self.q.sort_by(f64::total_cmp);
            }
            return;
        }
        self.count += 1;
        // The cell the value falls in; the extremes follow it.
        let k = if x < self.q[0] {
            self.q[0] = x;
            0
        } else if x >= self.q[4] {
            self.q[4] = x;
            3
        } else {
            (0..4).find(|&i| x < self.q[i + 1]).unwrap_or(3)
        };
        for i in (k + 1)..5 {
            self.n[i] += 1.0;
        }
        for i in 0..5 {
            self.want[i] += self.step[i];
        }
        for i in 1..4 {
            let d = self.want[i] - self.n[i];
            if (d >= 1.0 && self.n[i + 1] - self.n[i] > 1.0)
                || (d <= -1.0 && self.n[i - 1] - self.n[i] < -1.0)
            {
                let s = d.signum();
                let parabolic = self.parabolic(i, s);
                self.q[i] = if self.q[i - 1] < parabolic && parabolic < self.q[i + 1] {
                    parabolic
                } else {
                    self.linear(i, s)
                };
                self.n[i] += s;
            }
        }
    }

    fn parabolic(&self, i: usize, s: f64) -> f64 {
        let (q, n) = (&self.q, &self.n);
        q[i] + s / (n[i + 1] - n[i - 1])
            * ((n[i] - n[i - 1] + s) * (q[i + 1] - q[i]) / (n[i + 1] - n[i])
                + (n[i + 1] - n[i] - s) * (q[i] - q[i - 1]) / (n[i] - n[i - 1]))
    }

    fn linear(&self, i: usize, s: f64) -> f64 {
        let j = if s > 0.0 { i + 1 } else { i - 1 };
        self.q[i] + s * (self.q[j] - self.q[i]) / (self.n[j] - self.n[i])
    }

    /// The estimate; exact (nearest-rank on the sorted values) while fewer
    /// than five values were added, `None` before any.
    pub fn estimate(&self) -> Option<f64> {
        match self.count {
            0 => None,
            c if c < 5 => {
                let mut v = self.q[..c as usize].to_vec();
                v.sort_by(f64::total_cmp);
                let idx = ((c as f64 - 1.0) * self.p).round() as usize;
                v.get(idx.min(v.len() - 1)).copied()
            }
            _ => Some(self.q[2]),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn exact_median(v: &mut [f64]) -> f64 {
        v.sort_by(f64::total_cmp);
        let n = v.len();
        if n % 2 == 1 {
            v[n / 2]
        } else {
            (v[n / 2 - 1] + v[n / 2]) / 2.0
        }
    }

    /// A small deterministic generator (xorshift64*), so the test data is
    /// the same on every run.
    fn uniform(state: &mut u64) -> f64 {
        *state ^= *state >> 12;
        *state ^= *state << 25;
        *state ^= *state >> 27;
        let r = state.wrapping_mul(0x2545_F491_4F6C_DD1D);
        (r >> 11) as f64 / (1u64 << 53) as f64
    }

    #[test]
    fn median_of_uniform_data_is_close_to_the_exact_one() {
        let mut s = 0x9E37_79B9_7F4A_7C15;
        let mut v: Vec<f64> = (0..20_000).map(|_| uniform(&mut s) * 100.0).collect();
        let mut p2 = P2Quantile::new(0.5);
        for &x in &v {
            p2.add(x);
        }
        let exact = exact_median(&mut v);
        let est = p2.estimate().expect("values");
        // The range is 100: within 0.5 % of it.
        assert!((est - exact).abs() < 0.5, "{est} vs {exact}");
    }

    fn pump_down(n: usize) -> Vec<f64> {
        // log10 of pressures falling over eight decades, with noise.
        let mut s = 12345;
        (0..n)
            .map(|i| {
                let decades = 5.0 - 8.0 * (i as f64 / n as f64).sqrt();
                decades + (uniform(&mut s) - 0.5) * 0.2
            })
            .collect()
    }

    fn estimate_of(v: &[f64]) -> f64 {
        let mut p2 = P2Quantile::new(0.5);
        for &x in v {
            p2.add(x);
        }
        p2.estimate().expect("values")
    }

    #[test]
    fn median_of_a_pump_down_in_shuffled_order_is_close() {
        let mut v = pump_down(5000);
        // Fisher–Yates with the same generator.
        let mut s = 777;
        for i in (1..v.len()).rev() {
            let j = (uniform(&mut s) * (i + 1) as f64) as usize;
            v.swap(i, j.min(i));
        }
        let est = estimate_of(&v);
        let exact = exact_median(&mut v);
        // Within 0.05 decade (12 % in pressure) over an eight-decade span.
        assert!((est - exact).abs() < 0.05, "{est} vs {exact}");
    }

    #[test]
    fn median_of_a_pump_down_in_time_order_is_a_rougher_estimate() {
        // P² assumes no trend in the order of the values; a pump-down read
        // in time order is one long trend, and the estimate is rougher: here
        // within half a decade of an eight-decade span (what the report's
        // docs state).
        let mut v = pump_down(5000);
        let est = estimate_of(&v);
        let exact = exact_median(&mut v);
        assert!((est - exact).abs() < 0.5, "{est} vs {exact}");
    }

    #[test]
    fn few_values_are_exact() {
        let mut p2 = P2Quantile::new(0.5);
        assert_eq!(p2.estimate(), None);
        for x in [3.0, 1.0, 2.0] {
            p2.add(x);
        }
        assert_eq!(p2.estimate(), Some(2.0));
        p2.add(f64::NAN);
        assert_eq!(p2.count(), 3);
    }

    #[test]
    fn sorted_and_constant_input_stay_in_range() {
        let mut p2 = P2Quantile::new(0.5);
        for i in 0..1001 {
            p2.add(i as f64);
        }
        let est = p2.estimate().expect("values");
        assert!((est - 500.0).abs() < 5.0, "{est}");
        let mut c = P2Quantile::new(0.9);
        for _ in 0..100 {
            c.add(7.0);
        }
        assert_eq!(c.estimate(), Some(7.0));
    }
}
