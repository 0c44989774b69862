//! State-machine tests: every transition, deadband and delay edge, shelving,
//! latching, stale input, gates, and regime/range crossings on a simulated
//! pump-down and vent checked against the engine.

use chrono::{DateTime, Duration, TimeZone, Utc};

use super::event::Actor;
use super::gate::{Check, Gate, GateMachine, GateState};
use super::monitor::{GaugeSetup, Monitor, MonitorSetup, RuleSpec};
use super::quantity::{Class, Quantity};
use super::rule::{AlarmState as S, Band, Deadband, Input, Rule, RuleMachine, Severity, Test};
use super::syntax;
use crate::engine::gauge::GaugeKind;
use crate::engine::mixture::Mixture;
use crate::engine::regime::{FlowRegime, VacuumRange};
use crate::engine::{Conditions, GaugeModel, GaugeOverrides, NamedLength, Physics, derive};
use crate::gas::GasTable;
use crate::sample::{ChannelUnit, Fault, Sample};
use crate::units::{PressureUnit, TemperatureUnit};

fn t(s: f64) -> DateTime<Utc> {
    Utc.timestamp_opt(1_800_000_000, 0).single().expect("time")
        + Duration::milliseconds((s * 1000.0) as i64)
}

fn rule(test: Test) -> Rule {
    Rule {
        id: "r".into(),
        label: "r".into(),
        gauge: "g".into(),
        quantity: Quantity::Pressure,
        test,
        deadband: Deadband::None,
        on_delay_s: 0.0,
        off_delay_s: 0.0,
        severity: Severity::Warning,
        latching: false,
    }
}

/// Feeds values at 1 s steps from `start`; returns the state after each.
fn run(m: &mut RuleMachine, start: f64, values: &[f64]) -> Vec<S> {
    values
        .iter()
        .enumerate()
        .map(|(i, v)| {
            m.update(t(start + i as f64), Input::Value(*v));
            m.state()
        })
        .collect()
}

#[test]
fn threshold_edges_exactly_at_and_either_side() {
    let mut m = RuleMachine::new(rule(Test::Above(1.0)));
    assert_eq!(
        run(&mut m, 0.0, &[1.0, 0.999_999, 1.000_001]),
        [S::Normal, S::Normal, S::Unacknowledged]
    );
    // Back exactly at the threshold clears (no deadband).
    assert_eq!(run(&mut m, 3.0, &[1.0]), [S::ReturnedUnacknowledged]);
    let mut m = RuleMachine::new(rule(Test::Below(1.0)));
    assert_eq!(
        run(&mut m, 0.0, &[1.0, 0.999_999, 1.0]),
        [S::Normal, S::Unacknowledged, S::ReturnedUnacknowledged]
    );
}

#[test]
fn isa_18_2_transitions() {
    let mut m = RuleMachine::new(rule(Test::Above(1.0)));
    run(&mut m, 0.0, &[2.0]);
    assert_eq!(m.state(), S::Unacknowledged);
    let ev = m.acknowledge(t(1.0), "ana").expect("ack");
    assert_eq!((ev[0].from, ev[0].to), (S::Unacknowledged, S::Acknowledged));
    assert_eq!(ev[0].note.as_deref(), Some("acknowledged by ana"));
    assert!(
        m.acknowledge(t(1.5), "ana").is_err(),
        "nothing to acknowledge twice"
    );
    assert_eq!(run(&mut m, 2.0, &[0.5]), [S::Normal]);
    // Return before acknowledgement, then acknowledge.
    run(&mut m, 3.0, &[2.0, 0.5]);
    assert_eq!(m.state(), S::ReturnedUnacknowledged);
    m.acknowledge(t(5.0), "ana").expect("ack");
    assert_eq!(m.state(), S::Normal);
    // Back into alarm from returned-unacknowledged.
    run(&mut m, 6.0, &[2.0, 0.5, 2.0]);
    assert_eq!(m.state(), S::Unacknowledged);
}

#[test]
fn fraction_deadband_holds_until_the_clear_level() {
    let mut r = rule(Test::Above(1.0));
    r.deadband = Deadband::Fraction(0.1);
    let mut m = RuleMachine::new(r);
    assert_eq!(
        run(&mut m, 0.0, &[1.1, 0.95, 0.900_001, 0.9]),
        [
            S::Unacknowledged,
            S::Unacknowledged,
            S::Unacknowledged,
            S::ReturnedUnacknowledged
        ]
    );
    // Once clear, it re-arms at the threshold, not at the clear level.
    assert_eq!(
        run(&mut m, 4.0, &[0.95, 1.0, 1.01]),
        [S::ReturnedUnacknowledged; 2]
            .into_iter()
            .chain([S::Unacknowledged])
            .collect::<Vec<_>>()
    );
}

#[test]
fn decade_and_absolute_deadbands() {
    let mut r = rule(Test::Above(1e-3));
    r.deadband = Deadband::Decades(1.0);
    let mut m = RuleMachine::new(r);
    assert_eq!(
        run(&mut m, 0.0, &[2e-3, 1.1e-4, 1e-4]),
        [
            S::Unacknowledged,
            S::Unacknowledged,
            S::ReturnedUnacknowledged
        ]
    );
    let mut r = rule(Test::Below(10.0));
    r.deadband = Deadband::Absolute(2.0);
    let mut m = RuleMachine::new(r);
    assert_eq!(
        run(&mut m, 0.0, &[9.0, 11.9, 12.0]),
        [
            S::Unacknowledged,
            S::Unacknowledged,
            S::ReturnedUnacknowledged
        ]
    );
}

#[test]
fn on_delay_filters_short_crossings() {
    let mut r = rule(Test::Above(1.0));
    r.on_delay_s = 3.0;
    let mut m = RuleMachine::new(r);
    // Above for 2 s (t=0,1,2 … back at 3): shorter than the delay.
    assert_eq!(run(&mut m, 0.0, &[2.0, 2.0, 2.0, 0.5]), [S::Normal; 4]);
    // Above from t=10: held 3 s at t=13, exactly the delay.
    let states = run(&mut m, 10.0, &[2.0, 2.0, 2.0, 2.0]);
    assert_eq!(states, [S::Normal, S::Normal, S::Normal, S::Unacknowledged]);
    assert_eq!(m.since(), Some(t(13.0)));
}

#[test]
fn off_delay_ignores_a_short_return() {
    let mut r = rule(Test::Above(1.0));
    r.off_delay_s = 5.0;
    let mut m = RuleMachine::new(r);
    run(&mut m, 0.0, &[2.0]);
    // Back below for 4 s, then above again: still in alarm throughout.
    assert_eq!(
        run(&mut m, 1.0, &[0.5, 0.5, 0.5, 0.5, 2.0]),
        [S::Unacknowledged; 5]
    );
    // Below for 5 s: returns.
    let states = run(&mut m, 6.0, &[0.5, 0.5, 0.5, 0.5, 0.5, 0.5]);
    assert_eq!(states[..5], [S::Unacknowledged; 5]);
    assert_eq!(states[5], S::ReturnedUnacknowledged);
}

#[test]
fn latching_holds_until_acknowledged_after_the_return() {
    let mut r = rule(Test::Above(1.0));
    r.latching = true;
    let mut m = RuleMachine::new(r);
    assert_eq!(run(&mut m, 0.0, &[2.0, 0.5, 0.5]), [S::Unacknowledged; 3]);
    m.acknowledge(t(3.0), "bo").expect("ack");
    assert_eq!(
        m.state(),
        S::Normal,
        "acknowledging a cleared latched alarm resets it"
    );
    // Acknowledged while active, then clears: stays acknowledged until reset.
    run(&mut m, 4.0, &[2.0]);
    m.acknowledge(t(5.0), "bo").expect("ack");
    assert_eq!(run(&mut m, 6.0, &[0.5, 0.5]), [S::Acknowledged; 2]);
    m.acknowledge(t(8.0), "bo").expect("reset");
    assert_eq!(m.state(), S::Normal);
}

