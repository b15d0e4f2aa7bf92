//! Numbers as a profile writes them: with a decimal point, or with a decimal comma (in
//! which case a point is refused, since it would be a thousands separator or a mix-up).
//!
//! The bytes are parsed as they stand, with no UTF-8 check, by `fast-float2` (the
//! Eisel-Lemire algorithm, correctly rounded). The Rust standard library's
//! `str::parse::<f64>` is the reference: a number `fast-float2` finds finite is taken as
//! it is (the tests check the two agree on many random decimal strings), and the rare
//! other outcomes (no number, NaN, an infinity) are settled by the standard library, so
//! what counts as a number and what is refused cannot differ from it.

/// Longest number copied for decimal-comma conversion, bytes; longer ones are malformed.
const MAX_NUMBER_BYTES: usize = 64;

/// Powers of ten exactly representable as f64 (10^0 to 10^22).
pub(super) const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// The plain numbers loggers write, `[+-]digits[.digits]` with at most 15 digits in all,
/// read from the start of `bytes`: the value and the bytes it took, or `None` for
/// anything else (which then goes to the full parser). The digits make an integer w below
/// 2^53 and the result is w / 10^f with f ≤ 22 digits after the point: both are exact in
/// an f64 and IEEE 754 division rounds correctly, so this is the correctly rounded value
/// (Clinger's fast path, W. D. Clinger, "How to read floating point numbers accurately",
/// PLDI 1990), the same as the standard library gives. It is kept beside `fast-float2`
/// because it also finds where the field ends in the same sweep and skips the crate's
/// general cases: measured on a week of 1 s rows, one core read 6.5 M rows/s with it
/// and 5.3 M rows/s with `fast_float2::parse_partial` in its place.
#[inline(always)]
pub(super) fn parse_plain_prefix(bytes: &[u8]) -> Option<(f64, usize)> {
    let mut i = 0;
    let neg = match bytes.first() {
        Some(b'-') => {
            i = 1;
            true
        }
        Some(b'+') => {
            i = 1;
            false
        }
        _ => false,
    };
    let mut w: u64 = 0;
    let mut digits = 0usize;
    i = digit_run(bytes, i, &mut w, &mut digits)?;
    let mut frac = 0usize;
    if bytes.get(i) == Some(&b'.') {
        let start = digits;
        i = digit_run(bytes, i + 1, &mut w, &mut digits)?;
        frac = digits - start;
    }
    if digits == 0 || matches!(bytes.get(i), Some(b'e' | b'E')) {
        return None;
    }
    // 15 digits keep w below 10^15 < 2^53, and f ≤ 15 ≤ 22.
    let v = w as f64 / POW10[frac];
    Some((if neg { -v } else { v }, i))
}

