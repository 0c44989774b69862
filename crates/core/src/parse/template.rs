//! Line templates: a regular expression with a named group per gauge, so any
//! controller's ASCII output can be read without code changes.
//!
//! In a template's pattern,
//! * a group named after a channel (`(?P<chamber>[-+0-9.eE]+)`) captures its
//!   value;
//! * `(?P<chamber_status>\w+)` captures a status word for that channel, looked
//!   up in the template's `status` map;
//! * `(?P<time>…)` captures the device's timestamp, read with `time_format`
//!   (a strftime pattern, or `rfc3339`, `epoch-s`, `epoch-ms`: the same
//!   formats, checked the same way, as a foreign log's time column; see
//!   [`crate::timefmt`]). A pattern without an offset is read in
//!   `time_zone`, UTC when none is given.
//!
//! A value that is not a number but is a word of the `status` map becomes that
//! status; any other non-number becomes an `unparsed` reading of that channel.
//! A line that no template matches becomes an `unparsed` event with its text.

use chrono::{DateTime, Utc};
use regex::bytes::Regex;
use std::collections::BTreeMap;

use super::Decoder;
use crate::sample::{ChannelInfo, ChannelUnit, Fault, Sample, SourceEvent, Status, escape_bytes};
pub use crate::timefmt::{TimeFormat, Zone};

/// One template, checked and compiled.
#[derive(Debug, Clone)]
pub struct Template {
    regex: Regex,
    /// (group index, channel) for value groups.
    values: Vec<(usize, ChannelInfo)>,
    /// (group index, channel) for status groups.
    statuses: Vec<(usize, String)>,
    time: Option<(usize, TimeFormat)>,
    /// Zone of local device times (UTC when `None`).
    zone: Option<Zone>,
    /// The last device time read, to place a repeated local hour.
    last_time: Option<DateTime<Utc>>,
    words: BTreeMap<String, Status>,
}

/// What a template is built from (the config's `[[source.template]]`).
#[derive(Debug, Clone, Default)]
pub struct TemplateSpec {
    /// The regular expression.
    pub pattern: String,
    /// Unit of every channel without its own entry in `units`.
    pub unit: Option<ChannelUnit>,
    /// Unit per channel.
    pub units: BTreeMap<String, ChannelUnit>,
    /// Device words mapped to statuses (`"OR" = over-range`).
    pub status: BTreeMap<String, Status>,
    /// Format of the `time` group.
    pub time_format: Option<TimeFormat>,
    /// Zone of local times in the `time` group (UTC when `None`).
    pub time_zone: Option<Zone>,
}

impl Template {
    /// Compiles and checks a template: every value group needs a unit, a
    /// `_status` group needs its channel, a `time` group needs a format.
    pub fn new(spec: &TemplateSpec) -> Result<Self, String> {
        let regex = Regex::new(&spec.pattern).map_err(|e| {
            // The regex error spans several lines with a caret; its last
            // line says what is wrong.
            let text = e.to_string();
            let why = text
                .lines()
                .last()
                .unwrap_or(&text)
                .trim()
                .trim_start_matches("error: ");
            format!("bad pattern: {why}")
        })?;
        let mut values = Vec::new();
        let mut statuses = Vec::new();
        let mut time = None;
        for (i, name) in regex.capture_names().enumerate() {
            let Some(name) = name else { continue };
            if name == "time" {
                let fmt = spec.time_format.clone().ok_or(
                    "the pattern has a (?P<time>…) group but no time_format is given".to_string(),
                )?;
                time = Some((i, fmt));
            } else if let Some(channel) = name.strip_suffix("_status") {
                statuses.push((i, channel.to_string()));
            } else {
                let unit = spec.units.get(name).copied().or(spec.unit).ok_or_else(|| {
                    format!("no unit for channel `{name}`: give `unit` or `units.{name}`")
                })?;
                values.push((i, ChannelInfo::new(name, unit)));
            }
        }
        if values.is_empty() {
            return Err(
                "the pattern has no named group for a value, e.g. (?P<chamber>[-+0-9.eE]+)".into(),
            );
        }
        for (_, ch) in &statuses {
            if !values.iter().any(|(_, v)| &v.id == ch) {
                return Err(format!(
                    "group `{ch}_status` has no value group `{ch}` in the pattern"
                ));
            }
        }
        for name in spec.units.keys() {
            if !values.iter().any(|(_, v)| &v.id == name) {
                return Err(format!("`units.{name}` names no group of the pattern"));
            }
        }
        Ok(Template {
            regex,
            values,
            statuses,
            time,
            zone: spec.time_zone,
            last_time: None,
            words: spec.status.clone(),
        })
    }

