//! How timestamps are written, and reading them: one parser for the time
//! format of line templates (`time_format`) and of other loggers' CSV
//! (`[log] time = { format = … }`), so both accept and refuse the same texts
//! with the same messages.
//!
//! A format is `"rfc3339"`, `"epoch-s"`, `"epoch-ms"` or a strftime pattern
//! that gives at least the year, month, day, hour and minute. A pattern
//! without a UTC offset (`%z`) is local time in a [`Zone`] (UTC when none is
//! given).
//!
//! With a named zone, at a daylight-saving change:
//!
//! * a local time that occurs twice (the hour repeated when the clocks go
//!   back) is read as the earlier instant, unless that would put it before
//!   the previous time while the later instant would not — so times written
//!   straight through the change read in order ([`Read::ambiguous`] says so);
//! * a local time that does not exist (skipped when the clocks go forward) is
//!   an error: the clock that wrote it was wrong, and no guess is made.
//!
//! ```
//! use rarefy_core::timefmt::{TimeFormat, Zone};
//! let f = TimeFormat::parse("%d.%m.%Y %H:%M:%S").unwrap();
//! let zone = Zone::parse("+01:00").unwrap();
//! let t = f.read("04.03.2026 06:00:00", Some(zone), None).unwrap();
//! assert_eq!(t.time.to_rfc3339(), "2026-03-04T05:00:00+00:00");
//! assert!(TimeFormat::parse("%s").unwrap_err().contains("epoch-s"));
//! ```

use chrono::format::{Fixed, Item, Numeric, StrftimeItems};
use chrono::{
    DateTime, FixedOffset, LocalResult, NaiveDate, NaiveDateTime, NaiveTime, Offset, TimeZone, Utc,
};
use chrono_tz::Tz;
use std::fmt::{self, Write as _};

/// How rarefy writes every timestamp (logs, events, messages): RFC 3339,
/// UTC, with milliseconds (`2026-11-09T09:31:11.000Z`).
pub fn write_rfc3339(t: DateTime<Utc>) -> String {
    let mut s = String::with_capacity(24);
    push_rfc3339(&mut s, t);
    s
}

/// Reads an RFC 3339 time in the fixed layout logs are written in —
/// `YYYY-MM-DDTHH:MM:SS[.f…](Z|±HH:MM)`, 1 to 9 fraction digits — from its
/// bytes, without the general parser's work. `None` for anything else
/// (another layout, a leap second, an impossible date): the general parser
/// then decides, and words any error. Where both read a text, they give
/// the same instant and offset.
pub fn parse_rfc3339_fast(text: &str) -> Option<DateTime<FixedOffset>> {
    let b = text.as_bytes();
    fast_time_of_day(b, fast_date(b)?)
}

/// The date of a fixed-layout RFC 3339 time: `YYYY-MM-DD` in its first 10
/// bytes (nothing else is looked at), when it is a real date.
fn fast_date(b: &[u8]) -> Option<NaiveDate> {
    let b = b.get(..10)?;
    if b[4] != b'-' || b[7] != b'-' {
        return None;
    }
    let year = fast_digits(b, 0, 4)?;
    let (month, day) = (fast_digits(b, 5, 2)?, fast_digits(b, 8, 2)?);
    NaiveDate::from_ymd_opt(year as i32, month, day)
}

/// The `n` digits from `from` of `b` as a number; `None` when one is not
/// an ASCII digit or `b` is shorter.
fn fast_digits(b: &[u8], from: usize, n: usize) -> Option<u32> {
    let mut v = 0u32;
    for &c in b.get(from..from + n)? {
        let d = c.wrapping_sub(b'0');
        if d > 9 {
            return None;
        }
        v = v * 10 + u32::from(d);
    }
    Some(v)
}

/// The rest of a fixed-layout RFC 3339 time after its date (`date`, read
/// from the first 10 bytes): `THH:MM:SS[.f…](Z|±HH:MM)`.
fn fast_time_of_day(b: &[u8], date: NaiveDate) -> Option<DateTime<FixedOffset>> {
    if let Some(time) = writer_time_of_day(b) {
        let utc = FixedOffset::east_opt(0)?;
        return Some(DateTime::from_naive_utc_and_offset(
            date.and_time(time),
            utc,
        ));
    }
    if b.len() < 20 || b[10] != b'T' || b[13] != b':' || b[16] != b':' {
        return None;
    }
    let (hour, minute) = (fast_digits(b, 11, 2)?, fast_digits(b, 14, 2)?);
    let second = fast_digits(b, 17, 2)?;
    if hour > 23 || minute > 59 || second > 59 {
        return None;
    }
    let mut i = 19;
    let mut nanos = 0u32;
    if b[i] == b'.' {
        let start = i + 1;
        let mut end = start;
        while end < b.len() && b[end].is_ascii_digit() {
            end += 1;
        }
        let n = end - start;
        if !(1..=9).contains(&n) {
            return None;
        }
        nanos = fast_digits(b, start, n)? * 10u32.pow(9 - n as u32);
        i = end;
    }
    let offset_s: i32 = match &b[i..] {
        [b'Z' | b'z'] => 0,
        [sign @ (b'+' | b'-'), _, _, b':', _, _] => {
            let (h, m) = (fast_digits(b, i + 1, 2)?, fast_digits(b, i + 4, 2)?);
            if h > 23 || m > 59 {
                return None;
            }
            let s = (h * 3600 + m * 60) as i32;
            if *sign == b'-' { -s } else { s }
        }
        _ => return None,
    };
    let local = date.and_hms_nano_opt(hour, minute, second, nanos)?;
    let offset = FixedOffset::east_opt(offset_s)?;
    // Subtracting a zero offset changes nothing.
    let utc = if offset_s == 0 {
        local
    } else {
        local.checked_sub_offset(offset)?
    };
    Some(DateTime::from_naive_utc_and_offset(utc, offset))
}

/// The time of day of a time in the writer's layout, UTC with
/// milliseconds (`THH:MM:SS.mmmZ`, bytes 10 to 24 of 24), read at fixed
/// places; `None` for any other text (which [`fast_time_of_day`] reads on).
#[inline(always)]
fn writer_time_of_day(b: &[u8]) -> Option<NaiveTime> {
    const ONES: u64 = 0x0101_0101_0101_0101;
    const ZEROS: u64 = ONES * b'0' as u64;
    if b.len() != 24 || b[10] != b'T' {
        return None;
    }
    // `HH:MM:SS` (bytes 11 to 19) and `:SS.mmmZ` (16 to 24) as words, the
    // first byte lowest; the masks pick the digits of each.
    let hms = u64::from_le_bytes(*b[11..].first_chunk::<8>()?);
    let sub = u64::from_le_bytes(*b[16..].first_chunk::<8>()?);
    const HMS_DIGITS: u64 = 0xFFFF_00FF_FF00_FFFF;
    const HMS_MARKS: u64 = (b':' as u64) << 16 | (b':' as u64) << 40;
    const SUB_DIGITS: u64 = 0x00FF_FFFF_0000_0000;
    const SUB_MARKS_AT: u64 = 0xFF00_0000_FF00_00FF;
    const SUB_MARKS: u64 = b':' as u64 | (b'.' as u64) << 24 | (b'Z' as u64) << 56;
    if hms & !HMS_DIGITS != HMS_MARKS || sub & SUB_MARKS_AT != SUB_MARKS {
        return None;
    }
    // Every other byte made a '0', then each byte checked to be a digit
    // (its top bit set, when below b'0' or above b'9', by one of the two).
    let hms = (hms & HMS_DIGITS) | (ZEROS & !HMS_DIGITS);
    let sub = (sub & SUB_DIGITS) | (ZEROS & !SUB_DIGITS);
    let no_digit = |w: u64| (w.wrapping_sub(ZEROS) | w.wrapping_add(ONES * 0x46)) & (ONES * 0x80);
    if no_digit(hms) | no_digit(sub) != 0 {
        return None;
    }
    // Each pair of digits into its first byte.
    let (hms, sub) = (hms - ZEROS, sub - ZEROS);
    let pairs = hms * 10 + (hms >> 8);
    let (hour, minute, second) = (pairs & 0xFF, (pairs >> 24) & 0xFF, (pairs >> 48) & 0xFF);
    if hour > 23 || minute > 59 || second > 59 {
        return None;
    }
    let millis = ((sub >> 32) & 0xFF) * 100 + ((sub >> 40) & 0xFF) * 10 + ((sub >> 48) & 0xFF);
    // All below 2^32.
    NaiveTime::from_num_seconds_from_midnight_opt(
        (hour * 3600 + minute * 60 + second) as u32,
        (millis * 1_000_000) as u32,
    )
}