/// Powers of ten as integers, 10^0 to 10^8.
pub(super) const POW10_INT: [u64; 9] = [
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

/// The 8 bytes of `b` from `i` as a little-endian word (the first byte lowest), or `None`
/// when fewer than 8 bytes are left.
#[inline(always)]
fn word_at(b: &[u8], i: usize) -> Option<u64> {
    let w: [u8; 8] = b.get(i..i.checked_add(8)?)?.try_into().ok()?;
    Some(u64::from_le_bytes(w))
}

/// The leading decimal digits of the word `x` (text bytes, the first lowest): how many
/// (0 to 8), and the bytes with every digit turned into its value 0 to 9.
///
/// A byte is a digit when, less `'0'`, it is at most 9; adding 0x76 sets its top bit
/// exactly when it is above 9. A byte above 0x89 carries into the next one, but carries
/// only go to later bytes, past the first non-digit, so the count is exact.
#[inline(always)]
pub(super) fn leading_digits(x: u64) -> (usize, u64) {
    let a = x ^ 0x3030_3030_3030_3030;
    let over = (a | a.wrapping_add(0x7676_7676_7676_7676)) & 0x8080_8080_8080_8080;
    ((over.trailing_zeros() / 8) as usize, a)
}

/// The value of the first `n` (1 to 8) digits of `a` (values 0 to 9, the first digit in
/// the lowest byte), eight digits at a time: the digits are moved to the top of the word
/// (zero bytes before them are leading zeros), then pairs, fours and eights are combined
/// by multiplications (the usual SWAR reading of eight digits, as in simdjson).
#[inline(always)]
pub(super) fn digits_value(a: u64, n: usize) -> u64 {
    let v = a << (8 * (8 - n));
    let v = v.wrapping_mul(10).wrapping_add(v >> 8);
    let lo = (v & 0x0000_00FF_0000_00FF).wrapping_mul(100 + (1_000_000 << 32));
    let hi = ((v >> 16) & 0x0000_00FF_0000_00FF).wrapping_mul(1 + (10_000 << 32));
    lo.wrapping_add(hi) >> 32
}

/// [`parse_plain_prefix`] for the number starting at `i` of `b`, read eight bytes at a
/// time: the value and the index after it, or `None` to leave the number to
/// [`parse_plain_prefix`] (fewer than eight bytes left after a run, or a run of eight
/// digits or more). Where it answers, it gives exactly what `parse_plain_prefix` gives:
/// the same digits make the same integer w, divided by the same power of ten.
#[inline(always)]
pub(super) fn parse_plain_at(b: &[u8], i: usize) -> Option<(f64, usize)> {
    let first = *b.get(i)?;
    let neg = first == b'-';
    let mut i = i + usize::from(neg || first == b'+');
    let (n_int, a) = leading_digits(word_at(b, i)?);
    if n_int == 8 {
        return None;
    }
    let mut w = if n_int > 0 { digits_value(a, n_int) } else { 0 };
    i += n_int;
    let mut frac = 0;
    if b.get(i) == Some(&b'.') {
        let (n_frac, a) = leading_digits(word_at(b, i + 1)?);
        if n_frac == 8 {
            return None;
        }
        if n_frac > 0 {
            w = w * POW10_INT[n_frac] + digits_value(a, n_frac);
        }
        frac = n_frac;
        i += 1 + n_frac;
    }
    if n_int + frac == 0 || matches!(b.get(i), Some(b'e' | b'E')) {
        return None;
    }
    // At most 7 + 7 digits: w < 10^14 < 2^53, exact, as in `parse_plain_prefix` (and
    // converted from a signed integer, which is one instruction).
    let v = w as i64 as f64 / POW10[frac];
    Some((if neg { -v } else { v }, i))
}

/// Appends the run of decimal digits starting at `i` to `w`, counting them in `digits`;
/// the index after the run, or `None` past 15 digits in all (the fast path's limit).
#[inline(always)]
fn digit_run(bytes: &[u8], mut i: usize, w: &mut u64, digits: &mut usize) -> Option<usize> {
    while let Some(&b) = bytes.get(i) {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            break;
        }
        *w = *w * 10 + u64::from(d);
        *digits += 1;
        i += 1;
        if *digits > 15 {
            return None;
        }
    }
    Some(i)
}

/// Parses a number written with a point as the decimal mark.
#[inline]
pub(super) fn parse_f64(bytes: &[u8]) -> Option<f64> {
    if let Some((v, n)) = parse_plain_prefix(bytes) {
        if n == bytes.len() {
            return Some(v);
        }
    }
    match fast_float2::parse::<f64, _>(bytes) {
        Ok(v) if v.is_finite() => Some(v),
        _ => parse_f64_std(bytes),
    }
}

/// The standard library's reading of `bytes`, kept out of line: it settles the rare
/// numbers that are not finite or not numbers at all.
#[inline(never)]
fn parse_f64_std(bytes: &[u8]) -> Option<f64> {
    std::str::from_utf8(bytes).ok()?.parse::<f64>().ok()
}

/// Parses a number with the given decimal mark (`b'.'` or `b','`). With a decimal comma
/// a point is refused (it would be a thousands separator, or a mix-up).
#[inline]
pub(super) fn parse_number(bytes: &[u8], decimal: u8) -> Option<f64> {
    if decimal == b'.' {
        parse_f64(bytes)
    } else {
        parse_with_mark(bytes, decimal)
    }
}

