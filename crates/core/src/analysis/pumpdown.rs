//! Pump-downs: the roughing time constant and pumping speed, the
//! high-vacuum tail's power law and when a target pressure is (or will be)
//! reached.

use super::SourceId;
use super::fit::{Line, LineSums, Thinned};

/// Points kept per pump-down for the tail fit (see [`super::fit::Thinned`]).
pub const TAIL_BUFFER: usize = 2048;

/// How pump-downs are found and characterised.
#[derive(Debug, Clone, PartialEq)]
pub struct PumpDownOptions {
    /// A pump-down starts from at or above this pressure, Pa (default 1e4 Pa,
    /// a tenth of an atmosphere, so a log that starts mid-fall still counts).
    pub start_pa: f64,
    /// It counts once the pressure has fallen below this, Pa (default 1e3 Pa).
    pub sustain_pa: f64,
    /// Pressure span of the exponential roughing fit (low, high), Pa
    /// (default 1e3 … 5e4 Pa: viscous flow, far above the roughing pump's
    /// ultimate pressure).
    pub roughing_span_pa: (f64, f64),
    /// The high-vacuum tail holds the points at or below this, Pa (default
    /// 1e-2 Pa), until the pressure rises to 3 times the lowest seen.
    pub tail_below_pa: f64,
    /// Target pressure, Pa, if any.
    pub target_pa: Option<f64>,
    /// Fewest R² of the tail fit for a prediction (default 0.9).
    pub min_r2: f64,
}

impl Default for PumpDownOptions {
    fn default() -> Self {
        PumpDownOptions {
            start_pa: 1e4,
            sustain_pa: 1e3,
            roughing_span_pa: (1e3, 5e4),
            tail_below_pa: 1e-2,
            target_pa: None,
            min_r2: 0.9,
        }
    }
}

/// The exponential roughing phase: ln p = a − (t − t₀)/τ, so τ = −1/b with
/// SE(τ) = SE(b)/b², and the effective pumping speed S = V/τ (from
/// V dp/dt = −S p with a negligible gas load).
#[derive(Debug, Clone, PartialEq)]
pub struct Roughing {
    /// τ, s.
    pub tau_s: f64,
    /// SE(τ), s.
    pub tau_se_s: f64,
    /// R² of ln p against t.
    pub r2: f64,
    /// Points in the fit.
    pub points: usize,
    /// S = V/τ, m³/s, when the volume is known.
    pub pumping_speed_m3_per_s: Option<f64>,
    /// The source the fit's points came from (the one with the most points
    /// in the span; empty when the caller named none).
    pub source: String,
}

/// The high-vacuum tail p = c·(t − t₀)^(−α), fitted as
/// ln p = ln c − α ln(t − t₀) over its last decade of elapsed time (the
/// points with t − t₀ ≥ one tenth of the last elapsed time).
#[derive(Debug, Clone, PartialEq)]
pub struct Tail {
    /// α.
    pub alpha: f64,
    /// SE(α).
    pub alpha_se: f64,
    /// R² of the log-log fit.
    pub r2: f64,
    /// Points in the fit.
    pub points: usize,
    /// First and last elapsed time in the fit, s.
    pub span_s: (f64, f64),
    /// The source of the tail's points: the source of its last readings
    /// (the tail restarts where the source changes).
    pub source: String,
}

/// Whether and when the target pressure is reached.
#[derive(Debug, Clone, PartialEq)]
pub enum Target {
    /// Measured: first reading at or below the target.
    Reached {
        /// Time, s.
        at_s: f64,
        /// Since the pump-down's start, s.
        after_s: f64,
    },
    /// Extrapolated from the tail: t − t₀ = exp(x*), x* = (ln p_target − ln c)/(−α),
    /// with a band exp(x* ± 2·SE(x*)) (see [`Line::inverse`]).
    Predicted {
        /// Predicted time, s.
        at_s: f64,
        /// Since the pump-down's start, s.
        after_s: f64,
        /// Lower end of the band, s since the start.
        after_low_s: f64,
        /// Upper end of the band, s since the start.
        after_high_s: f64,
    },
    /// No measurement and no trustworthy fit.
    NotPredictable {
        /// Why.
        reason: String,
    },
}

/// One pump-down.
#[derive(Debug, Clone, PartialEq)]
pub struct PumpDown {
    /// t₀: the last point within 2 % of the near-atmosphere plateau before
    /// the fall, s.
    pub start_s: f64,
    /// Pressure then, Pa.
    pub start_pa: f64,
    /// The lowest pressure reached, Pa.
    pub min_pa: f64,
    /// The roughing fit, when the span had enough points.
    pub roughing: Option<Roughing>,
    /// The tail fit, when there was a tail.
    pub tail: Option<Tail>,
    /// The target, when one was given.
    pub target: Option<Target>,
    /// What could not be done and why.
    pub notes: Vec<String>,
}

