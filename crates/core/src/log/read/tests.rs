use super::*;
use crate::log::v1::{Cell, header, write_row};
use crate::units::{PressureUnit, TemperatureUnit};
use proptest::prelude::*;

const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);

fn time(text: &str) -> DateTime<Utc> {
    DateTime::parse_from_rfc3339(text)
        .map(|t| t.with_timezone(&Utc))
        .unwrap_or_else(|e| panic!("{text}: {e}"))
}

fn reader(text: &str) -> LogReader<&[u8]> {
    LogReader::new(text.as_bytes(), "run.csv").unwrap_or_else(|e| panic!("{e}"))
}

fn open_error(text: &[u8]) -> LogError {
    match LogReader::new(text, "run.csv") {
        Ok(_) => panic!("expected an error for {:?}", String::from_utf8_lossy(text)),
        Err(e) => e,
    }
}

/// The items of a log with two channels `a [mbar]` and `b [C]` and `body`.
fn rows(body: &str) -> Vec<Result<Row, LogError>> {
    let text = format!("{MAGIC}\ntime,a [mbar],b [C]\n{body}");
    reader(&text).collect()
}

fn one_row_error(body: &str) -> LogError {
    let items = rows(body);
    assert_eq!(items.len(), 1, "{items:?}");
    match items.into_iter().next() {
        Some(Err(e)) => e,
        other => panic!("expected an error, got {other:?}"),
    }
}

fn columns() -> Vec<Column> {
    vec![
        Column::channel(&ChannelInfo::new("chamber", MBAR)),
        Column::channel(&ChannelInfo::new(
            "wall",
            ChannelUnit::Temperature(TemperatureUnit::C),
        )),
        Column {
            name: "chamber.knudsen, bore".into(),
            kind: ColumnKind::Derived("1".into()),
        },
        Column::channel(&ChannelInfo::new(
            "foreline",
            ChannelUnit::Pressure(PressureUnit::Torr),
        )),
    ]
}

/// Writes rows with the v1 writer and reads them back, comparing bits.
fn round_trip(cells: &[(DateTime<Utc>, Vec<Cell>)]) {
    let meta = LogMeta {
        chamber: Some("Hollowmere L-3 load lock".into()),
        volume_m3: Some(0.085),
        surface_area_m2: Some(1.6),
        gas: Some("H2=0.6,N2=0.4".into()),
        source: Some("sim:pumpdown".into()),
        started: Some(time("2026-12-01T19:00:00.250Z")),
        extra: vec![
            ("operator shift".into(), "night: B".into()),
            ("note".into(), "a: b: c".into()),
        ],
    };
    let cols = columns();
    let mut text = header(&meta, &cols);
    for (t, c) in cells {
        write_row(&mut text, *t, c);
    }
    let mut r = reader(&text);
    assert_eq!(r.meta(), &meta);
    assert_eq!(r.columns(), cols.as_slice());
    assert!(r.warnings().is_empty(), "{:?}", r.warnings());
    assert_eq!(r.channels().len(), 3);
    let mut n = 0;
    for ((t, written), read) in cells.iter().zip(r.by_ref()) {
        // A pressure not above zero is read back as written, with a note.
        let noted = written
            .iter()
            .zip(&cols)
            .any(|(cell, col)| match (cell, &col.kind) {
                (Cell::Value(v), ColumnKind::Channel(unit)) => unit.is_pressure() && *v <= 0.0,
                _ => false,
            });
        let row = match read {
            Ok(row) if !noted => row,
            Err(e) if noted && e.message.contains("is not above zero") => {
                let message = e.message.clone();
                *e.row.unwrap_or_else(|| panic!("no row kept: {message}"))
            }
            other => panic!("noted: {noted}: {other:?}"),
        };
        assert_eq!(row.time, *t);
        let mut samples = row.samples.iter();
        for (cell, col) in written.iter().zip(&cols) {
            let ColumnKind::Channel(unit) = col.kind else {
                continue;
            };
            match cell {
                // Derived cells are only written in derived columns.
                Cell::Empty | Cell::Derived(_) => {}
                Cell::Value(v) => {
                    let s = samples.next().expect("a sample");
                    assert_eq!(s.channel, col.name);
                    assert_eq!(s.unit, unit);
                    assert_eq!(s.status(), Status::Ok);
                    assert_eq!(s.value().map(f64::to_bits), Some(v.to_bits()), "{v:e}");
                    assert_eq!(s.time, *t);
                }
                Cell::Bad(f) => {
                    let s = samples.next().expect("a sample");
                    assert_eq!(
                        (s.channel.as_str(), s.status(), s.value()),
                        (col.name.as_str(), f.status(), None)
                    );
                }
            }
        }
        assert!(samples.next().is_none());
        n += 1;
    }
    assert_eq!(n, cells.len());
    assert!(r.next().is_none());
}

#[test]
fn round_trip_is_bit_exact() {
    let t0 = time("2026-12-01T19:00:00.000Z");
    let ms = chrono::Duration::milliseconds;
    let cells = vec![
        (
            t0,
            vec![
                Cell::Value(1013.25),
                Cell::Value(22.0),
                Cell::Value(6.6e-8),
                Cell::Value(760.0),
            ],
        ),
        (
            t0 + ms(1),
            vec![
                Cell::Bad(Fault::OverRange),
                Cell::Empty,
                Cell::Empty,
                Cell::Value(0.1 + 0.2),
            ],
        ),
        (
            t0 + ms(999),
            vec![
                Cell::Value(f64::MIN_POSITIVE),
                Cell::Value(-40.000_000_000_000_01),
                Cell::Value(1.0),
                Cell::Value(5e-324),
            ],
        ),
        (
            t0 + ms(86_400_123),
            vec![
                Cell::Value(-0.0),
                Cell::Bad(Fault::SensorError),
                Cell::Empty,
                Cell::Value(f64::MAX),
            ],
        ),
        (
            t0 + ms(86_400_124),
            vec![
                Cell::Bad(Fault::UnderRange),
                Cell::Bad(Fault::SensorOff),
                Cell::Empty,
                Cell::Bad(Fault::Stale),
            ],
        ),
        (
            t0 + ms(86_400_125),
            vec![
                Cell::Bad(Fault::Unparsed),
                Cell::Empty,
                Cell::Empty,
                Cell::Empty,
            ],
        ),
    ];
    round_trip(&cells);
}

