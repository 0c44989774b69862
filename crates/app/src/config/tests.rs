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
    assert_eq!(
        c.gauges[2]
            .model()
            .expect("model")
            .correct(1e-4)
            .sensitivity,
        Some(1.4)
    );
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
    // In the order of the file.
    assert_eq!(v.len(), 3, "{v:?}");
    assert!(
        v[0].message
            .contains("no thermal gauge sensitivity is known for Ar"),
        "{}",
        v[0].message
    );
    assert!(v[1].message.contains("used twice"), "{}", v[1].message);
    assert!(v[2].message.contains("defined twice"), "{}", v[2].message);
}

#[test]
fn every_unknown_key_and_wrong_type_is_reported_not_only_the_first() {
    let v = errors(
        "[chamber]\nnam = \"x\"\nvolum = \"3 L\"\n\n[camber]\nx = 1\n\n\
         [[gauge]]\nid = \"g\"\nkind = \"ionisation\"\nfoo = 1\n\n[display]\nhistory = 5\n",
    );
    let got: Vec<(Option<usize>, &str)> = v.iter().map(|e| (e.line, e.message.as_str())).collect();
    assert_eq!(got.len(), 6, "{got:#?}");
    assert!(
        got[0]
            .1
            .starts_with("unknown key `nam` in [chamber]; did you mean `name`?"),
        "{got:#?}"
    );
    assert!(
        got[1]
            .1
            .starts_with("unknown key `volum` in [chamber]; did you mean `volume`?"),
        "{got:#?}"
    );
    // An unknown table names itself.
    assert_eq!(got[2].0, Some(5));
    assert!(
        got[2]
            .1
            .starts_with("unknown section `[camber]`; did you mean `chamber`?"),
        "{got:#?}"
    );
    assert!(got[3].1.contains("did you mean `ionization`?"), "{got:#?}");
    assert!(
        got[4].1.starts_with("unknown key `foo` in [[gauge]]"),
        "{got:#?}"
    );
    assert_eq!(got[5].0, Some(14));
    assert!(got[5].1.contains("expected a duration"), "{got:#?}");
}

#[test]
fn syntax_errors_are_all_reported_with_the_problems_of_sound_tables() {
    let v = errors("[chamber\nname = 3\n[display]\nfoo = 1\n[physics]\nbar = = 2\n");
    let got: Vec<(Option<usize>, &str)> = v.iter().map(|e| (e.line, e.message.as_str())).collect();
    assert_eq!(got.len(), 4, "{got:#?}");
    assert_eq!(got[0].0, Some(1));
    assert!(got[0].1.contains("unclosed table"), "{got:#?}");
    assert_eq!(got[1].0, Some(4));
    assert!(
        got[1].1.starts_with("unknown key `foo` in [display]"),
        "{got:#?}"
    );
    assert_eq!((got[2].0, got[3].0), (Some(6), Some(6)), "{got:#?}");
}

