//! The fast path of the first pass: the source read in large blocks of whole lines, each
//! block cut into lines and its numbers parsed (in parallel pieces on several cores),
//! before the row rules are applied to the rows one by one, in file order.
//!
//! Only plain text takes this path: a line holding a quote character, a carriage return
//! that is not part of a CRLF line end, longer than [`MAX_PLAIN_LINE`] bytes or with more
//! than [`MAX_PLAIN_FIELDS`] fields is a doubt, and the scan goes on with the record
//! reader (`source.rs`), which handles everything: on one thread from the start of that
//! line (the lines before it are plain), in parallel from the start of its block.
//! On plain text a line is exactly one record and its fields are the bytes between
//! delimiters, as the record reader would give them, so the rules see the same records.
//!
//! Parsing a line succeeds ("the row is clean") when it has at least the fields the
//! columns need, no non-blank field beyond the header, an elapsed time and six values that
//! are finite numbers within range. A clean row whose time is after the previous row's is
//! a good row and is taken without further checks; every other row is handed to the
//! rules as a [`PlainLine`] record, so defects get exactly the messages and line numbers
//! of the record reader.

use super::header::Columns;
use super::number::{
    digits_value, leading_digits, parse_number, parse_plain_at, parse_plain_prefix, POW10,
    POW10_INT,
};
use super::rules::{MAX_ELAPSED_S, MAX_POWER};
#[cfg(target_arch = "x86_64")]
use super::shape::{Avx2, Sse2};
use super::shape::{Bytewise, Classify, Shape, SHAPE_WINDOW};
use super::source::Record;
use rayon::prelude::*;

/// Bytes read per block.
pub(super) const BLOCK_BYTES: usize = 1 << 20;

/// Longest line the fast path takes, bytes; a longer one sends the scan to the record
/// reader (which enforces its own bounds).
pub(super) const MAX_PLAIN_LINE: usize = 64 * 1024;

/// Most fields the fast path takes in a line.
pub(super) const MAX_PLAIN_FIELDS: usize = 256;

/// Smallest piece of a block parsed on its own thread, bytes.
const MIN_PIECE_BYTES: usize = 64 * 1024;

/// One line of a block: where it is, and its time and values when it is clean.
#[derive(Debug, Clone, Copy, Default)]
pub(super) struct Row {
    /// Time, s, then the values in column order p_a, q_a, p_b, q_b, p_c, q_c (clean rows
    /// only; the eighth is not used, so that the numbers can be stored four at a time).
    pub(super) vals: [f64; 8],
    /// Line feeds in the block before this line.
    pub(super) lf_before: u32,
    /// Start of the line in the block, bytes.
    pub(super) start: u32,
    /// Length of the line without its line end, bytes.
    pub(super) len: u32,
    /// The line parsed cleanly.
    pub(super) clean: bool,
}

impl Row {
    /// Time, s (clean rows only).
    #[inline(always)]
    pub(super) fn t(&self) -> f64 {
        self.vals[0]
    }

    /// Values in column order p_a, q_a, p_b, q_b, p_c, q_c (clean rows only).
    #[inline(always)]
    pub(super) fn v(&self) -> &[f64; 6] {
        let [_, v @ .., _] = &self.vals;
        v
    }
}

/// Delimiters whose places a [`PlainLine`] keeps, so that its first fields are found
/// without splitting the line again for each.
const KEPT_DELIMITERS: usize = 8;

/// A plain line as a record: no quotes, so the fields are the bytes between delimiters.
#[derive(Debug, Clone, Copy)]
pub(super) struct PlainLine<'a> {
    bytes: &'a [u8],
    delimiter: u8,
    n: usize,
    line: u64,
    unterminated: bool,
    /// Where the first [`KEPT_DELIMITERS`] delimiters are.
    delimiters: [u32; KEPT_DELIMITERS],
}

impl<'a> PlainLine<'a> {
    /// The line `bytes` (without its line end), starting on `line`; `unterminated` when it
    /// is the last of the input and has no line end.
    pub(super) fn new(bytes: &'a [u8], delimiter: u8, line: u64, unterminated: bool) -> Self {
        let mut delimiters = [0u32; KEPT_DELIMITERS];
        let mut n = 1;
        for at in memchr::memchr_iter(delimiter, bytes) {
            if let Some(d) = delimiters.get_mut(n - 1) {
                *d = at as u32;
            }
            n += 1;
        }
        PlainLine {
            bytes,
            delimiter,
            n,
            line,
            unterminated,
            delimiters,
        }
    }
}

