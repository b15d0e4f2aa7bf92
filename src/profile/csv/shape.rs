//! Lines of plain numbers read by their shape: the bytes of a line are sorted into
//! classes (digit, delimiter, decimal point, minus sign) sixteen or thirty-two at a time
//! with SSE2 or AVX2, and the positions of the delimiters, points and signs make the
//! line's shape. Loggers write line after line of the same shape, so the shape is worked
//! out once (where each number starts, how many digits it has, where its point is) and
//! the lines after it that have the same shape are read without looking for anything:
//! each number is eight bytes loaded at a known place, its point dropped with two masks,
//! its digits turned into an integer with a few multiplications (four numbers at a time
//! with AVX2) and divided by the power of ten of its fraction, exactly as
//! [`parse_plain_prefix`] does, so every value is the same to the bit.
//!
//! Only lines of exactly seven fields, each `[-]digits[.digits]` of at most eight bytes
//! after the sign (or up to fifteen digits, read by [`parse_plain_prefix`]), ended by a
//! line feed or CRLF within 64 bytes, are read here; any other line is left to the
//! byte-wise reading in `block.rs`. The SIMD code exists for x86-64 only: SSE2 is part of
//! every x86-64 processor, AVX2 is used when the processor reports it at run time;
//! elsewhere the byte-wise reading does it all.

use super::number::{parse_plain_prefix, POW10};

/// Bytes a line read by its shape may take, line end included.
pub(super) const SHAPE_BYTES: usize = 64;

/// Bytes from a line's start that must be in the buffer to read it by its shape: the 64
/// classified bytes, and the eight-byte loads of numbers that start near their end.
pub(super) const SHAPE_WINDOW: usize = 128;

/// The classes of 64 bytes of text, one bit per byte (bit i for byte i).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub(super) struct Classes {
    /// Bytes that are not a decimal digit.
    pub(super) non_digit: u64,
    /// The column delimiter.
    pub(super) delimiter: u64,
    /// `.`.
    pub(super) point: u64,
    /// `-`.
    pub(super) minus: u64,
}

/// Sorts 64 bytes into [`Classes`], and reads the numbers of a line by its shape.
pub(super) trait Classify: Copy {
    /// The classes of `bytes` with `delimiter` as the column delimiter.
    fn classify(self, bytes: &[u8; SHAPE_BYTES], delimiter: u8) -> Classes;

    /// The seven numbers of the line at the start of `win` (none longer than eight
    /// bytes), read by `shape` into `out` (its eighth is left as it is or set to 0).
    #[inline(always)]
    fn numbers(self, shape: &Shape, win: &[u8; SHAPE_WINDOW], out: &mut [f64; 8]) {
        shape.numbers_one_by_one(win, out);
    }
}

/// The classes worked out one byte at a time: the reference the SIMD versions are
/// tested against.
#[derive(Debug, Clone, Copy)]
pub(super) struct Bytewise;

impl Classify for Bytewise {
    #[inline]
    fn classify(self, bytes: &[u8; SHAPE_BYTES], delimiter: u8) -> Classes {
        let mut c = Classes::default();
        for (i, &b) in bytes.iter().enumerate() {
            let bit = 1u64 << i;
            if !b.is_ascii_digit() {
                c.non_digit |= bit;
            }
            if b == delimiter {
                c.delimiter |= bit;
            }
            if b == b'.' {
                c.point |= bit;
            }
            if b == b'-' {
                c.minus |= bit;
            }
        }
        c
    }
}

#[cfg(target_arch = "x86_64")]
pub(super) use x86::{Avx2, Sse2};

#[cfg(target_arch = "x86_64")]
mod x86 {
    use super::{Classes, Classify, Shape, SHAPE_BYTES, SHAPE_WINDOW};
    use std::arch::x86_64::*;

    /// SSE2, which every x86-64 processor has.
    #[derive(Debug, Clone, Copy)]
    pub(in super::super) struct Sse2;

