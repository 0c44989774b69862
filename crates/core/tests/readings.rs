//! A bad reading never becomes a number: whatever a decoder or a log reader
//! makes of its input, a sample with a non-ok status has no value, and it
//! goes through the v1 writer and reader as the same status.

use chrono::{DateTime, Duration, Utc};
use proptest::prelude::*;
use std::collections::BTreeMap;

use rarefy_core::log::read::LogReader;
use rarefy_core::log::v1::{Cell, Column, LogMeta, MAGIC, header, write_row};
use rarefy_core::parse::Decoder;
use rarefy_core::parse::logline::AutoDecoder;
use rarefy_core::parse::plain::PlainDecoder;
use rarefy_core::parse::template::{Template, TemplateDecoder, TemplateSpec};
use rarefy_core::sample::{ChannelInfo, ChannelUnit, Fault, Reading, Sample, SourceEvent, Status};
use rarefy_core::units::{PressureUnit, TemperatureUnit};

const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);
const CELSIUS: ChannelUnit = ChannelUnit::Temperature(TemperatureUnit::C);

/// What a device or a log may put where a value goes: numbers of every kind,
/// status words (`ok` too), device words, garbage.
fn token() -> impl Strategy<Value = String> {
    prop_oneof![
        any::<f64>().prop_map(|v| format!("{v:e}")),
        (-12.0f64..4.0).prop_map(|e| format!("{}", 10f64.powf(e))),
        prop::sample::select(Status::ALL.to_vec()).prop_map(|s| s.as_str().to_string()),
        prop::sample::select(vec![
            "NaN", "inf", "-inf", "OR", "UR", "OFF", "ERR", "", "--", "1e999", "0x10", "ok ",
        ])
        .prop_map(str::to_string),
        "[a-z0-9.+-]{1,8}",
    ]
}

fn samples_of(events: Vec<SourceEvent>) -> Vec<Sample> {
    events
        .into_iter()
        .flat_map(|e| match e {
            SourceEvent::Samples(s) => s,
            _ => Vec::new(),
        })
        .collect()
}

/// The invariant every sample keeps, whatever made it.
fn check_sample(s: &Sample) -> Result<(), TestCaseError> {
    let status = s.status();
    prop_assert_eq!(status.is_ok(), s.value().is_some(), "{:?}", s);
    prop_assert_eq!(status.is_ok(), s.si().is_some(), "{:?}", s);
    prop_assert_eq!(status.fault(), s.reading.fault(), "{:?}", s);
    match s.reading {
        Reading::Value(v) => prop_assert!(v.is_finite(), "{:?}", s),
        Reading::Bad(f) => {
            prop_assert_eq!(f.status(), status);
            prop_assert_eq!(s.si(), None);
        }
    }
    Ok(())
}

/// Writes the samples as one v1 row each and reads them back: every sample
/// returns with the same channel, status and (for a value) the same bits.
fn round_trip(samples: &[Sample]) -> Result<(), TestCaseError> {
    let mut channels: Vec<ChannelInfo> = Vec::new();
    for s in samples {
        if !channels.iter().any(|c| c.id == s.channel) {
            channels.push(ChannelInfo::new(&s.channel, s.unit));
        }
    }
    let columns: Vec<Column> = channels.iter().map(Column::channel).collect();
    let mut text = header(&LogMeta::default(), &columns);
    let t0 = DateTime::<Utc>::UNIX_EPOCH;
    for (i, s) in samples.iter().enumerate() {
        let mut cells = vec![Cell::Empty; columns.len()];
        if let Some(k) = channels.iter().position(|c| c.id == s.channel) {
            cells[k] = Cell::of(s);
        }
        write_row(&mut text, t0 + Duration::milliseconds(i as i64), &cells);
    }
    let reader = LogReader::new(text.as_bytes(), "trip.csv")
        .map_err(|e| TestCaseError::fail(format!("{e}\n{text}")))?;
    let mut n = 0;
    for (row, s) in reader.zip(samples) {
        // A pressure not above zero comes back as read, with a note.
        let noted = s.unit.is_pressure() && s.value().is_some_and(|v| v <= 0.0);
        let row = match row {
            Ok(row) if !noted => row,
            Err(e) if noted && e.message.contains("is not above zero") => match e.row {
                Some(row) => *row,
                None => return Err(TestCaseError::fail(format!("no row kept\n{text}"))),
            },
            other => {
                return Err(TestCaseError::fail(format!(
                    "noted: {noted}: {other:?}\n{text}"
                )));
            }
        };
        prop_assert_eq!(row.samples.len(), 1, "{}", text);
        let back = &row.samples[0];
        check_sample(back)?;
        prop_assert_eq!(&back.channel, &s.channel);
        prop_assert_eq!(back.status(), s.status(), "{}", text);
        prop_assert_eq!(
            back.value().map(f64::to_bits),
            s.value().map(f64::to_bits),
            "{}",
            text
        );
        n += 1;
    }
    prop_assert_eq!(n, samples.len());
    Ok(())
}

