//! Decimal number parsing for CSV fields: a fast path for the plain forms loggers write, and the
//! standard library for everything else, so that speed never costs correctness.
//!
//! The fast path is Clinger's: when the decimal mantissa fits in 53 bits and the power of ten
//! is at most 22 in magnitude, both are exact doubles and one IEEE multiplication or division
//! gives the correctly rounded result (W. D. Clinger, "How to Read Floating Point Numbers
//! Accurately", PLDI 1990). Anything else (more digits, larger exponents, quotes, decimal
//! commas, "nan") returns `None` and the caller takes the slow path with `str::parse`, so the
//! value is always bit for bit what `str::parse::<f64>` (time) or `str::parse::<f32>` (samples)
//! gives.

/// Exact powers of ten representable in a double (10^22 is the last one).
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// A field read by the fast path.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Fast {
    /// The correctly rounded double.
    pub value: f64,
    /// The power of ten of the last written digit: the field's resolution is `10^exp10`.
    pub exp10: i32,
    /// Index of the byte that ended the field (the separator or `\n`).
    pub end: usize,
}

/// Is this byte padding around a field? A tab is padding unless it separates fields.
#[inline(always)]
pub(crate) fn is_pad(c: u8, sep: u8) -> bool {
    c == b' ' || (c == b'\t' && sep != b'\t')
}

/// Reads a plain decimal (`-12.5`, `3`, `.25`, `1.5e-3`) starting at `i`, padding allowed
/// around it, up to the separator or `\n`. `b` must end with `\n` past `i`.
///
/// Returns `None` for anything it cannot do exactly; the caller then parses the field slowly.
#[inline(always)]
pub(crate) fn fast_field(b: &[u8], mut i: usize, sep: u8) -> Option<Fast> {
    while is_pad(*b.get(i)?, sep) {
        i += 1;
    }
    let mut c = *b.get(i)?;
    let neg = c == b'-';
    if neg || c == b'+' {
        i += 1;
    }
    let mut mant: u64 = 0;
    let first = i;
    loop {
        c = *b.get(i)?;
        let d = c.wrapping_sub(b'0');
        if d > 9 {
            break;
        }
        mant = mant.wrapping_mul(10).wrapping_add(u64::from(d));
        i += 1;
    }
    let mut digits = i - first;
    let mut exp10: i32 = 0;
    if c == b'.' {
        i += 1;
        let frac = i;
        loop {
            c = *b.get(i)?;
            let d = c.wrapping_sub(b'0');
            if d > 9 {
                break;
            }
            mant = mant.wrapping_mul(10).wrapping_add(u64::from(d));
            i += 1;
        }
        digits += i - frac;
        exp10 = -((i - frac) as i32);
    }
    // 19 digits always fit in a u64; more may have wrapped, so leave them to the slow path.
    if digits == 0 || digits > 19 {
        return None;
    }
    if c == b'e' || c == b'E' {
        i += 1;
        c = *b.get(i)?;
        let eneg = c == b'-';
        if eneg || c == b'+' {
            i += 1;
        }
        let efirst = i;
        let mut e: i32 = 0;
        loop {
            c = *b.get(i)?;
            let d = c.wrapping_sub(b'0');
            if d > 9 {
                break;
            }
            e = e * 10 + i32::from(d);
            i += 1;
            if i - efirst > 4 {
                return None;
            }
        }
        if i == efirst {
            return None;
        }
        exp10 += if eneg { -e } else { e };
    }
    while is_pad(c, sep) || c == b'\r' {
        i += 1;
        c = *b.get(i)?;
    }
    if c != sep && c != b'\n' {
        return None;
    }
    if mant > (1u64 << 53) {
        return None;
    }
    let m = mant as f64;
    let v = if exp10 >= 0 {
        m * *POW10.get(exp10 as usize)?
    } else {
        m / *POW10.get(exp10.unsigned_abs() as usize)?
    };
    Some(Fast {
        value: if neg { -v } else { v },
        exp10,
        end: i,
    })
}

/// Narrows a correctly rounded double to the float that `str::parse::<f32>` would give for the
/// same text, or `None` when that needs the text again.
///
/// Rounding twice (decimal to double to float) differs from rounding once only when the double
/// lands exactly on the midpoint between two floats (the midpoints are doubles, and rounding is
/// monotonic, so any other double is on the same side of every midpoint as the exact value).
/// Subnormal floats have fewer bits, so they go to the slow path too.
#[inline(always)]
pub(crate) fn narrow(x: f64) -> Option<f32> {
    let a = x.abs();
    if a < f64::from(f32::MIN_POSITIVE) && a != 0.0 {
        return None;
    }
    // A double keeps 29 more fraction bits than a float; the midpoint has them set to 100…0.
    const LOW: u64 = (1 << 29) - 1;
    if x.to_bits() & LOW == 1 << 28 {
        return None;
    }
    Some(x as f32)
}

/// The resolution `10^exp10` of a field, for judging how exactly a time column can be spaced.
pub(crate) fn resolution(exp10: i32) -> f64 {
    10f64.powi(exp10)
}