    impl Classify for Sse2 {
        #[inline(always)]
        fn classify(self, bytes: &[u8; SHAPE_BYTES], delimiter: u8) -> Classes {
            let mut c = Classes::default();
            for k in 0..4 {
                // SAFETY: SSE2 is part of the x86-64 architecture (the target enables it
                // for every build), and the load reads bytes 16k to 16k + 15 of `bytes`,
                // which holds 64.
                let m = unsafe {
                    let x = _mm_loadu_si128(bytes.as_ptr().add(16 * k).cast());
                    // '0'..='9' + 80 is -128..=-119 as a signed byte: a digit is below -118.
                    let shifted = _mm_add_epi8(x, _mm_set1_epi8(80));
                    let non_digit = _mm_cmpgt_epi8(shifted, _mm_set1_epi8(-119));
                    let delim = _mm_cmpeq_epi8(x, _mm_set1_epi8(delimiter as i8));
                    let point = _mm_cmpeq_epi8(x, _mm_set1_epi8(b'.' as i8));
                    let minus = _mm_cmpeq_epi8(x, _mm_set1_epi8(b'-' as i8));
                    [
                        _mm_movemask_epi8(non_digit),
                        _mm_movemask_epi8(delim),
                        _mm_movemask_epi8(point),
                        _mm_movemask_epi8(minus),
                    ]
                };
                let at = 16 * k;
                c.non_digit |= u64::from(m[0] as u16) << at;
                c.delimiter |= u64::from(m[1] as u16) << at;
                c.point |= u64::from(m[2] as u16) << at;
                c.minus |= u64::from(m[3] as u16) << at;
            }
            c
        }
    }

    /// AVX2 (with BMI1, BMI2 and POPCNT), when the processor has them: only made by
    /// [`Avx2::detect`].
    #[derive(Debug, Clone, Copy)]
    pub(in super::super) struct Avx2(());

    impl Avx2 {
        /// `Some` when the processor has AVX2, BMI1, BMI2 and POPCNT.
        pub(in super::super) fn detect() -> Option<Avx2> {
            (is_x86_feature_detected!("avx2")
                && is_x86_feature_detected!("bmi1")
                && is_x86_feature_detected!("bmi2")
                && is_x86_feature_detected!("popcnt"))
            .then_some(Avx2(()))
        }
    }

    impl Classify for Avx2 {
        /// Inlined only into code compiled for AVX2 (see `block.rs`).
        #[inline(always)]
        fn classify(self, bytes: &[u8; SHAPE_BYTES], delimiter: u8) -> Classes {
            // SAFETY: an `Avx2` exists only when `detect` found AVX2 on this processor,
            // and the two loads read bytes 0 to 31 and 32 to 63 of `bytes`, which holds 64.
            // (No closure here: a closure would not be compiled for AVX2, and each
            // intrinsic would become a call.)
            let m = unsafe {
                let lo = _mm256_loadu_si256(bytes.as_ptr().cast());
                let hi = _mm256_loadu_si256(bytes.as_ptr().add(32).cast());
                let nine = _mm256_set1_epi8(-119);
                let shift = _mm256_set1_epi8(80);
                let delim = _mm256_set1_epi8(delimiter as i8);
                let point = _mm256_set1_epi8(b'.' as i8);
                let minus = _mm256_set1_epi8(b'-' as i8);
                [
                    [
                        _mm256_movemask_epi8(_mm256_cmpgt_epi8(_mm256_add_epi8(lo, shift), nine))
                            as u32,
                        _mm256_movemask_epi8(_mm256_cmpeq_epi8(lo, delim)) as u32,
                        _mm256_movemask_epi8(_mm256_cmpeq_epi8(lo, point)) as u32,
                        _mm256_movemask_epi8(_mm256_cmpeq_epi8(lo, minus)) as u32,
                    ],
                    [
                        _mm256_movemask_epi8(_mm256_cmpgt_epi8(_mm256_add_epi8(hi, shift), nine))
                            as u32,
                        _mm256_movemask_epi8(_mm256_cmpeq_epi8(hi, delim)) as u32,
                        _mm256_movemask_epi8(_mm256_cmpeq_epi8(hi, point)) as u32,
                        _mm256_movemask_epi8(_mm256_cmpeq_epi8(hi, minus)) as u32,
                    ],
                ]
            };
            let join = |i: usize| u64::from(m[0][i]) | u64::from(m[1][i]) << 32;
            Classes {
                non_digit: join(0),
                delimiter: join(1),
                point: join(2),
                minus: join(3),
            }
        }

