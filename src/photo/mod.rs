//! The photo stage: decodes a JPEG, PNG or TIFF photo under size limits, applies its EXIF
//! orientation so that pixel coordinates are upright (x right, y down, the top-left pixel
//! centre at (0, 0)), keeps the camera metadata and the SHA-256 of the file, and exposes each
//! colour channel or the linear luminance as a [`Plane`] in linear light through the sRGB
//! transfer function of IEC 61966-2-1.
//!
//! Samples stay in their decoded form (8-bit as `u8`, 16-bit as `u16`, interleaved), and a
//! plane converts them on access through a lookup table, so a 12 MP photo costs its decoded
//! size and no full-frame floating-point copy. A sample counts as clipped at or above 98 % of
//! full scale (code 250 of 255, 64225 of 65535): JPEG ringing keeps blown-out areas anywhere
//! in 250–255 rather than at exactly 255 (common practice).
//!
//! Inputs are taken to be sRGB-encoded, 16-bit ones included; embedded ICC profiles and PNG
//! `gAMA` chunks are not applied. Alpha is ignored (not premultiplied).

mod channel;
mod decode;
mod exif;
mod orient;
mod plane;
mod preview;
#[cfg(test)]
mod test_support;
#[cfg(test)]
mod tests;

pub use channel::{Channel, ChannelChoice, ChannelStats, ParseChannelError};
pub use plane::{Plane, linear_to_srgb, srgb_to_linear};

use decode::{Raw, Samples};
use serde::{Deserialize, Serialize};
use std::path::Path;
use thiserror::Error;

/// Why a photo could not be used. Every message names the file, says what was seen and
/// what to try.
#[derive(Debug, Error)]
pub enum PhotoError {
    /// No file at the given path.
    #[error("photo not found: {path}; check the path and the working directory")]
    NotFound {
        /// Path as given.
        path: String,
    },
    /// The file exists but could not be read.
    #[error("cannot read photo {path}: {source}; check that it is a readable file")]
    Unreadable {
        /// Path as given.
        path: String,
        /// The underlying error.
        source: std::io::Error,
    },
    /// The file holds no bytes.
    #[error("photo {path} is an empty file (0 bytes); the copy or download may have failed")]
    Empty {
        /// Path as given.
        path: String,
    },
    /// The content is not a known image format.
    #[error("{path} is not an image: {seen}; give a JPEG, PNG or TIFF photo")]
    NotAnImage {
        /// Path as given.
        path: String,
        /// What the first bytes look like.
        seen: String,
    },
    /// The data is damaged or ends early.
    #[error(
        "photo {path} is corrupt or truncated: {detail}; copy the original file from the \
         camera again"
    )]
    Corrupt {
        /// Path as given.
        path: String,
        /// What the decoder or the structure check found.
        detail: String,
    },
    /// The header declares an image with no pixels.
    #[error(
        "photo {path} declares a zero-size image ({width}×{height} px); the file is damaged, \
         copy it again"
    )]
    ZeroSize {
        /// Path as given.
        path: String,
        /// Declared width in pixels.
        width: u32,
        /// Declared height in pixels.
        height: u32,
    },
    /// The header declares an image beyond the limits; refused before decoding.
    #[error(
        "photo {path} declares {width}×{height} px, beyond the limit of {limit}; refused \
         before decoding. Scale the photo down or crop it to the pattern"
    )]
    TooLarge {
        /// Path as given.
        path: String,
        /// Declared width in pixels.
        width: u64,
        /// Declared height in pixels.
        height: u64,
        /// The limit that was exceeded, in words.
        limit: String,
    },
    /// The file itself is larger than any photo within the limits could be.
    #[error(
        "photo {path} is a {bytes}-byte file, beyond the limit of {limit_bytes} bytes; \
         refused before reading. Scale the photo down or crop it to the pattern"
    )]
    FileTooLarge {
        /// Path as given.
        path: String,
        /// File size in bytes.
        bytes: u64,
        /// Largest accepted file size in bytes.
        limit_bytes: u64,
    },
    /// A real image, but in a format or variant this program does not decode.
    #[error("photo {path}: {what} is not supported; convert it to JPEG, PNG or TIFF first")]
    Unsupported {
        /// Path as given.
        path: String,
        /// The format or feature that was seen.
        what: String,
    },
}