#[test]
fn bytes_that_are_not_utf8_are_located() {
    let dir = std::env::temp_dir().join(format!("rarefy-cfg-utf8-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("dir");
    let path = dir.join("bad.toml");
    std::fs::write(&path, b"[chamber]\nname = \"K\xc3\xa4mmer \xff\"\n").expect("write");
    let e = match load(&path) {
        Ok(_) => panic!("not UTF-8 yet accepted"),
        Err(ConfigErrors(v)) => v,
    };
    assert_eq!(e.len(), 1);
    assert_eq!((e[0].line, e[0].column), (Some(2), Some(16)), "{e:?}");
    assert!(
        e[0].message.contains("byte 0xff at byte offset 26"),
        "{e:?}"
    );
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
    let s = c.gauges[0]
        .model()
        .expect("model")
        .correct(1e-4)
        .sensitivity
        .expect("factor");
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

/// Gauges and lengths for the alarm-form tests, then `alarm`.
fn with_alarm(alarm: &str) -> String {
    format!(
        "[[gauge]]\nid = \"chamber\"\nkind = \"capacitance\"\n\
         [[length]]\nname = \"source-to-substrate\"\nlength = \"0.12 m\"\n\
         [[length]]\nname = \"pumping line\"\nlength = \"0.04 m\"\n\
         [[alarm]]\nid = \"a\"\n{alarm}\n"
    )
}

/// The one rule of a config, and the same rule from `--alarm`.
fn config_and_cli_rule(alarm: &str, cli: &str) -> (crate::alarm::Rule, crate::alarm::Rule) {
    let c = parse(&with_alarm(alarm), Path::new("t.toml")).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(c.alarms.rules.len(), 1);
    let from_config = c.alarms.rules[0].rule.clone();
    let mut from_cli = crate::pipeline::start::cli_rules(&[cli.to_string()], &c, &[])
        .unwrap_or_else(|e| panic!("{e}"))
        .remove(0);
    // Ids and labels aside.
    from_cli.id = from_config.id.clone();
    from_cli.label = from_config.label.clone();
    (from_config, from_cli)
}

#[test]
fn alarm_text_keys_and_cli_build_the_same_rule() {
    let cases = [
        (
            "chamber mean free path above 10 x source-to-substrate for 5 s as warning",
            "gauge = \"chamber\"\nquantity = \"mean_free_path\"\nabove = \"10 x source-to-substrate\"\non_delay = \"5 s\"\nseverity = \"warning\"",
        ),
        (
            "chamber pressure above 2e-5 mbar deadband 20 % for 10 s clear after 30 s as trip latching",
            "gauge = \"chamber\"\nquantity = \"pressure\"\nabove = \"2e-5 mbar\"\ndeadband = \"20 %\"\non_delay = \"10 s\"\noff_delay = \"30 s\"\nseverity = \"trip\"\nlatching = true",
        ),
        (
            "chamber rate_of_change above 1 decade/min for 5 s clear after 20 s",
            "gauge = \"chamber\"\nquantity = \"rate_of_change\"\nabove = \"1 decade/min\"\non_delay = \"5 s\"\noff_delay = \"20 s\"",
        ),
        (
            "chamber regime(pumping line) crosses transitional/molecular as notice",
            "gauge = \"chamber\"\nquantity = \"regime\"\nlength = \"pumping line\"\ncrosses = \"transitional/molecular\"\nseverity = \"notice\"",
        ),
        (
            "chamber mean_free_path below 0.5 x pumping line deadband 0.1 decade",
            "gauge = \"chamber\"\nquantity = \"mean_free_path\"\nbelow = \"0.5 x pumping line\"\ndeadband = \"0.1 decade\"",
        ),
    ];
    for (text, keys) in cases {
        let (from_text, cli) = config_and_cli_rule(&format!("condition = \"{text}\""), text);
        let (from_keys, _) = config_and_cli_rule(keys, text);
        assert_eq!(from_text, cli, "{text}");
        assert_eq!(from_keys, cli, "{text}");
        assert_eq!(from_text.id, "a");
    }
    // `10 x <length>` is 10 times the length in all three.
    let (from_text, _) = config_and_cli_rule(
        "condition = \"chamber mean free path above 10 x source-to-substrate\"",
        "chamber mean free path above 10 x source-to-substrate",
    );
    assert!(
        matches!(from_text.test, crate::alarm::rule::Test::Above(t) if (t - 1.2).abs() < 1e-12),
        "{:?}",
        from_text.test
    );
}

#[test]
fn a_bad_alarm_value_reads_the_same_in_every_form() {
    let bad = [
        ("pressure", "above", "5 m"),
        ("mean_free_path", "above", "10 x throw"),
        ("mean_free_path", "below", "ten x pumping line"),
        ("regime(pumping line)", "crosses", "viscous/molecular"),
        ("vacuum_range", "enters", "very-high"),
    ];
    for (quantity, op, value) in bad {
        let text = format!("chamber {quantity} {op} {value}");
        let e = one_error(&with_alarm(&format!("condition = \"{text}\"")));
        assert_eq!((e.line, e.column), (Some(12), Some(13)), "{e}");
        let (name, length) = match quantity.split_once('(') {
            Some((n, l)) => (n, format!("\nlength = \"{}\"", l.trim_end_matches(')'))),
            None => (quantity, String::new()),
        };
        let keys =
            format!("gauge = \"chamber\"\nquantity = \"{name}\"{length}\n{op} = \"{value}\"");
        let k = one_error(&with_alarm(&keys));
        assert_eq!(e.message, k.message, "{text}");
        let base = parse(
            &with_alarm("condition = \"chamber pressure above 1 mbar\""),
            Path::new("t.toml"),
        )
        .unwrap_or_else(|e| panic!("{e}"));
        let cli = crate::pipeline::start::cli_rules(std::slice::from_ref(&text), &base, &[])
            .expect_err("bad value");
        assert_eq!(cli, format!("--alarm \"{text}\": {}", e.message));
    }
}

#[test]
fn alarm_text_form_problems_are_located() {
    // A key the text already says.
    let e = one_error(&with_alarm(
        "condition = \"chamber pressure above 1 mbar\"\nseverity = \"trip\"",
    ));
    assert_eq!(e.line, Some(13));
    assert!(
        e.message
            .contains("`severity` is said by its `condition` text"),
        "{e}"
    );
    // `named` must agree with the id.
    let e = one_error(&with_alarm(
        "condition = \"chamber pressure above 1 mbar named b\"",
    ));
    assert!(e.message.contains("the alarm's id is `a`"), "{e}");
    // An unknown gauge gets a suggestion, as with `gauge = …`.
    let e = one_error(&with_alarm("condition = \"chamer pressure above 1 mbar\""));
    assert!(e.message.contains("did you mean `chamber`?"), "{e}");
    // Neither a text nor a quantity.
    let e = one_error(&with_alarm("above = \"1 mbar\""));
    assert_eq!(e.line, Some(11));
    assert!(e.message.contains("give `condition`"), "{e}");
}

#[test]
fn the_sample_configs_commented_text_alarm_is_valid() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../config/rarefy.toml");
    let text = std::fs::read_to_string(&path).expect("sample config");
    let example = "# [[alarm]]\n# id = \"throw-short\"";
    let start = text.find(example).expect("the commented example");
    let end = start + text[start..].find("\n\n").expect("its end");
    let uncommented = text[start..end].replace("# ", "");
    let text = format!("{}{uncommented}{}", &text[..start], &text[end..]);
    let c = parse(&text, &path).unwrap_or_else(|e| panic!("{e}"));
    let rule = c
        .alarms
        .rules
        .iter()
        .find(|r| r.rule.id == "throw-short")
        .expect("the text alarm");
    assert_eq!(rule.rule.on_delay_s, 5.0);
}

#[test]
fn chamber_pressure_section_and_gauge_less_conditions() {
    let text = r#"
[[gauge]]
id = "cdg"
kind = "capacitance"

[[gauge]]
id = "ion"
kind = "ionization"

[chamber_pressure]
gauges = ["ion", "cdg"]
mean_free_path = "ion"

[[alarm]]
id = "high"
quantity = "pressure"
above = "1e-3 mbar"

[[gate]]
id = "ready"
conditions = ["pressure below 5e-6 mbar", "auto mean_free_path above 1 m"]
hold = "1 s"
"#;
    let c = parse(text, Path::new("t.toml")).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(c.chamber_pressure.order, ["ion", "cdg"]);
    assert_eq!(
        c.chamber_pressure
            .fixed
            .get("mean_free_path")
            .map(String::as_str),
        Some("ion")
    );
    // No gauge and no default gauge: the chamber pressure.
    assert_eq!(c.alarms.rules[0].rule.gauge, crate::alarm::AUTO);
    assert_eq!(c.alarms.gates[0].conditions[0].gauge, None);
    let e = one_error(
        "[[gauge]]\nid = \"cdg\"\nkind = \"capacitance\"\n[chamber_pressure]\ngauges = [\"cdg\", \"cdg\"]\n",
    );
    assert!(e.to_string().contains("listed twice"), "{e}");
}

#[test]
fn exposure_start_is_a_physics_setting() {
    use crate::engine::exposure::ExposureStart;
    let start = |text: &str| {
        parse(
            &format!("[physics]\nexposure_start = {text:?}\n"),
            Path::new("t.toml"),
        )
        .unwrap_or_else(|e| panic!("{e}"))
        .physics
        .exposure_start
    };
    // 1e-3 mbar = 0.1 Pa (definition of the mbar).
    assert_eq!(start("below 1e-3 mbar"), ExposureStart::Below(0.1));
    assert_eq!(start("reset"), ExposureStart::Reset);
    assert_eq!(start("first reading"), ExposureStart::FirstReading);
    let c = parse("", Path::new("t.toml")).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(c.physics.exposure_start, ExposureStart::Below(0.1));
    let e = one_error("[physics]\nexposure_start = \"when ready\"\n");
    assert_eq!(e.line, Some(2));
    assert!(e.message.contains("below 0.1 Pa"), "{}", e.message);
    let e = one_error("[physics]\nexposure_start = \"below 0 Pa\"\n");
    assert!(e.message.contains("greater than zero"), "{}", e.message);
}