fn cell_strategy() -> impl Strategy<Value = Cell> {
    prop_oneof![
        Just(Cell::Empty),
        any::<f64>()
            .prop_filter("finite", |v| v.is_finite())
            .prop_map(Cell::Value),
        (0..Fault::ALL.len()).prop_map(|i| Cell::Bad(Fault::ALL[i])),
    ]
}

proptest! {
    #[test]
    fn random_rows_round_trip(
        rows in prop::collection::vec(
            (0i64..4_000_000_000_000, prop::collection::vec(cell_strategy(), 4)),
            0..20,
        )
    ) {
        let cells: Vec<(DateTime<Utc>, Vec<Cell>)> = rows
            .into_iter()
            .map(|(ms, c)| (DateTime::from_timestamp_millis(ms).unwrap_or_default(), c))
            .collect();
        round_trip(&cells);
    }

    #[test]
    fn random_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
        if let Ok(r) = LogReader::new(&bytes[..], "x") {
            for item in r.take(1000) {
                let _ = item.map_err(|e| e.to_string());
            }
        }
    }

    #[test]
    fn random_bodies_never_panic(body in prop::collection::vec(
        prop_oneof![
            Just(b','), Just(b'"'), Just(b'\n'), Just(b'\r'), Just(b'#'), Just(b'e'),
            Just(b'-'), Just(b'.'), Just(b' '), Just(b'T'), Just(b':'), Just(b'Z'),
            any::<u8>(), b'0'..=b'9',
        ],
        0..400,
    )) {
        let mut text = format!("{MAGIC}\n# volume: 1 m3\ntime,a [mbar],b [m]\n2026-01-01T00:00:00Z,1,2\n")
            .into_bytes();
        text.extend_from_slice(&body);
        let r = LogReader::new(&text[..], "x").expect("valid header");
        let mut n = 0;
        for item in r {
            n += 1;
            if let Err(e) = item {
                prop_assert!(e.line.is_some(), "{e}");
                let _ = e.to_string();
            }
        }
        prop_assert!(n >= 1);
    }
}

#[test]
fn magic_line_problems() {
    let e = open_error(b"");
    assert!(e.message.contains("empty"), "{e}");
    let e = open_error(b"time,a [mbar]\n");
    assert_eq!(
        e.to_string(),
        "run.csv:1:1: not a rarefy log v1 (first line \"time,a [mbar]\"; expected `# rarefy log v1`)"
    );
    let e = open_error(b"# rarefy log v2\ntime\n");
    assert_eq!(e.line, Some(1));
    assert!(
        e.message
            .contains("unsupported version v2 of the rarefy log format"),
        "{e}"
    );
    let e = open_error(b"# rarefy log v13\n");
    assert!(e.message.contains("unsupported version v13"), "{e}");
    let e = open_error(b"# rarefy log\n");
    assert!(e.message.contains("bad first line"), "{e}");
    let e = open_error(b"# rarefy log version one\n");
    assert!(e.message.contains("bad first line"), "{e}");
    let e = open_error(b"\xff\xfe# rarefy\n");
    assert!(e.message.contains("invalid UTF-8"), "{e}");
    // A byte-order mark and CRLF are fine.
    let r = reader("\u{feff}# rarefy log v1\r\ntime,a [mbar]\r\n");
    assert_eq!(r.columns().len(), 1);
}

#[test]
fn metadata_is_read_and_problems_are_warnings() {
    let r = reader(
        "# rarefy log v1\n# chamber: Quillmere A\n# volume: 85 L\n# surface_area: 1.6e0 m2\n\
         # started: 2026-12-01T20:00:00+01:00\n# gas: N2\n# gas: Ar\n# just a comment\n\
         # custom key: with: colons\n#: nothing\n\ntime,a [mbar]\n",
    );
    let m = r.meta();
    assert_eq!(m.chamber.as_deref(), Some("Quillmere A"));
    assert_eq!(m.volume_m3, None);
    assert_eq!(m.surface_area_m2, Some(1.6));
    assert_eq!(m.started, Some(time("2026-12-01T19:00:00Z")));
    assert_eq!(m.gas.as_deref(), Some("Ar"));
    assert_eq!(
        m.extra,
        [("custom key".to_string(), "with: colons".to_string())]
    );
    let w: Vec<String> = r.warnings().iter().map(ToString::to_string).collect();
    assert_eq!(w.len(), 4, "{w:?}");
    assert!(
        w[0].starts_with("run.csv:3:11: metadata `volume`: \"85 L\": expected a number in m3"),
        "{}",
        w[0]
    );
    assert!(
        w[1].starts_with("run.csv:7:3: metadata `gas` is given twice"),
        "{}",
        w[1]
    );
    assert!(
        w[2].starts_with("run.csv:8:3: metadata line \"just a comment\" is not"),
        "{}",
        w[2]
    );
    assert!(w[3].contains("without a key"), "{}", w[3]);
    let r = reader("# rarefy log v1\n# volume: -1 m3\n# started: yesterday\ntime\n");
    assert_eq!(r.warnings().len(), 2);
    assert!(
        r.warnings()[0].message.contains("positive"),
        "{:?}",
        r.warnings()
    );
    assert!(
        r.warnings()[1].message.contains("RFC 3339"),
        "{:?}",
        r.warnings()
    );
}

