//! The top-level error, which each layer's error converts into, and its exit code
//! (DESIGN §2: 0 measured, 1 measurement not possible, 2 bad usage or input, 3 batch
//! with failures).

use thiserror::Error;

/// Process exit codes of the `fringegauge` binary.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ExitCode {
    /// The measurement was made.
    Measured = 0,
    /// The photo was read but the measurement could not be made.
    NotMeasured = 1,
    /// Bad usage or bad input.
    BadInput = 2,
    /// A batch finished with some failures.
    BatchFailures = 3,
}

/// Any error that ends a command.
#[derive(Debug, Error)]
pub enum Error {
    /// The photo could not be read or is refused.
    #[error(transparent)]
    Photo(#[from] crate::photo::PhotoError),
    /// A value on the command line or in a setup file is malformed or out of range.
    #[error(transparent)]
    Quantity(#[from] crate::quantity::QuantityError),
    /// The pixel-to-millimetre scale is missing, contradictory or could not be measured.
    #[error(transparent)]
    Scale(#[from] crate::scale::ScaleError),
    /// No pattern, or not enough of it, was found in the photo.
    #[error(transparent)]
    Find(#[from] crate::find::FindError),
    /// A numerical fit failed.
    #[error(transparent)]
    Fit(#[from] crate::fit::FitError),
    /// The physics could not be solved from the features found.
    #[error(transparent)]
    Optics(#[from] crate::optics::OpticsError),
    /// Writing the record, overlay or archive failed, or would overwrite.
    #[error(transparent)]
    Record(#[from] crate::record::RecordError),
    /// A synthetic photo could not be made or saved.
    #[error(transparent)]
    Simulate(#[from] crate::simulate::SimError),
    /// Bad usage that clap did not catch (conflicting or missing inputs).
    #[error("{0}")]
    Usage(String),
    /// Input or output failed outside the photo and the record.
    #[error("{context}: {source}")]
    Io {
        /// What was being done.
        context: String,
        /// The underlying error.
        source: std::io::Error,
    },
}

impl Error {
    /// The exit code this error maps to.
    pub fn exit_code(&self) -> ExitCode {
        match self {
            Error::Photo(_)
            | Error::Quantity(_)
            | Error::Usage(_)
            | Error::Io { .. }
            | Error::Simulate(_) => ExitCode::BadInput,
            Error::Scale(e) => e.exit_code(),
            Error::Record(e) => e.exit_code(),
            Error::Find(_) | Error::Fit(_) | Error::Optics(_) => ExitCode::NotMeasured,
        }
    }
}