#[derive(Debug, Clone)]
struct Current {
    t0: f64,
    plateau: f64,
    start_p: f64,
    fell: bool,
    confirmed: bool,
    below_rough: bool,
    min_pa: f64,
    /// Roughing sums per source.
    rough: Vec<(SourceId, LineSums)>,
    tail: Thinned,
    tail_source: Option<SourceId>,
    /// Tail points dropped at changes of source.
    tail_dropped: usize,
    tail_min: f64,
    tail_ended: bool,
    reached: Option<f64>,
}

/// Finds and characterises pump-downs in one gauge's series.
#[derive(Debug, Clone)]
pub struct PumpDownFinder {
    opts: PumpDownOptions,
    volume_m3: Option<f64>,
    current: Option<Current>,
    done: Vec<PumpDown>,
    /// Names of the sources by id (id 0: unnamed).
    names: Vec<String>,
}

impl PumpDownFinder {
    /// A finder with these options; `volume_m3` gives S = V/τ.
    pub fn new(opts: PumpDownOptions, volume_m3: Option<f64>) -> Self {
        PumpDownFinder {
            opts,
            volume_m3: volume_m3.filter(|v| v.is_finite() && *v > 0.0),
            current: None,
            done: Vec::new(),
            names: vec![String::new()],
        }
    }

    /// Names the next source id (ids count from 1; 0 is unnamed).
    pub fn add_source(&mut self, name: &str) {
        self.names.push(name.to_string());
    }

    /// Feeds one point from source `src`, in time order.
    pub fn push(&mut self, t: f64, p: f64, src: SourceId) {
        let o = &self.opts;
        if p >= o.start_pa {
            match self.current.as_mut() {
                Some(c) if !c.fell => {
                    if p >= 0.98 * c.plateau {
                        c.t0 = t;
                        c.start_p = p;
                    }
                    c.plateau = c.plateau.max(p);
                }
                _ => {
                    if let Some(c) = self.current.take()
                        && c.confirmed
                    {
                        let pd = self.close(c);
                        self.done.push(pd);
                    }
                    self.current = Some(Current {
                        t0: t,
                        plateau: p,
                        start_p: p,
                        fell: false,
                        confirmed: false,
                        below_rough: false,
                        min_pa: p,
                        rough: Vec::new(),
                        tail: Thinned::new(TAIL_BUFFER),
                        tail_source: None,
                        tail_dropped: 0,
                        tail_min: f64::INFINITY,
                        tail_ended: false,
                        reached: None,
                    });
                }
            }
            return;
        }
        let Some(c) = self.current.as_mut() else {
            return;
        };
        c.fell = true;
        c.min_pa = c.min_pa.min(p);
        let (lo, hi) = o.roughing_span_pa;
        if p < lo {
            c.below_rough = true;
        } else if p < hi && !c.below_rough {
            match c.rough.iter_mut().find(|(s, _)| *s == src) {
                Some((_, sums)) => sums.push(t - c.t0, p.ln()),
                None => {
                    let mut sums = LineSums::new();
                    sums.push(t - c.t0, p.ln());
                    c.rough.push((src, sums));
                }
            }
        }
        if p < o.sustain_pa {
            c.confirmed = true;
        }
        if c.reached.is_none() && o.target_pa.is_some_and(|target| p <= target) {
            c.reached = Some(t);
        }
        if !c.tail_ended && p <= o.tail_below_pa {
            c.tail_min = c.tail_min.min(p);
        }
        if c.tail_min.is_finite() && !c.tail_ended {
            if p > 3.0 * c.tail_min {
                c.tail_ended = true;
            } else if p <= o.tail_below_pa && t > c.t0 {
                if c.tail_source.is_some_and(|s| s != src) {
                    // A change of gauge or element: the fit restarts.
                    c.tail_dropped += c.tail.seen() as usize;
                    c.tail.clear();
                }
                c.tail_source = Some(src);
                let t0 = c.t0;
                c.tail.offer(|| ((t - t0).ln(), p.ln()));
            }
        }
    }

