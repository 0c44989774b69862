//! Rate of rise: an isolated chamber's pressure rise, its slope, the gas load
//! it means and whether it looks like a leak or like outgassing.

use super::SourceId;
use super::fit::{Line, LineSums, Thinned};

/// One mbar·L/s in Pa·m³/s: 100 Pa × 1e-3 m³ = 0.1 Pa·m³/s (by definition of
/// the units).
pub const MBAR_L_PER_S: f64 = 0.1;

/// Points kept per segment for the verdict (see [`super::fit::Thinned`]).
pub const SEGMENT_BUFFER: usize = 2048;

/// How rate-of-rise segments are found and judged.
#[derive(Debug, Clone, PartialEq)]
pub struct RiseOptions {
    /// Find rising segments automatically.
    pub auto: bool,
    /// A rise must start at or below this pressure, Pa (default 10 Pa).
    pub max_start_pa: f64,
    /// A point this fraction below the highest pressure so far ends the rise
    /// (default 0.1: 10 % below).
    pub dip_tolerance: f64,
    /// Fewest points in a segment (default 10).
    pub min_points: usize,
    /// Shortest segment, s (default 60 s).
    pub min_duration_s: f64,
    /// The pressure at the end must be at least this multiple of the start
    /// (default 1.5).
    pub min_rise_ratio: f64,
    /// A gap between points longer than this ends a found segment, s
    /// (default 600 s).
    pub max_gap_s: f64,
    /// Time ranges (from, to), s, to analyse as segments whatever the
    /// pressure does.
    pub ranges: Vec<(f64, f64)>,
    /// How far the late slope may differ from the early one for a linear
    /// rise, as a fraction (default 0.2).
    pub linear_band: f64,
}

impl Default for RiseOptions {
    fn default() -> Self {
        RiseOptions {
            auto: true,
            max_start_pa: 10.0,
            dip_tolerance: 0.1,
            min_points: 10,
            min_duration_s: 60.0,
            min_rise_ratio: 1.5,
            max_gap_s: 600.0,
            ranges: Vec::new(),
            linear_band: 0.2,
        }
    }
}

/// How a segment came to be analysed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Origin {
    /// Found by the rise detector.
    Found,
    /// A time range given by the caller.
    Given,
}

/// What a rise looks like.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Verdict {
    /// The rise stays linear: a constant gas load, typically a real leak
    /// from atmosphere.
    Leak,
    /// The rise flattens: outgassing or a virtual leak, a load that falls as
    /// the pressure rises or as time passes.
    Outgassing,
    /// The data do not decide (too few points, no significant rise, too much
    /// noise, or a rise that steepens).
    Inconclusive,
}

impl Verdict {
    /// `leak`, `outgassing` or `inconclusive`.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Leak => "leak",
            Verdict::Outgassing => "outgassing",
            Verdict::Inconclusive => "inconclusive",
        }
    }
}

/// The numbers a verdict rests on: the slopes of the first and the last third
/// of the segment (by time) and their ratio r = b₃/b₁, with
/// SE(r) = |r|·√((SE(b₁)/b₁)² + (SE(b₃)/b₃)²).
///
/// Linear (leak) when |r − 1| ≤ band and SE(r) ≤ band/2; flattening
/// (outgassing) when r < 1 − band and r + 2·SE(r) < 1; otherwise
/// inconclusive.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shape {
    /// Slope of the first third, Pa/s.
    pub slope_first_pa_per_s: f64,
    /// Its standard error, Pa/s.
    pub slope_first_se: f64,
    /// Slope of the last third, Pa/s.
    pub slope_last_pa_per_s: f64,
    /// Its standard error, Pa/s.
    pub slope_last_se: f64,
    /// r = last/first.
    pub ratio: f64,
    /// SE(r).
    pub ratio_se: f64,
}