#[test]
fn header_problems_are_located() {
    let cases: [(&str, &str); 9] = [
        (
            "time,chamber\n",
            "run.csv:2:2: header cell \"chamber\" has no unit",
        ),
        (
            "t,a [mbar]\n",
            "run.csv:2:1: the header row must start with `time`, found \"t\"",
        ),
        (
            "time,a [mbar],b [C],a [Torr]\n",
            "run.csv:2:4: column \"a\" appears twice in the header (cells 2 and 4)",
        ),
        (
            "time, [mbar]\n",
            "run.csv:2:2: header cell \"[mbar]\" has no name",
        ),
        (
            "time,a []\n",
            "run.csv:2:2: header cell \"a []\" has an empty unit",
        ),
        (
            "time,\"a [mbar]\n",
            "run.csv:2:2: quoted cell is not closed",
        ),
        (
            "time,a [mbar],\n",
            "run.csv:2:3: header cell \"\" has no unit",
        ),
        (
            "time,\"a\" [mbar]\n",
            "run.csv:2:2: text after the closing quote",
        ),
        (
            "time,a [mbar\n",
            "run.csv:2:2: header cell \"a [mbar\" has no unit",
        ),
    ];
    for (head, expect) in cases {
        let e = open_error(format!("{MAGIC}\n{head}").as_bytes());
        assert!(e.to_string().starts_with(expect), "{head:?}: {e}");
    }
    let e = open_error(format!("{MAGIC}\n# chamber: x\n\n").as_bytes());
    assert!(e.message.contains("ends before its header row"), "{e}");
}

#[test]
fn header_cells_may_be_quoted_and_derived() {
    let text =
        format!("{MAGIC}\ntime,\"a, upper [mbar]\",\"a.\"\"knudsen\"\" [1]\",w [K], x [1/m3] \n");
    let r = reader(&text);
    let c = r.columns();
    assert_eq!(c[0].name, "a, upper");
    assert_eq!(c[0].kind, ColumnKind::Channel(MBAR));
    assert_eq!(c[1].name, "a.\"knudsen\"");
    assert_eq!(c[1].kind, ColumnKind::Derived("1".into()));
    assert_eq!(
        c[2].kind,
        ColumnKind::Channel(ChannelUnit::Temperature(TemperatureUnit::K))
    );
    assert_eq!(c[3].kind, ColumnKind::Derived("1/m3".into()));
    assert_eq!(r.channels().len(), 2);
}

#[test]
fn bad_cells_are_located_and_specific() {
    let e = one_row_error("2026-12-01T19:00:00.000Z,1.2.3,\n");
    assert_eq!(
        e.to_string(),
        "run.csv:3:2: cell \"1.2.3\" is neither a number nor a status word \
         (over-range, under-range, sensor-off, sensor-error, stale, unparsed)"
    );
    let e = one_row_error("2026-12-01T19:00:00.000Z,1,over_range\n");
    assert_eq!(e.column, Some(3));
    assert!(e.message.ends_with("did you mean \"over-range\"?"), "{e}");
    for bad in ["NaN", "inf", "-inf", "infinity", "1e999"] {
        let e = one_row_error(&format!("2026-12-01T19:00:00.000Z,{bad},\n"));
        assert!(e.message.contains("not a finite number"), "{bad}: {e}");
    }
    let e = one_row_error("2026-12-01T19:00:00.000Z,ok,\n");
    assert!(e.message.contains("cell \"ok\" has no value"), "{e}");
    // The good cells of a bad row are kept, the bad one as `unparsed`.
    let e = one_row_error("2026-12-01T19:00:00.000Z,x,21.5\n");
    let row = e.row.expect("partial row");
    assert_eq!(row.samples.len(), 2);
    assert_eq!(row.samples[0].status(), Status::Unparsed);
    assert_eq!(row.samples[1].value(), Some(21.5));
    let e = one_row_error("2026-12-01T19:00:00.000Z,x,y\n");
    assert!(
        e.message.ends_with("(and 1 more bad cell in this row)"),
        "{e}"
    );
    // Control characters in a cell are escaped in the message.
    let e = one_row_error("2026-12-01T19:00:00.000Z,\u{1b}[2J,\n");
    assert!(e.message.contains("cell \"\\x1b[2J\""), "{e}");
}

#[test]
fn a_pressure_not_above_zero_is_kept_with_a_located_note() {
    for general_only in [false, true] {
        for cell in ["-1.5e-2", "0", "-0", "0.0e0", "-3"] {
            let text = format!(
                "{MAGIC}\ntime,a [mbar],b [C]\n\
                 2026-12-01T19:00:00.000Z,{cell},-5.5\n\
                 2026-12-01T19:00:00.100Z,2e-3,-5.5\n"
            );
            let mut r = reader(&text);
            r.general_only = general_only;
            let items: Vec<_> = r.collect();
            assert_eq!(items.len(), 2, "{items:?}");
            let Some(Err(e)) = items.first() else {
                panic!("{cell}: expected a note, got {items:?}");
            };
            assert_eq!(
                e.to_string(),
                format!(
                    "run.csv:3:2: pressure \"{cell}\" mbar is not above zero: kept as read, \
                     without a true pressure or kinetics (a gauge's zero drift?)"
                )
            );
            // The reading is kept as read, and so is the row's other one
            // (a temperature below zero needs no note).
            let row = e.row.as_ref().expect("the row is kept");
            let v: f64 = cell.parse().expect("a number");
            assert_eq!(row.samples.len(), 2);
            assert_eq!(row.samples[0].status(), Status::Ok);
            assert_eq!(row.samples[0].value().map(f64::to_bits), Some(v.to_bits()));
            assert_eq!(row.samples[1].value(), Some(-5.5));
            let Some(Ok(next)) = items.get(1) else {
                panic!("{cell}: the next row: {items:?}");
            };
            assert_eq!(next.samples[0].value(), Some(2e-3));
        }
    }
    // With a bad cell after it, the note names it.
    let e = one_row_error("2026-12-01T19:00:00.000Z,-1e-3,x\n");
    assert!(
        e.message.ends_with("(and 1 more bad cell in this row)"),
        "{e}"
    );
    assert_eq!(e.column, Some(2));
}

