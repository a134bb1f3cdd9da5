//! Numerics with no image types.

use thiserror::Error;

/// Why a fit failed.
#[derive(Debug, Error)]
pub enum FitError {
    /// Too few points for the model.
    #[error("{0}")]
    TooFewPoints(String),
}