/// Gas load Q = V·dp/dt.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LeakRate {
    /// Q, Pa·m³/s.
    pub pa_m3_per_s: f64,
    /// Standard error of Q from that of the slope, Pa·m³/s.
    pub pa_m3_per_s_se: f64,
    /// Q, mbar·L/s (Q in Pa·m³/s / [`MBAR_L_PER_S`]).
    pub mbar_l_per_s: f64,
}

impl LeakRate {
    /// Q = V·dp/dt for a volume in m³ and a slope in Pa/s (with its SE).
    pub fn from_slope(volume_m3: f64, dp_dt: f64, dp_dt_se: f64) -> Self {
        let q = volume_m3 * dp_dt;
        LeakRate {
            pa_m3_per_s: q,
            pa_m3_per_s_se: volume_m3 * dp_dt_se,
            mbar_l_per_s: q / MBAR_L_PER_S,
        }
    }
}

/// One analysed rate-of-rise segment.
#[derive(Debug, Clone, PartialEq)]
pub struct RateOfRise {
    /// Found or given.
    pub origin: Origin,
    /// The source every point of the fit came from (a gauge, or a gauge's
    /// element; empty when the caller named none).
    pub source: String,
    /// Points in the time range left out because they came from other
    /// sources (given ranges only).
    pub left_out: usize,
    /// Time of the first point, s.
    pub from_s: f64,
    /// Time of the last point, s.
    pub to_s: f64,
    /// Points in the segment.
    pub points: usize,
    /// Pressure at the first point, Pa.
    pub start_pa: f64,
    /// Pressure at the last point, Pa.
    pub end_pa: f64,
    /// dp/dt from a least-squares line over every point, Pa/s.
    pub dp_dt_pa_per_s: Option<f64>,
    /// Its standard error, Pa/s.
    pub dp_dt_se: Option<f64>,
    /// R² of that line.
    pub r2: Option<f64>,
    /// Q = V·dp/dt, when the volume is known.
    pub leak_rate: Option<LeakRate>,
    /// Leak, outgassing or inconclusive.
    pub verdict: Verdict,
    /// The slopes the verdict compares, when there were enough points.
    pub shape: Option<Shape>,
    /// Why the verdict is what it is, and what is missing.
    pub notes: Vec<String>,
}

/// The points of one segment as they arrive.
#[derive(Debug, Clone)]
struct Segment {
    origin: Origin,
    source: SourceId,
    t0: f64,
    first: (f64, f64),
    last: (f64, f64),
    max_pa: f64,
    sums: LineSums,
    kept: Thinned,
}

impl Segment {
    fn new(origin: Origin, source: SourceId, t: f64, p: f64) -> Self {
        let mut s = Segment {
            origin,
            source,
            t0: t,
            first: (t, p),
            last: (t, p),
            max_pa: p,
            sums: LineSums::new(),
            kept: Thinned::new(SEGMENT_BUFFER),
        };
        s.push(t, p);
        s
    }

    fn push(&mut self, t: f64, p: f64) {
        if self.sums.is_empty() {
            self.first = (t, p);
            self.t0 = t;
        }
        self.last = (t, p);
        self.max_pa = self.max_pa.max(p);
        self.sums.push(t - self.t0, p);
        self.kept.push(t - self.t0, p);
    }

    fn duration(&self) -> f64 {
        self.last.0 - self.first.0
    }
}

/// Finds and analyses rate-of-rise segments of one gauge's series.
#[derive(Debug, Clone)]
pub struct RiseFinder {
    opts: RiseOptions,
    volume_m3: Option<f64>,
    candidate: Option<Segment>,
    /// Per given range, a segment per source seen in it.
    given: Vec<Vec<Segment>>,
    done: Vec<(SourceId, RateOfRise)>,
}

impl RiseFinder {
    /// A finder with these options; `volume_m3` turns slopes into gas loads.
    pub fn new(opts: RiseOptions, volume_m3: Option<f64>) -> Self {
        let given = vec![Vec::new(); opts.ranges.len()];
        RiseFinder {
            opts,
            volume_m3: volume_m3.filter(|v| v.is_finite() && *v > 0.0),
            candidate: None,
            given,
            done: Vec::new(),
        }
    }