impl Record for PlainLine<'_> {
    fn n_fields(&self) -> usize {
        self.n
    }
    fn field(&self, i: usize) -> &[u8] {
        if i >= self.n {
            return &[];
        }
        // Field i runs from after delimiter i - 1 to delimiter i (or the line's end).
        let start = match i.checked_sub(1) {
            None => Some(0),
            Some(k) => self.delimiters.get(k).map(|&d| d as usize + 1),
        };
        let end = if i + 1 == self.n {
            Some(self.bytes.len())
        } else {
            self.delimiters.get(i).map(|&d| d as usize)
        };
        match (start, end) {
            (Some(a), Some(b)) => &self.bytes[a..b],
            _ => self
                .bytes
                .split(|&b| b == self.delimiter)
                .nth(i)
                .unwrap_or(&[]),
        }
    }
    fn record_line(&self) -> u64 {
        self.line
    }
    fn unterminated(&self) -> bool {
        self.unterminated
    }
    fn inner_lf(&self) -> u64 {
        0
    }
}

/// What the fast path needs to know of the file's layout.
#[derive(Debug, Clone, Copy)]
pub(super) struct Layout {
    /// For each field index below [`MAX_PLAIN_FIELDS`]: the column it holds (0 = time,
    /// 1..=6 the values), or `u8::MAX` for none.
    column_of: [u8; MAX_PLAIN_FIELDS],
    min_fields: usize,
    header_fields: usize,
    delimiter: u8,
    decimal: u8,
    /// The header is exactly the seven columns and numbers have a decimal point, so a
    /// line can be read in one sweep ([`parse_line_quick`]).
    quick: bool,
    /// The seven fields are the columns in their usual order (time first).
    in_order: bool,
}

impl Layout {
    /// The layout of a file with these columns; `None` when the header is too wide for
    /// the fast path.
    pub(super) fn new(cols: &Columns, delimiter: u8, decimal: u8) -> Option<Layout> {
        if cols.header_fields > MAX_PLAIN_FIELDS || cols.min_fields > MAX_PLAIN_FIELDS {
            return None;
        }
        let mut column_of = [u8::MAX; MAX_PLAIN_FIELDS];
        for (c, &i) in cols.idx.iter().enumerate() {
            column_of[i] = c as u8;
        }
        Some(Layout {
            column_of,
            min_fields: cols.min_fields,
            header_fields: cols.header_fields,
            delimiter,
            decimal,
            quick: cols.header_fields == 7 && decimal == b'.',
            in_order: cols.idx == [0, 1, 2, 3, 4, 5, 6],
        })
    }

    /// The column delimiter.
    pub(super) fn delimiter(&self) -> u8 {
        self.delimiter
    }
}

/// True when `bytes` hold something the fast path leaves to the record reader: a quote,
/// or a carriage return not followed by a line feed. The walk finds the same line by
/// line ([`line_has_doubt`]); this is the reference for the tests.
#[cfg(test)]
pub(super) fn has_doubt(bytes: &[u8]) -> bool {
    if memchr::memchr(b'"', bytes).is_some() {
        return true;
    }
    memchr::memchr_iter(b'\r', bytes).any(|i| bytes.get(i + 1) != Some(&b'\n'))
}

/// True when the line `raw` (its bytes up to its line feed, or to the end of the text
/// when `has_lf` is false) holds something the fast path leaves to the record reader: a
/// quote, or a carriage return that is not the CR of a CRLF line end. A line read by its
/// shape, or as seven plain numbers, has neither, so only the others are looked at.
#[inline]
fn line_has_doubt(raw: &[u8], has_lf: bool) -> bool {
    let body = match raw.split_last() {
        Some((b'\r', body)) if has_lf => body,
        _ => raw,
    };
    memchr::memchr2(b'"', b'\r', body).is_some()
}

/// True when `v` is a number within ±`limit` (false for NaN).
#[inline]
fn within(v: f64, limit: f64) -> bool {
    v.abs() <= limit
}

