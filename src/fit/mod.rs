//! Numerics with no image types: Levenberg–Marquardt least squares, straight lines,
//! circles and ellipses through points, non-negative least squares, Bessel functions,
//! Gauss–Hermite quadrature, sub-sample extrema and FFT period estimation. Nothing here knows about photos, screens
//! or physics; the stages above call these with plain numbers.

pub mod bessel;
pub mod circle;
pub mod ellipse;
pub mod hac;
pub mod line;
pub mod lm;
pub mod nnls;
pub mod peak;
pub mod quadrature;
pub mod spectral;

use thiserror::Error;

/// Why a fit failed.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum FitError {
    /// Fewer observations than the model needs.
    #[error("too few points to fit {model}: {got}, need at least {need}")]
    TooFewPoints {
        /// The model being fitted.
        model: &'static str,
        /// Points given.
        got: usize,
        /// Points needed.
        need: usize,
    },
    /// The normal equations are singular: the data do not determine the parameters.
    #[error("{model}: the data do not determine the parameters (singular system)")]
    Singular {
        /// The model being fitted.
        model: &'static str,
    },
    /// The iteration stopped without meeting a convergence test.
    #[error("{model} fit did not converge: {reason}")]
    NotConverged {
        /// The model being fitted.
        model: &'static str,
        /// What happened.
        reason: String,
    },
    /// Bounds that are not a valid interval, or a start value outside its bounds.
    #[error("{model}: {reason}")]
    Bounds {
        /// The model being fitted.
        model: &'static str,
        /// What is wrong, naming the parameter.
        reason: String,
    },
    /// The residuals or parameters became NaN or infinite.
    #[error("{model}: non-finite values during the fit")]
    NonFinite {
        /// The model being fitted.
        model: &'static str,
    },
}
