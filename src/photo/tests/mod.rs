//! Tests of `load` and `decode` end to end: formats and bit depths, orientation from EXIF
//! (in memory and with the committed fixtures), hashes, and every kind of bad input.

use super::test_support::*;
use super::*;
use image::{DynamicImage, ImageBuffer, ImageFormat, Luma, Rgb, Rgba};
use std::path::PathBuf;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures/orientation")
        .join(name)
}

/// The orientation that undoes `o` (6 and 8 are each other's inverse, the rest their own).
fn inverse(o: u8) -> u8 {
    match o {
        6 => 8,
        8 => 6,
        other => other,
    }
}

/// `upright` stored so that a viewer applying EXIF orientation `o` shows it upright.
/// Made with the image crate's own transforms, independently of ours.
fn stored_for(upright: &DynamicImage, o: u8) -> DynamicImage {
    let mut stored = upright.clone();
    stored.apply_orientation(image::metadata::Orientation::from_exif(inverse(o)).unwrap());
    stored
}

fn codes(photo: &Photo) -> image::RgbImage {
    let (img, scale) = photo.preview_rgb8(u32::MAX);
    assert_eq!(scale, 1.0);
    img
}

fn mean_abs_diff(a: &image::RgbImage, b: &image::RgbImage) -> f64 {
    assert_eq!(a.dimensions(), b.dimensions());
    let total: u64 = a
        .as_raw()
        .iter()
        .zip(b.as_raw())
        .map(|(&p, &q)| u64::from(p.abs_diff(q)))
        .sum();
    total as f64 / a.as_raw().len() as f64
}

fn brightest(photo: &Photo) -> (usize, usize) {
    let p = photo.plane(Channel::Luma);
    let mut best = (0, 0, f32::MIN);
    for y in 0..p.height() {
        for x in 0..p.width() {
            if p.get(x, y) > best.2 {
                best = (x, y, p.get(x, y));
            }
        }
    }
    (best.0, best.1)
}

fn write_temp(name: &str, bytes: &[u8]) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join(name);
    std::fs::write(&path, bytes).unwrap();
    (dir, path)
}

mod bad_input;
mod formats;
mod orientation;
mod timing;
