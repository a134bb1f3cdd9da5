//! A pinhole camera looking at the screen plane, and the homography it makes from screen
//! millimetres to image pixels (Hartley & Zisserman, *Multiple View Geometry*, 2nd ed., §8.1:
//! a plane maps through H = K·[r1 r2 t]). Pixel convention of DESIGN §2: x right, y down,
//! the centre of the top-left pixel at (0, 0).
//!
//! Camera frame: with no tilt the camera looks along +z (into the lit face of the screen),
//! image x along screen X and image y along screen Y. Yaw turns it about its vertical axis,
//! pitch about its horizontal axis, roll about its optical axis; the optical axis always
//! passes through the aim point on the screen, at the given distance from it.

use super::SimError;
use nalgebra::{Matrix3, Rotation3, Vector3};
use serde::{Deserialize, Serialize};

/// How the camera is placed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "mode", rename_all = "snake_case")]
pub enum Framing {
    /// Aim at the pattern and choose the distance so that the orders up to `max_order`
    /// that land within 1.5 distances of the zero order, the ruler and any sheet fill the
    /// frame, leaving `margin` (a fraction of the frame) on each side.
    Auto {
        /// Highest order kept in the frame.
        max_order: u32,
        /// Free fraction of the frame on each side.
        margin: f64,
    },
    /// Aim point on the screen (mm) and camera distance from it (mm).
    Fixed {
        /// Screen point on the optical axis.
        aim_mm: [f64; 2],
        /// Distance from the camera's centre to the aim point.
        distance_mm: f64,
    },
}

/// The camera.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CameraSpec {
    /// Image width.
    pub width_px: u32,
    /// Image height.
    pub height_px: u32,
    /// Focal length in pixels.
    pub focal_px: f64,
    /// Turn about the camera's vertical axis.
    pub yaw_rad: f64,
    /// Turn about the camera's horizontal axis.
    pub pitch_rad: f64,
    /// Turn about the optical axis.
    pub roll_rad: f64,
    /// Placement.
    pub framing: Framing,
    /// Samples per pixel along each axis (2 gives 2×2); edges are also box-filtered.
    pub supersample: u32,
}

impl Default for CameraSpec {
    /// 1600×1200 with a 56° horizontal field, square on to the screen, auto-framed to ±2.
    fn default() -> Self {
        CameraSpec {
            width_px: 1600,
            height_px: 1200,
            focal_px: 1500.0,
            yaw_rad: 0.0,
            pitch_rad: 0.0,
            roll_rad: 0.0,
            framing: Framing::Auto {
                max_order: 2,
                margin: 0.08,
            },
            supersample: 2,
        }
    }
}

impl CameraSpec {
    /// A 12-megapixel (4000×3000) camera with the default field of view, for benches.
    pub fn twelve_megapixel() -> Self {
        CameraSpec {
            width_px: 4000,
            height_px: 3000,
            focal_px: 3750.0,
            ..CameraSpec::default()
        }
    }

    /// Checks the camera inputs.
    pub fn validate(&self) -> Result<(), SimError> {
        let bad = |name, value: f64, expected| {
            Err(SimError::BadInput {
                name,
                value,
                expected,
            })
        };
        if !(16..=20_000).contains(&self.width_px) {
            return bad("width_px", self.width_px.into(), "16 to 20000 pixels");
        }
        if !(16..=20_000).contains(&self.height_px) {
            return bad("height_px", self.height_px.into(), "16 to 20000 pixels");
        }
        if !(self.focal_px.is_finite() && self.focal_px >= 10.0) {
            return bad(
                "focal_px",
                self.focal_px,
                "a focal length of at least 10 px",
            );
        }
        for (name, v) in [("yaw_rad", self.yaw_rad), ("pitch_rad", self.pitch_rad)] {
            if !(v.is_finite() && v.abs() <= 70f64.to_radians()) {
                return bad(name, v, "a tilt within ±70°");
            }
        }
        if !self.roll_rad.is_finite() {
            return bad("roll_rad", self.roll_rad, "a finite angle");
        }
        if !(1..=4).contains(&self.supersample) {
            return bad(
                "supersample",
                self.supersample.into(),
                "1 to 4 samples per axis",
            );
        }
        match self.framing {
            Framing::Auto { margin, .. } if !(0.0..0.4).contains(&margin) => {
                bad("margin", margin, "a margin from 0 to 0.4 of the frame")
            }
            Framing::Fixed {
                aim_mm,
                distance_mm,
            } if !(aim_mm.iter().all(|v| v.is_finite())
                && distance_mm.is_finite()
                && distance_mm > 1.0) =>
            {
                bad(
                    "distance_mm",
                    distance_mm,
                    "a finite aim and a distance above 1 mm",
                )
            }
            _ => Ok(()),
        }
    }
}

