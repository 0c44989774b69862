//! Ingest throughput: line framing → template parsing → engine (derived
//! columns) → recorder writing log format v1, on one core.
//!
//! Every stage is measured in the same run, so the figures can be read as
//! ratios to the first one (framing alone), which is the baseline: this
//! machine is shared and noisy, absolute numbers move between runs.

use std::hint::black_box;

use chrono::{DateTime, TimeZone, Utc};
use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use rarefy::config::Config;
use rarefy::log::v1::LogMeta;
use rarefy::parse::template::{Template, TemplateDecoder, TemplateSpec};
use rarefy::parse::{Decoder, Framed, LineSplitter};
use rarefy::record::{Deriver, RecordSettings, Recorder};
use rarefy::sample::{ChannelUnit, SourceEvent, Status};
use rarefy::units::PressureUnit;

const LINES: usize = 20_000;

fn input() -> Vec<u8> {
    let mut s = String::new();
    for i in 0..LINES {
        let p = 1e-6 * (1.0 + (i % 97) as f64 / 100.0);
        s.push_str(&format!("0,{p:.4E},0,{:.4E}\r\n", p * 1e3));
    }
    s.into_bytes()
}

fn decoder() -> TemplateDecoder {
    let spec = TemplateSpec {
        pattern: r"^(?P<chamber_status>\d),(?P<chamber>[^,]+),(?P<foreline_status>\d),(?P<foreline>[^,]+)$".into(),
        unit: Some(ChannelUnit::Pressure(PressureUnit::Mbar)),
        status: [("0".to_string(), Status::Ok), ("2".to_string(), Status::OverRange)]
            .into_iter()
            .collect(),
        ..TemplateSpec::default()
    };
    TemplateDecoder::new(vec![Template::new(&spec).expect("template")])
}

fn t0() -> DateTime<Utc> {
    Utc.timestamp_opt(1_780_000_000, 0).single().expect("time")
}

fn parse_all(bytes: &[u8], dec: &mut TemplateDecoder, mut each: impl FnMut(SourceEvent)) {
    let mut split = LineSplitter::new();
    let mut t = t0();
    for chunk in bytes.chunks(4096) {
        for f in split.push(chunk) {
            if let Framed::Line(l) = f {
                t += chrono::Duration::milliseconds(100);
                for e in dec.decode(&l, t, "bench") {
                    each(e);
                }
            }
        }
    }
}

fn bench(c: &mut Criterion) {
    let bytes = input();
    let dir = std::env::temp_dir().join(format!("rarefy-bench-{}", std::process::id()));
    let mut g = c.benchmark_group("ingest");
    g.throughput(Throughput::Elements(LINES as u64));
    g.sample_size(20);

    g.bench_function("1-framing (baseline)", |b| {
        b.iter(|| {
            let mut split = LineSplitter::new();
            let mut n = 0;
            for chunk in bytes.chunks(4096) {
                n += split.push(chunk).len();
            }
            black_box(n)
        })
    });
    g.bench_function("2-framing+template", |b| {
        let mut dec = decoder();
        b.iter(|| {
            let mut n = 0;
            parse_all(&bytes, &mut dec, |e| {
                n += usize::from(matches!(e, SourceEvent::Samples(_)));
            });
            black_box(n)
        })
    });
    g.bench_function("3-framing+template+recorder", |b| {
        let mut dec = decoder();
        b.iter(|| {
            let _ = std::fs::remove_dir_all(&dir);
            let settings = RecordSettings {
                dir: dir.clone(),
                ..RecordSettings::default()
            };
            let mut rec = Recorder::new(settings, LogMeta::default(), &dec.channels());
            parse_all(&bytes, &mut dec, |e| {
                if let SourceEvent::Samples(s) = e
                    && rec.push_row(&s)
                {
                    rec.flush();
                }
            });
            rec.close();
            black_box(rec.rows_written())
        })
    });
    g.bench_function("4-framing+template+engine+recorder", |b| {
        let mut dec = decoder();
        let config = Config::default();
        b.iter(|| {
            let _ = std::fs::remove_dir_all(&dir);
            let settings = RecordSettings {
                dir: dir.clone(),
                ..RecordSettings::default()
            };
            let mut rec = Recorder::new(settings, LogMeta::default(), &dec.channels())
                .with_derived(Deriver::from_config(&config));
            parse_all(&bytes, &mut dec, |e| {
                if let SourceEvent::Samples(s) = e
                    && rec.push_row(&s)
                {
                    rec.flush();
                }
            });
            rec.close();
            black_box(rec.rows_written())
        })
    });
    g.finish();
    let _ = std::fs::remove_dir_all(&dir);
}

criterion_group!(benches, bench);
criterion_main!(benches);