    /// Channels this template produces.
    pub fn channels(&self) -> impl Iterator<Item = &ChannelInfo> {
        self.values.iter().map(|(_, c)| c)
    }

    /// Samples from a line, or `None` when the pattern does not match.
    fn apply(
        &mut self,
        line: &[u8],
        received: DateTime<Utc>,
    ) -> Option<Result<Vec<Sample>, String>> {
        let caps = self.regex.captures(line)?;
        let text = |i: usize| caps.get(i).map(|m| String::from_utf8_lossy(m.as_bytes()));
        let time = match &self.time {
            Some((i, fmt)) => match text(*i) {
                Some(t) => match fmt.read(&t, self.zone, self.last_time) {
                    Ok(read) => {
                        self.last_time = Some(read.time);
                        read.time
                    }
                    Err(why) => return Some(Err(format!("timestamp \"{}\" {why}", t.trim()))),
                },
                None => received,
            },
            None => received,
        };
        let mut out = Vec::with_capacity(self.values.len());
        for (i, ch) in &self.values {
            let Some(raw) = text(*i) else { continue };
            let raw = raw.trim();
            let word_status = self
                .statuses
                .iter()
                .find(|(_, c)| c == &ch.id)
                .and_then(|(j, _)| text(*j))
                .map(|w| self.lookup_word(w.trim()));
            let word_fault = word_status.and_then(Status::fault);
            let sample = match (raw.parse::<f64>(), word_fault) {
                (_, Some(fault)) => Sample::bad(time, &ch.id, ch.unit, fault),
                (Ok(v), _) if v.is_finite() => Sample::ok(time, &ch.id, v, ch.unit),
                _ => {
                    let fault = self
                        .words
                        .get(raw)
                        .and_then(|st| st.fault())
                        .unwrap_or(Fault::Unparsed);
                    Sample::bad(time, &ch.id, ch.unit, fault)
                }
            };
            out.push(sample);
        }
        Some(Ok(out))
    }

    fn lookup_word(&self, word: &str) -> Status {
        self.words.get(word).copied().unwrap_or(Status::Unparsed)
    }
}

/// Tries templates in order; the first that matches wins.
#[derive(Debug, Clone)]
pub struct TemplateDecoder {
    templates: Vec<Template>,
    zero: super::ZeroNotes,
}

impl TemplateDecoder {
    /// A decoder over checked templates.
    pub fn new(templates: Vec<Template>) -> Self {
        TemplateDecoder {
            templates,
            zero: super::ZeroNotes::default(),
        }
    }
}

impl Decoder for TemplateDecoder {
    fn decode(&mut self, line: &[u8], received: DateTime<Utc>, source: &str) -> Vec<SourceEvent> {
        for t in &mut self.templates {
            match t.apply(line, received) {
                None => continue,
                Some(Ok(samples)) => {
                    let mut out = Vec::with_capacity(1);
                    self.zero.check(&samples, source, &mut out);
                    out.insert(0, SourceEvent::Samples(samples));
                    return out;
                }
                Some(Err(e)) => {
                    return vec![SourceEvent::Unparsed {
                        source: source.to_string(),
                        time: received,
                        text: format!("{}  ({})", escape_bytes(line), escape_bytes(e.as_bytes())),
                    }];
                }
            }
        }
        vec![SourceEvent::Unparsed {
            source: source.to_string(),
            time: received,
            text: escape_bytes(line),
        }]
    }

