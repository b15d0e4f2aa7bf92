//! Error types of the library. Every error names the file and, where there is one, the
//! line or the scenario key, so that a user can go straight to the fault.

use std::path::PathBuf;

/// A problem with one field of a scenario, before the file name is attached.
#[derive(Debug, Clone, PartialEq)]
pub struct FieldError {
    /// Dotted key, e.g. `controller.dead_band_kvar` or `bank.steps[2].kvar`.
    pub key: String,
    /// What is wrong and what is allowed, with units.
    pub message: String,
}

impl FieldError {
    /// Builds a field error from a key and a message.
    pub fn new(key: impl Into<String>, message: impl Into<String>) -> Self {
        FieldError {
            key: key.into(),
            message: message.into(),
        }
    }
}

/// Errors raised while reading or validating a scenario file.
#[derive(Debug, thiserror::Error)]
pub enum ScenarioError {
    /// The file could not be read.
    #[error("{}: cannot read the scenario: {source}", file.display())]
    Io {
        /// The scenario file.
        file: PathBuf,
        /// The underlying I/O error.
        source: std::io::Error,
    },
    /// The file is not valid TOML or a key has the wrong type.
    #[error("{}: {message}", file.display())]
    Parse {
        /// The scenario file.
        file: PathBuf,
        /// The parser's message, with line and column.
        message: String,
    },
    /// A key holds a value outside its allowed range, or a required key is missing.
    #[error("{}: key `{key}`: {message}", file.display())]
    Invalid {
        /// The scenario file.
        file: PathBuf,
        /// Dotted key of the offending field.
        key: String,
        /// What is wrong and what is allowed, with units.
        message: String,
    },
}

impl ScenarioError {
    /// Attaches a file name to a field error.
    pub fn from_field(file: impl Into<PathBuf>, e: FieldError) -> Self {
        ScenarioError::Invalid {
            file: file.into(),
            key: e.key,
            message: e.message,
        }
    }
}

/// Errors raised while reading a load profile.
#[derive(Debug, thiserror::Error)]
pub enum ProfileError {
    /// The file could not be opened or read.
    #[error("{}: cannot read the load profile: {source}", file.display())]
    Io {
        /// The profile file.
        file: PathBuf,
        /// The underlying I/O error.
        source: std::io::Error,
    },
    /// A problem with the file as a whole (missing column, no data rows, ...).
    #[error("{}: {message}", file.display())]
    File {
        /// The profile file.
        file: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// A problem with one row, when the defect policy says stop.
    #[error("{}:{line}: {message}", file.display())]
    Row {
        /// The profile file.
        file: PathBuf,
        /// 1-based line number in the file (the header is line 1).
        line: u64,
        /// What is wrong with the row.
        message: String,
    },
    /// The run asks for more time than the profile covers.
    #[error("{}: {message}", file.display())]
    Coverage {
        /// The profile file.
        file: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// The load was asked for in an order its source cannot serve (a prefetched
    /// source asked for something other than what it made ahead), or the thread making
    /// it stopped.
    #[error("load interval {k}: {message}")]
    Sequence {
        /// The interval asked for.
        k: u64,
        /// What went wrong.
        message: String,
    },
}

/// Errors raised by a simulation run.
#[derive(Debug, thiserror::Error)]
pub enum RunError {
    /// The load profile failed while streaming.
    #[error(transparent)]
    Profile(#[from] ProfileError),
    /// The configuration cannot be simulated.
    #[error("{0}")]
    Config(String),
}