#[test]
fn shelving_hides_and_expires_on_data_time() {
    let mut m = RuleMachine::new(rule(Test::Above(1.0)));
    run(&mut m, 0.0, &[2.0]);
    m.shelve(t(1.0), t(11.0), "cy").expect("shelve");
    assert_eq!(m.state(), S::Shelved);
    assert!(
        m.shelve(t(1.0), t(0.5), "cy").is_err(),
        "must end in the future"
    );
    // Condition comes and goes while shelved: no state change.
    assert_eq!(run(&mut m, 2.0, &[0.5, 2.0, 0.5, 2.0]), [S::Shelved; 4]);
    // Expiry at t=11 while in alarm: unacknowledged.
    let ev = m.update(t(11.0), Input::Value(2.0));
    assert_eq!(ev[0].to, S::Unacknowledged);
    assert_eq!(ev[0].note.as_deref(), Some("shelving expired"));
    // Unshelve early while clear: normal.
    m.shelve(t(12.0), t(100.0), "cy").expect("shelve");
    run(&mut m, 13.0, &[0.5]);
    m.unshelve(t(14.0), "cy").expect("unshelve");
    assert_eq!(m.state(), S::Normal);
    assert!(m.unshelve(t(15.0), "cy").is_err());
}

#[test]
fn unusable_input_holds_the_state_and_restarts_delays() {
    let mut r = rule(Test::Above(1.0));
    r.on_delay_s = 2.0;
    let mut m = RuleMachine::new(r);
    m.update(t(0.0), Input::Value(2.0));
    m.update(t(1.0), Input::Unusable);
    m.update(t(2.0), Input::Value(2.0));
    assert_eq!(m.state(), S::Normal, "the delay restarted at t=2");
    m.update(t(4.0), Input::Value(2.0));
    assert_eq!(m.state(), S::Unacknowledged);
    m.update(t(5.0), Input::Unusable);
    assert_eq!(
        m.state(),
        S::Unacknowledged,
        "a bad reading is never a silent return"
    );
}

#[test]
fn suppressed_by_design_while_disabled() {
    let mut m = RuleMachine::new(rule(Test::Above(1.0)));
    run(&mut m, 0.0, &[2.0]);
    m.update(t(1.0), Input::Disabled);
    assert_eq!(m.state(), S::SuppressedByDesign);
    assert!(m.shelve(t(1.5), t(5.0), "x").is_err());
    run(&mut m, 2.0, &[0.5]);
    assert_eq!(m.state(), S::Normal);
    run(&mut m, 3.0, &[2.0]);
    assert_eq!(m.state(), S::Unacknowledged);
}

#[test]
fn crossings_are_momentary_either_way() {
    let mut r = rule(Test::Crosses(
        Class::Regime(FlowRegime::Transitional),
        Class::Regime(FlowRegime::Molecular),
    ));
    r.quantity = Quantity::Regime("x".into());
    let mut m = RuleMachine::new(r);
    let mut feed = |s: f64, c: FlowRegime| {
        m.update(t(s), Input::Class(Class::Regime(c)));
        m.state()
    };
    assert_eq!(feed(0.0, FlowRegime::Transitional), S::Normal);
    assert_eq!(feed(1.0, FlowRegime::Molecular), S::Unacknowledged);
    assert_eq!(feed(2.0, FlowRegime::Molecular), S::ReturnedUnacknowledged);
    assert_eq!(
        feed(3.0, FlowRegime::Viscous),
        S::Unacknowledged,
        "back across, skipping transitional"
    );
    assert_eq!(feed(4.0, FlowRegime::Viscous), S::ReturnedUnacknowledged);
}

#[test]
fn a_monitor_explains_its_gate_when_asked_with_the_value_of_the_last_reading() {
    // Gate "ready": g pressure below 1e-4 mbar held for 8 s.
    let mut m = Monitor::new(delayed_setup());
    assert_eq!(m.gate_reason(0).as_deref(), Some("no data yet"));
    m.push(&[Sample::ok(t(0.0), "g", 3e-3, MBAR)]);
    let why = m.gate_reason(0).expect("not ready");
    assert!(
        why.starts_with("g pressure below 1e-4 mbar: g is 3") && why.ends_with("mbar"),
        "{why}"
    );
    // The value is the last reading's.
    m.push(&[Sample::ok(t(1.0), "g", 7e-4, MBAR)]);
    let why = m.gate_reason(0).expect("not ready");
    assert!(why.contains("g is 7"), "{why}");
    // Holding: the time still to go.
    m.push(&[Sample::ok(t(2.0), "g", 5e-5, MBAR)]);
    assert_eq!(
        m.gate_reason(0).as_deref(),
        Some("all conditions hold; 8 s of 8 s to go")
    );
    m.push(&[Sample::ok(t(6.0), "g", 5e-5, MBAR)]);
    assert_eq!(
        m.gate_reason(0).as_deref(),
        Some("all conditions hold; 4 s of 8 s to go")
    );
    let ev = m.push(&[Sample::ok(t(10.0), "g", 5e-5, MBAR)]);
    assert!(
        ev.iter()
            .any(|e| e.id == "ready" && e.text == "Ready: ready (all conditions held 8 s)"),
        "{ev:?}"
    );
    assert_eq!(m.gate_reason(0), None);
    // A break: the event says why, as the monitor does when asked.
    let ev = m.push(&[Sample::bad(t(11.0), "g", MBAR, Fault::SensorError)]);
    let broke = ev
        .iter()
        .find(|e| e.id == "ready")
        .expect("not ready again");
    let why = m.gate_reason(0).expect("not ready");
    assert_eq!(broke.value_text.as_deref(), Some(why.as_str()));
    assert_eq!(broke.text, format!("Ready: not ready: {why}"));
    assert!(why.contains("sensor-error"), "{why}");
    assert_eq!(m.gate_reason(7), None, "no such gate");
}

#[test]
fn gate_holds_for_its_duration_and_says_why_not() {
    let cond = syntax::condition("g pressure below 5e-6 mbar", &|_| None).expect("valid");
    let mut g = GateMachine::new(Gate {
        id: "ready".into(),
        label: "Ready".into(),
        conditions: vec![cond],
        hold_s: 120.0,
    });
    assert!(
        g.update(t(0.0), &[Check::Fails("g is 1e-5 mbar".into())])
            .is_none()
    );
    assert!(g.reason().is_some_and(|r| r.contains("1e-5")));
    assert!(g.update(t(10.0), &[Check::Holds]).is_none());
    g.update(t(70.0), &[Check::Holds]);
    assert_eq!(g.time_left_s(), Some(60.0));
    assert!(g.update(t(129.9), &[Check::Holds]).is_none());
    let tr = g.update(t(130.0), &[Check::Holds]).expect("ready");
    assert_eq!((tr.from, tr.to), (GateState::NotReady, GateState::Ready));
    let tr = g
        .update(t(131.0), &[Check::Unknown("g reading is stale".into())])
        .expect("breaks");
    assert_eq!(tr.to, GateState::NotReady);
    assert!(tr.reason.is_some_and(|r| r.contains("stale")));
    // The hold restarts from the beginning.
    g.update(t(132.0), &[Check::Holds]);
    assert_eq!(g.time_left_s(), Some(120.0));
}

fn n2() -> Mixture {
    Mixture::pure(GasTable::builtin().get("N2").expect("N2").clone())
}

fn setup(rules: Vec<Rule>, gates: Vec<Gate>) -> MonitorSetup {
    MonitorSetup {
        gauges: vec![],
        mixture: n2(),
        gas_steps: vec![],
        lengths: vec![NamedLength::new("bore", 0.3)],
        physics: Physics::default(),
        assumed_temperature_k: 295.15,
        rules: rules
            .into_iter()
            .map(|rule| RuleSpec { rule, enable: None })
            .collect(),
        gates,
        stale_after_s: 10.0,
        rate_window_s: 10.0,
        input_severity: Severity::Warning,
        default_gauge: Some("g".into()),
        chamber: Default::default(),
        pressure_unit: PressureUnit::Mbar,
        temperature_unit: TemperatureUnit::C,
    }
}

const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);

