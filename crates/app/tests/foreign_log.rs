//! Reading other loggers' CSV through a `[log]` section: the example
//! export, every config problem located, zones, daylight saving, headers,
//! bad cells and encodings.

use std::path::Path;

use chrono::{DateTime, Utc};
use proptest::prelude::*;
use rarefy_app::config::{ConfigError, ConfigErrors};
use rarefy_app::logfile::open_log;
use rarefy_core::log::foreign::*;
use rarefy_core::log::{LogError, LogFormat, Row, open_log_from};
use rarefy_core::sample::{ChannelUnit, Fault, Status};
use rarefy_core::units::PressureUnit;

const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);

fn utc(text: &str) -> DateTime<Utc> {
    DateTime::parse_from_rfc3339(text)
        .map(|t| t.with_timezone(&Utc))
        .unwrap_or_else(|e| panic!("{text}: {e}"))
}

fn spec(toml: &str) -> ForeignLogSpec {
    rarefy_app::config::parse(toml, Path::new("t.toml"))
        .unwrap_or_else(|e| panic!("{e}"))
        .log
        .expect("a [log] section")
}

fn config_errors(toml: &str) -> Vec<ConfigError> {
    match rarefy_app::config::parse(toml, Path::new("t.toml")) {
        Ok(_) => panic!("expected an error for:\n{toml}"),
        Err(ConfigErrors(v)) => v,
    }
}

fn config_error(toml: &str) -> ConfigError {
    let mut v = config_errors(toml);
    assert_eq!(v.len(), 1, "{v:?}");
    v.remove(0)
}

/// A `[log]` section for `;`-separated files with a `Time` column in UTC and
/// one column `P` read as channel `p`; `extra` is added to `[log]`, `column`
/// to the column.
fn section(extra: &str, column: &str) -> String {
    format!(
        "[log]\ndelimiter = \";\"\n{extra}\n\
         time = {{ column = \"Time\", format = \"%Y-%m-%d %H:%M:%S\", timezone = \"UTC\" }}\n\
         [[log.column]]\nname = \"P\"\nchannel = \"p\"\nunit = \"mbar\"\n{column}\n"
    )
}

fn read_all(spec: &ForeignLogSpec, text: &[u8]) -> Vec<Result<Row, LogError>> {
    ForeignReader::new(text, "x.csv", spec)
        .unwrap_or_else(|e| panic!("{e}"))
        .collect()
}

fn open_error(spec: &ForeignLogSpec, text: &[u8]) -> LogError {
    match ForeignReader::new(text, "x.csv", spec) {
        Ok(_) => panic!("expected an error"),
        Err(e) => e,
    }
}

fn one_error(spec: &ForeignLogSpec, text: &[u8]) -> LogError {
    let items = read_all(spec, text);
    assert_eq!(items.len(), 1, "{items:?}");
    match items.into_iter().next() {
        Some(Err(e)) => e,
        other => panic!("expected an error, got {other:?}"),
    }
}

fn example_dir() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../../sample-logs/foreign")
}

