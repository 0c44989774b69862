//! Physics and gauge tests of the simulated chamber.

use super::gauges::{self, Exposure, Gauges};
use super::*;
use crate::engine::mixture::Mixture;
use crate::gas::GasTable;
use crate::sample::Status;

/// One row per step: the truth and the samples at that data time.
type Run = Vec<(Truth, Vec<Sample>)>;

fn sim(scenario: Scenario, interval_s: f64, seed: u64) -> Simulator {
    Simulator::new(SimOptions {
        scenario,
        interval_s,
        seed,
        ..SimOptions::default()
    })
}

fn run_for(scenario: Scenario, interval_s: f64, seed: u64, seconds: f64) -> Run {
    let mut s = sim(scenario, interval_s, seed);
    let n = (seconds / interval_s).round() as usize;
    (0..n)
        .map(|_| {
            let samples = s.next_samples();
            (s.truth(), samples)
        })
        .collect()
}

fn run(scenario: Scenario, interval_s: f64) -> Run {
    let d = sim(scenario, interval_s, 1).natural_duration_s();
    run_for(scenario, interval_s, 1, d)
}

fn window(rows: &Run, from: f64, to: f64) -> Vec<&Truth> {
    rows.iter()
        .map(|(t, _)| t)
        .filter(|t| t.elapsed_s >= from && t.elapsed_s <= to)
        .collect()
}

/// Least-squares line y = a + b x: (a, b, R²).
fn line_fit(xs: &[f64], ys: &[f64]) -> (f64, f64, f64) {
    let n = xs.len() as f64;
    let mx = xs.iter().sum::<f64>() / n;
    let my = ys.iter().sum::<f64>() / n;
    let sxy: f64 = xs.iter().zip(ys).map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = xs.iter().map(|x| (x - mx).powi(2)).sum();
    let syy: f64 = ys.iter().map(|y| (y - my).powi(2)).sum();
    let b = sxy / sxx;
    let a = my - b * mx;
    (a, b, sxy * sxy / (sxx * syy))
}

fn sample<'a>(samples: &'a [Sample], channel: &str) -> &'a Sample {
    samples
        .iter()
        .find(|s| s.channel == channel)
        .expect("every channel is sampled")
}

#[test]
fn same_seed_same_samples_other_seed_other_noise() {
    let a = run_for(Scenario::Demo, 5.0, 7, 1200.0);
    let b = run_for(Scenario::Demo, 5.0, 7, 1200.0);
    let c = run_for(Scenario::Demo, 5.0, 8, 1200.0);
    assert_eq!(a, b);
    // The physics does not depend on the seed, the noise does.
    assert!(a.iter().zip(&c).all(|(x, y)| x.0 == y.0));
    let differing = a.iter().zip(&c).filter(|(x, y)| x.1 != y.1).count();
    assert!(differing > a.len() * 9 / 10, "{differing} of {}", a.len());
}

#[test]
fn samples_carry_the_data_clock_and_every_channel() {
    let mut s = sim(Scenario::Pumpdown, 2.5, 1);
    let channels = s.channels();
    assert_eq!(
        channels.iter().map(|c| c.id.as_str()).collect::<Vec<_>>(),
        ["cdg", "chamber", "ion", "wall"]
    );
    let start = SimOptions::default().start;
    for k in 1..=4 {
        let samples = s.next_samples();
        assert_eq!(samples.len(), channels.len());
        let expected = start + TimeDelta::milliseconds(2500 * k);
        for (smp, ch) in samples.iter().zip(&channels) {
            assert_eq!(smp.time, expected);
            assert_eq!(smp.channel, ch.id);
            assert_eq!(smp.unit, ch.unit);
        }
    }
    assert!((s.elapsed_s() - 10.0).abs() < 1e-9);
}

#[test]
fn roughing_follows_the_pump_time_constant() {
    let rows = run_for(Scenario::Pumpdown, 1.0, 1, 120.0);
    let pts: Vec<&Truth> = rows
        .iter()
        .map(|(t, _)| t)
        .filter(|t| t.total_pa < 5e4 && t.total_pa > 1e3)
        .collect();
    assert!(pts.len() > 20);
    assert!(pts.iter().all(|t| t.phase == "roughing"));
    let xs: Vec<f64> = pts.iter().map(|t| t.elapsed_s).collect();
    let ys: Vec<f64> = pts.iter().map(|t| t.total_pa.ln()).collect();
    let (_, slope, r2) = line_fit(&xs, &ys);
    let tau = -1.0 / slope;
    let plant = model::Plant::standard();
    let expected = plant.volume_m3 / plant.rough_speed_m3_s;
    assert!(r2 > 0.999, "R² {r2}");
    assert!(
        (tau / expected - 1.0).abs() < 0.08,
        "τ {tau} s, V/S {expected} s"
    );
}

