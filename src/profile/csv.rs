//! Streaming reader for load-profile CSV files (stand-in until the reader lands).

use crate::error::ProfileError;
use crate::profile::{DefectPolicy, LoadSample, LoadSource};
use crate::timebase::TimeKind;
use std::path::{Path, PathBuf};

/// Reader options.
#[derive(Debug, Clone, Copy)]
pub struct CsvOptions {
    /// Defect policy.
    pub on_defect: DefectPolicy,
    /// Gap factor.
    pub gap_factor: f64,
}

/// Pass-one result.
#[derive(Debug, Clone)]
pub struct CsvScan {
    /// File.
    pub path: PathBuf,
    /// Time kind.
    pub time_kind: TimeKind,
    /// First time.
    pub t_first_s: f64,
    /// Coverage end.
    pub end_s: f64,
}

/// Scans a file.
pub fn scan(path: &Path, _opts: &CsvOptions) -> Result<CsvScan, ProfileError> {
    Err(ProfileError::File {
        file: path.to_path_buf(),
        message: "CSV reading is not available yet".into(),
    })
}

/// Streaming pass.
pub struct CsvStream;

impl CsvScan {
    /// Opens the streaming pass.
    pub fn stream(&self) -> Result<CsvStream, ProfileError> {
        Ok(CsvStream)
    }
}

impl LoadSource for CsvStream {
    fn sample(&mut self, _k: u64, _t_s: f64, _out: &mut LoadSample) -> Result<(), ProfileError> {
        Ok(())
    }
}