#[test]
fn monitor_reads_statuses_sensibly() {
    let mut m = Monitor::new(setup(vec![rule(Test::Above(1e-1))], vec![]));
    let ev = m.push(&[Sample::ok(t(0.0), "g", 1e-4, MBAR)]);
    assert!(ev.is_empty(), "{ev:?}");
    // Over the top of the gauge's range answers an "above" rule.
    let ev = m.push(&[Sample::bad(t(1.0), "g", MBAR, Fault::OverRange)]);
    assert_eq!(ev[0].to_text(), "unacknowledged");
    assert_eq!(ev[0].value_text.as_deref(), Some("over-range"));
    // Switched off: suppressed by design.
    let ev = m.push(&[Sample::bad(t(2.0), "g", MBAR, Fault::SensorOff)]);
    assert_eq!(ev[0].to_text(), "suppressed-by-design");
    // A sensor error raises the bad-input alarm; the rule holds.
    m.push(&[Sample::ok(t(3.0), "g", 1e-4, MBAR)]);
    let ev = m.push(&[Sample::bad(t(4.0), "g", MBAR, Fault::SensorError)]);
    assert_eq!(ev.len(), 1, "{ev:?}");
    assert_eq!(
        (ev[0].id.as_str(), ev[0].to_text()),
        ("g.input", "unacknowledged")
    );
    assert!(ev[0].text.contains("sensor-error"), "{}", ev[0].text);
}

/// Off the scale answers above/below, but no number stands in for the
/// reading: the event says the status word and carries no value.
#[test]
fn off_scale_readings_answer_rules_without_a_number() {
    let mut m = Monitor::new(setup(vec![rule(Test::Below(1e-1))], vec![]));
    m.push(&[Sample::ok(t(0.0), "g", 1e-2, MBAR)]);
    let ev = m.push(&[Sample::bad(t(1.0), "g", MBAR, Fault::UnderRange)]);
    assert_eq!(ev.len(), 1, "{ev:?}");
    assert_eq!(ev[0].to_text(), "unacknowledged");
    assert_eq!(ev[0].value, None);
    assert_eq!(ev[0].value_text.as_deref(), Some("under-range"));
    let ev = m.push(&[Sample::bad(t(2.0), "g", MBAR, Fault::OverRange)]);
    assert_eq!(ev.len(), 1, "{ev:?}");
    assert_eq!(ev[0].value, None);
    assert_eq!(ev[0].value_text.as_deref(), Some("over-range"));
    assert_eq!(
        m.alarms()
            .iter()
            .find(|a| a.rule.id == "r")
            .and_then(|a| a.value_text.clone())
            .as_deref(),
        Some("over-range")
    );

    let wall = ChannelUnit::Temperature(TemperatureUnit::C);
    let mut r = rule(Test::Above(400.0));
    r.quantity = Quantity::Temperature;
    let mut m = Monitor::new(setup(vec![r], vec![]));
    m.push(&[Sample::ok(t(0.0), "g", 22.0, wall)]);
    let ev = m.push(&[Sample::bad(t(1.0), "g", wall, Fault::OverRange)]);
    assert_eq!(ev[0].value_text.as_deref(), Some("over-range"));
    let ev = m.push(&[Sample::bad(t(2.0), "g", wall, Fault::UnderRange)]);
    assert_eq!(ev[0].value, None);
    assert_eq!(ev[0].value_text.as_deref(), Some("under-range"));
}

#[test]
fn monitor_notices_a_stale_gauge_on_data_time() {
    let mut m = Monitor::new(setup(vec![rule(Test::Above(1.0))], vec![]));
    m.push(&[Sample::ok(t(0.0), "g", 1e-4, MBAR)]);
    assert!(m.tick(t(10.0)).is_empty(), "10 s is not yet stale");
    let ev = m.tick(t(10.5));
    assert_eq!(ev.len(), 1);
    assert_eq!(ev[0].id, "g.input");
    assert_eq!(ev[0].value_text.as_deref(), Some("stale"));
    let ev = m.push(&[Sample::ok(t(11.0), "g", 1e-4, MBAR)]);
    assert_eq!(ev[0].to_text(), "returned-unacknowledged");
}

#[test]
fn monitor_derives_kinetics_with_gauge_correction() {
    // An argon-calibrated … no: an N2-calibrated ion gauge in argon reads 1.4x.
    let ar = Mixture::pure(GasTable::builtin().get("Ar").expect("Ar").clone());
    let model =
        GaugeModel::new(GaugeKind::Ionization, &ar, &GaugeOverrides::default()).expect("model");
    let mut s = setup(
        vec![Rule {
            quantity: Quantity::MeanFreePath,
            ..rule(Test::Below(10.0))
        }],
        vec![],
    );
    s.gauges = vec![GaugeSetup {
        id: "g".into(),
        model,
        mixture: ar.clone(),
        settings: None,
    }];
    let mut m = Monitor::new(s);
    m.push(&[Sample::ok(t(0.0), "g", 1.4e-5, MBAR)]);
    let track = m.track("g").expect("track");
    assert!((track.pressure_pa.expect("p") - 1e-3).abs() < 1e-12);
    let expect = derive(
        &Conditions::new(1e-3, 295.15),
        &ar,
        &[],
        &Physics::default(),
    )
    .mean_free_path_m;
    assert!((track.derived().expect("kinetics").mean_free_path_m - expect).abs() < 1e-12);
}

/// A mixture's most probable speed is a numerical search; at a new
/// temperature the monitor scales it from the gas's first (√T). With a
/// temperature new at every row, the cache fills; the base must stay, or
/// every sixteenth row searches again (the values stay the same either
/// way: the first check holds for both, the second tells them apart).
#[test]
fn a_mixture_is_searched_once_however_many_temperatures_come() {
    let table = GasTable::builtin();
    let mix = Mixture::parse("Ar=0.9,N2=0.08,H2O=0.02", &table).expect("mixture");
    let mut s = setup(vec![], vec![]);
    s.mixture = mix.clone();
    let lengths = s.lengths.clone();
    let physics = s.physics;
    let mut m = Monitor::new(s);
    let celsius = ChannelUnit::Temperature(TemperatureUnit::C);
    let wall = |i: usize| 20.0 + 0.013 * i as f64;
    for i in 0..40 {
        m.push(&[
            Sample::ok(t(i as f64), "wall", wall(i), celsius),
            Sample::ok(t(i as f64), "g", 1e-3, MBAR),
        ]);
    }
    let base = crate::engine::Precomputed::new(celsius.to_si(wall(0)), &mix, &lengths, &physics);
    let want = base
        .at_temperature(celsius.to_si(wall(39)), &mix, &lengths, &physics)
        .derive(0.1)
        .most_probable_speed_m_per_s;
    let got = m.track("g").and_then(|t| t.derived()).expect("kinetics");
    assert_eq!(got.most_probable_speed_m_per_s.to_bits(), want.to_bits());
    // Searched once: at the first temperature, still kept.
    assert_eq!(m.kinetics_bases(), vec![celsius.to_si(wall(0))]);
}

#[test]
fn monitor_rate_of_change_and_exposure() {
    let mut r = rule(Test::Above(0.5));
    r.quantity = Quantity::DecadesPerMinute;
    let mut m = Monitor::new(setup(vec![r], vec![]));
    // One decade per 10 s = 6 decades/min.
    let mut last = Vec::new();
    for i in 0..=10 {
        last = m.push(&[Sample::ok(
            t(i as f64),
            "g",
            1e-6 * 10f64.powf(i as f64 / 10.0),
            MBAR,
        )]);
        if !last.is_empty() {
            break;
        }
    }
    assert_eq!(last[0].to_text(), "unacknowledged");
    let rate = m.track("g").and_then(|g| g.decades_per_min).expect("rate");
    assert!((rate - 6.0).abs() < 1e-6, "{rate}");
    let mut m = Monitor::new(setup(vec![], vec![]));
    for i in 0..=100 {
        m.push(&[Sample::ok(t(i as f64), "g", 1e-6, MBAR)]);
    }
    let e = m.track("g").expect("g").exposure.pa_s();
    assert!((e - 1e-4 * 100.0).abs() < 1e-15, "{e}");
}

#[test]
fn monitor_operations_name_unknown_alarms() {
    let mut m = Monitor::new(setup(vec![rule(Test::Above(1.0))], vec![]));
    let e = m
        .acknowledge("q", &Actor::named("x"), t(0.0))
        .expect_err("unknown");
    assert!(e.contains("no alarm `q`"), "{e}");
    m.push(&[Sample::ok(t(0.0), "g", 100.0, MBAR)]);
    let ev = m.acknowledge_all(&Actor::named("dee"), t(1.0));
    assert_eq!(ev[0].to_text(), "acknowledged");
    assert_eq!(ev[0].user.as_deref(), Some("dee"));
}

