//! fringegauge turns a photo of a diffraction pattern into a measured dimension with an
//! uncertainty budget after the GUM.
//!
//! Data flows one way: [`photo`] decodes the picture into linear light, [`scale`] maps
//! pixels to millimetres on the screen, [`find`] locates spots, fringes and rings to a
//! fraction of a pixel, [`optics`] solves the exact physics with [`uncertainty`]
//! propagation, and [`record`] writes the JSON record, overlay and archive. [`fit`] holds
//! the numerics shared by the stages; [`simulate`] renders synthetic photos with known
//! truth for tests and the demo and shares no formula code with [`optics`].
#![deny(missing_docs)]
// `!(x > 0.0)` is deliberate throughout: unlike `x <= 0.0` it also rejects NaN.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

pub mod cli;
pub mod error;
pub mod find;
pub mod fit;
pub mod optics;
pub mod photo;
pub mod quantity;
pub mod raster;
pub mod record;
pub mod scale;
pub mod simulate;
pub mod uncertainty;

pub use error::{Error, ExitCode};
