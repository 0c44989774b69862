//! Every event rarefy writes follows `docs/event.schema.json`: the alarm and
//! gate events of a recorded run (its event log), and every kind of operator
//! action. The schema is checked by a small interpreter of the keywords it
//! uses; a keyword it does not know fails the test rather than pass unseen.

use std::path::Path;
use std::process::Command;

use chrono::{DateTime, Utc};
use rarefy::alarm::{Actor, Monitor};
use rarefy::config;
use rarefy::logfile::open_log;
use rarefy::pipeline::{Nowhere, Operation, Pipeline};
use rarefy::sample::SourceEvent;
use serde_json::Value;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn schema() -> Value {
    let text = std::fs::read_to_string(root().join("docs/event.schema.json")).expect("schema");
    serde_json::from_str(&text).expect("schema is JSON")
}

/// Checks `v` against `s`; returns what is wrong.
fn check(v: &Value, s: &Value, at: &str, errs: &mut Vec<String>) {
    let Some(obj) = s.as_object() else {
        errs.push(format!("{at}: schema is not an object"));
        return;
    };
    for (k, rule) in obj {
        match k.as_str() {
            "$schema" | "$id" | "title" | "description" | "format" => {
                if k == "format" && rule == "date-time" {
                    let ok = v
                        .as_str()
                        .is_some_and(|t| DateTime::parse_from_rfc3339(t).is_ok());
                    if !ok {
                        errs.push(format!("{at}: not an RFC 3339 time: {v}"));
                    }
                }
            }
            "type" => {
                let ok = match rule.as_str() {
                    Some("object") => v.is_object(),
                    Some("string") => v.is_string(),
                    Some("number") => v.is_number(),
                    _ => false,
                };
                if !ok {
                    errs.push(format!("{at}: {v} is not of type {rule}"));
                }
            }
            "const" => {
                if v != rule {
                    errs.push(format!("{at}: {v} is not {rule}"));
                }
            }
            "enum" => {
                if !rule.as_array().is_some_and(|a| a.contains(v)) {
                    errs.push(format!("{at}: {v} is not one of {rule}"));
                }
            }
            "required" => {
                for r in rule.as_array().into_iter().flatten() {
                    let name = r.as_str().unwrap_or_default();
                    if v.get(name).is_none() {
                        errs.push(format!("{at}: `{name}` missing"));
                    }
                }
            }
            "additionalProperties" => {
                let known = obj.get("properties").and_then(Value::as_object);
                if rule == &Value::Bool(false)
                    && let (Some(m), Some(known)) = (v.as_object(), known)
                {
                    for key in m.keys().filter(|key| !known.contains_key(*key)) {
                        errs.push(format!("{at}: unknown field `{key}`"));
                    }
                }
            }
            "properties" => {
                if let (Some(m), Some(props)) = (v.as_object(), rule.as_object()) {
                    for (name, sub) in props {
                        if let Some(x) = m.get(name) {
                            check(x, sub, &format!("{at}.{name}"), errs);
                        }
                    }
                }
            }
            "allOf" => {
                for (i, part) in rule.as_array().into_iter().flatten().enumerate() {
                    check(v, part, &format!("{at}/allOf[{i}]"), errs);
                }
            }
            "if" => {
                let mut cond = Vec::new();
                check(v, rule, at, &mut cond);
                if cond.is_empty()
                    && let Some(then) = obj.get("then")
                {
                    check(v, then, &format!("{at}/then"), errs);
                }
            }
            "then" => {}
            other => errs.push(format!("{at}: the test does not know keyword `{other}`")),
        }
    }
}

fn errors(v: &Value) -> Vec<String> {
    let mut errs = Vec::new();
    check(v, &schema(), "event", &mut errs);
    errs
}

fn assert_valid(line: &str) {
    let v: Value = serde_json::from_str(line).unwrap_or_else(|e| panic!("{e}: {line}"));
    let errs = errors(&v);
    assert!(errs.is_empty(), "{line}\n{errs:#?}");
}

#[test]
fn a_recorded_runs_event_log_follows_the_schema() {
    let out = std::env::temp_dir().join(format!("rarefy-schema-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&out);
    let o = Command::new(env!("CARGO_BIN_EXE_rarefy"))
        .args(["record", "--config", "config/demo.toml", "--source"])
        .arg(format!("file://{}/sample-logs/demo.csv", root().display()))
        .arg("--out")
        .arg(&out)
        .current_dir(root())
        .output()
        .expect("run");
    assert_eq!(
        o.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let mut n = 0;
    for entry in std::fs::read_dir(&out).expect("out") {
        let path = entry.expect("entry").path();
        if path.extension().is_some_and(|e| e == "jsonl") {
            for line in std::fs::read_to_string(&path).expect("read").lines() {
                assert_valid(line);
                n += 1;
            }
        }
    }
    assert!(n > 10, "{n} events");
    let _ = std::fs::remove_dir_all(&out);
}

#[test]
fn operator_actions_follow_the_schema() {
    let cfg = config::load(&root().join("config/demo.toml")).expect("config");
    let mut p = Pipeline::new(Monitor::new(cfg.monitor_setup(Vec::new())));
    let until = DateTime::parse_from_rfc3339("2026-11-09T09:32:00Z")
        .expect("time")
        .with_timezone(&Utc);
    for row in open_log(&root().join("sample-logs/demo.csv"), None).expect("log") {
        let row = row.expect("row");
        if row.time > until {
            break;
        }
        p.feed(&SourceEvent::Samples(row.samples), None, &mut Nowhere);
    }
    let who = Actor {
        user: "op-plover".into(),
        wall_time: Some(Utc::now()),
    };
    let now = p.monitor().now().expect("data time");
    let mut lines = Vec::new();
    for op in [
        Operation::AcknowledgeAll,
        Operation::Shelve("fast-rise".into(), 600.0),
        Operation::Unshelve("fast-rise".into()),
        Operation::SetThreshold("ion-high".into(), 1e-2),
        Operation::SetHold("deposition-ready".into(), 90.0),
        Operation::ResetExposure,
    ] {
        let events = p
            .operate(&op, &who, now, &mut Nowhere)
            .unwrap_or_else(|e| panic!("{op:?}: {e}"));
        assert!(!events.is_empty(), "{op:?} made no event");
        lines.extend(events.iter().map(|e| e.to_json()));
    }
    for l in &lines {
        assert_valid(l);
        assert!(l.contains("\"user\":\"op-plover\""), "{l}");
    }
}

#[test]
fn the_schema_check_catches_a_bad_event() {
    let good = r#"{"v":1,"time":"2026-11-09T09:31:11.000Z","kind":"gate","from":"not-ready","to":"ready","id":"g","label":"G","text":"G: ready"}"#;
    assert_valid(good);
    for (bad, why) in [
        (good.replace("\"v\":1", "\"v\":2"), "is not 1"),
        (
            good.replace("\"to\":\"ready\"", "\"to\":\"nearly\""),
            "is not one of",
        ),
        (good.replace("09:31:11.000Z", "half past nine"), "RFC 3339"),
        (
            good.replace("\"text\":\"G: ready\"", "\"text\":\"x\",\"colour\":\"red\""),
            "unknown field",
        ),
        (
            good.replace("\"kind\":\"gate\"", "\"kind\":\"setting\""),
            "`operation` missing",
        ),
    ] {
        let v: Value = serde_json::from_str(&bad).expect("json");
        let errs = errors(&v);
        assert!(errs.iter().any(|e| e.contains(why)), "{bad}: {errs:?}");
    }
}