/// [`parse_rfc3339_fast`] for a run of times, most of them of one day:
/// the date of the last time read is kept, and a time whose first 10 bytes
/// are the same reuses it, so only its time of day is read. Gives what
/// [`parse_rfc3339_fast`] gives for every text.
#[derive(Debug, Clone, Default)]
pub(crate) struct Rfc3339Days {
    /// The first 10 bytes of the last time whose date was read, and that
    /// date.
    last: Option<([u8; 10], NaiveDate)>,
}

impl Rfc3339Days {
    /// [`parse_rfc3339_fast`] of `text` (as bytes), reusing the date of the
    /// time before when `text` starts with the same 10 bytes.
    pub(crate) fn parse_fast(&mut self, text: &[u8]) -> Option<DateTime<FixedOffset>> {
        // Compared as arrays: a few word compares, not a call.
        let key = text.first_chunk::<10>()?;
        let date = match self.last {
            Some((k, date)) if k == *key => date,
            _ => {
                let date = fast_date(key)?;
                self.last = Some((*key, date));
                date
            }
        };
        fast_time_of_day(text, date)
    }
}

/// Reads an RFC 3339 time: the fast path for the fixed layout, else the
/// general parser.
pub fn parse_rfc3339(text: &str) -> chrono::ParseResult<DateTime<FixedOffset>> {
    match parse_rfc3339_fast(text) {
        Some(t) => Ok(t),
        None => DateTime::parse_from_rfc3339(text),
    }
}

/// Appends `t` as [`write_rfc3339`] writes it (the one implementation),
/// without allocating.
pub fn push_rfc3339(out: &mut String, t: DateTime<Utc>) {
    match rfc3339_millis(t) {
        // Every byte is ASCII.
        Some(buf) => out.push_str(std::str::from_utf8(&buf).unwrap_or_default()),
        None => out.push_str(&chrono_text(t)),
    }
}

/// [`push_rfc3339`] onto bytes (a CSV line being built).
pub fn push_rfc3339_bytes(out: &mut Vec<u8>, t: DateTime<Utc>) {
    match rfc3339_millis(t) {
        Some(buf) => out.extend_from_slice(&buf),
        None => out.extend_from_slice(chrono_text(t).as_bytes()),
    }
}

/// `t` as chrono writes it with milliseconds and `Z`: for the years
/// [`rfc3339_millis`] cannot hold.
fn chrono_text(t: DateTime<Utc>) -> String {
    t.to_rfc3339_opts(chrono::SecondsFormat::Millis, true)
}

/// `t` as `YYYY-MM-DDTHH:MM:SS.mmmZ`; `None` for years RFC 3339 cannot
/// hold in four digits (chrono's form is written for them).
fn rfc3339_millis(t: DateTime<Utc>) -> Option<[u8; 24]> {
    use chrono::{Datelike, Timelike};
    // The UTC fields straight (a `DateTime`'s own accessors go through its
    // offset every call).
    let (date, time) = (t.naive_utc().date(), t.naive_utc().time());
    let (y, mo, d) = (date.year(), date.month(), date.day());
    let (h, mi, s) = (time.hour(), time.minute(), time.second());
    // A leap second shows as :60, as chrono writes it.
    let nanos = time.nanosecond();
    let (s, ms) = if nanos >= 1_000_000_000 {
        (s + 1, (nanos - 1_000_000_000) / 1_000_000)
    } else {
        (s, nanos / 1_000_000)
    };
    if !(0..=9999).contains(&y) {
        return None;
    }
    let mut buf = *b"0000-00-00T00:00:00.000Z";
    let mut put = |at: usize, v: u32, n: usize| {
        let mut v = v;
        for i in (0..n).rev() {
            buf[at + i] = b'0' + (v % 10) as u8;
            v /= 10;
        }
    };
    put(0, y as u32, 4);
    put(5, mo, 2);
    put(8, d, 2);
    put(11, h, 2);
    put(14, mi, 2);
    put(17, s, 2);
    put(20, ms, 3);
    Some(buf)
}

/// [`push_rfc3339_bytes`] keeping the text of the last date written: the
/// times of a CSV are nearly all of the day before's, so a time costs its
/// time of day alone.
#[derive(Debug, Clone, Default)]
pub struct Rfc3339Writer {
    /// The last date written and a text of it (its time of day is
    /// overwritten each time).
    day: Option<(chrono::NaiveDate, [u8; 24])>,
}

/// The most bytes [`Rfc3339Writer::lay_at`] writes: 24 for a year of four
/// digits, 27 for chrono's longest (`+262142-12-31T23:59:60.999Z`).
pub const RFC3339_MOST: usize = 32;

impl Rfc3339Writer {
    /// Appends `t` as [`push_rfc3339_bytes`] does.
    #[inline]
    pub fn push(&mut self, out: &mut Vec<u8>, t: DateTime<Utc>) {
        match self.text(t) {
            Some(buf) => out.extend_from_slice(&buf),
            None => push_rfc3339_bytes(out, t),
        }
    }

    /// Writes `t` as [`push_rfc3339_bytes`] does at `out[at..]`; returns the
    /// index after it.
    ///
    /// # Panics
    /// When `out` has fewer than [`RFC3339_MOST`] bytes from `at` (the
    /// caller sizes its buffer first).
    #[inline]
    pub fn lay_at(&mut self, out: &mut [u8], at: usize, t: DateTime<Utc>) -> usize {
        match self.text(t) {
            Some(buf) => {
                out[at..at + 24].copy_from_slice(&buf);
                at + 24
            }
            None => {
                let text = chrono_text(t);
                out[at..at + text.len()].copy_from_slice(text.as_bytes());
                at + text.len()
            }
        }
    }

    /// `t` as `YYYY-MM-DDTHH:MM:SS.mmmZ` from the cached date's text;
    /// `None` for years RFC 3339 cannot hold in four digits.
    #[inline]
    fn text(&mut self, t: DateTime<Utc>) -> Option<[u8; 24]> {
        use chrono::Timelike;
        let naive = t.naive_utc();
        let (date, time) = (naive.date(), naive.time());
        let mut buf = match self.day {
            Some((d, text)) if d == date => text,
            _ => {
                let text = rfc3339_millis(t)?;
                self.day = Some((date, text));
                text
            }
        };
        let secs = time.num_seconds_from_midnight();
        // A leap second shows as :60, as chrono writes it.
        let nanos = time.nanosecond();
        let (leap, ms) = if nanos >= 1_000_000_000 {
            (1, (nanos - 1_000_000_000) / 1_000_000)
        } else {
            (0, nanos / 1_000_000)
        };
        let (h, mi, s) = (secs / 3600, secs / 60 % 60, secs % 60 + leap);
        let two = |v: u32| [b'0' + (v / 10) as u8, b'0' + (v % 10) as u8];
        buf[11..13].copy_from_slice(&two(h));
        buf[14..16].copy_from_slice(&two(mi));
        buf[17..19].copy_from_slice(&two(s));
        buf[20] = b'0' + (ms / 100) as u8;
        buf[21..23].copy_from_slice(&two(ms % 100));
        Some(buf)
    }
}

