//! Engine checks against values from outside the project. Every check names
//! its source; "(b)" values were computed with reference libraries from PyPI
//! (see ../shared/REFERENCES.md and tests/reference/).

use super::*;
use crate::gas::GasTable;
use crate::units::TORR_PA;

fn pure(id: &str) -> Mixture {
    Mixture::pure(GasTable::builtin().get(id).expect(id).clone())
}

fn close(actual: f64, expected: f64, rel: f64) -> bool {
    ((actual - expected) / expected).abs() <= rel
}

macro_rules! assert_close {
    ($a:expr, $e:expr, $rel:expr) => {{
        let (a, e) = ($a, $e);
        assert!(
            close(a, e, $rel),
            "{} = {a}, expected {e} within {}",
            stringify!($a),
            $rel
        );
    }};
}

fn at(p: f64, t: f64, gas: &str) -> Derived {
    derive(&Conditions::new(p, t), &pure(gas), &[], &Physics::default())
}

#[test]
fn constants_are_si_2019_and_codata_2018() {
    // Source: SI 2019 (exact k_B, N_A); CODATA 2018 atomic mass constant.
    assert_eq!(constants::K_B, 1.380649e-23);
    assert_eq!(constants::N_A, 6.02214076e23);
    assert_eq!(constants::M_U, 1.66053906660e-27);
}

#[test]
fn loschmidt_constant() {
    // Source: CODATA 2022 Loschmidt constant (273.15 K, 101.325 kPa),
    // 2.686780111798e25 m^-3.
    let d = at(101_325.0, 273.15, "Ar");
    assert_close!(d.number_density_per_m3, 2.686_780_111_798e25, 1e-12);
}

#[test]
fn molecular_speeds() {
    // Source: REFERENCES.md (b), computed with scipy 1.17.1 (CODATA 2022)
    // and chemicals 1.5.2 molar masses.
    assert_close!(at(1.0, 298.15, "O2").mean_speed_m_per_s, 444.158, 2e-6);
    assert_close!(at(1.0, 298.15, "H2").mean_speed_m_per_s, 1769.588, 2e-6);
    assert_close!(at(1.0, 298.15, "N2").mean_speed_m_per_s, 474.703, 2e-6);
    let ar = at(101_325.0, 273.15, "Ar");
    assert_close!(ar.mean_speed_m_per_s, 380.487, 2e-6);
    assert_close!(ar.rms_speed_m_per_s, 412.982, 2e-6);
    assert_close!(ar.most_probable_speed_m_per_s, 337.198, 2e-6);
}

#[test]
fn impingement_rate_hertz_knudsen() {
    // Source: REFERENCES.md (b): N2 at 1e-6 Torr, 295 K,
    // Phi = 3.8641e14 cm^-2 s^-1 (rule of thumb ~3.8e14, common practice).
    let d = at(1e-6 * TORR_PA, 295.0, "N2");
    assert_close!(d.impingement_per_m2_s * 1e-4, 3.8641e14, 1e-4);
    // Source: REFERENCES.md (b): Phi = C p / sqrt(M T), C = 2.63478e24.
    let d = at(1e-3, 400.0, "Ar");
    assert_close!(
        d.impingement_per_m2_s,
        2.63478e24 * 1e-3 / (39.948f64 * 400.0).sqrt(),
        1e-5
    );
    // n v̄ / 4 identity (kinetic theory).
    assert_close!(
        d.impingement_per_m2_s,
        d.number_density_per_m3 * d.mean_speed_m_per_s / 4.0,
        1e-12
    );
}

#[test]
fn monolayer_exposure_for_n2() {
    // Source: REFERENCES.md (b): N2 at 295 K with 1e15 sites/cm^2 needs 2.59 L
    // for a monolayer (the "1 L ~ 1 monolayer" rule of thumb is looser).
    let physics = Physics {
        sites_per_m2: 1e19,
        ..Physics::default()
    };
    let p = 1e-6 * TORR_PA;
    let d = derive(&Conditions::new(p, 295.0), &pure("N2"), &[], &physics);
    let langmuir = p * d.monolayer_time_s / crate::units::LANGMUIR_PA_S;
    assert_close!(langmuir, 2.59, 2e-3);
}

