//! Where each ring runs in the photo: its ridge in every angular sector of the radial
//! table, fitted by an ellipse in pixels (Halir & Flusser 1998, [`fit_ellipse_direct`]).
//!
//! A sector's cells across a ring are compared with the ring's own fitted light T(r) (the
//! profile's Gaussian spread over its circumference): v = o·G(r) + g·T(r) + g·δ·∂T/∂r₀, the
//! first-order shift δ of the ring in that sector solved by linear least squares with the
//! glow's level o and the ring's gain g (the Lucas–Kanade step of [`super::centre`], one ring
//! at a time), twice, re-centred. A sector whose gain is under a third of the ring's mean
//! height or whose shift exceeds 1.5 σ does not see the ring well enough and gives no point.
//! The points are mapped to pixels and fitted by an ellipse there: a circle on the screen,
//! seen by a tilted camera, is one. The same points in screen millimetres are fitted too:
//! there the ring should be round, and its flattening, against what the points' scatter
//! allows, tests whether the scale has undone the camera's tilt.

use super::glow::Glow;
use super::peaks::RingPeak;
use super::radial::RadialCells;
use crate::fit::ellipse::{Ellipse, fit_ellipse_direct};
use crate::scale::ScreenMap;
use nalgebra::{Matrix3, Vector2, Vector3};

/// A ring's ridge fitted by ellipses.
#[derive(Debug, Clone, PartialEq)]
pub struct RingEllipse {
    /// The ellipse in the photo, px.
    pub photo: Ellipse,
    /// RMS distance of the ridge points from it, px.
    pub rms_px: f64,
    /// Ridge points used (one per sector that sees the ring).
    pub points: usize,
    /// Flattening 1 − b/a of the ridge on the screen (0: round).
    pub screen_flattening: f64,
    /// What the points' scatter alone would give it, as a standard deviation: 2σ√(2/N)/r
    /// (the second-harmonic amplitude of N radial deviations of σ).
    pub u_screen_flattening: f64,
    /// Direction of the screen ellipse's major axis, rad.
    pub screen_angle_rad: f64,
}

/// Least gain of a sector's ridge, as a share of the ring's mean height.
const MIN_GAIN: f64 = 1.0 / 3.0;
/// Fewest ridge points for an ellipse.
const MIN_POINTS: usize = 8;

/// The ellipse of `ring`'s ridge (module docs), or None where fewer than eight sectors
/// see it or they do not reach round at least three quarters of the circle.
pub fn ring_ellipse(
    cells: &RadialCells,
    map: &ScreenMap,
    glow: &Glow,
    ring: &RingPeak,
) -> Option<RingEllipse> {
    let s = ring.fwhm_mm / 2.354_820_045_030_949;
    let (r0, a) = (ring.radius_mm, ring.contrast);
    let light = |r: f64, at: f64| a * glow.at(r0) * at / r * (-0.5 * ((r - at) / s).powi(2)).exp();
    let b0 = ((r0 - 3.0 * s) / cells.bin_mm).floor().max(0.0) as usize;
    let b1 = (((r0 + 3.0 * s) / cells.bin_mm).ceil() as usize).min(cells.bins - 1);
    let mut mm_points = Vec::new();
    let mut quadrants = [false; 4];
    for sector in 0..cells.sectors {
        let cells_here: Vec<(f64, f64)> = (b0..=b1)
            .filter_map(|b| {
                let v = cells.cell(sector, b)?;
                (cells.cell_clipped(sector, b) <= 0.02)
                    .then_some(((b as f64 + 0.5) * cells.bin_mm, v))
            })
            .collect();
        if cells_here.len() < (b1 - b0) * 2 / 3 {
            continue;
        }
        let mut at = r0;
        let mut seen = None;
        for _ in 0..2 {
            let (mut ata, mut atb) = (Matrix3::zeros(), Vector3::zeros());
            for &(r, v) in &cells_here {
                let t = light(r, at);
                let dt = t * ((r - at) / (s * s) + 1.0 / at);
                let row = Vector3::new(glow.at(r), t, dt);
                ata += row * row.transpose();
                atb += row * v;
            }
            let Some(p) = ata.try_inverse().map(|inv| inv * atb) else {
                seen = None;
                break;
            };
            let (gain, shift) = (p.y, p.z / p.y);
            if !(gain >= MIN_GAIN && shift.abs() <= 1.5 * s) {
                seen = None;
                break;
            }
            at += shift;
            seen = Some(at);
        }
        let Some(r) = seen else { continue };
        let phi = cells.sector_angle(sector);
        let p = cells.centre_mm + Vector2::new(phi.cos(), phi.sin()) * r;
        mm_points.push(p);
        let q = ((phi + std::f64::consts::PI) / std::f64::consts::FRAC_PI_2) as usize;
        quadrants[q.min(3)] = true;
    }
    if mm_points.len() < MIN_POINTS || quadrants.iter().filter(|q| **q).count() < 3 {
        return None;
    }
    let px: Vec<[f64; 2]> = mm_points
        .iter()
        .map(|p| {
            let q = map.to_px(*p);
            [q.x, q.y]
        })
        .collect();
    let mm: Vec<[f64; 2]> = mm_points.iter().map(|p| [p.x, p.y]).collect();
    let photo = fit_ellipse_direct(&px).ok()?;
    let screen = fit_ellipse_direct(&mm).ok()?;
    let n = mm.len() as f64;
    let sigma_mm = (mm
        .iter()
        .map(|p| radial_residual(&screen, *p).powi(2))
        .sum::<f64>()
        / (n - 5.0).max(1.0))
    .sqrt();
    let rms_px = (px
        .iter()
        .map(|p| radial_residual(&photo, *p).powi(2))
        .sum::<f64>()
        / n)
        .sqrt();
    let r_mean = (screen.semi_major * screen.semi_minor).sqrt();
    Some(RingEllipse {
        photo,
        rms_px,
        points: mm.len(),
        screen_flattening: screen.ellipticity(),
        u_screen_flattening: 2.0 * sigma_mm * (2.0 / n).sqrt() / r_mean,
        screen_angle_rad: screen.angle_rad,
    })
}