#[cfg(test)]
mod rfc3339_writer_tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        /// Times in runs of one day and across days, years RFC 3339
        /// cannot hold, and leap seconds: the same bytes as the writer
        /// without a cache.
        #[test]
        fn writes_what_push_rfc3339_bytes_writes(
            start in -62_000_000_000_000i64..253_402_300_799_999,
            steps in prop::collection::vec(prop_oneof![
                4 => 0i64..1_000,
                2 => 0i64..200_000_000,
                1 => -100_000_000i64..0,
                1 => -300_000_000_000_000i64..300_000_000_000_000,
            ], 1..40),
            leap in prop::collection::vec(any::<bool>(), 40),
        ) {
            let mut w = Rfc3339Writer::default();
            let mut ms = start;
            for (i, step) in steps.into_iter().enumerate() {
                ms = ms.saturating_add(step);
                let secs = ms.div_euclid(1000);
                let mut nanos = (ms.rem_euclid(1000) * 1_000_000) as u32;
                // A leap second: chrono allows it at any second ending :59.
                if leap[i] && secs.rem_euclid(60) == 59 {
                    nanos += 1_000_000_000;
                }
                let Some(t) = DateTime::from_timestamp(secs, nanos) else {
                    continue;
                };
                let (mut a, mut b) = (b"x,".to_vec(), b"x,".to_vec());
                w.push(&mut a, t);
                push_rfc3339_bytes(&mut b, t);
                prop_assert_eq!(&a, &b, "{}", t);
                prop_assert_eq!(laid_at(&mut w, t), &b[2..], "{}", t);
            }
        }
    }

    #[test]
    fn years_outside_four_digits_and_a_leap_second() {
        let mut w = Rfc3339Writer::default();
        for t in [
            DateTime::from_timestamp(-62_200_000_000, 0),
            DateTime::from_timestamp(253_402_300_800, 5_000_000),
            DateTime::from_timestamp(1_483_228_799, 1_250_000_000),
            DateTime::from_timestamp(1_483_228_799, 999_000_000),
        ]
        .into_iter()
        .flatten()
        {
            let (mut a, mut b) = (Vec::new(), Vec::new());
            w.push(&mut a, t);
            push_rfc3339_bytes(&mut b, t);
            assert_eq!(a, b, "{t}");
            assert_eq!(laid_at(&mut w, t), b, "{t}");
        }
        // chrono's first and last times fit in RFC3339_MOST.
        for t in [DateTime::<Utc>::MIN_UTC, DateTime::<Utc>::MAX_UTC] {
            let mut b = Vec::new();
            push_rfc3339_bytes(&mut b, t);
            assert!(b.len() <= RFC3339_MOST, "{}", b.len());
            assert_eq!(laid_at(&mut w, t), b, "{t}");
        }
    }

    /// `t` laid out by [`Rfc3339Writer::lay_at`] after 3 bytes of a line,
    /// in a buffer of exactly the room it asks for; the bytes before and
    /// after untouched.
    fn laid_at(w: &mut Rfc3339Writer, t: DateTime<Utc>) -> Vec<u8> {
        let mut out = [b'#'; 3 + RFC3339_MOST];
        let end = w.lay_at(&mut out, 3, t);
        assert_eq!(out[..3], *b"###");
        assert!(out[end..].iter().all(|&c| c == b'#'), "{t}");
        out[3..end].to_vec()
    }
}

/// Seconds from `a` to `b`, at millisecond resolution:
/// `(b - a).num_milliseconds() as f64 / 1000.0`, the engine's one way of
/// measuring data time, without chrono's general duration arithmetic on
/// every reading. Two times of the same day (nearly every pair a log
/// gives) differ by their times of day alone.
#[inline]
pub fn seconds_between(a: DateTime<Utc>, b: DateTime<Utc>) -> f64 {
    millis_between(a, b) as f64 / 1000.0
}

/// Whole milliseconds from `a` to `b`, truncated toward zero, as
/// `(b - a).num_milliseconds()` gives them.
#[inline(always)]
pub fn millis_between(a: DateTime<Utc>, b: DateTime<Utc>) -> i64 {
    use chrono::Timelike;
    // The UTC fields straight (a `DateTime`'s own accessors go through its
    // offset every call).
    let (a_utc, b_utc) = (a.naive_utc(), b.naive_utc());
    let (ta, tb) = (a_utc.time(), b_utc.time());
    let (na, nb) = (ta.nanosecond(), tb.nanosecond());
    // Two times of one day, neither in a leap second: nearly every call.
    if a_utc.date() != b_utc.date() || na >= 1_000_000_000 || nb >= 1_000_000_000 {
        return millis_between_days(a, b);
    }
    let secs =
        i64::from(tb.num_seconds_from_midnight()) - i64::from(ta.num_seconds_from_midnight());
    (secs * 1_000_000_000 + i64::from(nb) - i64::from(na)) / 1_000_000
}

/// [`millis_between`] of two days, or with a leap second.
#[inline(never)]
fn millis_between_days(a: DateTime<Utc>, b: DateTime<Utc>) -> i64 {
    use chrono::{Datelike, Timelike};
    let (a_utc, b_utc) = (a.naive_utc(), b.naive_utc());
    let (ta, tb) = (a_utc.time(), b_utc.time());
    let (na, nb) = (ta.nanosecond(), tb.nanosecond());
    let (da, db) = (a_utc.date(), b_utc.date());
    // Days of one year differ by their ordinals (chrono keeps the year and
    // ordinal packed; the days from the era need a calendar computation).
    let days = if da == db {
        0
    } else if da.year() == db.year() {
        i64::from(db.ordinal()) - i64::from(da.ordinal())
    } else {
        i64::from(db.num_days_from_ce()) - i64::from(da.num_days_from_ce())
    };
    // A leap second (nanoseconds past 1e9) and far-apart dates go the
    // general way.
    if na >= 1_000_000_000 || nb >= 1_000_000_000 || days.abs() > 100_000 {
        return (b - a).num_milliseconds();
    }
    let secs = days * 86_400 + i64::from(tb.num_seconds_from_midnight())
        - i64::from(ta.num_seconds_from_midnight());
    let nanos = secs * 1_000_000_000 + i64::from(nb) - i64::from(na);
    nanos / 1_000_000
}

/// How times are written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TimeFormat {
    /// RFC 3339 with an offset (`2026-10-25T01:20:00+02:00`).
    Rfc3339,
    /// Seconds since 1970-01-01 UTC, optionally with a fraction.
    EpochSeconds,
    /// Milliseconds since 1970-01-01 UTC, optionally with a fraction.
    EpochMillis,
    /// A strftime pattern.
    Pattern {
        /// The pattern.
        pattern: String,
        /// Whether the text carries its own offset (`%z` …); else it is
        /// local time in the given zone.
        absolute: bool,
    },
}

/// A time read from a text.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Read {
    /// The instant.
    pub time: DateTime<Utc>,
    /// The local time occurred twice in its zone (see the module docs).
    pub ambiguous: bool,
    /// The UTC offset the text carried (RFC 3339, or a pattern with `%z`
    /// …); `None` for epoch numbers and local times read in a zone.
    pub offset: Option<FixedOffset>,
}

/// Whether `text` is an RFC 3339 date and time but for its missing UTC
/// offset (`2026-03-29T01:30:00`): a time that could be in any zone.
pub fn lacks_offset(text: &str) -> bool {
    let t = text.trim();
    !t.is_empty() && DateTime::parse_from_rfc3339(&format!("{t}Z")).is_ok()
}

/// Why a time without a UTC offset is not used (to follow the quoted
/// time), naming the offset of the times before it when there were some.
pub fn missing_offset(before: Option<FixedOffset>) -> String {
    let others = before
        .map(|o| format!(", unlike the times before it (at {o})"))
        .unwrap_or_default();
    format!(
        "has no UTC offset{others}: the zone it was written in is unknown, so the row is not used \
         (RFC 3339 times end in Z or an offset such as +01:00)"
    )
}