#[test]
fn mean_free_path_matches_chapman_enskog_from_viscosity() {
    // Source: REFERENCES.md (b): lambda_CE * p from CoolProp 8.0.0 viscosity.
    for (gas, t, lp) in [
        ("N2", 293.15, 6.6123e-3),
        ("air", 293.15, 6.7366e-3),
        ("Ar", 293.15, 7.0286e-3),
        ("He", 293.15, 19.5395e-3),
        ("H2", 293.15, 12.3476e-3),
        ("N2", 273.15, 6.0390e-3),
        ("Ar", 273.15, 6.3916e-3),
        ("air", 273.15, 6.1496e-3),
    ] {
        let d = at(1.0, t, gas);
        assert!(
            close(d.mean_free_path_m, lp, 0.005),
            "{gas} {t} K: {}",
            d.mean_free_path_m
        );
    }
}

#[test]
fn air_mean_free_path_rules_of_thumb() {
    // Common practice, no source: lambda*p ~ 6.6e-3 Pa·m for air at 20 C;
    // "about 5 cm at 1e-3 Torr"; "about 68 nm at 1 atm" (each within 2.3 % of
    // the Chapman-Enskog value, REFERENCES.md).
    assert_close!(at(1.0, 293.15, "air").mean_free_path_m, 6.6e-3, 0.025);
    assert_close!(
        at(1e-3 * TORR_PA, 293.15, "air").mean_free_path_m,
        0.05,
        0.025
    );
    assert_close!(at(101_325.0, 293.15, "air").mean_free_path_m, 68e-9, 0.025);
}

#[test]
fn hard_sphere_model_holds_the_diameter() {
    // REFERENCES.md: N2 with a fixed 0.375 nm is ~14 % short at 500 K.
    let hs = Physics {
        model: Model::HardSphere,
        ..Physics::default()
    };
    let fixed = derive(&Conditions::new(1.0, 500.0), &pure("N2"), &[], &hs);
    let suth = at(1.0, 500.0, "N2");
    let short = 1.0 - fixed.mean_free_path_m / suth.mean_free_path_m;
    assert!((0.12..0.16).contains(&short), "{short}");
    // Hard-sphere formula itself: kT/(sqrt(2) pi d^2 p).
    let d = 0.37509e-9;
    let expect = constants::K_B * 500.0 / (2f64.sqrt() * std::f64::consts::PI * d * d);
    assert_close!(fixed.mean_free_path_m, expect, 1e-12);
}

#[test]
fn the_json_example_of_the_calc_command() {
    // Source: the Step 1 issue's example (N2, 1e-4 Pa, 295 K, L = 0.3 m),
    // itself consistent with REFERENCES.md (b) values.
    let lengths = [NamedLength::new("chamber", 0.3)];
    let d = derive(
        &Conditions::new(1e-4, 295.0),
        &pure("N2"),
        &lengths,
        &Physics::default(),
    );
    assert_close!(d.number_density_per_m3, 2.455e16, 1e-3);
    assert_close!(d.mean_speed_m_per_s, 472.2, 1e-3);
    assert_close!(d.most_probable_speed_m_per_s, 418.5, 1e-3);
    assert_close!(d.rms_speed_m_per_s, 512.5, 1e-3);
    assert_close!(d.mean_free_path_m, 66.6, 5e-3);
    assert_close!(d.impingement_per_m2_s, 2.898e18, 1e-3);
    assert_close!(d.monolayer_time_s, 3.45, 2e-3);
    assert_eq!(d.vacuum_range, VacuumRange::High);
    assert_close!(d.lengths[0].knudsen, 222.0, 5e-3);
    assert_eq!(d.lengths[0].regime, FlowRegime::Molecular);
    assert!(d.warnings.is_empty());
}

#[test]
fn knudsen_bounds_for_air() {
    // Source: REFERENCES.md (b): air at 293.15 K has Kn = 0.01 at
    // p·L = 0.674 Pa·m and Kn = 0.5 at 0.0135 Pa·m.
    let kn = |pl: f64| {
        let d = derive(
            &Conditions::new(pl, 293.15),
            &pure("air"),
            &[NamedLength::new("L", 1.0)],
            &Physics::default(),
        );
        d.lengths[0].knudsen
    };
    assert_close!(kn(0.674), 0.01, 0.005);
    assert_close!(kn(0.0135), 0.5, 0.005);
}

