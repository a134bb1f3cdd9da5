//! Synthetic photos with known truth, for tests, benches and the demo.
//!
//! The simulator shares no formula with [`crate::optics`]: the far field is the Fourier
//! transform of the grating's (or slits', or wire's) sampled transmission under a Gaussian beam (the angular
//! spectrum of plane waves, Goodman, *Introduction to Fourier Optics*, ch. 3), every plane
//! wave is a ray intersected with the screen plane in 3-D, the photo is a pinhole camera's
//! view through the plane's homography (Hartley & Zisserman, *Multiple View Geometry*, §8.1),
//! and the camera adds speckle, blur, shot and read noise and the sRGB curve of
//! IEC 61966-2-1. The truth of every photo (inputs, where each order's light lands in
//! millimetres and pixels, the ruler, grid crossings, the homography) goes beside it.
//!
//! ```no_run
//! use fringegauge::simulate::*;
//! let photo = render_grating(
//!     &GratingSetup::default(),
//!     &Scene::default(),
//!     &CameraSpec::default(),
//!     &Effects::default(),
//!     7,
//! )?;
//! photo.write(std::path::Path::new("cd.jpg"), 92, false)?;
//! # Ok::<(), SimError>(())
//! ```

mod aperture;
mod camera;
mod clutter;
mod direction_map;
mod effects;
mod electron;
mod electron_lattice;
mod electron_light;
mod electron_photo;
mod electron_truth;
mod farfield;
mod fringe_photo;
mod fringe_truth;
mod fringes;
mod glare;
mod output;
mod particles;
mod photo;
mod pinhole;
mod render;
mod ring_photo;
mod ring_truth;
mod scene;
mod screen;
mod spots;
mod truth;

#[cfg(test)]
mod tests;

pub use aperture::{Aperture, ApertureSetup};
pub use camera::{Camera, CameraSpec, Framing};
pub use effects::Effects;
pub use electron::{ElectronSetup, TubeScreen, electron_wavelength_m};
pub use electron_lattice::{Lattice, LatticeFamily};
pub use electron_photo::TubeScene;
pub use electron_truth::{ElectronTruth, EllipseTruth, RingTruth};
pub use farfield::{GratingProfile, GratingSetup};
pub use fringe_truth::{ApertureInputs, ApertureTruth, FringePoint, FringeTruth};
pub use output::truth_path;
pub use particles::{ParticleSetup, SizeDistribution};
pub use pinhole::PinholeSetup;
pub use ring_truth::{
    DistributionTruth, HaloTruth, ParticleSample, ParticlesTruth, PinholeTruth, RingPoint,
    RingsTruth,
};
pub use scene::{Clutter, GraphPaper, RoomLight, Ruler, Scene, Surface};
pub use truth::{
    CameraTruth, GratingInputs, GridTruth, OrderTruth, RulerTruth, ScreenFrame, SheetTruth, Truth,
};

pub(crate) use photo::render;
use std::path::PathBuf;
use thiserror::Error;

/// Why a photo could not be simulated or saved.
#[derive(Debug, Error)]
pub enum SimError {
    /// An input is out of range or not a number.
    #[error("simulation input {name} = {value} is not accepted: expected {expected}")]
    BadInput {
        /// The input.
        name: &'static str,
        /// The value seen.
        value: f64,
        /// What is accepted.
        expected: &'static str,
    },
    /// The far field would need more samples than allowed.
    #[error("{0}")]
    TooFine(String),
    /// Light propagates but no order meets the screen.
    #[error("no diffraction order reaches the screen: {0}")]
    NoOrderReachesScreen(String),
    /// The camera's view holds no part of the screen.
    #[error("the camera sees no screen: {0}")]
    CameraSeesNoScreen(String),
    /// The photo path's extension is not one we write.
    #[error("cannot tell the image format from extension {0:?}: use .jpg, .jpeg or .png")]
    Extension(String),
    /// A file exists and `force` was not given.
    #[error("{} exists; pass force to overwrite it", path.display())]
    Exists {
        /// The existing file.
        path: PathBuf,
    },
    /// Reading or writing a file failed.
    #[error("{context} {}: {source}", path.display())]
    Io {
        /// What was being done.
        context: &'static str,
        /// The file.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// The image encoder failed.
    #[error("encoding {}: {source}", path.display())]
    Encode {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        source: image::ImageError,
    },
    /// The truth could not be serialized.
    #[error("serializing the truth: {0}")]
    Json(serde_json::Error),
}

/// A rendered photo and its truth ([`Truth`] for a grating, [`ApertureTruth`] for fringes).
#[derive(Debug, Clone)]
pub struct SimPhoto<T = Truth> {
    /// The 8-bit sRGB image.
    pub image: image::RgbImage,
    /// What is known about it.
    pub truth: T,
}

/// Renders a photo of a grating's pattern on a screen. `seed` drives every random choice
/// (texture, speckle, noise, clutter), so equal inputs give equal photos.
pub fn render_grating(
    setup: &GratingSetup,
    scene: &Scene,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
) -> Result<SimPhoto, SimError> {
    render(setup, scene, camera, effects, seed, true)
}

/// Renders a photo of the fringes of two slits, a slit or a wire on a screen perpendicular
/// to the beam. `seed` drives every random choice, so equal inputs give equal photos.
///
/// ```no_run
/// use fringegauge::simulate::*;
/// let photo = render_aperture(
///     &ApertureSetup::two_slit(),
///     &Scene::default(),
///     &CameraSpec::default(),
///     &Effects::default(),
///     7,
/// )?;
/// photo.write(std::path::Path::new("young.jpg"), 92, false)?;
/// # Ok::<(), SimError>(())
/// ```
pub fn render_aperture(
    setup: &ApertureSetup,
    scene: &Scene,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
) -> Result<SimPhoto<ApertureTruth>, SimError> {
    fringe_photo::render(setup, scene, camera, effects, seed, true)
}

/// Renders a photo of a pinhole's rings on a screen perpendicular to the beam, exposed on
/// the first bright ring. `seed` drives every random choice, so equal inputs give equal
/// photos.
pub fn render_pinhole(
    setup: &PinholeSetup,
    scene: &Scene,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
) -> Result<SimPhoto<PinholeTruth>, SimError> {
    ring_photo::render_pinhole(setup, scene, camera, effects, seed, true)
}

/// Renders a photo of the halo of a random field of opaque particles on a screen
/// perpendicular to the beam, exposed on the halo. `seed` drives every random choice (the
/// particles' sizes and places included).
pub fn render_particles(
    setup: &ParticleSetup,
    scene: &Scene,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
) -> Result<SimPhoto<ParticlesTruth>, SimError> {
    ring_photo::render_particles(setup, scene, camera, effects, seed, true)
}

/// Renders a phone photo of an electron-diffraction tube in a darkened room: the glowing
/// phosphor, the saturated centre spot, the film's rings and a ruler, with the truth
/// ([`ElectronTruth`]) of every ring. `seed` drives every random choice.
///
/// ```no_run
/// use fringegauge::simulate::*;
/// let photo = render_electron(
///     &ElectronSetup::default(),
///     &TubeScene::default(),
///     &CameraSpec::default(),
///     &Effects::default(),
///     7,
/// )?;
/// photo.write(std::path::Path::new("gold.jpg"), 92, false)?;
/// # Ok::<(), SimError>(())
/// ```
pub fn render_electron(
    setup: &ElectronSetup,
    scene: &TubeScene,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
) -> Result<SimPhoto<ElectronTruth>, SimError> {
    electron_photo::render(setup, scene, camera, effects, seed)
}
