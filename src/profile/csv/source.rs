//! Where a profile's bytes come from ([`CsvSource`]: a file, bytes in memory, or any
//! reader that can start again), and the record reader over them.
//!
//! The record reader splits the bytes into CSV records with `csv_core`, into reused
//! buffers (no allocation per record once the buffers have grown to the longest record),
//! and counts physical lines by line feeds. It also knows its byte offset, so that a
//! second reader can start at the record after the current one (used to look ahead for
//! the next good row when interpolating), and whether the current record ended at the
//! end of the input without a line end (a truncated last line).
//!
//! Records are bounded: a record longer than [`MAX_RECORD_BYTES`] or with more than
//! [`MAX_FIELDS`] fields is an error, so no input can make the buffers grow without limit.

use sha2::{Digest, Sha256};
use std::cell::RefCell;
use std::fmt;
use std::fs::File;
use std::io::{self, BufRead, BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// Longest record accepted, bytes (1 MiB). Longer records are an error naming the line.
pub const MAX_RECORD_BYTES: usize = 1 << 20;

/// Most fields accepted in one record. More are an error naming the line.
pub const MAX_FIELDS: usize = 4096;

/// Size of the read buffer for files and custom readers, bytes.
const READ_BUFFER_BYTES: usize = 64 * 1024;

/// A function that opens a fresh reader over a custom source, from its first byte.
pub type OpenFn = dyn Fn() -> io::Result<Box<dyn Read + Send>> + Send + Sync;

/// Where a profile's bytes come from. The reader makes two or three passes over them
/// (scan, gap lines, stream), so a source must be able to start again from the first byte
/// and must give the same bytes each time.
#[derive(Clone)]
pub enum CsvSource {
    /// A file on disk. Its size and modification time are checked between passes.
    File(PathBuf),
    /// Bytes in memory; `name` stands for the file in messages.
    Bytes {
        /// Name used in messages in place of a file name.
        name: PathBuf,
        /// The CSV text.
        data: Arc<[u8]>,
    },
    /// Any reader that can be opened again from the start, e.g. a generated profile that
    /// never touches the disk; `name` stands for the file in messages. Looking ahead for
    /// interpolation reopens it and reads forward to the current row, so interpolation
    /// over such a source costs more than over a file.
    Reader {
        /// Name used in messages in place of a file name.
        name: PathBuf,
        /// Opens a fresh reader from the first byte.
        open: Arc<OpenFn>,
    },
}

impl CsvSource {
    /// A source over bytes in memory.
    pub fn bytes(name: impl Into<PathBuf>, data: impl Into<Arc<[u8]>>) -> Self {
        CsvSource::Bytes {
            name: name.into(),
            data: data.into(),
        }
    }

    /// A source over a reader that `open` makes afresh for each pass.
    pub fn reader<F>(name: impl Into<PathBuf>, open: F) -> Self
    where
        F: Fn() -> io::Result<Box<dyn Read + Send>> + Send + Sync + 'static,
    {
        CsvSource::Reader {
            name: name.into(),
            open: Arc::new(open),
        }
    }

    /// The name used in messages: the file's path, or the given name.
    pub fn name(&self) -> &Path {
        match self {
            CsvSource::File(p) => p,
            CsvSource::Bytes { name, .. } | CsvSource::Reader { name, .. } => name,
        }
    }
}

impl fmt::Debug for CsvSource {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CsvSource::File(p) => f.debug_tuple("File").field(p).finish(),
            CsvSource::Bytes { name, data } => f
                .debug_struct("Bytes")
                .field("name", name)
                .field("len", &data.len())
                .finish(),
            CsvSource::Reader { name, .. } => f
                .debug_struct("Reader")
                .field("name", name)
                .finish_non_exhaustive(),
        }
    }
}

/// An open byte stream over a source.
enum Input {
    File(BufReader<File>),
    Bytes { data: Arc<[u8]>, pos: usize },
    Reader(BufReader<Box<dyn Read + Send>>),
}

