//! Numbers in exponent form with the shortest digits that read back to the
//! same `f64` (`6.65e4`, `1e-5`; the layout of `{:e}`), fast enough for a
//! CSV of millions of rows.

/// Appends `v` as `format!("{v:e}")` lays it out, without allocating.
///
/// The shortest round-trip digits come from the `ryu` crate, laid out again
/// as `d[.ddd]e<exp>`. They read back to the same `f64` and are as short as
/// `{:e}`'s; where two texts of that length are equally near the value, the
/// last digit may differ from `{:e}`'s (property tests).
pub fn push_exp(out: &mut String, v: f64) {
    if !v.is_finite() {
        // inf, -inf, NaN as std writes them.
        use std::fmt::Write as _;
        let _ = write!(out, "{v:e}");
        return;
    }
    let mut buf = ryu::Buffer::new();
    let text = buf.format_finite(v);
    // ryu writes `[-]d[.ddd]e<exp>` (already this layout) or, for
    // magnitudes from 1e-5 to 1e16, `[-]int.frac`; only the second is laid
    // out again.
    // The exponent, when there is one, is among the last five bytes
    // (`e-324`).
    let tail = text.len().saturating_sub(5);
    if text.as_bytes()[tail..].contains(&b'e') {
        out.push_str(text);
        return;
    }
    let (negative, t) = match text.strip_prefix('-') {
        Some(rest) => (true, rest),
        None => (false, text),
    };
    if negative {
        out.push('-');
    }
    let (int, frac) = t.split_once('.').unwrap_or((t, ""));
    let frac_digits = frac.trim_end_matches('0');
    let exponent = if int.trim_start_matches('0').is_empty() {
        // 0.000ddd: the first significant digit is in the fraction.
        let lead = frac_digits.len() - frac_digits.trim_start_matches('0').len();
        let sig = &frac_digits[lead..];
        let Some(first) = sig.get(..1) else {
            out.push_str("0e0");
            return;
        };
        out.push_str(first);
        if sig.len() > 1 {
            out.push('.');
            out.push_str(&sig[1..]);
        }
        -(lead as i32) - 1
    } else {
        // ddd.ddd with no leading zero: the point moves after the first
        // digit; trailing zeros of the digits go.
        let rest = if frac_digits.is_empty() {
            int[1..].trim_end_matches('0')
        } else {
            &int[1..]
        };
        out.push_str(&int[..1]);
        if !rest.is_empty() || !frac_digits.is_empty() {
            out.push('.');
            out.push_str(rest);
            out.push_str(frac_digits);
        }
        int.len() as i32 - 1
    };
    out.push('e');
    out.push_str(itoa_buf(exponent).as_str());
}

/// A small integer as text, on the stack.
fn itoa_buf(v: i32) -> SmallText {
    let mut t = SmallText {
        bytes: [0; 12],
        len: 0,
    };
    let mut n = i64::from(v).unsigned_abs();
    let mut tmp = [0u8; 12];
    let mut k = 0;
    loop {
        tmp[k] = b'0' + (n % 10) as u8;
        k += 1;
        n /= 10;
        if n == 0 {
            break;
        }
    }
    if v < 0 {
        t.bytes[0] = b'-';
        t.len = 1;
    }
    for i in (0..k).rev() {
        t.bytes[t.len] = tmp[i];
        t.len += 1;
    }
    t
}

struct SmallText {
    bytes: [u8; 12],
    len: usize,
}

impl SmallText {
    fn as_str(&mut self) -> &str {
        std::str::from_utf8(&self.bytes[..self.len]).unwrap_or("0")
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Reads back to `v` and is as long as std's text (the same but for a
    /// last digit where two are equally near).
    fn same(v: f64) {
        let mut s = String::new();
        push_exp(&mut s, v);
        let std = format!("{v:e}");
        if v.is_nan() {
            assert_eq!(s, "NaN");
            return;
        }
        assert_eq!(s.parse::<f64>().ok(), Some(v), "{s} for {v:?}");
        assert_eq!(s.len(), std.len(), "{s} vs {std}");
        let (a, b) = (s.rsplit_once('e'), std.rsplit_once('e'));
        assert_eq!(a.map(|x| x.1), b.map(|x| x.1), "exponent of {s} vs {std}");
    }

    #[test]
    fn writes_what_std_writes() {
        for v in [
            0.0,
            -0.0,
            1.0,
            -1.0,
            0.1,
            6.65e4,
            1e-5,
            1.2e-2,
            123.456,
            1.6319076378677104e25,
            1299367441806042.3,
            5e-324,
            f64::MAX,
            f64::MIN_POSITIVE,
            1e16,
            1e15,
            1e23,
            100.0,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NAN,
        ] {
            same(v);
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(20_000))]

        #[test]
        fn any_bits_write_what_std_writes(bits in any::<u64>()) {
            same(f64::from_bits(bits));
        }

        #[test]
        fn pressures_write_what_std_writes(m in 1.0f64..10.0, e in -12i32..6) {
            same(m * 10f64.powi(e));
        }

        /// The magnitudes ryu writes without an exponent (1e-5 to 1e16),
        /// including whole numbers and short decimals.
        #[test]
        fn plain_decimals_write_what_std_writes(
            m in 1.0f64..10.0, e in -6i32..17, k in 0u32..100_000, negative: bool
        ) {
            let sign = if negative { -1.0 } else { 1.0 };
            same(sign * m * 10f64.powi(e));
            same(sign * f64::from(k) * 10f64.powi(e - 3));
            same(sign * f64::from(k));
        }
    }
}
