//! The real binary: outputs, exit codes, and bad input.

use std::path::Path;
use std::process::{Command, Output};

fn rarefy(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("run rarefy")
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn json(args: &[&str]) -> serde_json::Value {
    let o = rarefy(args);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    serde_json::from_slice(&o.stdout).expect("valid JSON")
}

fn num(v: &serde_json::Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} missing in {v}"))
}

#[test]
fn calc_json_has_the_documented_shape() {
    // The shape and numbers of the Step 1 issue's example (N2, 1e-4 Pa, 295 K).
    let v = json(&[
        "calc",
        "--pressure",
        "1e-4 Pa",
        "--temperature",
        "295 K",
        "--gas",
        "N2",
        "--length",
        "chamber=0.3 m",
        "--json",
    ]);
    let i = &v["inputs"];
    assert_eq!(num(i, "pressure_pa"), 1e-4);
    assert_eq!(num(i, "indicated_pa"), 1e-4);
    assert_eq!(num(i, "temperature_k"), 295.0);
    assert_eq!(i["temperature_assumed"], false);
    assert_eq!(i["gas"], "N2");
    assert_eq!(i["model"], "sutherland");
    let close = |key: &str, expect: f64, rel: f64| {
        let got = num(&v, key);
        assert!(
            ((got - expect) / expect).abs() < rel,
            "{key}: {got} vs {expect}"
        );
    };
    close("number_density_per_m3", 2.455e16, 1e-3);
    close("mean_speed_m_per_s", 472.2, 1e-3);
    close("most_probable_speed_m_per_s", 418.5, 1e-3);
    close("rms_speed_m_per_s", 512.5, 1e-3);
    close("mean_free_path_m", 66.6, 5e-3);
    close("impingement_per_m2_s", 2.898e18, 1e-3);
    close("monolayer_time_s", 3.45, 2e-3);
    assert_eq!(v["vacuum_range"], "high");
    let s = &v["species"][0];
    assert_eq!(s["gas"], "N2");
    assert_eq!(num(s, "fraction"), 1.0);
    assert_eq!(num(s, "partial_pressure_pa"), 1e-4);
    for key in [
        "mean_free_path_m",
        "impingement_per_m2_s",
        "monolayer_time_s",
    ] {
        assert_eq!(s[key], v[key], "{key}");
    }
    let l = &v["lengths"][0];
    assert_eq!(l["name"], "chamber");
    assert_eq!(num(l, "length_m"), 0.3);
    assert!((num(l, "knudsen") - 222.0).abs() < 1.5);
    assert_eq!(l["regime"], "molecular");
    assert_eq!(v["warnings"], serde_json::json!([]));
}

#[test]
fn calc_assumes_22_c_and_says_so() {
    let v = json(&["calc", "-p", "1e-6 mbar", "--json"]);
    assert_eq!(v["inputs"]["temperature_assumed"], true);
    assert!((num(&v["inputs"], "temperature_k") - 295.15).abs() < 1e-9);
    let o = rarefy(&["calc", "-p", "1e-6 mbar"]);
    assert!(stdout(&o).contains("22.0 C (assumed)"), "{}", stdout(&o));
}

#[test]
fn calc_corrects_an_ion_gauge_reading_for_argon() {
    // Source: CRC Handbook sec. 15, S(Ar) = 1.4: 1.0e-6 Pa indicated -> 7.143e-7 Pa.
    let v = json(&[
        "calc",
        "-p",
        "1e-6 Pa",
        "--gas",
        "Ar",
        "--gauge",
        "ionization",
        "--json",
    ]);
    assert!((num(&v["inputs"], "pressure_pa") - 7.143e-7).abs() < 1e-10);
    assert_eq!(num(&v["inputs"], "indicated_pa"), 1e-6);
    assert_eq!(num(&v["inputs"], "sensitivity"), 1.4);
}