#[test]
fn the_example_export_reads_completely() {
    let dir = example_dir();
    let config = rarefy_app::config::load(&dir.join("marrowgate-ml3.toml"))
        .unwrap_or_else(|e| panic!("{e}"));
    let spec = config.log.expect("[log]");
    assert_eq!(spec.delimiter, ';');
    assert!(spec.decimal_comma);
    assert_eq!(spec.time.zone, Some(Zone::Named(chrono_tz::Europe::Vienna)));
    let mut log =
        open_log(&dir.join("marrowgate-ml3.csv"), Some(&spec)).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(log.format(), LogFormat::Foreign);
    let channels: Vec<String> = log.channels().into_iter().map(|c| c.id).collect();
    assert_eq!(channels, ["rough", "chamber", "foreline"]);
    assert_eq!(log.meta().extra.len(), 3);
    assert!(log.meta().extra[1].1.contains("Brindlewood Coating Lab"));
    let rows: Vec<Row> = log
        .by_ref()
        .map(|r| r.unwrap_or_else(|e| panic!("{e}")))
        .collect();
    assert_eq!(rows.len(), 226);
    assert_eq!(log.times_went_back(), 0);
    // Every row from 02:05 CEST to 02:59:30 CET has a local time that occurs
    // twice that night (daylight-saving time ends at 03:00 CEST).
    let in_repeated_hour = rows
        .iter()
        .filter(|r| r.time >= utc("2026-10-25T00:00:00Z") && r.time < utc("2026-10-25T02:00:00Z"))
        .count();
    assert_eq!(log.ambiguous_times(), in_repeated_hour as u64);
    assert!(in_repeated_hour > 200);

    // First row: 25.10.2026 02:05:00 local summer time = 00:05 UTC.
    let first = &rows[0];
    assert_eq!(first.line, 5);
    assert_eq!(first.time, utc("2026-10-25T00:05:00Z"));
    let s = &first.samples;
    assert_eq!(s.len(), 3);
    assert_eq!(
        (s[0].channel.as_str(), s[0].value(), s[0].unit),
        ("rough", Some(1030.0), MBAR)
    );
    assert_eq!(
        (s[1].channel.as_str(), s[1].status()),
        ("chamber", Status::SensorOff)
    );
    assert_eq!(s[2].value(), Some(820.0));
    // Times are 30 s apart, straight through the change of clocks, except
    // for the gap when the logger lost its gauges.
    let mut gaps = Vec::new();
    for w in rows.windows(2) {
        let step = (w[1].time - w[0].time).num_seconds();
        if step != 30 {
            gaps.push((w[0].time, step));
        }
    }
    assert_eq!(gaps, [(utc("2026-10-25T01:05:00Z"), 480)]);
    // The second 02:00:00 (winter time) is 01:00 UTC.
    let second_two = rows
        .iter()
        .find(|r| r.time == utc("2026-10-25T01:00:00Z"))
        .expect("row at 01:00 UTC");
    assert_eq!(second_two.line, 5 + 110);
    let chamber = second_two
        .samples
        .iter()
        .find(|s| s.channel == "chamber")
        .expect("chamber");
    assert_eq!(chamber.value(), Some(9.693e-6));
    let rough = second_two
        .samples
        .iter()
        .find(|s| s.channel == "rough")
        .expect("rough");
    assert_eq!((rough.status(), rough.value()), (Status::UnderRange, None));
    // The last row, 03:05:00 winter time.
    let last = rows.last().expect("rows");
    assert_eq!(last.time, utc("2026-10-25T02:05:00Z"));
    // The discharge fault and the gaps after it.
    let fault = rows
        .iter()
        .find(|r| r.time == utc("2026-10-25T01:35:00Z"))
        .expect("fault row");
    assert_eq!(fault.samples[1].status(), Status::SensorError);
    let after = rows
        .iter()
        .find(|r| r.time == utc("2026-10-25T01:35:30Z"))
        .expect("row after");
    assert!(after.samples.iter().all(|s| s.channel != "chamber"));
}

#[test]
fn the_example_config_checks_with_the_binary_config_loader() {
    let c = rarefy_app::config::load(&example_dir().join("marrowgate-ml3.toml"))
        .unwrap_or_else(|e| panic!("{e}"));
    let spec = c.log.expect("[log]");
    assert_eq!(spec.columns.len(), 3);
    assert_eq!(spec.columns[2].column, ColumnRef::Index(3));
    assert_eq!(
        spec.columns[1].status,
        [
            ("FAIL".to_string(), Fault::SensorError),
            ("LO".to_string(), Fault::UnderRange),
            ("OFF".to_string(), Fault::SensorOff),
        ]
    );
}

