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
    let (negative, text) = match text.strip_prefix('-') {
        Some(rest) => (true, rest),
        None => (false, text),
    };
    let (mantissa, exp_part) = match text.split_once('e') {
        Some((m, e)) => (m, e.parse::<i32>().unwrap_or(0)),
        None => (text, 0),
    };
    // The mantissa's digits without the point, and where the point was.
    let (int_part, frac_part) = mantissa.split_once('.').unwrap_or((mantissa, ""));
    let mut digits = [0u8; 40];
    let mut n = 0;
    for b in int_part.bytes().chain(frac_part.bytes()) {
        if n < digits.len() {
            digits[n] = b;
            n += 1;
        }
    }
    let digits = &digits[..n];
    let lead = digits.iter().take_while(|&&d| d == b'0').count();
    if negative {
        out.push('-');
    }
    if lead == digits.len() {
        out.push_str("0e0");
        return;
    }
    let sig = &digits[lead..];
    let trail = sig.iter().rev().take_while(|&&d| d == b'0').count();
    let sig = &sig[..sig.len() - trail];
    // value = 0.<digits> × 10^(int_len) × 10^exp_part; the first
    // significant digit sits at 10^(int_len − lead − 1 + exp_part).
    let exponent = int_part.len() as i32 - lead as i32 - 1 + exp_part;
    out.push(char::from(sig[0]));
    if sig.len() > 1 {
        out.push('.');
        for &d in &sig[1..] {
            out.push(char::from(d));
        }
    }
    out.push('e');
    let mut itoa = itoa_buf(exponent);
    out.push_str(itoa.as_str());
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
    }
}