/// A placed camera.
#[derive(Debug, Clone)]
pub struct Camera {
    /// The inputs.
    pub spec: CameraSpec,
    /// Screen point on the optical axis, mm.
    pub aim_mm: [f64; 2],
    /// Camera centre to aim point, mm.
    pub distance_mm: f64,
    /// Camera centre in the screen frame (the screen is z = 0), mm.
    pub centre_mm: [f64; 3],
    /// Screen mm → px, scaled so that the third coordinate is the depth in mm.
    h: Matrix3<f64>,
    h_inv: Matrix3<f64>,
}

impl Camera {
    /// Places the camera `distance_mm` from `aim_mm` along its tilted optical axis.
    pub fn new(spec: CameraSpec, aim_mm: [f64; 2], distance_mm: f64) -> Result<Camera, SimError> {
        let r = Rotation3::from_axis_angle(&Vector3::y_axis(), spec.yaw_rad)
            * Rotation3::from_axis_angle(&Vector3::x_axis(), spec.pitch_rad)
            * Rotation3::from_axis_angle(&Vector3::z_axis(), spec.roll_rad);
        let aim = Vector3::new(aim_mm[0], aim_mm[1], 0.0);
        let centre = aim - r * Vector3::z() * distance_mm;
        let (cx, cy) = principal_point(&spec);
        let k = Matrix3::new(
            spec.focal_px,
            0.0,
            cx,
            0.0,
            spec.focal_px,
            cy,
            0.0,
            0.0,
            1.0,
        );
        let plane = Matrix3::from_columns(&[Vector3::x(), Vector3::y(), -centre]);
        let h = k * r.matrix().transpose() * plane;
        let h_inv = h
            .try_inverse()
            .ok_or_else(|| SimError::CameraSeesNoScreen("the screen is seen edge-on".into()))?;
        let camera = Camera {
            spec,
            aim_mm,
            distance_mm,
            centre_mm: [centre.x, centre.y, centre.z],
            h,
            h_inv,
        };
        let (w, hgt) = (spec.width_px as f64 - 1.0, spec.height_px as f64 - 1.0);
        let corners = [(0.0, 0.0), (w, 0.0), (0.0, hgt), (w, hgt)];
        if corners
            .iter()
            .all(|&(x, y)| camera.unproject(x, y).is_none())
        {
            return Err(SimError::CameraSeesNoScreen(
                "every pixel looks past the screen plane; reduce the tilt".into(),
            ));
        }
        Ok(camera)
    }

    /// Screen mm → px, or `None` behind the camera.
    pub fn project(&self, p_mm: [f64; 2]) -> Option<[f64; 2]> {
        let v = self.h * Vector3::new(p_mm[0], p_mm[1], 1.0);
        (v.z > 1e-9).then(|| [v.x / v.z, v.y / v.z])
    }

    /// px → screen mm, or `None` where the pixel's ray misses the screen plane.
    pub fn unproject(&self, x: f64, y: f64) -> Option<[f64; 2]> {
        let v = self.h_inv * Vector3::new(x, y, 1.0);
        (v.z > 1e-15).then(|| [v.x / v.z, v.y / v.z])
    }

    /// Inverse homography, for the renderer's inner loop.
    pub(crate) fn inverse(&self) -> &Matrix3<f64> {
        &self.h_inv
    }

