//! EXIF metadata (JEITA CP-3451, Exif 2.3) read with kamadak-exif from JPEG APP1, TIFF
//! IFD0 or the PNG `eXIf` chunk: orientation, camera, time and exposure. Metadata that is
//! missing, malformed or out of range is ignored: a photo never fails on its EXIF.

use super::ExifInfo;
use exif::{In, Tag, Value};
use std::io::Cursor;

/// The orientation (1–8, 1 when absent or invalid) and the camera metadata.
pub(crate) fn read(bytes: &[u8]) -> (u16, ExifInfo) {
    let Ok(data) = exif::Reader::new().read_from_container(&mut Cursor::new(bytes)) else {
        return (1, ExifInfo::default());
    };
    let field = |tag: Tag| data.get_field(tag, In::PRIMARY).map(|f| &f.value);
    let orientation = field(Tag::Orientation)
        .and_then(|v| v.get_uint(0))
        .filter(|o| (1..=8).contains(o))
        .map_or(1, |o| o as u16);
    let info = ExifInfo {
        make: field(Tag::Make).and_then(ascii),
        model: field(Tag::Model).and_then(ascii),
        datetime: field(Tag::DateTimeOriginal)
            .and_then(ascii)
            .or_else(|| field(Tag::DateTime).and_then(ascii)),
        focal_length_mm: field(Tag::FocalLength).and_then(positive_rational),
        focal_length_35mm: field(Tag::FocalLengthIn35mmFilm)
            .and_then(|v| v.get_uint(0))
            .filter(|&f| f > 0)
            .map(f64::from),
        exposure_s: field(Tag::ExposureTime).and_then(positive_rational),
        f_number: field(Tag::FNumber).and_then(positive_rational),
        iso: field(Tag::PhotographicSensitivity)
            .and_then(|v| v.get_uint(0))
            .filter(|&iso| iso > 0),
    };
    (orientation, info)
}

fn ascii(value: &Value) -> Option<String> {
    let Value::Ascii(parts) = value else {
        return None;
    };
    let text = String::from_utf8_lossy(parts.first()?);
    let text = text.trim_matches(|c: char| c == '\0' || c.is_whitespace());
    (!text.is_empty()).then(|| text.to_string())
}

/// A rational that is finite and positive (a zero denominator or a zero value means
/// "unknown" in practice).
fn positive_rational(value: &Value) -> Option<f64> {
    let v = match value {
        Value::Rational(r) => r.first()?.to_f64(),
        Value::SRational(r) => r.first()?.to_f64(),
        _ => return None,
    };
    (v.is_finite() && v > 0.0).then_some(v)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::photo::test_support::{ExifSpec, exif_app1, insert_after_soi};

    fn tiny_jpeg() -> Vec<u8> {
        let img = image::RgbImage::from_pixel(8, 8, image::Rgb([90, 90, 90]));
        crate::photo::test_support::encode_jpeg(&img, 90)
    }

    #[test]
    fn reads_camera_fields() {
        let spec = ExifSpec {
            orientation: Some(6),
            make: Some("Acme Optics".into()),
            model: Some("Bench Cam 2".into()),
            datetime_original: Some("2024:05:17 10:21:33".into()),
            focal_length: Some((50, 10)),
            exposure_time: Some((1, 250)),
            f_number: Some((28, 10)),
            iso: Some(400),
            ..ExifSpec::default()
        };
        let jpeg = insert_after_soi(&tiny_jpeg(), &exif_app1(&spec));
        let (orientation, info) = read(&jpeg);
        assert_eq!(orientation, 6);
        assert_eq!(info.make.as_deref(), Some("Acme Optics"));
        assert_eq!(info.model.as_deref(), Some("Bench Cam 2"));
        assert_eq!(info.datetime.as_deref(), Some("2024:05:17 10:21:33"));
        assert_eq!(info.focal_length_mm, Some(5.0));
        assert_eq!(info.exposure_s, Some(0.004));
        assert_eq!(info.f_number, Some(2.8));
        assert_eq!(info.iso, Some(400));
    }

    #[test]
    fn datetime_falls_back_to_ifd0_and_bad_values_are_dropped() {
        let spec = ExifSpec {
            orientation: Some(9),
            datetime: Some("2023:01:02 03:04:05".into()),
            focal_length: Some((35, 0)),
            ..ExifSpec::default()
        };
        let jpeg = insert_after_soi(&tiny_jpeg(), &exif_app1(&spec));
        let (orientation, info) = read(&jpeg);
        assert_eq!(
            orientation, 1,
            "orientation 9 is not defined and must be ignored"
        );
        assert_eq!(info.datetime.as_deref(), Some("2023:01:02 03:04:05"));
        assert_eq!(info.focal_length_mm, None);
    }

    #[test]
    fn no_or_malformed_exif_gives_orientation_1() {
        assert_eq!(read(&tiny_jpeg()), (1, ExifInfo::default()));
        // An APP1 'Exif' segment whose TIFF header points far outside the segment.
        let mut app1 = vec![0xFF, 0xE1, 0, 18];
        app1.extend_from_slice(b"Exif\0\0MM\0*\x7F\xFF\xFF\xF0\0\0\0\0");
        let jpeg = insert_after_soi(&tiny_jpeg(), &app1);
        assert_eq!(read(&jpeg).0, 1);
        assert_eq!(read(b"").0, 1);
    }
}
