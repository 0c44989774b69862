use super::*;

fn errors(text: &str) -> Vec<ConfigError> {
    match parse(text, Path::new("t.toml")) {
        Ok(_) => panic!("expected an error for:\n{text}"),
        Err(ConfigErrors(v)) => v,
    }
}

fn one_error(text: &str) -> ConfigError {
    let mut v = errors(text);
    assert_eq!(v.len(), 1, "{v:?}");
    v.remove(0)
}

#[test]
fn the_sample_config_is_valid() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../config/rarefy.toml");
    let c = load(&path).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(c.gauges.len(), 3);
    assert_eq!(c.lengths.len(), 3);
    assert!(c.gases.get("SF6").is_ok());
    assert_eq!(c.chamber.volume_m3, Some(0.085));
    assert_eq!(c.gauges[2].mixture.label(), "Ar");
    // The argon ion gauge is corrected with the CRC sensitivity 1.4.
    assert_eq!(c.gauges[2].model.correct(1e-4).sensitivity, Some(1.4));
}

#[test]
fn empty_file_gives_defaults() {
    let c = parse("", Path::new("t.toml")).expect("empty is valid");
    assert_eq!(c.mixture.label(), "N2");
    assert_eq!(c.physics, Physics::default());
}

#[test]
fn unknown_key_is_located_with_a_suggestion() {
    let e = one_error("[chamber]\nname = \"x\"\nvolum = \"3 L\"\n");
    assert_eq!((e.line, e.column), (Some(3), Some(1)));
    assert!(
        e.message.contains("unknown key `volum` in [chamber]"),
        "{}",
        e.message
    );
    assert!(
        e.message.contains("did you mean `volume`?"),
        "{}",
        e.message
    );
    let e = one_error("[physic]\nmodel = \"sutherland\"\n");
    assert!(
        e.message.contains("did you mean `physics`?"),
        "{}",
        e.message
    );
}

#[test]
fn bad_values_are_located() {
    let e = one_error("[[length]]\nname = \"a\"\nlength = \"0.3 mbar\"\n");
    assert_eq!(e.line, Some(3));
    assert!(
        e.message.contains("unknown length unit \"mbar\""),
        "{}",
        e.message
    );
    let e = one_error("[chamber]\nvolume = 85\n");
    assert!(
        e.message.contains("expected a volume with its unit"),
        "{}",
        e.message
    );
    let e = one_error("[physics]\nmodel = \"hardsphere\"\n");
    assert!(
        e.message.contains("did you mean `hard-sphere`?"),
        "{}",
        e.message
    );
    let e = one_error("[physics]\niso_edition = 2001\n");
    assert_eq!((e.line, e.column), (Some(2), Some(15)));
    assert!(e.message.contains("expected 1981 or 2019"), "{}", e.message);
    let e = one_error("[physics]\nviscous_below = 0.9\nmolecular_above = 0.5\n");
    assert!(e.message.contains("must be smaller"), "{}", e.message);
    let e = one_error("[physics]\nsticking = 1.5\n");
    assert!(e.message.contains("at most 1"), "{}", e.message);
    let e = one_error("[gas]\nmix = \"H2=0.5,N2=0.2\"\n");
    assert_eq!(e.line, Some(2));
    assert!(e.message.contains("sum to 0.7"), "{}", e.message);
    let e = one_error("[display]\npressure_unit = \"mbr\"\n");
    assert!(e.message.contains("did you mean \"mbar\""), "{}", e.message);
    let e = one_error("[chamber]\ntemperature = \"-300 C\"\n");
    assert!(e.message.contains("absolute zero"), "{}", e.message);
}

#[test]
fn several_problems_are_reported_together() {
    let v = errors(
        "[[gauge]]\nid = \"a\"\nkind = \"thermal\"\ngas = \"Ar\"\n\
         [[gauge]]\nid = \"a\"\nkind = \"capacitance\"\n\
         [[length]]\nname = \"x\"\nlength = \"1 m\"\n[[length]]\nname = \"x\"\nlength = \"2 m\"\n",
    );
    assert_eq!(v.len(), 3, "{v:?}");
    assert!(v[0].message.contains("defined twice"), "{}", v[0].message);
    assert!(
        v[1].message
            .contains("no thermal gauge sensitivity is known for Ar"),
        "{}",
        v[1].message
    );
    assert!(v[2].message.contains("used twice"), "{}", v[2].message);
}

#[test]
fn gauge_problems() {
    let e = one_error("[[gauge]]\nid = \"a\"\nkind = \"ionisation\"\n");
    assert!(
        e.message.contains("did you mean `ionization`?"),
        "{}",
        e.message
    );
    let e = one_error("[[gauge]]\nid = \"a b\"\nkind = \"thermal\"\n");
    assert!(e.message.contains("gauge id"), "{}", e.message);
    let e = one_error(
        "[[gauge]]\nid = \"a\"\nkind = \"thermal\"\n\
         calibration = { unit = \"mbar\", points = [[1.0, 1.0], [0.5, 2.0]] }\n",
    );
    assert!(e.message.contains("increase strictly"), "{}", e.message);
    let e = one_error(
        "[[gauge]]\nid = \"a\"\nkind = \"ionization\"\nrange = [\"1 mbar\", \"1e-3 mbar\"]\n",
    );
    assert!(e.message.contains("low < high"), "{}", e.message);
    let e = one_error("[[gauge]]\nid = \"a\"\nkind = \"ionization\"\nsensitivity = -2.0\n");
    assert!(e.message.contains("positive"), "{}", e.message);
    let e = one_error("[[gauge]]\nid = \"a\"\nkind = \"ionization\"\ncalibration_gas = \"Qx\"\n");
    assert!(e.message.contains("unknown gas"), "{}", e.message);
}

#[test]
fn gauge_calibrated_for_another_gas_is_rescaled() {
    // An ion gauge calibrated for Ar reading in Ar reads true pressure.
    let c = parse(
        "[gas]\nspecies = \"Ar\"\n[[gauge]]\nid = \"a\"\nkind = \"ionization\"\ncalibration_gas = \"Ar\"\n",
        Path::new("t.toml"),
    )
    .expect("valid");
    let s = c.gauges[0].model.correct(1e-4).sensitivity.expect("factor");
    assert!((s - 1.0).abs() < 1e-12, "{s}");
}

#[test]
fn custom_gas_is_usable_in_the_mix() {
    let c = parse(
        "[gas]\nmix = \"Zz=0.5,N2=0.5\"\n[[gas.custom]]\nid = \"Zz\"\nmolar_mass = 50.0\ndiameter = \"0.4 nm\"\n",
        Path::new("t.toml"),
    )
    .expect("valid");
    assert_eq!(c.mixture.components().len(), 2);
    let e = one_error("[[gas.custom]]\nid = \"N2\"\nmolar_mass = 50.0\ndiameter = \"0.4 nm\"\n");
    assert!(e.message.contains("already defined"), "{}", e.message);
    let e = one_error("[[gas.custom]]\nid = \"Q\"\nmolar_mass = -5.0\ndiameter = \"0.4 nm\"\n");
    assert!(
        e.message.contains("molar mass must be positive"),
        "{}",
        e.message
    );
}

#[test]
fn toml_syntax_errors_are_located() {
    let e = one_error("[chamber\nname = 1\n");
    assert_eq!(e.line, Some(1));
}
