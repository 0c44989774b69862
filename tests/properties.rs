//! Property tests of the physics and the units.

use proptest::prelude::*;
use rarefy::engine::constants::{K_B, molecular_mass};
use rarefy::engine::mixture::Mixture;
use rarefy::engine::{Conditions, Model, Physics, derive};
use rarefy::gas::GasTable;
use rarefy::units::{
    self, LengthUnit, PressureUnit, TemperatureUnit, TimeUnit, UnitKind, VolumeUnit,
};

fn gas_ids() -> impl Strategy<Value = &'static str> {
    prop::sample::select(vec![
        "N2", "air", "O2", "Ar", "He", "H2", "H2O", "CO2", "CO", "Ne", "Kr", "Xe", "CH4",
    ])
}

fn pure(id: &str) -> Mixture {
    Mixture::pure(GasTable::builtin().get(id).expect("built-in").clone())
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

fn models() -> impl Strategy<Value = Model> {
    prop_oneof![Just(Model::HardSphere), Just(Model::Sutherland)]
}

proptest! {
    #[test]
    fn mean_free_path_times_pressure_is_constant(
        gas in gas_ids(), t in 200.0f64..800.0, lp1 in -10.0f64..5.0, lp2 in -10.0f64..5.0,
        model in models(),
    ) {
        let physics = Physics { model, ..Physics::default() };
        let (p1, p2) = (10f64.powf(lp1), 10f64.powf(lp2));
        let a = derive(&Conditions::new(p1, t), &pure(gas), &[], &physics);
        let b = derive(&Conditions::new(p2, t), &pure(gas), &[], &physics);
        prop_assert!(rel(a.mean_free_path_m * p1, b.mean_free_path_m * p2) < 1e-12);
    }

    #[test]
    fn impingement_is_proportional_to_pressure(
        gas in gas_ids(), t in 200.0f64..800.0, lp in -10.0f64..5.0, k in 1.0f64..1000.0,
    ) {
        let p = 10f64.powf(lp);
        let a = derive(&Conditions::new(p, t), &pure(gas), &[], &Physics::default());
        let b = derive(&Conditions::new(p * k, t), &pure(gas), &[], &Physics::default());
        prop_assert!(rel(b.impingement_per_m2_s, k * a.impingement_per_m2_s) < 1e-12);
        // And n v̄ / 4 = Φ at every state.
        prop_assert!(rel(a.number_density_per_m3 * a.mean_speed_m_per_s / 4.0, a.impingement_per_m2_s) < 1e-12);
    }

    #[test]
    fn a_gas_split_in_two_equals_the_pure_gas(
        gas in gas_ids(), x in 0.01f64..0.99, t in 250.0f64..600.0, lp in -9.0f64..4.0,
    ) {
        // One species written as two identical species with fractions x and
        // 1 - x must give exactly the pure gas.
        let table = GasTable::builtin();
        let g = table.get(gas).expect("built-in").clone();
        let mut twin = g.clone();
        twin.id = format!("{gas}-twin");
        let mix = Mixture::new(vec![(g, x), (twin, 1.0 - x)]).expect("valid");
        let p = 10f64.powf(lp);
        let a = derive(&Conditions::new(p, t), &mix, &[], &Physics::default());
        let b = derive(&Conditions::new(p, t), &pure(gas), &[], &Physics::default());
        prop_assert!(rel(a.mean_free_path_m, b.mean_free_path_m) < 1e-12);
        prop_assert!(rel(a.impingement_per_m2_s, b.impingement_per_m2_s) < 1e-12);
        prop_assert!(rel(a.monolayer_time_s, b.monolayer_time_s) < 1e-12);
        prop_assert!(rel(a.mean_speed_m_per_s, b.mean_speed_m_per_s) < 1e-12);
        prop_assert!(rel(a.rms_speed_m_per_s, b.rms_speed_m_per_s) < 1e-12);
        let one = Mixture::new(vec![(table.get(gas).expect("built-in").clone(), 1.0)]).expect("valid");
        let c = derive(&Conditions::new(p, t), &one, &[], &Physics::default());
        prop_assert_eq!(c, b);
    }

    #[test]
    fn a_trace_species_follows_the_trace_formula(
        trace in gas_ids(), carrier in gas_ids(), t in 250.0f64..600.0, lp in -9.0f64..4.0,
    ) {
        prop_assume!(trace != carrier);
        // A trace species i in carrier c: λ_i = 1 / (n_c π d_ic² √(1 + m_i/m_c)).
        let table = GasTable::builtin();
        let (gi, gc) = (table.get(trace).expect("i").clone(), table.get(carrier).expect("c").clone());
        let x = 1e-9;
        let mix = Mixture::new(vec![(gi.clone(), x), (gc.clone(), 1.0 - x)]).expect("valid");
        let p = 10f64.powf(lp);
        let physics = Physics { model: Model::HardSphere, ..Physics::default() };
        let d = derive(&Conditions::new(p, t), &mix, &[], &physics);
        let n_c = p * (1.0 - x) / (K_B * t);
        let d_ic = 0.5 * (gi.diameter_m + gc.diameter_m);
        let m_ratio = molecular_mass(gi.molar_mass_g_mol) / molecular_mass(gc.molar_mass_g_mol);
        let expect = 1.0 / (n_c * std::f64::consts::PI * d_ic * d_ic * (1.0 + m_ratio).sqrt());
        prop_assert!(rel(d.species[0].mean_free_path_m, expect) < 1e-6);
    }

    #[test]
    fn pressure_units_round_trip(v in 1e-12f64..1e6, i in 0usize..PressureUnit::ALL.len()) {
        let u = PressureUnit::ALL[i];
        prop_assert!(rel(u.value_of(u.to_si(v)), v) < 1e-14);
        let text = format!("{v:e} {}", u.symbol());
        let q = units::parse::<PressureUnit>(&text).expect("parses");
        prop_assert!(rel(q.si, u.to_si(v)) < 1e-15);
        prop_assert_eq!(q.unit, u);
        let shown = units::format_pressure(q.si, u);
        let back = units::parse::<PressureUnit>(&shown).expect("printed form parses");
        prop_assert!(rel(back.si, q.si) < 5e-3, "{} -> {}", text, shown);
    }

    #[test]
    fn other_units_round_trip(v in 1e-6f64..1e6) {
        for &u in LengthUnit::ALL {
            prop_assert!(rel(u.value_of(u.to_si(v)), v) < 1e-14);
        }
        for &u in VolumeUnit::ALL {
            prop_assert!(rel(u.value_of(u.to_si(v)), v) < 1e-14);
        }
        for &u in TimeUnit::ALL {
            prop_assert!(rel(u.value_of(u.to_si(v)), v) < 1e-14);
        }
        for &u in TemperatureUnit::ALL {
            prop_assert!((u.value_of(u.to_si(v)) - v).abs() < 1e-9 * v.max(1.0));
        }
    }

    #[test]
    fn unit_parser_never_panics(s in "\\PC{0,24}") {
        let _ = units::parse::<PressureUnit>(&s);
        let _ = units::parse::<TemperatureUnit>(&s);
        let _ = units::parse_duration(&s);
    }

    #[test]
    fn mixture_parser_never_panics(s in "[A-Za-z0-9=,. -]{0,30}") {
        let _ = Mixture::parse(&s, &GasTable::builtin());
    }
}

mod decoders {
    use proptest::prelude::*;
    use rarefy::parse::logline::AutoDecoder;
    use rarefy::parse::plain::PlainDecoder;
    use rarefy::parse::template::{Template, TemplateDecoder, TemplateSpec};
    use rarefy::parse::{Decoder, Framed, LineSplitter, decode_framed};
    use rarefy::sample::{ChannelUnit, SourceEvent};
    use rarefy::units::PressureUnit;

    const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);

    fn decoders() -> Vec<Box<dyn Decoder>> {
        let spec = TemplateSpec {
            pattern: r"^(?P<a_status>\d),(?P<a>[^,]*),(?P<time>[^,]*)$".into(),
            unit: Some(MBAR),
            time_format: Some(rarefy::parse::template::TimeFormat::Rfc3339),
            ..TemplateSpec::default()
        };
        vec![
            Box::new(PlainDecoder::new("p", MBAR)),
            Box::new(AutoDecoder::new(PlainDecoder::new("p", MBAR))),
            Box::new(TemplateDecoder::new(vec![
                Template::new(&spec).expect("template"),
            ])),
        ]
    }

    proptest! {
        /// Whatever bytes arrive, in whatever pieces: no panic, every line
        /// accounted for (samples or an unparsed event), and no control
        /// character in any text that could reach a terminal.
        #[test]
        fn any_bytes_in_any_pieces(bytes in proptest::collection::vec(any::<u8>(), 0..600), cut in 1usize..64) {
            for mut d in decoders() {
                let mut s = LineSplitter::new();
                let mut framed: Vec<Framed> = Vec::new();
                for chunk in bytes.chunks(cut) {
                    framed.extend(s.push(chunk));
                }
                framed.extend(s.finish());
                for f in framed {
                    for e in decode_framed(d.as_mut(), f, chrono::DateTime::<chrono::Utc>::UNIX_EPOCH, "p") {
                        if let SourceEvent::Unparsed { text, .. } = e {
                            prop_assert!(!text.chars().any(|c| c.is_control()), "{text:?}");
                        }
                    }
                }
            }
        }

        /// Splitting never depends on where the reads end.
        #[test]
        fn framing_is_independent_of_read_sizes(bytes in proptest::collection::vec(any::<u8>(), 0..400), a in 1usize..50, b in 1usize..50) {
            let run = |n: usize| {
                let mut s = LineSplitter::new();
                let mut out: Vec<Framed> = bytes.chunks(n).flat_map(|c| s.push(c)).collect();
                out.extend(s.finish());
                out
            };
            prop_assert_eq!(run(a), run(b));
        }
    }
}