/// Parses one field of a clean row: the fast way when the number runs exactly to the
/// delimiter, else by cutting the field and trimming it as the rules do.
#[inline]
fn number_at(line: &[u8], pos: usize, lay: &Layout) -> (Option<f64>, usize) {
    let rest = &line[pos..];
    if lay.decimal == b'.' {
        if let Some((v, n)) = parse_plain_prefix(rest) {
            let next = rest.get(n).copied();
            if next.is_none() || next == Some(lay.delimiter) {
                return (Some(v), pos + n);
            }
        }
        if let Ok((v, n)) = fast_float2::parse_partial::<f64, _>(rest) {
            let next = rest.get(n).copied();
            if (next.is_none() || next == Some(lay.delimiter)) && v.is_finite() {
                return (Some(v), pos + n);
            }
        }
    }
    let end = rest
        .iter()
        .position(|&b| b == lay.delimiter)
        .map_or(line.len(), |e| pos + e);
    let field = line[pos..end].trim_ascii();
    // No number holds a colon (a date-time does): `parse_number` would refuse it, after
    // trying every reading.
    if memchr::memchr(b':', field).is_some() {
        return (None, end);
    }
    (parse_number(field, lay.decimal), end)
}

/// Parses a line (without its line end) into `row`; false when it is not clean.
#[inline]
fn parse_line(line: &[u8], lay: &Layout, row: &mut Row) -> bool {
    let mut vals = [0.0f64; 7];
    let mut found = 0u8;
    let mut pos = 0;
    let mut field = 0usize;
    loop {
        if field >= MAX_PLAIN_FIELDS {
            return false;
        }
        let col = lay.column_of[field];
        let end = if col != u8::MAX {
            let (v, end) = number_at(line, pos, lay);
            match v {
                Some(v) => vals[col as usize] = v,
                None => return false,
            }
            found += 1;
            end
        } else {
            let rest = &line[pos..];
            let end = rest
                .iter()
                .position(|&b| b == lay.delimiter)
                .map_or(line.len(), |e| pos + e);
            if field >= lay.header_fields && !line[pos..end].trim_ascii().is_empty() {
                return false;
            }
            end
        };
        field += 1;
        if end >= line.len() {
            break;
        }
        pos = end + 1;
    }
    if found != 7 || field < lay.min_fields {
        return false;
    }
    let t = vals[0];
    if !within(t, MAX_ELAPSED_S) {
        return false;
    }
    for &v in &vals[1..] {
        if !within(v, MAX_POWER) {
            return false;
        }
    }
    row.vals[0] = t;
    row.vals[1..7].copy_from_slice(&vals[1..]);
    true
}

/// Bytes from the start of a line that [`parse_line_window`] may look at; a line that
/// starts closer than this to the end of its piece is read by [`parse_line_quick`] alone.
const WINDOW: usize = 128;

/// The eight bytes of `win` from `i` as a little-endian word; `None` past the window.
#[inline(always)]
fn load(win: &[u8; WINDOW], i: usize) -> Option<u64> {
    let b: [u8; 8] = win.get(i..i + 8)?.try_into().ok()?;
    Some(u64::from_le_bytes(b))
}

/// The plain number at `i` of `win`, as [`parse_plain_prefix`] reads it, taken eight
/// bytes at a time: the value, the index after it and the byte there. `None` leaves the
/// number to the byte-wise reading (a run of eight digits or more, or the window's end).
#[inline(always)]
fn window_number(win: &[u8; WINDOW], i: usize) -> Option<(f64, usize, u8)> {
    let mut i = i;
    let mut x = load(win, i)?;
    let first = x as u8;
    let neg = first == b'-';
    if neg || first == b'+' {
        i += 1;
        x = load(win, i)?;
    }
    let (n_int, a) = leading_digits(x);
    if n_int == 8 {
        return None;
    }
    // The byte after the digits is in the same word.
    let after = (x >> (8 * n_int)) as u8;
    if after != b'.' {
        if n_int == 0 || after == b'e' || after == b'E' {
            return None;
        }
        let v = digits_value(a, n_int) as i64 as f64;
        return Some((if neg { -v } else { v }, i + n_int, after));
    }
    // Drop the point: the bytes after it move down one, next to the digits before it, and
    // the top byte (beyond the word) is marked as no digit.
    let low = (1u64 << (8 * n_int)) - 1;
    let merged = (a & low) | ((a >> 8) & !low);
    let over = ((merged | merged.wrapping_add(0x7676_7676_7676_7676)) & 0x8080_8080_8080_8080)
        | (0x80 << 56);
    let n = (over.trailing_zeros() / 8) as usize;
    let (w, frac, end) = if n < 7 {
        // Every digit and the byte after them are in the word.
        let w = if n > 0 { digits_value(merged, n) } else { 0 };
        (w, n - n_int, i + n + 1)
    } else {
        // The fraction may run past the word: read it from the byte after the point.
        let x = load(win, i + n_int + 1)?;
        let (n_frac, a_frac) = leading_digits(x);
        if n_frac == 8 {
            return None;
        }
        let mut w = if n_int > 0 { digits_value(a, n_int) } else { 0 };
        if n_frac > 0 {
            w = w * POW10_INT[n_frac] + digits_value(a_frac, n_frac);
        }
        (w, n_frac, i + n_int + 1 + n_frac)
    };
    let after = win[end];
    if n_int + frac == 0 || after == b'e' || after == b'E' {
        return None;
    }
    // The same integer over the same power of ten as `parse_plain_prefix`: the same value.
    let v = w as i64 as f64 / POW10[frac];
    Some((if neg { -v } else { v }, end, after))
}