impl TimeFormat {
    /// Reads a format: `rfc3339`, `epoch-s`, `epoch-ms` or a strftime
    /// pattern, checked (every `%` item known, no `%s`, a full date and
    /// time). The message says what was expected.
    pub fn parse(text: &str) -> Result<Self, String> {
        let text = text.trim();
        match text {
            "rfc3339" | "RFC3339" | "rfc-3339" => Ok(TimeFormat::Rfc3339),
            "epoch-s" => Ok(TimeFormat::EpochSeconds),
            "epoch-ms" => Ok(TimeFormat::EpochMillis),
            p if p.contains('%') => check_pattern(p).map(|absolute| TimeFormat::Pattern {
                pattern: p.to_string(),
                absolute,
            }),
            other => {
                let hint = crate::suggest::nearest(other, ["rfc3339", "epoch-s", "epoch-ms"])
                    .map(|s| format!("did you mean \"{s}\"? "))
                    .unwrap_or_default();
                Err(format!(
                    "unknown time format \"{}\"; {hint}expected \"rfc3339\", \"epoch-s\", \"epoch-ms\" \
                     or a strftime pattern such as \"%d.%m.%Y %H:%M:%S\"",
                    other.escape_debug()
                ))
            }
        }
    }

    /// Whether times in this format are local times, read in a zone.
    pub fn is_local(&self) -> bool {
        matches!(
            self,
            TimeFormat::Pattern {
                absolute: false,
                ..
            }
        )
    }

    /// Whether the format counts from the epoch (and so is a number, which
    /// a decimal comma may be written in).
    pub fn is_epoch(&self) -> bool {
        matches!(self, TimeFormat::EpochSeconds | TimeFormat::EpochMillis)
    }

    /// Reads a time. Local times are read in `zone` (UTC when `None`);
    /// `previous`, the time read before this one, picks between the two
    /// instants of a repeated local time. The message says why the text
    /// does not fit, to follow the text itself (`"… does not match format
    /// \"%Y\" (…)"`).
    pub fn read(
        &self,
        text: &str,
        zone: Option<Zone>,
        previous: Option<DateTime<Utc>>,
    ) -> Result<Read, String> {
        let text = text.trim();
        let epoch = |time: DateTime<Utc>| Read {
            time,
            ambiguous: false,
            offset: None,
        };
        let absolute = |t: DateTime<FixedOffset>| Read {
            time: t.with_timezone(&Utc),
            ambiguous: false,
            offset: Some(t.offset().fix()),
        };
        match self {
            TimeFormat::Rfc3339 => parse_rfc3339(text).map(absolute).map_err(|e| {
                if lacks_offset(text) {
                    missing_offset(None)
                } else {
                    format!("is not RFC 3339, e.g. 2026-10-25T01:20:00+02:00 ({e})")
                }
            }),
            TimeFormat::EpochSeconds => parse_epoch(text, 1_000_000_000)
                .map(epoch)
                .ok_or_else(|| "is not a number of seconds since 1970-01-01 UTC".to_string()),
            TimeFormat::EpochMillis => parse_epoch(text, 1_000_000)
                .map(epoch)
                .ok_or_else(|| "is not a number of milliseconds since 1970-01-01 UTC".to_string()),
            TimeFormat::Pattern { pattern, absolute } => {
                read_pattern(pattern, *absolute, None, text, zone, previous)
            }
        }
    }
}

/// A text read with a strftime pattern, its items parsed beforehand
/// (`items`) or from the pattern now: what `DateTime::parse_from_str` and
/// `NaiveDateTime::parse_from_str` do, messages included.
fn read_pattern(
    pattern: &str,
    absolute: bool,
    items: Option<&[Item<'static>]>,
    text: &str,
    zone: Option<Zone>,
    previous: Option<DateTime<Utc>>,
) -> Result<Read, String> {
    let mut parsed = chrono::format::Parsed::new();
    let done = match items {
        Some(items) => chrono::format::parse(&mut parsed, text, items.iter()),
        None => chrono::format::parse(&mut parsed, text, StrftimeItems::new(pattern)),
    };
    let bad = |e: chrono::ParseError| format!("does not match format \"{pattern}\" ({e})");
    if absolute {
        let t = done.and_then(|()| parsed.to_datetime()).map_err(bad)?;
        return Ok(Read {
            time: t.with_timezone(&Utc),
            ambiguous: false,
            offset: Some(t.offset().fix()),
        });
    }
    let naive = done
        .and_then(|()| parsed.to_naive_datetime_with_offset(0))
        .map_err(bad)?;
    let zone = zone.unwrap_or(Zone::Fixed(Utc.fix()));
    localize(naive, zone, previous).map(|(time, ambiguous)| Read {
        time,
        ambiguous,
        offset: None,
    })
}

/// A [`TimeFormat`] made ready to read many texts: a pattern's items are
/// parsed once (`parse_from_str` parses the pattern again for every text).
/// Reads as [`TimeFormat::read`] does, messages included.
#[derive(Debug, Clone)]
pub struct TimeReader {
    format: TimeFormat,
    /// A pattern's items; `None` for the other formats, and for a pattern
    /// with an item chrono cannot take (read as before, so that its error
    /// comes where it did).
    items: Option<Vec<Item<'static>>>,
    /// A local-time pattern of numbers, separators and a fraction of a
    /// second ([`Layout`]): read without chrono's general parser when the
    /// text fits it exactly.
    layout: Option<Vec<Layout>>,
}

/// One part of a local-time pattern the [`TimeReader`] reads itself: a
/// number of fixed width (its digits all there), a literal byte, blanks, or
/// a fraction of a second. Where a text does not fit exactly, chrono reads
/// it (so that its result and message are chrono's); where it fits, chrono
/// would read the same fields (its numbers take up to their width in
/// digits, its blanks any amount of white space).
#[derive(Debug, Clone, Copy, PartialEq)]
enum Layout {
    /// `%Y`: four digits.
    Year,
    /// `%m`, `%d`, `%H`, `%M`, `%S`: two digits, into field 1 to 5.
    Two(usize),
    /// A byte of a literal.
    Byte(u8),
    /// A blank in the pattern: any white space, or none.
    Blanks,
    /// `%.3f`, `%.6f`, `%.9f`: a point and that many digits, or nothing.
    Fraction(usize),
    /// `%.f`: a point and one to nine digits (more are skipped), or nothing.
    AnyFraction,
}

impl Layout {
    /// The layout of `items`, when every item is one the reader reads
    /// itself, each field at most once, and the date, hour and minute are
    /// all there.
    fn of(items: &[Item<'_>]) -> Option<Vec<Layout>> {
        use chrono::format::Numeric as N;
        let mut out = Vec::new();
        let mut seen = [false; 6];
        for item in items {
            let field = match item {
                Item::Numeric(N::Year, _) => Some((0, Layout::Year)),
                Item::Numeric(N::Month, _) => Some((1, Layout::Two(1))),
                Item::Numeric(N::Day, _) => Some((2, Layout::Two(2))),
                Item::Numeric(N::Hour, _) => Some((3, Layout::Two(3))),
                Item::Numeric(N::Minute, _) => Some((4, Layout::Two(4))),
                Item::Numeric(N::Second, _) => Some((5, Layout::Two(5))),
                Item::Literal(l) => {
                    out.extend(l.bytes().map(Layout::Byte));
                    None
                }
                Item::OwnedLiteral(l) => {
                    out.extend(l.bytes().map(Layout::Byte));
                    None
                }
                Item::Space(_) | Item::OwnedSpace(_) => {
                    out.push(Layout::Blanks);
                    None
                }
                Item::Fixed(Fixed::Nanosecond3) => {
                    out.push(Layout::Fraction(3));
                    None
                }
                Item::Fixed(Fixed::Nanosecond6) => {
                    out.push(Layout::Fraction(6));
                    None
                }
                Item::Fixed(Fixed::Nanosecond9) => {
                    out.push(Layout::Fraction(9));
                    None
                }
                Item::Fixed(Fixed::Nanosecond) => {
                    out.push(Layout::AnyFraction);
                    None
                }
                _ => return None,
            };
            if let Some((k, part)) = field {
                if std::mem::replace(&mut seen[k], true) {
                    return None;
                }
                out.push(part);
            }
        }
        let fractions = out
            .iter()
            .filter(|p| matches!(p, Layout::Fraction(_) | Layout::AnyFraction))
            .count();
        (seen[..5].iter().all(|&s| s) && fractions <= 1).then_some(out)
    }

    /// `text` read with `layout`, when it fits exactly and is a valid date
    /// and time (no leap second); else `None`.
    fn read(layout: &[Layout], text: &str) -> Option<NaiveDateTime> {
        let mut s = text.as_bytes();
        // Year, month, day, hour, minute, second.
        let mut f = [0u32; 6];
        let mut nano = 0u32;
        let digits = |s: &[u8], n: usize| -> Option<u32> {
            s.get(..n)?.iter().try_fold(0u32, |v, &c| {
                c.is_ascii_digit().then(|| v * 10 + u32::from(c - b'0'))
            })
        };
        for part in layout {
            match *part {
                Layout::Year => {
                    f[0] = digits(s, 4)?;
                    s = &s[4..];
                }
                Layout::Two(k) => {
                    f[k] = digits(s, 2)?;
                    s = &s[2..];
                }
                Layout::Byte(b) => {
                    let (&c, rest) = s.split_first()?;
                    if c != b {
                        return None;
                    }
                    s = rest;
                }
                Layout::Blanks => {
                    // As chrono does: `str::trim_start` (Unicode white space).
                    s = std::str::from_utf8(s).ok()?.trim_start().as_bytes();
                }
                Layout::Fraction(n) => {
                    if let Some(rest) = s.strip_prefix(b".") {
                        nano = digits(rest, n)? * 10u32.pow(9 - n as u32);
                        s = &rest[n..];
                    }
                }
                Layout::AnyFraction => {
                    if let Some(rest) = s.strip_prefix(b".") {
                        let n = rest
                            .iter()
                            .take(9)
                            .take_while(|c| c.is_ascii_digit())
                            .count();
                        if n == 0 {
                            return None;
                        }
                        nano = digits(rest, n)? * 10u32.pow(9 - n as u32);
                        let more = rest[n..].iter().take_while(|c| c.is_ascii_digit()).count();
                        s = &rest[n + more..];
                    }
                }
            }
        }
        if !s.is_empty() || f[3] > 23 || f[4] > 59 || f[5] > 59 {
            return None;
        }
        let date = NaiveDate::from_ymd_opt(i32::try_from(f[0]).ok()?, f[1], f[2])?;
        let time = NaiveTime::from_hms_nano_opt(f[3], f[4], f[5], nano)?;
        Some(NaiveDateTime::new(date, time))
    }
}

impl TimeReader {
    /// Ready to read `format`.
    pub fn new(format: &TimeFormat) -> Self {
        let items = match format {
            TimeFormat::Pattern { pattern, .. } => {
                StrftimeItems::new(pattern).parse_to_owned().ok()
            }
            _ => None,
        };
        let layout = match (format, &items) {
            (
                TimeFormat::Pattern {
                    absolute: false, ..
                },
                Some(items),
            ) => Layout::of(items),
            _ => None,
        };
        TimeReader {
            format: format.clone(),
            items,
            layout,
        }
    }

    /// [`TimeFormat::read`].
    pub fn read(
        &self,
        text: &str,
        zone: Option<Zone>,
        previous: Option<DateTime<Utc>>,
    ) -> Result<Read, String> {
        if let Some(naive) = self
            .layout
            .as_ref()
            .and_then(|l| Layout::read(l, text.trim()))
        {
            let zone = zone.unwrap_or(Zone::Fixed(Utc.fix()));
            return localize(naive, zone, previous).map(|(time, ambiguous)| Read {
                time,
                ambiguous,
                offset: None,
            });
        }
        match (&self.format, &self.items) {
            (TimeFormat::Pattern { pattern, absolute }, Some(items)) => {
                read_pattern(pattern, *absolute, Some(items), text.trim(), zone, previous)
            }
            (format, _) => format.read(text, zone, previous),
        }
    }
}

impl fmt::Display for TimeFormat {
    /// The format as written in a config: `rfc3339`, `epoch-s`, `epoch-ms`
    /// or the quoted pattern.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            TimeFormat::Rfc3339 => f.write_str("rfc3339"),
            TimeFormat::EpochSeconds => f.write_str("epoch-s"),
            TimeFormat::EpochMillis => f.write_str("epoch-ms"),
            TimeFormat::Pattern { pattern, .. } => write!(f, "\"{pattern}\""),
        }
    }
}

