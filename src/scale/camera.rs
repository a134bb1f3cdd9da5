//! The across-ruler scale from the camera's geometry.
//!
//! A ruler (or a row of grid lines) fixes the scale along itself, with its perspective,
//! and its tick lines fix the direction across it, but not the scale across: a camera
//! turned about the ruler's perpendicular foreshortens the screen along the ruler only
//! (by cos φ at the middle), so a map that takes the across scale equal to the along
//! one stretches every circle into an ellipse, and ring radii come out short by about
//! (1 − cos φ)/2 on average (1.1 % at 12°, 3 % at 20°).
//!
//! The pinhole camera closes the gap. With intrinsics K (focal length f px, principal
//! point at the frame's centre), a plane's mm → px homography is G ∝ K·[r1 r2 t] with r1,
//! r2 orthonormal (Hartley & Zisserman, *Multiple View Geometry*, 2nd ed., §8.8, where the
//! same constraint calibrates K from a metric plane). Our map's G has the right first
//! column and a second column γ times too small, so γ = ‖K⁻¹g1‖/‖K⁻¹g2‖; the angle
//! between K⁻¹g1 and K⁻¹g2 (90° in a consistent view) is a check.

use super::ScreenMap;
use nalgebra::{Matrix3, Vector2, Vector3};

/// The camera's focal length and principal point, px.
#[derive(Debug, Clone, PartialEq)]
pub struct CameraGeometry {
    /// Focal length, px.
    pub focal_px: f64,
    /// Its relative standard uncertainty.
    pub focal_u_rel: f64,
    /// Principal point, px.
    pub principal_px: Vector2<f64>,
    /// Where the focal length came from, for the report.
    pub source: String,
}

/// Diagonal of the 36 × 24 mm frame the 35 mm-equivalent focal length refers to.
const FULL_FRAME_DIAGONAL_MM: f64 = 43.266_615;
/// The 35 mm-equivalent focal length assumed without EXIF: phone main cameras run from
/// about 23 to 28 mm, compacts and kit zooms at their wide end 24–35 mm (from memory).
const ASSUMED_35MM: f64 = 28.0;
/// Half-width of the rectangular range assumed about it, mm.
const ASSUMED_35MM_HALF_RANGE: f64 = 8.0;

impl CameraGeometry {
    /// From the EXIF 35 mm-equivalent focal length, or the assumption above; the
    /// principal point at the frame's centre (common practice without a calibration).
    pub fn for_frame(width: f64, height: f64, focal_35mm: Option<f64>) -> CameraGeometry {
        let diagonal = width.hypot(height);
        let centre = Vector2::new(0.5 * (width - 1.0), 0.5 * (height - 1.0));
        match focal_35mm {
            // The EXIF value is a whole number of mm (±0.5 mm, rectangular), and the
            // lens's own distortion and focusing shift f by a few per cent (common
            // practice): 3 % in all.
            Some(f35) => CameraGeometry {
                focal_px: f35 / FULL_FRAME_DIAGONAL_MM * diagonal,
                focal_u_rel: 0.03,
                principal_px: centre,
                source: format!("35 mm-equivalent focal length {f35:.0} mm from EXIF"),
            },
            None => CameraGeometry {
                focal_px: ASSUMED_35MM / FULL_FRAME_DIAGONAL_MM * diagonal,
                focal_u_rel: ASSUMED_35MM_HALF_RANGE / 3f64.sqrt() / ASSUMED_35MM,
                principal_px: centre,
                source: format!(
                    "no 35 mm-equivalent focal length in EXIF: {ASSUMED_35MM:.0} ± \
                     {ASSUMED_35MM_HALF_RANGE:.0} mm assumed (rectangular), a phone's or \
                     compact's wide view"
                ),
            },
        }
    }

    fn k_inverse(&self, focal_px: f64) -> Matrix3<f64> {
        let (cx, cy) = (self.principal_px.x, self.principal_px.y);
        Matrix3::new(
            1.0 / focal_px,
            0.0,
            -cx / focal_px,
            0.0,
            1.0 / focal_px,
            -cy / focal_px,
            0.0,
            0.0,
            1.0,
        )
    }

    /// γ and the angle (rad) between the two back-projected axis directions, for the map's
    /// mm → px homography at focal length `focal_px`.
    fn stretch(&self, g: &Matrix3<f64>, focal_px: f64) -> (f64, f64) {
        let k = self.k_inverse(focal_px);
        let a: Vector3<f64> = k * g.column(0);
        let b: Vector3<f64> = k * g.column(1);
        let angle = (a.dot(&b) / (a.norm() * b.norm())).clamp(-1.0, 1.0).acos();
        (a.norm() / b.norm(), angle)
    }
}

/// What [`square_across`] did.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AcrossCorrection {
    /// The factor the across scale was divided by (1: the view was square on).
    pub gamma: f64,
    /// Its relative standard uncertainty from the focal length's.
    pub u_rel: f64,
    /// The angle between the screen axes back-projected through the camera, rad (π/2 in
    /// a consistent view).
    pub axes_angle: f64,
}