#[test]
fn calc_mixture_totals() {
    let v = json(&[
        "calc",
        "-p",
        "1e-4 Pa",
        "--mix",
        "H2=0.6,H2O=0.3,N2=0.1",
        "--json",
    ]);
    let species = v["species"].as_array().expect("species");
    assert_eq!(species.len(), 3);
    let sum: f64 = species.iter().map(|s| num(s, "impingement_per_m2_s")).sum();
    assert!((sum / num(&v, "impingement_per_m2_s") - 1.0).abs() < 1e-12);
    let weighted: f64 = species
        .iter()
        .map(|s| num(s, "fraction") * num(s, "mean_free_path_m"))
        .sum();
    assert!((weighted / num(&v, "mean_free_path_m") - 1.0).abs() < 1e-12);
}

#[test]
fn calc_reports_out_of_model_inputs_as_warnings() {
    let v = json(&["calc", "-p", "1 Pa", "-t", "77 K", "--json"]);
    let codes: Vec<&str> = v["warnings"]
        .as_array()
        .expect("warnings")
        .iter()
        .filter_map(|w| w["code"].as_str())
        .collect();
    assert!(codes.contains(&"temperature-outside-fit"), "{codes:?}");
    let v = json(&["calc", "-p", "10 mbar", "--gauge", "ionization", "--json"]);
    assert_eq!(v["warnings"][0]["code"], "gauge-out-of-range");
}

#[test]
fn calc_help_explains_mixture_means() {
    let o = rarefy(&["calc", "--help"]);
    let text = stdout(&o);
    assert!(text.contains("mole-fraction-weighted mean"), "{text}");
    let o = rarefy(&["--help"]);
    assert!(stdout(&o).contains("not a safety interlock"));
}

#[test]
fn bad_arguments_exit_2_naming_the_argument() {
    let cases: &[(&[&str], &str)] = &[
        (&["calc", "-p", "1e-6 mbr"], "unknown pressure unit \"mbr\""),
        (&["calc", "-p", "1e-6"], "has no unit"),
        (&["calc", "-p", "0 Pa"], "greater than zero"),
        (&["calc", "-p", "-3 Pa"], "greater than zero"),
        (&["calc", "-p", "NaN Pa"], "not a finite number"),
        (&["calc", "-p", "lots"], "does not start with a number"),
        (&["calc", "-p", "1 Pa", "-t", "-300 C"], "absolute zero"),
        (
            &["calc", "-p", "1 Pa", "-t", "300 Q"],
            "unknown temperature unit",
        ),
        (
            &["calc", "-p", "1 Pa", "--gas", "Nx"],
            "did you mean \"N2\"",
        ),
        (
            &["calc", "-p", "1 Pa", "--mix", "H2=0.5,N2=0.6"],
            "sum to 1.1",
        ),
        (
            &["calc", "-p", "1 Pa", "--mix", "H2=0.5,N2"],
            "gas=fraction",
        ),
        (
            &["calc", "-p", "1 Pa", "--length", "x=0 m"],
            "greater than zero",
        ),
        (
            &["calc", "-p", "1 Pa", "--length", "x=3 furlong"],
            "unknown length unit",
        ),
        (
            &[
                "calc", "-p", "1 Pa", "--length", "gap=1 mm", "--length", "gap=2 mm",
            ],
            "the name `gap` is given twice",
        ),
        (
            &[
                "calc", "-p", "1 Pa", "--length", "1 mm", "--length", "L1=2 mm",
            ],
            "the name `L1` is given twice",
        ),
        (&["calc", "-p", "1 Pa", "--sticking", "2"], "at most 1"),
        (
            &["calc", "-p", "1 Pa", "--sites", "-1"],
            "greater than zero",
        ),
        (&["calc", "-p", "1 Pa", "--model", "soft"], "hard-sphere"),
        (&["calc", "-p", "1 Pa", "--gauge", "pirani"], "capacitance"),
        (
            &["calc", "-p", "1 Pa", "-g", "Ar", "--gauge", "thermal"],
            "--sensitivity",
        ),
        (
            &["calc", "-p", "1 Pa", "--gas", "N2", "--mix", "N2=1"],
            "cannot be used with",
        ),
        (
            &["calc", "-p", "1 Pa", "--diameter", "0 nm"],
            "greater than zero",
        ),
        (&["calc"], "--pressure"),
        (
            &["config", "check", "does/not/exist.toml"],
            "cannot read the file",
        ),
        (&["frobnicate"], "unrecognized subcommand"),
    ];
    for (args, expect) in cases {
        let o = rarefy(args);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
        assert!(
            err.contains(expect),
            "{args:?}: expected {expect:?} in {err}"
        );
        assert!(!err.contains("panicked"), "{args:?}: {err}");
    }
}

