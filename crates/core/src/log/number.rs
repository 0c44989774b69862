//! A fast reading of the plain decimal numbers logs hold (`4.945525e-5`,
//! `22.0625`), for the cells most rows are made of.
//!
//! Only texts whose value one correctly rounded `f64` operation gives
//! exactly are read here (at most 19 significant digits, a mantissa up to
//! 2^53 and a power of ten up to 22 either way: both operands are exact,
//! so the one rounding is the correct rounding of the decimal value, which
//! is what `str::parse::<f64>` gives). Anything else — other forms, more
//! digits, larger exponents, garbage — is declined (`None`), and the caller
//! parses it with `str::parse`, which also words any error.

/// The powers of ten an `f64` holds exactly.
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// The largest mantissa an `f64` holds exactly.
const MAX_EXACT_MANTISSA: u64 = 1 << 53;

/// `text` read as `str::parse::<f64>` reads it, when it is
/// `[+-]digits[.digits][(e|E)[+-]digits]` (digits on either side of the
/// point, or both; at most 19 in all) with an exactly computable value;
/// `None` otherwise. When `Some(v)`, `str::parse::<f64>` gives `Ok(v)`, bit
/// for bit.
#[cfg(test)]
pub(crate) fn parse_f64_fast(text: &[u8]) -> Option<f64> {
    match parse_f64_prefix(text)? {
        (v, used) if used == text.len() => Some(v),
        _ => None,
    }
}

/// Powers of ten up to 10^8, as integers.
const POW10_INT: [u64; 9] = [
    1,
    10,
    100,
    1_000,
    10_000,
    100_000,
    1_000_000,
    10_000_000,
    100_000_000,
];

/// The run of ASCII digits from `text[i]` on, appended to `mantissa` as
/// decimal digits (wrapping past `u64`); gives where the run ends. Eight
/// bytes are looked at together while eight are left (unless the run is
/// at most one digit), then one at a time.
#[inline(always)]
fn digit_run(text: &[u8], mut i: usize, mantissa: &mut u64) -> usize {
    // A run of one digit (`2.2e1`) is read faster one at a time.
    let long = text.get(i + 1).is_some_and(u8::is_ascii_digit);
    while long && let Some(word) = text.get(i..).and_then(<[u8]>::first_chunk::<8>) {
        let (value, count) = leading_digits(u64::from_le_bytes(*word));
        *mantissa = mantissa.wrapping_mul(POW10_INT[count]).wrapping_add(value);
        i += count;
        if count < 8 {
            return i;
        }
    }
    while let Some(&b) = text.get(i) {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            break;
        }
        *mantissa = mantissa.wrapping_mul(10).wrapping_add(u64::from(d));
        i += 1;
    }
    i
}

/// The value and count of the ASCII digits eight bytes (little-endian,
/// the first byte lowest) start with.
#[inline(always)]
fn leading_digits(word: u64) -> (u64, usize) {
    const ONES: u64 = 0x0101_0101_0101_0101;
    const HIGH: u64 = 0x8080_8080_8080_8080;
    // Per byte, its value less b'0': exact in every byte before the first
    // that is no digit (a digit borrows nothing from the byte after it).
    let less = word.wrapping_sub(ONES * u64::from(b'0'));
    // The top bit of a byte set where it is below b'0' or (`more`) above b'9':
    // again exact up to the first that is no digit.
    let more = word.wrapping_add(ONES * (0x80 - u64::from(b'9') - 1));
    let no_digit = (less | more) & HIGH;
    let count = (no_digit.trailing_zeros() / 8) as usize;
    if count == 0 {
        return (0, 0);
    }
    // The digits, the first one highest, moved to the top bytes (zeros
    // before them), then combined in pairs, fours and eights.
    let d = less << (8 * (8 - count));
    let d = d.wrapping_mul(10).wrapping_add(d >> 8);
    let d = ((d & 0x0000_00FF_0000_00FF).wrapping_mul(100 + (1_000_000 << 32)))
        .wrapping_add(((d >> 16) & 0x0000_00FF_0000_00FF).wrapping_mul(1 + (10_000 << 32)))
        >> 32;
    (d & 0xFFFF_FFFF, count)
}