#[test]
fn config_problems_are_located_and_specific() {
    let base = section("", "");
    assert!(rarefy_app::config::parse(&base, Path::new("t.toml")).is_ok());
    // (TOML, line, message part)
    let cases: Vec<(String, usize, &str)> = vec![
        (
            base.replace("\";\"", "\"::\""),
            2,
            "unknown delimiter \"::\"; expected \",\", \";\"",
        ),
        (
            section("delimiter = \",\"\ndecimal_comma = true", "")
                .replace("delimiter = \";\"\n", ""),
            3,
            "decimal_comma = true needs a delimiter other than \",\"",
        ),
        (
            base.replace("\"UTC\"", "\"Europe/Viena\""),
            4,
            "unknown time zone \"Europe/Viena\"; did you mean \"Europe/Vienna\"?",
        ),
        (
            base.replace("\"UTC\"", "\"vienna\""),
            4,
            "did you mean \"Europe/Vienna\"?",
        ),
        (
            base.replace("\"UTC\"", "\"+25:00\""),
            4,
            "bad UTC offset \"+25:00\"",
        ),
        (
            base.replace(", timezone = \"UTC\"", ""),
            4,
            "has no UTC offset, so give the logger's `timezone`",
        ),
        (
            base.replace("%Y-%m-%d %H:%M:%S", "rfc3339"),
            4,
            "`timezone` has no effect",
        ),
        (
            base.replace("%Y-%m-%d %H:%M:%S", "%Y-%m-%d %H:%M:%S%z"),
            4,
            "`timezone` has no effect",
        ),
        (
            base.replace("%Y-%m-%d %H:%M:%S", "%Y-%m-%d %H:%Q"),
            4,
            "bad strftime pattern \"%Y-%m-%d %H:%Q\"",
        ),
        (
            base.replace("%Y-%m-%d %H:%M:%S", "%d.%m.%Y"),
            4,
            "does not give a full date and time",
        ),
        (
            base.replace("%Y-%m-%d %H:%M:%S", "%s"),
            4,
            "use format = \"epoch-s\"",
        ),
        (
            base.replace("%Y-%m-%d %H:%M:%S", "epoch-sec"),
            4,
            "unknown time format \"epoch-sec\"; did you mean \"epoch-s\"?",
        ),
        (
            section("", "status = { \"OR\" = \"overrange\" }"),
            9,
            "unknown status \"overrange\"; did you mean \"over-range\"?",
        ),
        (
            section("", "status = { \"OR\" = \"ok\" }"),
            9,
            "cannot mean `ok`",
        ),
        (
            section("", "status = { \"1,0\" = \"stale\" }"),
            9,
            "reads as a number",
        ),
        (
            base.replace("name = \"P\"", "name = \"Time\""),
            6,
            "column \"Time\" is already read as the time",
        ),
        (
            base.replace("name = \"P\"", "name = \"P\"\nindex = 1"),
            7,
            "give either `name`/`column` or `index`, not both",
        ),
        (
            base.replace("name = \"P\"\n", ""),
            6,
            "say which column it is",
        ),
        (
            base.replace("\"mbar\"", "\"mbr\""),
            8,
            "unknown unit \"mbr\"; did you mean \"mbar\"?",
        ),
        (
            base.replace("channel = \"p\"", "channel = \"p 1\""),
            7,
            "a channel id must be",
        ),
        (
            format!("{base}[[log.column]]\nindex = 2\nchannel = \"p\"\nunit = \"C\"\n"),
            12,
            "channel `p` is read from two columns",
        ),
        (
            format!("{base}[[log.column]]\nname = \"P\"\nchannel = \"q\"\nunit = \"C\"\n"),
            11,
            "column \"P\" is already read as column for channel `p`",
        ),
        (
            section("encoding = \"latin-2\"", ""),
            3,
            "unknown encoding \"latin-2\"; did you mean \"latin-1\"?",
        ),
        (
            section("delimitr = \";\"", ""),
            3,
            "unknown key `delimitr` in [log]; did you mean `delimiter`?",
        ),
        (
            section("skip_rows = -1", ""),
            3,
            "skip_rows must be 0 or more",
        ),
        (
            base.replace("name = \"P\"", "index = -1"),
            6,
            "index -1 must be 0 or more",
        ),
        (
            base.replace("format =", "fromat ="),
            4,
            "did you mean `format`?",
        ),
        (
            base.replace("unit = \"mbar\"", "unit = \"mbar\"\nchanel = \"x\""),
            9,
            "did you mean `channel`?",
        ),
        (
            "[log]\ndelimiter = \";\"\ntime = { index = 0, format = \"epoch-s\" }\n".to_string(),
            3,
            "reads no gauge column",
        ),
        (
            "[log]\ntime = { index = 0 }\n".to_string(),
            2,
            "missing field `format`",
        ),
    ];
    for (toml, line, expect) in &cases {
        let e = config_error(toml);
        assert_eq!(e.line, Some(*line), "{toml}\n{e}");
        assert!(
            e.message.contains(expect),
            "{toml}\nexpected {expect:?} in {e}"
        );
    }
    let v = config_errors(&section("header = false", ""));
    assert_eq!(v.len(), 2, "{v:?}");
    assert!(
        v.iter().all(|e| e
            .message
            .contains("with header = false there are no column names")),
        "{v:?}"
    );
    assert_eq!((v[0].line, v[1].line), (Some(4), Some(6)));
    // Several problems are reported together.
    let v = config_errors(
        &section(
            "decimal_comma = true\nencoding = \"ebcdic\"",
            "status = { \"X\" = \"bad\" }",
        )
        .replace("\";\"", "\",\""),
    );
    assert_eq!(v.len(), 3, "{v:?}");
}