#[test]
fn a_channel_cell_that_is_not_utf8_is_unparsed_and_the_row_kept() {
    let read = |body: &[u8], general_only: bool| {
        let mut bytes = format!("{MAGIC}\ntime,a [mbar],b [C],gas\n").into_bytes();
        bytes.extend_from_slice(body);
        let mut r = LogReader::new(&bytes[..], "run.csv").expect("header");
        r.general_only = general_only;
        r.collect::<Vec<_>>()
    };
    for general_only in [false, true] {
        // In one channel cell: that cell is unparsed, the rest used.
        let items = read(b"2026-12-01T19:00:00.000Z,4\xff5,21.5,N2\n", general_only);
        let Some(Err(e)) = items.first() else {
            panic!("expected a note: {items:?}");
        };
        assert_eq!(
            e.to_string(),
            "run.csv:3:2: invalid UTF-8 (byte 0xff after \"4\") in cell 2"
        );
        let row = e.row.as_ref().expect("the row is kept");
        assert_eq!(row.samples.len(), 2);
        assert_eq!(row.samples[0].status(), Status::Unparsed);
        assert_eq!(row.samples[1].value(), Some(21.5));
        assert_eq!(row.gas.as_deref(), Some("N2"));
        // In both: the first named, the other counted.
        let items = read(b"2026-12-01T19:00:00.000Z,\xfe,\xff,N2\n", general_only);
        let Some(Err(e)) = items.first() else {
            panic!("expected a note: {items:?}");
        };
        assert!(
            e.message.ends_with("(and 1 more bad cell in this row)"),
            "{e}"
        );
        let row = e.row.as_ref().expect("the row is kept");
        assert!(row.samples.iter().all(|s| s.status() == Status::Unparsed));
        // In the time, the gas cell, or with the wrong number of cells: the
        // row is not used, as any row whose time or shape cannot be read.
        for body in [
            &b"2026-12-01T19:00:00.000\xffZ,1,2,N2\n"[..],
            b"2026-12-01T19:00:00.000Z,1,2,N\xff\n",
            b"2026-12-01T19:00:00.000Z,1\xff,2\n",
        ] {
            let items = read(body, general_only);
            let Some(Err(e)) = items.first() else {
                panic!("expected an error: {items:?}");
            };
            assert!(e.message.contains("invalid UTF-8"), "{e}");
            assert!(e.row.is_none(), "{e:?}");
        }
    }
}

#[test]
fn bad_rows_are_located_and_specific() {
    let cases: [(&[u8], &str); 9] = [
        (
            b"2026-12-01T19:00:00.000Z,1\n",
            "run.csv:3:3: row has 2 cells; the header has 3 (time and 2 columns)",
        ),
        (
            b"2026-12-01T19:00:00.000Z,1,2,3\n",
            "run.csv:3:4: row has 4 cells; the header has 3",
        ),
        (b",1,2\n", "run.csv:3:1: the time cell is empty"),
        (
            b"2026-12-01 19:00,1,2\n",
            "run.csv:3:1: time \"2026-12-01 19:00\" is not an RFC 3339 time",
        ),
        (
            b"2026-13-01T19:00:00Z,1,2\n",
            "run.csv:3:1: time \"2026-13-01T19:00:00Z\" is not an RFC 3339 time",
        ),
        (b"1764615600,1,2\n", "run.csv:3:1: time \"1764615600\""),
        (
            b"# note: late\n",
            "run.csv:3:1: a `#` line after the header row",
        ),
        (
            b"2026-12-01T19:00:00Z,\"1,2\n",
            "run.csv:3:2: quoted cell is not closed",
        ),
        (
            b"2026-12-01T19:00:00Z,1\xff,2\n",
            "run.csv:3:2: invalid UTF-8 (byte 0xff after \"1\") in cell 2",
        ),
    ];
    for (body, expect) in cases {
        let mut bytes = format!("{MAGIC}\ntime,a [mbar],b [C]\n").into_bytes();
        bytes.extend_from_slice(body);
        let items: Vec<_> = LogReader::new(&bytes[..], "run.csv")
            .expect("header")
            .collect();
        let shown = String::from_utf8_lossy(body);
        assert_eq!(items.len(), 1, "{shown:?}: {items:?}");
        match &items[0] {
            Err(e) => assert!(e.to_string().starts_with(expect), "{shown:?}: {e}"),
            Ok(r) => panic!("{shown:?}: expected an error, got {r:?}"),
        }
    }
}

#[test]
fn reading_goes_on_after_an_error() {
    let items = rows(
        "2026-12-01T19:00:00.000Z,1,2\nbad\n\n\r\n2026-12-01T19:00:02.000Z,,\n2026-12-01T19:00:03.000Z,3,\n",
    );
    assert_eq!(items.len(), 4, "{items:?}");
    assert!(items[0].is_ok());
    assert_eq!(items[1].as_ref().err().and_then(|e| e.line), Some(4));
    let r = items[2].as_ref().expect("row");
    assert_eq!((r.line, r.samples.len()), (7, 0));
    let r = items[3].as_ref().expect("row");
    assert_eq!(r.line, 8);
}

#[test]
fn crlf_partial_last_line_and_offsets() {
    let items = rows(
        "2026-12-01T20:00:00+01:00,1.5e-6,\r\n2026-12-01T19:00:01Z,sensor-off,22\r\n2026-12-01t19:00:02.5z,2,",
    );
    let rows: Vec<Row> = items
        .into_iter()
        .map(|r| r.unwrap_or_else(|e| panic!("{e}")))
        .collect();
    assert_eq!(rows.len(), 3);
    assert_eq!(rows[0].time, time("2026-12-01T19:00:00Z"));
    assert_eq!(
        rows[0].samples,
        [Sample::ok(rows[0].time, "a", 1.5e-6, MBAR)]
    );
    assert_eq!(rows[1].samples[0].status(), Status::SensorOff);
    assert_eq!(rows[1].samples[1].value(), Some(22.0));
    assert_eq!(rows[2].time, time("2026-12-01T19:00:02.500Z"));
    assert_eq!(rows[2].line, 5);
}