impl Input {
    /// Opens `src` positioned at byte `offset`.
    fn open(src: &CsvSource, offset: u64) -> io::Result<Input> {
        match src {
            CsvSource::File(p) => {
                let mut r = BufReader::with_capacity(READ_BUFFER_BYTES, File::open(p)?);
                if offset > 0 {
                    r.seek(SeekFrom::Start(offset))?;
                }
                Ok(Input::File(r))
            }
            CsvSource::Bytes { data, .. } => Ok(Input::Bytes {
                data: Arc::clone(data),
                pos: usize::try_from(offset)
                    .unwrap_or(usize::MAX)
                    .min(data.len()),
            }),
            CsvSource::Reader { open, .. } => {
                let mut r = BufReader::with_capacity(READ_BUFFER_BYTES, open()?);
                if offset > 0 {
                    let skipped = io::copy(&mut (&mut r).take(offset), &mut io::sink())?;
                    if skipped != offset {
                        return Err(io::Error::new(
                            io::ErrorKind::UnexpectedEof,
                            "the source gave fewer bytes than on the previous pass",
                        ));
                    }
                }
                Ok(Input::Reader(r))
            }
        }
    }

    /// Moves to byte `offset` of `src`, reusing buffers where the source allows it.
    fn reposition(&mut self, src: &CsvSource, offset: u64) -> io::Result<()> {
        match self {
            Input::File(r) => {
                r.seek(SeekFrom::Start(offset))?;
                Ok(())
            }
            Input::Bytes { data, pos } => {
                *pos = usize::try_from(offset)
                    .unwrap_or(usize::MAX)
                    .min(data.len());
                Ok(())
            }
            Input::Reader(_) => {
                *self = Input::open(src, offset)?;
                Ok(())
            }
        }
    }

    #[inline]
    fn fill_buf(&mut self) -> io::Result<&[u8]> {
        match self {
            Input::File(r) => r.fill_buf(),
            Input::Bytes { data, pos } => Ok(data.get(*pos..).unwrap_or(&[])),
            Input::Reader(r) => r.fill_buf(),
        }
    }

    #[inline]
    fn consume(&mut self, n: usize) {
        match self {
            Input::File(r) => r.consume(n),
            Input::Bytes { data, pos } => *pos = (*pos + n).min(data.len()),
            Input::Reader(r) => r.consume(n),
        }
    }
}

/// Bytes straight from a source, from a byte offset, for the block reader of the fast
/// path (`block.rs`).
pub(super) struct RawInput(Input);

impl RawInput {
    /// Opens `src` at byte `offset`.
    pub(super) fn open(src: &CsvSource, offset: u64) -> io::Result<Self> {
        Input::open(src, offset).map(RawInput)
    }
}

impl Read for RawInput {
    fn read(&mut self, out: &mut [u8]) -> io::Result<usize> {
        match &mut self.0 {
            Input::File(r) => r.read(out),
            Input::Reader(r) => r.read(out),
            Input::Bytes { data, pos } => {
                let rest = data.get(*pos..).unwrap_or(&[]);
                let n = rest.len().min(out.len());
                out[..n].copy_from_slice(&rest[..n]);
                *pos += n;
                Ok(n)
            }
        }
    }
}

/// Why a record could not be read.
#[derive(Debug)]
pub(super) enum ReadError {
    /// The source failed.
    Io(io::Error),
    /// The record starting on this line is longer than [`MAX_RECORD_BYTES`].
    TooLong { line: u64 },
    /// The record starting on this line has more than [`MAX_FIELDS`] fields.
    TooManyFields { line: u64 },
}

impl From<io::Error> for ReadError {
    fn from(e: io::Error) -> Self {
        ReadError::Io(e)
    }
}