/// Pump-down and vent of the simulated chamber: the regime and range
/// crossings the monitor reports are exactly where the engine, fed the same
/// samples independently, changes class — both ways.
#[test]
fn crossings_on_a_simulated_pumpdown_and_vent_match_the_engine() {
    use crate::sim::{Scenario, SimOptions, Simulator};
    let mut sim = Simulator::new(SimOptions {
        scenario: Scenario::Demo,
        interval_s: 2.0,
        ..SimOptions::default()
    });
    let cross = |id: &str, q: Quantity, a: Class, b: Class| Rule {
        id: id.into(),
        gauge: "cdg".into(),
        quantity: q,
        ..rule(Test::Crosses(a, b))
    };
    let rules = vec![
        cross(
            "regime",
            Quantity::Regime("bore".into()),
            Class::Regime(FlowRegime::Viscous),
            Class::Regime(FlowRegime::Transitional),
        ),
        cross(
            "range",
            Quantity::VacuumRange,
            Class::Range(VacuumRange::Low),
            Class::Range(VacuumRange::Medium),
        ),
    ];
    let mut m = Monitor::new(setup(rules, vec![]));
    let lengths = [NamedLength::new("bore", 0.3)];
    let mut expected: Vec<(String, DateTime<Utc>)> = Vec::new();
    let mut got: Vec<(String, DateTime<Utc>)> = Vec::new();
    let (mut last_regime, mut last_range) = (None, None);
    while !sim.is_finished() {
        let samples = sim.next_samples();
        for e in m.push(&samples) {
            if e.to_text() == "unacknowledged" {
                got.push((e.id.clone(), e.time));
            }
        }
        let cdg = samples.iter().find(|s| s.channel == "cdg").expect("cdg");
        if let Some(p) = cdg.si() {
            let d = derive(
                &Conditions::new(p, 295.15),
                &n2(),
                &lengths,
                &Physics::default(),
            );
            let regime = d.lengths[0].regime == FlowRegime::Viscous;
            let range = d.vacuum_range == VacuumRange::Low;
            if last_regime.is_some_and(|r| r != regime) {
                expected.push(("regime".into(), cdg.time));
            }
            if last_range.is_some_and(|r| r != range) {
                expected.push(("range".into(), cdg.time));
            }
            last_regime = Some(regime);
            last_range = Some(range);
        }
        // Acknowledge so every crossing is a fresh alarm.
        let now = cdg.time;
        m.acknowledge_all(&Actor::named("test"), now);
    }
    got.sort();
    expected.sort();
    assert!(
        expected.len() >= 4,
        "pump-down and vent cross both boundaries: {expected:?}"
    );
    assert_eq!(got, expected);
}

// --- Data time: deadlines, silence, links and the audit trail ---

fn delayed_setup() -> MonitorSetup {
    // Thresholds are SI: 1e-1 Pa = 1e-3 mbar, 1e-4 Pa = 1e-6 mbar.
    let mut on = rule(Test::Above(1e-1));
    on.id = "high".into();
    on.on_delay_s = 5.0;
    on.off_delay_s = 7.5;
    let mut latch = rule(Test::Below(1e-4));
    latch.id = "low".into();
    latch.latching = true;
    latch.on_delay_s = 0.25;
    let gate = Gate {
        id: "ready".into(),
        label: "Ready".into(),
        conditions: vec![
            syntax::condition("g pressure below 1e-4 mbar", &|_| None).expect("valid"),
        ],
        hold_s: 8.0,
    };
    setup(vec![on, latch], vec![gate])
}

/// Events with what identifies them: id, new state, data time.
fn keys(ev: &[crate::alarm::Event]) -> Vec<(String, String, DateTime<Utc>)> {
    ev.iter()
        .map(|e| (e.id.clone(), e.to_text().to_string(), e.time))
        .collect()
}

#[test]
fn a_delay_runs_out_at_its_own_time_not_at_the_next_row() {
    let mut m = Monitor::new(delayed_setup());
    m.push(&[Sample::ok(t(0.0), "g", 1e-5, MBAR)]);
    m.push(&[Sample::ok(t(1.0), "g", 1e-2, MBAR)]);
    // The next row comes 8 s later; the 5 s on-delay ran out at 6 s.
    let ev = m.push(&[Sample::ok(t(9.0), "g", 1e-2, MBAR)]);
    let high: Vec<_> = ev.iter().filter(|e| e.id == "high").collect();
    assert_eq!(high.len(), 1, "{ev:?}");
    assert_eq!(high[0].time, t(6.0));
    assert_eq!(
        m.next_deadline(),
        Some(t(19.001)),
        "stale 10 s after the last row"
    );
}

#[test]
fn events_do_not_depend_on_how_often_time_is_advanced() {
    // Rows with gaps longer than stale_after, a dropout, crossings shorter
    // than the on-delay and returns inside the off-delay.
    let rows: Vec<(f64, Option<f64>)> = vec![
        (0.0, Some(1e-5)),
        (1.0, Some(2e-3)),
        (3.0, Some(2e-3)),
        (4.0, Some(1e-5)),
        (5.0, Some(2e-3)),
        (8.0, Some(2e-3)),
        (12.0, Some(1e-5)),
        (30.0, Some(1e-5)),
        (31.0, None),
        (33.0, Some(5e-7)),
        (33.2, Some(1e-5)),
        (33.4, Some(5e-7)),
        (34.0, Some(5e-7)),
        (60.0, Some(1e-5)),
        (75.5, Some(1e-5)),
    ];
    let sample = |(s, v): (f64, Option<f64>)| match v {
        Some(v) => Sample::ok(t(s), "g", v, MBAR),
        None => Sample::bad(t(s), "g", MBAR, Fault::SensorError),
    };
    let run = |ticks: &dyn Fn(f64, f64) -> Vec<f64>| {
        let mut m = Monitor::new(delayed_setup());
        let mut out = Vec::new();
        let mut prev = None;
        for &row in &rows {
            if let Some(p) = prev {
                for x in ticks(p, row.0) {
                    out.extend(m.tick(t(x)));
                }
            }
            out.extend(m.push(&[sample(row)]));
            prev = Some(row.0);
        }
        keys(&out)
    };
    let rows_only = run(&|_, _| Vec::new());
    let every_100ms = run(&|a, b| {
        let n = ((b - a) * 10.0) as usize;
        (1..n).map(|i| a + i as f64 * 0.1).collect()
    });
    let odd = run(&|a, b| vec![a, a + (b - a) * 0.37, a + (b - a) * 0.999, b]);
    assert_eq!(rows_only, every_100ms);
    assert_eq!(rows_only, odd);
    // The run has every kind of deadline in it.
    let ids: Vec<&str> = rows_only.iter().map(|k| k.0.as_str()).collect();
    for id in ["high", "low", "g.input", "ready"] {
        assert!(ids.contains(&id), "{id} missing from {rows_only:?}");
    }
}

#[test]
fn a_configured_gauge_that_never_sends_goes_stale() {
    let mut s = setup(vec![], vec![]);
    s.gauges = vec![GaugeSetup {
        id: "quiet".into(),
        model: GaugeModel::new(GaugeKind::Capacitance, &n2(), &GaugeOverrides::default())
            .expect("model"),
        mixture: n2(),
        settings: None,
    }];
    let mut m = Monitor::new(s);
    assert!(
        m.push(&[Sample::ok(t(0.0), "other", 1e-5, MBAR)])
            .is_empty()
    );
    assert!(
        m.push(&[Sample::ok(t(10.0), "other", 1e-5, MBAR)])
            .is_empty()
    );
    let ev = m.push(&[Sample::ok(t(11.0), "other", 1e-5, MBAR)]);
    assert_eq!(ev.len(), 1, "{ev:?}");
    assert_eq!(
        (ev[0].id.as_str(), ev[0].to_text(), ev[0].time),
        ("quiet.input", "unacknowledged", t(10.001))
    );
    assert_eq!(ev[0].value_text.as_deref(), Some("no data"));
    // A channel a source announced is watched the same way.
    let mut m = Monitor::new(setup(vec![], vec![]));
    m.expect_channel("pirani");
    assert!(m.start(t(0.0)).is_empty());
    let ev = m.tick(t(60.0));
    assert_eq!(
        keys(&ev),
        vec![("pirani.input".into(), "unacknowledged".into(), t(10.001))]
    );
}