#[test]
fn times_going_back_are_flagged_not_errors() {
    let text = format!(
        "{MAGIC}\ntime,a [mbar],b [C]\n2026-12-01T19:00:10Z,1,\n2026-12-01T19:00:05Z,1,\n\
         2026-12-01T19:00:05Z,1,\n2026-12-01T19:00:06Z,1,\n2026-12-01T18:00:00Z,1,\n"
    );
    let mut r = reader(&text);
    let flags: Vec<bool> = r
        .by_ref()
        .map(|x| {
            x.map(|row| row.time_went_back)
                .unwrap_or_else(|e| panic!("{e}"))
        })
        .collect();
    assert_eq!(flags, [false, true, false, false, true]);
    assert_eq!(r.times_went_back(), 2);
    assert_eq!(r.times_repeated(), 1);
}

#[test]
fn repeated_times_are_flagged_and_counted() {
    let text = format!(
        "{MAGIC}\ntime,a [mbar]\n2026-12-01T19:00:00Z,1\n2026-12-01T19:00:00Z,2\n\
         2026-12-01T19:00:01Z,3\n2026-12-01T19:00:01.000Z,4\n"
    );
    let mut r = reader(&text);
    let flags: Vec<(bool, bool)> = r
        .by_ref()
        .map(|x| {
            x.map(|row| (row.time_went_back, row.time_repeated))
                .unwrap_or_else(|e| panic!("{e}"))
        })
        .collect();
    assert_eq!(
        flags,
        [(false, false), (false, true), (false, false), (false, true)]
    );
    assert_eq!((r.times_went_back(), r.times_repeated()), (0, 2));
}

#[test]
fn a_header_unit_that_is_neither_channel_nor_derived_is_located() {
    let text = format!("{MAGIC}\ntime,a [mbar],b [mbr]\n2026-12-01T19:00:00Z,1,2\n");
    let e = match LogReader::new(text.as_bytes(), "run.csv") {
        Ok(_) => panic!("an unknown header unit was read as a derived column"),
        Err(e) => e,
    };
    assert_eq!((e.line, e.column), (Some(2), Some(3)), "{e}");
    assert!(e.message.contains("unknown unit \"mbr\""), "{e}");
    assert!(e.message.contains("1/m3"), "{e}");
    assert!(e.message.ends_with("; did you mean \"mbar\"?"), "{e}");
}

#[test]
fn overlong_lines_are_skipped_with_an_error() {
    let mut text = format!("{MAGIC}\ntime,a [mbar],b [C]\n").into_bytes();
    text.extend(std::iter::repeat_n(b'1', crate::log::MAX_LINE_BYTES + 5));
    text.extend_from_slice(b"\n2026-12-01T19:00:00Z,1,2\n");
    let items: Vec<_> = LogReader::new(&text[..], "run.csv")
        .expect("header")
        .collect();
    assert_eq!(items.len(), 2);
    let e = items[0].as_ref().expect_err("too long");
    assert_eq!(e.line, Some(3));
    assert!(e.message.contains("longer than"), "{e}");
    assert_eq!(items[1].as_ref().map(|r| r.line).ok(), Some(4));
}

#[test]
fn read_errors_end_the_iteration() {
    struct Failing(usize);
    impl std::io::Read for Failing {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            let data = b"# rarefy log v1\ntime,a [mbar]\n2026-12-01T19:00:00Z,1\n";
            if self.0 >= data.len() {
                return Err(std::io::Error::other("disk on fire"));
            }
            let n = (data.len() - self.0).min(buf.len());
            buf[..n].copy_from_slice(&data[self.0..self.0 + n]);
            self.0 += n;
            Ok(n)
        }
    }
    let r = LogReader::new(std::io::BufReader::new(Failing(0)), "run.csv").expect("header");
    let items: Vec<_> = r.collect();
    assert_eq!(items.len(), 2, "{items:?}");
    assert!(items[0].is_ok());
    let e = items[1].as_ref().expect_err("io");
    assert!(
        e.to_string().contains("cannot read the log: disk on fire"),
        "{e}"
    );
}

#[test]
fn a_gas_column_gives_each_rows_gas_and_changes_once() {
    let text = "# rarefy log v1\ntime,chamber [mbar],gas\n\
        2026-12-01T10:00:00.000Z,1e-3,\n\
        2026-12-01T10:00:01.000Z,1e-3,Ar\n\
        2026-12-01T10:00:02.000Z,1e-3,Ar\n\
        2026-12-01T10:00:03.000Z,1e-3,\"Ar=0.9,N2=0.1\"\n\
        2026-12-01T10:00:04.000Z,1e-3,\n";
    let r = reader(text);
    assert_eq!(r.channels().len(), 1, "the gas column is not a channel");
    let rows: Vec<Row> = r.map(|x| x.expect("row")).collect();
    let gases: Vec<Option<&str>> = rows.iter().map(|r| r.gas.as_deref()).collect();
    assert_eq!(
        gases,
        [None, Some("Ar"), Some("Ar"), Some("Ar=0.9,N2=0.1"), None]
    );
    // A change of gas is sent once, before the row's readings.
    let mut last = None;
    let sent: Vec<Option<String>> = rows
        .into_iter()
        .flat_map(|row| crate::log::row_events(row, &mut last))
        .filter_map(|e| match e {
            crate::sample::SourceEvent::Gas { text, .. } => Some(text),
            _ => None,
        })
        .collect();
    assert_eq!(
        sent,
        [Some("Ar".into()), Some("Ar=0.9,N2=0.1".into()), None]
    );
    let e = open_error(b"# rarefy log v1\ntime,gas,chamber [mbar],gas\n");
    assert_eq!((e.line, e.column), (Some(2), Some(4)), "{e}");
    assert!(e.message.contains("`gas` column appears twice"), "{e}");
}

