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

/// The fast reading (see [`parse_f64_fast`]) of the longest start of `text` in that form, and its
/// length: the caller checks what follows it (a cell's end).
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
    while i < n {
        let d = text[i].wrapping_sub(b'0');
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
        // The same loop as the integer part's: written out twice, since a
        // shared helper cost 2-3 % of the reader thread's instructions.
        let start = i;
        while i < n {
            let d = text[i].wrapping_sub(b'0');
            if d > 9 {
                break;
            }
            mantissa = mantissa.wrapping_mul(10).wrapping_add(u64::from(d));
            i += 1;
        }
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

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(4096))]

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
