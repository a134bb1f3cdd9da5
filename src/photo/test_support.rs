//! Test helpers: encoders, a minimal EXIF writer and PNG chunk tools, so that tests and
//! the fixture generator can make photos with any orientation in memory.
//!
//! The `image` crate writes no EXIF, so [`exif_app1`] builds the APP1 segment by hand:
//! "Exif\0\0", a big-endian TIFF header and IFD0 (with an Exif sub-IFD when needed), laid
//! out as in Exif 2.3 (JEITA CP-3451) §4.5 and TIFF 6.0 §2.

use image::{DynamicImage, ImageFormat, RgbImage};
use std::io::Cursor;

pub(crate) fn encode_jpeg(img: &RgbImage, quality: u8) -> Vec<u8> {
    let mut buf = Vec::new();
    image::codecs::jpeg::JpegEncoder::new_with_quality(&mut buf, quality)
        .encode_image(img)
        .expect("encoding a JPEG in memory");
    buf
}

pub(crate) fn encode(img: &DynamicImage, format: ImageFormat) -> Vec<u8> {
    let mut buf = Vec::new();
    img.write_to(&mut Cursor::new(&mut buf), format)
        .expect("encoding an image in memory");
    buf
}

/// EXIF fields to write; rationals are (numerator, denominator).
#[derive(Default)]
pub(crate) struct ExifSpec {
    pub orientation: Option<u16>,
    pub make: Option<String>,
    pub model: Option<String>,
    pub datetime: Option<String>,
    pub datetime_original: Option<String>,
    pub focal_length: Option<(u32, u32)>,
    pub exposure_time: Option<(u32, u32)>,
    pub f_number: Option<(u32, u32)>,
    pub iso: Option<u16>,
}

struct Entry {
    tag: u16,
    kind: u16,
    count: u32,
    data: Vec<u8>,
}

const ASCII: u16 = 2;
const SHORT: u16 = 3;
const LONG: u16 = 4;
const RATIONAL: u16 = 5;

fn ascii(tag: u16, text: &str) -> Entry {
    let mut data = text.as_bytes().to_vec();
    data.push(0);
    Entry {
        tag,
        kind: ASCII,
        count: data.len() as u32,
        data,
    }
}

fn short(tag: u16, v: u16) -> Entry {
    Entry {
        tag,
        kind: SHORT,
        count: 1,
        data: v.to_be_bytes().to_vec(),
    }
}

fn long(tag: u16, v: u32) -> Entry {
    Entry {
        tag,
        kind: LONG,
        count: 1,
        data: v.to_be_bytes().to_vec(),
    }
}

fn rational(tag: u16, (n, d): (u32, u32)) -> Entry {
    let mut data = n.to_be_bytes().to_vec();
    data.extend_from_slice(&d.to_be_bytes());
    Entry {
        tag,
        kind: RATIONAL,
        count: 1,
        data,
    }
}

/// One IFD at TIFF offset `at`: the entry table, the next-IFD link (0), then the values
/// that do not fit in four bytes.
fn ifd(entries: &[Entry], at: usize) -> Vec<u8> {
    let table = 2 + 12 * entries.len() + 4;
    let mut out = (entries.len() as u16).to_be_bytes().to_vec();
    let mut extra = Vec::new();
    for e in entries {
        out.extend_from_slice(&e.tag.to_be_bytes());
        out.extend_from_slice(&e.kind.to_be_bytes());
        out.extend_from_slice(&e.count.to_be_bytes());
        if e.data.len() <= 4 {
            let mut v = e.data.clone();
            v.resize(4, 0);
            out.extend_from_slice(&v);
        } else {
            out.extend_from_slice(&((at + table + extra.len()) as u32).to_be_bytes());
            extra.extend_from_slice(&e.data);
            if extra.len() % 2 == 1 {
                extra.push(0); // values start on word boundaries
            }
        }
    }
    out.extend_from_slice(&0u32.to_be_bytes());
    out.extend(extra);
    out
}

/// The TIFF structure (header + IFD0 + optional Exif IFD) holding `spec`.
pub(crate) fn exif_tiff(spec: &ExifSpec) -> Vec<u8> {
    let mut ifd0 = Vec::new();
    if let Some(v) = &spec.make {
        ifd0.push(ascii(0x010F, v));
    }
    if let Some(v) = &spec.model {
        ifd0.push(ascii(0x0110, v));
    }
    if let Some(v) = spec.orientation {
        ifd0.push(short(0x0112, v));
    }
    if let Some(v) = &spec.datetime {
        ifd0.push(ascii(0x0132, v));
    }
    let mut sub = Vec::new();
    if let Some(v) = spec.exposure_time {
        sub.push(rational(0x829A, v));
    }
    if let Some(v) = spec.f_number {
        sub.push(rational(0x829D, v));
    }
    if let Some(v) = spec.iso {
        sub.push(short(0x8827, v));
    }
    if let Some(v) = &spec.datetime_original {
        sub.push(ascii(0x9003, v));
    }
    if let Some(v) = spec.focal_length {
        sub.push(rational(0x920A, v));
    }
    let mut tiff = b"MM\0*\0\0\0\x08".to_vec();
    if sub.is_empty() {
        tiff.extend(ifd(&ifd0, 8));
    } else {
        // The pointer's value does not change IFD0's length, so measure with 0 first.
        ifd0.push(long(0x8769, 0));
        let len0 = ifd(&ifd0, 8).len();
        ifd0.pop();
        ifd0.push(long(0x8769, (8 + len0) as u32));
        tiff.extend(ifd(&ifd0, 8));
        tiff.extend(ifd(&sub, 8 + len0));
    }
    tiff
}