/// Limits checked from the header before any pixel buffer is allocated.
#[derive(Debug, Clone, Copy)]
pub struct Limits {
    /// Largest accepted pixel count.
    pub max_pixels: u64,
    /// Largest accepted decoded size in bytes (also the decoder's allocation budget).
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

impl Limits {
    /// Largest file accepted for reading: an uncompressed photo within the limits plus room
    /// for metadata and previews. Anything bigger cannot hold an acceptable image.
    pub fn max_file_bytes(&self) -> u64 {
        self.max_decoded_bytes.saturating_add(64 << 20)
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
    /// Time the photo was taken, as written by the camera (DateTimeOriginal, else DateTime).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub datetime: Option<String>,
    /// Lens focal length in millimetres.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub focal_length_mm: Option<f64>,
    /// Focal length of the same view on 35 mm film (36 × 24 mm), mm.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub focal_length_35mm: Option<f64>,
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

/// A decoded, upright photo.
pub struct Photo {
    /// File facts for the record.
    pub info: PhotoInfo,
    samples: Samples,
    /// Samples per stored pixel (1–4); alpha, when kept, is skipped on access.
    spp: usize,
    /// Colour channels: 1 grey or 3 colour.
    channels: usize,
}

/// Reads and decodes a photo file: the hash and EXIF are computed while the pixels decode.
pub fn load(path: &Path, limits: &Limits) -> Result<Photo, PhotoError> {
    let label = path.display().to_string();
    let bytes = read_file(path, &label, limits)?;
    let (raw, info) = decode_parts(&bytes, &label, limits)?;
    // The file bytes are not needed once decoded: free them before the orientation copy.
    drop(bytes);
    Ok(assemble(raw, info))
}

/// Decodes a photo held in memory; `path_label` names it in messages and in the record.
pub fn decode(bytes: &[u8], path_label: &str, limits: &Limits) -> Result<Photo, PhotoError> {
    let (raw, info) = decode_parts(bytes, path_label, limits)?;
    Ok(assemble(raw, info))
}

/// SHA-256 (FIPS 180-4) of `bytes` as lower-case hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::{Digest, Sha256};
    use std::fmt::Write;
    let digest = Sha256::digest(bytes);
    let mut hex = String::with_capacity(64);
    for byte in digest {
        // Writing to a String cannot fail.
        let _ = write!(hex, "{byte:02x}");
    }
    hex
}

/// Reads a photo file's bytes, refusing folders, empty files and files too large to be
/// a photo within `limits`; `label` names it in messages.
pub fn read_file(path: &Path, label: &str, limits: &Limits) -> Result<Vec<u8>, PhotoError> {
    let io_error = |source: std::io::Error| {
        if source.kind() == std::io::ErrorKind::NotFound {
            PhotoError::NotFound { path: label.into() }
        } else {
            PhotoError::Unreadable {
                path: label.into(),
                source,
            }
        }
    };
    let meta = std::fs::metadata(path).map_err(io_error)?;
    if meta.is_dir() {
        return Err(PhotoError::Unreadable {
            path: label.into(),
            source: std::io::Error::other("it is a folder, not a file"),
        });
    }
    if meta.len() > limits.max_file_bytes() {
        return Err(PhotoError::FileTooLarge {
            path: label.into(),
            bytes: meta.len(),
            limit_bytes: limits.max_file_bytes(),
        });
    }
    std::fs::read(path).map_err(io_error)
}

/// Hash, EXIF and the JPEG structure check run on one side of a `rayon::join`, the pixel
/// decode on the other, so that `load` costs about the decode alone.
fn decode_parts(
    bytes: &[u8],
    label: &str,
    limits: &Limits,
) -> Result<(Raw, PhotoInfo), PhotoError> {
    if bytes.is_empty() {
        return Err(PhotoError::Empty { path: label.into() });
    }
    let ((sha256, (orientation, exif), structure), decoded) = rayon::join(
        || {
            (
                sha256_hex(bytes),
                exif::read(bytes),
                decode::check_jpeg_structure(bytes),
            )
        },
        || decode::decode_raw(bytes, label, limits),
    );
    let raw = match (decoded, structure) {
        // A structural fault explains a decoder failure better than the decoder does,
        // but a refusal on size or format is the more useful message.
        (Err(e @ (PhotoError::TooLarge { .. } | PhotoError::Unsupported { .. })), _) => {
            return Err(e);
        }
        (_, Err(detail)) => {
            return Err(PhotoError::Corrupt {
                path: label.into(),
                detail,
            });
        }
        (decoded, Ok(())) => decoded?,
    };
    let (width, height) = orient::upright_dims(raw.width, raw.height, orientation);
    let info = PhotoInfo {
        path: label.into(),
        sha256,
        width,
        height,
        orientation,
        exif,
    };
    Ok((raw, info))
}

fn assemble(raw: Raw, info: PhotoInfo) -> Photo {
    let raw = orient::to_upright(raw, info.orientation);
    Photo {
        info,
        samples: raw.samples,
        spp: raw.spp,
        channels: raw.channels,
    }
}

impl Photo {
    /// Wraps an image already in memory (e.g. a simulated one) as an upright photo with
    /// orientation 1 and no EXIF. There is no file, so `info.sha256` is the SHA-256 of the
    /// raw interleaved samples (16-bit ones little-endian).
    pub fn from_image(image: image::DynamicImage, path_label: &str) -> Result<Photo, PhotoError> {
        let raw = decode::raw_from_dynamic(image, path_label)?;
        if raw.width == 0 || raw.height == 0 {
            return Err(PhotoError::ZeroSize {
                path: path_label.into(),
                width: raw.width,
                height: raw.height,
            });
        }
        let sha256 = match &raw.samples {
            Samples::U8(s) => sha256_hex(s),
            Samples::U16(s) => {
                let bytes: Vec<u8> = s.iter().flat_map(|v| v.to_le_bytes()).collect();
                sha256_hex(&bytes)
            }
        };
        let info = PhotoInfo {
            path: path_label.into(),
            sha256,
            width: raw.width,
            height: raw.height,
            orientation: 1,
            exif: ExifInfo::default(),
        };
        Ok(assemble(raw, info))
    }