    /// The screen mm → px homography, normalized so that its last entry is 1 (or to unit
    /// Frobenius norm if that entry vanishes).
    pub fn homography(&self) -> Matrix3<f64> {
        let h22 = self.h[(2, 2)];
        if h22.abs() > 1e-12 * self.h.norm() {
            self.h / h22
        } else {
            self.h / self.h.norm()
        }
    }

    /// Millimetres per pixel along the screen direction `dir` (unit) at `p_mm`.
    pub fn mm_per_px_along(&self, p_mm: [f64; 2], dir: [f64; 2]) -> Option<f64> {
        let e = 0.5;
        let a = self.project([p_mm[0] - e * dir[0], p_mm[1] - e * dir[1]])?;
        let b = self.project([p_mm[0] + e * dir[0], p_mm[1] + e * dir[1]])?;
        let px = (b[0] - a[0]).hypot(b[1] - a[1]);
        (px > 0.0).then(|| 2.0 * e / px)
    }

    /// True if `px` lies on the sensor.
    pub fn in_frame(&self, px: [f64; 2]) -> bool {
        let (w, h) = (self.spec.width_px as f64, self.spec.height_px as f64);
        (-0.5..w - 0.5).contains(&px[0]) && (-0.5..h - 0.5).contains(&px[1])
    }

    /// Places the camera so that `points` (screen mm) fill the frame with `margin` free on
    /// each side, by fixed-point iteration on aim and distance.
    pub fn frame(spec: CameraSpec, points: &[[f64; 2]], margin: f64) -> Result<Camera, SimError> {
        let (lo, hi) = bounds(points.iter().copied());
        let mut aim = [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])];
        let span = (hi[0] - lo[0]).max(hi[1] - lo[1]).max(20.0);
        let short = spec.width_px.min(spec.height_px) as f64;
        let mut distance = spec.focal_px * span / short;
        let usable = 1.0 - 2.0 * margin;
        let (cx, cy) = principal_point(&spec);
        for _ in 0..30 {
            let cam = Camera::new(spec, aim, distance)?;
            let projected: Option<Vec<[f64; 2]>> = points.iter().map(|&p| cam.project(p)).collect();
            let Some(projected) = projected else {
                distance *= 2.0;
                continue;
            };
            let (plo, phi) = bounds(projected.into_iter());
            let fill = ((phi[0] - plo[0]) / (spec.width_px as f64 * usable))
                .max((phi[1] - plo[1]) / (spec.height_px as f64 * usable));
            let centre = [0.5 * (plo[0] + phi[0]), 0.5 * (plo[1] + phi[1])];
            let off = (centre[0] - cx).hypot(centre[1] - cy);
            if (fill - 1.0).abs() < 1e-4 && off < 0.05 {
                return Ok(cam);
            }
            if let Some(q) = cam.unproject(centre[0], centre[1]) {
                aim = q;
            }
            distance *= fill.clamp(0.25, 4.0);
        }
        Camera::new(spec, aim, distance)
    }
}

fn principal_point(spec: &CameraSpec) -> (f64, f64) {
    (
        0.5 * (spec.width_px as f64 - 1.0),
        0.5 * (spec.height_px as f64 - 1.0),
    )
}