#[test]
fn mixture_uses_species_collision_sums() {
    let t = GasTable::builtin();
    let mix = Mixture::parse("H2=0.6,H2O=0.3,N2=0.1", &t).expect("mix");
    let p = 1e-4;
    let d = derive(&Conditions::new(p, 295.0), &mix, &[], &Physics::default());
    // Top-level impingement is the sum over species; the mean free path is
    // the mole-fraction-weighted mean.
    let sum: f64 = d.species.iter().map(|s| s.impingement_per_m2_s).sum();
    assert_close!(d.impingement_per_m2_s, sum, 1e-12);
    let weighted: f64 = d
        .species
        .iter()
        .map(|s| s.fraction * s.mean_free_path_m)
        .sum();
    assert_close!(d.mean_free_path_m, weighted, 1e-12);
    // Partial pressures add up.
    let pp: f64 = d.species.iter().map(|s| s.partial_pressure_pa).sum();
    assert_close!(pp, p, 1e-12);
    // Light H2 travels further between collisions than heavy H2O.
    assert!(d.species[0].mean_free_path_m > d.species[1].mean_free_path_m);
}

/// More species than the per-species values keep on the stack (eight):
/// each species still gets its own mass and diameter, as alone. Not a
/// check against an outside value: the same code path for large mixtures.
#[test]
fn a_mixture_of_ten_gases_keeps_each_species_own_values() {
    let table = GasTable::builtin();
    let ids = ["N2", "O2", "Ar", "He", "H2", "H2O", "CO2", "CO", "Ne", "Kr"];
    let spec: Vec<String> = ids.iter().map(|id| format!("{id}=0.1")).collect();
    let mix = Mixture::parse(&spec.join(","), &table).expect("mix");
    let d = derive(
        &Conditions::new(1e-3, 295.0),
        &mix,
        &[],
        &Physics::default(),
    );
    assert_eq!(d.species.len(), ids.len());
    for (s, id) in d.species.iter().zip(ids) {
        let alone = at(1e-3, 295.0, id);
        assert_eq!(s.gas, id);
        assert_eq!(
            s.mean_speed_m_per_s.to_bits(),
            alone.mean_speed_m_per_s.to_bits(),
            "{id}"
        );
        assert_eq!(
            s.diameter_m.to_bits(),
            alone.species[0].diameter_m.to_bits(),
            "{id}"
        );
    }
    // The mode lies between the lightest and the heaviest species' modes.
    let (h2, kr) = (at(1.0, 295.0, "H2"), at(1.0, 295.0, "Kr"));
    assert!(d.most_probable_speed_m_per_s < h2.most_probable_speed_m_per_s);
    assert!(d.most_probable_speed_m_per_s > kr.most_probable_speed_m_per_s);
}

#[test]
fn warnings_flag_temperatures_outside_the_fit() {
    let d = at(1.0, 77.0, "N2");
    assert!(
        d.warnings
            .iter()
            .any(|w| w.code == "temperature-outside-fit")
    );
    let d = at(2e5, 295.0, "N2");
    assert!(d.warnings.iter().any(|w| w.code == "above-atmospheric"));
}

#[test]
fn gauge_correction_pure_and_mixture() {
    // Source: CRC Handbook sec. 15 sensitivities (REFERENCES.md (a)).
    let ar = pure("Ar");
    let g = GaugeModel::new(GaugeKind::Ionization, &ar, &GaugeOverrides::default()).expect("Ar");
    let c = g.correct(1.0e-6);
    assert_close!(c.pressure_pa, 7.143e-7, 1e-4);
    assert_eq!(c.sensitivity, Some(1.4));
    // Mixture: S = sum x_i S_i = 0.5*0.18 + 0.5*1.4 = 0.79.
    let t = GasTable::builtin();
    let mix = Mixture::parse("He=0.5,Ar=0.5", &t).expect("mix");
    let g = GaugeModel::new(GaugeKind::Ionization, &mix, &GaugeOverrides::default()).expect("mix");
    assert_close!(g.correct(1e-5).pressure_pa, 1e-5 / 0.79, 1e-12);
    // Capacitance gauges read true pressure for any gas.
    let g = GaugeModel::new(GaugeKind::Capacitance, &mix, &GaugeOverrides::default()).expect("cap");
    assert_eq!(g.correct(1.0).pressure_pa, 1.0);
}

