//! Pixel ↔ screen-millimetre maps ([`ScreenMap`]) and the ways to make one: a ruler in
//! the frame ([`ruler`]), two picked points a known length apart ([`points`]), or a
//! given mm-per-px. Every map is a plane projective transform (homography), so a
//! similarity and a full perspective correction are handled alike downstream; its
//! uncertainty is carried as a relative scale uncertainty.

pub mod camera;
pub mod points;
pub mod profile;
pub mod ruler;
mod ticks;

use crate::ExitCode;
use nalgebra::{Matrix2, Matrix3, Vector2, Vector3};
use thiserror::Error;

/// Why no scale could be made.
#[derive(Debug, Error)]
pub enum ScaleError {
    /// The scale inputs are missing or contradict each other.
    #[error("{0}")]
    Usage(String),
    /// The scale could not be measured from the photo.
    #[error("{0}")]
    NotMeasured(String),
}

impl ScaleError {
    /// Exit code: bad input for usage errors, "not measured" for failed measurements.
    pub fn exit_code(&self) -> ExitCode {
        match self {
            ScaleError::Usage(_) => ExitCode::BadInput,
            ScaleError::NotMeasured(_) => ExitCode::NotMeasured,
        }
    }
}

/// How a map was made; the record's `scale.method`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ScaleMethod {
    /// Tick marks of a ruler measured in the photo.
    Ruler,
    /// Two points a known length apart.
    Points,
    /// The lines of graph paper used as the screen, counted along the pattern.
    Grid,
    /// A given millimetres-per-pixel factor.
    MmPerPx,
}

impl ScaleMethod {
    /// The name used in the record.
    pub fn name(self) -> &'static str {
        match self {
            ScaleMethod::Ruler => "ruler",
            ScaleMethod::Points => "points",
            ScaleMethod::Grid => "grid",
            ScaleMethod::MmPerPx => "mm-per-px",
        }
    }
}

/// One contribution to the scale's relative uncertainty, for the budget.
#[derive(Debug, Clone, PartialEq)]
pub struct ScaleComponent {
    /// What it is ("ruler tick fit", "ruler accuracy class II", ...).
    pub name: String,
    /// Relative standard uncertainty (k = 1).
    pub u_rel: f64,
    /// For a component that grows with the distance from a line in the photo (the scale
    /// carried off a ruler's line by the convergence of its ticks): the line and the
    /// relative uncertainty per px away from it. `u_rel` then holds the value over the
    /// whole frame until [`ScreenMap::localize`] narrows it to the measured features.
    pub across: Option<AcrossLine>,
}

/// A line in the photo and a relative uncertainty per px of distance from it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AcrossLine {
    /// A point on the line, px.
    pub origin: Vector2<f64>,
    /// Unit normal of the line.
    pub normal: Vector2<f64>,
    /// Relative standard uncertainty per px of distance from the line.
    pub u_rel_per_px: f64,
}

impl AcrossLine {
    /// The largest distance from the line, px, of any of `points`.
    pub fn farthest(&self, points: &[Vector2<f64>]) -> f64 {
        points
            .iter()
            .map(|p| self.normal.dot(&(p - self.origin)).abs())
            .fold(0.0, f64::max)
    }

    /// The largest distance from the line, px, of a corner of a `width`×`height` frame.
    pub fn reach_in_frame(&self, width: f64, height: f64) -> f64 {
        self.farthest(&[
            Vector2::new(0.0, 0.0),
            Vector2::new(width, 0.0),
            Vector2::new(0.0, height),
            Vector2::new(width, height),
        ])
    }
}

/// A map from upright photo pixels to millimetres on the screen plane.
#[derive(Debug, Clone)]
pub struct ScreenMap {
    /// How the map was made.
    pub method: ScaleMethod,
    /// px → mm, acting on homogeneous [x, y, 1].
    h: Matrix3<f64>,
    h_inv: Matrix3<f64>,
    /// Where the quoted mm-per-px applies (e.g. the middle of the ruler stretch).
    pub reference_px: Vector2<f64>,
    /// Components of the relative scale uncertainty (k = 1), combined in quadrature.
    pub components: Vec<ScaleComponent>,
    /// RMS residual of the calibration features, px, where there is a fit.
    pub residual_px: Option<f64>,
    /// Things the user should know about this scale.
    pub warnings: Vec<String>,
    /// Defaults that were assumed.
    pub assumptions: Vec<String>,
    /// The calibration stretch in px, for the overlay.
    pub stretch_px: Option<(Vector2<f64>, Vector2<f64>)>,
}

impl ScreenMap {
    /// A map from a px → mm homography. Fails if it is singular or not finite.
    pub fn from_homography(
        method: ScaleMethod,
        h: Matrix3<f64>,
        reference_px: Vector2<f64>,
    ) -> Result<Self, ScaleError> {
        let h_inv = h
            .try_inverse()
            .filter(|m| m.iter().all(|v| v.is_finite()))
            .ok_or_else(|| ScaleError::NotMeasured("the scale transform is singular".into()))?;
        Ok(ScreenMap {
            method,
            h,
            h_inv,
            reference_px,
            components: Vec::new(),
            residual_px: None,
            warnings: Vec::new(),
            assumptions: Vec::new(),
            stretch_px: None,
        })
    }