/// The fast reading (see [`parse_f64_fast`]) of the longest start of `text` in that form, and its
/// length: the caller checks what follows it (a cell's end). Always
/// inlined: called once per channel cell of every row.
#[inline(always)]
pub(crate) fn parse_f64_prefix(text: &[u8]) -> Option<(f64, usize)> {
    let (negative, mut i) = match text.first()? {
        b'-' => (true, 1),
        b'+' => (false, 1),
        _ => (false, 0),
    };
    let n = text.len();
    // More than 19 digits may overflow (wrapping, then declined below).
    let mut mantissa = 0u64;
    let start = i;
    // The integer part is mostly one digit (the writer's `1.5e-3`): read
    // one at a time.
    while let Some(&b) = text.get(i) {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            break;
        }
        mantissa = mantissa.wrapping_mul(10).wrapping_add(u64::from(d));
        i += 1;
    }
    let mut digits = i - start;
    let mut fraction = 0;
    if i < n && text[i] == b'.' {
        i += 1;
        let start = i;
        i = digit_run(text, i, &mut mantissa);
        fraction = i - start;
        digits += fraction;
    }
    if digits == 0 || digits > 19 || mantissa > MAX_EXACT_MANTISSA {
        return None;
    }
    let mut exponent = 0i32;
    if i < n && (text[i] | 0x20) == b'e' {
        i += 1;
        let negative_exponent = match text.get(i) {
            Some(b'-') => {
                i += 1;
                true
            }
            Some(b'+') => {
                i += 1;
                false
            }
            _ => false,
        };
        let start = i;
        while i < n {
            let d = text[i].wrapping_sub(b'0');
            if d > 9 {
                break;
            }
            // Larger exponents are declined below; stop growing well
            // before overflow.
            if exponent < 10_000 {
                exponent = exponent * 10 + i32::from(d);
            }
            i += 1;
        }
        if i == start {
            return None;
        }
        if negative_exponent {
            exponent = -exponent;
        }
    }
    // `fraction` is at most 19 here.
    let power = exponent - fraction as i32;
    let m = mantissa as f64;
    let value = if (0..=22).contains(&power) {
        m * POW10[power as usize]
    } else if (-22..0).contains(&power) {
        m / POW10[(-power) as usize]
    } else {
        return None;
    };
    Some((if negative { -value } else { value }, i))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// The fast reading either declines or agrees with `str::parse`, bit
    /// for bit.
    fn agrees(text: &str) {
        let general = text.parse::<f64>().ok().map(f64::to_bits);
        if let Some(fast) = parse_f64_fast(text.as_bytes()) {
            assert_eq!(Some(fast.to_bits()), general, "{text:?}");
        }
    }

    #[test]
    fn reads_what_logs_hold_and_agrees() {
        for (text, value) in [
            ("4.945525e-5", 4.945525e-5f64),
            ("2.23125e1", 2.23125e1),
            ("1.2345678E-05", 1.2345678E-05),
            ("22.0625", 22.0625),
            ("-40.5", -40.5),
            ("+7", 7.0),
            ("0", 0.0),
            ("1013.25", 1013.25),
            (".5", 0.5),
            ("5.", 5.0),
            ("0.000000000000000001", 1e-18),
            ("123456789012345e-22", 123456789012345e-22),
            ("9007199254740992", 9007199254740992.0),
            ("1E+3", 1e3),
            ("1e22", 1e22),
            ("1e-22", 1e-22),
        ] {
            let got = parse_f64_fast(text.as_bytes());
            assert_eq!(got.map(f64::to_bits), Some(value.to_bits()), "{text}");
            agrees(text);
        }
        let negative_zero = parse_f64_fast(b"-0.0").expect("read");
        assert_eq!(negative_zero.to_bits(), (-0.0f64).to_bits());
    }

    #[test]
    fn declines_what_it_cannot_read_exactly_or_at_all() {
        for text in [
            "",
            "-",
            "+",
            ".",
            "e5",
            ".e5",
            "1e",
            "1e+",
            "1e-",
            "2.3760935E-O-5",
            "1.2.3",
            "1..2",
            "nan",
            "NaN",
            "inf",
            "-infinity",
            " 1",
            "1 ",
            "1,5",
            "0x10",
            "1_000",
            "++1",
            "+-1",
            "1e--5",
            "over-range",
            "１",
            // Exact but beyond the one-operation range: `str::parse` reads them.
            "9007199254740993",
            "12345678901234567890",
            "1e23",
            "1e-23",
            "1e400",
            "1e-400",
            "0.000000000000000000000001",
            "0.0000000000000000000001",
            "0e99999999999999999999",
            "17976931348623157e292",
        ] {
            assert_eq!(parse_f64_fast(text.as_bytes()), None, "{text:?}");
            agrees(text);
        }
    }

    /// Texts in and around the accepted grammar, and valid numbers of every
    /// size.
    fn numberish() -> impl Strategy<Value = String> {
        prop_oneof![
            "[-+0-9.eE]{0,12}",
            "[-+]?[0-9]{0,21}(\\.[0-9]{0,21})?([eE][-+]?[0-9]{0,4})?",
            "[-+]?0{0,5}[1-9][0-9]{0,18}\\.?[0-9]{0,4}[eE][-+]?[0-9]{1,2}",
            (any::<f64>(), 0usize..3).prop_map(|(v, form)| match form {
                0 => format!("{v}"),
                1 => format!("{v:e}"),
                _ => format!("{v:.6E}"),
            }),
            "\\PC{0,12}",
        ]
    }

    #[test]
    fn a_prefix_ends_where_the_form_ends() {
        assert_eq!(parse_f64_prefix(b"1.5,2"), Some((1.5, 3)));
        assert_eq!(parse_f64_prefix(b"-2e-3x"), Some((-2e-3, 5)));
        assert_eq!(parse_f64_prefix(b"7 "), Some((7.0, 1)));
        assert_eq!(parse_f64_prefix(b"1e,"), None);
        assert_eq!(parse_f64_prefix(b",1"), None);
    }

    /// [`leading_digits`] the plain way.
    fn leading_digits_one_by_one(bytes: [u8; 8]) -> (u64, usize) {
        let count = bytes.iter().take_while(|b| b.is_ascii_digit()).count();
        let value = bytes[..count]
            .iter()
            .fold(0, |v, b| v * 10 + u64::from(b - b'0'));
        (value, count)
    }

    #[test]
    fn eight_bytes_are_read_as_one_by_one() {
        for text in [
            *b"00000000",
            *b"99999999",
            *b"12345678",
            *b"1.015587",
            *b"0155873e",
            *b"x1234567",
            *b"1234567/",
            *b"1234567:",
            *b"9\xff\x00\x2f\x3a\x30\xb9\xc0",
            *b"55555555",
        ] {
            assert_eq!(
                leading_digits(u64::from_le_bytes(text)),
                leading_digits_one_by_one(text),
                "{text:?}"
            );
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(4096))]

        /// Any eight bytes, digits mostly.
        #[test]
        fn eight_bytes_are_read_as_one_by_one_at_random(
            bytes in prop::array::uniform8(prop_oneof![4 => b'0'..=b'9', 1 => any::<u8>()])
        ) {
            prop_assert_eq!(
                leading_digits(u64::from_le_bytes(bytes)),
                leading_digits_one_by_one(bytes)
            );
        }

        /// Digit runs of any length at any place, read as one by one.
        #[test]
        fn digit_runs_are_read_as_one_by_one(
            text in "[0-9]{0,30}[-.e,x]?[0-9]{0,12}",
            at in 0usize..4,
            start in any::<u64>(),
        ) {
            let bytes = text.as_bytes();
            let at = at.min(bytes.len());
            let mut got = start;
            let end = digit_run(bytes, at, &mut got);
            let mut want = start;
            let mut i = at;
            while i < bytes.len() && bytes[i].is_ascii_digit() {
                want = want.wrapping_mul(10).wrapping_add(u64::from(bytes[i] - b'0'));
                i += 1;
            }
            prop_assert_eq!((got, end), (want, i));
        }

        #[test]
        fn declines_or_agrees_with_str_parse(text in numberish()) {
            agrees(&text);
            // A prefix read is what the fast reading gives for that prefix.
            if let Some((v, used)) = parse_f64_prefix(text.as_bytes()) {
                let fast = parse_f64_fast(&text.as_bytes()[..used]);
                prop_assert_eq!(fast.map(f64::to_bits), Some(v.to_bits()), "{}", text);
            }
        }

        /// Numbers the writer gives (`{:e}` of a few digits) are read here,
        /// not left to the slow path.
        #[test]
        fn short_numbers_take_the_fast_path(m in 0u64..100_000_000, e in -12i32..12, neg: bool) {
            let sign = if neg { "-" } else { "" };
            let text = format!("{sign}{m}e{e}");
            let fast = parse_f64_fast(text.as_bytes());
            prop_assert!(fast.is_some(), "{}", text);
            agrees(&text);
        }
    }
}