#[test]
fn gauge_without_a_factor_asks_for_one() {
    let ar = pure("Ar");
    let e = GaugeModel::new(GaugeKind::Thermal, &ar, &GaugeOverrides::default()).unwrap_err();
    assert_eq!(
        e,
        GaugeError::NoSensitivity {
            element: GaugeKind::Thermal,
            gas: "Ar".into()
        }
    );
    let o = GaugeOverrides {
        sensitivity: Some(0.6),
        ..GaugeOverrides::default()
    };
    let g = GaugeModel::new(GaugeKind::Thermal, &ar, &o).expect("override");
    assert_close!(g.correct(1.0).pressure_pa, 1.0 / 0.6, 1e-12);
    let bad = GaugeOverrides {
        sensitivity: Some(-1.0),
        ..GaugeOverrides::default()
    };
    assert_eq!(
        GaugeModel::new(GaugeKind::Thermal, &ar, &bad),
        Err(GaugeError::BadSensitivity(-1.0))
    );
}

#[test]
fn gauge_range_is_flagged() {
    let n2 = pure("N2");
    let g = GaugeModel::new(GaugeKind::Ionization, &n2, &GaugeOverrides::default()).expect("n2");
    assert!(g.correct(1e-4).warnings.is_empty());
    let c = g.correct(100.0);
    assert_eq!(c.warnings[0].code, "gauge-out-of-range");
    // The reading is still converted, never hidden.
    assert_eq!(c.pressure_pa, 100.0);
}

#[test]
fn calibration_table_replaces_the_factor() {
    let n2 = pure("N2");
    let table = CalibrationTable::new(&[(1e-3, 2e-3), (1.0, 2.0)]).expect("table");
    let o = GaugeOverrides {
        table: Some(table),
        ..GaugeOverrides::default()
    };
    let g = GaugeModel::new(GaugeKind::Thermal, &n2, &o).expect("table");
    let c = g.correct(1e-2);
    assert_close!(c.pressure_pa, 2e-2, 1e-12);
    assert_eq!(c.sensitivity, None);
    let c = g.correct(10.0);
    assert!(
        c.warnings
            .iter()
            .any(|w| w.code == "calibration-extrapolated")
    );
}

#[test]
fn the_true_pressure_alone_is_the_corrected_pressure() {
    // What the monitor asks on every reading must be `correct`'s number,
    // bit for bit, on every element, in and out of range and table.
    let table = CalibrationTable::new(&[(1e-3, 2e-3), (1.0, 2.0)]).expect("table");
    let with_table = GaugeOverrides {
        table: Some(table),
        ..GaugeOverrides::default()
    };
    let models = [
        GaugeModel::new(
            GaugeKind::Ionization,
            &pure("Ar"),
            &GaugeOverrides::default(),
        ),
        GaugeModel::new(
            GaugeKind::Capacitance,
            &pure("Ar"),
            &GaugeOverrides::default(),
        ),
        GaugeModel::new(GaugeKind::Combined, &pure("Ar"), &GaugeOverrides::default()),
        GaugeModel::new(GaugeKind::Combined, &pure("N2"), &GaugeOverrides::default()),
        GaugeModel::new(GaugeKind::Thermal, &pure("N2"), &with_table),
    ];
    for g in models {
        let g = g.expect("a model");
        for e in -110..60 {
            let p = 10f64.powf(f64::from(e) / 10.0);
            let (a, b) = (g.true_pressure(p), g.correct(p).pressure_pa);
            assert!(a.to_bits() == b.to_bits(), "{g:?} at {p}: {a} vs {b}");
        }
    }
}

