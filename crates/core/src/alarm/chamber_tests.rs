//! The chamber pressure: the best gauge in range at each data time, fixed
//! gauges per quantity, and conditions that name no gauge.

use chrono::{DateTime, Duration, TimeZone, Utc};

use super::chamber::{AUTO, ChamberPressure};
use super::gate::{Gate, GateState};
use super::monitor::{GaugeSetup, Monitor, MonitorSetup};
use super::quantity::Quantity;
use super::syntax;
use crate::engine::gauge::{GaugeKind, GaugeSettings};
use crate::engine::mixture::Mixture;
use crate::engine::{Conditions, GaugeModel, GaugeOverrides, NamedLength, Physics, derive};
use crate::gas::GasTable;
use crate::sample::{ChannelUnit, Fault, Sample};
use crate::units::{PressureUnit, TemperatureUnit};

const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);

fn t(s: f64) -> DateTime<Utc> {
    Utc.timestamp_opt(1_800_000_000, 0).single().expect("time")
        + Duration::milliseconds((s * 1000.0) as i64)
}

fn gas(id: &str) -> Mixture {
    Mixture::pure(GasTable::builtin().get(id).expect("built-in gas").clone())
}

fn gauge(id: &str, kind: GaugeKind, mixture: &Mixture, range_mbar: (f64, f64)) -> GaugeSetup {
    let overrides = GaugeOverrides {
        range_pa: Some((range_mbar.0 * 100.0, range_mbar.1 * 100.0)),
        ..GaugeOverrides::default()
    };
    GaugeSetup {
        id: id.into(),
        model: GaugeModel::new(kind, mixture, &overrides).expect("model"),
        mixture: mixture.clone(),
        settings: Some(GaugeSettings {
            kind,
            mixture: mixture.clone(),
            calibration_gas: None,
            overrides,
        }),
    }
}

/// The demo chamber's three gauges, the ionization gauge listed first so
/// that the automatic order has to put the capacitance gauge ahead of it.
fn setup(mixture: &Mixture) -> MonitorSetup {
    MonitorSetup {
        gauges: vec![
            gauge("ion", GaugeKind::Ionization, mixture, (1e-10, 1e-3)),
            gauge("cdg", GaugeKind::Capacitance, mixture, (1e-4, 11.0)),
            gauge("chamber", GaugeKind::Combined, mixture, (5e-10, 1100.0)),
        ],
        mixture: mixture.clone(),
        gas_steps: vec![],
        lengths: vec![NamedLength::new("throw", 0.15)],
        physics: Physics::default(),
        assumed_temperature_k: 295.15,
        rules: vec![],
        gates: vec![],
        stale_after_s: 10.0,
        rate_window_s: 10.0,
        input_severity: super::rule::Severity::Warning,
        default_gauge: None,
        chamber: ChamberPressure::default(),
        pressure_unit: PressureUnit::Mbar,
        temperature_unit: TemperatureUnit::C,
    }
}

fn row(s: f64, cdg: Result<f64, Fault>, chamber: f64, ion: Result<f64, Fault>) -> Vec<Sample> {
    let one = |id: &str, v: Result<f64, Fault>| match v {
        Ok(v) => Sample::ok(t(s), id, v, MBAR),
        Err(f) => Sample::bad(t(s), id, MBAR, f),
    };
    vec![
        one("cdg", cdg),
        Sample::ok(t(s), "chamber", chamber, MBAR),
        one("ion", ion),
    ]
}

fn source(m: &Monitor, q: &Quantity) -> Option<String> {
    m.chamber_source(q).map(|s| s.gauge)
}

#[test]
fn capacitance_first_then_gas_dependent_never_a_bad_one() {
    let mut m = Monitor::new(setup(&gas("N2")));
    assert_eq!(source(&m, &Quantity::Pressure), None, "no data yet");
    // Roughing: the capacitance gauge in range is preferred.
    m.push(&row(0.0, Ok(5.0), 5.2, Err(Fault::SensorOff)));
    assert_eq!(source(&m, &Quantity::Pressure).as_deref(), Some("cdg"));
    // The capacitance gauge under its range: the gas-dependent gauges, in
    // config order (the ionization gauge is listed first).
    m.push(&row(10.0, Err(Fault::UnderRange), 2e-7, Ok(2.1e-7)));
    assert_eq!(source(&m, &Quantity::Pressure).as_deref(), Some("ion"));
    // Ion gauge reading above its configured range (1e-3 mbar) is skipped
    // even though the device says ok.
    m.push(&row(20.0, Err(Fault::UnderRange), 2e-3, Ok(2e-3)));
    assert_eq!(source(&m, &Quantity::Pressure).as_deref(), Some("chamber"));
    // A capacitance reading below its configured range is not in range.
    m.push(&row(30.0, Ok(5e-5), 5e-5, Ok(5e-5)));
    assert_eq!(source(&m, &Quantity::Pressure).as_deref(), Some("ion"));
}

