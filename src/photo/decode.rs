//! Format sniffing, size limits read from the header, the pixel decode through the `image`
//! crate, and a structure check that catches truncated JPEG files (the JPEG decoder runs in
//! its lenient mode and may fill a missing tail with grey instead of failing).

use super::{Limits, PhotoError};
use image::{ColorType, DynamicImage, ImageDecoder, ImageError, ImageFormat, ImageReader};
use std::io::Cursor;

/// Decoded samples, interleaved, in their stored precision.
pub(crate) enum Samples {
    U8(Vec<u8>),
    U16(Vec<u16>),
}

/// Pixels as stored in the file, before orientation.
pub(crate) struct Raw {
    pub samples: Samples,
    pub width: u32,
    pub height: u32,
    /// Samples per pixel (1–4).
    pub spp: usize,
    /// Colour channels (1 or 3); alpha, if any, is the last sample and is ignored.
    pub channels: usize,
}

/// Camera RAW extensions: several are TIFF inside and would decode as a small preview.
const RAW_EXTENSIONS: [&str; 12] = [
    "dng", "nef", "nrw", "cr2", "cr3", "arw", "orf", "rw2", "raf", "pef", "srw", "raw",
];

/// ISO BMFF brands of HEIF/HEIC and AVIF (ISO/IEC 23008-12, AV1 image format).
const HEIF_BRANDS: [&[u8; 4]; 10] = [
    b"heic", b"heix", b"hevc", b"hevx", b"heim", b"heis", b"mif1", b"msf1", b"avif", b"avis",
];

pub(crate) fn decode_raw(bytes: &[u8], label: &str, limits: &Limits) -> Result<Raw, PhotoError> {
    let format = sniff(bytes, label)?;
    if format == ImageFormat::Png {
        // Our own reading of IHDR, so that even a file whose later chunks are damaged is
        // refused on its declared size.
        if let Some((w, h)) = png_declared_dims(bytes) {
            if w == 0 || h == 0 {
                return Err(PhotoError::ZeroSize {
                    path: label.into(),
                    width: w,
                    height: h,
                });
            }
            check_limits(u64::from(w), u64::from(h), 1, label, limits)?;
        }
    }
    let mut reader = ImageReader::with_format(Cursor::new(bytes), format);
    reader.limits(image_limits(limits));
    let decoder = reader
        .into_decoder()
        .map_err(|e| map_error(e, label, None))?;
    let (width, height) = decoder.dimensions();
    if width == 0 || height == 0 {
        return Err(PhotoError::ZeroSize {
            path: label.into(),
            width,
            height,
        });
    }
    let color = decoder.color_type();
    check_limits(
        u64::from(width),
        u64::from(height),
        u64::from(color.bytes_per_pixel()),
        label,
        limits,
    )?;
    if matches!(color, ColorType::Rgb32F | ColorType::Rgba32F) {
        return Err(PhotoError::Unsupported {
            path: label.into(),
            what: "32-bit floating-point samples".into(),
        });
    }
    let image = DynamicImage::from_decoder(decoder)
        .map_err(|e| map_error(e, label, Some((width, height))))?;
    raw_from_dynamic(image, label)
}

fn image_limits(limits: &Limits) -> image::Limits {
    let mut l = image::Limits::no_limits();
    l.max_alloc = Some(limits.max_decoded_bytes);
    l
}

fn check_limits(
    width: u64,
    height: u64,
    bytes_per_pixel: u64,
    label: &str,
    limits: &Limits,
) -> Result<(), PhotoError> {
    let pixels = width.saturating_mul(height);
    let too_large = |limit: String| PhotoError::TooLarge {
        path: label.into(),
        width,
        height,
        limit,
    };
    if pixels > limits.max_pixels {
        return Err(too_large(format!(
            "{:.1} megapixels ({pixels} px declared)",
            limits.max_pixels as f64 / 1e6
        )));
    }
    let decoded = pixels.saturating_mul(bytes_per_pixel);
    if decoded > limits.max_decoded_bytes {
        return Err(too_large(format!(
            "{} MiB decoded ({} MiB needed)",
            limits.max_decoded_bytes >> 20,
            decoded >> 20
        )));
    }
    Ok(())
}