#[test]
fn crossover_waits_for_the_pump_and_the_pressure() {
    let rows = run_for(Scenario::Pumpdown, 1.0, 1, 300.0);
    let first_hv = rows
        .iter()
        .find(|(t, _)| t.valves.gate)
        .expect("the gate opens");
    let plant = model::Plant::standard();
    assert!(first_hv.0.elapsed_s >= plant.turbo_spin_up_s * 0.95);
    // The sample before the gate opened was above nothing but crossover.
    let before = rows
        .iter()
        .rev()
        .find(|(t, _)| t.elapsed_s < first_hv.0.elapsed_s)
        .expect("a sample before");
    assert!(before.0.valves.roughing && !before.0.valves.gate);
    // After crossover the high-vacuum pump takes the chamber down fast.
    let later = window(&rows, 290.0, 300.0);
    assert!(later[0].total_pa < 1e-2, "{}", later[0].total_pa);
}

#[test]
fn high_vacuum_tail_falls_as_one_over_t_with_water() {
    let rows = run(Scenario::Pumpdown, 10.0);
    let tail = window(&rows, 3600.0, 8.0 * 3600.0);
    let xs: Vec<f64> = tail.iter().map(|t| t.elapsed_s.ln()).collect();
    let ys: Vec<f64> = tail.iter().map(|t| t.total_pa.ln()).collect();
    let (_, slope, r2) = line_fit(&xs, &ys);
    let alpha = -slope;
    assert!((0.85..1.15).contains(&alpha), "α {alpha}");
    assert!(r2 > 0.99, "R² {r2}");
    let last = tail.last().expect("a tail");
    assert!(last.partial(Species::H2O) / last.total_pa > 0.9);
    // Unbaked, about 1e-6 mbar after an hour and 1e-7 mbar after eight.
    assert!(
        (3e-5..3e-4).contains(&tail[0].total_pa),
        "{}",
        tail[0].total_pa
    );
    assert!((3e-6..3e-5).contains(&last.total_pa), "{}", last.total_pa);
}

#[test]
fn leak_check_rise_is_linear_at_the_leak_rate() {
    let rows = run(Scenario::LeakCheck, 5.0);
    let iso = window(&rows, 2.0 * 3600.0 + 30.0, 2.0 * 3600.0 + 590.0);
    assert!(iso.iter().all(|t| t.phase == "isolated"));
    let xs: Vec<f64> = iso.iter().map(|t| t.elapsed_s).collect();
    let ys: Vec<f64> = iso.iter().map(|t| t.total_pa).collect();
    let (_, slope, r2) = line_fit(&xs, &ys);
    assert!(r2 > 0.999, "R² {r2}");
    let plant = model::Plant::standard();
    let q = slope * plant.volume_m3;
    let leak = 2e-3 * model::MBAR_L_S;
    // Outgassing adds a few percent on top of the leak.
    assert!(q > leak * 0.97 && q < leak * 1.12, "Q {q} vs leak {leak}");
    // Pumped again, the chamber returns to its leak-limited base.
    let end = rows.last().expect("rows").0.total_pa;
    assert!(end < 2e-3, "{end}");
}

#[test]
fn helium_on_the_leak_lowers_the_ion_reading() {
    let rows = run(Scenario::LeakCheck, 5.0);
    let reading = |from: f64, to: f64| -> f64 {
        let v: Vec<f64> = rows
            .iter()
            .filter(|(t, _)| t.elapsed_s >= from && t.elapsed_s <= to)
            .filter_map(|(_, s)| sample(s, "chamber").value())
            .collect();
        v.iter().sum::<f64>() / v.len() as f64
    };
    let h = 3600.0;
    let before = reading(1.5 * h - 120.0, 1.5 * h);
    let during = reading(1.5 * h + 60.0, 1.5 * h + 115.0);
    assert!(during < 0.7 * before, "{during} vs {before}");
    let spray = window(&rows, 1.5 * h + 10.0, 1.5 * h + 100.0);
    assert!(spray.iter().all(|t| t.phase == "leak-test"));
    assert!(
        spray
            .iter()
            .all(|t| t.partial(Species::He) > t.partial(Species::Air))
    );
}

