//! The renderer: every image pixel is inverse-mapped through the homography to the screen,
//! sampled s×s times with each sample's footprint (from the Jacobian of the inverse map)
//! used to box-filter the screen's lines, lit by the room and the laser, then the camera's
//! vignetting, speckle and the image-space distractors are applied. Rows run in parallel.

use super::camera::Camera;
use super::clutter::ClutterLayout;
use super::effects::{self, Effects};
use super::scene::RoomLight;
use super::screen::{Footprint, Screen};
use super::spots::OrderSpot;
use rayon::prelude::*;

/// A spot ready to draw: its pixel rectangle and, if on, its speckle pattern.
pub(crate) struct DrawnSpot<'a> {
    pub spot: &'a OrderSpot,
    /// [x0, y0, x1, y1), pixels.
    pub rect: [usize; 4],
    pub speckle: Option<Vec<f32>>,
}

/// Laser light scattered by the screen and the air: a halo around one spot and a faint
/// streak along the pattern, as irradiance in the same units as the spots.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Stray {
    pub centre_mm: [f64; 2],
    pub peak_per_mm2: f64,
}

impl Stray {
    fn irradiance(&self, x: f64, y: f64) -> f64 {
        let (dx, dy) = (x - self.centre_mm[0], y - self.centre_mm[1]);
        let r = dx.hypot(dy);
        let halo = if r < 400.0 {
            2e-3 * (-r / 25.0).exp()
        } else {
            0.0
        };
        let streak = if dy.abs() < 40.0 && dx.abs() < 3000.0 {
            4e-4 * (-dy.abs() / 2.0 - dx.abs() / 150.0).exp()
        } else {
            0.0
        };
        self.peak_per_mm2 * (halo + streak)
    }
}

/// Everything the pixel loop needs.
pub(crate) struct Frame<'a> {
    pub camera: &'a Camera,
    pub screen: &'a Screen,
    pub spots: Vec<DrawnSpot<'a>>,
    pub stray: Option<Stray>,
    pub laser_rgb: [f32; 3],
    /// Linear signal per unit of irradiance (power fraction / mm²) on unit reflectance.
    pub laser_gain: f64,
    pub room: RoomLight,
    pub clutter: ClutterLayout,
}

/// Pixel rectangle that holds the spot's light, or `None` if it misses the frame.
pub(crate) fn spot_rect(camera: &Camera, spot: &OrderSpot) -> Option<[usize; 4]> {
    let (mut x_lo, mut x_hi) = spot.x_range_mm();
    let yr = spot.y_reach_mm();
    // A long fringe train may reach behind the camera: keep the part in front of it (the
    // rest cannot be seen), halving the overhang until both band corners project.
    let c = spot.centroid_mm[0];
    let in_front = |x: f64| camera.project([x, -yr]).is_some() && camera.project([x, yr]).is_some();
    if in_front(c) {
        for end in [&mut x_lo, &mut x_hi] {
            let mut guard = 0;
            while !in_front(*end) && guard < 80 {
                *end = c + 0.5 * (*end - c);
                guard += 1;
            }
        }
    }
    let (w, h) = (camera.spec.width_px as f64, camera.spec.height_px as f64);
    let corners = [[x_lo, -yr], [x_hi, -yr], [x_lo, yr], [x_hi, yr]];
    let projected: Option<Vec<[f64; 2]>> = corners.iter().map(|&c| camera.project(c)).collect();
    let (x0, y0, x1, y1) = match projected {
        Some(p) => p.iter().fold(
            (
                f64::INFINITY,
                f64::INFINITY,
                f64::NEG_INFINITY,
                f64::NEG_INFINITY,
            ),
            |(a, b, c, d), q| (a.min(q[0]), b.min(q[1]), c.max(q[0]), d.max(q[1])),
        ),
        // Part of the band lies behind the camera: search the whole frame.
        None => (0.0, 0.0, w, h),
    };
    let x0 = (x0 - 2.0).floor().clamp(0.0, w) as usize;
    let y0 = (y0 - 2.0).floor().clamp(0.0, h) as usize;
    let x1 = (x1 + 3.0).ceil().clamp(0.0, w) as usize;
    let y1 = (y1 + 3.0).ceil().clamp(0.0, h) as usize;
    (x1 > x0 && y1 > y0).then_some([x0, y0, x1, y1])
}

impl<'a> Frame<'a> {
    /// Adds speckle patterns to every drawn spot.
    pub fn add_speckle(&mut self, effects: &Effects, seed: u64) {
        if effects.speckle_contrast <= 0.0 {
            return;
        }
        for d in &mut self.spots {
            let [x0, y0, x1, y1] = d.rect;
            let s = seed ^ (d.spot.order as i64 as u64).wrapping_mul(0x5851_f42d_4c95_7f2d);
            d.speckle = Some(effects::speckle(x1 - x0, y1 - y0, effects, s));
        }
    }

    /// Renders linear RGB, interleaved, row-major.
    pub fn render(&self, laser_on: bool) -> Vec<f32> {
        let (w, h) = (
            self.camera.spec.width_px as usize,
            self.camera.spec.height_px as usize,
        );
        let mut img = vec![0.0f32; w * h * 3];
        img.par_chunks_mut(w * 3)
            .enumerate()
            .for_each(|(y, row)| self.render_row(y, row, laser_on));
        img
    }