/// Reads CSV records into reused buffers, counting physical lines by line feeds.
/// (The `csv` crate's `Position::line` is not used: it is off after blank lines and in
/// CRLF files.)
pub(super) struct RecordReader {
    input: Input,
    /// The parser (always `Some` until the reader is dropped and gives it back).
    core: Option<csv_core::Reader>,
    delimiter: u8,
    /// Unescaped field bytes of the current record, contiguous.
    out: Vec<u8>,
    /// End offset in `out` of each field of the current record.
    ends: Vec<usize>,
    /// Number of fields in the current record.
    pub(super) len: usize,
    /// Line number of the next unread byte.
    line: u64,
    /// Line on which the current record starts.
    pub(super) record_line: u64,
    /// Bytes consumed from the start of the source.
    pub(super) offset: u64,
    /// True when the current record ended at the end of the input with no line end.
    pub(super) unterminated: bool,
    /// Line feeds inside the current record (in quoted fields), not counting its end.
    pub(super) inner_lf: u64,
    /// SHA-256 of every byte consumed so far, for a reader opened with
    /// [`RecordReader::open_hashing`] (dropped when the reader is repositioned).
    hasher: Option<Sha256>,
}

impl fmt::Debug for RecordReader {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("RecordReader")
            .field("line", &self.line)
            .field("record_line", &self.record_line)
            .field("offset", &self.offset)
            .finish_non_exhaustive()
    }
}

#[inline]
fn count_lf(bytes: &[u8]) -> u64 {
    bytes.iter().filter(|&&b| b == b'\n').count() as u64
}

/// Marks a parser as having "already read", so that it never strips a byte-order mark:
/// the reader strips the one at the start of the source itself, and a parser started in
/// the middle of a file must read exactly as one that has been running from the start.
fn prime(core: &mut csv_core::Reader) {
    let _ = core.read_record(b"\n", &mut [0u8; 1], &mut [0usize; 1]);
}

/// Most parsers kept for reuse per thread.
const POOL_MAX: usize = 8;

thread_local! {
    /// Parsers by delimiter, kept for reuse: building one (its DFA) costs far more than
    /// resetting one. (Cloning is no way round it: csv_core 0.1's `Clone` for its DFA
    /// copies only the transition table, and the clone misreads.)
    static PARSERS: RefCell<Vec<(u8, csv_core::Reader)>> = const { RefCell::new(Vec::new()) };
}

/// A primed parser for `delimiter`, reused from the pool when there is one.
fn take_parser(delimiter: u8) -> csv_core::Reader {
    let pooled = PARSERS
        .try_with(|p| {
            let mut p = p.try_borrow_mut().ok()?;
            let i = p.iter().position(|(d, _)| *d == delimiter)?;
            Some(p.swap_remove(i).1)
        })
        .ok()
        .flatten();
    let mut core = match pooled {
        Some(mut core) => {
            core.reset();
            core
        }
        None => csv_core::ReaderBuilder::new().delimiter(delimiter).build(),
    };
    prime(&mut core);
    core
}

/// Gives a parser back to the pool.
fn give_parser(delimiter: u8, core: csv_core::Reader) {
    let _ = PARSERS.try_with(|p| {
        if let Ok(mut p) = p.try_borrow_mut() {
            if p.len() < POOL_MAX {
                p.push((delimiter, core));
            }
        }
    });
}

impl Drop for RecordReader {
    fn drop(&mut self) {
        if let Some(core) = self.core.take() {
            give_parser(self.delimiter, core);
        }
    }
}

impl RecordReader {
    /// Opens a source at its start, skipping a UTF-8 byte-order mark.
    pub(super) fn open(src: &CsvSource, delimiter: u8) -> Result<Self, ReadError> {
        Self::open_with(src, delimiter, None)
    }

    /// Opens a source at its start like [`RecordReader::open`], and hashes every byte it
    /// reads (the byte-order mark included), so that one reading gives both the records
    /// and the SHA-256 of the source ([`RecordReader::finish_sha256`]).
    pub(super) fn open_hashing(src: &CsvSource, delimiter: u8) -> Result<Self, ReadError> {
        Self::open_with(src, delimiter, Some(Sha256::new()))
    }