/// A time zone for local times.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Zone {
    /// An IANA time zone, with its daylight-saving rules.
    Named(Tz),
    /// A fixed offset from UTC.
    Fixed(FixedOffset),
}

impl fmt::Display for Zone {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Zone::Named(tz) => f.write_str(tz.name()),
            Zone::Fixed(o) => write!(f, "{o}"),
        }
    }
}

impl Zone {
    /// Reads a time zone: an IANA name (`"Europe/Vienna"`, `"UTC"`) or a
    /// fixed offset (`"+01:00"`); an unknown name gets a suggestion.
    pub fn parse(text: &str) -> Result<Zone, String> {
        let t = text.trim();
        if let Ok(tz) = t.parse::<Tz>() {
            return Ok(Zone::Named(tz));
        }
        if let Some(body) = t.strip_prefix(['+', '-']) {
            let bad = || {
                format!(
                    "bad UTC offset \"{}\"; expected e.g. \"+01:00\" or \"-05:30\"",
                    t.escape_debug()
                )
            };
            let sign = if t.starts_with('-') { -1 } else { 1 };
            let (h, m) = body.split_once(':').unwrap_or((body, "0"));
            let (Ok(h), Ok(m)) = (h.parse::<i32>(), m.parse::<i32>()) else {
                return Err(bad());
            };
            if !(0..=23).contains(&h) || !(0..=59).contains(&m) {
                return Err(bad());
            }
            return FixedOffset::east_opt(sign * (h * 3600 + m * 60))
                .map(Zone::Fixed)
                .ok_or_else(bad);
        }
        let names = chrono_tz::TZ_VARIANTS.iter().map(|z| z.name());
        let lower = t.to_ascii_lowercase();
        let hint = names
            .clone()
            .find(|n| n.to_ascii_lowercase() == lower)
            .or_else(|| {
                let suffix = format!("/{lower}");
                names
                    .clone()
                    .find(|n| n.to_ascii_lowercase().ends_with(&suffix))
            })
            .or_else(|| crate::suggest::nearest(t, names));
        let hint = hint
            .map(|s| format!("; did you mean \"{s}\"?"))
            .unwrap_or_default();
        Err(format!(
            "unknown time zone \"{}\"{hint} (expected an IANA name such as \"Europe/Vienna\" or \"UTC\", or an offset such as \"+01:00\")",
            t.escape_debug()
        ))
    }
}

/// Checks that a zone is given only where it is used: a zone given to times
/// that carry their own offset is refused (it would be silently ignored).
pub fn check_zone(format: &TimeFormat, zone_given: bool) -> Result<(), String> {
    if zone_given && !format.is_local() {
        return Err(
            "`timezone` has no effect: these times carry their own offset; remove it".into(),
        );
    }
    Ok(())
}

/// Checks a strftime pattern: every `%` item known, and a formatted time
/// reads back. Returns whether the text carries its own offset.
fn check_pattern(pattern: &str) -> Result<bool, String> {
    let items: Vec<Item> = StrftimeItems::new(pattern).collect();
    if items.iter().any(|i| matches!(i, Item::Error)) {
        return Err(format!(
            "bad strftime pattern \"{}\": an unknown or incomplete `%` specifier \
             (e.g. %Y year, %m month, %d day, %H hour, %M minute, %S second, %.3f milliseconds, %z offset)",
            pattern.escape_debug()
        ));
    }
    if items
        .iter()
        .any(|i| matches!(i, Item::Numeric(Numeric::Timestamp, _)))
    {
        return Err(format!(
            "strftime pattern \"{}\" uses %s; for seconds since 1970 use format = \"epoch-s\"",
            pattern.escape_debug()
        ));
    }
    let absolute = items.iter().any(|i| {
        matches!(
            i,
            Item::Fixed(
                Fixed::TimezoneOffset
                    | Fixed::TimezoneOffsetColon
                    | Fixed::TimezoneOffsetDoubleColon
                    | Fixed::TimezoneOffsetTripleColon
                    | Fixed::TimezoneOffsetColonZ
                    | Fixed::TimezoneOffsetZ
                    | Fixed::RFC2822
                    | Fixed::RFC3339
            )
        )
    });
    let reference = NaiveDate::from_ymd_opt(2001, 2, 3)
        .and_then(|d| d.and_hms_milli_opt(14, 5, 6, 789))
        .ok_or("internal: reference time")?;
    let offset = FixedOffset::east_opt(3600).ok_or("internal: reference offset")?;
    let zoned = offset
        .from_local_datetime(&reference)
        .single()
        .ok_or("internal: reference time")?;
    let mut text = String::new();
    if write!(text, "{}", zoned.format_with_items(items.iter())).is_err() {
        return Err(format!(
            "bad strftime pattern \"{}\": it cannot format a time",
            pattern.escape_debug()
        ));
    }
    let back = if absolute {
        DateTime::parse_from_str(&text, pattern).map(|_| ())
    } else {
        NaiveDateTime::parse_from_str(&text, pattern).map(|_| ())
    };
    back.map_err(|e| {
        format!(
            "strftime pattern \"{}\" does not give a full date and time ({e}); \
             it needs at least the year, month, day, hour and minute",
            pattern.escape_debug()
        )
    })?;
    Ok(absolute)
}