#[test]
fn a_stale_gauge_is_left_for_a_fresh_one_on_data_time() {
    let mut m = Monitor::new(setup(&gas("N2")));
    m.push(&row(0.0, Ok(1e-2), 1e-2, Err(Fault::SensorOff)));
    assert_eq!(source(&m, &Quantity::Pressure).as_deref(), Some("cdg"));
    // Only the combined gauge keeps reporting: the capacitance gauge's last
    // value goes stale after 10 s of data time and is never used again.
    m.push(&[Sample::ok(t(6.0), "chamber", 8e-3, MBAR)]);
    m.push(&[Sample::ok(t(12.0), "chamber", 7e-3, MBAR)]);
    assert_eq!(source(&m, &Quantity::Pressure).as_deref(), Some("chamber"));
    let (_, track) = m.chamber_track(&Quantity::Pressure).expect("a source");
    let p = track.pressure_pa.expect("pressure");
    assert!((p - 0.7).abs() < 1e-12, "7e-3 mbar is 0.7 Pa: {p}");
}

#[test]
fn the_gauge_fixed_for_a_quantity_wins() {
    let mut s = setup(&gas("N2"));
    s.chamber
        .fixed
        .insert("mean_free_path".into(), "chamber".into());
    let mut m = Monitor::new(s);
    m.push(&row(0.0, Ok(5.0), 5.2, Err(Fault::SensorOff)));
    assert_eq!(source(&m, &Quantity::Pressure).as_deref(), Some("cdg"));
    let fixed = m
        .chamber_source(&Quantity::MeanFreePath)
        .expect("fixed gauge");
    assert_eq!((fixed.gauge.as_str(), fixed.fixed), ("chamber", true));
}

#[test]
fn an_explicit_order_is_followed() {
    let mut s = setup(&gas("N2"));
    s.chamber.order = vec!["chamber".into(), "cdg".into()];
    let mut m = Monitor::new(s);
    m.push(&row(0.0, Ok(5.0), 5.2, Err(Fault::SensorOff)));
    assert_eq!(source(&m, &Quantity::Pressure).as_deref(), Some("chamber"));
}

/// A gate that names no gauge watches the chamber pressure: it follows the
/// capacitance gauge while in range and the ionization gauge below it. The
/// mean free path it compares is the engine's for the chosen reading.
#[test]
fn a_condition_without_gauge_uses_the_chamber_pressure() {
    let mut s = setup(&gas("N2"));
    s.gates = vec![Gate {
        id: "ready".into(),
        label: "Ready".into(),
        conditions: vec![
            syntax::condition("mean_free_path above 10 x throw", &|l| {
                (l == "throw").then_some(0.15)
            })
            .expect("condition"),
        ],
        hold_s: 0.0,
    }];
    let mut m = Monitor::new(s);
    // The stale capacitance value 7e-3 mbar would say λ ≈ 9 mm: not ready.
    m.push(&row(0.0, Ok(7e-3), 7e-3, Err(Fault::SensorOff)));
    assert_eq!(m.gates()[0].state(), GateState::NotReady);
    let ev = m.push(&row(10.0, Err(Fault::UnderRange), 2e-7, Ok(2e-7)));
    assert_eq!(m.gates()[0].state(), GateState::Ready, "{ev:?}");
    // What the gate compared: the engine's λ at 2e-7 mbar of N2 (computed
    // here independently of the monitor).
    let d = derive(
        &Conditions::new(2e-5, 295.15),
        &gas("N2"),
        &[NamedLength::new("throw", 0.15)],
        &Physics::default(),
    );
    let (src, track) = m.chamber_track(&Quantity::MeanFreePath).expect("source");
    assert_eq!(src.gauge, "ion");
    let got = track.derived().expect("kinetics").mean_free_path_m;
    assert!(
        (got / d.mean_free_path_m - 1.0).abs() < 1e-12,
        "{got} vs {d:?}"
    );
    assert!(got > 1.5, "λ at 2e-7 mbar is hundreds of metres: {got}");
    // No bad-input alarm for the pseudo-gauge itself.
    assert!(m.alarms().iter().all(|a| a.rule.gauge != AUTO));
}

// --- The gas in force: config steps, the operator ---

fn argon_step() -> super::gas_step::GasStep {
    super::gas_step::GasStep {
        id: "argon".into(),
        mixture: gas("Ar"),
        when: vec![syntax::condition("cdg pressure above 1e-3 mbar", &|_| None).expect("cond")],
        from: None,
        until: None,
    }
}

/// A gas step whose conditions read a rate of change fits the rates by
/// itself: with no rule or gate reading one, a steady pressure in its band
/// still puts its gas in force.
#[test]
fn a_gas_step_on_a_rate_fits_the_rates_itself() {
    let mut s = setup(&gas("N2"));
    let mut step = argon_step();
    step.when = [
        "cdg pressure above 4e-3 mbar",
        "cdg rate_of_change below 1e-5 mbar/s",
        "cdg rate_of_change above -1e-5 mbar/s",
    ]
    .iter()
    .map(|c| syntax::condition(c, &|_| None).expect("cond"))
    .collect();
    s.gas_steps = vec![step];
    assert!(s.rules.is_empty() && s.gates.is_empty());
    let mut m = Monitor::new(s);
    for i in 0..30 {
        m.push(&row(f64::from(i), Ok(5e-3), 2.81e-3, Err(Fault::SensorOff)));
    }
    assert!(m.track("cdg").expect("cdg").dpdt.is_some(), "rates fitted");
    assert_eq!(m.gas().0.label(), "Ar");
}