#[test]
fn outgassing_rise_flattens() {
    let rows = run(Scenario::Outgassing, 5.0);
    let h = 3600.0;
    let t0 = 2.0 * h;
    let p = |t: f64| {
        window(&rows, t - 2.5, t + 2.5)
            .first()
            .map(|x| x.total_pa)
            .expect("a sample near t")
    };
    let first = p(t0 + 1200.0) - p(t0 + 30.0);
    let second = p(t0 + 2390.0) - p(t0 + 1200.0);
    assert!(first > 0.0 && second > 0.0);
    let ratio = second / (first * 1190.0 / 1170.0);
    assert!(
        ratio < 0.75,
        "second-half slope / first-half slope = {ratio}"
    );
    // No line fits this as well as a real leak's rise.
    let iso = window(&rows, t0 + 30.0, t0 + 2390.0);
    let xs: Vec<f64> = iso.iter().map(|t| t.elapsed_s).collect();
    let ys: Vec<f64> = iso.iter().map(|t| t.total_pa).collect();
    let (_, _, r2) = line_fit(&xs, &ys);
    assert!(r2 < 0.99, "R² {r2}");
}

#[test]
fn process_step_holds_argon_at_its_setpoint() {
    let rows = run(Scenario::Process, 5.0);
    let h = 3600.0;
    let hold = window(&rows, 1.5 * h + 120.0, 2.0 * h - 5.0);
    let setpoint = 0.5;
    for t in &hold {
        assert_eq!(t.phase, "process");
        let ar = t.partial(Species::Ar);
        assert!(
            (ar / setpoint - 1.0).abs() < 0.02,
            "{ar} at {}",
            t.elapsed_s
        );
        assert!(t.partial(Species::Ar) / t.total_pa > 0.99);
        let sccm = t.argon_flow_pa_m3_s / model::SCCM_PA_M3_S;
        assert!((5.0..100.0).contains(&sccm), "{sccm} sccm");
    }
    // The capacitance gauge, gas-independent, reads the setpoint.
    for (t, s) in rows
        .iter()
        .filter(|(t, _)| hold.iter().any(|x| x.elapsed_s == t.elapsed_s))
    {
        let v = sample(s, "cdg").si().expect("in range");
        assert!((v / t.total_pa - 1.0).abs() < 0.02);
    }
    // Flow off: argon is gone within a minute.
    let after = window(&rows, 2.0 * h + 60.0, 2.0 * h + 65.0);
    assert!(after[0].partial(Species::Ar) < 1e-6);
}

#[test]
fn bakeout_rises_then_falls_and_leaves_a_lower_base() {
    let rows = run(Scenario::Bakeout, 10.0);
    let h = 3600.0;
    let before = window(&rows, 4.0 * h - 10.0, 4.0 * h)[0].total_pa;
    let bake = window(&rows, 4.0 * h, 14.0 * h);
    let (peak_i, peak) = bake
        .iter()
        .enumerate()
        .map(|(i, t)| (i, t.total_pa))
        .fold((0, 0.0), |a, b| if b.1 > a.1 { b } else { a });
    assert!(peak > 10.0 * before, "peak {peak} vs {before}");
    let end_of_bake = bake.last().expect("bake").total_pa;
    assert!(end_of_bake < peak / 10.0);
    assert!(peak_i > 0 && peak_i < bake.len() / 2);
    let hold = window(&rows, 8.0 * h, 14.0 * h);
    assert!(hold.iter().all(|t| (t.wall_k - 423.15).abs() < 2.0));
    let end = rows.last().expect("rows");
    assert!(end.0.wall_k < 273.15 + 30.0);
    // Far lower than the unbaked base, and lower than an unbaked chamber
    // would reach by the same time (p ∝ 1/t).
    assert!(
        end.0.total_pa < 0.01 * before * 4.0 / 22.0,
        "{} vs {before}",
        end.0.total_pa
    );
    // Water is no longer the main residual gas.
    assert!(end.0.partial(Species::H2O) < 0.5 * end.0.total_pa);
    // The thermocouple follows the wall.
    let tc = sample(&end.1, "wall").value().expect("thermocouple");
    assert!((tc - (end.0.wall_k - 273.15)).abs() < 0.6);
}

