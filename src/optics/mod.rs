//! The physics of each experiment, one file per kind. Nothing here knows about images:
//! each solver takes feature positions with their uncertainties, the screen map and the
//! experiment's inputs, and returns results with GUM budgets.

pub mod airy;
pub mod electron;
pub mod grating;
pub mod lattice;
pub mod particles;
pub mod pinhole;
pub mod profile;
pub mod slit;
pub mod two_slit;

use thiserror::Error;

/// Why the physics could not be solved.
#[derive(Debug, Error)]
pub enum OpticsError {
    /// The features do not fit the experiment.
    #[error("{0}")]
    Unsolvable(String),
    /// An input is out of the physical range.
    #[error("{0}")]
    BadInput(String),
    /// The uncertainty could not be propagated.
    #[error("uncertainty propagation failed: {0}")]
    Uncertainty(#[from] crate::uncertainty::UncertaintyError),
}