#[test]
fn combined_gauge_without_a_thermal_factor_reads_below_the_crossover() {
    // Ar has an ionization factor (CRC Handbook sec. 15: 1.4) and no
    // general thermal-conductivity factor (gas table).
    let ar = pure("Ar");
    let g = GaugeModel::new(GaugeKind::Combined, &ar, &GaugeOverrides::default())
        .expect("the ionization element alone is enough for a gauge model");
    let c = g.correct(1.0e-6);
    // REFERENCES.md (a, b): 1.0e-6 Pa indicated in pure Ar -> 7.143e-7 Pa.
    assert_close!(c.pressure_pa, 7.143e-7, 1e-4);
    assert!(c.warnings.is_empty(), "{:?}", c.warnings);
    // Above the crossover the thermal element reads: no number, a reason.
    let c = g.correct(10.0);
    assert!(c.pressure_pa.is_nan());
    assert_eq!(c.sensitivity, None);
    assert!(
        c.warnings.iter().any(|w| w.code == "no-gauge-sensitivity"
            && w.message.contains("thermal")
            && w.message.contains("Ar")),
        "{:?}",
        c.warnings
    );
    assert!(g.missing().is_some());
    // A monitored gauge reads on both elements, so a config still asks.
    let s = gauge::GaugeSettings {
        kind: GaugeKind::Combined,
        mixture: ar,
        calibration_gas: None,
        overrides: GaugeOverrides::default(),
    };
    let problems = GaugeModel::from_settings("chamber", &s)
        .err()
        .unwrap_or_default();
    assert_eq!(problems.len(), 1, "{problems:?}");
    assert!(problems[0].message.contains("thermal"), "{problems:?}");
}

#[test]
fn thermal_nonlinear_warning_follows_the_true_pressure() {
    // The 1 mbar linear limit is common practice, no source; the check is
    // that it is applied to p = p_ind / S, not to p_ind.
    let ar = pure("Ar");
    let nonlinear = |s: f64, indicated: f64| {
        let o = GaugeOverrides {
            sensitivity: Some(s),
            ..GaugeOverrides::default()
        };
        let g = GaugeModel::new(GaugeKind::Thermal, &ar, &o).expect("factor given");
        g.correct(indicated)
            .warnings
            .iter()
            .any(|w| w.code == "thermal-factor-nonlinear")
    };
    // 80 Pa indicated with S = 0.6 is 133 Pa true: beyond the linear range.
    assert!(nonlinear(0.6, 80.0));
    // 120 Pa indicated with S = 2 is 60 Pa true: inside it.
    assert!(!nonlinear(2.0, 120.0));
}

#[test]
fn mixture_most_probable_speed_is_the_mode() {
    // (b) tests/reference/mixture_speed_mode.py: the mode of the summed
    // Maxwell-Boltzmann distributions, scipy 1.17.1 (CODATA 2022).
    let t = GasTable::builtin();
    for (mix, temp, mode) in [
        ("N2=0.78,O2=0.21,Ar=0.01", 295.15, 411.221671),
        ("He=0.5,Ar=0.5", 300.0, 366.295364),
        // Two peaks: the H2 one is taller here, the Xe one below.
        ("H2=0.9,Ar=0.1", 300.0, 1573.11369),
        ("H2=0.5,Xe=0.5", 300.0, 195.417491),
    ] {
        let m = Mixture::parse(mix, &t).expect(mix);
        let d = derive(&Conditions::new(1e-3, temp), &m, &[], &Physics::default());
        assert!(
            close(d.most_probable_speed_m_per_s, mode, 1e-6),
            "{mix}: {} vs {mode}",
            d.most_probable_speed_m_per_s
        );
    }
    // A pure gas: sqrt(2kT/m) (REFERENCES.md (b): Ar at 273.15 K, 337.198 m/s).
    assert_close!(
        at(1.0, 273.15, "Ar").most_probable_speed_m_per_s,
        337.198,
        2e-6
    );
}

