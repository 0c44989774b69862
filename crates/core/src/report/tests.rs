use chrono::TimeZone;

use super::*;
use crate::engine::regime::IsoEdition;

fn at(s: i64) -> DateTime<Utc> {
    Utc.timestamp_opt(1_800_000_000 + s, 0)
        .single()
        .expect("time")
}

fn obs(s: i64, p: Option<f64>) -> Observation<'static> {
    let range = p.map(|p| IsoEdition::Ed2019.classify(p));
    // Leaked: a test's few observations borrow them for 'static.
    let one = |regime, knudsen| -> &'static [LengthDerived] {
        Box::leak(Box::new([LengthDerived {
            name: "line".into(),
            length_m: 0.1,
            knudsen,
            regime,
        }]))
    };
    Observation {
        time: at(s),
        status: if p.is_some() {
            Status::Ok
        } else {
            Status::OverRange
        },
        pressure_pa: p,
        range,
        regimes: match p {
            Some(p) if p > 100.0 => one(FlowRegime::Viscous, 1e-3),
            Some(_) => one(FlowRegime::Molecular, 10.0),
            None => &[],
        },
        exposure_langmuir: None,
    }
}

fn range_s(s: &GaugeSummary, r: VacuumRange) -> f64 {
    s.time_in_range_s
        .iter()
        .find(|(x, _)| *x == r)
        .map_or(-1.0, |(_, v)| *v)
}

#[test]
fn three_readings_by_hand() {
    // 5e4 Pa (low vacuum, ISO 3529-1:2019: below atmosphere down to 100 Pa)
    // for 10 s, 50 Pa (medium: 100 … 0.1 Pa) for 10 s, then 0.05 Pa (high)
    // at the end, which holds for no time.
    let thresholds = vec![
        Threshold {
            pa: 100.0,
            source: "a".into(),
        },
        Threshold {
            pa: 1e-3,
            source: "b".into(),
        },
    ];
    let mut g = GaugeAccumulator::new("chamber", thresholds, None);
    for (t, p) in [(0, 5e4), (10, 50.0), (20, 0.05)] {
        g.add(obs(t, Some(p)));
    }
    let s = g.summary();
    assert_eq!(s.samples, 3);
    assert_eq!(s.duration_s, 20.0);
    assert_eq!(range_s(&s, VacuumRange::Low), 10.0);
    assert_eq!(range_s(&s, VacuumRange::Medium), 10.0);
    assert_eq!(range_s(&s, VacuumRange::High), 0.0);
    assert_eq!(s.thresholds[0].1, Some(at(10)));
    assert_eq!(s.thresholds[1].1, None);
    assert_eq!(s.min_pa, Some(0.05));
    assert_eq!(s.max_pa, Some(5e4));
    let median = s.median_pa.expect("median");
    assert!((median - 50.0).abs() < 1e-9, "{median}");
    // (5e4 + 50 + 0.05) / 3, by hand.
    assert_eq!(s.mean_pa, Some(50_050.05 / 3.0));
    assert_eq!(
        s.time_in_regime_s,
        vec![(
            "line".to_string(),
            vec![
                (FlowRegime::Viscous, 10.0),
                (FlowRegime::Transitional, 0.0),
                (FlowRegime::Molecular, 10.0)
            ]
        )]
    );
    assert_eq!(s.gap_count, 0);
    assert_eq!(s.accounted_s(), s.duration_s);
}

#[test]
fn a_long_interval_is_a_gap_in_no_class() {
    let mut g = GaugeAccumulator::new("g", Vec::new(), None);
    for t in [0, 1, 2, 3, 100, 101] {
        g.add(obs(t, Some(50.0)));
    }
    let s = g.summary();
    assert_eq!(s.gap_count, 1);
    assert_eq!(s.gap_s, 97.0);
    assert_eq!(s.gaps, vec![(at(3), at(100))]);
    assert_eq!(range_s(&s, VacuumRange::Medium), 4.0);
    assert_eq!(s.accounted_s(), 101.0);
    assert_eq!(s.gap_after_s, Some(5.0));
}

