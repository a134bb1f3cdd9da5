//! Pixel ↔ screen-millimetre maps and the ways to make one.

use crate::ExitCode;
use thiserror::Error;

/// Why no scale could be made.
#[derive(Debug, Error)]
pub enum ScaleError {
    /// The scale inputs are missing or contradict each other.
    #[error("{0}")]
    Usage(String),
    /// The scale could not be measured from the photo.
    #[error("{0}")]
    NotMeasured(String),
}

impl ScaleError {
    /// Exit code: bad input for usage errors, "not measured" for failed measurements.
    pub fn exit_code(&self) -> ExitCode {
        match self {
            ScaleError::Usage(_) => ExitCode::BadInput,
            ScaleError::NotMeasured(_) => ExitCode::NotMeasured,
        }
    }
}