    fn open_with(
        src: &CsvSource,
        delimiter: u8,
        mut hasher: Option<Sha256>,
    ) -> Result<Self, ReadError> {
        let mut input = Input::open(src, 0)?;
        let mut offset = 0;
        let bom = b"\xef\xbb\xbf";
        if input.fill_buf()?.starts_with(bom) {
            if let Some(h) = hasher.as_mut() {
                h.update(bom);
            }
            input.consume(3);
            offset = 3;
        }
        Ok(RecordReader {
            input,
            core: Some(take_parser(delimiter)),
            delimiter,
            out: vec![0; 1024],
            ends: vec![0; 32],
            len: 0,
            line: 1,
            record_line: 1,
            offset,
            unterminated: false,
            inner_lf: 0,
            hasher,
        })
    }

    /// The SHA-256 of the whole source, for a reader opened with
    /// [`RecordReader::open_hashing`]: the bytes read so far and any left unread (which
    /// this reads to the end), exactly as the source gave them. `None` for a reader that
    /// does not hash or was repositioned. The reader is at the end of the input afterwards.
    pub(super) fn finish_sha256(&mut self) -> Result<Option<[u8; 32]>, ReadError> {
        let Some(mut h) = self.hasher.take() else {
            return Ok(None);
        };
        loop {
            let buf = self.input.fill_buf()?;
            if buf.is_empty() {
                break;
            }
            let n = buf.len();
            h.update(buf);
            self.input.consume(n);
            self.offset += n as u64;
        }
        Ok(Some(h.finalize().into()))
    }

    /// Takes the hash of the bytes read so far out of this reader (which then stops
    /// hashing), so that another reader can go on with it.
    pub(super) fn take_hasher(&mut self) -> Option<Sha256> {
        self.hasher.take()
    }

    /// Opens `src` at byte `offset` (a record boundary) on line `line`, going on with the
    /// hash `hasher` of every byte before `offset`.
    pub(super) fn resume(
        src: &CsvSource,
        delimiter: u8,
        offset: u64,
        line: u64,
        hasher: Option<Sha256>,
    ) -> Result<Self, ReadError> {
        let mut r = RecordReader::open(src, delimiter)?;
        r.reposition(src, offset, line)?;
        r.hasher = hasher;
        Ok(r)
    }

    /// Moves this reader to byte `offset` (a record boundary) on line `line`, as if it
    /// had read everything before.
    pub(super) fn reposition(
        &mut self,
        src: &CsvSource,
        offset: u64,
        line: u64,
    ) -> Result<(), ReadError> {
        self.input.reposition(src, offset)?;
        // The bytes skipped or read twice would make the hash wrong.
        self.hasher = None;
        if let Some(core) = self.core.as_mut() {
            core.reset();
            prime(core);
        }
        self.offset = offset;
        self.line = line;
        self.record_line = line;
        self.len = 0;
        self.unterminated = false;
        self.inner_lf = 0;
        Ok(())
    }

    /// Line number of the next unread byte.
    pub(super) fn next_line(&self) -> u64 {
        self.line
    }