#[test]
fn a_change_of_utc_offset_is_flagged_and_counted() {
    // The same clock, written at UTC, then +05:30, then +01:00: every time
    // is read as UTC, one second apart; each change of offset is flagged on
    // its row and counted. `Z` and `+00:00` are the same offset.
    let text = format!(
        "{MAGIC}\ntime,a [mbar]\n2026-12-01T19:00:00Z,1\n2026-12-02T00:30:01+05:30,1\n\
         2026-12-02T00:30:02.000+05:30,1\n2026-12-01T20:00:03+01:00,1\n\
         2026-12-01T19:00:04+00:00,1\n2026-12-01T19:00:05Z,1\n"
    );
    let mut r = reader(&text);
    let rows: Vec<Row> = r
        .by_ref()
        .map(|x| x.unwrap_or_else(|e| panic!("{e}")))
        .collect();
    for (i, row) in rows.iter().enumerate() {
        assert_eq!(
            row.time,
            time("2026-12-01T19:00:00Z") + chrono::Duration::seconds(i as i64)
        );
        assert!(!row.time_went_back && !row.time_repeated);
    }
    let offset = |s: i32| FixedOffset::east_opt(s).expect("offset");
    let changes: Vec<Option<OffsetChange>> = rows.iter().map(|r| r.offset_change).collect();
    let change = |from, to| {
        Some(OffsetChange {
            from: offset(from),
            to: offset(to),
        })
    };
    assert_eq!(
        changes,
        [
            None,
            change(0, 19_800),
            None,
            change(19_800, 3_600),
            change(3_600, 0),
            None
        ]
    );
    assert_eq!(r.time_offset_changes(), 3);
    assert_eq!(
        change(19_800, 3_600).map(|c| (c.from.to_string(), c.to.to_string())),
        Some(("+05:30".to_string(), "+01:00".to_string()))
    );
}

#[test]
fn a_time_without_an_offset_is_a_located_error_naming_the_offset_before() {
    let items = rows(
        "2026-12-01T20:00:00+01:00,1,\n2026-12-01T20:00:01,1,\n2026-12-01 20:00:02.5,1,\n\
         2026-12-01T20:00:03+01:00,1,\n",
    );
    assert_eq!(items.len(), 4, "{items:?}");
    for (i, line) in [(1, 4), (2, 5)] {
        let e = items[i].as_ref().expect_err("no offset");
        assert_eq!((e.line, e.column), (Some(line), Some(1)), "{e}");
        assert!(e.row.is_none(), "the row is not used");
        assert!(
            e.message
                .contains("has no UTC offset, unlike the times before it (at +01:00)"),
            "{e}"
        );
    }
    // The refused rows change nothing: the next row's offset is the one
    // before them.
    let last = items[3].as_ref().expect("row");
    assert_eq!(last.offset_change, None);
    assert_eq!(last.time, time("2026-12-01T19:00:03Z"));
    // With no time before it, the message names no offset.
    let e = one_row_error("2026-12-01T19:00:00.000,1,\n");
    assert!(
        e.to_string().starts_with(
            "run.csv:3:1: time \"2026-12-01T19:00:00.000\" has no UTC offset: the zone it was \
             written in is unknown, so the row is not used"
        ),
        "{e}"
    );
}

/// Reads `bytes` through a buffer of `capacity` bytes, reusing one row
/// buffer, the fast way or (`general_only`) every row the general way:
/// each item, the buffer after it, and the reader's position after it.
/// Also the rows read straight from their bytes.
fn read_traced(bytes: &[u8], capacity: usize, general_only: bool) -> (Vec<String>, u64) {
    read_traced_from(
        std::io::BufReader::with_capacity(capacity, bytes),
        general_only,
    )
}

/// [`read_traced`] from any buffered reader.
fn read_traced_from(input: impl BufRead, general_only: bool) -> (Vec<String>, u64) {
    let mut r = match LogReader::new(input, "run.csv") {
        Ok(r) => r,
        Err(e) => return (vec![format!("{e:?}")], 0),
    };
    r.general_only = general_only;
    let mut seen = vec![format!("{:?} {:?}", r.columns(), r.warnings())];
    let mut row = Row::default();
    while let Some(item) = r.next_row_into(&mut row) {
        seen.push(format!("{item:?} {row:?} {:?}", r.read_position()));
    }
    seen.push(format!(
        "{:?} {} {} {}",
        r.read_position(),
        r.times_went_back(),
        r.times_repeated(),
        r.time_offset_changes()
    ));
    (seen, r.plain_rows)
}

/// A row time: mostly the writer's, on one of a few days, now and then
/// with another offset, a leap second, no offset, or a byte changed.
fn row_time() -> impl Strategy<Value = Vec<u8>> {
    let day = prop::sample::select(vec![
        "2026-11-30",
        "2026-12-01",
        "2026-12-31",
        "2027-01-01",
        "2024-02-29",
        "2023-02-29",
    ]);
    let clock = (0u32..24, 0u32..60, 0u32..61, 0u32..1000, 0usize..8);
    let mutation = proptest::option::weighted(0.1, (any::<usize>(), any::<u8>()));
    (day, clock, mutation).prop_map(|(day, (h, m, s, ms, form), mutation)| {
        let s = if form == 7 { s } else { s.min(59) };
        let mut t = match form {
            0..=3 => format!("{day}T{h:02}:{m:02}:{s:02}.{ms:03}Z"),
            4 => format!("{day}T{h:02}:{m:02}:{s:02}+05:30"),
            5 => format!("{day}T{h:02}:{m:02}:{s:02}.{ms}-01:00"),
            6 => format!("{day}T{h:02}:{m:02}:{s:02}"),
            _ => format!("{day}T23:59:{s:02}.{ms:03}Z"),
        }
        .into_bytes();
        if let Some((at, byte)) = mutation {
            let at = at % t.len();
            t[at] = byte;
        }
        t
    })
}

/// A cell: numbers in the writer's form and others, status words, gas
/// names, blanks, quotes and garbage (bytes that are not UTF-8 too).
fn row_cell() -> impl Strategy<Value = Vec<u8>> {
    prop_oneof![
        3 => any::<f64>().prop_map(|v| format!("{v:e}").into_bytes()),
        2 => (any::<u32>(), -30i32..30).prop_map(|(m, e)| format!("{m}e{e}").into_bytes()),
        1 => "[-+]?[0-9]{0,21}\\.?[0-9]{0,4}([eE][-+]?[0-9]{0,3})?".prop_map(String::into_bytes),
        1 => Just(Vec::new()),
        1 => prop::sample::select(vec![
            "over-range", "under-range", "sensor-off", "sensor-error", "stale", "unparsed",
            "ok", "OK", "nan", "inf", "-inf", "1e999", "N2", "Ar", " 1.5", "2\t", " Ar ",
            "\"3\"", "\"a,b\"", "\"x\"y", "1\u{a0}", "\u{2002}", "２", ".", "-0", "+.5e-3",
        ])
        .prop_map(|s| s.as_bytes().to_vec()),
        1 => prop::collection::vec(any::<u8>(), 0..6),
    ]
}

