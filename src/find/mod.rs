//! Image → features in pixels with uncertainties: bright blobs on a coarse map
//! ([`blobs`]), sub-pixel spot positions by a censored elliptical Gaussian fit
//! ([`spot`]), the line the spots of a pattern lie on ([`axis`]), which candidates are
//! laser light ([`colour`]) and the band of fringes with its profile ([`fringes`]).

pub mod axis;
pub mod blobs;
pub mod colour;
pub mod fringes;
pub mod spot;

use thiserror::Error;

/// Why no features were found.
#[derive(Debug, Error)]
pub enum FindError {
    /// Nothing that looks like the expected pattern.
    #[error("{0}")]
    NoPattern(String),
    /// The pattern is there but cannot be measured as it is.
    #[error("{0}")]
    Unmeasurable(String),
}