fn bounds(points: impl Iterator<Item = [f64; 2]>) -> ([f64; 2], [f64; 2]) {
    points.fold(
        ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]),
        |(lo, hi), p| {
            (
                [lo[0].min(p[0]), lo[1].min(p[1])],
                [hi[0].max(p[0]), hi[1].max(p[1])],
            )
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tilted() -> CameraSpec {
        CameraSpec {
            width_px: 800,
            height_px: 600,
            focal_px: 900.0,
            yaw_rad: 12f64.to_radians(),
            pitch_rad: -8f64.to_radians(),
            roll_rad: 5f64.to_radians(),
            ..CameraSpec::default()
        }
    }

    #[test]
    fn homography_matches_direct_pinhole_projection() {
        let cam = Camera::new(tilted(), [10.0, -5.0], 400.0).unwrap();
        // Direct projection: camera axes are the columns of R = Ry(yaw)·Rx(pitch)·Rz(roll).
        let (sy, cy) = cam.spec.yaw_rad.sin_cos();
        let (sp, cp) = cam.spec.pitch_rad.sin_cos();
        let (sr, cr) = cam.spec.roll_rad.sin_cos();
        let ry = Matrix3::new(cy, 0.0, sy, 0.0, 1.0, 0.0, -sy, 0.0, cy);
        let rx = Matrix3::new(1.0, 0.0, 0.0, 0.0, cp, -sp, 0.0, sp, cp);
        let rz = Matrix3::new(cr, -sr, 0.0, sr, cr, 0.0, 0.0, 0.0, 1.0);
        let r = ry * rx * rz;
        let c = Vector3::from(cam.centre_mm);
        for p in [[0.0, 0.0], [50.0, 20.0], [-80.0, 33.0]] {
            let pc = r.transpose() * (Vector3::new(p[0], p[1], 0.0) - c);
            let expected = [900.0 * pc.x / pc.z + 399.5, 900.0 * pc.y / pc.z + 299.5];
            let got = cam.project(p).unwrap();
            assert!((got[0] - expected[0]).abs() < 1e-9 && (got[1] - expected[1]).abs() < 1e-9);
            let back = cam.unproject(got[0], got[1]).unwrap();
            assert!((back[0] - p[0]).abs() < 1e-9 && (back[1] - p[1]).abs() < 1e-9);
            let hn = cam.homography();
            let v = hn * Vector3::new(p[0], p[1], 1.0);
            assert!((v.x / v.z - got[0]).abs() < 1e-9);
        }
        // The aim point sits on the optical axis, at the image centre.
        let a = cam.project([10.0, -5.0]).unwrap();
        assert!((a[0] - 399.5).abs() < 1e-9 && (a[1] - 299.5).abs() < 1e-9);
        let dist = (Vector3::new(10.0, -5.0, 0.0) - c).norm();
        assert!((dist - 400.0).abs() < 1e-9);
    }

    #[test]
    fn untilted_camera_is_a_plain_scale() {
        let spec = CameraSpec {
            width_px: 800,
            height_px: 600,
            focal_px: 1000.0,
            ..CameraSpec::default()
        };
        let cam = Camera::new(spec, [0.0, 0.0], 500.0).unwrap();
        let p = cam.project([10.0, 4.0]).unwrap();
        assert!((p[0] - (399.5 + 20.0)).abs() < 1e-9 && (p[1] - (299.5 + 8.0)).abs() < 1e-9);
        assert!((cam.mm_per_px_along([0.0, 0.0], [1.0, 0.0]).unwrap() - 0.5).abs() < 1e-9);
    }

    #[test]
    fn auto_framing_fills_the_frame() {
        let pts = [[-120.0, 0.0], [120.0, 0.0], [-100.0, 40.0], [100.0, 40.0]];
        let cam = Camera::frame(tilted(), &pts, 0.1).unwrap();
        let px: Vec<[f64; 2]> = pts.iter().map(|&p| cam.project(p).unwrap()).collect();
        let (lo, hi) = bounds(px.into_iter());
        let fill = ((hi[0] - lo[0]) / 640.0).max((hi[1] - lo[1]) / 480.0);
        assert!((fill - 1.0).abs() < 1e-3, "fill {fill}");
        assert!(lo[0] >= 79.0 && hi[0] <= 721.0 && lo[1] >= 59.0 && hi[1] <= 541.0);
    }

    #[test]
    fn bad_camera_inputs_are_refused() {
        let spec = CameraSpec {
            yaw_rad: 1.5,
            ..CameraSpec::default()
        };
        assert!(matches!(
            spec.validate(),
            Err(SimError::BadInput {
                name: "yaw_rad",
                ..
            })
        ));
        let spec = CameraSpec {
            framing: Framing::Fixed {
                aim_mm: [0.0, f64::NAN],
                distance_mm: 300.0,
            },
            ..CameraSpec::default()
        };
        assert!(spec.validate().is_err());
    }
}