#[test]
fn zones_offsets_and_formats() {
    // A fixed offset.
    let s = spec(&section("", "").replace("\"UTC\"", "\"-05:30\""));
    let items = read_all(&s, b"Time;P\n2026-01-01 00:00:00;1\n");
    assert_eq!(
        items[0].as_ref().map(|r| r.time).ok(),
        Some(utc("2026-01-01T05:30:00Z"))
    );
    // RFC 3339 with its own offset.
    let s = spec(&section("", "").replace("%Y-%m-%d %H:%M:%S\", timezone = \"UTC\"", "rfc3339\""));
    let items = read_all(&s, b"Time;P\n2026-01-01T01:00:00.125+01:00;1\n");
    assert_eq!(
        items[0].as_ref().map(|r| r.time).ok(),
        Some(utc("2026-01-01T00:00:00.125Z"))
    );
    // A pattern with an offset.
    let s = spec(&section("", "").replace("%S\", timezone = \"UTC\"", "%S %z\""));
    let items = read_all(&s, b"Time;P\n2026-01-01 01:00:00 +0100;1\n");
    assert_eq!(
        items[0].as_ref().map(|r| r.time).ok(),
        Some(utc("2026-01-01T00:00:00Z"))
    );
    // Epoch seconds (with a fraction and a decimal comma) and milliseconds.
    let s = spec(
        &section("decimal_comma = true", "")
            .replace("%Y-%m-%d %H:%M:%S\", timezone = \"UTC\"", "epoch-s\""),
    );
    let items = read_all(&s, b"Time;P\n1767225600,25;1,5\n-1;2\nx;3\n");
    let r = items[0].as_ref().expect("row");
    assert_eq!(r.time, utc("2026-01-01T00:00:00.250Z"));
    assert_eq!(r.samples[0].value(), Some(1.5));
    assert_eq!(
        items[1].as_ref().map(|r| r.time).ok(),
        Some(utc("1969-12-31T23:59:59Z"))
    );
    let e = items[2].as_ref().expect_err("bad epoch");
    assert!(
        e.to_string()
            .starts_with("x.csv:4:1: time \"x\" in column \"Time\" is not a number of seconds"),
        "{e}"
    );
    let s = spec(&section("", "").replace("%Y-%m-%d %H:%M:%S\", timezone = \"UTC\"", "epoch-ms\""));
    let items = read_all(&s, b"Time;P\n1767225600123;1\n");
    assert_eq!(
        items[0].as_ref().map(|r| r.time).ok(),
        Some(utc("2026-01-01T00:00:00.123Z"))
    );
}

#[test]
fn daylight_saving_changes() {
    let s = spec(&section("", "").replace("\"UTC\"", "\"Europe/Vienna\""));
    // Spring: 02:30 does not exist on 2026-03-29.
    let e = one_error(&s, b"Time;P\n2026-03-29 02:30:00;1\n");
    assert!(
        e.to_string().starts_with(
            "x.csv:2:1: time \"2026-03-29 02:30:00\" in column \"Time\" local time 2026-03-29 02:30:00 does not exist in Europe/Vienna"
        ),
        "{e}"
    );
    // Autumn: a lone 02:30 on 2026-10-25 is the earlier instant (summer time).
    let items = read_all(&s, b"Time;P\n2026-10-25 02:30:00;1\n");
    assert_eq!(
        items[0].as_ref().map(|r| r.time).ok(),
        Some(utc("2026-10-25T00:30:00Z"))
    );
    // Rows written straight through the change stay in order.
    let items = read_all(
        &s,
        b"Time;P\n2026-10-25 02:50:00;1\n2026-10-25 02:10:00;1\n2026-10-25 02:50:00;1\n2026-10-25 03:10:00;1\n",
    );
    let times: Vec<DateTime<Utc>> = items
        .iter()
        .map(|r| r.as_ref().map(|r| r.time).unwrap_or_else(|e| panic!("{e}")))
        .collect();
    assert_eq!(
        times,
        [
            utc("2026-10-25T00:50:00Z"),
            utc("2026-10-25T01:10:00Z"),
            utc("2026-10-25T01:50:00Z"),
            utc("2026-10-25T02:10:00Z"),
        ]
    );
    // A clock jump back that no reading of the repeated hour explains is
    // flagged, not an error.
    let mut r = ForeignReader::new(
        &b"Time;P\n2026-10-25 05:00:00;1\n2026-10-25 02:10:00;1\n"[..],
        "x.csv",
        &s,
    )
    .expect("header");
    let rows: Vec<Row> = r
        .by_ref()
        .map(|x| x.unwrap_or_else(|e| panic!("{e}")))
        .collect();
    assert!(rows[1].time_went_back);
    assert_eq!((r.times_went_back(), r.ambiguous_times()), (1, 1));
}