#[test]
fn water_above_its_vapour_pressure_warns() {
    // Saturation pressure at 22 C is 2645 Pa (Wagner & Pruss 1993, checked
    // in engine/vapour.rs): 1 atm of water vapour cannot exist there.
    let d = at(101_325.0, 295.15, "H2O");
    assert!(
        d.warnings.iter().any(|w| w.code == "above-saturation"),
        "{:?}",
        d.warnings
    );
    // 1 kPa is below it; and a mixture warns on the partial pressure
    // (0.5 x 6 kPa = 3 kPa > 2645 Pa).
    assert!(at(1000.0, 295.15, "H2O").warnings.is_empty());
    let m = Mixture::parse("H2O=0.5,N2=0.5", &GasTable::builtin()).expect("mix");
    let d = derive(
        &Conditions::new(6000.0, 295.15),
        &m,
        &[],
        &Physics::default(),
    );
    assert!(d.warnings.iter().any(|w| w.code == "above-saturation"));
    let d = derive(
        &Conditions::new(4000.0, 295.15),
        &m,
        &[],
        &Physics::default(),
    );
    assert!(!d.warnings.iter().any(|w| w.code == "above-saturation"));
}

#[test]
fn hard_sphere_far_from_its_reference_temperature_warns() {
    // REFERENCES.md (b): N2 with a fixed 0.375 nm diameter has a mean free
    // path ~14 % short at 500 K; at 295 K (2 % off) no warning.
    let hs = Physics {
        model: Model::HardSphere,
        ..Physics::default()
    };
    let warn = |t: f64| {
        derive(&Conditions::new(1.0, t), &pure("N2"), &[], &hs)
            .warnings
            .into_iter()
            .find(|w| w.code == "hard-sphere-far-from-reference")
    };
    let w = warn(500.0).expect("500 K warns");
    assert!(w.message.contains("14 % shorter"), "{}", w.message);
    assert!(warn(295.0).is_none());
    // The Sutherland model itself never raises it.
    let d = derive(
        &Conditions::new(1.0, 500.0),
        &pure("N2"),
        &[],
        &Physics::default(),
    );
    assert!(
        !d.warnings
            .iter()
            .any(|w| w.code == "hard-sphere-far-from-reference")
    );
}

#[test]
fn kinetics_at_another_temperature_equal_a_fresh_derivation() {
    // The mode of a mixture's speed distribution scales as √T (every term
    // depends on v only through m v²/(2 k_B T)): scaling it from 295 K must
    // give what the numerical search finds at the new temperature, and
    // every other quantity must be the very same.
    let t = GasTable::builtin();
    let mix = Mixture::parse("H2=0.6,H2O=0.3,N2=0.1", &t).expect("mix");
    let lengths = [NamedLength::new("bore", 0.4)];
    let physics = Physics::default();
    let base = Precomputed::new(295.0, &mix, &lengths, &physics);
    for temp in [273.15, 295.05, 300.0, 350.0, 420.0] {
        let scaled = base.at_temperature(temp, &mix, &lengths, &physics);
        let fresh = Precomputed::new(temp, &mix, &lengths, &physics);
        let (a, b) = (scaled.derive(1e-3), fresh.derive(1e-3));
        // The search locates a flat maximum to about √ε ≈ 1e-8 relative.
        assert_close!(
            a.most_probable_speed_m_per_s,
            b.most_probable_speed_m_per_s,
            1e-7
        );
        let same = Derived {
            most_probable_speed_m_per_s: b.most_probable_speed_m_per_s,
            ..a
        };
        assert_eq!(same, b, "at {temp} K");
    }
}

