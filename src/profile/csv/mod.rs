//! Load profiles read from CSV files.
//!
//! This module owns everything between a profile's bytes and the per-interval
//! [`LoadSample`](crate::profile::LoadSample)s the engine asks for. Each file has one job:
//!
//! - `source.rs`: where the bytes come from ([`CsvSource`]: a file, bytes in memory, or
//!   any reader that can start again) and the record reader over them;
//! - `options.rs`: how to read the file ([`CsvOptions`]): defect policies, gap factor,
//!   column delimiter and decimal mark;
//! - `defect.rs`: the kinds of defect ([`DefectKind`]), what was done with one
//!   ([`DefectAction`]), a reported [`Defect`] and exact [`DefectCounts`];
//! - `header.rs`: the required [`COLUMNS`], found by base name, with or without a unit
//!   (`p_a_kw`, `P_a [kW]`, `p_a_kw (kW)`), a contradicting unit being an error;
//! - `number.rs`: numbers with a decimal point or a decimal comma, parsed from the bytes
//!   (plain numbers by Clinger's fast path, others by `fast-float2`, the rare rest by
//!   the standard library);
//! - `rules.rs`: the row rules: what makes a row defective, by [`DefectKind`], and what
//!   each kind's policy does with it: stop, skip, hold or interpolate;
//! - `scan.rs`: pass 1, [`scan`]: validates the whole source and collects its statistics
//!   (time kind, row counts, median spacing, coverage end, defects with line numbers,
//!   gaps, the [`DefectSummary`], the SHA-256 of the bytes) in [`CsvScan`]; it keeps the
//!   used rows as a [`MemoryProfile`] while they fit in its budget ([`ScanSettings`],
//!   [`DEFAULT_KEEP_BYTES`], [`BYTES_PER_ROW`]), so that a run need not read the file
//!   again, and beyond it gives them up, so that memory stays flat however long the
//!   file; `spacings.rs` keeps the spacing histogram and `gaps.rs` finds the gaps once
//!   the median is known;
//! - `block.rs`: the scan's fast path: plain text read in blocks of whole lines, the
//!   numbers of each block parsed in pieces on rayon's threads, then the row rules
//!   applied in file order; a quote, a lone carriage return or an overlong line sends
//!   the scan back to the record reader from the start of that block; `shape.rs` reads
//!   the lines of seven plain numbers there by their shape, with SSE2 or AVX2 on x86-64;
//! - `replay.rs`: reading the used rows again exactly as the scan did;
//! - `stream.rs`: pass 2, [`CsvScan::stream`]: reads the source again and yields samples
//!   on the simulation grid by sample-and-hold, applying the same rules so that it uses
//!   exactly the rows pass 1 used;
//! - `memory.rs`: [`CsvScan::load`] and [`MemoryProfile`]: the whole profile in memory,
//!   for many runs over one profile, with a [`MemoryCursor`] (borrowing) or a
//!   [`SharedCursor`] (through an `Arc`) that does the same sample-and-hold;
//! - `tolerance.rs`, `interpolate.rs`, `text.rs`, `errors.rs`, `summary.rs`: time
//!   tolerances, linear interpolation, message text, error wording, and the defect
//!   summary for the reports.
//!
//! Sample-and-hold: interval k, starting at t_k, takes the last row whose time is
//! ≤ t_k (within [`time_tolerance`]), and the last row holds for the profile's median
//! spacing, so N evenly spaced rows cover N spacings. Across a gap the previous row holds
//! (policy `hold`) or the load is interpolated linearly between the rows on either side
//! (policy `interpolate`).
//!
//! Times: elapsed seconds, or ISO 8601 date-times. A date-time with a UTC offset
//! (`2026-03-02T08:00:00+01:00`) is read as the exact instant, so the time line is real
//! elapsed seconds even across a daylight-saving change; the calendar (weekdays, hours
//! of the day, month starts) is taken in the profile's own local time, using the offset
//! written on the file's first date-time ([`CsvScan::utc_offset_s`],
//! [`CsvScan::calendar`]). Where the offset changes within the file (a daylight-saving
//! change), the calendar keeps the first offset for the whole profile, while the time line
//! stays exact (see [`crate::timebase`]). A date-time without an offset is naive local
//! time, taken as it stands. Times quoted in messages are shown in UTC when the file
//! gives offsets.
//!
//! Line numbers are 1-based physical lines of the file (the header is line 1), counted
//! by line feeds, so they stay right across blank lines, CRLF line ends and quoted
//! fields that contain line breaks.
//!
//! Bad input never panics and never makes memory grow without bound: records are capped
//! in length and width, the spacing histogram is capped in size, and at most
//! [`MAX_DEFECTS_KEPT`] defects are kept in full.

mod block;
mod defect;
mod errors;
mod gaps;
mod header;
mod interpolate;
mod memory;
mod number;
mod options;
mod replay;
mod rules;
mod scan;
mod shape;
mod source;
mod spacings;
mod stream;
mod summary;
#[cfg(test)]
mod testing;
mod text;
mod tolerance;

pub use defect::{Defect, DefectAction, DefectCounts, DefectKind, MAX_DEFECTS_KEPT};
pub use header::{ColumnMatch, COLUMNS};
pub use memory::{Cursor, MemoryCursor, MemoryProfile, SharedCursor};
pub use options::{CsvOptions, OptionError};
pub use rules::{MAX_ELAPSED_S, MAX_POWER};
pub use scan::{
    scan, scan_bytes, scan_source, scan_source_with, CsvScan, ScanSettings, BYTES_PER_ROW,
    DEFAULT_KEEP_BYTES,
};
pub use source::{CsvSource, OpenFn, MAX_FIELDS, MAX_RECORD_BYTES};
pub use stream::CsvStream;
pub use summary::{DefectSummary, KindSummary, FIRST_LINES_KEPT};
pub use tolerance::{time_tolerance, TIME_TOL_S};