/// Picks the instant for a local time (see the module docs); the flag says
/// whether the local time occurred twice.
fn localize(
    naive: NaiveDateTime,
    zone: Zone,
    previous: Option<DateTime<Utc>>,
) -> Result<(DateTime<Utc>, bool), String> {
    let result = match zone {
        Zone::Fixed(o) => o.from_local_datetime(&naive).map(|t| t.with_timezone(&Utc)),
        Zone::Named(tz) => tz
            .from_local_datetime(&naive)
            .map(|t| t.with_timezone(&Utc)),
    };
    match result {
        LocalResult::Single(t) => Ok((t, false)),
        LocalResult::Ambiguous(early, late) => {
            let chosen = match previous {
                Some(p) if early < p && late >= p => late,
                _ => early,
            };
            Ok((chosen, true))
        }
        LocalResult::None => Err(format!(
            "local time {naive} does not exist in {zone} (the clocks skip it when they go forward); \
             the logger's clock was wrong"
        )),
    }
}

/// Parses `[-]digits[.digits]` units since the epoch; `scale` is nanoseconds
/// per unit (1e9 for seconds, 1e6 for milliseconds).
fn parse_epoch(text: &str, scale: i128) -> Option<DateTime<Utc>> {
    let (negative, body) = match text.strip_prefix('-') {
        Some(b) => (true, b),
        None => (false, text.strip_prefix('+').unwrap_or(text)),
    };
    let (int, frac) = body.split_once('.').unwrap_or((body, ""));
    if int.is_empty() || !int.bytes().all(|b| b.is_ascii_digit()) || int.len() > 15 {
        return None;
    }
    if !frac.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    let mut nanos: i128 = int.parse::<i128>().ok()? * scale;
    let mut place = scale / 10;
    for d in frac.bytes() {
        if place == 0 {
            break;
        }
        nanos += i128::from(d - b'0') * place;
        place /= 10;
    }
    if negative {
        nanos = -nanos;
    }
    let secs = i64::try_from(nanos.div_euclid(1_000_000_000)).ok()?;
    let sub = u32::try_from(nanos.rem_euclid(1_000_000_000)).ok()?;
    DateTime::from_timestamp(secs, sub)
}

#[cfg(test)]
mod fast_tests {
    use super::*;
    use proptest::prelude::*;

    fn same(text: &str) {
        let general = DateTime::parse_from_rfc3339(text).ok();
        // Declined (None): the general parser decides, and may accept.
        if let Some(fast) = parse_rfc3339_fast(text) {
            assert_eq!(Some(fast), general, "{text}");
            assert_eq!(
                Some(fast.offset().fix()),
                general.map(|g| g.offset().fix()),
                "{text}"
            );
        }
        assert_eq!(parse_rfc3339(text).ok(), general, "{text}");
    }

    #[test]
    fn the_fast_path_agrees_with_the_general_parser() {
        for t in [
            "2026-11-03T07:00:05.000Z",
            "2026-11-03T07:00:05Z",
            "2026-11-03T07:00:05.1z",
            "2026-11-03T07:00:05.123456789+05:30",
            "2026-11-03T07:00:05.1234567891Z",
            "2026-03-29T01:30:00-02:00",
            "2024-02-29T23:59:59.999Z",
            "2023-02-29T00:00:00Z",
            "2026-13-01T00:00:00Z",
            "2026-12-31T24:00:00Z",
            "2016-12-31T23:59:60Z",
            "2026-11-03 07:00:05Z",
            "2026-11-03T07:00:05",
            "2026-11-03T07:00:05+0530",
            "2026-11-03T07:00:05.Z",
            "0000-01-01T00:00:00Z",
            "9999-12-31T23:59:59+23:59",
            "2026-11-03T07:00:05+24:00",
            "２026-11-03T07:00:05Z",
        ] {
            same(t);
        }
        assert!(parse_rfc3339_fast("2026-11-03T07:00:05.000Z").is_some());
        assert!(parse_rfc3339_fast("2026-11-03T07:00:05.250+02:00").is_some());
    }

    /// Every byte of the writer's time of day changed to every value: read
    /// at fixed places exactly when the general parser reads a real time
    /// in the layout, and then to the same instant.
    #[test]
    fn the_writers_layout_with_any_byte_changed() {
        for base in ["2026-11-16T07:23:19.300Z", "2024-02-29T23:59:59.999Z"] {
            for at in 10..24 {
                for byte in 0..=255u8 {
                    let mut b = base.as_bytes().to_vec();
                    b[at] = byte;
                    let general = std::str::from_utf8(&b)
                        .ok()
                        .and_then(|t| DateTime::parse_from_rfc3339(t).ok())
                        .filter(|t| {
                            use chrono::Timelike;
                            t.nanosecond() < 1_000_000_000
                                && t.offset().local_minus_utc() == 0
                                && b[10] == b'T'
                                && b[19] == b'.'
                                && b[23] == b'Z'
                        });
                    let date = fast_date(&b).expect("date");
                    let fixed = writer_time_of_day(&b).map(|t| date.and_time(t).and_utc());
                    assert_eq!(fixed, general.map(|g| g.to_utc()), "{b:?}");
                }
            }
        }
    }

    /// Times of a few dates (so that consecutive ones often share a date),
    /// around the ends of days, months and years, with leap seconds,
    /// offsets, and now and then a byte changed or the text cut.
    fn time_runs() -> impl Strategy<Value = Vec<String>> {
        let date = (
            1999u32..2001,
            prop_oneof![1u32..3, 11u32..14],
            prop_oneof![1u32..3, 27u32..33],
        )
            .prop_map(|(y, m, d)| format!("{y:04}-{m:02}-{d:02}"));
        let rest = (
            prop_oneof![0u32..2, 22u32..25],
            prop_oneof![0u32..2, 58u32..60],
            prop_oneof![0u32..2, 58u32..61],
            proptest::option::of("[0-9]{0,10}"),
            prop_oneof![
                Just("Z".to_string()),
                Just("z".to_string()),
                Just(String::new()),
                "[+-](0[0-9]|2[3-4]):(00|30|59|60)",
            ],
        )
            .prop_map(|(h, mi, s, frac, off)| {
                let frac = frac.map(|f| format!(".{f}")).unwrap_or_default();
                format!("T{h:02}:{mi:02}:{s:02}{frac}{off}")
            });
        let mutation =
            proptest::option::weighted(0.2, (any::<usize>(), any::<u8>(), any::<bool>()));
        (
            prop::collection::vec(date, 1..4),
            prop::collection::vec((any::<usize>(), rest, mutation), 1..40),
        )
            .prop_map(|(dates, times)| {
                times
                    .into_iter()
                    .map(|(i, rest, mutation)| {
                        let mut b = format!("{}{rest}", dates[i % dates.len()]).into_bytes();
                        if let Some((at, byte, cut)) = mutation {
                            let at = at % b.len();
                            if cut {
                                b.truncate(at);
                            } else {
                                b[at] = byte;
                            }
                        }
                        String::from_utf8_lossy(&b).into_owned()
                    })
                    .collect()
            })
    }