/// Width and height from a PNG's IHDR chunk (PNG specification, ISO/IEC 15948 §11.2.2),
/// if the file starts with a well-formed one.
fn png_declared_dims(bytes: &[u8]) -> Option<(u32, u32)> {
    let ihdr = bytes.get(8..24)?;
    if &ihdr[4..8] != b"IHDR" {
        return None;
    }
    let w = u32::from_be_bytes(ihdr[8..12].try_into().ok()?);
    let h = u32::from_be_bytes(ihdr[12..16].try_into().ok()?);
    Some((w, h))
}

/// Recognises JPEG, PNG and TIFF by their signatures, and names what else it sees.
fn sniff(bytes: &[u8], label: &str) -> Result<ImageFormat, PhotoError> {
    let unsupported = |what: String| PhotoError::Unsupported {
        path: label.into(),
        what,
    };
    let extension = std::path::Path::new(label)
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    if let Some(ext) = extension.as_deref().filter(|e| RAW_EXTENSIONS.contains(e)) {
        return Err(unsupported(format!(
            "a camera RAW file (.{ext}); export it from the camera software"
        )));
    }
    if bytes.starts_with(&[0xFF, 0xD8, 0xFF]) {
        return Ok(ImageFormat::Jpeg);
    }
    if bytes.starts_with(b"\x89PNG\r\n\x1a\n") {
        return Ok(ImageFormat::Png);
    }
    if bytes.starts_with(b"II*\0") || bytes.starts_with(b"MM\0*") {
        return Ok(ImageFormat::Tiff);
    }
    let heif_brand = bytes.get(8..12).filter(|brand| {
        bytes.get(4..8) == Some(b"ftyp") && HEIF_BRANDS.iter().any(|b| &b[..] == *brand)
    });
    if let Some(brand) = heif_brand {
        return Err(unsupported(format!(
            "a HEIF/HEIC or AVIF photo (brand '{}'), as many phones save",
            String::from_utf8_lossy(brand)
        )));
    }
    let seen = if looks_like_text(bytes) {
        let head: String = String::from_utf8_lossy(&bytes[..bytes.len().min(24)])
            .chars()
            .map(|c| if c.is_control() { ' ' } else { c })
            .collect();
        format!("the file holds text (it starts \"{}\")", head.trim_end())
    } else {
        match image::guess_format(bytes) {
            Ok(format) => {
                return Err(unsupported(format!("a {format:?} image")));
            }
            Err(_) => format!(
                "its first bytes ({}) match no image format",
                hex_head(bytes)
            ),
        }
    };
    let seen = match extension.as_deref() {
        Some(ext @ ("jpg" | "jpeg" | "png" | "tif" | "tiff")) => {
            format!("the name ends in .{ext}, but {seen}")
        }
        _ => seen,
    };
    Err(PhotoError::NotAnImage {
        path: label.into(),
        seen,
    })
}

fn looks_like_text(bytes: &[u8]) -> bool {
    let head = &bytes[..bytes.len().min(512)];
    let printable = head
        .iter()
        .filter(|&&b| {
            b == b'\n' || b == b'\r' || b == b'\t' || (0x20..0x7F).contains(&b) || b >= 0x80
        })
        .count();
    std::str::from_utf8(head).is_ok() && printable * 100 >= head.len() * 95
}

fn hex_head(bytes: &[u8]) -> String {
    bytes
        .iter()
        .take(8)
        .map(|b| format!("{b:02X}"))
        .collect::<Vec<_>>()
        .join(" ")
}