/// [`parse_line_quick`] for a line with at least [`WINDOW`] bytes of its piece from its
/// start, reading each number eight bytes at a time; `None` leaves the line to
/// `parse_line_quick`. Where it answers, it answers as `parse_line_quick` would.
#[inline(always)]
fn parse_line_window(
    piece: &[u8],
    start: usize,
    lay: &Layout,
    row: &mut Row,
) -> Option<(usize, usize)> {
    let win: &[u8; WINDOW] = piece.get(start..start + WINDOW)?.try_into().ok()?;
    let mut vals = [0.0f64; 7];
    let mut pos = 0;
    for field in 0..6 {
        let (v, end, after) = window_number(win, pos)?;
        if after != lay.delimiter {
            return None;
        }
        vals[lay.column_of[field] as usize] = v;
        pos = end + 1;
    }
    let (v, end, after) = window_number(win, pos)?;
    vals[lay.column_of[6] as usize] = v;
    let lf = match after {
        b'\n' => end,
        b'\r' if win.get(end + 1) == Some(&b'\n') => end + 1,
        _ => return None,
    };
    if !within(vals[0], MAX_ELAPSED_S) || vals[1..].iter().any(|&v| !within(v, MAX_POWER)) {
        return None;
    }
    row.vals[..7].copy_from_slice(&vals);
    Some((start + end, start + lf))
}

/// Reads the line starting at `start` of `piece` the quick way, when it is exactly the
/// seven columns in any order, each a plain number ([`parse_plain_prefix`]), ended by a
/// line feed, CRLF or the end of the piece. Returns the end of the line (before any CR)
/// and where its line end is, or `None` to read the line the general way.
#[inline]
fn parse_line_quick(
    piece: &[u8],
    start: usize,
    lay: &Layout,
    row: &mut Row,
) -> Option<(usize, usize)> {
    let mut vals = [0.0f64; 7];
    let mut pos = start;
    for field in 0..7 {
        let (v, end) = match parse_plain_at(piece, pos) {
            Some(r) => r,
            None => {
                let (v, n) = parse_plain_prefix(piece.get(pos..)?)?;
                (v, pos + n)
            }
        };
        vals[lay.column_of[field] as usize] = v;
        pos = end;
        if field < 6 {
            if piece.get(pos) != Some(&lay.delimiter) {
                return None;
            }
            pos += 1;
        }
    }
    let lf = match piece.get(pos) {
        None => piece.len(),
        Some(b'\n') => pos,
        Some(b'\r') if piece.get(pos + 1) == Some(&b'\n') => pos + 1,
        _ => return None,
    };
    if !within(vals[0], MAX_ELAPSED_S) || vals[1..].iter().any(|&v| !within(v, MAX_POWER)) {
        return None;
    }
    row.vals[..7].copy_from_slice(&vals);
    Some((pos, lf))
}

/// What takes the rows [`walk`] hands on, in order; an error stops the walk. Any
/// `FnMut(&Row) -> Result<(), E>` does; a type of its own can have its `row` inlined
/// into the walk (`#[inline(always)]`), which a closure cannot ask for.
pub(super) trait Rows {
    type Error;
    fn row(&mut self, r: &Row) -> Result<(), Self::Error>;
}

impl<E, F: FnMut(&Row) -> Result<(), E>> Rows for F {
    type Error = E;
    #[inline(always)]
    fn row(&mut self, r: &Row) -> Result<(), E> {
        self(r)
    }
}

/// Where [`walk`] met a doubt (a line with a quote or a lone carriage return, or too long
/// or too wide for the fast path): the start of that line in the piece and the line
/// feeds before it. The lines before it are plain, and read as the record reader would.
#[derive(Debug, Clone, Copy)]
pub(super) struct Doubt {
    pub(super) at: usize,
    pub(super) lf: u32,
}

