//! Image → features in pixels with uncertainties: bright blobs on a coarse map
//! ([`blobs`]), sub-pixel spot positions by a censored elliptical Gaussian fit
//! ([`spot`]), the line the spots of a pattern lie on ([`axis`]), which candidates are
//! laser light ([`colour`]), the band of fringes with its profile ([`fringes`]) and the
//! centre and radial profile of ring patterns ([`rings`]).

pub mod axis;
pub mod blobs;
pub mod colour;
pub mod fringes;
pub mod rings;
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

/// The stretch [a, b] shrunk from both ends, a pixel at a time, to where `keep` holds (e.g.
/// where a line offset from the pattern stays inside the frame). Empty (a ≥ b) if nowhere.
pub fn trim_span(mut a: f64, mut b: f64, keep: impl Fn(f64) -> bool) -> (f64, f64) {
    while a < b && !keep(a) {
        a += 1.0;
    }
    while b > a && !keep(b) {
        b -= 1.0;
    }
    (a, b)
}