        /// The numbers four at a time: the same steps as [`Shape::number`] on each
        /// 64-bit lane (drop the point, move the digits to the top), then pairs of
        /// digits, fours and eights combined by multiply-adds, and the four integers
        /// converted and divided by their powers of ten at once (IEEE 754 division,
        /// correctly rounded in each lane as in one).
        #[inline(always)]
        fn numbers(self, shape: &Shape, win: &[u8; SHAPE_WINDOW], out: &mut [f64; 8]) {
            let word = |i: usize| {
                let at = usize::from(shape.at[i]) & (SHAPE_BYTES - 1);
                let mut w = [0u8; 8];
                w.copy_from_slice(&win[at..at + 8]);
                i64::from_le_bytes(w)
            };
            let words = [
                [word(0), word(1), word(2), word(3)],
                [word(4), word(5), word(6), 0],
            ];
            for (h, w) in words.iter().enumerate() {
                // SAFETY: an `Avx2` exists only when `detect` found AVX2 on this
                // processor; the loads read lanes 4h to 4h + 3 of the shape's arrays of
                // eight, and the store writes lanes 4h to 4h + 3 of `out`, of eight (as
                // one store of 32 bytes, from which the single numbers are read back).
                unsafe {
                    let x = _mm256_set_epi64x(w[3], w[2], w[1], w[0]);
                    let a = _mm256_xor_si256(x, _mm256_set1_epi8(b'0' as i8));
                    let before = _mm256_loadu_si256(shape.before_point.as_ptr().add(4 * h).cast());
                    let merged = _mm256_or_si256(
                        _mm256_and_si256(a, before),
                        _mm256_andnot_si256(before, _mm256_srli_epi64::<8>(a)),
                    );
                    let shift = _mm256_loadu_si256(shape.shift.as_ptr().add(4 * h).cast());
                    let top = _mm256_sllv_epi64(merged, shift);
                    // Each digit byte times 10 plus the next, then each pair times 100
                    // plus the next: the first four and the last four digits of a lane.
                    let pairs = _mm256_maddubs_epi16(top, _mm256_set1_epi16(0x010A));
                    let fours = _mm256_madd_epi16(pairs, _mm256_set1_epi32(0x0001_0064));
                    let eights = _mm256_add_epi64(
                        _mm256_mul_epu32(fours, _mm256_set1_epi64x(10_000)),
                        _mm256_srli_epi64::<32>(fours),
                    );
                    // Below 10^8, so the low 32 bits of each lane hold the integer.
                    let low = _mm256_permutevar8x32_epi32(
                        eights,
                        _mm256_setr_epi32(0, 2, 4, 6, 0, 2, 4, 6),
                    );
                    let f = _mm256_cvtepi32_pd(_mm256_castsi256_si128(low));
                    let div = _mm256_loadu_pd(shape.divisor.as_ptr().add(4 * h));
                    let sign = _mm256_loadu_pd(shape.sign.as_ptr().add(4 * h).cast());
                    let v = _mm256_or_pd(_mm256_div_pd(f, div), sign);
                    _mm256_storeu_pd(out.as_mut_ptr().add(4 * h), v);
                }
            }
        }
    }
}

/// The shape of a line: the classes of its bytes up to its line end, and how to read
/// each of its seven numbers, as arrays of eight (the eighth reads as 0) so that the
/// numbers can be read four at a time.
#[derive(Debug, Clone, Copy)]
pub(super) struct Shape {
    /// Delimiters, points and minus signs of the line before its line end, and the
    /// length of the line (`u64::MAX` while no shape has been learned).
    key: [u64; 4],
    /// Where each number's first digit (or its point, for `.5`) is, from the line's start.
    at: [u8; 8],
    /// The bytes before each number's point (all of them when there is none).
    before_point: [u64; 8],
    /// 8 × (8 − digits): the shift that puts each number's digits at the top of a word.
    shift: [u64; 8],
    /// 10 to the number of digits after each number's point.
    divisor: [f64; 8],
    /// Each number's sign bit, set for a negative number.
    sign: [u64; 8],
    /// One bit per number longer than eight bytes (up to fifteen digits and a point),
    /// read by [`parse_plain_prefix`] instead.
    long: u8,
}

impl Default for Shape {
    fn default() -> Self {
        Shape {
            key: [0, 0, 0, u64::MAX],
            at: [0; 8],
            before_point: [u64::MAX; 8],
            shift: [64; 8],
            divisor: [1.0; 8],
            sign: [0; 8],
            long: 0,
        }
    }
}