    /// Feeds one point from source `src` (time order; others are ignored
    /// by the caller). A found segment ends where the source changes.
    pub fn push(&mut self, t: f64, p: f64, src: SourceId) {
        for (range, segs) in self.opts.ranges.iter().zip(self.given.iter_mut()) {
            if t >= range.0 && t <= range.1 {
                match segs.iter_mut().find(|s| s.source == src) {
                    Some(seg) => seg.push(t, p),
                    None => segs.push(Segment::new(Origin::Given, src, t, p)),
                }
            }
        }
        if !self.opts.auto {
            return;
        }
        let restart = match &self.candidate {
            None => true,
            Some(seg) => {
                seg.source != src
                    || t - seg.last.0 > self.opts.max_gap_s
                    || p < seg.first.1
                    || p < seg.max_pa * (1.0 - self.opts.dip_tolerance)
            }
        };
        if restart {
            if let Some(seg) = self.candidate.take() {
                self.close_candidate(seg);
            }
            if p <= self.opts.max_start_pa {
                self.candidate = Some(Segment::new(Origin::Found, src, t, p));
            }
        } else if let Some(seg) = self.candidate.as_mut() {
            seg.push(t, p);
        }
    }

    fn close_candidate(&mut self, seg: Segment) {
        let long_enough = seg.sums.len() >= self.opts.min_points.max(3)
            && seg.duration() >= self.opts.min_duration_s;
        let rose = seg.first.1 > 0.0 && seg.last.1 >= self.opts.min_rise_ratio * seg.first.1;
        if long_enough && rose {
            let r = analyse(&seg, self.volume_m3, self.opts.linear_band);
            if r.dp_dt_pa_per_s.is_some_and(|b| b > 0.0) {
                self.done.push((seg.source, r));
            }
        }
    }

    /// Closes any open segment and returns every segment, given ranges first
    /// (in the order given), then found ones in time order. `names`: the
    /// sources' names by id.
    pub fn finish(mut self, names: &[String]) -> Vec<RateOfRise> {
        if let Some(seg) = self.candidate.take() {
            self.close_candidate(seg);
        }
        let name = |id: SourceId| names.get(id as usize).cloned().unwrap_or_default();
        let mut out = Vec::new();
        for (range, segs) in self.opts.ranges.iter().zip(&self.given) {
            // The best source for the span: the one with the most points.
            let best = segs.iter().max_by_key(|s| s.sums.len());
            match best {
                Some(seg) => {
                    let mut r = analyse(seg, self.volume_m3, self.opts.linear_band);
                    r.source = name(seg.source);
                    let others: Vec<&Segment> =
                        segs.iter().filter(|s| s.source != seg.source).collect();
                    r.left_out = others.iter().map(|s| s.sums.len()).sum();
                    if !others.is_empty() {
                        let list: Vec<String> = others
                            .iter()
                            .map(|s| format!("{} from {}", s.sums.len(), name(s.source)))
                            .collect();
                        r.notes.push(format!(
                            "fitted on {} only; left out {} (a change of gauge or element \
                             steps the readings, which is not physics)",
                            r.source,
                            list.join(", ")
                        ));
                    }
                    out.push(r);
                }
                None => out.push(RateOfRise {
                    origin: Origin::Given,
                    source: String::new(),
                    left_out: 0,
                    from_s: range.0,
                    to_s: range.1,
                    points: 0,
                    start_pa: f64::NAN,
                    end_pa: f64::NAN,
                    dp_dt_pa_per_s: None,
                    dp_dt_se: None,
                    r2: None,
                    leak_rate: None,
                    verdict: Verdict::Inconclusive,
                    shape: None,
                    notes: vec!["no points in the given time range".to_string()],
                }),
            }
        }
        out.extend(self.done.into_iter().map(|(src, mut r)| {
            r.source = name(src);
            r
        }));
        out
    }
}