/// A step on the capacitance gauge puts Ar in force at the row where it
/// holds: the combined gauge above its crossover has no thermal factor for
/// Ar, so it is uncorrectable and the chamber pressure falls back to the
/// capacitance gauge, whose kinetics are the engine's for Ar. When the step
/// stops holding the base gas returns. One event per change.
#[test]
fn a_gas_step_recorrects_and_the_uncorrectable_gauge_drops_out() {
    let mut s = setup(&gas("N2"));
    s.gas_steps = vec![argon_step()];
    // Only the combined gauge is preferred, so that falling back shows.
    s.chamber.order = vec!["chamber".into(), "cdg".into()];
    let mut m = Monitor::new(s);
    let ev = m.push(&row(0.0, Err(Fault::UnderRange), 2e-7, Ok(2e-7)));
    assert!(ev.iter().all(|e| e.kind() != super::event::EventKind::Gas));
    assert_eq!(m.gas().0.label(), "N2");
    // Argon at 5e-3 mbar true; the combined gauge reads 2.81e-3 N2-equivalent.
    let ev = m.push(&row(5.0, Ok(5e-3), 2.81e-3, Err(Fault::SensorOff)));
    let gas_events: Vec<_> = ev
        .iter()
        .filter(|e| e.kind() == super::event::EventKind::Gas)
        .collect();
    assert_eq!(gas_events.len(), 1, "{ev:?}");
    assert_eq!(
        (gas_events[0].from_text(), gas_events[0].to_text()),
        ("N2", "Ar")
    );
    assert_eq!(gas_events[0].value_text.as_deref(), Some("step argon"));
    assert_eq!(m.gas().1, &super::gas_step::GasOrigin::Step("argon".into()));
    let chamber = m.track("chamber").expect("track");
    assert!(chamber.uncorrectable && chamber.pressure_pa.is_none());
    assert_eq!(source(&m, &Quantity::Pressure).as_deref(), Some("cdg"));
    // λ of Ar at 5e-3 mbar, 22 C: the engine fed the same numbers.
    let want = derive(
        &Conditions::new(0.5, 295.15),
        &gas("Ar"),
        &[],
        &Physics::default(),
    )
    .mean_free_path_m;
    let (_, track) = m.chamber_track(&Quantity::MeanFreePath).expect("source");
    let got = track.derived().expect("kinetics").mean_free_path_m;
    assert!((got / want - 1.0).abs() < 1e-12, "{got} vs {want}");
    // The same step on the next row: no event.
    let ev = m.push(&row(10.0, Ok(5e-3), 2.8e-3, Err(Fault::SensorOff)));
    assert!(ev.iter().all(|e| e.kind() != super::event::EventKind::Gas));
    // Back under the capacitance gauge's range: N2 again, the combined
    // gauge corrected with the N2 model.
    let ev = m.push(&row(15.0, Err(Fault::UnderRange), 2e-7, Ok(2e-7)));
    assert!(
        ev.iter()
            .any(|e| e.kind() == super::event::EventKind::Gas && e.to_text() == "N2")
    );
    let chamber = m.track("chamber").expect("track");
    assert!(!chamber.uncorrectable);
    assert!((chamber.pressure_pa.expect("p") - 2e-5).abs() < 1e-12);
}

/// Below the crossover the combined gauge reads on its ionization element,
/// which has a factor for Ar (REFERENCES: relative ionization sensitivity
/// of Ar, the gas table's value): it stays correctable in Ar.
#[test]
fn in_argon_the_ionization_element_still_corrects() {
    let mut m = Monitor::new(setup(&gas("N2")));
    let who = super::event::Actor::named("op");
    let ev = m.set_gas(super::gas_step::GasChoice::Fixed(gas("Ar")), &who, t(0.0));
    assert_eq!(ev.len(), 1);
    assert_eq!(ev[0].operation, Some(super::event::Operation::SetGas));
    assert_eq!(ev[0].user.as_deref(), Some("op"));
    m.push(&row(0.0, Err(Fault::UnderRange), 2e-6, Ok(2e-6)));
    let s_ar = GasTable::builtin()
        .get("Ar")
        .expect("Ar")
        .ion_sensitivity
        .expect("Ar ion factor");
    let p = m.track("chamber").expect("track").pressure_pa.expect("p");
    assert!((p - 2e-4 / s_ar).abs() < 1e-15, "{p}");
    // The operator's fixed choice wins over a step, and auto returns.
    let ev = m.set_gas(super::gas_step::GasChoice::Auto, &who, t(1.0));
    assert_eq!((ev[0].from_text(), ev[0].to_text()), ("Ar", "N2"));
    let p = m.track("chamber").expect("track").pressure_pa.expect("p");
    assert!((p - 2e-4).abs() < 1e-15, "re-corrected at once: {p}");
}