#[test]
fn a_source_that_never_connects_raises_its_link_alarm() {
    let mut m = Monitor::new(setup(vec![], vec![]));
    m.add_link("source-1", "tcp://127.0.0.1:9");
    m.start(t(0.0));
    assert!(m.tick(t(9.9)).is_empty());
    let ev = m.tick(t(10.2));
    assert_eq!(
        keys(&ev),
        vec![("source-1.link".into(), "unacknowledged".into(), t(10.0))]
    );
    assert!(ev[0].text.contains("not connected"), "{}", ev[0].text);
    let view = m.alarms();
    let link = view
        .iter()
        .find(|a| a.rule.id == "source-1.link")
        .expect("shown");
    assert_eq!(link.value_text.as_deref(), Some("not connected"));
    let ev = m.set_link("source-1", true, t(12.0));
    assert_eq!(
        keys(&ev),
        vec![(
            "source-1.link".into(),
            "returned-unacknowledged".into(),
            t(12.0)
        )]
    );
}

#[test]
fn operator_actions_are_events_with_who_and_when() {
    let wall = Utc.timestamp_opt(1_900_000_000, 0).single().expect("time");
    let ana = Actor {
        user: "ana".into(),
        wall_time: Some(wall),
    };
    let mut m = Monitor::new(setup(vec![rule(Test::Above(1e-3))], vec![]));
    // Below the default exposure start (0.1 Pa), so there is dose to reset.
    m.push(&[Sample::ok(t(0.0), "g", 1e-4, MBAR)]);
    m.push(&[Sample::ok(t(0.5), "g", 1e-4, MBAR)]);
    let ev = m.acknowledge("r", &ana, t(1.0)).expect("ack");
    assert_eq!(ev.len(), 1);
    assert_eq!(ev[0].operation, Some(crate::alarm::Operation::Acknowledge));
    assert_eq!(ev[0].user.as_deref(), Some("ana"));
    assert_eq!(ev[0].wall_time, Some(wall));
    assert_eq!(
        (ev[0].from_text(), ev[0].to_text()),
        ("unacknowledged", "acknowledged")
    );
    let e = m.set_threshold("r", 2e-1, &ana, t(2.0)).expect("edit");
    assert_eq!(e.kind(), crate::alarm::EventKind::Setting);
    assert_eq!(
        (e.from_text(), e.to_text()),
        ("1.00e-5 mbar", "2.00e-3 mbar")
    );
    let back = crate::alarm::Event::from_json(&e.to_json()).expect("reads back");
    assert_eq!(back, e);
    assert_eq!(back.v, crate::alarm::EVENT_VERSION);
    assert!(back.is_operator_action());
    // An event log with a blank line and a line that is not an event.
    let log = format!(
        "{}\n\n{{\"v\":1,\"time\":\"soon\"}}\n{}\n",
        e.to_json(),
        e.to_json()
    );
    let read: Vec<_> = crate::alarm::event::read_event_log(log.as_bytes()).collect();
    assert_eq!(read.len(), 3);
    assert_eq!(read[0].as_ref().ok(), Some(&e));
    let (line, msg) = read[1].clone().expect_err("not an event");
    assert_eq!(line, 3);
    assert!(msg.starts_with("expected an event"), "{msg}");
    assert_eq!(read[2].as_ref().ok(), Some(&e));
    let ev = m.reset_exposure(&ana, t(3.0));
    assert_eq!(ev.len(), 1);
    assert_eq!(ev[0].id, "g.exposure");
    assert_eq!(ev[0].to_text(), "0 L");
    // Shelving expires on data time, at its own deadline.
    let ev = m.shelve("r", 30.0, &ana, t(3.0)).expect("shelve");
    assert_eq!(ev[0].operation, Some(crate::alarm::Operation::Shelve));
    assert_eq!(m.next_deadline(), Some(t(10.501)), "stale first");
    let ev = m.push(&[Sample::ok(t(40.0), "g", 1e-2, MBAR)]);
    let shelf: Vec<_> = ev.iter().filter(|e| e.id == "r").collect();
    assert_eq!(shelf[0].time, t(33.0), "{ev:?}");
}

#[test]
fn a_data_clock_behind_the_start_time_takes_over() {
    // Live: started at wall time 1000 s; the device's clock says 0 s.
    let mut r = rule(Test::Above(1e-1));
    r.on_delay_s = 5.0;
    let mut m = Monitor::new(setup(vec![r], vec![]));
    m.add_link("source-1", "serial:///dev/ttyS9");
    m.start(t(1000.0));
    m.set_link("source-1", true, t(1000.5));
    m.push(&[Sample::ok(t(0.0), "g", 1e-2, MBAR)]);
    assert_eq!(m.now(), Some(t(0.0)), "the data's clock took over");
    // The on-delay runs on the data's clock.
    let ev = m.push(&[Sample::ok(t(6.0), "g", 1e-2, MBAR)]);
    assert_eq!(
        keys(&ev),
        vec![("r".into(), "unacknowledged".into(), t(5.0))]
    );
    // A clock ahead of the start time simply moves on.
    let mut m = Monitor::new(setup(vec![], vec![]));
    m.start(t(0.0));
    m.push(&[Sample::ok(t(50.0), "g", 1e-5, MBAR)]);
    assert_eq!(m.now(), Some(t(50.0)));
}

#[test]
fn exposure_counts_from_below_the_threshold_and_says_since_when() {
    // Default start: 0.1 Pa. An hour at atmosphere adds nothing.
    let mut m = Monitor::new(setup(vec![], vec![]));
    for i in 0..60 {
        m.push(&[Sample::ok(t(f64::from(i)), "g", 1000.0, MBAR)]);
    }
    let track = |m: &Monitor| {
        m.tracks()
            .find(|(id, _)| *id == "g")
            .map(|(_, t)| t.clone())
    };
    let g = track(&m).expect("g");
    assert_eq!((g.exposure.pa_s(), g.exposure_since()), (0.0, None));
    // 1e-4 mbar = 1e-2 Pa from t = 60 s: 10 s of it is 0.1 Pa·s.
    for i in 60..=70 {
        m.push(&[Sample::ok(t(f64::from(i)), "g", 1e-4, MBAR)]);
    }
    let g = track(&m).expect("g");
    assert_eq!(g.exposure_since(), Some(t(60.0)));
    assert!(
        (g.exposure.pa_s() - 0.1).abs() < 1e-12,
        "{}",
        g.exposure.pa_s()
    );
    // A reset counts from its own data time.
    let ana = Actor {
        user: "ana".into(),
        wall_time: None,
    };
    m.reset_exposure(&ana, t(70.0));
    m.push(&[Sample::ok(t(75.0), "g", 1e-4, MBAR)]);
    let g = track(&m).expect("g");
    assert_eq!(g.exposure_since(), Some(t(70.0)));
    assert!((g.exposure.pa_s() - 0.05).abs() < 1e-12);
}

#[test]
fn a_gate_condition_with_a_deadband_keeps_holding_inside_it() {
    let gate = |text: &str| Gate {
        id: "ready".into(),
        label: "Ready".into(),
        conditions: vec![syntax::condition(text, &|_| None).expect("valid")],
        hold_s: 3.0,
    };
    let run = |text: &str| {
        let mut m = Monitor::new(setup(vec![], vec![gate(text)]));
        // Below 5e-6 mbar, then a wobble to 5.5e-6 (inside 0.1 decade:
        // 6.3e-6), then out by more than the deadband.
        let mut states = Vec::new();
        for (s, p) in [
            (0.0, 4e-6),
            (1.0, 5.5e-6),
            (2.0, 4.5e-6),
            (3.0, 6e-6),
            (4.0, 6.0e-6),
        ] {
            m.push(&[Sample::ok(t(s), "g", p, MBAR)]);
            states.push(m.gates()[0].state());
        }
        m.push(&[Sample::ok(t(5.0), "g", 6.5e-6, MBAR)]);
        states.push(m.gates()[0].state());
        states
    };
    use GateState::{NotReady as N, Ready as R};
    assert_eq!(
        run("g pressure below 5e-6 mbar deadband 0.1 decade"),
        [N, N, N, R, R, N],
        "held through the wobble, ready at 3 s, broken past 6.3e-6"
    );
    assert_eq!(
        run("g pressure below 5e-6 mbar"),
        [N, N, N, N, N, N],
        "without a deadband the wobble restarts the hold"
    );
}