#[test]
fn invalid_configs_are_located() {
    // (file, location, what the message says)
    let cases = [
        ("unknown_key.toml", ":3:1:", "did you mean `volume`?"),
        (
            "length_wrong_unit.toml",
            ":3:10:",
            "unknown length unit \"mbar\"",
        ),
        ("mix_bad_sum.toml", ":2:7:", "sum to 0.7"),
        ("bad_edition.toml", ":2:15:", "expected 1981 or 2019"),
        (
            "gauge_kind_typo.toml",
            ":3:8:",
            "did you mean `ionization`?",
        ),
        (
            "thermal_without_factor.toml",
            ":4:7:",
            "no thermal gauge sensitivity is known for Ar",
        ),
        ("syntax.toml", ":1:", "invalid"),
        ("negative_history.toml", ":2:11:", "must not be negative"),
        (
            "calibration_not_monotonic.toml",
            ":4:15:",
            "increase strictly",
        ),
        ("source_bad_scheme.toml", ":2:7:", "did you mean `serial:`?"),
        (
            "source_bad_poll_escape.toml",
            ":3:8:",
            "bad escape at character 4",
        ),
        (
            "template_bad_regex.toml",
            ":5:11:",
            "bad pattern: unclosed group",
        ),
        (
            "template_missing_unit.toml",
            ":4:1:",
            "no unit for channel `wall`",
        ),
        (
            "template_unknown_unit.toml",
            ":6:36:",
            "unknown unit \"ppm\"; expected a pressure or temperature unit",
        ),
        (
            "template_bad_status_word.toml",
            ":7:19:",
            "did you mean `over-range`?",
        ),
        (
            "record_negative_buffer.toml",
            ":2:15:",
            "positive whole number",
        ),
        (
            "alarm_unknown_quantity.toml",
            ":4:12:",
            "did you mean `pressure`?",
        ),
        (
            "alarm_missing_length.toml",
            ":9:10:",
            "no length named `throw`",
        ),
        ("alarm_wrong_unit_kind.toml", ":5:9:", "expected a length"),
        (
            "alarm_negative_delay.toml",
            ":6:12:",
            "must not be negative",
        ),
        (
            "alarm_two_tests.toml",
            ":2:6:",
            "exactly one of above, below",
        ),
        (
            "alarm_unknown_gauge.toml",
            ":7:9:",
            "did you mean `chamber`?",
        ),
        ("gate_bad_condition.toml", ":3:15:", "is not of the form"),
        ("gas_step_bad_condition.toml", ":7:9:", "gas step `argon`: "),
        ("gas_step_unknown_gas.toml", ":7:11:", "Argn"),
        ("gas_step_bad_window.toml", ":5:9:", "is not a data time"),
        (
            "alarm_enable_deadband.toml",
            ":4:10:",
            "an enabling condition takes no deadband",
        ),
        (
            "alarm_crosses_not_neighbours.toml",
            ":16:11:",
            "not neighbours",
        ),
        (
            "alarm_condition_and_keys.toml",
            ":4:12:",
            "`on_delay` is said by its `condition` text",
        ),
        (
            "alarm_condition_bad_value.toml",
            ":7:13:",
            "no length named `thorw` is configured",
        ),
        (
            "gauge_named_auto.toml",
            ":2:6:",
            "`auto` names the chamber pressure",
        ),
        (
            "chamber_pressure_unknown_gauge.toml",
            ":6:18:",
            "did you mean `ion`?",
        ),
        (
            "chamber_pressure_unknown_key.toml",
            ":2:1:",
            "did you mean `mean_free_path`?",
        ),
        ("several_problems.toml", ":3:1:", "did you mean `volume`?"),
        (
            "several_problems.toml",
            ":5:2:",
            "unknown section `[camber]`",
        ),
        ("several_problems.toml", ":9:11:", "expected a duration"),
        (
            "not_utf8.toml",
            ":2:10:",
            "byte 0xe4 at byte offset 19 is not UTF-8",
        ),
    ];
    let dir = Path::new("tests/invalid_configs");
    let mut seen = std::collections::BTreeSet::new();
    for (file, at, expect) in cases {
        let path = dir.join(file);
        let o = rarefy(&["config", "check", path.to_str().expect("utf-8 path")]);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{file}: {err}");
        assert!(
            err.contains(&format!("{}{at}", path.display())),
            "{file}: {err}"
        );
        assert!(err.contains(expect), "{file}: expected {expect:?} in {err}");
        seen.insert(file);
    }
    let on_disk = std::fs::read_dir(Path::new(env!("CARGO_MANIFEST_DIR")).join(dir))
        .expect("dir")
        .count();
    assert_eq!(
        seen.len(),
        on_disk,
        "every file in tests/invalid_configs has a case"
    );
}