    fn render_row(&self, y: usize, row: &mut [f32], laser_on: bool) {
        let spec = &self.camera.spec;
        let (w, h) = (spec.width_px as f64, spec.height_px as f64);
        // Plain arrays: this is the hot loop.
        let m = self.camera.inverse();
        let hi = [0, 1, 2].map(|r| [0, 1, 2].map(|c| m[(r, c)]));
        let ss = spec.supersample.max(1) as usize;
        let n_sub = (ss * ss) as f32;
        let spots: Vec<&DrawnSpot> = if laser_on {
            self.spots
                .iter()
                .filter(|d| (d.rect[1]..d.rect[3]).contains(&y))
                .collect()
        } else {
            Vec::new()
        };
        let (cx, cy) = (0.5 * (w - 1.0), 0.5 * (h - 1.0));
        let r2_corner = cx * cx + cy * cy;
        let beyond = [0.03f32, 0.03, 0.035];
        let mut laser_acc = vec![[0.0f32; 3]; spots.len()];
        for (x, px) in row.chunks_exact_mut(3).enumerate() {
            let (xf, yf) = (x as f64, y as f64);
            let q3 = hi[2][0] * xf + hi[2][1] * yf + hi[2][2];
            let mut grain = 1.0;
            let fp = if q3 > 0.0 {
                let sx = (hi[0][0] * xf + hi[0][1] * yf + hi[0][2]) / q3;
                let sy = (hi[1][0] * xf + hi[1][1] * yf + hi[1][2]) / q3;
                let dxdx = (hi[0][0] - sx * hi[2][0]) / q3;
                let dxdy = (hi[0][1] - sx * hi[2][1]) / q3;
                let dydx = (hi[1][0] - sy * hi[2][0]) / q3;
                let dydy = (hi[1][1] - sy * hi[2][1]) / q3;
                grain = self.screen.grain(sx, sy);
                Footprint {
                    hx: 0.5 * (dxdx.abs() + dxdy.abs()) / ss as f64,
                    hy: 0.5 * (dydx.abs() + dydy.abs()) / ss as f64,
                }
            } else {
                Footprint { hx: 1.0, hy: 1.0 }
            };
            let mut ambient = [0.0f32; 3];
            let mut stray = [0.0f32; 3];
            let mut stray_e = 0.0f32;
            for acc in laser_acc.iter_mut() {
                *acc = [0.0; 3];
            }
            for j in 0..ss {
                for i in 0..ss {
                    let u = xf + (i as f64 + 0.5) / ss as f64 - 0.5;
                    let v = yf + (j as f64 + 0.5) / ss as f64 - 0.5;
                    let w3 = hi[2][0] * u + hi[2][1] * v + hi[2][2];
                    if w3 <= 1e-15 {
                        for (a, b) in ambient.iter_mut().zip(beyond) {
                            *a += b;
                        }
                        continue;
                    }
                    let sx = (hi[0][0] * u + hi[0][1] * v + hi[0][2]) / w3;
                    let sy = (hi[1][0] * u + hi[1][1] * v + hi[1][2]) / w3;
                    let refl = self.screen.reflectance(sx, sy, fp, grain);
                    let light = self.room.level
                        * (1.0
                            + self.room.gradient_per_100mm[0] * sx / 100.0
                            + self.room.gradient_per_100mm[1] * sy / 100.0)
                            .max(0.05);
                    for (a, r) in ambient.iter_mut().zip(refl) {
                        *a += r * light as f32;
                    }
                    for (d, acc) in spots.iter().zip(laser_acc.iter_mut()) {
                        if (d.rect[0]..d.rect[2]).contains(&x) {
                            let e = d.spot.irradiance(sx, sy) as f32;
                            for (a, r) in acc.iter_mut().zip(refl) {
                                *a += e * r;
                            }
                        }
                    }
                    if let (true, Some(s)) = (laser_on, &self.stray) {
                        // Smooth on the scale of centimetres: once per pixel is enough.
                        if i == 0 && j == 0 {
                            stray_e = s.irradiance(sx, sy) as f32;
                        }
                        for (a, r) in stray.iter_mut().zip(refl) {
                            *a += stray_e * r;
                        }
                    }
                }
            }
            let mut laser = stray;
            for (d, acc) in spots.iter().zip(&laser_acc) {
                if !(d.rect[0]..d.rect[2]).contains(&x) {
                    continue;
                }
                let s = d.speckle.as_ref().map_or(1.0, |sp| {
                    sp[(y - d.rect[1]) * (d.rect[2] - d.rect[0]) + x - d.rect[0]]
                });
                for (l, a) in laser.iter_mut().zip(acc) {
                    *l += s * a;
                }
            }
            let r2 = (xf - cx).powi(2) + (yf - cy).powi(2);
            let vignette = (1.0 - self.room.vignetting * r2 / r2_corner) as f32;
            let gain = self.laser_gain as f32;
            let shade = self.clutter.room_shade(xf, yf);
            let mut rgb = [0.0f32; 3];
            for (((o, a), l), c) in rgb.iter_mut().zip(ambient).zip(laser).zip(self.laser_rgb) {
                *o = vignette * (shade * a + gain * c * l) / n_sub;
            }
            self.clutter.apply(xf, yf, &mut rgb, vignette);
            px.copy_from_slice(&rgb);
        }
    }
}
