//! Analysis of one gauge's pressure series for the run report: rate-of-rise
//! segments (leak rate and a leak/outgassing verdict, [`rise`]) and
//! pump-downs (roughing τ and S = V/τ, the tail's p ∝ t^−α, time to a
//! target, [`pumpdown`]).
//!
//! Streaming: feed `(t_s, p_pa)` points in time order to an [`Analyzer`],
//! then call [`Analyzer::finish`].
//!
//! A series may be made of several gauges, or of a combined gauge's two
//! elements: at the change the readings step, and that step is not physics.
//! So each point may carry its source ([`Analyzer::source`],
//! [`Analyzer::push_from`]); no fit spans two sources. A rate-of-rise
//! segment ends where the source changes; a given range, the roughing fit
//! and the tail are fitted on the one source with the most points (for the
//! tail: the source of its lowest readings), and every result names the
//! source it came from. Memory stays bounded whatever the length
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

/// The number an [`Analyzer`] gives a source of points (see
/// [`Analyzer::source`]).
pub type SourceId = u32;

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
    sources: Vec<String>,
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
            sources: vec![String::new()],
        }
    }

    /// The id of the source named `name` (a gauge, or a gauge's element),
    /// numbered on first use. Source 0 is the unnamed one [`Analyzer::push`]
    /// uses.
    pub fn source(&mut self, name: &str) -> SourceId {
        match self.sources.iter().position(|s| s == name) {
            Some(i) => i as SourceId,
            None => {
                self.sources.push(name.to_string());
                self.pumpdown.add_source(name);
                (self.sources.len() - 1) as SourceId
            }
        }
    }

    /// Feeds one reading: time, s (any origin), and pressure, Pa. Points
    /// that are not finite, not positive, or not later than the previous one
    /// are counted and ignored.
    pub fn push(&mut self, t_s: f64, p_pa: f64) {
        self.push_from(t_s, p_pa, 0);
    }

    /// Feeds one reading from source `src` (see [`Analyzer::source`]).
    pub fn push_from(&mut self, t_s: f64, p_pa: f64, src: SourceId) {
        let in_order = self.last_t.is_none_or(|last| t_s > last);
        if !t_s.is_finite() || !p_pa.is_finite() || p_pa <= 0.0 || !in_order {
            self.ignored += 1;
            return;
        }
        self.last_t = Some(t_s);
        self.points += 1;
        self.rise.push(t_s, p_pa, src);
        self.pumpdown.push(t_s, p_pa, src);
    }

    /// The results.
    pub fn finish(self) -> Analysis {
        Analysis {
            rises: self.rise.finish(&self.sources),
            pumpdowns: self.pumpdown.finish(),
            points: self.points,
            ignored: self.ignored,
        }
    }
}