#[test]
fn bad_readings_and_times_going_back_keep_the_sum() {
    let mut g = GaugeAccumulator::new("g", Vec::new(), Some(1000.0));
    g.add(obs(0, Some(50.0)));
    g.add(obs(10, None));
    g.add(obs(5, Some(50.0)));
    g.add(obs(10, Some(50.0)));
    g.add(obs(30, Some(5e4)));
    let s = g.summary();
    assert_eq!(s.time_without_pressure_s, 0.0);
    assert_eq!(range_s(&s, VacuumRange::Medium), 30.0);
    assert_eq!(
        s.statuses,
        vec![("ok".to_string(), 4), ("over-range".to_string(), 1)]
    );
    assert_eq!(s.accounted_s(), s.duration_s);
    let mut g = GaugeAccumulator::new("g", Vec::new(), Some(1000.0));
    g.add(obs(0, None));
    g.add(obs(7, Some(50.0)));
    assert_eq!(g.summary().time_without_pressure_s, 7.0);
}

#[test]
fn unusable_rows_count_by_cause() {
    let mut u = Unusable::default();
    u.count("x");
    u.count("x");
    u.count("y");
    assert_eq!(u.total(), 3);
    assert_eq!(u.causes.get("x"), Some(&2));
}

#[test]
fn the_mean_keeps_its_digits_over_many_decades() {
    // 200 000 readings: one of 1e5 Pa, then 199 999 of 1e-6 Pa. A plain
    // sum loses the small ones' digits against the large one; the
    // compensated sum gives (1e5 + 199 999e-6) / 2e5 to the last bits.
    let mut g = GaugeAccumulator::new("g", Vec::new(), Some(1e9));
    g.add(obs(0, Some(1e5)));
    for i in 1..200_000 {
        g.add(obs(i, Some(1e-6)));
    }
    let mean = g.summary().mean_pa.expect("mean");
    let want = (1e5 + 199_999.0 * 1e-6) / 2e5;
    assert!((mean - want).abs() <= 1e-15 * want, "{mean} vs {want}");
}

/// A reading added "as before" counts its time in the regimes of the
/// reading before it, as the same reading added with those regimes does:
/// the two ways give the same summary (regimes held across a gap, a
/// reading without a pressure and a change of regime included).
#[test]
fn a_reading_as_before_counts_as_the_same_reading_given_in_full() {
    let readings: Vec<(i64, Option<f64>)> = vec![
        (0, Some(5e4)),
        (1, Some(4e4)),
        (2, Some(3e4)),
        (3, Some(50.0)),
        (4, Some(40.0)),
        (60, Some(30.0)),
        (61, None),
        (62, Some(20.0)),
        (63, Some(10.0)),
        (64, Some(5e3)),
        (65, Some(4e3)),
    ];
    let run = |shortcut: bool| {
        let mut acc = GaugeAccumulator::new("g", Vec::new(), Some(30.0));
        let mut before: Option<Observation<'static>> = None;
        for &(s, p) in &readings {
            let o = obs(s, p);
            // As before: the reading before had a pressure and the same
            // regimes.
            let same = before
                .as_ref()
                .is_some_and(|b| b.pressure_pa.is_some() && p.is_some() && b.regimes == o.regimes);
            if shortcut && same {
                acc.add_as_before(Observation { regimes: &[], ..o });
            } else {
                acc.add(Observation { ..o });
            }
            before = Some(o);
        }
        acc.summary()
    };
    let (full, short) = (run(false), run(true));
    assert_eq!(full, short);
    // The test has teeth: both regimes, and the gap, are counted.
    let regimes = &full.time_in_regime_s[0].1;
    for r in [FlowRegime::Viscous, FlowRegime::Molecular] {
        assert!(
            regimes.iter().any(|(x, s)| *x == r && *s > 0.0),
            "{regimes:?}"
        );
    }
    assert!(full.gap_count == 1, "{full:?}");
}