#[test]
fn header_problems_are_located() {
    let s = spec(&section("skip_rows = 1", ""));
    let e = open_error(&s, b"Logger X\nTime;P1;Temp\n1;2\n");
    assert_eq!(
        e.to_string(),
        "x.csv:2: no column \"P\" in the column-name row; did you mean \"P1\"? \
         (its cells: \"Time\", \"P1\", \"Temp\"); check the name or skip_rows"
    );
    let e = open_error(&s, b"Logger X\nTime;P;P\n");
    assert_eq!(e.column, Some(3));
    assert!(
        e.message
            .contains("appears twice in the column-name row (cells 2 and 3)"),
        "{e}"
    );
    let e = open_error(&s, b"Logger X\n\nTime;P\n");
    assert!(
        e.to_string().starts_with(
            "x.csv:2: line 2 should be the column-name row but is blank; check skip_rows (now 1)"
        ),
        "{e}"
    );
    let e = open_error(&s, b"");
    assert!(
        e.message.contains("only 0 lines, fewer than skip_rows = 1"),
        "{e}"
    );
    let e = open_error(&s, b"Logger X\n");
    assert!(
        e.message
            .contains("ends before its column-name row (line 2"),
        "{e}"
    );
    let e = open_error(&s, b"Logger X\nTime;\"P\n");
    assert!(
        e.to_string()
            .starts_with("x.csv:2:2: quoted cell is not closed"),
        "{e}"
    );
    let e = open_error(&s, b"Logger X\nTime;P\xff\n");
    assert!(e.to_string().starts_with("x.csv:2:2: invalid UTF-8"), "{e}");
    let s = spec(&section("", "").replace("name = \"P\"", "index = 5"));
    let e = open_error(&s, b"Time;P\n");
    assert!(
        e.message.contains(
            "index 5 is past the last column: the column-name row has 2 cells (index 0 to 1)"
        ),
        "{e}"
    );
    let s = spec(&format!(
        "{}[[log.column]]\nindex = 1\nchannel = \"q\"\nunit = \"C\"\n",
        section("", "")
    ));
    let e = open_error(&s, b"Time;P\n");
    assert!(
        e.message
            .contains("column \"P\" (cell 2) is named twice in [log]"),
        "{e}"
    );
    // Names match case-insensitively when no cell matches exactly.
    let s = spec(&section("", ""));
    let items = read_all(&s, b" time ; p \n2026-01-01 00:00:00;1\n");
    assert!(items[0].is_ok(), "{items:?}");
}

#[test]
fn bad_cells_name_their_column() {
    let s = spec(&section(
        "decimal_comma = true",
        "status = { \"OR\" = \"over-range\", \"--\" = \"sensor-off\" }",
    ));
    let text = b"Time;P;Note\n\
        2026-01-01 00:00:00;1,5E-03;a\n\
        2026-01-01 00:00:01;1.5E-03;b\n\
        2026-01-01 00:00:02;x;c\n\
        2026-01-01 00:00:03;or;d\n\
        2026-01-01 00:00:04;--\n\
        2026-01-01 00:00:05;NaN\n\
        2026-01-01 00:00:06\n\
        2026-01-01 00:00:99;1\n\
        01.01.2026 00:00:08;1\n\
        ;1\n\
        ;;;\n\
        2026-01-01 00:00:09;;\n";
    let items = read_all(&s, text);
    let shown: Vec<String> = items
        .iter()
        .map(|r| match r {
            Ok(row) => format!(
                "ok {} {:?}",
                row.line,
                row.samples.first().map(|s| (s.value(), s.status()))
            ),
            Err(e) => e.to_string(),
        })
        .collect();
    let expect = [
        "ok 2 Some((Some(0.0015), Ok))",
        "x.csv:3:2: column \"P\": cell \"1.5E-03\" has a '.', but the [log] section says decimal_comma = true",
        "x.csv:4:2: column \"P\": cell \"x\" is not a number or a status word of this column (\"--\", \"OR\")",
        "ok 5 Some((None, OverRange))",
        "ok 6 Some((None, SensorOff))",
        "x.csv:7:2: column \"P\": cell \"NaN\" is not a finite number",
        "x.csv:8:2: row has 1 cells; column \"P\" is cell 2",
        "x.csv:9:1: time \"2026-01-01 00:00:99\" in column \"Time\" does not match format \"%Y-%m-%d %H:%M:%S\"",
        "x.csv:10:1: time \"01.01.2026 00:00:08\" in column \"Time\" does not match",
        "x.csv:11:1: time \"\" in column \"Time\" is empty",
        "ok 13 None",
    ];
    assert_eq!(shown.len(), expect.len(), "{shown:#?}");
    for (got, want) in shown.iter().zip(expect) {
        assert!(got.starts_with(want), "got {got}\nwant {want}");
    }
    // A decimal comma without decimal_comma = true gets a hint.
    let s = spec(&section("", ""));
    let e = one_error(&s, b"Time;P\n2026-01-01 00:00:00;1,5\n");
    assert!(
        e.message.contains("(set decimal_comma = true in [log]"),
        "{e}"
    );
    let e = one_error(&s, b"Time;P\n2026-01-01 00:00:00;OVR\n");
    assert!(
        e.message
            .contains("no status words are set for this column"),
        "{e}"
    );
    // The row with a bad cell is kept, that cell as `unparsed`.
    let row = e.row.expect("row");
    assert_eq!(row.samples[0].status(), Status::Unparsed);
    // A pressure not above zero is kept as read, with a located note.
    let s = spec(&section("decimal_comma = true", ""));
    let e = one_error(&s, b"Time;P\n2026-01-01 00:00:00;-1,5E-03\n");
    assert_eq!(
        e.to_string(),
        "x.csv:2:2: pressure \"-1,5E-03\" mbar is not above zero: kept as read, \
         without a true pressure or kinetics (a gauge's zero drift?)"
    );
    let row = e.row.expect("row");
    assert_eq!(row.samples[0].value(), Some(-1.5e-3));
    assert_eq!(row.samples[0].status(), Status::Ok);
}