    fn channels(&self) -> Vec<ChannelInfo> {
        let mut out: Vec<ChannelInfo> = Vec::new();
        for t in &self.templates {
            for c in t.channels() {
                if !out.iter().any(|o| o.id == c.id) {
                    out.push(c.clone());
                }
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::{PressureUnit, TemperatureUnit};

    const MBAR: ChannelUnit = ChannelUnit::Pressure(PressureUnit::Mbar);

    fn t0() -> DateTime<Utc> {
        DateTime::<Utc>::UNIX_EPOCH
    }

    fn decoder(specs: &[TemplateSpec]) -> TemplateDecoder {
        TemplateDecoder::new(
            specs
                .iter()
                .map(|s| Template::new(s).expect("valid"))
                .collect(),
        )
    }

    fn samples(events: Vec<SourceEvent>) -> Vec<Sample> {
        events
            .into_iter()
            .flat_map(|e| match e {
                SourceEvent::Samples(s) => s,
                other => panic!("expected samples, got {other:?}"),
            })
            .collect()
    }

    #[test]
    fn several_gauges_per_line_with_status_words() {
        let mut d = decoder(&[TemplateSpec {
            pattern: r"^(?P<a_status>\d),\s*(?P<a>\S+),\s*(?P<b_status>\d),\s*(?P<b>\S+)$".into(),
            unit: Some(MBAR),
            status: [
                ("0", Status::Ok),
                ("1", Status::UnderRange),
                ("2", Status::OverRange),
                ("5", Status::SensorOff),
            ]
            .into_iter()
            .map(|(k, v)| (k.to_string(), v))
            .collect(),
            ..TemplateSpec::default()
        }]);
        let s = samples(d.decode(b"0, 1.2300E-06, 5, 0.0000E+00", t0(), "x"));
        assert_eq!(s.len(), 2);
        assert_eq!(s[0].value(), Some(1.23e-6));
        assert_eq!(s[0].status(), Status::Ok);
        assert_eq!(s[1].status(), Status::SensorOff);
        assert_eq!(s[1].value(), None, "a bad reading never becomes a number");
    }

    /// A pressure not above zero is kept as read, with a note once for
    /// each stretch of such readings of a channel.
    #[test]
    fn a_pressure_not_above_zero_is_said_once_a_stretch() {
        let mut d = decoder(&[TemplateSpec {
            pattern: r"^(?P<a>\S+),(?P<b>\S+)$".into(),
            unit: Some(MBAR),
            ..TemplateSpec::default()
        }]);
        let mut notes = Vec::new();
        for line in [
            "1e-6,2e-6",
            "-1.5e-2,2e-6",
            "-1e-2,0",
            "3e-6,-4e-9",
            "0,1e-6",
        ] {
            let events = d.decode(line.as_bytes(), t0(), "tcp://rig:7001");
            let SourceEvent::Samples(s) = &events[0] else {
                panic!("{events:?}");
            };
            assert_eq!(s.len(), 2, "{line}: every reading kept");
            assert!(s.iter().all(|s| s.status() == Status::Ok), "{line}");
            for e in &events[1..] {
                match e {
                    SourceEvent::Error { source, message } => {
                        assert_eq!(source, "tcp://rig:7001");
                        notes.push(message.clone());
                    }
                    other => panic!("{other:?}"),
                }
            }
        }
        assert_eq!(
            notes,
            [
                "a: pressure -1.5e-2 mbar at 1970-01-01T00:00:00.000Z is not above zero: kept as \
                 read, without a true pressure or kinetics (a gauge's zero drift?); said again \
                 only after a reading above zero",
                "b: pressure 0 mbar at 1970-01-01T00:00:00.000Z is not above zero: kept as read, \
                 without a true pressure or kinetics (a gauge's zero drift?); said again only \
                 after a reading above zero",
                "a: pressure 0 mbar at 1970-01-01T00:00:00.000Z is not above zero: kept as read, \
                 without a true pressure or kinetics (a gauge's zero drift?); said again only \
                 after a reading above zero",
            ]
        );
    }

    #[test]
    fn value_words_and_units_per_channel() {
        let mut d = decoder(&[TemplateSpec {
            pattern: r"P=(?P<p>\S+)\s+T=(?P<t>\S+)".into(),
            units: [
                ("p".to_string(), MBAR),
                (
                    "t".to_string(),
                    ChannelUnit::Temperature(TemperatureUnit::C),
                ),
            ]
            .into_iter()
            .collect(),
            status: [("OVER".to_string(), Status::OverRange)]
                .into_iter()
                .collect(),
            ..TemplateSpec::default()
        }]);
        let s = samples(d.decode(b"P=OVER T=21.5", t0(), "x"));
        assert_eq!(s[0].status(), Status::OverRange);
        assert_eq!(s[1].si(), Some(294.65));
        let s = samples(d.decode(b"P=1.0e-3x T=nan", t0(), "x"));
        assert_eq!(s[0].status(), Status::Unparsed);
        assert_eq!(s[1].status(), Status::Unparsed, "NaN is not a reading");
    }

    #[test]
    fn device_timestamps_are_used() {
        let mut d = decoder(&[TemplateSpec {
            pattern: r"^(?P<time>[^;]+);(?P<p>\S+)$".into(),
            unit: Some(MBAR),
            time_format: TimeFormat::parse("%Y-%m-%d %H:%M:%S%.f").ok(),
            ..TemplateSpec::default()
        }]);
        let s = samples(d.decode(b"2026-03-04 05:06:07.250;2e-5", t0(), "x"));
        assert_eq!(s[0].time.to_rfc3339(), "2026-03-04T05:06:07.250+00:00");
        match &d.decode(b"yesterday;2e-5", t0(), "x")[0] {
            SourceEvent::Unparsed { text, .. } => {
                assert!(text.contains("does not match"), "{text}")
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn unmatched_lines_become_unparsed_with_escaped_text() {
        let mut d = decoder(&[TemplateSpec {
            pattern: r"^(?P<p>[-+0-9.eE]+)$".into(),
            unit: Some(MBAR),
            ..TemplateSpec::default()
        }]);
        match &d.decode(b"\x1b[31mERR\xff", t0(), "src")[0] {
            SourceEvent::Unparsed { text, source, .. } => {
                assert_eq!(text, "\\x1b[31mERR\\xff");
                assert_eq!(source, "src");
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn first_matching_template_wins() {
        let mut d = decoder(&[
            TemplateSpec {
                pattern: r"^A (?P<a>\S+)$".into(),
                unit: Some(MBAR),
                ..TemplateSpec::default()
            },
            TemplateSpec {
                pattern: r"^B (?P<b>\S+)$".into(),
                unit: Some(MBAR),
                ..TemplateSpec::default()
            },
        ]);
        assert_eq!(samples(d.decode(b"B 3", t0(), "x"))[0].channel, "b");
        assert_eq!(d.channels().len(), 2);
    }

    #[test]
    fn bad_templates_are_refused_with_reasons() {
        let e = |pattern: &str, unit: Option<ChannelUnit>| {
            Template::new(&TemplateSpec {
                pattern: pattern.into(),
                unit,
                ..TemplateSpec::default()
            })
            .expect_err("invalid")
        };
        assert!(e("(?P<p>[", Some(MBAR)).contains("bad pattern"));
        assert!(e(r"(?P<p>\S+)", None).contains("no unit for channel `p`"));
        assert!(e(r"\S+", Some(MBAR)).contains("no named group"));
        assert!(e(r"(?P<x_status>\S+)(?P<p>\S+)", Some(MBAR)).contains("no value group `x`"));
        assert!(e(r"(?P<time>\S+) (?P<p>\S+)", Some(MBAR)).contains("time_format"));
        assert!(TimeFormat::parse("dd.mm.yyyy").is_err());
        assert!(TimeFormat::parse("%Q").is_err());
    }

    #[test]
    fn epoch_formats() {
        let read = |f: &TimeFormat, t: &str| f.read(t, None, None).map(|r| r.time);
        let s = read(&TimeFormat::EpochSeconds, "1700000000.5").expect("valid");
        assert_eq!(s.timestamp_millis(), 1_700_000_000_500);
        let ms = read(&TimeFormat::EpochMillis, "1700000000123").expect("valid");
        assert_eq!(ms.timestamp_millis(), 1_700_000_000_123);
        assert!(read(&TimeFormat::EpochSeconds, "inf").is_err());
    }

    #[test]
    fn device_times_in_a_zone() {
        let mut d = decoder(&[TemplateSpec {
            pattern: r"^(?P<time>[^;]+);(?P<p>\S+)$".into(),
            unit: Some(MBAR),
            time_format: TimeFormat::parse("%Y-%m-%d %H:%M:%S").ok(),
            time_zone: Zone::parse("Europe/Vienna").ok(),
            ..TemplateSpec::default()
        }]);
        // Straight through the end of summer time: the repeated hour reads
        // in order.
        let times: Vec<String> = [
            &b"2026-10-25 02:50:00;1"[..],
            b"2026-10-25 02:10:00;1",
            b"2026-10-25 03:10:00;1",
        ]
        .into_iter()
        .map(|l| samples(d.decode(l, t0(), "x"))[0].time.to_rfc3339())
        .collect();
        assert_eq!(
            times,
            [
                "2026-10-25T00:50:00+00:00",
                "2026-10-25T01:10:00+00:00",
                "2026-10-25T02:10:00+00:00"
            ]
        );
        match &d.decode(b"2026-03-29 02:30:00;1", t0(), "x")[0] {
            SourceEvent::Unparsed { text, .. } => {
                assert!(text.contains("does not exist in Europe/Vienna"), "{text}")
            }
            other => panic!("{other:?}"),
        }
    }
}