    /// A uniform scale: mm = mm_per_px · px.
    pub fn uniform(method: ScaleMethod, mm_per_px: f64) -> Result<Self, ScaleError> {
        if !(mm_per_px > 0.0 && mm_per_px.is_finite()) {
            return Err(ScaleError::Usage(format!(
                "the scale must be a positive number of mm per px, got {mm_per_px}"
            )));
        }
        Self::from_homography(
            method,
            Matrix3::new(mm_per_px, 0.0, 0.0, 0.0, mm_per_px, 0.0, 0.0, 0.0, 1.0),
            Vector2::zeros(),
        )
    }

    /// Adds a component of the relative scale uncertainty.
    pub fn with_component(mut self, name: impl Into<String>, u_rel: f64) -> Self {
        self.components.push(ScaleComponent {
            name: name.into(),
            u_rel,
            across: None,
        });
        self
    }

    /// Adds a component that grows with the distance from a line, valued over the whole
    /// `width`×`height` frame until [`ScreenMap::localize`] is called.
    pub fn with_component_across(
        mut self,
        name: impl Into<String>,
        across: AcrossLine,
        width: f64,
        height: f64,
    ) -> Self {
        self.components.push(ScaleComponent {
            name: name.into(),
            u_rel: across.u_rel_per_px * across.reach_in_frame(width, height),
            across: Some(across),
        });
        self
    }

    /// Values the components that grow away from a line at the farthest of the photo
    /// points the measurement rests on, instead of at the farthest corner of the frame.
    pub fn localize(&mut self, points_px: &[Vector2<f64>]) {
        if points_px.is_empty() {
            return;
        }
        for c in &mut self.components {
            if let Some(a) = c.across {
                c.u_rel = a.u_rel_per_px * a.farthest(points_px);
            }
        }
    }

    /// The px → mm homography.
    pub fn homography(&self) -> Matrix3<f64> {
        self.h
    }

    /// Screen millimetres of a photo pixel position.
    pub fn to_mm(&self, px: Vector2<f64>) -> Vector2<f64> {
        project(&self.h, px)
    }

    /// Photo pixel position of a screen point in millimetres.
    pub fn to_px(&self, mm: Vector2<f64>) -> Vector2<f64> {
        project(&self.h_inv, mm)
    }

    /// ∂mm/∂px at a pixel: carries pixel uncertainties onto the screen.
    pub fn jacobian(&self, px: Vector2<f64>) -> Matrix2<f64> {
        let q = self.h * Vector3::new(px.x, px.y, 1.0);
        let w = q.z;
        let (u, v) = (q.x / w, q.y / w);
        Matrix2::new(
            (self.h[(0, 0)] - u * self.h[(2, 0)]) / w,
            (self.h[(0, 1)] - u * self.h[(2, 1)]) / w,
            (self.h[(1, 0)] - v * self.h[(2, 0)]) / w,
            (self.h[(1, 1)] - v * self.h[(2, 1)]) / w,
        )
    }

    /// Local mm per px (square root of the area scale) at a pixel.
    pub fn mm_per_px_at(&self, px: Vector2<f64>) -> f64 {
        self.jacobian(px).determinant().abs().sqrt()
    }

    /// mm per px at the reference point.
    pub fn mm_per_px(&self) -> f64 {
        self.mm_per_px_at(self.reference_px)
    }

    /// Combined relative standard uncertainty of the scale (k = 1).
    pub fn u_rel(&self) -> f64 {
        self.components
            .iter()
            .map(|c| c.u_rel * c.u_rel)
            .sum::<f64>()
            .sqrt()
    }
}

fn project(h: &Matrix3<f64>, p: Vector2<f64>) -> Vector2<f64> {
    let q = h * Vector3::new(p.x, p.y, 1.0);
    Vector2::new(q.x / q.z, q.y / q.z)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uniform_map_round_trips_and_has_constant_scale() {
        let map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.08).unwrap();
        let p = Vector2::new(1234.5, 987.25);
        let mm = map.to_mm(p);
        assert!((mm - p * 0.08).norm() < 1e-12);
        assert!((map.to_px(mm) - p).norm() < 1e-9);
        assert!((map.mm_per_px_at(Vector2::new(10.0, 3000.0)) - 0.08).abs() < 1e-15);
        assert!(ScreenMap::uniform(ScaleMethod::MmPerPx, 0.0).is_err());
        assert!(ScreenMap::uniform(ScaleMethod::MmPerPx, f64::NAN).is_err());
    }

    #[test]
    fn jacobian_matches_finite_differences_of_a_perspective_map() {
        let h = Matrix3::new(0.1, 0.01, 3.0, -0.005, 0.09, 1.0, 2e-5, -1e-5, 1.0);
        let map = ScreenMap::from_homography(ScaleMethod::Ruler, h, Vector2::zeros()).unwrap();
        let p = Vector2::new(800.0, 600.0);
        let j = map.jacobian(p);
        let e = 1e-4;
        for (k, d) in [Vector2::new(e, 0.0), Vector2::new(0.0, e)]
            .iter()
            .enumerate()
        {
            let fd = (map.to_mm(p + d) - map.to_mm(p - d)) / (2.0 * e);
            assert!((fd - j.column(k)).norm() < 1e-9, "{fd} vs {}", j.column(k));
        }
    }
}