    /// Reads the next record; false at the end of the input.
    pub(super) fn read(&mut self) -> Result<bool, ReadError> {
        // Skip blank lines here, so that the record's first line is known.
        loop {
            let buf = self.input.fill_buf()?;
            if buf.is_empty() {
                break;
            }
            let skip = buf
                .iter()
                .position(|&b| b != b'\n' && b != b'\r')
                .unwrap_or(buf.len());
            let lf = count_lf(&buf[..skip]);
            let found = skip < buf.len();
            if let Some(h) = self.hasher.as_mut() {
                h.update(&buf[..skip]);
            }
            self.input.consume(skip);
            self.offset += skip as u64;
            self.line += lf;
            if found {
                break;
            }
        }
        self.record_line = self.line;
        let Some(core) = self.core.as_mut() else {
            return Ok(false);
        };
        let (mut n_out, mut n_end) = (0, 0);
        let (mut lf_total, mut last) = (0, 0u8);
        loop {
            let input = self.input.fill_buf()?;
            let at_end = input.is_empty();
            let (res, nin, nout, nend) =
                core.read_record(input, &mut self.out[n_out..], &mut self.ends[n_end..]);
            let lf = count_lf(&input[..nin]);
            if let Some(h) = self.hasher.as_mut() {
                h.update(&input[..nin]);
            }
            if nin > 0 {
                last = input[nin - 1];
            }
            lf_total += lf;
            self.input.consume(nin);
            self.offset += nin as u64;
            self.line += lf;
            n_out += nout;
            n_end += nend;
            match res {
                csv_core::ReadRecordResult::InputEmpty => {}
                csv_core::ReadRecordResult::OutputFull => {
                    if self.out.len() >= MAX_RECORD_BYTES {
                        return Err(ReadError::TooLong {
                            line: self.record_line,
                        });
                    }
                    let n = (self.out.len().max(1) * 2).min(MAX_RECORD_BYTES);
                    self.out.resize(n, 0);
                }
                csv_core::ReadRecordResult::OutputEndsFull => {
                    if self.ends.len() >= MAX_FIELDS {
                        return Err(ReadError::TooManyFields {
                            line: self.record_line,
                        });
                    }
                    let n = (self.ends.len().max(1) * 2).min(MAX_FIELDS);
                    self.ends.resize(n, 0);
                }
                csv_core::ReadRecordResult::Record => {
                    self.len = n_end;
                    self.unterminated = at_end;
                    let ended_by_lf = !at_end && last == b'\n';
                    self.inner_lf = lf_total - u64::from(ended_by_lf && lf_total > 0);
                    return Ok(true);
                }
                csv_core::ReadRecordResult::End => {
                    self.len = 0;
                    self.unterminated = false;
                    return Ok(false);
                }
            }
        }
    }

    /// Field i of the current record (empty if there is no such field).
    #[inline]
    pub(super) fn field(&self, i: usize) -> &[u8] {
        if i >= self.len {
            return &[];
        }
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        self.out.get(start..self.ends[i]).unwrap_or(&[])
    }

    /// True when every field of the current record is empty or white space.
    pub(super) fn is_blank(&self) -> bool {
        (0..self.len).all(|i| self.field(i).trim_ascii().is_empty())
    }
}

/// One CSV record as the row rules see it: its fields, where it starts and how it ends.
/// The record reader is one; a plain line cut out of a block by the fast path
/// (`block.rs`) is another, and both give the same answers for the same bytes.
pub(super) trait Record {
    /// Number of fields.
    fn n_fields(&self) -> usize;
    /// Field i (empty if there is no such field).
    fn field(&self, i: usize) -> &[u8];
    /// Line on which the record starts.
    fn record_line(&self) -> u64;
    /// True when the record ended at the end of the input with no line end.
    fn unterminated(&self) -> bool;
    /// Line feeds inside the record (in quoted fields), not counting its end.
    fn inner_lf(&self) -> u64;
    /// True when every field is empty or white space.
    fn is_blank(&self) -> bool {
        (0..self.n_fields()).all(|i| self.field(i).trim_ascii().is_empty())
    }
}