/// A data line: a time and cells (now and then one too few or too many),
/// or a blank, `#` or garbage line; now and then cut short.
/// A time and its cells, as a line.
fn join_cells((time, cells): (Vec<u8>, Vec<Vec<u8>>)) -> Vec<u8> {
    let mut line = time;
    for c in cells {
        line.push(b',');
        line.extend(c);
    }
    line
}

fn row_line(cells: usize) -> impl Strategy<Value = Vec<u8>> {
    let cut = proptest::option::weighted(0.05, any::<usize>());
    let line = prop_oneof![
        12 => (row_time(), prop::collection::vec(row_cell(), cells..=cells)).prop_map(join_cells),
        1 => (row_time(), prop::collection::vec(row_cell(), 0..cells + 3)).prop_map(join_cells),
        1 => prop::sample::select(vec!["", " ", "\t", "# late", "time,a", "\u{feff}x"])
            .prop_map(|s| s.as_bytes().to_vec()),
        1 => prop::collection::vec(any::<u8>(), 0..40),
    ];
    (line, cut, any::<bool>()).prop_map(|(mut line, cut, crlf)| {
        if let Some(at) = cut {
            line.truncate(at % (line.len() + 1));
        }
        if crlf {
            line.push(b'\r');
        }
        line
    })
}

/// A log: one of a few headers, lines, the last one with or without its
/// line break.
fn generated_log() -> impl Strategy<Value = Vec<u8>> {
    let header = prop::sample::select(vec![
        ("time,a [mbar],b [C]", 2usize),
        (
            "time,chamber [mbar],gas,wall [K],chamber.mean_free_path [m]",
            4,
        ),
        ("time,p [Torr]", 1),
        ("time,\"x, y [Pa]\",gas", 2),
    ]);
    header
        .prop_flat_map(|(header, cells)| {
            (
                prop::collection::vec(row_line(cells), 0..30),
                any::<bool>(),
                prop_oneof![1usize..64, Just(8192)],
            )
                .prop_map(move |(lines, last_break, capacity)| {
                    let mut log = format!("{MAGIC}\n# gas: N2\n{header}\n").into_bytes();
                    let n = lines.len();
                    for (i, line) in lines.into_iter().enumerate() {
                        log.extend(line);
                        if i + 1 < n || last_break {
                            log.push(b'\n');
                        }
                    }
                    (log, capacity)
                })
        })
        .prop_map(|(log, capacity)| {
            let mut out = capacity.to_le_bytes().to_vec();
            out.extend(log);
            out
        })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(512))]

    /// Rows read straight from their bytes are read as the general path
    /// reads them: every item, message, location, buffer, position and
    /// count.
    #[test]
    fn the_fast_path_reads_every_log_as_the_general_path(log in generated_log()) {
        let (capacity, log) = log.split_at(8);
        let capacity = usize::from_le_bytes(capacity.try_into().expect("8 bytes"));
        let (fast, _) = read_traced(log, capacity, false);
        let (general, plain) = read_traced(log, capacity, true);
        prop_assert_eq!(plain, 0);
        prop_assert_eq!(fast, general, "{:?}", String::from_utf8_lossy(log));
    }

    /// The writer's rows of numbers of up to eight digits, within the
    /// powers of ten the fast number reader takes (±22 once the digits
    /// are whole), all take the fast path.
    #[test]
    fn written_rows_take_the_fast_path(
        rows in prop::collection::vec(
            (0i64..4_000_000_000_000, prop::collection::vec(prop_oneof![
                Just(Cell::Empty),
                (0..Fault::ALL.len()).prop_map(|i| Cell::Bad(Fault::ALL[i])),
                (-99_999_999i64..100_000_000, -14i32..14).prop_map(|(m, e)| {
                    Cell::Value(format!("{m}e{e}").parse().expect("a number"))
                }),
            ], 4)),
            1..20,
        )
    ) {
        let mut text = header(&LogMeta::default(), &columns());
        for (ms, cells) in &rows {
            let t = DateTime::from_timestamp_millis(*ms).expect("in range");
            write_row(&mut text, t, cells);
        }
        let (fast, plain) = read_traced(text.as_bytes(), 8192, false);
        let (general, _) = read_traced(text.as_bytes(), 8192, true);
        prop_assert_eq!(&fast, &general);
        // Every row but those with a pressure not above zero (the general
        // path notes it).
        let cols = columns();
        let noted = rows
            .iter()
            .filter(|(_, cells)| {
                cells.iter().zip(&cols).any(|(cell, col)| match (cell, &col.kind) {
                    (Cell::Value(v), ColumnKind::Channel(unit)) => unit.is_pressure() && *v <= 0.0,
                    _ => false,
                })
            })
            .count();
        prop_assert_eq!(plain, (rows.len() - noted) as u64, "{}", text);
    }
}