/// Distance of `p` from the ellipse along the ray from its centre (positive outside).
fn radial_residual(e: &Ellipse, p: [f64; 2]) -> f64 {
    let (dx, dy) = (p[0] - e.centre[0], p[1] - e.centre[1]);
    let (sn, cs) = e.angle_rad.sin_cos();
    let (u, v) = (dx * cs + dy * sn, -dx * sn + dy * cs);
    let d = u.hypot(v);
    if d == 0.0 {
        return -e.semi_minor;
    }
    let (c, s) = (u / d, v / d);
    let rho = e.semi_major * e.semi_minor
        / ((e.semi_minor * c).powi(2) + (e.semi_major * s).powi(2)).sqrt();
    d - rho
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::find::rings::radial::{RadialCells, RadialOptions};
    use crate::raster::OwnedRaster;
    use crate::scale::ScaleMethod;
    use nalgebra::Matrix3 as M3;

    #[test]
    fn a_screen_circle_seen_stretched_is_the_stretched_ellipse() {
        // A ring of 12 mm on a glow, photographed with px → mm scaling x by 0.10 and y by
        // 0.12: on the screen it is round, in the photo 120 × 100 px.
        let h = M3::new(0.10, 0.0, 0.0, 0.0, 0.12, 0.0, 0.0, 0.0, 1.0);
        let map = ScreenMap::from_homography(ScaleMethod::Points, h, Vector2::zeros()).unwrap();
        let (cx, cy) = (20.0, 18.0); // mm
        let ring = |r: f64| 1.0 + 0.05 * (-0.5 * ((r - 12.0) / 0.3).powi(2)).exp();
        let img = OwnedRaster::from_fn(400, 330, |x, y| {
            let (u, v) = (0.10 * x - cx, 0.12 * y - cy);
            ring(u.hypot(v)) as f32
        });
        let opts = RadialOptions {
            sectors: 36,
            bin_mm: 0.05,
            r_max_mm: 16.0,
            stride: 1,
        };
        let cells = RadialCells::tabulate(&img, &map, Vector2::new(cx, cy), &opts);
        let profile = cells.profile(|_| true);
        let glow = Glow::fit(&flat_errors(profile), 4.0, 15.5, 0.11).unwrap();
        let peak = RingPeak {
            radius_mm: 12.0,
            u_radius_mm: 0.01,
            fwhm_mm: 0.3 * 2.354_820_045_030_949,
            u_fwhm_mm: 0.01,
            contrast: 0.05,
            u_contrast: 0.001,
            significance: 50.0,
            sectors: 36,
            lags: 2,
        };
        let e = ring_ellipse(&cells, &map, &glow, &peak).unwrap();
        assert!(e.points >= 30, "{e:?}");
        assert!((e.photo.semi_major - 120.0).abs() < 0.3, "{e:?}");
        assert!((e.photo.semi_minor - 100.0).abs() < 0.3, "{e:?}");
        assert!(e.photo.angle_rad.abs() < 0.01, "{e:?}");
        assert!((e.photo.centre[0] - 200.0).abs() < 0.2 && (e.photo.centre[1] - 150.0).abs() < 0.2);
        assert!(e.screen_flattening < 0.005, "{e:?}");
    }

    /// The radial table's profile with standard errors where the picture has none.
    fn flat_errors(
        mut p: crate::find::rings::radial::RadialProfile,
    ) -> crate::find::rings::radial::RadialProfile {
        for (se, v) in p.std_error.iter_mut().zip(&p.value) {
            *se = se.max(1e-4 * v.abs());
        }
        p
    }
}