impl Record for RecordReader {
    #[inline]
    fn n_fields(&self) -> usize {
        self.len
    }
    #[inline]
    fn field(&self, i: usize) -> &[u8] {
        RecordReader::field(self, i)
    }
    #[inline]
    fn record_line(&self) -> u64 {
        self.record_line
    }
    #[inline]
    fn unterminated(&self) -> bool {
        self.unterminated
    }
    #[inline]
    fn inner_lf(&self) -> u64 {
        self.inner_lf
    }
    fn is_blank(&self) -> bool {
        RecordReader::is_blank(self)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counts_line_feeds_inside_records() {
        let src = CsvSource::bytes(
            "t.csv",
            b"a,\"x\ny\"\r\nb,c\n\"open\nrest\nof file".to_vec(),
        );
        let mut r = RecordReader::open(&src, b',').unwrap();
        let mut got = Vec::new();
        while r.read().unwrap() {
            got.push((r.record_line, r.inner_lf, r.unterminated));
        }
        assert_eq!(got, vec![(1, 1, false), (3, 0, false), (4, 2, true)]);
    }

    fn records(text: &[u8]) -> Vec<(u64, Vec<String>, bool)> {
        let src = CsvSource::bytes("t.csv", text.to_vec());
        let mut r = RecordReader::open(&src, b',').unwrap();
        let mut out = Vec::new();
        while r.read().unwrap() {
            let fields = (0..r.len)
                .map(|i| String::from_utf8_lossy(r.field(i)).into_owned())
                .collect();
            out.push((r.record_line, fields, r.unterminated));
        }
        out
    }

    #[test]
    fn counts_physical_lines_and_notices_a_missing_last_line_end() {
        // Blank lines, CRLF ends, a quoted field with a line break inside, no final end.
        let got = records(b"h1,h2\r\n1,2\r\n\r\n\r\n3,4\r\n\"a\nb\",5\n6,7");
        let want: Vec<(u64, Vec<String>, bool)> = vec![
            (1, vec!["h1".into(), "h2".into()], false),
            (2, vec!["1".into(), "2".into()], false),
            (5, vec!["3".into(), "4".into()], false),
            (6, vec!["a\nb".into(), "5".into()], false),
            (8, vec!["6".into(), "7".into()], true),
        ];
        assert_eq!(got, want);
        // A last line ended by a lone CR is complete.
        assert!(!records(b"a,b\r")[0].2);
    }

    #[test]
    fn strips_a_leading_bom_only() {
        let got = records(b"\xef\xbb\xbfa,b\n\xef\xbb\xbfc,d\n");
        assert_eq!(got[0].1, vec!["a".to_string(), "b".to_string()]);
        assert_eq!(got[1].1[0].as_bytes(), b"\xef\xbb\xbfc");
    }

    #[test]
    fn a_reader_moved_to_a_record_boundary_reads_on_from_there() {
        let text = b"a,b\n\xef\xbb\xbfc,d\ne,f\n";
        let src = CsvSource::bytes("t.csv", text.to_vec());
        let mut r = RecordReader::open(&src, b',').unwrap();
        assert!(r.read().unwrap());
        let (off, line) = (r.offset, r.next_line());
        let mut la = RecordReader::open(&src, b',').unwrap();
        la.reposition(&src, off, line).unwrap();
        assert!(la.read().unwrap());
        assert_eq!((la.record_line, la.field(0)), (2, &b"\xef\xbb\xbfc"[..]));
    }

    #[test]
    fn a_reused_parser_reads_like_a_new_one() {
        // The first reader stops inside a quoted field and gives its parser back.
        let src = CsvSource::bytes("t.csv", b"a,\"open".to_vec());
        let mut r = RecordReader::open(&src, b',').unwrap();
        assert!(r.read().unwrap());
        drop(r);
        for _ in 0..3 {
            assert_eq!(
                records(b"x,y\n\"p\nq\",z\n"),
                vec![
                    (1, vec!["x".to_string(), "y".to_string()], false),
                    (2, vec!["p\nq".to_string(), "z".to_string()], false),
                ]
            );
        }
    }

    #[test]
    fn overlong_records_are_refused() {
        let mut text = b"a,".to_vec();
        text.extend(std::iter::repeat_n(b'x', MAX_RECORD_BYTES + 10));
        let src = CsvSource::bytes("t.csv", text);
        let mut r = RecordReader::open(&src, b',').unwrap();
        assert!(matches!(r.read(), Err(ReadError::TooLong { line: 1 })));
        let text = ",".repeat(MAX_FIELDS + 1).into_bytes();
        let src = CsvSource::bytes("t.csv", text);
        let mut r = RecordReader::open(&src, b',').unwrap();
        assert!(matches!(
            r.read(),
            Err(ReadError::TooManyFields { line: 1 })
        ));
    }
}
