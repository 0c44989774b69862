//! The report's per-gauge accumulators and analyses, fed on a second core
//! when there is one.
//!
//! The report sink reads what each reading left in the monitor (its true
//! pressure, range, regimes, exposure; which element of a combined gauge it
//! came from) on the pipeline's thread and passes it on as a [`Msg`]; the
//! [`Tally`] (accumulators, pump-down and rate-of-rise analyses) takes the
//! messages in order, either at once or in batches on a thread of its own.
//! Batches go back to be filled again, their per-length results refreshed
//! in place, so nothing is allocated per reading. Both ways give the same
//! results: the same [`Tally::apply`] takes every message.

use chrono::{DateTime, Utc};

use super::worker::Worker;
use crate::engine::LengthDerived;
use crate::engine::regime::VacuumRange;
use crate::report::{GaugeAccumulator, Observation};
use crate::sample::Status;
use rarefy_core::analysis::{Analyzer, SourceId};
use rarefy_core::engine::gauge::GaugeKind;

/// Messages per hand-over: as many as the rows of a read-ahead batch
/// (`read_ahead::BATCH_ROWS`, which says why so many).
const BATCH: usize = 4096;

/// A gauge's source names in its analysis: its id, or for a combined gauge
/// one per element (they step where they hand over, so no fit may span
/// them). Made once per gauge, not per reading.
#[derive(Debug, Clone)]
pub enum Labels {
    /// One source: the gauge's id.
    Plain(String),
    /// A combined gauge: one source per element.
    Combined {
        /// The gauge's id.
        id: String,
        /// `id (ionization)`.
        ion: String,
        /// `id (thermal)`.
        thermal: String,
    },
}

/// Which of a gauge's [`Labels`] a reading counts under.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Element {
    /// The gauge's id (a plain gauge; a combined gauge not read yet).
    Whole,
    /// A combined gauge's ionization element.
    Ionization,
    /// A combined gauge's thermal element.
    Thermal,
}

impl Labels {
    /// The labels of a gauge of `kind` named `id`.
    pub fn new(id: &str, kind: Option<GaugeKind>) -> Self {
        if kind == Some(GaugeKind::Combined) {
            Labels::Combined {
                id: id.to_string(),
                ion: format!("{id} ({})", GaugeKind::Ionization),
                thermal: format!("{id} ({})", GaugeKind::Thermal),
            }
        } else {
            Labels::Plain(id.to_string())
        }
    }

    /// The element of a reading whose indicated value is `indicated`.
    pub fn element(&self, indicated: Option<f64>) -> Element {
        match self {
            Labels::Plain(_) => Element::Whole,
            Labels::Combined { .. } => {
                if indicated.map(|v| GaugeKind::Combined.element(v)) == Some(GaugeKind::Ionization)
                {
                    Element::Ionization
                } else {
                    Element::Thermal
                }
            }
        }
    }

    /// The source name for `element`.
    pub fn name(&self, element: Element) -> &str {
        match (self, element) {
            (Labels::Plain(id), _) => id,
            (Labels::Combined { ion, .. }, Element::Ionization) => ion,
            (Labels::Combined { thermal, .. }, Element::Thermal) => thermal,
            (Labels::Combined { id, .. }, Element::Whole) => id,
        }
    }
}

/// One reading of a gauge, as the report counts it. Its per-length results
/// travel beside it in the batch.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Counted {
    /// Index of the gauge (in the order of [`Msg::Gauge`]).
    pub gauge: usize,
    /// Reading time.
    pub time: DateTime<Utc>,
    /// The report's origin, which the analyses count seconds from.
    pub origin: DateTime<Utc>,
    /// The reading's status.
    pub status: Status,
    /// True pressure of a valid pressure reading, Pa.
    pub pressure_pa: Option<f64>,
    /// Its ISO 3529-1 range.
    pub range: Option<VacuumRange>,
    /// The gauge's exposure after it, langmuir.
    pub exposure_langmuir: Option<f64>,
    /// Which source of the gauge's analysis it counts under.
    pub element: Element,
}

/// A [`Counted`] as it travels in a batch: without its origin
/// ([`Msg::Origin`]), its options as flags, its indices narrower. 40 bytes
/// rather than 88: the core that takes the batch reads, and the sink then
/// writes again, less than half the memory a reading.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Packed {
    pressure_pa: f64,
    exposure_langmuir: f64,
    time: DateTime<Utc>,
    gauge: u32,
    /// Per-length results after it in the batch; [`Packed::AS_BEFORE`]:
    /// none, the same as the gauge's reading before.
    lengths: u32,
    status: Status,
    range: Option<VacuumRange>,
    element: Element,
    /// [`Packed::PRESSURE`] and [`Packed::EXPOSURE`]: which of the two
    /// numbers there are.
    has: u8,
}

impl Packed {
    const PRESSURE: u8 = 1;
    const EXPOSURE: u8 = 2;
    const AS_BEFORE: u32 = u32::MAX;

