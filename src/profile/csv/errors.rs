//! The errors of reading a profile, built in one place so that each kind of failure has
//! one wording: an unreadable source, a record too long or too wide, a file-level problem,
//! and a file that changed between passes.

use super::source::{ReadError, MAX_FIELDS, MAX_RECORD_BYTES};
use crate::error::ProfileError;
use std::path::Path;

pub(super) fn io_error(path: &Path, source: std::io::Error) -> ProfileError {
    ProfileError::Io {
        file: path.to_path_buf(),
        source,
    }
}

pub(super) fn read_error(path: &Path, e: ReadError) -> ProfileError {
    match e {
        ReadError::Io(source) => io_error(path, source),
        ReadError::TooLong { line } => ProfileError::Row {
            file: path.to_path_buf(),
            line,
            message: format!(
                "the record starting on this line is longer than {} bytes; is this a CSV \
                 profile? (a quote that is never closed makes the rest of the file one field)",
                MAX_RECORD_BYTES
            ),
        },
        ReadError::TooManyFields { line } => ProfileError::Row {
            file: path.to_path_buf(),
            line,
            message: format!(
                "the record starting on this line has more than {MAX_FIELDS} fields; is the \
                 delimiter right?"
            ),
        },
    }
}

pub(super) fn file_error(path: &Path, message: String) -> ProfileError {
    ProfileError::File {
        file: path.to_path_buf(),
        message,
    }
}

pub(super) fn changed_error(path: &Path) -> ProfileError {
    file_error(
        path,
        "the file changed after it was scanned (its rows no longer match the first \
         reading, from line 1 on); scan it again"
            .to_string(),
    )
}