impl Shape {
    /// Number `i` (of at most eight bytes) of the line at the start of `win`, one at a
    /// time.
    #[inline(always)]
    fn number(&self, i: usize, win: &[u8; SHAPE_WINDOW]) -> f64 {
        let at = usize::from(self.at[i]) & (SHAPE_BYTES - 1);
        let mut word = [0u8; 8];
        word.copy_from_slice(&win[at..at + 8]);
        let a = u64::from_le_bytes(word) ^ 0x3030_3030_3030_3030;
        // The bytes after the point move down one, next to those before it.
        let b = self.before_point[i];
        let merged = (a & b) | ((a >> 8) & !b);
        let w = top_digits_value(merged << self.shift[i]);
        // The same integer over the same power of ten as `parse_plain_prefix`.
        let v = w as i64 as f64 / self.divisor[i];
        f64::from_bits(v.to_bits() | self.sign[i])
    }

    /// The seven numbers (all of at most eight bytes) one at a time, into `out`.
    #[inline(always)]
    pub(super) fn numbers_one_by_one(&self, win: &[u8; SHAPE_WINDOW], out: &mut [f64; 8]) {
        out[0] = self.number(0, win);
        out[1] = self.number(1, win);
        out[2] = self.number(2, win);
        out[3] = self.number(3, win);
        out[4] = self.number(4, win);
        out[5] = self.number(5, win);
        out[6] = self.number(6, win);
    }
}

/// A line read by its shape: where its line end starts (its length) and where its line
/// feed is, from the line's start.
#[derive(Debug, Clone, Copy)]
pub(super) struct ShapedLine {
    pub(super) stop: usize,
    pub(super) lf: usize,
    /// Some number is longer than eight bytes, so that it may be out of the range of
    /// its column (with eight bytes or fewer, every number is below 10^8).
    pub(super) long: bool,
}

/// The bits below bit `n` (all 64 for `n` ≥ 64).
#[inline(always)]
fn below(n: usize) -> u64 {
    1u64.checked_shl(n as u32).map_or(u64::MAX, |b| b - 1)
}

/// The value of the digits in `top` (values 0 to 9, the first digit in the lowest of the
/// bytes moved to the top of the word, zero bytes below them): the usual SWAR reading of
/// eight digits, as in `number.rs`.
#[inline(always)]
fn top_digits_value(top: u64) -> u64 {
    let v = top.wrapping_mul(10).wrapping_add(top >> 8);
    let lo = (v & 0x0000_00FF_0000_00FF).wrapping_mul(100 + (1_000_000 << 32));
    let hi = ((v >> 16) & 0x0000_00FF_0000_00FF).wrapping_mul(1 + (10_000 << 32));
    lo.wrapping_add(hi) >> 32
}

impl Shape {
    /// Works out the shape of a line whose delimiters, points and minus signs before its
    /// line end (at `stop`) are `key`; false (and the shape unchanged) when the line is not
    /// seven plain numbers of one to fifteen digits each.
    #[inline(never)]
    fn learn(&mut self, key: [u64; 4]) -> bool {
        let [delimiter, point, minus, stop] = key;
        let stop = stop as usize;
        if delimiter.count_ones() != 6 {
            return false;
        }
        let starts = (delimiter << 1) | 1;
        if minus & !starts != 0 {
            return false;
        }
        let mut ends = delimiter | (1u64 << stop);
        let mut shape = Shape {
            key,
            ..Shape::default()
        };
        let mut s = 0usize;
        for i in 0..7 {
            let e = ends.trailing_zeros() as usize;
            ends &= ends - 1;
            let neg = ((minus >> s) & 1) as usize;
            let ds = s + neg;
            let p = point & below(e) & !below(ds);
            if p.count_ones() > 1 {
                return false;
            }
            let digits = e - ds - p.count_ones() as usize;
            if digits == 0 || digits > 15 {
                return false;
            }
            let (before, frac) = if p != 0 {
                let at = p.trailing_zeros() as usize;
                (below(8 * (at - ds)), e - at - 1)
            } else {
                (u64::MAX, 0)
            };
            shape.at[i] = ds as u8;
            // The number, point included, must fit in the eight bytes loaded.
            if e - ds > 8 {
                shape.long |= 1 << i;
            } else {
                shape.shift[i] = (8 * (8 - digits)) as u64;
            }
            shape.before_point[i] = before;
            shape.divisor[i] = POW10[frac];
            shape.sign[i] = (neg as u64) << 63;
            s = e + 1;
        }
        *self = shape;
        true
    }

