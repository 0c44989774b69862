//! Numbers in exponent form with the shortest digits that read back to the
//! same `f64` (`6.65e4`, `1e-5`; the layout of `{:e}`), fast enough for a
//! CSV of millions of rows.

/// Appends `v` as `format!("{v:e}")` lays it out, without allocating.
///
/// The shortest round-trip digits come from the `zmij` crate, laid out
/// again as `d[.ddd]e<exp>`. They read back to the same `f64` and are as short as
/// `{:e}`'s; where two texts of that length are equally near the value, the
/// last digit may differ from `{:e}`'s (property tests).
pub fn push_exp(out: &mut String, v: f64) {
    let mut laid = [0u8; ROOM];
    let text = lay_exp(v, &mut laid);
    // Every byte is ASCII (digits, '-', '.', 'e', or std's `inf`/`NaN`).
    out.push_str(std::str::from_utf8(text).unwrap_or_default());
}

/// [`push_exp`] onto bytes (a CSV line being built).
pub fn push_exp_bytes(out: &mut Vec<u8>, v: f64) {
    let mut laid = [0u8; ROOM];
    let n = lay_exp_len(v, &mut laid);
    if n <= MOST {
        // A copy of fixed size, then the bytes beyond cut off.
        let len = out.len();
        out.extend_from_slice(&laid[..MOST]);
        out.truncate(len + n);
    } else {
        out.extend_from_slice(&laid[..n]);
    }
}

/// The most bytes a number laid out by [`push_exp`] takes (a sign and 32).
pub const EXP_MOST: usize = MOST + 1;

/// Room [`lay_exp_at`] needs from where it lays a number out: the number
/// itself (at most 33 bytes with a sign) and fixed-size copies beyond it.
pub const LAY_ROOM: usize = ROOM;

/// Lays `v` out as [`push_exp`] writes it at `out[at..]` and returns the
/// index after it: a line is laid out in place, with no copy through a
/// buffer of its own. Bytes after the number, up to `at + LAY_ROOM`, may be
/// overwritten.
///
/// # Panics
/// When `out` has fewer than [`LAY_ROOM`] bytes from `at` (the caller
/// sizes its buffer first).
#[inline]
pub fn lay_exp_at(out: &mut [u8], at: usize, v: f64) -> usize {
    let Some(laid) = out.get_mut(at..).and_then(|s| s.first_chunk_mut::<ROOM>()) else {
        panic!("lay_exp_at: fewer than {ROOM} bytes from {at}");
    };
    at + lay_exp_len(v, laid)
}

/// `v` laid out as [`push_exp`] writes it, in `laid`.
fn lay_exp(v: f64, laid: &mut [u8; ROOM]) -> &[u8] {
    let n = lay_exp_len(v, laid);
    &laid[..n]
}

/// How many bytes of zmij's text are read (it writes at most 24), and the
/// size of the fixed copies.
const MOST: usize = 32;

/// Room for a layout and a fixed copy beyond it.
const ROOM: usize = 80;

