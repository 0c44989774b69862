//! Least-squares straight lines, fed one point at a time, and a bounded
//! buffer that thins itself out as it fills.

/// Running sums for the least-squares line y = a + b·x, kept as means and
/// co-moments (Welford's update) so that large offsets in x (absolute times)
/// lose no precision:
///
/// x̄ₙ = x̄ₙ₋₁ + (x − x̄ₙ₋₁)/n, Sxy += (x − x̄ₙ₋₁)(y − ȳₙ), likewise Sxx, Syy.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct LineSums {
    n: usize,
    mean_x: f64,
    mean_y: f64,
    sxx: f64,
    sxy: f64,
    syy: f64,
}

impl LineSums {
    /// No points yet.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds one point; non-finite points are ignored.
    pub fn push(&mut self, x: f64, y: f64) {
        if !x.is_finite() || !y.is_finite() {
            return;
        }
        self.n += 1;
        let n = self.n as f64;
        let dx = x - self.mean_x;
        let dy = y - self.mean_y;
        self.mean_x += dx / n;
        self.mean_y += dy / n;
        self.sxx += dx * (x - self.mean_x);
        self.sxy += dx * (y - self.mean_y);
        self.syy += dy * (y - self.mean_y);
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.n
    }

    /// Whether no point has been added.
    pub fn is_empty(&self) -> bool {
        self.n == 0
    }

    /// The fitted line, or `None` with fewer than three points or when every
    /// x is the same.
    pub fn fit(&self) -> Option<Line> {
        if self.n < 3 || self.sxx.is_nan() || self.sxx <= 0.0 {
            return None;
        }
        let n = self.n as f64;
        let slope = self.sxy / self.sxx;
        let intercept = self.mean_y - slope * self.mean_x;
        let sse = (self.syy - slope * self.sxy).max(0.0);
        let s2 = sse / (n - 2.0);
        let r2 = if self.syy > 0.0 {
            (1.0 - sse / self.syy).clamp(0.0, 1.0)
        } else {
            0.0
        };
        let line = Line {
            n: self.n,
            slope,
            intercept,
            slope_se: (s2 / self.sxx).sqrt(),
            intercept_se: (s2 * (1.0 / n + self.mean_x * self.mean_x / self.sxx)).sqrt(),
            r2,
            residual_sd: s2.sqrt(),
            mean_x: self.mean_x,
            sxx: self.sxx,
        };
        [line.slope, line.intercept, line.slope_se, line.intercept_se]
            .iter()
            .all(|v| v.is_finite())
            .then_some(line)
    }
}

/// A least-squares line y = a + b·x with its statistics:
///
/// * b = Sxy/Sxx, a = ȳ − b·x̄;
/// * residual variance s² = (Syy − b·Sxy)/(n − 2);
/// * SE(b) = s/√Sxx, SE(a) = s·√(1/n + x̄²/Sxx);
/// * R² = 1 − SSE/Syy (0 when y does not vary).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Line {
    /// Number of points.
    pub n: usize,
    /// b.
    pub slope: f64,
    /// a.
    pub intercept: f64,
    /// Standard error of b.
    pub slope_se: f64,
    /// Standard error of a.
    pub intercept_se: f64,
    /// Coefficient of determination.
    pub r2: f64,
    /// s, the residual standard deviation.
    pub residual_sd: f64,
    /// x̄.
    pub mean_x: f64,
    /// Sxx = Σ(x − x̄)².
    pub sxx: f64,
}

impl Line {
    /// Fits the points of a slice (see [`LineSums`]).
    pub fn of(points: &[(f64, f64)]) -> Option<Line> {
        let mut s = LineSums::new();
        for &(x, y) in points {
            s.push(x, y);
        }
        s.fit()
    }

    /// The x where the line reaches `y`, x* = (y − a)/b, with its standard
    /// error from the classical inverse-prediction formula for the mean line
    /// (Draper & Smith, *Applied Regression Analysis*, calibration section):
    ///
    /// SE(x*) ≈ (s/|b|)·√(1/n + (x* − x̄)²/Sxx).
    ///
    /// `None` when the slope is zero.
    pub fn inverse(&self, y: f64) -> Option<(f64, f64)> {
        if self.slope == 0.0 || !self.slope.is_finite() {
            return None;
        }
        let x = (y - self.intercept) / self.slope;
        let n = self.n as f64;
        let se = self.residual_sd / self.slope.abs()
            * (1.0 / n + (x - self.mean_x).powi(2) / self.sxx).sqrt();
        (x.is_finite() && se.is_finite()).then_some((x, se))
    }
}

/// Keeps at most `capacity` points of a series: every point until full, then
/// every second of those kept and every second of those to come, and so on
/// (the stride doubles each time the buffer fills). The kept points stay
/// evenly spaced in sample count and span the whole series.
#[derive(Debug, Clone, PartialEq)]
pub struct Thinned {
    capacity: usize,
    stride: u64,
    seen: u64,
    points: Vec<(f64, f64)>,
}

impl Thinned {
    /// An empty buffer holding at most `capacity` (at least 8) points.
    pub fn new(capacity: usize) -> Self {
        // Even, so that the kept points stay on the doubled stride.
        let capacity = capacity.max(8) / 2 * 2;
        Thinned {
            capacity,
            stride: 1,
            seen: 0,
            points: Vec::with_capacity(capacity),
        }
    }

    /// Offers one point.
    pub fn push(&mut self, x: f64, y: f64) {
        self.offer(|| (x, y));
    }

    /// Offers one point worked out by `point` only when it is kept (the
    /// buffer keeps one offered point in `stride`; a point may cost two
    /// logarithms).
    #[inline]
    pub fn offer(&mut self, point: impl FnOnce() -> (f64, f64)) {
        if self.seen.is_multiple_of(self.stride) {
            self.points.push(point());
            if self.points.len() >= self.capacity {
                let mut i = 0;
                self.points.retain(|_| {
                    i += 1;
                    i % 2 == 1
                });
                self.stride *= 2;
            }
        }
        self.seen += 1;
    }

    /// The kept points, in order.
    pub fn points(&self) -> &[(f64, f64)] {
        &self.points
    }

    /// Points offered so far (kept or not).
    pub fn seen(&self) -> u64 {
        self.seen
    }

    /// Forgets every point.
    pub fn clear(&mut self) {
        self.stride = 1;
        self.seen = 0;
        self.points.clear();
    }
}
