//! Analysis of one gauge's pressure series for the run report: rate-of-rise
//! segments (leak rate and a leak/outgassing verdict, [`rise`]) and
//! pump-downs (roughing τ and S = V/τ, the tail's p ∝ t^−α, time to a
//! target, [`pumpdown`]).
//!
//! Streaming: feed `(t_s, p_pa)` points in time order to an [`Analyzer`],
//! then call [`Analyzer::finish`]. Memory stays bounded whatever the length
//! of the series: straight-line fits keep running sums, and the only stored
//! points are, per open segment, a [`fit::Thinned`] buffer of at most a few
//! thousand points that halves its density whenever it fills.
//!
//! ```
//! use rarefy_core::analysis::{Analyzer, AnalysisOptions, Verdict};
//! let mut a = Analyzer::new(AnalysisOptions { volume_m3: Some(0.1), ..Default::default() });
//! for i in 0..600 {
//!     let t = i as f64;
//!     a.push(t, 1e-3 + 2e-3 * t); // a steady rise of 2e-3 Pa/s
//! }
//! let report = a.finish();
//! let rise = &report.rises[0];
//! assert_eq!(rise.verdict, Verdict::Leak);
//! let q = rise.leak_rate.expect("volume given");
//! assert!((q.pa_m3_per_s - 2e-4).abs() < 1e-9);
//! assert!((q.mbar_l_per_s - 2e-3).abs() < 1e-8);
//! ```

pub mod fit;
pub mod pumpdown;
pub mod rise;

#[cfg(test)]
mod tests;

pub use pumpdown::{PumpDown, PumpDownFinder, PumpDownOptions, Roughing, Tail, Target};
pub use rise::{
    LeakRate, MBAR_L_PER_S, Origin, RateOfRise, RiseFinder, RiseOptions, Shape, Verdict,
};

/// What to analyse and how.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct AnalysisOptions {
    /// Chamber volume, m³, when known.
    pub volume_m3: Option<f64>,
    /// Rate-of-rise detection and verdict.
    pub rise: RiseOptions,
    /// Pump-down detection, fits and target.
    pub pumpdown: PumpDownOptions,
}

/// Everything found in one gauge's series.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Analysis {
    /// Rate-of-rise segments: given ranges first, then found ones.
    pub rises: Vec<RateOfRise>,
    /// Pump-downs, in time order.
    pub pumpdowns: Vec<PumpDown>,
    /// Points accepted.
    pub points: usize,
    /// Points ignored (not finite, not positive, or earlier than the last).
    pub ignored: usize,
}

/// Takes one gauge's points in time order and analyses them.
#[derive(Debug, Clone)]
pub struct Analyzer {
    rise: RiseFinder,
    pumpdown: PumpDownFinder,
    last_t: Option<f64>,
    points: usize,
    ignored: usize,
}

impl Analyzer {
    /// An analyzer with these options.
    pub fn new(opts: AnalysisOptions) -> Self {
        Analyzer {
            rise: RiseFinder::new(opts.rise, opts.volume_m3),
            pumpdown: PumpDownFinder::new(opts.pumpdown, opts.volume_m3),
            last_t: None,
            points: 0,
            ignored: 0,
        }
    }

    /// Feeds one reading: time, s (any origin), and pressure, Pa. Points
    /// that are not finite, not positive, or not later than the previous one
    /// are counted and ignored.
    pub fn push(&mut self, t_s: f64, p_pa: f64) {
        let in_order = self.last_t.is_none_or(|last| t_s > last);
        if !t_s.is_finite() || !p_pa.is_finite() || p_pa <= 0.0 || !in_order {
            self.ignored += 1;
            return;
        }
        self.last_t = Some(t_s);
        self.points += 1;
        self.rise.push(t_s, p_pa);
        self.pumpdown.push(t_s, p_pa);
    }

    /// The results.
    pub fn finish(self) -> Analysis {
        Analysis {
            rises: self.rise.finish(),
            pumpdowns: self.pumpdown.finish(),
            points: self.points,
            ignored: self.ignored,
        }
    }
}