    fn close(&self, c: Current) -> PumpDown {
        let name = |id: SourceId| self.names.get(id as usize).cloned().unwrap_or_default();
        let mut notes = Vec::new();
        let best = c.rough.iter().max_by_key(|(_, s)| s.len());
        let rough_source = best.map(|(s, _)| name(*s)).unwrap_or_default();
        let rough = best.map(|(_, s)| *s).unwrap_or_default();
        let others: Vec<String> = c
            .rough
            .iter()
            .filter(|(s, _)| best.is_some_and(|(b, _)| b != s))
            .map(|(s, sums)| format!("{} from {}", sums.len(), name(*s)))
            .collect();
        if !others.is_empty() {
            notes.push(format!(
                "roughing fitted on {rough_source} only; left out {}",
                others.join(", ")
            ));
        }
        let roughing = match rough.fit() {
            Some(l) if l.slope < 0.0 => {
                let tau = -1.0 / l.slope;
                Some(Roughing {
                    tau_s: tau,
                    tau_se_s: l.slope_se / (l.slope * l.slope),
                    r2: l.r2,
                    points: l.n,
                    pumping_speed_m3_per_s: self.volume_m3.map(|v| v / tau),
                    source: rough_source.clone(),
                })
            }
            _ => {
                notes.push(format!(
                    "roughing time constant not measurable: {} points between {:.0e} and {:.0e} Pa",
                    rough.len(),
                    self.opts.roughing_span_pa.0,
                    self.opts.roughing_span_pa.1
                ));
                None
            }
        };
        if roughing.is_some() && self.volume_m3.is_none() {
            notes.push("chamber volume needed for the pumping speed S = V/τ".to_string());
        }
        let pts = c.tail.points();
        let tail_line = pts.last().and_then(|&(x_last, _)| {
            let from = x_last - std::f64::consts::LN_10;
            let late: Vec<(f64, f64)> = pts.iter().copied().filter(|(x, _)| *x >= from).collect();
            Line::of(&late).map(|l| (l, late))
        });
        let tail = tail_line.as_ref().map(|(l, late)| Tail {
            alpha: -l.slope,
            alpha_se: l.slope_se,
            r2: l.r2,
            points: l.n,
            span_s: (
                late.first().map(|p| p.0.exp()).unwrap_or(f64::NAN),
                late.last().map(|p| p.0.exp()).unwrap_or(f64::NAN),
            ),
            source: c.tail_source.map(name).unwrap_or_default(),
        });
        if c.tail_dropped > 0 {
            notes.push(format!(
                "tail fitted on {} only, after the last change of gauge or element ({} earlier points left out)",
                c.tail_source.map(name).unwrap_or_default(),
                c.tail_dropped
            ));
        }
        if tail.is_none() {
            notes.push(format!(
                "no high-vacuum tail: fewer than 3 points at or below {:.0e} Pa",
                self.opts.tail_below_pa
            ));
        }
        let target = self.opts.target_pa.map(|target| match c.reached {
            Some(at) => Target::Reached {
                at_s: at,
                after_s: at - c.t0,
            },
            None => predict(
                tail_line.as_ref().map(|(l, _)| l),
                target,
                c.t0,
                self.opts.min_r2,
            ),
        });
        PumpDown {
            start_s: c.t0,
            start_pa: c.start_p,
            min_pa: c.min_pa,
            roughing,
            tail,
            target,
            notes,
        }
    }

    /// Closes the last pump-down (if it fell below `sustain_pa`) and returns
    /// every pump-down in time order.
    pub fn finish(mut self) -> Vec<PumpDown> {
        if let Some(c) = self.current.take()
            && c.confirmed
        {
            let pd = self.close(c);
            self.done.push(pd);
        }
        self.done
    }
}

fn predict(line: Option<&Line>, target: f64, t0: f64, min_r2: f64) -> Target {
    let not = |reason: String| Target::NotPredictable { reason };
    let Some(l) = line else {
        return not("no tail to extrapolate".to_string());
    };
    if l.r2 < min_r2 {
        return not(format!(
            "tail fit too poor: R² {:.3} below {:.2}",
            l.r2, min_r2
        ));
    }
    if !(l.slope < 0.0 && -l.slope > 2.0 * l.slope_se) {
        return not(format!(
            "the tail does not fall significantly (α = {:.3} ± {:.3})",
            -l.slope, l.slope_se
        ));
    }
    let Some((x, se)) = l.inverse(target.ln()) else {
        return not("no crossing of the target".to_string());
    };
    let after = x.exp();
    let (low, high) = ((x - 2.0 * se).exp(), (x + 2.0 * se).exp());
    if !(after.is_finite() && high.is_finite()) {
        return not("the target lies too far beyond the data".to_string());
    }
    Target::Predicted {
        at_s: t0 + after,
        after_s: after,
        after_low_s: low,
        after_high_s: high,
    }
}
