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

/// Parses a number written with a point as the decimal mark.
#[inline]
pub(super) fn parse_f64(bytes: &[u8]) -> Option<f64> {
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
}
