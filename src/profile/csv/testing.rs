//! Helpers for the unit tests of this module: profile text, temporary files, and reading
//! one value from a load source.

use crate::profile::{LoadSample, LoadSource};
use std::io::Write;

pub(super) const HEADER: &str = "time,p_a_kw,q_a_kvar,p_b_kw,q_b_kvar,p_c_kw,q_c_kvar\n";

pub(super) fn write(text: &str) -> tempfile::NamedTempFile {
    let mut f = tempfile::NamedTempFile::new().expect("temp file");
    f.write_all(text.as_bytes()).expect("write");
    f.flush().expect("flush");
    f
}

/// A row whose P and Q of every phase equal `v`.
pub(super) fn row(t: &str, v: f64) -> String {
    format!("{t},{v},{v},{v},{v},{v},{v}\n")
}

pub(super) fn pa_at(src: &mut dyn LoadSource, k: u64, t: f64) -> f64 {
    let mut s = LoadSample::default();
    src.sample(k, t, &mut s).expect("sample");
    s.p_kw[0]
}