#[test]
fn encodings_line_endings_and_headerless_files() {
    let s = spec(
        &section("encoding = \"latin-1\"", "")
            .replace("name = \"P\"", "name = \"P \u{b0}C\"")
            .replace("\"mbar\"", "\"C\""),
    );
    let items = read_all(
        &s,
        b"Time;P \xb0C\r\n2026-01-01 00:00:00;21.5\r\n2026-01-01 00:00:01;22",
    );
    assert_eq!(items.len(), 2);
    assert_eq!(
        items[1].as_ref().map(|r| r.samples[0].value()).ok(),
        Some(Some(22.0))
    );
    let toml = "[log]\nheader = false\ndelimiter = \"tab\"\n\
                time = { index = 0, format = \"epoch-s\" }\n\
                [[log.column]]\nindex = 2\nchannel = \"p\"\nunit = \"Torr\"\n";
    let s = spec(toml);
    assert_eq!(s.delimiter, '\t');
    let items = read_all(&s, b"0\tignored\t7.5e-7\n\n60\tx\t7e-7\n");
    let rows: Vec<Row> = items
        .into_iter()
        .map(|r| r.unwrap_or_else(|e| panic!("{e}")))
        .collect();
    assert_eq!(rows.len(), 2);
    assert_eq!(rows[1].time, utc("1970-01-01T00:01:00Z"));
    assert_eq!(
        rows[1].samples[0].unit,
        ChannelUnit::Pressure(PressureUnit::Torr)
    );
}

#[test]
fn open_log_sniffs_the_format() {
    let v1 = b"# rarefy log v1\ntime,a [mbar]\n2026-01-01T00:00:00Z,1\n";
    let mut log = open_log_from(&v1[..], "run.csv", None).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(log.format(), LogFormat::V1);
    assert_eq!(log.columns().len(), 1);
    assert!(log.next().is_some_and(|r| r.is_ok()));
    // A v1 log stays v1 with a [log] section given.
    let s = spec(&section("", ""));
    let log = open_log_from(&v1[..], "run.csv", Some(&s)).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(log.format(), LogFormat::V1);
    assert!(log.warnings().is_empty());
    // A foreign log needs the section.
    let other = b"Time;P\n2026-01-01 00:00:00;1\n";
    let e = match open_log_from(&other[..], "other.csv", None) {
        Ok(_) => panic!("read without a spec"),
        Err(e) => e,
    };
    assert_eq!(
        e.to_string(),
        "other.csv:1: not a rarefy log v1 (first line \"Time;P\"); give a config with a [log] section to read other loggers' CSV"
    );
    let log = open_log_from(&other[..], "other.csv", Some(&s)).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(log.format(), LogFormat::Foreign);
    assert_eq!(log.count(), 1);
    let e = match open_log_from(&b""[..], "empty.csv", None) {
        Ok(_) => panic!("read an empty file"),
        Err(e) => e,
    };
    assert!(e.message.contains("the file is empty"), "{e}");
    // A v2 log is refused as such, spec or not.
    let e = match open_log_from(&b"# rarefy log v2\n"[..], "new.csv", Some(&s)) {
        Ok(_) => panic!("read v2"),
        Err(e) => e,
    };
    assert!(e.message.contains("unsupported version v2"), "{e}");
    let e = match open_log(Path::new("/nonexistent.csv"), None) {
        Ok(_) => panic!("opened"),
        Err(e) => e,
    };
    assert!(e.message.starts_with("cannot open the log"), "{e}");
}