/// Rescales the map's second screen axis (across the ruler) so that the view is
/// consistent with a pinhole camera of `camera`'s geometry; adds the focal length's share
/// of the uncertainty as a scale component.
pub fn square_across(map: &mut ScreenMap, camera: &CameraGeometry) -> Option<AcrossCorrection> {
    let g = map.h_inv;
    let (gamma, axes_angle) = camera.stretch(&g, camera.focal_px);
    if !(gamma.is_finite() && gamma > 0.5 && gamma < 2.0) {
        return None;
    }
    let df = camera.focal_u_rel * camera.focal_px;
    let (plus, _) = camera.stretch(&g, camera.focal_px + df);
    let (minus, _) = camera.stretch(&g, camera.focal_px - df);
    let u_rel = 0.5 * (plus - minus).abs() / gamma;
    let h = Matrix3::from_diagonal(&Vector3::new(1.0, 1.0 / gamma, 1.0)) * map.h;
    let h_inv = g * Matrix3::from_diagonal(&Vector3::new(1.0, gamma, 1.0));
    map.h = h;
    map.h_inv = h_inv;
    Some(AcrossCorrection {
        gamma,
        u_rel,
        axes_angle,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scale::ScaleMethod;

    /// mm → px of a screen seen by a pinhole camera turned by `yaw` about the screen's
    /// vertical axis, 300 mm away, f = 1500 px, principal point (800, 600): the textbook
    /// projection x = K·(R·X + t) written out directly.
    fn camera_view(yaw: f64) -> Matrix3<f64> {
        let k = Matrix3::new(1500.0, 0.0, 800.0, 0.0, 1500.0, 600.0, 0.0, 0.0, 1.0);
        let (c, s) = (yaw.cos(), yaw.sin());
        // Columns: the screen's X axis, Y axis (mm) and origin in camera coordinates.
        let rt = Matrix3::new(c, 0.0, 0.0, 0.0, 1.0, 0.0, -s, 0.0, 300.0);
        k * rt
    }

    #[test]
    fn a_yawed_view_with_the_across_scale_set_equal_is_squared() {
        let yaw = 20f64.to_radians();
        let truth = camera_view(yaw);
        // The map a ruler along X gives: the along axis right, the across axis scaled so
        // that the two scales agree at the origin (the ruler's middle).
        // d(px)/dX at the origin: (g.xy − px0·g.z)/z0 for the axis column g.
        let z0 = truth[(2, 2)];
        let px0 = truth.column(2).xy() / z0;
        let jac = |j: usize| (truth.column(j).xy() - px0 * truth[(2, j)]) / z0;
        let (jac_x, jac_y) = (jac(0), jac(1));
        let wrong = jac_y.norm() / jac_x.norm(); // across px per mm over along px per mm
        let g_wrong = truth * Matrix3::from_diagonal(&Vector3::new(1.0, 1.0 / wrong, 1.0));
        let h_wrong = g_wrong.try_inverse().unwrap();
        let mut map =
            ScreenMap::from_homography(ScaleMethod::Ruler, h_wrong, Vector2::zeros()).unwrap();
        let camera = CameraGeometry {
            focal_px: 1500.0,
            focal_u_rel: 0.03,
            principal_px: Vector2::new(800.0, 600.0),
            source: "test".into(),
        };
        let c = square_across(&mut map, &camera).unwrap();
        // At the origin the view foreshortens X by cos φ against Y (plus the perspective
        // of the tilt, which the ratio of the Jacobian columns above already holds).
        assert!((c.gamma - wrong).abs() < 1e-9, "{} vs {}", c.gamma, wrong);
        assert!((c.axes_angle - std::f64::consts::FRAC_PI_2).abs() < 1e-9);
        // The squared map now matches the camera's own: a 10 mm circle about a point is a
        // 10 mm circle.
        for (x, y) in [(0.0, 0.0), (40.0, -25.0), (-60.0, 30.0)] {
            let px = truth * Vector3::new(x, y, 1.0);
            let px = Vector2::new(px.x / px.z, px.y / px.z);
            let mm = map.to_mm(px);
            assert!((mm.x - x).abs() < 1e-6 && (mm.y - y).abs() < 1e-6, "{mm:?}");
        }
        assert!(c.u_rel > 0.0 && c.u_rel < 0.01, "{}", c.u_rel);
    }

    #[test]
    fn a_square_view_is_left_alone() {
        let mut map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.1).unwrap();
        let camera = CameraGeometry::for_frame(1600.0, 1200.0, None);
        let c = square_across(&mut map, &camera).unwrap();
        assert!((c.gamma - 1.0).abs() < 1e-12 && c.u_rel < 1e-12);
        // 28 mm on the 43.27 mm full-frame diagonal is 0.647 of the frame's diagonal.
        assert!((camera.focal_px - 28.0 / 43.266_615 * 2000.0).abs() < 1e-9);
    }
}