mod shortcut {
    //! [`RuleMachine::update`] takes a shortcut for a value that changes
    //! nothing; any sequence of inputs and operator actions must give the
    //! same transitions and states as the update in full.
    use super::*;
    use proptest::prelude::*;

    #[derive(Debug, Clone)]
    enum Step {
        Feed(Input),
        Acknowledge,
        Shelve(u8),
    }

    fn input() -> impl Strategy<Value = Input> {
        let regime = prop::sample::select(vec![
            FlowRegime::Viscous,
            FlowRegime::Transitional,
            FlowRegime::Molecular,
        ]);
        prop_oneof![
            8 => (0.0f64..3.0).prop_map(Input::Value),
            4 => regime.prop_map(|r| Input::Class(Class::Regime(r))),
            1 => Just(Input::OverRange),
            1 => Just(Input::UnderRange),
            1 => Just(Input::Unusable),
            1 => Just(Input::Disabled),
        ]
    }

    /// A threshold on a value, or a test of the regime.
    fn test() -> impl Strategy<Value = Test> {
        let (v, t, m) = (
            Class::Regime(FlowRegime::Viscous),
            Class::Regime(FlowRegime::Transitional),
            Class::Regime(FlowRegime::Molecular),
        );
        prop::sample::select(vec![
            Test::Above(1.5),
            Test::Below(1.5),
            Test::Enters(t),
            Test::Leaves(m),
            Test::Crosses(v, t),
        ])
    }

    fn step() -> impl Strategy<Value = Step> {
        prop_oneof![
            12 => input().prop_map(Step::Feed),
            1 => Just(Step::Acknowledge),
            1 => (1u8..6).prop_map(Step::Shelve),
        ]
    }

    proptest! {
        #[test]
        fn same_as_the_update_in_full(
            test in test(),
            deadband in prop_oneof![Just(Deadband::None), (0.0f64..0.5).prop_map(Deadband::Fraction)],
            on_delay in prop_oneof![Just(0.0), 0.0f64..3.0],
            off_delay in prop_oneof![Just(0.0), 0.0f64..3.0],
            latching in any::<bool>(),
            steps in prop::collection::vec((step(), 0u16..2500), 1..80),
        ) {
            let mut r = rule(test);
            r.deadband = deadband;
            r.on_delay_s = on_delay;
            r.off_delay_s = off_delay;
            r.latching = latching;
            let mut fast = RuleMachine::new(r.clone());
            let mut full = RuleMachine::new(r);
            let mut ms = 0i64;
            for (step, dt) in steps {
                ms += i64::from(dt);
                let now = t(0.0) + Duration::milliseconds(ms);
                let (a, b) = match step {
                    Step::Feed(i) => (fast.update(now, i), full.update_in_full(now, i)),
                    Step::Acknowledge => (
                        fast.acknowledge(now, "op").unwrap_or_default(),
                        full.acknowledge(now, "op").unwrap_or_default(),
                    ),
                    Step::Shelve(s) => {
                        let until = now + Duration::seconds(i64::from(s));
                        (
                            fast.shelve(now, until, "op").unwrap_or_default(),
                            full.shelve(now, until, "op").unwrap_or_default(),
                        )
                    }
                };
                prop_assert_eq!(a, b);
                prop_assert_eq!(format!("{fast:?}"), format!("{full:?}"));
                prop_assert_eq!(fast.deadline(), full.deadline());
            }
        }
    }
}

#[test]
fn a_packed_monitor_unpacks_to_the_same_and_goes_on_the_same() {
    // Two pressure gauges and a thermocouple, the windows full and
    // sliding; packed and unpacked, the copy must equal the original and
    // give the same events, rates and kinetics on the readings after.
    let wall = ChannelUnit::Temperature(TemperatureUnit::C);
    // A rule on the rate: the windows are kept.
    let mut rate = rule(Test::Above(3.0));
    rate.quantity = Quantity::DecadesPerMinute;
    let mut m = Monitor::new(setup(
        vec![rule(Test::Below(5e-3)), rule(Test::Above(2e-2)), rate],
        vec![],
    ));
    let reading = |i: usize| {
        let s = i as f64 * 0.1;
        vec![
            Sample::ok(t(s), "g", 1e-2 * (-s / 40.0).exp(), MBAR),
            Sample::ok(t(s), "h", 2e-2 * (-s / 30.0).exp(), MBAR),
            Sample::ok(t(s), "w", 22.0 + (i % 7) as f64 / 16.0, wall),
        ]
    };
    for i in 0..400 {
        m.push(&reading(i));
    }
    let mut points = Vec::new();
    let packed = m.pack(&mut points);
    // Both windows (10 s at 10 Hz) went to the bytes.
    assert!(points.len() >= 2 * 100 * 24, "{} bytes", points.len());
    let mut copy = packed.unpack(&points).expect("unpacks");
    assert_eq!(format!("{copy:?}"), format!("{m:?}"));
    for i in 400..700 {
        let (a, b) = (m.push(&reading(i)), copy.push(&reading(i)));
        assert_eq!(a, b, "events at reading {i}");
    }
    assert_eq!(format!("{copy:?}"), format!("{m:?}"));
    // Bytes cut short or too long are an error, not a wrong window.
    assert!(packed.unpack(&points[..points.len() - 8]).is_err());
    let mut longer = points.clone();
    longer.extend_from_slice(&[0; 8]);
    assert!(packed.unpack(&longer).is_err());
    assert!(packed.unpack(&[]).is_err());
}

#[test]
fn a_trip_is_seen_only_of_a_trip_alarm() {
    // Above 0.1 Pa; readings in mbar (1e-4 mbar is 0.01 Pa).
    let mut trip = rule(Test::Above(1e-1));
    trip.severity = Severity::Trip;
    let warn = rule(Test::Above(1e-1));
    for (rules, input, high, seen) in [
        (vec![trip.clone()], Severity::Warning, 1.0, true),
        (vec![trip], Severity::Warning, 1e-4, false),
        (vec![warn.clone()], Severity::Warning, 1.0, false),
        // The automatic bad-input alarm, with the trip severity.
        (vec![warn], Severity::Trip, f64::NAN, true),
    ] {
        let mut s = setup(rules, vec![]);
        s.input_severity = input;
        let mut m = Monitor::new(s);
        m.push(&[Sample::ok(t(0.0), "g", 1e-4, MBAR)]);
        assert!(
            !m.trip_seen(),
            "{input:?} {high} at the start: {:?}",
            m.alarms()
                .iter()
                .map(|a| (a.rule.id.clone(), a.state))
                .collect::<Vec<_>>()
        );
        if high.is_nan() {
            m.push(&[Sample::bad(t(1.0), "g", MBAR, Fault::SensorError)]);
        } else {
            m.push(&[Sample::ok(t(1.0), "g", high, MBAR)]);
        }
        m.push(&[Sample::ok(t(2.0), "g", 1e-4, MBAR)]);
        assert_eq!(m.trip_seen(), seen, "{input:?} {high}");
    }
}

mod deadline_floor {
    //! [`Monitor::advance_to`] skips the deadline search while the time is
    //! before a floor it worked out; any sequence of rows (in order, late,
    //! repeated, with gaps, bad cells and new channels), ticks and operator
    //! actions must give the same events and deadlines as a monitor that
    //! searches at every reading.
    use super::*;
    use proptest::prelude::*;

    #[derive(Debug, Clone)]
    pub(super) enum Step {
        /// A row `dt` ms after the last (negative: time went back) on a
        /// channel (0: g, 1: h) with a value (None: a sensor error).
        Row(i64, u8, Option<f64>),
        Tick(i64),
        Acknowledge,
        Shelve(u8),
        Threshold(f64),
    }

    /// Rows with values from `value`, ticks and operator actions.
    pub(super) fn steps(
        value: impl Strategy<Value = Option<f64>> + Clone + 'static,
    ) -> impl Strategy<Value = Step> {
        let dt = prop_oneof![
            10 => 0i64..400,
            1 => 400i64..25_000,
            1 => -3_000i64..0,
        ];
        prop_oneof![
            20 => (dt, 0u8..2, value).prop_map(|(d, c, v)| Step::Row(d, c, v)),
            2 => (0i64..15_000).prop_map(Step::Tick),
            1 => Just(Step::Acknowledge),
            1 => (1u8..20).prop_map(Step::Shelve),
            1 => (-6.0f64..-1.0).prop_map(|e| Step::Threshold(10f64.powf(e))),
        ]
    }