proptest! {
    #[test]
    fn random_bytes_never_panic(bytes in prop::collection::vec(
        prop_oneof![
            Just(b';'), Just(b'"'), Just(b'\n'), Just(b'\r'), Just(b','), Just(b'E'),
            Just(b'-'), Just(b'.'), Just(b' '), Just(b':'), Just(b'O'), Just(b'R'),
            any::<u8>(), b'0'..=b'9',
        ],
        0..400,
    )) {
        let specs = [
            spec(&section("decimal_comma = true\nskip_rows = 1", "status = { \"OR\" = \"over-range\" }")),
            spec(&section("", "").replace("\"UTC\"", "\"Europe/Vienna\"")),
            spec("[log]\nheader = false\ndelimiter = \";\"\ntime = { index = 0, format = \"epoch-ms\" }\n\
                  [[log.column]]\nindex = 1\nchannel = \"p\"\nunit = \"Pa\"\n"),
        ];
        for s in &specs {
            if let Ok(r) = ForeignReader::new(&bytes[..], "x", s) {
                for item in r.take(1000) {
                    if let Err(e) = item {
                        prop_assert!(e.line.is_some());
                        let _ = e.to_string();
                    }
                }
            }
            // And after a valid header, so that the rows are reached.
            let mut text = b"x\nTime;P\n".to_vec();
            text.extend_from_slice(&bytes);
            if let Ok(r) = ForeignReader::new(&text[..], "x", s) {
                for item in r.take(1000) {
                    let _ = item.map_err(|e| e.to_string());
                }
            }
        }
    }

    /// Rows read into one reused row (its samples refilled where the last
    /// row's lie) are the rows read fresh: readings, errors and the bad
    /// rows' good readings, whatever the rows before held.
    #[test]
    fn rows_read_into_a_reused_row_are_the_rows_read_fresh(
        lines in prop::collection::vec(
            prop::collection::vec(
                prop_oneof![
                    Just("1,5E-03"), Just("2.5e-3"), Just("OR"), Just(""), Just("x"),
                    Just("-1"), Just("\"7\""),
                ],
                0..5,
            ),
            1..40,
        ),
    ) {
        let s = spec(&section("decimal_comma = true", "status = { \"OR\" = \"over-range\" }")
            .replace("name = \"P\"\nchannel = \"p\"\nunit = \"mbar\"\n", "name = \"P\"\nchannel = \"p\"\nunit = \"mbar\"\n\
                status = { \"OR\" = \"over-range\" }\n[[log.column]]\nname = \"Q\"\nchannel = \"q\"\nunit = \"mbar\"\n"));
        let mut text = String::from("Time;P;Q\n");
        for (i, cells) in lines.iter().enumerate() {
            text.push_str(&format!("2026-11-16 06:{:02}:{:02}", i / 60, i % 60));
            for c in cells {
                text.push(';');
                text.push_str(c);
            }
            text.push('\n');
        }
        let fresh = read_all(&s, text.as_bytes());
        let mut reader = ForeignReader::new(text.as_bytes(), "x.csv", &s).expect("header");
        let mut row = Row::default();
        let mut reused = Vec::new();
        while let Some(item) = reader.next_row_into(&mut row) {
            reused.push(item.map(|()| row.clone()));
        }
        prop_assert_eq!(format!("{reused:?}"), format!("{fresh:?}"));
    }
}

/// Templates' `time_format` and `[log]`'s time `format` go through one
/// parser: the same texts are accepted, and the same are refused with the
/// same message, each located at its own value.
#[test]
fn templates_and_log_sections_read_time_formats_alike() {
    let template = |format: &str| {
        format!(
            "[[source]]\nuri = \"stdin:\"\n[[source.template]]\n\
             pattern = '(?P<time>.+);(?P<p>\\S+)'\nunit = \"mbar\"\n\
             time_format = \"{format}\"\ntimezone = \"UTC\"\n"
        )
    };
    let log = |format: &str| section("", "").replace("%Y-%m-%d %H:%M:%S", format);
    let absolute = ["rfc3339", "epoch-s", "epoch-ms", "%Y-%m-%dT%H:%M:%S%z"];
    let local = ["%Y-%m-%d %H:%M:%S", "%d.%m.%Y %H:%M", "%Y%m%d %H%M%S%.3f"];
    let bad = [
        "dd.mm.yyyy",
        "epoch-sec",
        "%Y-%m-%d %H:%Q",
        "%s",
        "%d.%m.%Y",
        "%H:%M:%S",
        "",
    ];
    let parse = |toml: &str| rarefy_app::config::parse(toml, Path::new("t.toml"));
    for f in local {
        assert!(parse(&template(f)).is_ok(), "template {f}");
        assert!(parse(&log(f)).is_ok(), "[log] {f}");
    }
    for f in absolute {
        // Times with their own offset take no zone, in either place.
        let t = config_error(&template(f));
        let l = config_error(&log(f));
        assert_eq!(t.message, l.message, "{f}");
        assert!(t.message.contains("`timezone` has no effect"), "{t}");
        assert_eq!((t.line, l.line), (Some(7), Some(4)), "{f}");
        let without = |s: String| s.replace("\ntimezone = \"UTC\"", "");
        assert!(parse(&without(template(f))).is_ok(), "template {f}");
        assert!(
            parse(&log(f).replace(", timezone = \"UTC\"", "")).is_ok(),
            "[log] {f}"
        );
    }
    for f in bad {
        let t = config_error(&template(f));
        let l = config_error(&log(f));
        assert_eq!(t.message, l.message, "{f}");
        assert_eq!(
            Some(t.message.clone()),
            rarefy_core::timefmt::TimeFormat::parse(f).err()
        );
        assert_eq!((t.line, l.line), (Some(6), Some(4)), "{f}");
    }
    // Zones are read alike too.
    let t = config_error(&template("%Y-%m-%d %H:%M:%S").replace("\"UTC\"", "\"Europe/Viena\""));
    let l = config_error(&log("%Y-%m-%d %H:%M:%S").replace("\"UTC\"", "\"Europe/Viena\""));
    assert_eq!(t.message, l.message);
    assert!(t.message.contains("did you mean \"Europe/Vienna\"?"), "{t}");
}

