//! The JSON record, overlay, report and archive.

use crate::ExitCode;
use thiserror::Error;

/// Why the record could not be written.
#[derive(Debug, Error)]
pub enum RecordError {
    /// The target exists and `--force` was not given.
    #[error("{0} already exists; pass --force to overwrite it")]
    Exists(String),
    /// Writing failed.
    #[error("cannot write {path}: {source}")]
    Io {
        /// The path.
        path: String,
        /// The cause.
        source: std::io::Error,
    },
}

impl RecordError {
    /// Exit code of this error.
    pub fn exit_code(&self) -> ExitCode {
        ExitCode::BadInput
    }
}
