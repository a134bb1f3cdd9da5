//! Decoding photos with limits, EXIF orientation and metadata, SHA-256 of the file, and
//! linear light from sRGB (IEC 61966-2-1). API skeleton: the implementation lands next.

use serde::{Deserialize, Serialize};
use std::path::Path;
use thiserror::Error;

/// Why a photo could not be used.
#[derive(Debug, Error)]
pub enum PhotoError {
    /// Placeholder until the decoder lands.
    #[error("{0}")]
    Other(String),
}

/// Limits checked before any pixel buffer is allocated.
#[derive(Debug, Clone, Copy)]
pub struct Limits {
    /// Largest accepted pixel count.
    pub max_pixels: u64,
    /// Largest accepted decoded size in bytes.
    pub max_decoded_bytes: u64,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_pixels: 100_000_000,
            max_decoded_bytes: 1 << 30,
        }
    }
}

/// Camera metadata kept from EXIF.
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
pub struct ExifInfo {
    /// Camera maker.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub make: Option<String>,
    /// Camera model.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model: Option<String>,
    /// Time the photo was taken, as written by the camera.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub datetime: Option<String>,
    /// Lens focal length in millimetres.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub focal_length_mm: Option<f64>,
    /// Exposure time in seconds.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub exposure_s: Option<f64>,
    /// Aperture f-number.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub f_number: Option<f64>,
    /// ISO speed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub iso: Option<u32>,
}

/// What the record keeps about the photo file.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct PhotoInfo {
    /// Path as given.
    pub path: String,
    /// SHA-256 of the file bytes, lower-case hex.
    pub sha256: String,
    /// Upright width in pixels.
    pub width: u32,
    /// Upright height in pixels.
    pub height: u32,
    /// EXIF orientation (1–8) that was applied; 1 when absent.
    pub orientation: u16,
    /// Camera metadata.
    pub exif: ExifInfo,
}

/// A colour channel, or linear luminance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Channel {
    /// Red.
    R,
    /// Green.
    G,
    /// Blue.
    B,
    /// Linear luminance Y = 0.2126 R + 0.7152 G + 0.0722 B (IEC 61966-2-1 primaries).
    Luma,
}

/// A decoded, upright photo.
pub struct Photo {
    /// File facts for the record.
    pub info: PhotoInfo,
}

/// One channel of a photo in linear light, 0..1.
pub struct Plane<'a> {
    photo: &'a Photo,
}

/// Decodes a photo file.
pub fn load(path: &Path, limits: &Limits) -> Result<Photo, PhotoError> {
    let _ = (path, limits);
    Err(PhotoError::Other(
        "photo decoding is not implemented yet".into(),
    ))
}

impl Photo {
    /// Upright width in pixels.
    pub fn width(&self) -> usize {
        self.info.width as usize
    }
    /// Upright height in pixels.
    pub fn height(&self) -> usize {
        self.info.height as usize
    }
    /// A channel in linear light.
    pub fn plane(&self, channel: Channel) -> Plane<'_> {
        let _ = channel;
        Plane { photo: self }
    }
}

impl Plane<'_> {
    /// Width in pixels.
    pub fn width(&self) -> usize {
        self.photo.width()
    }
    /// Height in pixels.
    pub fn height(&self) -> usize {
        self.photo.height()
    }
    /// Linear value at a pixel.
    pub fn get(&self, x: usize, y: usize) -> f32 {
        let _ = (x, y);
        0.0
    }
    /// Whether any colour channel feeding this plane is clipped at this pixel.
    pub fn saturated(&self, x: usize, y: usize) -> bool {
        let _ = (x, y);
        false
    }
    /// Fills `out` (length `width`) with the linear values of row `y`.
    pub fn row(&self, y: usize, out: &mut [f32]) {
        let _ = y;
        out.fill(0.0);
    }
}