fn map_error(e: ImageError, label: &str, dims: Option<(u32, u32)>) -> PhotoError {
    let corrupt = |detail: String| PhotoError::Corrupt {
        path: label.into(),
        detail,
    };
    match e {
        ImageError::Unsupported(u) => PhotoError::Unsupported {
            path: label.into(),
            what: u.to_string(),
        },
        ImageError::Limits(l) => match dims {
            Some((w, h)) => PhotoError::TooLarge {
                path: label.into(),
                width: u64::from(w),
                height: u64::from(h),
                limit: format!("the decoder's memory budget ({l})"),
            },
            None => corrupt(format!("the header asks for more than allowed ({l})")),
        },
        ImageError::IoError(io) => corrupt(format!("the data ends early ({io})")),
        other => corrupt(other.to_string()),
    }
}

/// Takes the decoded buffer as it is, without converting samples.
pub(crate) fn raw_from_dynamic(image: DynamicImage, label: &str) -> Result<Raw, PhotoError> {
    let (width, height) = (image.width(), image.height());
    let (samples, spp, channels) = match image {
        DynamicImage::ImageLuma8(b) => (Samples::U8(b.into_raw()), 1, 1),
        DynamicImage::ImageLumaA8(b) => (Samples::U8(b.into_raw()), 2, 1),
        DynamicImage::ImageRgb8(b) => (Samples::U8(b.into_raw()), 3, 3),
        DynamicImage::ImageRgba8(b) => (Samples::U8(b.into_raw()), 4, 3),
        DynamicImage::ImageLuma16(b) => (Samples::U16(b.into_raw()), 1, 1),
        DynamicImage::ImageLumaA16(b) => (Samples::U16(b.into_raw()), 2, 1),
        DynamicImage::ImageRgb16(b) => (Samples::U16(b.into_raw()), 3, 3),
        DynamicImage::ImageRgba16(b) => (Samples::U16(b.into_raw()), 4, 3),
        other => {
            return Err(PhotoError::Unsupported {
                path: label.into(),
                what: format!("{:?} samples", other.color()),
            });
        }
    };
    Ok(Raw {
        samples,
        width,
        height,
        spp,
        channels,
    })
}