/// [`push_exp`]'s layout of `v` in `laid`; returns its length (at most
/// [`MOST`] but for a sign).
///
/// zmij's text is `[-]d[.ddd]e±<exp>` (its digits kept, the exponent
/// written again without its `+`) or, for magnitudes from 1e-5 to 1e16,
/// `[-]int.frac`: the significant digits are those without the zeros
/// before the first or after the last non-zero one, with the point after
/// the first of them. Every copy is of a fixed size (moves, not calls),
/// into room to spare.
#[inline]
fn lay_exp_len(v: f64, laid: &mut [u8; ROOM]) -> usize {
    if let Some(n) = lay_non_finite(v, laid) {
        return n;
    }
    let mut buf = zmij::Buffer::new();
    let text = buf.format_finite(v).as_bytes();
    let negative = text.first() == Some(&b'-');
    let body = &text[usize::from(negative)..];
    let len = body.len().min(MOST);
    let mut t = [0u8; ROOM];
    put_bytes(&mut t, 0, &body[..len]);
    let mut k = usize::from(negative);
    laid[0] = b'-';
    // The exponent, when there is one, is `e±d` to `e±ddd` at the end.
    let e_at = match len {
        _ if len >= 3 && t[len - 3] == b'e' => Some(len - 3),
        _ if len >= 4 && t[len - 4] == b'e' => Some(len - 4),
        _ if len >= 5 && t[len - 5] == b'e' => Some(len - 5),
        _ => None,
    };
    if let Some(e_at) = e_at {
        // The mantissa and the `e` as they are; the exponent's digits
        // after its sign (a `-` kept) without leading zeros.
        laid[k..k + MOST].copy_from_slice(&t[..MOST]);
        k += e_at + 1;
        let mut i = e_at + 1;
        let minus = t[i] == b'-';
        i += usize::from(minus || t[i] == b'+');
        while i + 1 < len && t[i] == b'0' {
            i += 1;
        }
        laid[k] = b'-';
        k += usize::from(minus);
        laid[k..k + 8].copy_from_slice(&t[i..i + 8]);
        return k + (len - i);
    }
    let dot = t[..len].iter().position(|&c| c == b'.').unwrap_or(len);
    // The fraction's digits without its trailing zeros: t[dot + 1..end].
    let mut end = len;
    while end > dot + 1 && t[end - 1] == b'0' {
        end -= 1;
    }
    let frac = end.saturating_sub(dot + 1);
    if t[0] == b'0' {
        // 0.000ddd: the first significant digit is in the fraction (at most
        // four zeros before it: from 1e-5 on).
        let mut lead = dot + 1;
        while lead < end && t[lead] == b'0' {
            lead += 1;
        }
        if lead >= end {
            laid[k..k + 3].copy_from_slice(b"0e0");
            return k + 3;
        }
        laid[k] = t[lead];
        laid[k + 1] = b'.';
        laid[k + 2..k + 2 + MOST].copy_from_slice(&t[lead + 1..lead + 1 + MOST]);
        let rest = end - lead - 1;
        // No point when no digit follows the first.
        k += 1 + usize::from(rest > 0) * (1 + rest);
        return put_exponent(laid, k, true, (lead - dot) as u32);
    }
    // ddd.ddd with no leading zero: the point moves after the first digit;
    // with no fraction left, the whole part's trailing zeros go too.
    let mut int_end = dot;
    if frac == 0 {
        while int_end > 1 && t[int_end - 1] == b'0' {
            int_end -= 1;
        }
    }
    laid[k] = t[0];
    k += 1;
    let rest = int_end.saturating_sub(1);
    if rest + frac > 0 {
        laid[k] = b'.';
        k += 1;
        laid[k..k + MOST].copy_from_slice(&t[1..1 + MOST]);
        k += rest;
        laid[k..k + MOST].copy_from_slice(&t[dot + 1..dot + 1 + MOST]);
        k += frac;
    }
    put_exponent(laid, k, false, dot.saturating_sub(1) as u32)
}

/// Copies `src` to `dst[at..]` and returns the index after it. A text of
/// up to 32 bytes (a number's, a channel's or a regime's name) goes in
/// copies of a fixed size, overlapping where it is shorter than two of
/// them: moves, not a call into `memcpy`. Used by the number layout and by
/// the report's CSV writer.
///
/// # Panics
/// When `dst` is shorter than `at + src.len()`.
#[inline(always)]
pub fn put_bytes(dst: &mut [u8], at: usize, src: &[u8]) -> usize {
    let n = src.len();
    let d = &mut dst[at..at + n];
    if (16..=32).contains(&n) {
        d[..16].copy_from_slice(&src[..16]);
        d[n - 16..].copy_from_slice(&src[n - 16..]);
    } else if (8..16).contains(&n) {
        d[..8].copy_from_slice(&src[..8]);
        d[n - 8..].copy_from_slice(&src[n - 8..]);
    } else if n < 8 {
        for (d, s) in d.iter_mut().zip(src) {
            *d = *s;
        }
    } else {
        d.copy_from_slice(src);
    }
    at + n
}

/// inf, -inf and NaN as std writes them, in `laid`; `None` for a finite
/// `v`.
fn lay_non_finite(v: f64, laid: &mut [u8; ROOM]) -> Option<usize> {
    if v.is_finite() {
        return None;
    }
    let text: &[u8] = if v.is_nan() {
        b"NaN"
    } else if v > 0.0 {
        b"inf"
    } else {
        b"-inf"
    };
    laid[..text.len()].copy_from_slice(text);
    Some(text.len())
}

/// Writes `e[-]<e>` at `k` (no leading zeros); returns the length.
#[inline]
fn put_exponent(laid: &mut [u8; ROOM], mut k: usize, minus: bool, e: u32) -> usize {
    laid[k] = b'e';
    k += 1;
    if minus {
        laid[k] = b'-';
        k += 1;
    }
    if e >= 100 {
        laid[k] = b'0' + (e / 100 % 10) as u8;
        k += 1;
    }
    if e >= 10 {
        laid[k] = b'0' + (e / 10 % 10) as u8;
        k += 1;
    }
    laid[k] = b'0' + (e % 10) as u8;
    k + 1
}