/// Fits the slope of the points with x in [from, to].
fn third(points: &[(f64, f64)], from: f64, to: f64) -> Option<Line> {
    let mut s = LineSums::new();
    for &(x, y) in points.iter().filter(|(x, _)| *x >= from && *x <= to) {
        s.push(x, y);
    }
    s.fit()
}

/// Compares the slopes of the first and last thirds (see [`Shape`]).
fn shape(points: &[(f64, f64)], duration: f64) -> Option<Shape> {
    let a = third(points, 0.0, duration / 3.0)?;
    let c = third(points, 2.0 * duration / 3.0, duration)?;
    let ratio = c.slope / a.slope;
    let ratio_se =
        ratio.abs() * ((a.slope_se / a.slope).powi(2) + (c.slope_se / c.slope).powi(2)).sqrt();
    (ratio.is_finite() && ratio_se.is_finite()).then_some(Shape {
        slope_first_pa_per_s: a.slope,
        slope_first_se: a.slope_se,
        slope_last_pa_per_s: c.slope,
        slope_last_se: c.slope_se,
        ratio,
        ratio_se,
    })
}

fn analyse(seg: &Segment, volume_m3: Option<f64>, band: f64) -> RateOfRise {
    let mut notes = Vec::new();
    let line = seg.sums.fit();
    if line.is_none() {
        notes.push(format!(
            "too few points for a slope ({}; at least 3 at different times)",
            seg.sums.len()
        ));
    }
    let leak_rate = match (line, volume_m3) {
        (Some(l), Some(v)) => Some(LeakRate::from_slope(v, l.slope, l.slope_se)),
        (Some(_), None) => {
            notes.push("chamber volume needed for the leak rate Q = V·dp/dt".to_string());
            None
        }
        _ => None,
    };
    let shape = shape(seg.kept.points(), seg.duration());
    let verdict = match (line, shape) {
        (None, _) => Verdict::Inconclusive,
        (Some(l), _) if !(l.slope > 0.0 && l.slope > 3.0 * l.slope_se) => {
            notes.push(format!(
                "no significant rise: dp/dt {:.3e} ± {:.1e} Pa/s",
                l.slope, l.slope_se
            ));
            Verdict::Inconclusive
        }
        (Some(_), None) => {
            notes.push("too few points in the first or last third to compare slopes".to_string());
            Verdict::Inconclusive
        }
        (Some(_), Some(sh)) => {
            let (r, se) = (sh.ratio, sh.ratio_se);
            if (r - 1.0).abs() <= band && se <= band / 2.0 {
                notes.push(format!(
                    "linear rise: last-third slope / first-third slope = {r:.3} ± {se:.3}"
                ));
                Verdict::Leak
            } else if r < 1.0 - band && r + 2.0 * se < 1.0 {
                notes.push(format!(
                    "rise flattens: last-third slope / first-third slope = {r:.3} ± {se:.3}"
                ));
                Verdict::Outgassing
            } else if r > 1.0 + band && r - 2.0 * se > 1.0 {
                notes.push(format!(
                    "rise steepens (ratio {r:.3} ± {se:.3}): neither a steady leak nor outgassing"
                ));
                Verdict::Inconclusive
            } else {
                notes.push(format!("slopes too noisy to judge: ratio {r:.3} ± {se:.3}"));
                Verdict::Inconclusive
            }
        }
    };
    RateOfRise {
        origin: seg.origin,
        source: String::new(),
        left_out: 0,
        from_s: seg.first.0,
        to_s: seg.last.0,
        points: seg.sums.len(),
        start_pa: seg.first.1,
        end_pa: seg.last.1,
        dp_dt_pa_per_s: line.map(|l| l.slope),
        dp_dt_se: line.map(|l| l.slope_se),
        r2: line.map(|l| l.r2),
        leak_rate,
        verdict,
        shape,
        notes,
    }
}