#[test]
fn a_gas_column_is_read_by_its_header_text() {
    let s = spec(&section("gas = \"Process gas\"", ""));
    let rows: Vec<Row> = read_all(
        &s,
        b"Time;P;Process gas\n2026-12-01 10:00:00;1e-3;\n2026-12-01 10:00:01;2e-3; Ar \n",
    )
    .into_iter()
    .map(|r| r.expect("row"))
    .collect();
    let gases: Vec<Option<&str>> = rows.iter().map(|r| r.gas.as_deref()).collect();
    assert_eq!(gases, [None, Some("Ar")]);
    // The gas column cannot also be the time, a gauge or a note.
    let s = spec(&section("gas = \"P\"", ""));
    let e = open_error(&s, b"Time;P\n2026-12-01 10:00:00;1e-3\n");
    assert!(e.to_string().contains("is the [log] gas column"), "{e}");
    let e = config_error(&section("notes = [\"Remark\"]\ngas = \"Remark\"", ""));
    assert!(e.to_string().contains("already a notes column"), "{e}");
    let errs = config_errors(&section("header = false\ngas = \"G\"", ""));
    assert!(
        errs.iter()
            .any(|e| e.to_string().contains("gas names a header cell")),
        "{errs:?}"
    );
}

#[test]
fn a_change_of_utc_offset_is_flagged_and_a_time_without_one_refused() {
    // RFC 3339 times that carry their own offset: a logger switched from
    // +01:00 to +02:00 mid-run, writing the same clock; the times read as
    // UTC stay one minute apart and the change is counted.
    let s = spec(&section("", "").replace("%Y-%m-%d %H:%M:%S\", timezone = \"UTC\"", "rfc3339\""));
    let mut r = ForeignReader::new(
        &b"Time;P\n2026-03-29T01:58:00+01:00;1\n2026-03-29T01:59:00+01:00;1\n\
           2026-03-29T03:00:00+02:00;1\n2026-03-29T03:01:00;1\n2026-03-29T03:02:00+02:00;1\n"[..],
        "x.csv",
        &s,
    )
    .expect("header");
    let items: Vec<_> = r.by_ref().collect();
    assert_eq!(items.len(), 5, "{items:?}");
    let row = |i: usize| items[i].as_ref().unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(row(2).time, utc("2026-03-29T01:00:00Z"));
    let c = row(2).offset_change.expect("a change");
    assert_eq!(
        (c.from.to_string(), c.to.to_string()),
        ("+01:00".into(), "+02:00".into())
    );
    assert_eq!(row(1).offset_change, None);
    assert_eq!(row(4).offset_change, None);
    let e = items[3].as_ref().expect_err("no offset");
    assert_eq!(e.line, Some(5));
    assert!(
        e.to_string().starts_with(
            "x.csv:5:1: time \"2026-03-29T03:01:00\" in column \"Time\" has no UTC offset, \
             unlike the times before it (at +02:00)"
        ),
        "{e}"
    );
    assert_eq!(r.time_offset_changes(), 1);
    assert_eq!(r.header_line(), Some(1));
    // A pattern with %z: the same.
    let s = spec(&section("", "").replace("%S\", timezone = \"UTC\"", "%S %z\""));
    let mut r = ForeignReader::new(
        &b"Time;P\n2026-01-01 01:00:00 +0100;1\n2026-01-01 05:30:01 +0530;1\n"[..],
        "x.csv",
        &s,
    )
    .expect("header");
    let rows: Vec<Row> = r
        .by_ref()
        .map(|x| x.unwrap_or_else(|e| panic!("{e}")))
        .collect();
    assert_eq!(rows[1].time, utc("2026-01-01T00:00:01Z"));
    assert!(rows[1].offset_change.is_some());
    assert_eq!(r.time_offset_changes(), 1);
    // Local times in a named zone change offset at daylight saving by
    // design: no offset is carried, so nothing is counted.
    let s = spec(&section("", "").replace("\"UTC\"", "\"Europe/Vienna\""));
    let mut r = ForeignReader::new(
        &b"Time;P\n2026-03-29 01:59:00;1\n2026-03-29 03:00:00;1\n"[..],
        "x.csv",
        &s,
    )
    .expect("header");
    assert!(
        r.by_ref()
            .all(|x| x.is_ok_and(|row| row.offset_change.is_none()))
    );
    assert_eq!(r.time_offset_changes(), 0);
}