/// Walks a JPEG's marker segments (ITU-T T.81 Annex B) from SOI and through each scan's
/// entropy-coded data, and requires the end-of-image marker. Not a JPEG: `Ok`.
///
/// Embedded thumbnails sit inside APPn segments and are skipped by length, so their own
/// end markers cannot hide a cut in the main image.
pub(crate) fn check_jpeg_structure(bytes: &[u8]) -> Result<(), String> {
    if !bytes.starts_with(&[0xFF, 0xD8]) {
        return Ok(());
    }
    let truncated = |what: &str| {
        Err(format!(
            "the file ends {what} without the JPEG end-of-image marker ({} bytes read)",
            bytes.len()
        ))
    };
    let mut i = 2;
    let mut scans = 0usize;
    loop {
        // Find the next marker: 0xFF (any fill bytes) then a code. Stray bytes between
        // segments are skipped, as lenient decoders do.
        while i < bytes.len() && bytes[i] != 0xFF {
            i += 1;
        }
        while i < bytes.len() && bytes[i] == 0xFF {
            i += 1;
        }
        let Some(&code) = bytes.get(i) else {
            return if scans == 0 {
                truncated("in the header")
            } else {
                truncated("after the image data")
            };
        };
        i += 1;
        match code {
            0xD9 => return Ok(()),
            0x01 | 0xD0..=0xD7 | 0xD8 => continue,
            _ => {}
        }
        let Some(len) = bytes
            .get(i..i + 2)
            .map(|b| usize::from(u16::from_be_bytes([b[0], b[1]])))
        else {
            return truncated("inside a marker segment");
        };
        if len < 2 {
            return Err(format!("a JPEG marker segment has an invalid length {len}"));
        }
        i += len;
        if i > bytes.len() {
            return truncated("inside a marker segment");
        }
        if code == 0xDA {
            scans += 1;
            // Entropy-coded data: 0xFF is followed by 0x00 (a stuffed byte), a restart
            // marker, or the next marker.
            loop {
                match bytes[i..].iter().position(|&b| b == 0xFF) {
                    None => return truncated("inside the image data"),
                    Some(p) => i += p,
                }
                match bytes.get(i + 1) {
                    None => return truncated("inside the image data"),
                    Some(0x00 | 0xD0..=0xD7) => i += 2,
                    Some(0xFF) => i += 1,
                    Some(_) => break,
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn segment(code: u8, payload: &[u8]) -> Vec<u8> {
        let mut s = vec![0xFF, code];
        s.extend_from_slice(&((payload.len() + 2) as u16).to_be_bytes());
        s.extend_from_slice(payload);
        s
    }

    #[test]
    fn structure_check_follows_markers_and_scans() {
        let mut jpeg = vec![0xFF, 0xD8];
        // An APP1 holding a whole thumbnail, end marker included: must not count as EOI.
        jpeg.extend(segment(0xE1, &[0xFF, 0xD8, 0xFF, 0xD9, 1, 2]));
        jpeg.extend(segment(0xDA, &[1, 2, 3]));
        jpeg.extend([0x12, 0xFF, 0x00, 0x34, 0xFF, 0xD0, 0x56]);
        let cut = jpeg.clone();
        jpeg.extend([0xFF, 0xD9]);
        assert_eq!(check_jpeg_structure(&jpeg), Ok(()));
        // Trailing bytes after EOI are allowed.
        let mut trailing = jpeg.clone();
        trailing.extend([0, 0, 7]);
        assert_eq!(check_jpeg_structure(&trailing), Ok(()));
        let err = check_jpeg_structure(&cut).unwrap_err();
        assert!(err.contains("inside the image data"), "{err}");
        let err = check_jpeg_structure(&jpeg[..8]).unwrap_err();
        assert!(err.contains("marker segment"), "{err}");
        assert_eq!(check_jpeg_structure(b"not a jpeg"), Ok(()));
    }

    #[test]
    fn sniffing_names_what_it_sees() {
        let heic = b"\0\0\0\x18ftypheic\0\0\0\0mif1heic";
        assert!(matches!(
            sniff(heic, "IMG_0001.HEIC"),
            Err(PhotoError::Unsupported { what, .. }) if what.contains("HEIF/HEIC")
        ));
        assert!(matches!(
            sniff(b"II*\0rest", "shot.NEF"),
            Err(PhotoError::Unsupported { what, .. }) if what.contains("RAW")
        ));
        assert!(matches!(
            sniff(b"GIF89a\x01\0\x01\0", "a.gif"),
            Err(PhotoError::Unsupported { what, .. }) if what.contains("Gif")
        ));
        assert!(matches!(
            sniff(&[0, 1, 2, 3, 250, 251], "a.bin"),
            Err(PhotoError::NotAnImage { seen, .. }) if seen.contains("00 01 02 03")
        ));
        assert_eq!(sniff(b"MM\0*....", "x").ok(), Some(ImageFormat::Tiff));
    }

    #[test]
    fn limits_use_pixels_and_decoded_bytes() {
        let limits = Limits {
            max_pixels: 1000,
            max_decoded_bytes: 2000,
        };
        assert!(check_limits(10, 100, 1, "x", &limits).is_ok());
        assert!(matches!(
            check_limits(11, 100, 1, "x", &limits),
            Err(PhotoError::TooLarge {
                width: 11,
                height: 100,
                ..
            })
        ));
        assert!(matches!(
            check_limits(10, 100, 3, "x", &limits),
            Err(PhotoError::TooLarge { limit, .. }) if limit.contains("MiB")
        ));
        // Products that overflow u64 saturate and are refused, not wrapped.
        assert!(check_limits(u64::MAX, 3, 1, "x", &Limits::default()).is_err());
    }
}