    /// Reads the line at the start of `win` by its shape (learning the shape first when
    /// it differs from the last line's), its seven numbers in field order into `out`, or
    /// `None` to leave it to the byte-wise reading (`out` may then be written). The
    /// values are exactly those of [`parse_plain_prefix`] on each field.
    #[inline(always)]
    pub(super) fn read<C: Classify>(
        &mut self,
        classify: C,
        win: &[u8; SHAPE_WINDOW],
        delimiter: u8,
        out: &mut [f64; 8],
    ) -> Option<ShapedLine> {
        let head: &[u8; SHAPE_BYTES] = win[..SHAPE_BYTES].try_into().ok()?;
        let c = classify.classify(head, delimiter);
        let other = c.non_digit & !(c.delimiter | c.point | c.minus);
        if other == 0 {
            return None;
        }
        let stop = other.trailing_zeros() as usize;
        let lf = match win[stop] {
            b'\n' => stop,
            b'\r' if win[stop + 1] == b'\n' => stop + 1,
            _ => return None,
        };
        let line = below(stop);
        let key = [
            c.delimiter & line,
            c.point & line,
            c.minus & line,
            stop as u64,
        ];
        // Compared one word at a time (not as one vector, which would be read back
        // from memory as the words are written to it, and wait for them).
        let same = (key[0] == self.key[0])
            & (key[1] == self.key[1])
            & (key[2] == self.key[2])
            & (key[3] == self.key[3]);
        if !same && !self.learn(key) {
            return None;
        }
        if self.long != 0 {
            for (i, v) in out[..7].iter_mut().enumerate() {
                *v = if self.long & (1 << i) != 0 {
                    let at = usize::from(self.at[i]) & (SHAPE_BYTES - 1);
                    let (v, _) = parse_plain_prefix(&win[at..])?;
                    f64::from_bits(v.to_bits() | self.sign[i])
                } else {
                    self.number(i, win)
                };
            }
        } else {
            classify.numbers(self, win, out);
        }
        Some(ShapedLine {
            stop,
            lf,
            long: self.long != 0,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The classifiers this processor can run, the byte-wise one first.
    fn classifiers(bytes: &[u8; SHAPE_BYTES], delimiter: u8) -> Vec<Classes> {
        #[allow(unused_mut)]
        let mut all = vec![Bytewise.classify(bytes, delimiter)];
        #[cfg(target_arch = "x86_64")]
        {
            all.push(Sse2.classify(bytes, delimiter));
            if let Some(avx2) = Avx2::detect() {
                all.push(avx2.classify(bytes, delimiter));
            }
        }
        all
    }

    #[test]
    fn simd_classes_match_the_bytewise_ones() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(0xc1a55);
        for round in 0..20_000 {
            let mut bytes = [0u8; SHAPE_BYTES];
            for b in bytes.iter_mut() {
                *b = if round % 2 == 0 {
                    rng.random()
                } else {
                    b"0123456789,;.-\n\r+e /:"[rng.random_range(0..21)]
                };
            }
            let delimiter = [b',', b';', b'\t', 0xff][rng.random_range(0..4)];
            let all = classifiers(&bytes, delimiter);
            for c in &all[1..] {
                assert_eq!(*c, all[0], "{bytes:?}");
            }
        }
    }

    /// A random line of seven fields, mostly plain numbers, with a random line end and
    /// junk after it.
    fn random_line(rng: &mut impl rand::Rng) -> Vec<u8> {
        let mut s = Vec::new();
        for f in 0..7 {
            if f > 0 {
                s.push(b',');
            }
            match rng.random_range(0..120) {
                0 => s.extend_from_slice(b"1e3"),
                1 => s.extend_from_slice(b"+5"),
                2 => {}
                3 => s.extend_from_slice(b"1.2.3"),
                4 => s.extend_from_slice(b"--1"),
                5 => s.extend_from_slice(b" 7"),
                _ => {
                    if rng.random_ratio(1, 4) {
                        s.push(b'-');
                    }
                    // Mostly short runs of digits, so that most lines fit in 64 bytes,
                    // and now and then long ones.
                    let most = if rng.random_ratio(1, 8) { 12 } else { 4 };
                    for _ in 0..rng.random_range(0..=most) {
                        s.push(b'0' + rng.random_range(0..10u8));
                    }
                    if rng.random_bool(0.8) {
                        s.push(b'.');
                        for _ in 0..rng.random_range(0..=most) {
                            s.push(b'0' + rng.random_range(0..10u8));
                        }
                    }
                }
            }
        }
        if rng.random_ratio(1, 30) {
            s.push(b',');
        }
        let ends: [&[u8]; 6] = [b"\n", b"\n", b"\n", b"\r\n", b"\r", b"x\n"];
        s.extend_from_slice(ends[rng.random_range(0..ends.len())]);
        s
    }

    /// The reading of `line` by each classifier this processor can run, with the shape
    /// each keeps from line to line.
    fn read_all(shapes: &mut [Shape; 3], win: &[u8; SHAPE_WINDOW]) -> Vec<Option<Vec<u64>>> {
        fn read<C: Classify>(
            shape: &mut Shape,
            c: C,
            win: &[u8; SHAPE_WINDOW],
        ) -> Option<Vec<u64>> {
            let mut out = [f64::NAN; 8];
            let l = shape.read(c, win, b',', &mut out)?;
            let mut v: Vec<u64> = out[..7].iter().map(|x| x.to_bits()).collect();
            v.extend([l.stop as u64, l.lf as u64]);
            Some(v)
        }
        #[allow(unused_mut)]
        let mut got = vec![read(&mut shapes[0], Bytewise, win)];
        #[cfg(target_arch = "x86_64")]
        {
            got.push(read(&mut shapes[1], Sse2, win));
            if let Some(avx2) = Avx2::detect() {
                got.push(read(&mut shapes[2], avx2, win));
            }
        }
        got
    }

    /// The reference for a line: seven fields ended by LF or CRLF within 64 bytes, each a
    /// plain number (`parse_plain_prefix` takes it whole, no plus sign), whose value is
    /// the standard library's `str::parse::<f64>` of it, to the bit.
    fn reference(line: &[u8]) -> Option<Vec<u64>> {
        let stop = line.iter().position(|&b| b == b'\n' || b == b'\r')?;
        if stop >= SHAPE_BYTES {
            return None;
        }
        let lf = if line[stop] == b'\n' {
            stop
        } else if line.get(stop + 1) == Some(&b'\n') {
            stop + 1
        } else {
            return None;
        };
        let fields: Vec<&[u8]> = line[..stop].split(|&b| b == b',').collect();
        if fields.len() != 7 {
            return None;
        }
        let mut out = Vec::new();
        for f in &fields {
            match parse_plain_prefix(f) {
                Some((_, n)) if n == f.len() && !f.starts_with(b"+") => {
                    // The value the reading must give: the standard library's.
                    let text = std::str::from_utf8(f).ok()?;
                    out.push(text.parse::<f64>().ok()?.to_bits());
                }
                _ => return None,
            }
        }
        out.extend([stop as u64, lf as u64]);
        Some(out)
    }

    #[test]
    fn lines_read_by_shape_as_the_standard_library_reads_them() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(0x5ba9e);
        let mut read = 0;
        let mut shapes = [Shape::default(); 3];
        for _ in 0..100_000 {
            let mut line = random_line(&mut rng);
            // Often a second line of the same shape with other digits, so that the
            // shape learned from the first reads it.
            let repeat = if rng.random_ratio(1, 2) { 2 } else { 1 };
            for _ in 0..repeat {
                let mut win = [b'7'; SHAPE_WINDOW];
                let n = line.len().min(SHAPE_WINDOW);
                win[..n].copy_from_slice(&line[..n]);
                let want = reference(&line);
                for got in read_all(&mut shapes, &win) {
                    assert_eq!(got, want, "{:?}", String::from_utf8_lossy(&line));
                }
                read += usize::from(want.is_some());
                for b in line.iter_mut().filter(|b| b.is_ascii_digit()) {
                    *b = b'0' + rng.random_range(0..10u8);
                }
            }
        }
        assert!(read > 30_000, "{read}");
    }

    #[test]
    fn an_empty_line_is_not_a_shape() {
        let mut win = [b'\n'; SHAPE_WINDOW];
        win[1..5].copy_from_slice(b"1,2\n");
        assert!(read_all(&mut [Shape::default(); 3], &win)
            .iter()
            .all(Option::is_none));
    }
}