    #[test]
    fn the_date_kept_is_used_and_changes_nothing() {
        let mut days = Rfc3339Days::default();
        for t in [
            "2026-11-30T23:59:59.900Z",
            "2026-11-30T23:59:60Z",
            "2026-11-30T24:00:00Z",
            "2026-11-30Tbad",
            "2026-11-30",
            "2026-11-30T10:00:00-05:00",
            "2026-12-01T00:00:00.000+01:00",
            "2026-12-01T00:00:00.5",
            "2026-02-30T00:00:00Z",
            "2026-12-01T00:00:01Z",
            "2016-12-31T23:59:60.5Z",
            "2027-01-01T00:00:00Z",
        ] {
            let kept = days.parse_fast(t.as_bytes());
            assert_eq!(kept, parse_rfc3339_fast(t), "{t}");
            assert_eq!(
                kept.map(|k| k.offset().fix()),
                parse_rfc3339_fast(t).map(|f| f.offset().fix()),
                "{t}"
            );
        }
        // The last good date is kept; an impossible one never is.
        assert_eq!(days.last.map(|(k, _)| k), Some(*b"2027-01-01"));
        days.parse_fast(b"2026-02-30T00:00:00Z");
        assert_eq!(days.last.map(|(k, _)| k), Some(*b"2027-01-01"));
    }