#[test]
fn ion_gauge_protects_itself_at_high_pressure() {
    for scenario in [Scenario::LeakCheck, Scenario::Process, Scenario::Demo] {
        let rows = run(scenario, 5.0);
        let mut seen_off = false;
        for (t, s) in &rows {
            let ion = sample(s, "ion");
            if t.total_pa > 0.2 {
                assert_eq!(
                    ion.status(),
                    Status::SensorOff,
                    "{scenario} at {}",
                    t.elapsed_s
                );
                seen_off = true;
            }
            if ion.status() == Status::Ok {
                let v = ion.si().expect("ok has a value");
                assert!(v <= gauges::ION_PROTECT_PA);
            }
        }
        assert!(seen_off);
        // It comes back once the chamber is pumped down again.
        assert!(
            rows.iter()
                .rev()
                .take(50)
                .any(|(_, s)| sample(s, "ion").status() == Status::Ok)
                || scenario == Scenario::Demo
        );
    }
}

#[test]
fn capacitance_gauge_over_and_under_range() {
    let rows = run_for(Scenario::Pumpdown, 1.0, 1, 600.0);
    let (mut over, mut under, mut ok) = (0, 0, 0);
    for (t, s) in &rows {
        let cdg = sample(s, "cdg");
        if t.total_pa > 1.2 * gauges::CDG_MAX_PA {
            assert_eq!(cdg.status(), Status::OverRange);
            over += 1;
        } else if t.total_pa < 0.5 * gauges::CDG_MIN_PA {
            assert_eq!(cdg.status(), Status::UnderRange);
            under += 1;
        } else if t.total_pa > 10.0 * gauges::CDG_MIN_PA && t.total_pa < 0.9 * gauges::CDG_MAX_PA {
            let v = cdg.si().expect("in range");
            assert!((v / t.total_pa - 1.0).abs() < 0.02, "{v} vs {}", t.total_pa);
            ok += 1;
        }
        assert_eq!(cdg.value().is_some(), cdg.status() == Status::Ok);
    }
    assert!(over > 10 && under > 100 && ok > 10, "{over} {under} {ok}");
}

#[test]
fn ion_readings_in_argon_are_1_4_times_true() {
    let mut g = Gauges::new(3);
    let mut p = [0.0; N_SPECIES];
    let true_pa = 1e-4;
    p[Species::Ar.index()] = true_pa;
    let t0 = SimOptions::default().start;
    let (mut ion, mut chamber) = (Vec::new(), Vec::new());
    for k in 0..400 {
        let x = Exposure {
            t_s: k as f64,
            time: t0,
            p: &p,
            wall_k: 295.15,
        };
        let s = g.read(x);
        if k > 30 {
            ion.push(sample(&s, "ion").si().expect("ion on"));
            chamber.push(sample(&s, "chamber").si().expect("ion element on"));
        }
    }
    for readings in [ion, chamber] {
        let mean = readings.iter().sum::<f64>() / readings.len() as f64;
        assert!((mean / true_pa - 1.4).abs() < 0.02, "{}", mean / true_pa);
    }
}

#[test]
fn combined_gauge_switches_elements() {
    let rows = run_for(Scenario::Process, 5.0, 1, 2.0 * 3600.0);
    let table = GasTable::builtin();
    let th = gauges::ThermalResponse::new(&table);
    for (t, s) in &rows {
        let c = sample(s, "chamber");
        let Some(v) = c.si() else { continue };
        if t.phase == "process" && t.total_pa > 0.3 {
            // 5e-3 mbar of argon: the thermal element reports, reading low.
            let expect = th.indicated(&t.partial_pa).expect("on scale");
            assert!(
                (v / expect - 1.0).abs() < 0.05,
                "{v} vs {expect} at {}",
                t.elapsed_s
            );
            assert!(v < 0.7 * t.total_pa);
        } else if t.total_pa < 1e-3 {
            // Ionization element: water at 0.93 of N2.
            let ratio = v / t.total_pa;
            assert!((0.85..1.0).contains(&ratio), "{ratio} at {}", t.elapsed_s);
        }
    }
}

