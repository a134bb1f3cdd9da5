//! Whole-photo checks: the truth against the rendered pixels, scenes, errors and files.

mod electron;
mod files;
mod fringes;
mod image_truth;
mod rings;
mod scenes;

use super::*;

pub(super) fn decode(c: u8) -> f64 {
    // IEC 61966-2-1 decoding, as in REFERENCES.md.
    let c = c as f64 / 255.0;
    if c <= 0.04045 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

pub(super) fn luminance(img: &image::RgbImage) -> Vec<f64> {
    img.pixels()
        .map(|p| p.0.iter().map(|&c| decode(c)).sum::<f64>())
        .collect()
}

pub(super) fn apply(h: &[[f64; 3]; 3], p: [f64; 2]) -> [f64; 2] {
    let v = [0, 1, 2].map(|r| h[r][0] * p[0] + h[r][1] * p[1] + h[r][2]);
    [v[0] / v[2], v[1] / v[2]]
}

pub(super) fn small_camera(yaw_deg: f64, roll_deg: f64) -> CameraSpec {
    CameraSpec {
        width_px: 800,
        height_px: 600,
        focal_px: 800.0,
        yaw_rad: yaw_deg.to_radians(),
        pitch_rad: 0.0,
        roll_rad: roll_deg.to_radians(),
        framing: Framing::Auto {
            max_order: 1,
            margin: 0.08,
        },
        supersample: 2,
    }
}

pub(super) fn green_600() -> GratingSetup {
    GratingSetup {
        wavelength_m: 532e-9,
        pitch_m: 1e-3 / 600.0,
        distance_m: 0.2,
        ..GratingSetup::default()
    }
}

pub(super) fn short_ruler_scene() -> Scene {
    Scene {
        ruler: Some(Ruler {
            length_mm: 120.0,
            ..Ruler::default()
        }),
        ..Scene::default()
    }
}

pub(super) fn bilinear(img: &[f64], w: usize, p: [f64; 2]) -> f64 {
    let (x0, y0) = (p[0].floor(), p[1].floor());
    let (fx, fy) = (p[0] - x0, p[1] - y0);
    let (x0, y0) = (x0 as usize, y0 as usize);
    let at = |x: usize, y: usize| img[y * w + x];
    at(x0, y0) * (1.0 - fx) * (1.0 - fy)
        + at(x0 + 1, y0) * fx * (1.0 - fy)
        + at(x0, y0 + 1) * (1.0 - fx) * fy
        + at(x0 + 1, y0 + 1) * fx * fy
}

/// Darkness-weighted centroid of a dark line crossing the segment a–b, sampled bilinearly,
/// over a straight background through the means of the segment's outer tenths.
pub(super) fn dark_centroid(lum: &[f64], w: usize, a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    let steps = 400;
    let samples: Vec<([f64; 2], f64)> = (0..=steps)
        .map(|i| {
            let s = i as f64 / steps as f64;
            let p = [a[0] + s * (b[0] - a[0]), a[1] + s * (b[1] - a[1])];
            (p, bilinear(lum, w, p))
        })
        .collect();
    let tenth = steps / 10;
    let mean_of = |s: &[([f64; 2], f64)]| s.iter().map(|q| q.1).sum::<f64>() / s.len() as f64;
    let (left, right) = (
        mean_of(&samples[..tenth]),
        mean_of(&samples[steps - tenth..]),
    );
    let (mut px, mut py, mut m) = (0.0, 0.0, 0.0);
    for (i, (p, v)) in samples.iter().enumerate() {
        let f = (i as f64 - 0.5 * tenth as f64) / (steps - tenth) as f64;
        let d = (left + (right - left) * f - v).max(0.0);
        px += d * p[0];
        py += d * p[1];
        m += d;
    }
    [px / m, py / m]
}

/// About 11 px per 1 mm tick.
pub(super) fn ruler_close_up(yaw_deg: f64, roll_deg: f64, pitch_deg: f64) -> CameraSpec {
    CameraSpec {
        width_px: 640,
        height_px: 480,
        focal_px: 640.0,
        pitch_rad: pitch_deg.to_radians(),
        framing: Framing::Fixed {
            aim_mm: [0.0, 27.0],
            distance_mm: 56.0,
        },
        ..small_camera(yaw_deg, roll_deg)
    }
}