    fn step() -> impl Strategy<Value = Step> {
        steps(prop_oneof![
            8 => (-7.0f64..0.0).prop_map(|e| Some(10f64.powf(e))),
            1 => Just(None),
        ])
    }

    fn no_gate_setup() -> MonitorSetup {
        let mut s = delayed_setup();
        s.gates.clear();
        let mut band = rule(Test::Below(1e-3));
        band.id = "band".into();
        band.deadband = Deadband::Fraction(0.2);
        s.rules.push(RuleSpec {
            rule: band,
            enable: None,
        });
        // A rule switched on and off by the other channel.
        let mut gated = rule(Test::Above(1e-2));
        gated.id = "gated".into();
        gated.on_delay_s = 0.5;
        s.rules.push(RuleSpec {
            rule: gated,
            enable: Some(
                syntax::condition("h pressure below 1e-3 mbar", &|_| None).expect("valid"),
            ),
        });
        s
    }

    proptest! {
        #[test]
        fn same_events_as_a_search_at_every_reading(
            gates in any::<bool>(),
            steps in prop::collection::vec(step(), 1..120),
        ) {
            let setup = if gates { delayed_setup() } else { no_gate_setup() };
            let mut fast = Monitor::new(setup.clone());
            let mut full = Monitor::new(setup).without_deadline_floor();
            let who = Actor { user: "op".into(), wall_time: None };
            let mut ms = 0i64;
            for step in steps {
                let (a, b) = match step {
                    Step::Row(dt, c, v) => {
                        ms += dt;
                        let now = t(0.0) + Duration::milliseconds(ms);
                        let id = if c == 0 { "g" } else { "h" };
                        let s = match v {
                            Some(v) => Sample::ok(now, id, v, MBAR),
                            None => Sample::bad(now, id, MBAR, Fault::SensorError),
                        };
                        let row = [s];
                        (fast.push(&row), full.push(&row))
                    }
                    Step::Tick(dt) => {
                        ms += dt;
                        let now = t(0.0) + Duration::milliseconds(ms);
                        (fast.tick(now), full.tick(now))
                    }
                    Step::Acknowledge => {
                        let now = t(0.0) + Duration::milliseconds(ms);
                        (fast.acknowledge_all(&who, now), full.acknowledge_all(&who, now))
                    }
                    Step::Shelve(s) => {
                        let now = t(0.0) + Duration::milliseconds(ms);
                        (
                            fast.shelve("high", f64::from(s), &who, now).unwrap_or_default(),
                            full.shelve("high", f64::from(s), &who, now).unwrap_or_default(),
                        )
                    }
                    Step::Threshold(v) => {
                        let now = t(0.0) + Duration::milliseconds(ms);
                        (
                            fast.set_threshold("low", v, &who, now).into_iter().collect(),
                            full.set_threshold("low", v, &who, now).into_iter().collect(),
                        )
                    }
                };
                prop_assert_eq!(a, b);
                prop_assert_eq!(fast.next_deadline(), full.next_deadline());
            }
        }
    }
}

mod bands {
    //! Rules on one input with no enable condition are passed over as a
    //! group while the value stays in the band in which every one of them is
    //! quiet ([`RuleMachine::quiet_values`]); any sequence of rows (values
    //! on and beside every threshold and clear level, bad cells, gaps, time
    //! going back), ticks and operator actions must leave the monitor as
    //! taking every rule at every evaluation does: the same events, and the
    //! same state down to each rule's last value.
    use super::deadline_floor::{Step, steps};
    use super::*;
    use proptest::prelude::*;

