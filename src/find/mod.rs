//! Image → features in pixels with uncertainties.

use thiserror::Error;

/// Why no features were found.
#[derive(Debug, Error)]
pub enum FindError {
    /// Nothing that looks like the expected pattern.
    #[error("{0}")]
    NoPattern(String),
}