fn template_decoder() -> TemplateDecoder {
    let spec = TemplateSpec {
        pattern: r"^(?P<p_status>\S+)\s+(?P<p>\S+)\s+(?P<q>\S+)$".into(),
        unit: Some(MBAR),
        status: BTreeMap::from([
            ("0".to_string(), Status::Ok),
            ("1".to_string(), Status::UnderRange),
            ("2".to_string(), Status::OverRange),
            ("OFF".to_string(), Status::SensorOff),
            ("ERR".to_string(), Status::SensorError),
            ("ok".to_string(), Status::Ok),
        ]),
        ..TemplateSpec::default()
    };
    let template = Template::new(&spec).unwrap_or_else(|e| panic!("{e}"));
    TemplateDecoder::new(vec![template])
}

proptest! {
    #[test]
    fn plain_lines_keep_bad_readings_without_numbers(
        pairs in prop::collection::vec((prop::sample::select(vec!["p", "q", "wall"]), token()), 1..5),
    ) {
        let line = pairs
            .iter()
            .map(|(c, v)| {
                let unit = if *c == "wall" { " C" } else { "" };
                format!("{c}={v}{unit}")
            })
            .collect::<Vec<_>>()
            .join(", ");
        let mut d = AutoDecoder::new(PlainDecoder::new("p", MBAR));
        let samples = samples_of(d.decode(line.as_bytes(), DateTime::<Utc>::UNIX_EPOCH, "pipe"));
        for s in &samples {
            check_sample(s)?;
        }
        round_trip(&samples)?;
    }

    #[test]
    fn template_lines_keep_bad_readings_without_numbers(
        word in prop_oneof![
            prop::sample::select(vec!["0", "1", "2", "OFF", "ERR", "ok", "9"]).prop_map(str::to_string),
            token(),
        ],
        p in token(),
        q in token(),
    ) {
        let line = format!("{} {} {}", word.trim(), p.trim(), q.trim());
        let samples = samples_of(template_decoder().decode(
            line.as_bytes(),
            DateTime::<Utc>::UNIX_EPOCH,
            "serial",
        ));
        for s in &samples {
            check_sample(s)?;
        }
        round_trip(&samples)?;
    }

    #[test]
    fn log_rows_keep_bad_readings_without_numbers(
        cells in prop::collection::vec((token(), token()), 1..6),
    ) {
        let mut text = format!("{MAGIC}\ntime,a [mbar],b [C]\n");
        let t0 = DateTime::<Utc>::UNIX_EPOCH;
        for (i, (a, b)) in cells.iter().enumerate() {
            let clean = |s: &str| s.replace([',', '"', '\n', '\r'], "");
            text.push_str(&format!(
                "{},{},{}\n",
                rarefy_core::log::v1::format_time(t0 + Duration::seconds(i as i64)),
                clean(a),
                clean(b)
            ));
        }
        let reader = LogReader::new(text.as_bytes(), "run.csv")
            .map_err(|e| TestCaseError::fail(format!("{e}")))?;
        let mut samples = Vec::new();
        // A row with a bad cell is an error that keeps the row, its bad
        // cells as `unparsed` samples (a pressure not above zero as read).
        for item in reader {
            match item {
                Ok(row) => samples.extend(row.samples),
                Err(e) => {
                    let row = e.row.ok_or_else(|| TestCaseError::fail(e.message.clone()))?;
                    prop_assert!(row.samples.iter().any(|s| s.status() == Status::Unparsed
                        || (s.unit.is_pressure() && s.value().is_some_and(|v| v <= 0.0))));
                    samples.extend(row.samples);
                }
            }
        }
        for s in &samples {
            check_sample(s)?;
            if s.unit == CELSIUS {
                prop_assert_eq!(&s.channel, "b");
            }
        }
        round_trip(&samples)?;
    }

    #[test]
    fn every_fault_round_trips_as_its_word(
        faults in prop::collection::vec(prop::sample::select(Fault::ALL.to_vec()), 1..8),
    ) {
        let t0 = DateTime::<Utc>::UNIX_EPOCH;
        let samples: Vec<Sample> = faults
            .iter()
            .enumerate()
            .map(|(i, f)| Sample::bad(t0, if i % 2 == 0 { "a" } else { "b" }, MBAR, *f))
            .collect();
        for s in &samples {
            check_sample(s)?;
        }
        round_trip(&samples)?;
    }
}
