//! The physics of each experiment.

use thiserror::Error;

/// Why the physics could not be solved.
#[derive(Debug, Error)]
pub enum OpticsError {
    /// The features do not fit the experiment.
    #[error("{0}")]
    Unsolvable(String),
}
