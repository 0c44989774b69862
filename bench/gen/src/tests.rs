use super::*;
use rarefy_core::log::LogReader;
use rarefy_core::sample::Status;

fn bytes(opts: &Options) -> (Vec<u8>, Written) {
    let mut out = Vec::new();
    let w = generate(opts, &mut out).unwrap_or_else(|e| panic!("{e}"));
    (out, w)
}

#[test]
fn same_options_same_bytes() {
    let opts = Options::new(20_000);
    let (a, wa) = bytes(&opts);
    let (b, wb) = bytes(&opts);
    assert_eq!(a, b);
    assert_eq!(wa, wb);
    assert_eq!(wa.bytes, a.len() as u64);
    let other = Options {
        seed: 2,
        ..opts.clone()
    };
    assert_ne!(bytes(&other).0, a);
}

#[test]
fn a_longer_log_starts_with_the_same_atmosphere() {
    // The first minute is atmosphere whatever the length; the noise of a row
    // does not depend on the row count.
    let (a, _) = bytes(&Options::new(20_000));
    let (b, _) = bytes(&Options::new(40_000));
    let body = |v: &[u8]| -> Vec<String> {
        String::from_utf8_lossy(v)
            .lines()
            .filter(|l| !l.starts_with('#'))
            .skip(1)
            .take(500)
            .map(str::to_string)
            .collect()
    };
    assert_eq!(body(&a), body(&b));
}

#[test]
fn rarefy_reads_it_back_with_the_planned_faults() {
    let opts = Options::new(20_000);
    let (data, w) = bytes(&opts);
    let mut log =
        LogReader::new(std::io::Cursor::new(data), "gen.csv").unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(log.meta().gas.as_deref(), Some("N2"));
    assert_eq!(log.meta().volume_m3, Some(0.085));
    let (mut ok_rows, mut dropped, mut cell_errors) = (0u64, 0u64, 0u64);
    let mut statuses = std::collections::BTreeMap::<String, u64>::new();
    let (mut min, mut max) = (f64::INFINITY, 0.0f64);
    let mut last = None;
    for r in log.by_ref() {
        let row = match r {
            Ok(row) => row,
            Err(e) => match e.row {
                Some(row) => {
                    cell_errors += 1;
                    *row
                }
                None => {
                    dropped += 1;
                    continue;
                }
            },
        };
        ok_rows += 1;
        if let Some(t) = last {
            assert!(row.time > t, "time goes forward");
        }
        last = Some(row.time);
        assert_eq!(row.samples.len(), 2);
        let s = &row.samples[0];
        *statuses.entry(s.status().as_str().to_string()).or_default() += 1;
        if s.status() == Status::Ok
            && let Some(p) = s.si()
        {
            min = min.min(p);
            max = max.max(p);
        }
    }
    assert_eq!(w.lines, 20_000);
    assert!(w.cut_line && w.gap);
    assert_eq!(dropped, 1, "the cut-off line");
    assert_eq!(ok_rows, 19_999);
    assert_eq!(cell_errors, 2, "the garbled numbers: {w:?}");
    assert_eq!(statuses.get("unparsed"), Some(&2));
    assert_eq!(statuses.get("over-range"), Some(&2));
    assert!(w.bad_wall >= 1);
    assert_eq!(log.times_went_back() + log.times_repeated(), 0);
    // From atmosphere to high vacuum and back.
    assert!(max > 1.0e5 && max < 1.06e5, "max {max}");
    assert!(min < 1e-3, "min {min}");
}

#[test]
fn the_pressure_curve_crosses_the_decades_of_a_pump_down() {
    let s = Schedule::new(1e6);
    let p0 = ambient(s.pump1);
    let at = |dt: f64| pressure(&s, s.pump1 + dt);
    assert!((at(0.0) - p0).abs() / p0 < 0.01);
    // Roughing to about 1 Pa in two and a half minutes.
    assert!(at(150.0) > 0.1 && at(150.0) < 3.0, "{}", at(150.0));
    // The tail: 1e-3 Pa within a quarter of an hour, 1e-5 Pa within a day.
    assert!(at(900.0) < 1e-3 && at(500.0) > 1e-3);
    assert!(at(86_400.0) < 1e-5 && at(40_000.0) > 1e-5);
    // The vent ends at atmosphere, slightly above ambient.
    let v = pressure(&s, s.pump2 - 1.0);
    assert!(v > ambient(s.pump2) && v < 1.01 * ambient(s.pump2));
    // The second pump-down goes below 1e-6 Pa at 1e7 rows.
    assert!(pressure(&s, 1e6) < 1e-6);
}

#[test]
fn significant_digits() {
    assert_eq!(significant(1.234_567_891_23e-5, 8), 1.234_567_9e-5);
    assert_eq!(significant(101_325.000_1, 8), 101_325.0);
}