    const PA: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Pa);

    fn named(id: &str, gauge: &str, test: Test, deadband: Deadband) -> Rule {
        let mut r = rule(test);
        r.id = id.into();
        r.gauge = gauge.into();
        r.deadband = deadband;
        r
    }

    /// Rules on g's pressure (each deadband kind, a latching one, one with
    /// a delay), on its mean free path and on h's pressure; with `gated`, a
    /// rule switched on and off by h (then there are no groups: every rule
    /// is taken one by one).
    fn bands_setup(gated: bool) -> MonitorSetup {
        let mut low = named("low", "g", Test::Below(1e-4), Deadband::Decades(0.5));
        low.latching = true;
        let mut slow = named("slow", "g", Test::Above(1e-2), Deadband::None);
        slow.on_delay_s = 0.5;
        let mut mfp = named("mfp", "g", Test::Above(0.5), Deadband::Fraction(0.1));
        mfp.quantity = Quantity::MeanFreePath;
        let mut s = setup(
            vec![
                named("high", "g", Test::Above(1e-1), Deadband::Fraction(0.2)),
                low,
                mfp,
                named("h-high", "h", Test::Above(1e-3), Deadband::None),
                named("band", "g", Test::Below(1e-3), Deadband::Absolute(1e-4)),
                slow,
            ],
            vec![],
        );
        if gated {
            s.rules.push(RuleSpec {
                rule: named("gated", "g", Test::Above(1e-2), Deadband::None),
                enable: Some(
                    syntax::condition("h pressure below 1e-3 mbar", &|_| None).expect("valid"),
                ),
            });
        }
        s
    }

    /// The pressures where a rule of [`bands_setup`] turns (its thresholds
    /// and clear levels), Pa.
    fn edges() -> Vec<f64> {
        let mut v = vec![1e-1, 1e-4, 1e-2, 1e-3];
        v.push(Deadband::Fraction(0.2).clear_level(1e-1, true));
        v.push(Deadband::Decades(0.5).clear_level(1e-4, false));
        v.push(Deadband::Absolute(1e-4).clear_level(1e-3, false));
        v
    }

    /// Rows with pressures in Pa: anywhere over seven decades, on or one
    /// step beside a threshold or clear level, or a sensor error.
    fn step() -> impl Strategy<Value = Step> {
        let edge = (0..edges().len(), -1i64..=1).prop_map(|(i, ulps)| {
            let e = edges()[i];
            Some(f64::from_bits(e.to_bits().wrapping_add_signed(ulps)))
        });
        steps(prop_oneof![
            6 => (-6.0f64..1.0).prop_map(|e| Some(10f64.powf(e))),
            4 => edge,
            1 => Just(None),
        ])
    }

    proptest! {
        #[test]
        fn the_same_monitor_as_taking_every_rule(
            gated in any::<bool>(),
            steps in prop::collection::vec(step(), 1..150),
        ) {
            let mut fast = Monitor::new(bands_setup(gated));
            let mut full = Monitor::new(bands_setup(gated)).without_bands();
            let who = Actor { user: "op".into(), wall_time: None };
            let mut ms = 0i64;
            for step in steps {
                let now = |ms: i64| t(0.0) + Duration::milliseconds(ms);
                let (a, b) = match step {
                    Step::Row(dt, c, v) => {
                        ms += dt;
                        let id = if c == 0 { "g" } else { "h" };
                        let s = match v {
                            Some(v) => Sample::ok(now(ms), id, v, PA),
                            None => Sample::bad(now(ms), id, PA, Fault::SensorError),
                        };
                        let row = [s];
                        (fast.push(&row), full.push(&row))
                    }
                    Step::Tick(dt) => {
                        ms += dt;
                        (fast.tick(now(ms)), full.tick(now(ms)))
                    }
                    Step::Acknowledge => (
                        fast.acknowledge_all(&who, now(ms)),
                        full.acknowledge_all(&who, now(ms)),
                    ),
                    Step::Shelve(s) => (
                        fast.shelve("high", f64::from(s), &who, now(ms)).unwrap_or_default(),
                        full.shelve("high", f64::from(s), &who, now(ms)).unwrap_or_default(),
                    ),
                    Step::Threshold(v) => (
                        fast.set_threshold("band", v, &who, now(ms)).into_iter().collect(),
                        full.set_threshold("band", v, &who, now(ms)).into_iter().collect(),
                    ),
                };
                prop_assert_eq!(a, b);
                prop_assert_eq!(format!("{fast:?}"), format!("{full:?}"));
            }
        }

        /// A value in a rule's quiet band is one [`RuleMachine::quiet`]
        /// takes, whatever the state the values before left it in.
        #[test]
        fn a_value_in_the_band_is_quiet(
            above in any::<bool>(),
            latching in any::<bool>(),
            delay in prop_oneof![Just(0.0), 0.1f64..2.0],
            deadband in prop_oneof![
                Just(Deadband::None),
                (0.0f64..0.9).prop_map(Deadband::Fraction),
                (0.0f64..1e-2).prop_map(Deadband::Absolute),
                (0.0f64..2.0).prop_map(Deadband::Decades),
            ],
            values in prop::collection::vec(
                prop_oneof![(-6.0f64..1.0).prop_map(|e| 10f64.powf(e)), Just(1e-3)],
                1..40,
            ),
            probe in prop_oneof![(-6.0f64..1.0).prop_map(|e| 10f64.powf(e)), Just(1e-3)],
        ) {
            let test = if above { Test::Above(1e-3) } else { Test::Below(1e-3) };
            let mut r = named("r", "g", test, deadband);
            r.latching = latching;
            r.on_delay_s = delay;
            let mut m = RuleMachine::new(r);
            for (i, v) in values.iter().enumerate() {
                m.update(t(i as f64 * 0.25), Input::Value(*v));
                if let Some(band) = m.quiet_values() {
                    // The band's edges and the probe.
                    for v in [probe, *v] {
                        if band.contains(v) {
                            let mut copy = m.clone();
                            prop_assert!(copy.quiet(Input::Value(v)), "{band:?} {v}");
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn bands_join_as_numbers() {
        let a = Band::new((0.0, true), (1.0, true));
        let b = Band::new((-0.0, false), (1.0, false));
        let both = a.and(b);
        assert!(!both.contains(0.0) && !both.contains(-0.0) && !both.contains(1.0));
        assert!(both.contains(0.5));
        assert_eq!(a.and(b), b.and(a));
        assert!(!Band::new((f64::NAN, true), (1.0, true)).is_number());
        assert!(!Band::ALL.contains(f64::NAN));
    }
}

#[test]
fn a_second_channel_that_stops_goes_stale_on_ticks_alone() {
    // Both channels watched; g stops at 0 s, h at 5 s. With nothing but
    // ticks after, each goes stale at its own time (the earliest reading's
    // deadline, once evaluated, must not hide the next channel's).
    let mut on_h = rule(Test::Above(1.0));
    on_h.id = "h-high".into();
    on_h.gauge = "h".into();
    let mut m = Monitor::new(setup(vec![rule(Test::Above(1.0)), on_h], vec![]));
    m.push(&[
        Sample::ok(t(0.0), "g", 1e-4, MBAR),
        Sample::ok(t(0.0), "h", 1e-4, MBAR),
    ]);
    for s in 1..=5 {
        m.push(&[Sample::ok(t(f64::from(s)), "h", 1e-4, MBAR)]);
    }
    let mut events = Vec::new();
    for s in 6..=30 {
        events.extend(m.tick(t(f64::from(s))));
    }
    let stale: Vec<(String, DateTime<Utc>)> = events
        .iter()
        .filter(|e| e.value_text.as_deref() == Some("stale"))
        .map(|e| (e.id.clone(), e.time))
        .collect();
    assert_eq!(
        stale,
        [
            ("g.input".to_string(), t(10.001)),
            ("h.input".to_string(), t(15.001))
        ]
    );
}

#[test]
fn rates_are_fitted_only_when_something_reads_them() {
    let falling = |m: &mut Monitor| {
        for i in 0..=50 {
            let s = f64::from(i) * 0.5;
            m.push(&[Sample::ok(t(s), "g", 1e-3 * (-s / 10.0).exp(), MBAR)]);
        }
        let g = m.track("g").expect("g");
        (g.dpdt, g.decades_per_min)
    };
    // Nothing reads a rate: none is fitted.
    let mut m = Monitor::new(setup(vec![rule(Test::Below(1e-1))], vec![]));
    assert_eq!(falling(&mut m), (None, None));
    let mut points = Vec::new();
    m.pack(&mut points);
    assert_eq!(points, 0u64.to_le_bytes(), "an empty window");
    // A rule, an enable condition or a gate condition on a rate: fitted.
    // ln p falls by 1/10 a second: 6/ln 10 decades a minute.
    let want = -6.0 / std::f64::consts::LN_10;
    let mut on_rate = rule(Test::Below(-10.0));
    on_rate.quantity = Quantity::DecadesPerMinute;
    let mut enabled = setup(vec![rule(Test::Below(1e-1))], vec![]);
    enabled.rules[0].enable =
        Some(syntax::condition("g rate_of_change below 0 mbar/s", &|_| None).expect("valid"));
    let gate = Gate {
        id: "falling".into(),
        label: "Falling".into(),
        conditions: vec![
            syntax::condition("g rate_of_change below 0 mbar/s", &|_| None).expect("valid"),
        ],
        hold_s: 1.0,
    };
    for s in [
        setup(vec![on_rate], vec![]),
        enabled,
        setup(vec![], vec![gate]),
    ] {
        let mut m = Monitor::new(s);
        let (dpdt, decades) = falling(&mut m);
        assert!(dpdt.is_some_and(|d| d < 0.0), "{dpdt:?}");
        let d = decades.expect("decades per minute");
        assert!((d - want).abs() < 0.05 * want.abs(), "{d} vs {want}");
    }
}

/// A track's kinetics are worked out when asked, from the kinetics in
/// force at its last valid pressure: through bad readings, a new
/// temperature and an operator's change of gas they must equal the
/// engine's own derivation for that pressure, gas and temperature (the
/// engine's results are the reference here; its numbers are checked
/// against outside sources in the engine's tests).
#[test]
fn kinetics_asked_for_are_those_of_the_last_valid_pressure() {
    let table = GasTable::builtin();
    let ar = Mixture::pure(table.get("Ar").expect("Ar").clone());
    let s = setup(vec![], vec![]);
    let (lengths, physics) = (s.lengths.clone(), s.physics);
    let mut m = Monitor::new(s);
    let celsius = ChannelUnit::Temperature(TemperatureUnit::C);
    let want = |mix: &Mixture, t_k: f64, p: f64| {
        crate::engine::Precomputed::new(t_k, mix, &lengths, &physics).derive(p)
    };
    let check = |m: &Monitor, want: Option<crate::engine::Derived>| {
        let track = m.track("g").expect("track");
        let got = track.derived();
        assert_eq!(got, want);
        // `kinetics` and `pressure_pa` come and go together.
        assert_eq!(track.kinetics().is_some(), track.pressure_pa.is_some());
        if let (Some((k, p)), Some(w)) = (track.kinetics(), want.as_ref()) {
            assert_eq!(k.vacuum_range(p), w.vacuum_range);
            assert_eq!(
                k.mean_free_path_m(p).to_bits(),
                w.mean_free_path_m.to_bits()
            );
            assert_eq!(
                k.length(p, "bore").map(|(kn, r)| (kn.to_bits(), r)),
                Some((w.lengths[0].knudsen.to_bits(), w.lengths[0].regime))
            );
            assert_eq!(k.length(p, "no such length"), None);
            let mut lengths = Vec::new();
            k.lengths_into(p, &mut lengths);
            assert_eq!(lengths, w.lengths);
        }
    };
    m.push(&[Sample::ok(t(0.0), "g", 1e-3, MBAR)]);
    let cold = want(&n2(), 295.15, MBAR.to_si(1e-3));
    check(&m, Some(cold.clone()));
    // A bad reading keeps the last valid pressure and its kinetics.
    m.push(&[Sample::bad(t(1.0), "g", MBAR, Fault::SensorError)]);
    check(&m, Some(cold.clone()));
    // A new temperature applies from the next pressure on.
    m.push(&[Sample::ok(t(2.0), "wall", 80.0, celsius)]);
    check(&m, Some(cold));
    m.push(&[Sample::ok(t(3.0), "g", 2e-6, MBAR)]);
    let (hot, p) = (celsius.to_si(80.0), MBAR.to_si(2e-6));
    check(&m, Some(want(&n2(), hot, p)));
    // The operator's gas: the latest reading is corrected again at once.
    m.set_gas(
        super::gas_step::GasChoice::Fixed(ar.clone()),
        &Actor::named("op"),
        t(4.0),
    );
    check(&m, Some(want(&ar, hot, p)));
    // A temperature channel has none.
    let wall = m.track("wall").expect("wall");
    assert_eq!((wall.derived(), wall.kinetics().is_none()), (None, true));
}