#[test]
fn sample_config_checks_and_feeds_calc() {
    let o = rarefy(&["config", "check", "config/rarefy.toml"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(stdout(&o).contains("KV-7"));
    let v = json(&[
        "calc",
        "-p",
        "1e-5 mbar",
        "--config",
        "config/rarefy.toml",
        "--gas",
        "SF6",
        "--json",
    ]);
    assert_eq!(v["inputs"]["gas"], "SF6");
    assert_eq!(v["lengths"].as_array().map(Vec::len), Some(3));
}

#[test]
fn gases_lists_every_source() {
    let o = rarefy(&["gases"]);
    let text = stdout(&o);
    for word in [
        "CRC Handbook",
        "CoolProp 8.0.0",
        "thermo 0.6.1",
        "chemicals 1.5.2",
    ] {
        assert!(text.contains(word), "{word} missing");
    }
    let v = json(&["gases", "--json"]);
    let gases = v.as_array().expect("array");
    assert_eq!(gases.len(), 13);
    for g in gases {
        assert!(
            g["sources"]["diameter"]
                .as_str()
                .is_some_and(|s| !s.is_empty())
        );
    }
}

fn warning_codes(v: &serde_json::Value) -> Vec<String> {
    v["warnings"]
        .as_array()
        .expect("warnings")
        .iter()
        .filter_map(|w| w["code"].as_str().map(String::from))
        .collect()
}

#[test]
fn calc_combined_gauge_needs_only_the_reading_elements_factor() {
    // Ar: ionization factor 1.4 (CRC Handbook sec. 15), no thermal factor.
    let args = [
        "calc",
        "-p",
        "1e-6 Pa",
        "--gas",
        "Ar",
        "--gauge",
        "combined",
        "--sensitivity",
        "1.4",
        "--json",
    ];
    let v = json(&args);
    // REFERENCES.md (a, b): 1.0e-6 Pa indicated in pure Ar -> 7.143e-7 Pa.
    let p = num(&v["inputs"], "pressure_pa");
    assert!((p - 7.143e-7).abs() / 7.143e-7 < 1e-4, "{p}");
    // Above the crossover the thermal element reads and needs its factor.
    let o = rarefy(&["calc", "-p", "10 Pa", "--gas", "Ar", "--gauge", "combined"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("--thermal-sensitivity"),
        "{}",
        stderr(&o)
    );
    let v = json(&[
        "calc",
        "-p",
        "10 Pa",
        "--gas",
        "Ar",
        "--gauge",
        "combined",
        "--thermal-sensitivity",
        "1.6",
        "--json",
    ]);
    assert!((num(&v["inputs"], "pressure_pa") - 10.0 / 1.6).abs() < 1e-12);
    // --sensitivity is the ionization element's; above the crossover it is
    // not applied, and the output says so.
    let v = json(&[
        "calc",
        "-p",
        "10 Pa",
        "--gauge",
        "combined",
        "--sensitivity",
        "1.4",
        "--json",
    ]);
    assert_eq!(num(&v["inputs"], "pressure_pa"), 10.0);
    assert!(
        warning_codes(&v).contains(&"sensitivity-not-applied".to_string()),
        "{v}"
    );
    let o = rarefy(&[
        "calc",
        "-p",
        "10 Pa",
        "--gauge",
        "thermal",
        "--thermal-sensitivity",
        "2",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
}

#[test]
fn calc_vacuum_range_at_atmosphere_and_at_limits() {
    let range = |p: &str| json(&["calc", "-p", p, "--json"])["vacuum_range"].clone();
    assert_eq!(range("1 atm"), "atmospheric");
    assert_eq!(range("2e5 Pa"), "above-atmospheric");
    // ISO 3529-1:2019 (REFERENCES.md, c from memory): extreme-high is below
    // 1e-9 Pa; 1e-11 mbar is 1e-9 Pa by definition of the mbar.
    assert_eq!(range("1e-9 Pa"), "ultra-high");
    assert_eq!(range("1e-11 mbar"), "ultra-high");
    assert_eq!(range("9e-12 mbar"), "extreme-high");
}

#[test]
fn calc_warns_of_water_above_its_vapour_pressure() {
    // Saturation pressure of water at 22 C: 2645 Pa (Wagner & Pruss 1993;
    // checked against chemicals 1.5.2 and CoolProp 8.0.0 in engine/vapour.rs).
    let args = ["calc", "-p", "1 atm", "--gas", "H2O", "-t", "22 C"];
    let v = json(&[&args[..], &["--json"]].concat());
    assert!(
        warning_codes(&v).contains(&"above-saturation".to_string()),
        "{v}"
    );
    let o = rarefy(&args);
    assert!(
        stdout(&o).contains("above its saturation vapour pressure"),
        "{}",
        stdout(&o)
    );
    let v = json(&[
        "calc", "-p", "1 kPa", "--gas", "H2O", "-t", "22 C", "--json",
    ]);
    assert!(!warning_codes(&v).contains(&"above-saturation".to_string()));
    let v = json(&[
        "calc",
        "-p",
        "1 Pa",
        "-t",
        "500 K",
        "--model",
        "hard-sphere",
        "--json",
    ]);
    assert!(
        warning_codes(&v).contains(&"hard-sphere-far-from-reference".to_string()),
        "{v}"
    );
    let o = rarefy(&["calc", "--help"]);
    assert!(stdout(&o).contains("mode of the"));
    assert!(stdout(&o).contains("--thermal-sensitivity"));
}

/// Whether text holds anything a terminal would act on.
fn has_terminal_controls(text: &str) -> bool {
    text.chars().any(|c| {
        matches!(c as u32, 0..=0x08 | 0x0b..=0x1f | 0x7f..=0x9f | 0x202a..=0x202e | 0x2066..=0x2069)
    })
}

#[test]
fn escapes_in_arguments_config_text_and_names_never_reach_the_terminal() {
    let dir = std::env::temp_dir().join(format!("rarefy-cli-esc-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("dir");
    // An argument echoed in a usage error.
    let o = rarefy(&["calc", "--pressure", "1e-6 \u{1b}[2J\u{202e}mbar"]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert!(!has_terminal_controls(&err), "{err:?}");
    assert!(err.contains("\\u{202e}mbar"), "{err:?}");
    // Configuration text echoed by `config check` (summary and errors).
    let cfg = dir.join("esc.toml");
    std::fs::write(&cfg, "[chamber]\nname = \"rig \\u001b]0;title\\u0007\"\n").expect("write");
    let o = rarefy(&["config", "check", cfg.to_str().expect("utf-8")]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let out = stdout(&o);
    assert!(!has_terminal_controls(&out), "{out:?}");
    assert!(out.contains("rig \\x1b]0;title\\x07"), "{out:?}");
    std::fs::write(&cfg, "[chamber]\nname = \"x\"\n\u{1b}[31m = 1\n").expect("write");
    let o = rarefy(&["config", "check", cfg.to_str().expect("utf-8")]);
    assert_eq!(o.status.code(), Some(2));
    assert!(!has_terminal_controls(&stderr(&o)), "{:?}", stderr(&o));
    // A path in a source URI, echoed in a runtime message.
    let o = rarefy(&[
        "record",
        "--source",
        "file:///nonexistent/\u{1b}[2Jrun.csv",
        "--out",
        dir.to_str().expect("utf-8"),
    ]);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(!has_terminal_controls(&err), "{err:?}");
    assert!(!has_terminal_controls(&stdout(&o)), "{:?}", stdout(&o));
    // A custom gas's name in the `gases` table and its JSON.
    std::fs::write(
        &cfg,
        "[[gas.custom]]\nid = \"X\\u009b1m\"\nmolar_mass = \"40 g/mol\"\ndiameter = \"3.6e-10 m\"\n",
    )
    .expect("write");
    for json in [false, true] {
        let mut args = vec!["gases", "--config", cfg.to_str().expect("utf-8")];
        if json {
            args.push("--json");
        }
        let o = rarefy(&args);
        let text = format!("{}{}", stdout(&o), stderr(&o));
        assert!(!has_terminal_controls(&text), "{text:?}");
        if json && o.status.code() == Some(0) {
            let _: serde_json::Value = serde_json::from_slice(&o.stdout).expect("still JSON");
        }
    }
}

#[test]
fn one_off_alarms_on_unknown_gauges_or_with_taken_ids_are_refused() {
    let dir = std::env::temp_dir().join(format!("rarefy-cli-alarm-{}", std::process::id()));
    let out = dir.to_str().expect("utf-8");
    let o = rarefy(&[
        "record",
        "--config",
        "config/demo.toml",
        "--source",
        "stdin:",
        "--alarm",
        "chambr pressure above 1 mbar",
        "--out",
        out,
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("no gauge or channel `chambr`; did you mean `chamber`?"),
        "{}",
        stderr(&o)
    );
    let o = rarefy(&[
        "record",
        "--config",
        "config/demo.toml",
        "--source",
        "stdin:",
        "--alarm",
        "chamber pressure above 1 mbar named twin",
        "--alarm",
        "chamber pressure above 2 mbar named twin",
        "--out",
        out,
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("the id `twin` is already used"),
        "{}",
        stderr(&o)
    );
    let o = rarefy(&["record", "--source", "stdin:?unit=mbr", "--out", out]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("did you mean `mbar`?"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn lines_of_only_delimiters_are_counted_unparsed() {
    let dir = std::env::temp_dir().join(format!("rarefy-cli-blank-{}", std::process::id()));
    let mut child = Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .args(["record", "--source", "stdin:", "--out"])
        .arg(&dir)
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("spawn");
    {
        use std::io::Write;
        let mut stdin = child.stdin.take().expect("stdin");
        stdin.write_all(b",,,\n  \t \n;\n1e-6\n").expect("write");
    }
    let o = child.wait_with_output().expect("wait");
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("1 samples in 1 rows written; 3 unparsed lines"),
        "{}",
        stderr(&o)
    );
}