    proptest! {
        #[test]
        fn a_run_of_times_reads_the_same_with_the_date_kept(texts in time_runs()) {
            let mut days = Rfc3339Days::default();
            for t in &texts {
                let kept = days.parse_fast(t.as_bytes());
                let fresh = parse_rfc3339_fast(t);
                prop_assert_eq!(kept, fresh, "{}", t);
                prop_assert_eq!(
                    kept.map(|k| k.offset().fix()),
                    fresh.map(|f| f.offset().fix()),
                    "{}", t
                );
                same(t);
            }
        }

        #[test]
        fn pushing_writes_what_write_rfc3339_writes(ms in -62_000_000_000_000i64..253_402_300_799_999) {
            let t = DateTime::from_timestamp_millis(ms).expect("in range");
            let mut s = String::from("x");
            push_rfc3339(&mut s, t);
            prop_assert_eq!(&s[1..], t.to_rfc3339_opts(chrono::SecondsFormat::Millis, true));
            let mut b = b"x".to_vec();
            push_rfc3339_bytes(&mut b, t);
            prop_assert_eq!(&b[1..], &s.as_bytes()[1..]);
        }

        #[test]
        fn any_text_in_the_layout_agrees(
            y in 0u32..10000, mo in 0u32..14, d in 0u32..33, h in 0u32..26,
            mi in 0u32..61, s in 0u32..62, frac in proptest::option::of("[0-9]{0,11}"),
            off in prop_oneof![Just("Z".to_string()), "[+-][0-9]{2}:[0-9]{2}"],
        ) {
            let frac = frac.map(|f| format!(".{f}")).unwrap_or_default();
            let text = format!("{y:04}-{mo:02}-{d:02}T{h:02}:{mi:02}:{s:02}{frac}{off}");
            same(&text);
        }

        #[test]
        fn millis_between_is_chronos(
            secs in -62_000_000_000i64..253_402_300_799,
            nanos in prop_oneof![0u32..1_000_000_000, 0u32..2_000_000_000],
            // Seconds apart, days of one year or two, and anything.
            d in prop_oneof![
                -10_000_000_000i64..10_000_000_000,
                -40_000_000_000_000_000i64..40_000_000_000_000_000,
                any::<i64>(),
            ],
        ) {
            // Leap seconds too (nanoseconds past 1e9, where chrono allows).
            let Some(ta) = DateTime::from_timestamp(secs, nanos) else {
                return Ok(());
            };
            let Some(tb) = ta.checked_add_signed(chrono::TimeDelta::nanoseconds(d)) else {
                return Ok(());
            };
            prop_assert_eq!(millis_between(ta, tb), (tb - ta).num_milliseconds());
            prop_assert_eq!(millis_between(tb, ta), (ta - tb).num_milliseconds());
            prop_assert_eq!(seconds_between(ta, tb), (tb - ta).num_milliseconds() as f64 / 1000.0);
        }

        /// The writer's layout, now and then with a byte changed: read at
        /// fixed places as the general parser reads it, and always when
        /// the time is a real one.
        #[test]
        fn the_writers_layout_agrees(
            y in 1900u32..2200, mo in 1u32..13, d in 1u32..29, h in 0u32..26,
            mi in 0u32..61, s in 0u32..61, ms in 0u32..1000,
            mutation in proptest::option::weighted(0.3, (10usize..24, any::<u8>())),
        ) {
            let mut b = format!("{y:04}-{mo:02}-{d:02}T{h:02}:{mi:02}:{s:02}.{ms:03}Z").into_bytes();
            if let Some((at, byte)) = mutation {
                b[at] = byte;
            }
            let text = String::from_utf8_lossy(&b).into_owned();
            same(&text);
            // Read at fixed places: every real time in the layout, leap
            // seconds left out.
            let t = text.as_bytes();
            let in_layout = t.len() == 24 && t[10] == b'T' && t[19] == b'.' && t[23] == b'Z';
            let real = DateTime::parse_from_rfc3339(&text).is_ok_and(|t| {
                use chrono::Timelike;
                t.nanosecond() < 1_000_000_000
            });
            prop_assert_eq!(writer_time_of_day(t).is_some(), in_layout && real, "{}", text);
        }

        #[test]
        fn any_text_at_all_agrees(text in "\\PC{0,30}") {
            same(&text);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        /// Reading with the pattern parsed once (and, where the text fits
        /// its layout exactly, without chrono's parser) gives what reading
        /// with the pattern gives: times, ambiguity and messages alike.
        #[test]
        fn a_time_reader_reads_as_the_format(
            which in 0usize..9,
            fields in (2020i32..2030, 0u32..14, 0u32..33, 0u32..25, 0u32..61, 0u32..62),
            ms in 0u32..1_000_000_000,
            digits in 0usize..12,
            pad in any::<bool>(),
            blanks in 0usize..3,
            junk in proptest::option::weighted(0.2, "[0-9a-z:.+ -]{0,6}"),
            zone in proptest::sample::select(vec![None, Some("Europe/Vienna"), Some("+01:00")]),
        ) {
            let (year, month, day, h, mi, sec) = fields;
            let patterns = [
                "%d.%m.%Y %H:%M:%S",
                "%d.%m.%Y %H:%M:%S%.3f",
                "%Y-%m-%d %H:%M:%S%.f",
                "%Y-%m-%dT%H:%M:%S%z",
                "%d/%m/%Y %I:%M:%S %p",
                "%Y-%m-%d %H:%M",
                "%Y%m%d%H%M%S%.6f",
                "%F %T%.9f",
                "%d.%m.%Y, %H h %M",
            ];
            let format = TimeFormat::parse(patterns[which]).expect("valid pattern");
            let reader = TimeReader::new(&format);
            let two = |v: u32| if pad { format!("{v:02}") } else { v.to_string() };
            let gap = " ".repeat(blanks);
            let frac = format!("{ms:09}")[..digits.min(9)].to_string()
                + &"7".repeat(digits.saturating_sub(9));
            let dot = if digits == 0 { String::new() } else { format!(".{frac}") };
            let ampm = if h < 12 { "AM" } else { "PM" };
            let (d, m, hh, mm, ss) = (two(day), two(month), two(h), two(mi), two(sec));
            let mut text = match which {
                0 => format!("{d}.{m}.{year}{gap}{hh}:{mm}:{ss}"),
                1 => format!("{d}.{m}.{year} {hh}:{mm}:{ss}{dot}"),
                2 => format!("{year}-{m}-{d} {hh}:{mm}:{ss}{dot}"),
                3 => format!("{year}-{m}-{d}T{hh}:{mm}:{ss}+0{}00", h % 10),
                4 => format!("{d}/{m}/{year} {:02}:{mm}:{ss} {ampm}", h % 13),
                5 => format!("{year}-{m}-{d}{gap}{hh}:{mm}"),
                6 => format!("{year}{m}{d}{hh}{mm}{ss}{dot}"),
                7 => format!("{year}-{m}-{d} {hh}:{mm}:{ss}{dot}"),
                _ => format!("{d}.{m}.{year},{gap}{hh} h {mm}"),
            };
            if let Some(j) = junk {
                let at = text.len() / 2;
                text.insert_str(at, &j);
            }
            let z = zone.map(|z| Zone::parse(z).expect("valid zone"));
            let previous = Utc.with_ymd_and_hms(2026, 10, 25, 0, 30, 0).single();
            prop_assert_eq!(
                reader.read(&text, z, previous),
                format.read(&text, z, previous),
                "{}",
                text
            );
            let padded = format!(" {text} ");
            prop_assert_eq!(reader.read(&padded, z, None), format.read(&padded, z, None));
        }

        /// Texts that fit a layout are read without chrono's parser (the
        /// layout is there and takes them).
        #[test]
        fn texts_in_the_layout_skip_the_general_parser(
            day in 1u32..29, month in 1u32..13, h in 0u32..24, mi in 0u32..60, ms in 0u32..1000,
        ) {
            let format = TimeFormat::parse("%d.%m.%Y %H:%M:%S%.3f").expect("valid");
            let reader = TimeReader::new(&format);
            let layout = reader.layout.as_ref().expect("a layout");
            let text = format!("{day:02}.{month:02}.2026 {h:02}:{mi:02}:07.{ms:03}");
            let read = Layout::read(layout, &text).expect("fits");
            prop_assert_eq!(
                read,
                NaiveDateTime::parse_from_str(&text, "%d.%m.%Y %H:%M:%S%.3f").expect("chrono")
            );
        }
    }

    fn utc(text: &str) -> DateTime<Utc> {
        DateTime::parse_from_rfc3339(text)
            .map(|t| t.with_timezone(&Utc))
            .unwrap_or_else(|e| panic!("{text}: {e}"))
    }

    fn read(format: &str, text: &str, zone: Option<&str>) -> Result<DateTime<Utc>, String> {
        let f = TimeFormat::parse(format).expect("valid format");
        let z = zone.map(|z| Zone::parse(z).expect("valid zone"));
        f.read(text, z, None).map(|r| r.time)
    }

    #[test]
    fn formats_are_checked_with_reasons() {
        let e = |t: &str| TimeFormat::parse(t).expect_err(t);
        assert!(e("dd.mm.yyyy").starts_with("unknown time format \"dd.mm.yyyy\""));
        assert!(e("epoch-sec").contains("did you mean \"epoch-s\"?"));
        assert!(e("%Q").starts_with("bad strftime pattern \"%Q\""));
        assert!(e("%s").contains("use format = \"epoch-s\""));
        assert!(e("%d.%m.%Y").contains("does not give a full date and time"));
        assert!(e("%H:%M:%S").contains("does not give a full date and time"));
        assert_eq!(TimeFormat::parse(" rfc3339 "), Ok(TimeFormat::Rfc3339));
        assert_eq!(TimeFormat::parse("RFC3339"), Ok(TimeFormat::Rfc3339));
        assert!(
            !TimeFormat::parse("%Y-%m-%d %H:%M:%S")
                .expect("valid")
                .to_string()
                .is_empty()
        );
        assert!(
            !TimeFormat::parse("%Y-%m-%d %H:%M:%S %z")
                .expect("valid")
                .is_local()
        );
    }

    #[test]
    fn epochs_are_exact_and_refuse_non_numbers() {
        let s = read("epoch-s", "1700000000.5", None).expect("valid");
        assert_eq!(s.timestamp_millis(), 1_700_000_000_500);
        let ms = read("epoch-ms", "1700000000123", None).expect("valid");
        assert_eq!(ms.timestamp_millis(), 1_700_000_000_123);
        assert_eq!(read("epoch-s", "-1", None), Ok(utc("1969-12-31T23:59:59Z")));
        for bad in ["inf", "NaN", "1e9", "", "1.2.3", "x"] {
            assert!(read("epoch-s", bad, None).is_err(), "{bad}");
        }
    }

    #[test]
    fn patterns_read_in_their_zone_or_utc() {
        let p = "%Y-%m-%d %H:%M:%S";
        assert_eq!(
            read(p, "2026-01-01 00:00:00", None),
            Ok(utc("2026-01-01T00:00:00Z"))
        );
        assert_eq!(
            read(p, "2026-01-01 00:00:00", Some("-05:30")),
            Ok(utc("2026-01-01T05:30:00Z"))
        );
        assert_eq!(
            read(&format!("{p} %z"), "2026-01-01 01:00:00 +0100", None),
            Ok(utc("2026-01-01T00:00:00Z"))
        );
        let e = read(p, "2026-03-29 02:30:00", Some("Europe/Vienna")).expect_err("skipped");
        assert!(e.contains("does not exist in Europe/Vienna"), "{e}");
        let e = read(p, "yesterday", None).expect_err("no match");
        assert!(e.starts_with("does not match format"), "{e}");
    }

    #[test]
    fn a_repeated_hour_follows_the_previous_time() {
        let f = TimeFormat::parse("%Y-%m-%d %H:%M:%S").expect("valid");
        let z = Zone::parse("Europe/Vienna").ok();
        let first = f.read("2026-10-25 02:50:00", z, None).expect("valid");
        assert_eq!(first.time, utc("2026-10-25T00:50:00Z"));
        assert!(first.ambiguous);
        let next = f
            .read("2026-10-25 02:10:00", z, Some(first.time))
            .expect("valid");
        assert_eq!(next.time, utc("2026-10-25T01:10:00Z"));
    }

    #[test]
    fn offsets_are_kept_and_a_missing_one_is_named() {
        let f = TimeFormat::Rfc3339;
        let r = f
            .read("2026-01-01T05:30:00+05:30", None, None)
            .expect("valid");
        assert_eq!(r.time, utc("2026-01-01T00:00:00Z"));
        assert_eq!(r.offset.map(|o| o.to_string()), Some("+05:30".to_string()));
        let z = f.read("2026-01-01T00:00:00Z", None, None).expect("valid");
        assert_eq!(z.offset, FixedOffset::east_opt(0));
        let e = f
            .read("2026-01-01T00:00:00", None, None)
            .expect_err("no offset");
        assert!(e.starts_with("has no UTC offset: the zone"), "{e}");
        let local = TimeFormat::parse("%Y-%m-%d %H:%M:%S").expect("valid");
        let r = local
            .read("2026-01-01 00:00:00", None, None)
            .expect("valid");
        assert_eq!(r.offset, None);
        let r = TimeFormat::EpochSeconds
            .read("0", None, None)
            .expect("valid");
        assert_eq!(r.offset, None);
        for (text, lacks) in [
            ("2026-01-01T00:00:00", true),
            ("2026-01-01 00:00:00.250", true),
            ("2026-01-01T00:00:00Z", false),
            ("2026-01-01T00:00:00+01:00", false),
            ("2026-01-01T00:00", false),
            ("", false),
            ("yesterday", false),
        ] {
            assert_eq!(lacks_offset(text), lacks, "{text:?}");
        }
        let o = FixedOffset::east_opt(-3600);
        assert!(missing_offset(o).contains("unlike the times before it (at -01:00)"));
    }

    #[test]
    fn zones_and_offsets() {
        assert!(
            Zone::parse("Europe/Viena")
                .expect_err("typo")
                .contains("did you mean \"Europe/Vienna\"?")
        );
        assert!(
            Zone::parse("vienna")
                .expect_err("short")
                .contains("did you mean \"Europe/Vienna\"?")
        );
        assert!(
            Zone::parse("+25:00")
                .expect_err("range")
                .starts_with("bad UTC offset")
        );
        assert_eq!(
            Zone::parse("+01:00").map(|z| z.to_string()),
            Ok("+01:00".to_string())
        );
        let absolute = TimeFormat::Rfc3339;
        assert!(check_zone(&absolute, true).is_err());
        assert!(check_zone(&absolute, false).is_ok());
    }
}