/// The layout as first written (several passes over zmij's text): what
/// [`lay_exp`] is tested against.
#[cfg(test)]
fn lay_exp_reference(v: f64, laid: &mut [u8; ROOM]) -> &[u8] {
    if let Some(n) = lay_non_finite(v, laid) {
        return &laid[..n];
    }
    let mut buf = zmij::Buffer::new();
    let text = buf.format_finite(v);
    // zmij writes `[-]d[.ddd]e±<exp>` or, for magnitudes from 1e-5 to
    // 1e16, `[-]int.frac`. The first keeps its digits, its exponent is
    // written as `{:e}` writes it (no `+`, no leading zeros); the second is
    // laid out again. The exponent, when there is one, is among the last
    // six bytes (`e-0324` at most).
    let bytes = text.as_bytes();
    let tail = bytes.len().saturating_sub(6);
    if let Some(at) = bytes[tail..].iter().position(|&c| c == b'e') {
        let (mantissa, exponent) = bytes.split_at(tail + at);
        let exponent = &exponent[1..];
        let (minus, digits) = match exponent.split_first() {
            Some((b'-', rest)) => (true, rest),
            Some((b'+', rest)) => (false, rest),
            _ => (false, exponent),
        };
        let zeros = digits
            .iter()
            .take(digits.len().saturating_sub(1))
            .take_while(|&&d| d == b'0')
            .count();
        let digits = &digits[zeros..];
        let mut k = mantissa.len();
        laid[..k].copy_from_slice(mantissa);
        laid[k] = b'e';
        k += 1;
        if minus {
            laid[k] = b'-';
            k += 1;
        }
        laid[k..k + digits.len()].copy_from_slice(digits);
        return &laid[..k + digits.len()];
    }
    // `[-]int.frac`: the significant digits are those of `int` and `frac`
    // together without the zeros before the first or after the last
    // non-zero one; the point goes after the first of them. Laid out on
    // the stack, then added at once.
    let bytes = text.as_bytes();
    let (negative, body) = match bytes.split_first() {
        Some((b'-', rest)) => (true, rest),
        _ => (false, bytes),
    };
    let (int, frac) = match body.iter().position(|&c| c == b'.') {
        Some(dot) => (&body[..dot], &body[dot + 1..]),
        None => (body, &[][..]),
    };
    // At most 17 significant digits, 5 zeros after the point (from 1e-5)
    // and 17 digits before it (below 1e16): well inside 64 bytes.
    let mut k = 0;
    if negative {
        laid[0] = b'-';
        k = 1;
    }
    let frac_end = frac.iter().rposition(|&d| d != b'0').map_or(0, |l| l + 1);
    let frac = &frac[..frac_end];
    let exponent = if int.iter().all(|&d| d == b'0') {
        // 0.000ddd: the first significant digit is in the fraction.
        let Some(lead) = frac.iter().position(|&d| d != b'0') else {
            laid[k..k + 3].copy_from_slice(b"0e0");
            return &laid[..k + 3];
        };
        let sig = &frac[lead..];
        laid[k] = sig[0];
        k += 1;
        if sig.len() > 1 {
            laid[k] = b'.';
            laid[k + 1..k + sig.len()].copy_from_slice(&sig[1..]);
            k += sig.len();
        }
        -(lead as i32) - 1
    } else {
        // ddd.ddd with no leading zero: the point moves after the first
        // digit; trailing zeros of the digits go.
        let rest = if frac.is_empty() {
            let end = int.iter().rposition(|&d| d != b'0').map_or(1, |l| l + 1);
            &int[1..end]
        } else {
            &int[1..]
        };
        laid[k] = int[0];
        k += 1;
        if !rest.is_empty() || !frac.is_empty() {
            laid[k] = b'.';
            k += 1;
            laid[k..k + rest.len()].copy_from_slice(rest);
            k += rest.len();
            laid[k..k + frac.len()].copy_from_slice(frac);
            k += frac.len();
        }
        int.len() as i32 - 1
    };
    let n = put_exponent(laid, k, exponent < 0, exponent.unsigned_abs());
    &laid[..n]
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
        let (mut a, mut b) = ([0u8; ROOM], [0u8; ROOM]);
        assert_eq!(lay_exp(v, &mut a), lay_exp_reference(v, &mut b), "{v:?}");
        let mut b = b"x,".to_vec();
        push_exp_bytes(&mut b, v);
        assert_eq!(b[2..], *s.as_bytes(), "bytes and text of {v:?}");
        let mut line = [b'#'; 2 + LAY_ROOM];
        let end = lay_exp_at(&mut line, 2, v);
        assert_eq!(line[2..end], *s.as_bytes(), "laid in place: {v:?}");
        assert_eq!(line[..2], *b"##", "before {v:?}");
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
    fn short_copies_copy_every_length() {
        let src: Vec<u8> = (1..=48).collect();
        for at in [0, 3] {
            for n in 0..=48 {
                let mut dst = [0u8; ROOM];
                assert_eq!(put_bytes(&mut dst, at, &src[..n]), at + n);
                assert_eq!(dst[at..at + n], src[..n], "{n}");
                assert!(dst[..at].iter().all(|&b| b == 0), "{n}: before");
                assert!(dst[at + n..].iter().all(|&b| b == 0), "{n}: beyond");
            }
        }
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

        /// The magnitudes written without an exponent (1e-5 to 1e16),
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