/// Cuts `piece` (whole lines, the last one possibly without its line end; `base` its
/// start in the block) into rows and hands each to `each`, in order. Returns the line
/// feeds in the piece, or the [`Doubt`] that stopped it (nothing of that line or after it
/// has been handed on); an error of `each` stops it at once.
#[inline(always)]
pub(super) fn walk<R: Rows>(
    piece: &[u8],
    base: usize,
    lay: &Layout,
    each: R,
) -> Result<Result<u32, Doubt>, R::Error> {
    #[cfg(target_arch = "x86_64")]
    if lay.quick {
        if let Some(avx2) = Avx2::detect() {
            // SAFETY: `walk_avx2` is compiled for AVX2, BMI1, BMI2 and POPCNT, which
            // `Avx2::detect` has just found on this processor.
            return unsafe { walk_avx2(avx2, piece, base, lay, each) };
        }
        return walk_with(Some(Sse2), piece, base, lay, each);
    }
    walk_with(None::<Bytewise>, piece, base, lay, each)
}

/// [`walk_with`] compiled for AVX2 (and BMI1, BMI2, POPCNT), so that the classes of
/// each line are worked out 32 bytes at a time.
///
/// # Safety
///
/// The processor must have AVX2, BMI1, BMI2 and POPCNT (as an `Avx2` shows).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,bmi1,bmi2,popcnt")]
unsafe fn walk_avx2<R: Rows>(
    avx2: Avx2,
    piece: &[u8],
    base: usize,
    lay: &Layout,
    each: R,
) -> Result<Result<u32, Doubt>, R::Error> {
    walk_with(Some(avx2), piece, base, lay, each)
}

/// [`walk`] with lines read by their shape through `classify` when it is given (and
/// the layout is the quick one), else byte by byte.
#[inline(always)]
pub(super) fn walk_with<R: Rows, C: Classify>(
    classify: Option<C>,
    piece: &[u8],
    base: usize,
    lay: &Layout,
    mut each: R,
) -> Result<Result<u32, Doubt>, R::Error> {
    let mut shape = Shape::default();
    let mut lf = 0u32;
    let mut start = 0usize;
    let mut row = Row::default();
    while start < piece.len() {
        if let Some(c) = classify.filter(|_| lay.quick) {
            if let Some(win) = piece
                .get(start..start + SHAPE_WINDOW)
                .and_then(|w| <&[u8; SHAPE_WINDOW]>::try_from(w).ok())
            {
                if let Some(l) = shape.read(c, win, lay.delimiter, &mut row.vals) {
                    if !lay.in_order {
                        let vals = row.vals;
                        for (f, &v) in vals[..7].iter().enumerate() {
                            row.vals[usize::from(lay.column_of[f]) % 8] = v;
                        }
                    }
                    let vals = &row.vals;
                    if !l.long
                        || (within(vals[0], MAX_ELAPSED_S)
                            && vals[1..7].iter().all(|&v| within(v, MAX_POWER)))
                    {
                        row.lf_before = lf;
                        row.start = (base + start) as u32;
                        row.len = l.stop as u32;
                        row.clean = true;
                        each.row(&row)?;
                        lf += 1;
                        start += l.lf + 1;
                        continue;
                    }
                }
            }
        }
        if lay.quick {
            let mut row = Row {
                lf_before: lf,
                start: (base + start) as u32,
                clean: true,
                ..Row::default()
            };
            if let Some((stop, end)) = parse_line_window(piece, start, lay, &mut row)
                .or_else(|| parse_line_quick(piece, start, lay, &mut row))
            {
                row.len = (stop - start) as u32;
                each.row(&row)?;
                if end < piece.len() {
                    lf += 1;
                }
                start = end + 1;
                continue;
            }
        }
        let end = memchr::memchr(b'\n', &piece[start..]).map_or(piece.len(), |e| start + e);
        if line_has_doubt(&piece[start..end], end < piece.len()) {
            return Ok(Err(Doubt { at: start, lf }));
        }
        let mut stop = end;
        if stop > start && piece[stop - 1] == b'\r' {
            stop -= 1;
        }
        if stop - start > MAX_PLAIN_LINE {
            return Ok(Err(Doubt { at: start, lf }));
        }
        if stop > start {
            let line = &piece[start..stop];
            let mut row = Row {
                lf_before: lf,
                start: (base + start) as u32,
                len: (stop - start) as u32,
                ..Row::default()
            };
            row.clean = parse_line(line, lay, &mut row);
            if !row.clean
                && line.iter().filter(|&&b| b == lay.delimiter).count() >= MAX_PLAIN_FIELDS
            {
                return Ok(Err(Doubt { at: start, lf }));
            }
            each.row(&row)?;
        }
        if end < piece.len() {
            lf += 1;
        }
        start = end + 1;
    }
    Ok(Ok(lf))
}