#[test]
fn every_scenario_runs_to_its_end_with_finite_readings() {
    for scenario in Scenario::ALL {
        let interval = if scenario == Scenario::Bakeout {
            20.0
        } else {
            5.0
        };
        let rows = run(scenario, interval);
        let mut phases: Vec<&str> = Vec::new();
        for (t, samples) in &rows {
            assert!(t.total_pa.is_finite() && t.total_pa > 0.0, "{scenario}");
            assert!(t.partial_pa.iter().all(|p| p.is_finite() && *p >= 0.0));
            assert!(t.wall_k.is_finite() && t.wall_k > 250.0);
            assert!(t.argon_flow_pa_m3_s.is_finite());
            assert!(t.water_outgassing_pa_m3_s.is_finite());
            for s in samples {
                assert_eq!(
                    s.value().is_some(),
                    s.status() == Status::Ok,
                    "{scenario} {s:?}"
                );
                if let Some(v) = s.value() {
                    assert!(v.is_finite(), "{scenario} {s:?}");
                    if s.unit.is_pressure() {
                        assert!(v > 0.0, "{scenario} {s:?}");
                    }
                }
            }
            if phases.last() != Some(&t.phase) {
                phases.push(t.phase);
            }
        }
        assert!(
            phases.starts_with(&["roughing", "high-vacuum"]),
            "{scenario}: {phases:?}"
        );
        let expected: &[&str] = match scenario {
            Scenario::Pumpdown => &["roughing", "high-vacuum"],
            Scenario::LeakCheck => &[
                "roughing",
                "high-vacuum",
                "leak-test",
                "high-vacuum",
                "isolated",
                "high-vacuum",
            ],
            Scenario::Outgassing => &["roughing", "high-vacuum", "isolated", "high-vacuum"],
            Scenario::Process => &["roughing", "high-vacuum", "process", "high-vacuum"],
            Scenario::Bakeout => &[
                "roughing",
                "high-vacuum",
                "bakeout",
                "cool-down",
                "high-vacuum",
            ],
            Scenario::Demo => &["roughing", "high-vacuum", "process", "high-vacuum", "vent"],
        };
        assert_eq!(phases, expected, "{scenario}");
        let mixture = Mixture::parse(&sim(scenario, 1.0, 1).gas_label(), &GasTable::builtin());
        assert!(mixture.is_ok(), "{scenario}");
    }
}

#[test]
fn demo_shows_a_gate_a_dropout_and_an_excursion() {
    let rows = run(Scenario::Demo, 1.0);
    // Below 5e-6 mbar for two minutes within the first ten.
    let mut below_since = None;
    let mut gate_at = None;
    for (t, _) in &rows {
        if t.total_pa < 5e-4 {
            let since = *below_since.get_or_insert(t.elapsed_s);
            if t.elapsed_s - since >= 120.0 && gate_at.is_none() {
                gate_at = Some(t.elapsed_s);
            }
        } else {
            below_since = None;
        }
    }
    let gate_at = gate_at.expect("the gate condition is met");
    assert!(gate_at < 600.0, "{gate_at}");
    // The dropout: sensor errors for a while, never a number.
    let errors: Vec<&Sample> = rows
        .iter()
        .map(|(_, s)| sample(s, "chamber"))
        .filter(|s| s.status() == Status::SensorError)
        .collect();
    assert!((15..=25).contains(&errors.len()), "{}", errors.len());
    assert!(errors.iter().all(|s| s.value().is_none()));
    // The excursion: two decades above base for a short while, then back.
    let h = 60.0;
    let base = window(&rows, 30.5 * h, 31.0 * h - 1.0)[0].total_pa;
    let peak = window(&rows, 31.0 * h, 33.0 * h)
        .iter()
        .map(|t| t.total_pa)
        .fold(0.0, f64::max);
    assert!(peak > 50.0 * base, "{peak} vs {base}");
    let settled = window(&rows, 34.0 * h, 34.5 * h)[0].total_pa;
    assert!(settled < 2.0 * base);
    // Ends vented, at atmosphere.
    let end = &rows.last().expect("rows").0;
    assert_eq!(end.phase, "vent");
    assert!((end.total_pa / crate::units::ATM_PA - 1.0).abs() < 0.01);
    assert!(sim(Scenario::Demo, 1.0, 1).natural_duration_s() <= 3600.0);
}

#[test]
fn odd_options_do_not_panic() {
    for interval in [f64::NAN, -1.0, 0.0, f64::INFINITY, 1e-9, 1e9] {
        let mut s = Simulator::new(SimOptions {
            interval_s: interval,
            ..SimOptions::default()
        });
        let i = s.options().interval_s;
        assert!((MIN_INTERVAL_S..=MAX_INTERVAL_S).contains(&i));
        assert_eq!(s.next_samples().len(), 4);
    }
    let mut s = Simulator::new(SimOptions {
        start: DateTime::<Utc>::MAX_UTC,
        scenario: Scenario::Demo,
        interval_s: 60.0,
        seed: u64::MAX,
    });
    for _ in 0..5 {
        assert_eq!(s.next_samples().len(), 4);
    }
    // Past the natural end it keeps going, steadily.
    let mut s = sim(Scenario::Process, 600.0, 0);
    for _ in 0..40 {
        s.next_samples();
    }
    assert!(s.is_finished());
    assert!(s.truth().total_pa.is_finite());
}