/// Trims padding, `\r` and one pair of quotes, and turns a lone decimal comma into a point
/// when the separator is not a comma (files written with `;` often use decimal commas).
pub(crate) fn clean_field(raw: &[u8], sep: u8) -> std::borrow::Cow<'_, [u8]> {
    let mut s = raw;
    while let [c, rest @ ..] = s {
        if is_pad(*c, sep) || *c == b'\r' {
            s = rest;
        } else {
            break;
        }
    }
    while let [rest @ .., c] = s {
        if is_pad(*c, sep) || *c == b'\r' {
            s = rest;
        } else {
            break;
        }
    }
    if let [b'"', inner @ .., b'"'] = s {
        s = inner;
        while let [c, rest @ ..] = s {
            if *c == b' ' {
                s = rest;
            } else {
                break;
            }
        }
        while let [rest @ .., b' '] = s {
            s = rest;
        }
    }
    if sep != b',' && !s.contains(&b'.') && s.iter().filter(|&&c| c == b',').count() == 1 {
        let owned: Vec<u8> = s
            .iter()
            .map(|&c| if c == b',' { b'.' } else { c })
            .collect();
        return std::borrow::Cow::Owned(owned);
    }
    std::borrow::Cow::Borrowed(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A small deterministic generator, so failures can be replayed.
    struct Lcg(u64);
    impl Lcg {
        fn next(&mut self) -> u64 {
            // Knuth's MMIX constants (The Art of Computer Programming, vol. 2, 3rd ed.).
            self.0 = self
                .0
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            self.0 >> 33
        }
        fn below(&mut self, n: u64) -> u64 {
            self.next() % n
        }
    }

    fn random_decimal(r: &mut Lcg) -> String {
        let mut s = String::new();
        match r.below(3) {
            0 => s.push('-'),
            1 => s.push('+'),
            _ => {}
        }
        let int_digits = r.below(12);
        for _ in 0..int_digits {
            s.push(char::from(b'0' + r.below(10) as u8));
        }
        if r.below(2) == 0 {
            s.push('.');
            for _ in 0..r.below(14) {
                s.push(char::from(b'0' + r.below(10) as u8));
            }
        }
        if r.below(3) == 0 {
            s.push(if r.below(2) == 0 { 'e' } else { 'E' });
            match r.below(3) {
                0 => s.push('-'),
                1 => s.push('+'),
                _ => {}
            }
            s.push_str(&r.below(40).to_string());
        }
        s
    }

    /// Every text the fast path accepts must give exactly what the standard library gives
    /// (the standard library's parser is correctly rounded: the independent reference here).
    #[test]
    fn fast_path_matches_std_bit_for_bit() {
        let mut r = Lcg(7);
        let mut fast = 0;
        for _ in 0..200_000 {
            let text = random_decimal(&mut r);
            let line = format!(" {text} ,\n");
            let Some(f) = fast_field(line.as_bytes(), 0, b',') else {
                continue;
            };
            fast += 1;
            let want: f64 = text.parse().expect("fast path accepted what std rejects");
            assert_eq!(f.value.to_bits(), want.to_bits(), "{text}");
            assert_eq!(line.as_bytes()[f.end], b',');
            if let Some(n) = narrow(f.value) {
                let want32: f32 = text.parse().expect("std f32");
                assert_eq!(n.to_bits(), want32.to_bits(), "{text} as f32");
            }
        }
        // The generator is built so that most of its numbers are plain: the fast path must
        // have been exercised, not skipped.
        assert!(fast > 100_000, "fast path taken only {fast} times");
    }

    #[test]
    fn shortest_float_text_narrows_to_the_same_float() {
        let mut r = Lcg(11);
        for _ in 0..200_000 {
            let x = f32::from_bits(r.next() as u32 ^ ((r.next() as u32) << 16));
            if !x.is_finite() {
                continue;
            }
            let mut buf = ryu::Buffer::new();
            let line = format!("{},\n", buf.format(x));
            let got = match fast_field(line.as_bytes(), 0, b',').and_then(|f| narrow(f.value)) {
                Some(v) => v,
                None => line.trim_end_matches([',', '\n']).parse().expect("std"),
            };
            assert_eq!(got.to_bits(), x.to_bits(), "{line}");
        }
    }

    #[test]
    fn midpoint_doubles_are_left_to_the_slow_path() {
        // 1 + 2^-24 is exactly halfway between the floats 1 and 1 + 2^-23.
        let mid = 1.0f64 + 2f64.powi(-24);
        assert_eq!(narrow(mid), None);
        assert_eq!(narrow(1.0), Some(1.0));
        assert_eq!(narrow(1e-40), None);
    }

    #[test]
    fn rejects_what_it_cannot_do_exactly() {
        for text in [
            "1.2.3",
            "nan",
            "inf",
            "",
            "-",
            ".",
            "1e",
            "1e+",
            "\"1\"",
            "1,5",
            "12345678901234567890",
            "1e400",
            "0x10",
            "1 2",
        ] {
            let line = format!("{text};\n");
            assert!(
                fast_field(line.as_bytes(), 0, b';').is_none(),
                "fast path took {text:?}"
            );
        }
    }

    #[test]
    fn cleans_quotes_padding_and_decimal_commas() {
        assert_eq!(&*clean_field(b" \"1.5\" \r", b','), b"1.5");
        assert_eq!(&*clean_field(b"1,5", b';'), b"1.5");
        assert_eq!(&*clean_field(b"1,5", b','), b"1,5");
        assert_eq!(&*clean_field(b"\t2\t", b','), b"2");
        assert_eq!(resolution(-3), 1e-3);
    }
}