    /// `r` with `lengths` per-length results (`None`: as before). A
    /// gauge index or length count beyond `u32` (a log of four billion
    /// channels) is taken for none.
    fn new(r: &Counted, lengths: Option<usize>) -> Packed {
        Packed {
            pressure_pa: r.pressure_pa.unwrap_or(0.0),
            exposure_langmuir: r.exposure_langmuir.unwrap_or(0.0),
            time: r.time,
            gauge: u32::try_from(r.gauge).unwrap_or(u32::MAX),
            lengths: lengths.map_or(Packed::AS_BEFORE, |n| {
                u32::try_from(n).unwrap_or(Packed::AS_BEFORE - 1)
            }),
            status: r.status,
            range: r.range,
            element: r.element,
            has: (u8::from(r.pressure_pa.is_some()) * Packed::PRESSURE)
                | (u8::from(r.exposure_langmuir.is_some()) * Packed::EXPOSURE),
        }
    }

    /// The true pressure, when there is one.
    #[inline]
    fn pressure_pa(&self) -> Option<f64> {
        (self.has & Packed::PRESSURE != 0).then_some(self.pressure_pa)
    }

    /// The exposure, when there is one.
    #[inline]
    fn exposure_langmuir(&self) -> Option<f64> {
        (self.has & Packed::EXPOSURE != 0).then_some(self.exposure_langmuir)
    }

    /// How many per-length results follow it in the batch; `None`: the
    /// same as the gauge's reading before.
    #[inline]
    fn lengths(&self) -> Option<usize> {
        (self.lengths != Packed::AS_BEFORE).then_some(self.lengths as usize)
    }
}

/// What the tally is given, in order.
#[derive(Debug)]
pub enum Msg {
    /// A gauge first seen: its accumulator, analysis and labels (taken by
    /// the tally).
    Gauge(Option<Box<(GaugeAccumulator, Analyzer, Labels)>>),
    /// The report's origin, from the readings after it on (sent before the
    /// first reading and whenever it changes, rather than with each).
    Origin(DateTime<Utc>),
    /// A reading, with the number of per-length results that follow it
    /// in the batch (or none: the same names and regimes as the gauge's
    /// reading before).
    Reading(Packed),
    /// The chamber pressure's analysis starts (taken by the tally).
    ChamberStart(Option<Box<Analyzer>>),
    /// The chamber pressure at `t_s`: `p` Pa from gauge `gauge`'s
    /// `element`.
    Chamber {
        /// Index of the gauge it came from.
        gauge: usize,
        /// Which of its sources.
        element: Element,
        /// Seconds from the report's origin.
        t_s: f64,
        /// Pressure, Pa.
        p: f64,
    },
}

/// The report's accumulators and analyses.
#[derive(Debug, Default)]
pub struct Tally {
    /// Per gauge, in the order first seen.
    pub gauges: Vec<GaugeAccumulator>,
    /// Pump-down and rate-of-rise analysis per gauge (same order).
    pub analyzers: Vec<Analyzer>,
    /// Each gauge's source names (same order).
    pub labels: Vec<Labels>,
    /// The chamber pressure's analysis.
    pub chamber: Option<Analyzer>,
    /// Per gauge, the analysis source of its last reading (the lookup by
    /// name skipped while a gauge's readings stay on one element).
    last_source: Vec<Option<(Element, SourceId)>>,
    /// The origin of the readings ([`Msg::Origin`], which comes before
    /// the first reading).
    origin: DateTime<Utc>,
}

impl Tally {
    /// Takes one message; `lengths`: the per-length results that follow it
    /// in its batch.
    fn apply(&mut self, msg: &mut Msg, lengths: &[LengthDerived]) {
        match msg {
            Msg::Gauge(g) => {
                if let Some(g) = g.take() {
                    let (acc, analyzer, labels) = *g;
                    self.gauges.push(acc);
                    self.analyzers.push(analyzer);
                    self.labels.push(labels);
                }
            }
            Msg::Origin(o) => self.origin = *o,
            Msg::Reading(r) => {
                let i = usize::try_from(r.gauge).unwrap_or(usize::MAX);
                let pressure_pa = r.pressure_pa();
                if let (Some(p), Some(a), Some(l)) =
                    (pressure_pa, self.analyzers.get_mut(i), self.labels.get(i))
                {
                    if self.last_source.len() <= i {
                        self.last_source.resize(i + 1, None);
                    }
                    let src = match self.last_source[i] {
                        Some((e, src)) if e == r.element => src,
                        _ => {
                            let src = a.source(l.name(r.element));
                            self.last_source[i] = Some((r.element, src));
                            src
                        }
                    };
                    a.push_from(crate::timefmt::seconds_between(self.origin, r.time), p, src);
                }
                if let Some(g) = self.gauges.get_mut(i) {
                    let obs = Observation {
                        time: r.time,
                        status: r.status,
                        pressure_pa,
                        range: r.range,
                        regimes: lengths,
                        exposure_langmuir: r.exposure_langmuir(),
                    };
                    match r.lengths() {
                        Some(_) => g.add(obs),
                        None => g.add_as_before(obs),
                    }
                }
            }
            Msg::ChamberStart(a) => {
                if let Some(a) = a.take() {
                    self.chamber = Some(*a);
                }
            }
            Msg::Chamber {
                gauge,
                element,
                t_s,
                p,
            } => {
                if let (Some(a), Some(l)) = (self.chamber.as_mut(), self.labels.get(*gauge)) {
                    let src = a.source(l.name(*element));
                    a.push_from(*t_s, *p, src);
                }
            }
        }
    }
}