/// Cuts `piece` into rows appended to `rows` ([`walk`]). Returns the line feeds in the
/// piece, or `None` for a doubt.
fn parse_piece(piece: &[u8], base: usize, lay: &Layout, rows: &mut Vec<Row>) -> Option<u32> {
    let pushed = walk(piece, base, lay, |r: &Row| {
        rows.push(*r);
        Ok::<(), std::convert::Infallible>(())
    });
    match pushed {
        Ok(Ok(lf)) => Some(lf),
        _ => None,
    }
}

/// The rows of one block, parsed in pieces.
#[derive(Debug, Default)]
pub(super) struct Parsed {
    /// Rows of each piece, in order, with line feeds counted from the piece's start.
    pub(super) pieces: Vec<(Vec<Row>, u32)>,
}

impl Parsed {
    /// Parses `block` (whole lines) in `threads` pieces cut at line ends. False for a
    /// doubt.
    pub(super) fn parse(&mut self, block: &[u8], lay: &Layout, threads: usize) -> bool {
        let n = threads
            .clamp(1, 64)
            .min(block.len() / MIN_PIECE_BYTES)
            .max(1);
        let mut cuts = Vec::with_capacity(n + 1);
        cuts.push(0usize);
        for i in 1..n {
            let want = block.len() * i / n;
            let at = block[want..]
                .iter()
                .position(|&b| b == b'\n')
                .map_or(block.len(), |p| want + p + 1);
            if at > *cuts.last().unwrap_or(&0) {
                cuts.push(at);
            }
        }
        cuts.push(block.len());
        cuts.dedup();
        let pieces = cuts.len() - 1;
        self.pieces.resize_with(pieces, Default::default);
        let work = |(i, (rows, lf)): (usize, &mut (Vec<Row>, u32))| {
            rows.clear();
            let (a, b) = (cuts[i], cuts[i + 1]);
            match parse_piece(&block[a..b], a, lay, rows) {
                Some(n) => {
                    *lf = n;
                    true
                }
                None => false,
            }
        };
        if pieces == 1 {
            self.pieces.iter_mut().enumerate().all(work)
        } else {
            self.pieces.par_iter_mut().enumerate().all(work)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::profile::csv::source::{CsvSource, RecordReader};

    fn layout() -> Layout {
        let cols = Columns {
            idx: [0, 1, 2, 3, 4, 5, 6],
            min_fields: 7,
            header_fields: 7,
        };
        Layout::new(&cols, b',', b'.').unwrap()
    }

    #[test]
    fn plain_lines_read_like_the_record_reader() {
        // The record reader (csv-core) is the reference for how a plain line splits.
        let text = b"0,1,2,3,4,5,6\r\n\n  1 ,x,,3\n,,,,,,\n2,1e3,-2.5,3,4,5,6,,\n3,1";
        let src = CsvSource::bytes("t.csv", text.to_vec());
        let mut rdr = RecordReader::open(&src, b',').unwrap();
        let mut want = Vec::new();
        while rdr.read().unwrap() {
            let f: Vec<Vec<u8>> = (0..rdr.len).map(|i| rdr.field(i).to_vec()).collect();
            want.push((rdr.record_line, f, rdr.unterminated));
        }
        assert!(!has_doubt(text));
        let mut p = Parsed::default();
        assert!(p.parse(text, &layout(), 1));
        let (rows, lf) = &p.pieces[0];
        assert_eq!(*lf, 5);
        let got: Vec<_> = rows
            .iter()
            .map(|r| {
                let bytes = &text[r.start as usize..(r.start + r.len) as usize];
                let end = (r.start + r.len) as usize;
                let pl = PlainLine::new(bytes, b',', 1 + u64::from(r.lf_before), end == text.len());
                let f: Vec<Vec<u8>> = (0..pl.n_fields()).map(|i| pl.field(i).to_vec()).collect();
                (pl.record_line(), f, pl.unterminated())
            })
            .collect();
        assert_eq!(got, want);
        let clean: Vec<bool> = rows.iter().map(|r| r.clean).collect();
        assert_eq!(clean, vec![true, false, false, true, false]);
        assert_eq!(*rows[3].v(), [1000.0, -2.5, 3.0, 4.0, 5.0, 6.0]);
    }

    // The eight-byte reading of a number against the standard library's
    // `str::parse::<f64>` on the number's own text (the reference for every number the
    // scan reads): the same value to the bit, the same end, and an answer for every
    // plain number whose digit runs are shorter than eight.
    #[test]
    fn window_numbers_read_as_the_standard_library_does() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(0x77_1d0);
        let mut answered = 0;
        for _ in 0..100_000 {
            let mut text = String::new();
            text.push_str(["", "", "-", "+"][rng.random_range(0..4)]);
            let n_int = rng.random_range(0..=9);
            for _ in 0..n_int {
                text.push(char::from(b'0' + rng.random_range(0..10u8)));
            }
            let point = rng.random_bool(0.7);
            let mut n_frac = 0;
            if point {
                text.push('.');
                n_frac = rng.random_range(0..=9);
                for _ in 0..n_frac {
                    text.push(char::from(b'0' + rng.random_range(0..10u8)));
                }
            }
            let number_len = text.len();
            let follow = [",", "\n", "\r\n", ";", "e3", "E-2", "x"][rng.random_range(0..7)];
            text.push_str(follow);
            let offset = rng.random_range(0..=40);
            let mut win = [b'9'; WINDOW];
            let bytes = text.as_bytes();
            win[offset..offset + bytes.len()].copy_from_slice(bytes);
            let got = window_number(&win, offset);
            let want = text[..number_len].parse::<f64>().ok();
            let plain = n_int + n_frac > 0 && !follow.starts_with(['e', 'E']);
            match got {
                Some((v, end, after)) => {
                    answered += 1;
                    assert!(plain, "{text:?} read as {v}");
                    assert_eq!(Some(v.to_bits()), want.map(f64::to_bits), "{text:?}");
                    assert_eq!(end, offset + number_len, "{text:?}");
                    assert_eq!(after, follow.as_bytes()[0], "{text:?}");
                }
                None => assert!(
                    !plain || n_int >= 8 || n_frac >= 8,
                    "{text:?} left to the byte-wise reading"
                ),
            }
        }
        assert!(answered > 40_000, "{answered}");
    }

    /// The rows `walk_with` hands on, as bits, read through `classify`.
    fn rows_with<C: Classify>(text: &[u8], lay: &Layout, classify: Option<C>) -> Vec<[u64; 11]> {
        let mut rows = Vec::new();
        let walked = walk_with(classify, text, 0, lay, |r: &Row| {
            let mut bits = [0u64; 11];
            bits[0] = r.t().to_bits();
            for (b, v) in bits[1..7].iter_mut().zip(r.v()) {
                *b = v.to_bits();
            }
            bits[7] = u64::from(r.lf_before);
            bits[8] = u64::from(r.start);
            bits[9] = u64::from(r.len);
            bits[10] = u64::from(r.clean);
            rows.push(bits);
            Ok::<(), std::convert::Infallible>(())
        });
        assert!(matches!(walked, Ok(Ok(_))));
        rows
    }

    // Lines read by their shape (SSE2, AVX2 where the processor has it, and the
    // byte-wise classes) give exactly the rows of the byte-wise reading: every value to
    // the bit, the same lines, line feeds and clean flags, on lines of many shapes (signs,
    // widths, long numbers, CRLF, defects) and up to the very end of the text, with and
    // without a final line end.
    #[test]
    fn lines_read_by_shape_give_the_same_rows() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(0x5a9e_b10c);
        let mut text = Vec::new();
        let mut t = 0u64;
        while text.len() < 400_000 {
            // Runs of lines of one format, as loggers write them.
            let decimals = rng.random_range(0..5);
            let scale = [1.0, 100.0, 1e4, 1e7][rng.random_range(0..4)];
            let sign = rng.random_bool(0.3);
            for _ in 0..rng.random_range(1..200) {
                let mut line = format!("{t}");
                for _ in 0..6 {
                    let mut v = scale * rng.random::<f64>();
                    if sign && rng.random_bool(0.5) {
                        v = -v;
                    }
                    line.push_str(&format!(",{v:.decimals$}"));
                }
                match rng.random_range(0..60) {
                    0 => line.push_str(",1"),
                    1 => line = line.replacen(',', ",+", 1),
                    2 => line.push('x'),
                    3 => line = line.replacen(',', ",1e3", 1),
                    4 => line.push('\r'),
                    5 => line = format!("{t},1,2"),
                    6 => line.clear(),
                    _ => {}
                }
                text.extend_from_slice(line.as_bytes());
                text.push(b'\n');
                t += 1;
            }
        }
        for cut in [text.len(), text.len() - 1, text.len() - 7] {
            let piece = &text[..cut];
            let want = rows_with(piece, &layout(), None::<Bytewise>);
            assert_eq!(want, rows_with(piece, &layout(), Some(Bytewise)));
            #[cfg(target_arch = "x86_64")]
            {
                assert_eq!(want, rows_with(piece, &layout(), Some(Sse2)));
                if let Some(avx2) = Avx2::detect() {
                    assert_eq!(want, rows_with(piece, &layout(), Some(avx2)));
                }
            }
        }
    }