    /// Upright width in pixels.
    pub fn width(&self) -> usize {
        self.info.width as usize
    }

    /// Upright height in pixels.
    pub fn height(&self) -> usize {
        self.info.height as usize
    }

    /// File facts for the record.
    pub fn info(&self) -> &PhotoInfo {
        &self.info
    }

    /// Colour channels: 1 for a grey photo, 3 for colour (alpha is dropped).
    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Bits per sample as decoded: 8 or 16.
    pub fn bit_depth(&self) -> u8 {
        match self.samples {
            Samples::U8(_) => 8,
            Samples::U16(_) => 16,
        }
    }

    /// The lowest code that counts as clipped: 98 % of full scale, rounded up (250 for
    /// 8-bit, 64225 for 16-bit).
    pub fn clip_code(&self) -> u16 {
        match self.samples {
            Samples::U8(_) => plane::CLIP_CODE_8 as u16,
            Samples::U16(_) => plane::CLIP_CODE_16,
        }
    }

    /// A channel in linear light. For a grey photo every channel is the grey one.
    pub fn plane(&self, channel: Channel) -> Plane<'_> {
        Plane::new(self, channel)
    }

    /// Chooses the channel that shows the pattern best; see [`ChannelChoice`].
    pub fn choose_channel(&self) -> ChannelChoice {
        channel::choose(self)
    }

    /// A display copy in sRGB 8-bit, area-averaged in linear light so that its longer side
    /// is at most `max_side`, and the factor `s` = preview px per photo px (1 when no
    /// reduction is needed). A photo point (x, y) lands at ((x + 0.5)·s − 0.5,
    /// (y + 0.5)·s − 0.5) in the preview. `s` is exact along the longer side; the shorter
    /// side is rounded to whole preview pixels, which shifts it by at most half a preview
    /// pixel over its whole length.
    pub fn preview_rgb8(&self, max_side: u32) -> (image::RgbImage, f64) {
        preview::preview_rgb8(self, max_side)
    }

    /// Whether colour channel `channel_index` (0 R, 1 G, 2 B) is clipped at (x, y). For a
    /// grey photo every index means the grey channel; an index above 2 is never clipped.
    ///
    /// # Panics
    /// If (x, y) lies outside the photo, like slice indexing.
    pub fn clipped(&self, channel_index: usize, x: usize, y: usize) -> bool {
        let offset = if self.channels == 1 {
            0
        } else if channel_index < self.channels {
            channel_index
        } else {
            return false;
        };
        assert!(
            x < self.width() && y < self.height(),
            "pixel outside the photo"
        );
        let index = (y * self.width() + x) * self.spp + offset;
        match &self.samples {
            Samples::U8(s) => s[index] >= plane::CLIP_CODE_8,
            Samples::U16(s) => s[index] >= plane::CLIP_CODE_16,
        }
    }

    pub(crate) fn samples(&self) -> &Samples {
        &self.samples
    }

    pub(crate) fn spp(&self) -> usize {
        self.spp
    }
}