#[derive(Debug, Default)]
struct Batch {
    msgs: Vec<Msg>,
    /// Per-length results of the readings, in order; the first `used` are
    /// this batch's (the rest are kept for their buffers).
    lengths: Vec<LengthDerived>,
    used: usize,
}

impl Batch {
    fn apply_to(&mut self, tally: &mut Tally) {
        let mut at = 0;
        for m in &mut self.msgs {
            let n = match m {
                Msg::Reading(r) => r.lengths().unwrap_or(0),
                _ => 0,
            };
            let end = (at + n).min(self.used);
            tally.apply(m, &self.lengths[at..end]);
            at = end;
        }
        self.msgs.clear();
        self.used = 0;
    }
}

/// The tally, fed here or on a thread of its own.
pub struct TallyOut {
    worker: Worker<Batch, Tally>,
    /// The last origin sent.
    origin: Option<DateTime<Utc>>,
}

impl TallyOut {
    /// An empty tally, fed on a thread of its own when `thread` (and one
    /// can be started).
    pub fn new(thread: bool) -> TallyOut {
        TallyOut {
            worker: Worker::new(
                Tally::default(),
                thread.then_some("report tally"),
                |t, b| b.apply_to(t),
            ),
            origin: None,
        }
    }

    /// Passes on a message with no per-length results.
    pub fn send(&mut self, msg: Msg) {
        self.worker.batch.msgs.push(msg);
        self.maybe_hand_over();
    }

    /// Passes on a reading and its per-length results (`None`: the same
    /// names and regimes as the gauge's reading before, which had a valid
    /// pressure: its accumulator keeps them).
    pub fn reading(&mut self, r: Counted, lengths: Option<&[LengthDerived]>) {
        if self.origin != Some(r.origin) {
            self.origin = Some(r.origin);
            self.worker.batch.msgs.push(Msg::Origin(r.origin));
        }
        let b = &mut self.worker.batch;
        for l in lengths.unwrap_or_default() {
            match b.lengths.get_mut(b.used) {
                Some(slot) => slot.clone_from(l),
                None => b.lengths.push(l.clone()),
            }
            b.used += 1;
        }
        b.msgs
            .push(Msg::Reading(Packed::new(&r, lengths.map(<[_]>::len))));
        self.maybe_hand_over();
    }

    fn maybe_hand_over(&mut self) {
        if self.worker.batch.msgs.len() >= BATCH {
            self.worker.hand_over();
        }
    }

    /// Takes everything passed on so far into account, and from then on
    /// feeds the tally here. Returns false if the thread was lost (a bug).
    pub fn settle(&mut self) -> bool {
        self.worker.settle()
    }

    /// The tally as fed so far; complete after [`TallyOut::settle`].
    pub fn tally(&self) -> Option<&Tally> {
        self.worker.state()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A packed reading gives back every field of the reading, with and
    /// without its pressure and exposure (zero among them), and its length
    /// count or "as before".
    #[test]
    fn a_packed_reading_keeps_what_the_tally_reads() {
        let time: DateTime<Utc> = "2026-11-16T06:00:00.125Z".parse().expect("time");
        for (pressure_pa, exposure_langmuir, lengths) in [
            (Some(2.5e-4), Some(0.0), Some(2)),
            (None, Some(1.5), None),
            (Some(0.0), None, Some(0)),
            (None, None, None),
        ] {
            let r = Counted {
                gauge: 3,
                time,
                origin: time,
                status: Status::UnderRange,
                pressure_pa,
                range: pressure_pa.map(|_| VacuumRange::High),
                exposure_langmuir,
                element: Element::Thermal,
            };
            let p = Packed::new(&r, lengths);
            assert_eq!(p.pressure_pa(), pressure_pa);
            assert_eq!(p.exposure_langmuir(), exposure_langmuir);
            assert_eq!(
                (p.gauge, p.time, p.status, p.range, p.element),
                (3, time, r.status, r.range, r.element)
            );
            assert_eq!(p.lengths(), lengths);
        }
        // What it is for: less memory between the cores than a `Counted`.
        assert!(std::mem::size_of::<Packed>() <= 40);
        assert!(std::mem::size_of::<Packed>() < std::mem::size_of::<Counted>());
    }
}