#[test]
fn plain_rows_are_read_straight_and_others_are_not() {
    let log = format!(
        "{MAGIC}\ntime,a [mbar],gas,b [C],d [m]\n\
         2026-12-01T19:00:00.000Z,1.5e-3,N2,22.0625,6.6e-8\n\
         2026-12-01T19:00:00.100Z,over-range,,-4e1,\n\
         2026-12-01T19:00:00.200Z, 1.5e-3,N2,22,\n\
         2026-12-01T19:00:00.300Z,1.5e-3,\"N2\",22,\n\
         2026-12-01T19:00:00.400Z,ok,N2,22,\n\
         2026-12-01T19:00:00.500Z,1.5e-3,N\u{e9},22,\n\
         2026-12-01T19:00:00.600Z,1.5e-3,N2,22\n\
         2026-12-01T19:00:00.700Z,1.5e-3,N2,22,x?\n"
    );
    let mut bytes = log.into_bytes();
    // A byte that is not UTF-8 in a derived cell (the last one).
    let last = bytes.len() - 2;
    bytes[last] = 0xff;
    let (fast, plain) = read_traced(&bytes, 8192, false);
    let (general, _) = read_traced(&bytes, 8192, true);
    assert_eq!(fast, general);
    // The first two, and the one with a non-ASCII gas name.
    assert_eq!(plain, 3, "{fast:#?}");
    assert!(fast[8].contains("invalid UTF-8"), "{}", fast[8]);
}

/// Gives its bytes a few at a time, with interrupted reads and now and then
/// an error between them (a reader of a flaky disk or pipe).
struct Flaky {
    data: Vec<u8>,
    at: usize,
    /// What each read does: give up to n bytes, be interrupted (0) or fail
    /// (1), in turn.
    steps: Vec<u8>,
    step: usize,
    /// The last read was interrupted (the next one is not).
    interrupted: bool,
}

impl std::io::Read for Flaky {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let step = self.steps.get(self.step % self.steps.len().max(1)).copied();
        self.step += 1;
        let interrupted = std::mem::replace(&mut self.interrupted, step == Some(0));
        match step {
            Some(0) if !interrupted => Err(std::io::ErrorKind::Interrupted.into()),
            Some(1) => Err(std::io::Error::other("flaky")),
            n => {
                let n = match n {
                    Some(n @ 2..) => usize::from(n),
                    _ => 255,
                };
                let n = n.min(buf.len());
                let n = n.min(self.data.len() - self.at);
                buf[..n].copy_from_slice(&self.data[self.at..self.at + n]);
                self.at += n;
                Ok(n)
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Rows read where they lie in the reader's buffer meet interrupted
    /// and failed reads as lines copied out of it do: the same items,
    /// errors and positions.
    #[test]
    fn reads_in_place_meet_read_errors_as_copied_reads_do(
        log in generated_log(),
        steps in prop::collection::vec(0u8..90, 1..12),
    ) {
        let (capacity, log) = log.split_at(8);
        let capacity = usize::from_le_bytes(capacity.try_into().expect("8 bytes"));
        let input = |steps: &[u8]| {
            let flaky = Flaky {
                data: log.to_vec(),
                at: 0,
                steps: steps.to_vec(),
                step: 0,
                interrupted: false,
            };
            std::io::BufReader::with_capacity(capacity, flaky)
        };
        let (fast, _) = read_traced_from(input(&steps), false);
        let (general, _) = read_traced_from(input(&steps), true);
        prop_assert_eq!(fast, general, "{:?}", String::from_utf8_lossy(log));
    }
}

#[test]
fn rows_whole_in_the_buffer_are_read_in_place() {
    let mut text = format!("{MAGIC}\ntime,a [mbar],gas\n");
    for i in 0..50 {
        text.push_str(&format!(
            "2026-12-01T19:00:{:02}.000Z,{i}.5e-3,N2\r\n",
            i % 60
        ));
    }
    // The last line without its line break is read the copying way.
    text.push_str("2026-12-01T19:01:00.000Z,1,Ar");
    for capacity in [1, 7, 40, 41, 64, 8192] {
        let (fast, plain) = read_traced(text.as_bytes(), capacity, false);
        let (general, _) = read_traced(text.as_bytes(), capacity, true);
        assert_eq!(fast, general, "capacity {capacity}");
        assert_eq!(plain, 51, "capacity {capacity}");
    }
    // With a buffer that holds them all, all but the last are read in
    // place; with one that holds a few, all but those crossing its end;
    // with one shorter than a line, none.
    for (capacity, in_place) in [(8192, 50..=50), (1000, 40..=49), (30, 0..=0)] {
        let input = std::io::BufReader::with_capacity(capacity, text.as_bytes());
        let mut r = LogReader::new(input, "run.csv").expect("header");
        let mut row = Row::default();
        while let Some(item) = r.next_row_into(&mut row) {
            assert!(item.is_ok(), "{item:?}");
        }
        assert!(
            in_place.contains(&r.in_place_rows),
            "capacity {capacity}: {}",
            r.in_place_rows
        );
    }
}

#[test]
fn rows_read_in_the_buffer_end_where_their_lines_end() {
    // Each kind of last cell, with `\n` and `\r\n`, stray `\r`s, a row
    // without cells and a last line without its break: read in place as
    // the general path reads their lines.
    let headers = [
        (
            "time,a [mbar],gas",
            vec!["1e-3,N2", "1e-3,", "1e-3,N2\r", "1e-3,\rN2"],
        ),
        (
            "time,a [mbar],b [C]",
            vec![
                "1e-3,2.2e1",
                "1e-3,",
                "1e-3,stale",
                "1e-3,2\r",
                "1e-3,2,3",
                "1e-3",
            ],
        ),
        (
            "time,a [mbar],d [m]",
            vec!["1e-3,6.6e-8", "1e-3,", "1e-3,x\r", "1e-3,\r", "1e-3,a\rb"],
        ),
        ("time", vec!["", ",1"]),
    ];
    for (header, cells) in headers {
        for crlf in ["\n", "\r\n", "\r\r\n"] {
            let mut text = format!("{MAGIC}\n{header}\n");
            for (i, c) in cells.iter().enumerate() {
                let sep = if c.is_empty() { "" } else { "," };
                text.push_str(&format!("2026-12-01T19:00:0{i}.000Z{sep}{c}{crlf}"));
            }
            text.push_str("2026-12-01T19:00:09.000Z");
            for capacity in [1, 30, 64, 8192] {
                let (fast, _) = read_traced(text.as_bytes(), capacity, false);
                let (general, _) = read_traced(text.as_bytes(), capacity, true);
                assert_eq!(fast, general, "{text:?} capacity {capacity}");
            }
        }
    }
}