/// A JPEG APP1 segment "Exif\0\0" + TIFF.
pub(crate) fn exif_app1(spec: &ExifSpec) -> Vec<u8> {
    let tiff = exif_tiff(spec);
    let mut seg = vec![0xFF, 0xE1];
    seg.extend_from_slice(&((2 + 6 + tiff.len()) as u16).to_be_bytes());
    seg.extend_from_slice(b"Exif\0\0");
    seg.extend(tiff);
    seg
}

/// Inserts a marker segment right after a JPEG's SOI marker.
pub(crate) fn insert_after_soi(jpeg: &[u8], segment: &[u8]) -> Vec<u8> {
    let mut out = jpeg[..2].to_vec();
    out.extend_from_slice(segment);
    out.extend_from_slice(&jpeg[2..]);
    out
}

/// CRC-32 as used by PNG (ISO 3309 / ITU-T V.42, PNG specification Annex D).
pub(crate) fn crc32(data: &[u8]) -> u32 {
    let mut crc = 0xFFFF_FFFFu32;
    for &b in data {
        crc ^= u32::from(b);
        for _ in 0..8 {
            crc = if crc & 1 == 1 {
                (crc >> 1) ^ 0xEDB8_8320
            } else {
                crc >> 1
            };
        }
    }
    !crc
}

/// A PNG chunk: length, type, data, CRC over type and data.
pub(crate) fn png_chunk(kind: &[u8; 4], data: &[u8]) -> Vec<u8> {
    let mut out = (data.len() as u32).to_be_bytes().to_vec();
    let mut body = kind.to_vec();
    body.extend_from_slice(data);
    out.extend_from_slice(&body);
    out.extend_from_slice(&crc32(&body).to_be_bytes());
    out
}

/// Inserts a chunk right after IHDR (signature 8 bytes + IHDR chunk 25 bytes).
pub(crate) fn insert_after_ihdr(png: &[u8], chunk: &[u8]) -> Vec<u8> {
    let mut out = png[..33].to_vec();
    out.extend_from_slice(chunk);
    out.extend_from_slice(&png[33..]);
    out
}

/// A PNG that declares `width × height` RGB 8-bit and holds one tiny IDAT (a valid empty
/// zlib stream): enough for a decoder to read the header.
pub(crate) fn png_header_only(width: u32, height: u32) -> Vec<u8> {
    let mut ihdr = width.to_be_bytes().to_vec();
    ihdr.extend_from_slice(&height.to_be_bytes());
    ihdr.extend_from_slice(&[8, 2, 0, 0, 0]); // 8-bit, truecolour, deflate, no interlace
    let mut png = b"\x89PNG\r\n\x1a\n".to_vec();
    png.extend(png_chunk(b"IHDR", &ihdr));
    // zlib header 78 01, a final empty stored block, Adler-32 of nothing (1).
    png.extend(png_chunk(
        b"IDAT",
        &[0x78, 0x01, 0x01, 0x00, 0x00, 0xFF, 0xFF, 0, 0, 0, 1],
    ));
    png.extend(png_chunk(b"IEND", &[]));
    png
}

/// The upright test picture: dark ground, a bright spot near the top-left corner, a green
/// bar and a red block towards the bottom right, so that no flip or turn maps it onto
/// itself.
pub(crate) fn test_picture(width: u32, height: u32) -> RgbImage {
    let (sx, sy) = (width as f64 / 6.0, height as f64 / 5.0);
    RgbImage::from_fn(width, height, |x, y| {
        let (fx, fy) = (f64::from(x), f64::from(y));
        let r2 = (fx - sx).powi(2) + (fy - sy).powi(2);
        let spot = 210.0 * (-r2 / (2.0 * 3.0 * 3.0)).exp();
        let mut px = [30.0 + spot, 30.0 + spot, 30.0 + spot];
        if (0.40..0.46).contains(&(fx / f64::from(width))) && fy < 0.6 * f64::from(height) {
            px = [40.0, 180.0, 60.0];
        }
        if (0.62..0.88).contains(&(fx / f64::from(width)))
            && (0.68..0.85).contains(&(fy / f64::from(height)))
        {
            px = [200.0, 40.0, 40.0];
        }
        image::Rgb(px.map(|v| v.round().clamp(0.0, 255.0) as u8))
    })
}

#[test]
fn crc32_check_value() {
    // The standard check value of CRC-32/ISO-HDLC for "123456789" (CRC catalogue,
    // from memory).
    assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
}