#[test]
fn results_refreshed_in_place_equal_fresh_ones() {
    // One `Derived` refreshed by readings of gases with fewer, more and
    // other species and lengths, warnings and none, must equal a fresh
    // derivation every time.
    let t = GasTable::builtin();
    let physics = Physics::default();
    let two = [
        NamedLength::new("bore", 0.4),
        NamedLength::new("pipe", 0.016),
    ];
    let one = [NamedLength::new("gap", 2e-3)];
    let cases: Vec<(Mixture, &[NamedLength], f64, f64)> = vec![
        (pure("N2"), &two, 295.0, 1e-3),
        (pure("N2"), &two, 295.0, 2.5e5),
        (
            Mixture::parse("H2=0.6,H2O=0.3,N2=0.1", &t).expect("mix"),
            &one,
            300.0,
            1e-6,
        ),
        (
            Mixture::parse("H2O=0.5,Ar=0.5", &t).expect("mix"),
            &[],
            250.0,
            3e3,
        ),
        (pure("Ar"), &two, 77.0, 0.5),
        (pure("N2"), &one, 295.0, 1e-9),
    ];
    let mut out = Precomputed::new(295.0, &pure("He"), &[], &physics).derive(1.0);
    // A copy made by `clone_from` into whatever the last one held.
    let mut copy = out.clone();
    for (mix, lengths, temp, p) in &cases {
        let pre = Precomputed::new(*temp, mix, lengths, &physics);
        pre.derive_into(*p, &mut out);
        assert_eq!(out, pre.derive(*p), "{mix:?} at {p} Pa");
        copy.clone_from(&out);
        assert_eq!(copy, out, "{mix:?} at {p} Pa: clone_from");
        assert_eq!(out.clone(), out, "{mix:?} at {p} Pa: clone");
    }
}

/// Differential test of the summary's shortcut: inside a reading's
/// [`Precomputed::steady_band`], the range and every length's regime that
/// the engine works out in full ([`Precomputed::derive`], the reference)
/// are those at the reading, for pressures at and next to every range and
/// regime limit (a few units of the last place either side), and for a
/// kinetics at another temperature that classifies the same way.
#[test]
fn inside_a_steady_band_the_classes_are_those_worked_out_in_full() {
    let lengths = [
        NamedLength::new("bore", 0.4),
        NamedLength::new("line", 0.025),
        NamedLength::new("gap", 1.5e-4),
    ];
    let physics = Physics::default();
    let n2 = pure("N2");
    let cold = Precomputed::new(295.15, &n2, &lengths, &physics);
    let hot = cold.at_temperature(295.2, &n2, &lengths, &physics);
    assert!(cold.same_classes(&hot) && hot.same_classes(&cold));
    assert!(cold.shares_classes(&hot));
    // Another gas's kinetics: the same classes, found by comparing them.
    let argon = Precomputed::new(295.15, &pure("Ar"), &lengths, &physics);
    assert!(!cold.shares_classes(&argon) && cold.same_classes(&argon));
    let other = Precomputed::new(295.15, &n2, &lengths[..2], &physics);
    assert!(!cold.same_classes(&other));
    // Pressures at every limit: the ranges' and, for each length, where
    // its Knudsen number crosses a bound; and a few ulps either side.
    let lambda_p = cold.derive(1.0).mean_free_path_m;
    let mut limits = vec![1e5, crate::units::ATM_PA, 100.0, 0.1, 1e-6, 1e-9];
    for l in &lengths {
        if let Some((v, m)) = physics.bounds.pressures(lambda_p, l.length_m) {
            limits.extend([v, m]);
        }
    }
    let mut pressures = Vec::new();
    for x in limits {
        let mut below = x;
        let mut above = x;
        pressures.push(x);
        for _ in 0..4 {
            below = below.next_down();
            above = above.next_up();
            pressures.extend([below, above, x * (1.0 + 1e-9), x * (1.0 - 1e-9)]);
        }
    }
    pressures.extend((-120..60).map(|e| 10f64.powf(f64::from(e) / 10.0)));
    let classes = |pre: &Precomputed, p: f64| {
        let d = pre.derive(p);
        let regimes: Vec<_> = d.lengths.iter().map(|l| l.regime).collect();
        (d.vacuum_range, regimes)
    };
    let mut inside = 0;
    for &p in &pressures {
        let band = cold.steady_band(p);
        for &q in &pressures {
            for pre in [&cold, &hot] {
                if band.holds(q, pre.mean_free_path_m(q)) {
                    inside += 1;
                    assert_eq!(classes(pre, q), classes(&cold, p), "{p} then {q}");
                }
            }
        }
    }
    // The test has teeth: most pairs are far apart, many are inside.
    assert!(inside > 10_000, "{inside}");
    // No band for what is not a pressure.
    assert!(!cold.steady_band(f64::NAN).holds(1.0, 1.0));
}