    // The walk stops at the first line with a quote or a lone carriage return (the
    // reference: `has_doubt` of the text up to and including that line), and nowhere
    // when there is none.
    #[test]
    fn the_walk_stops_at_the_first_doubtful_line() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(0xd0b7);
        for _ in 0..2_000 {
            let mut text = Vec::new();
            for i in 0..rng.random_range(1..40) {
                let line = match rng.random_range(0..60) {
                    0 => format!("{i},\"1\",2,3,4,5,6\n"),
                    1 => format!("{i},1\r2,3,4,5,6\n"),
                    2 => format!("{i},x,2\r\n"),
                    3 => "\r\n".to_string(),
                    4 => format!("{i},1,2,3,4,5,6\r"),
                    _ => format!("{i},1.5,2,3,4,5,{}\r\n", i % 7),
                };
                text.extend_from_slice(line.as_bytes());
                // Lines long enough that the last ones are read byte by byte too.
                text.extend_from_slice(format!("{i},1,2,3,4,5,6\n").as_bytes());
            }
            if rng.random_bool(0.5) {
                text.pop();
            }
            let mut doubt_at = None;
            let mut at = 0;
            for line in text.split_inclusive(|&b| b == b'\n') {
                if has_doubt(line) {
                    doubt_at = Some(at);
                    break;
                }
                at += line.len();
            }
            let walked = walk(&text, 0, &layout(), |_: &Row| Ok::<(), ()>(()));
            match walked {
                Ok(Ok(_)) => assert_eq!(doubt_at, None),
                Ok(Err(d)) => assert_eq!(Some(d.at), doubt_at),
                Err(()) => unreachable!(),
            }
        }
    }

    // The fields of a plain line, found from the kept places of its first delimiters,
    // are those of splitting the line at every delimiter (the reference), for lines of up
    // to 20 fields, empty ones included.
    #[test]
    fn plain_line_fields_are_the_split_ones() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(0xf1e1d);
        for _ in 0..20_000 {
            let mut line = Vec::new();
            for _ in 0..rng.random_range(0..60) {
                line.push(b"0123,;. x"[rng.random_range(0..9)]);
            }
            for delimiter in [b',', b';'] {
                let pl = PlainLine::new(&line, delimiter, 7, false);
                let want: Vec<&[u8]> = line.split(|&b| b == delimiter).collect();
                assert_eq!(pl.n_fields(), want.len());
                for i in 0..want.len() + 2 {
                    assert_eq!(
                        pl.field(i),
                        want.get(i).copied().unwrap_or(&[]),
                        "{line:?} {i}"
                    );
                }
            }
        }
    }

    #[test]
    fn quotes_and_lone_carriage_returns_are_doubts() {
        assert!(has_doubt(b"1,\"2\",3\n"));
        assert!(has_doubt(b"1,2\r3,4\n"));
        assert!(has_doubt(b"1,2\r"));
        assert!(!has_doubt(b"1,2\r\n3,4\r\n"));
    }

    #[test]
    fn pieces_cut_at_line_ends_give_the_same_rows() {
        let mut text = Vec::new();
        for i in 0..20_000 {
            text.extend_from_slice(format!("{i},1.5,2,3,4,5,{}\n", i % 7).as_bytes());
        }
        let (mut one, mut many) = (Parsed::default(), Parsed::default());
        assert!(one.parse(&text, &layout(), 1));
        assert!(many.parse(&text, &layout(), 4));
        assert!(many.pieces.len() > 1);
        let rows_one: Vec<(f64, [f64; 6], u32)> = one.pieces[0]
            .0
            .iter()
            .map(|r| (r.t(), *r.v(), r.start))
            .collect();
        let rows_many: Vec<(f64, [f64; 6], u32)> = many
            .pieces
            .iter()
            .flat_map(|(rows, _)| rows.iter().map(|r| (r.t(), *r.v(), r.start)))
            .collect();
        assert_eq!(rows_one, rows_many);
        let lf: u32 = many.pieces.iter().map(|p| p.1).sum();
        assert_eq!(lf, one.pieces[0].1);
    }
}