/// [`parse_number`] for a decimal mark other than the point, kept out of line so that
/// the common path stays small.
#[inline(never)]
fn parse_with_mark(bytes: &[u8], decimal: u8) -> Option<f64> {
    if bytes.len() > MAX_NUMBER_BYTES || bytes.contains(&b'.') {
        return None;
    }
    let mut buf = [0u8; MAX_NUMBER_BYTES];
    for (d, &b) in buf.iter_mut().zip(bytes) {
        *d = if b == decimal { b'.' } else { b };
    }
    parse_f64(&buf[..bytes.len()])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_with_either_decimal_mark() {
        assert_eq!(parse_number(b"1.5", b'.'), Some(1.5));
        assert_eq!(parse_number(b"1,5", b'.'), None);
        assert_eq!(parse_number(b"1,5", b','), Some(1.5));
        assert_eq!(parse_number(b"-0,25e3", b','), Some(-250.0));
        assert_eq!(parse_number(b"1.234,5", b','), None);
        assert_eq!(parse_number(&[b'1'; 65], b','), None);
        assert!(parse_number(b"NaN", b',').is_some_and(f64::is_nan));
    }

    /// A random decimal string: sign, digits, point, exponent, and now and then a stray
    /// character, a space or an edge case, so that some strings are not numbers.
    fn random_number(rng: &mut impl rand::Rng) -> String {
        const EDGE: [&str; 24] = [
            "",
            ".",
            "+",
            "-",
            "e5",
            ".e1",
            "1e",
            "1e+",
            "1.e3",
            ".5",
            "5.",
            "-0",
            "+.5e-3",
            "inf",
            "-Infinity",
            "nan",
            "NaN",
            "1_000",
            "0x10",
            "1e400",
            "-1e-400",
            "4.9e-324",
            "1.7976931348623157e308",
            "00012.50",
        ];
        if rng.random_ratio(1, 10) {
            return EDGE[rng.random_range(0..EDGE.len())].to_string();
        }
        let mut s = String::new();
        match rng.random_range(0..4) {
            0 => s.push('-'),
            1 => s.push('+'),
            _ => {}
        }
        for _ in 0..rng.random_range(0..=20) {
            s.push(char::from(b'0' + rng.random_range(0..10u8)));
        }
        if rng.random_bool(0.7) {
            s.push('.');
            for _ in 0..rng.random_range(0..=20) {
                s.push(char::from(b'0' + rng.random_range(0..10u8)));
            }
        }
        if rng.random_bool(0.3) {
            s.push(if rng.random_bool(0.5) { 'e' } else { 'E' });
            match rng.random_range(0..3) {
                0 => s.push('-'),
                1 => s.push('+'),
                _ => {}
            }
            for _ in 0..rng.random_range(0..=3) {
                s.push(char::from(b'0' + rng.random_range(0..10u8)));
            }
        }
        if rng.random_ratio(1, 20) {
            let junk = [' ', 'x', ',', '.', 'e', '-', '\u{e9}'];
            let at = rng.random_range(0..=s.len());
            if s.is_char_boundary(at) {
                s.insert(at, junk[rng.random_range(0..junk.len())]);
            }
        }
        s
    }

    fn same(a: Option<f64>, b: Option<f64>) -> bool {
        match (a, b) {
            (Some(x), Some(y)) => x.to_bits() == y.to_bits() || (x.is_nan() && y.is_nan()),
            (None, None) => true,
            _ => false,
        }
    }

    #[test]
    fn plain_prefixes() {
        assert_eq!(parse_plain_prefix(b"1234.567,8"), Some((1234.567, 8)));
        assert_eq!(parse_plain_prefix(b"-0.25"), Some((-0.25, 5)));
        assert_eq!(parse_plain_prefix(b"+.5;"), Some((0.5, 3)));
        assert_eq!(parse_plain_prefix(b"7."), Some((7.0, 2)));
        assert!(parse_plain_prefix(b"-0").is_some_and(|(v, _)| v == 0.0 && v.is_sign_negative()));
        assert_eq!(parse_plain_prefix(b"."), None);
        assert_eq!(parse_plain_prefix(b"1e3"), None);
        assert_eq!(parse_plain_prefix(b"1234567890123456"), None);
    }

    #[test]
    fn reads_every_number_as_the_standard_library_does() {
        // Reference: the Rust standard library's `str::parse::<f64>` (correctly rounded,
        // IEEE 754 round-to-nearest-even), on the same text; with a decimal comma, on the
        // text with the comma turned into a point (and nothing when a point is present).
        use rand::SeedableRng;
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(0x5eed_f10a7);
        let mut numbers = 0;
        for _ in 0..200_000 {
            let s = random_number(&mut rng);
            let want = s.parse::<f64>().ok();
            numbers += usize::from(want.is_some());
            let got = parse_number(s.as_bytes(), b'.');
            assert!(
                same(got, want),
                "{s:?}: {got:?}, the standard library {want:?}"
            );
            let comma = s.replace('.', ",");
            let want_comma = s.replace(',', ".").parse::<f64>().ok();
            let got_comma = parse_number(comma.as_bytes(), b',');
            assert!(
                same(got_comma, want_comma),
                "{comma:?} with a decimal comma: {got_comma:?}, the standard library {want_comma:?}"
            );
        }
        // Most strings are numbers, and some are not.
        assert!(numbers > 150_000 && numbers < 200_000, "{numbers}");
    }
}
