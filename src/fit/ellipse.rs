//! Direct least-squares ellipse fit after Halir & Flusser (1998, "Numerically stable
//! direct least squares fitting of ellipses", WSCG'98), the stable form of Fitzgibbon,
//! Pilu & Fisher's ellipse-specific fit: minimise the algebraic distance of the conic
//! a·x² + b·xy + c·y² + d·x + e·y + f = 0 subject to 4ac − b² = 1, which always yields
//! an ellipse. The linear part (d, e, f) is eliminated with the 3 × 3 scatter matrices,
//! leaving a 3 × 3 eigenproblem whose one eigenvector with 4ac − b² > 0 is the answer.
//! The points are centred and scaled to unit RMS radius first, which the paper's
//! stability relies on for data in pixel units.

use super::FitError;
use nalgebra::{Matrix2, Matrix3, Vector3};
use std::f64::consts::{FRAC_PI_2, PI};

/// An ellipse in geometric form.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ellipse {
    /// Centre (x, y).
    pub centre: [f64; 2],
    /// Semi-major axis a ≥ b.
    pub semi_major: f64,
    /// Semi-minor axis b > 0.
    pub semi_minor: f64,
    /// Angle of the major axis from +x, in (−π/2, π/2]; arbitrary for a circle.
    pub angle_rad: f64,
}

impl Ellipse {
    /// Eccentricity √(1 − b²/a²): 0 for a circle.
    pub fn eccentricity(&self) -> f64 {
        let q = self.semi_minor / self.semi_major;
        (1.0 - q * q).max(0.0).sqrt()
    }

    /// Ellipticity (flattening) 1 − b/a: 0 for a circle.
    pub fn ellipticity(&self) -> f64 {
        1.0 - self.semi_minor / self.semi_major
    }

    /// The point at parameter t: centre + a·cos t·û + b·sin t·v̂, with û along the major
    /// axis and v̂ a quarter turn anticlockwise from it.
    pub fn point_at(&self, t: f64) -> [f64; 2] {
        let (s, c) = self.angle_rad.sin_cos();
        let (u, v) = (self.semi_major * t.cos(), self.semi_minor * t.sin());
        [
            self.centre[0] + u * c - v * s,
            self.centre[1] + u * s + v * c,
        ]
    }
}

/// Fits an ellipse to at least five points by Halir & Flusser's direct method.
///
/// Fails with [`FitError::TooFewPoints`] below five points, [`FitError::NonFinite`] on
/// NaN or infinite coordinates, and [`FitError::Singular`] when the points do not
/// determine a conic (collinear or coincident). Being ellipse-specific, the fit returns
/// an ellipse even for points that lie on a hyperbola or a line pair: judge it by the
/// residuals, not by success.
pub fn fit_ellipse_direct(points: &[[f64; 2]]) -> Result<Ellipse, FitError> {
    const MODEL: &str = "ellipse (direct)";
    let singular = FitError::Singular { model: MODEL };
    if points.len() < 5 {
        return Err(FitError::TooFewPoints {
            model: MODEL,
            got: points.len(),
            need: 5,
        });
    }
    if points.iter().flatten().any(|v| !v.is_finite()) {
        return Err(FitError::NonFinite { model: MODEL });
    }
    let n = points.len() as f64;
    let cx = points.iter().map(|p| p[0]).sum::<f64>() / n;
    let cy = points.iter().map(|p| p[1]).sum::<f64>() / n;
    let scale = (points
        .iter()
        .map(|p| (p[0] - cx).powi(2) + (p[1] - cy).powi(2))
        .sum::<f64>()
        / n)
        .sqrt();
    if !(scale > 0.0) || !scale.is_finite() {
        return Err(singular);
    }

    // Scatter matrices S1 = D1ᵀD1, S2 = D1ᵀD2, S3 = D2ᵀD2 with D1 = [x², xy, y²] and
    // D2 = [x, y, 1] (Halir & Flusser, eq. 10).
    let (mut s1, mut s2, mut s3) = (Matrix3::zeros(), Matrix3::zeros(), Matrix3::zeros());
    for p in points {
        let (x, y) = ((p[0] - cx) / scale, (p[1] - cy) / scale);
        let d1 = Vector3::new(x * x, x * y, y * y);
        let d2 = Vector3::new(x, y, 1.0);
        s1 += d1 * d1.transpose();
        s2 += d1 * d2.transpose();
        s3 += d2 * d2.transpose();
    }
    // S3 is singular exactly when the points are collinear.
    let s3_inv = s3.try_inverse().ok_or(singular.clone())?;
    if !(s3.norm() * s3_inv.norm() < 1e14) {
        return Err(singular);
    }
    let t = -s3_inv * s2.transpose();
    let m = s1 + s2 * t;
    // Premultiply by C1⁻¹ for the constraint 4ac − b² (eq. 22).
    let reduced = Matrix3::from_rows(&[
        (m.row(2) / 2.0).into_owned(),
        (-m.row(1)).into_owned(),
        (m.row(0) / 2.0).into_owned(),
    ]);
    let mut best: Option<(f64, Vector3<f64>)> = None;
    for lambda in reduced.complex_eigenvalues().iter() {
        if lambda.im.abs() > 1e-9 * (1.0 + lambda.re.abs()) {
            continue;
        }
        let Some(v) = null_vector(reduced - Matrix3::identity() * lambda.re) else {
            continue;
        };
        let constraint = 4.0 * v[0] * v[2] - v[1] * v[1];
        if constraint > 0.0 && best.is_none_or(|(c, _)| constraint > c) {
            best = Some((constraint, v));
        }
    }
    let (_, a1) = best.ok_or(singular.clone())?;
    let a2 = t * a1;
    let conic = [a1[0], a1[1], a1[2], a2[0], a2[1], a2[2]];
    let unit = conic_to_ellipse(conic).ok_or(singular)?;
    Ok(Ellipse {
        centre: [cx + scale * unit.centre[0], cy + scale * unit.centre[1]],
        semi_major: scale * unit.semi_major,
        semi_minor: scale * unit.semi_minor,
        angle_rad: unit.angle_rad,
    })
}

/// Unit vector v with A·v ≈ 0: the smallest right singular vector.
fn null_vector(a: Matrix3<f64>) -> Option<Vector3<f64>> {
    let svd = a.svd(false, true);
    let vt = svd.v_t?;
    let s = svd.singular_values;
    let k = (0..3).min_by(|&i, &j| s[i].total_cmp(&s[j]))?;
    Some(vt.row(k).transpose())
}

/// Geometric parameters of the ellipse a·x² + b·xy + c·y² + d·x + e·y + f = 0, or None
/// when the conic is not a real ellipse.
fn conic_to_ellipse([a, b, c, d, e, f]: [f64; 6]) -> Option<Ellipse> {
    let det = 4.0 * a * c - b * b;
    if !(det > 0.0) {
        return None;
    }
    // The centre is where the gradient vanishes.
    let x0 = (b * e - 2.0 * c * d) / det;
    let y0 = (b * d - 2.0 * a * e) / det;
    let f0 = f + 0.5 * (d * x0 + e * y0);
    // (p − p0)ᵀ Q (p − p0) = −f0 with Q = [[a, b/2], [b/2, c]].
    let sign = if f0 > 0.0 { -1.0 } else { 1.0 };
    let q = Matrix2::new(a, b / 2.0, b / 2.0, c) * sign;
    let rhs = -f0 * sign;
    let eig = q.symmetric_eigen();
    let (small, large) = if eig.eigenvalues[0] <= eig.eigenvalues[1] {
        (0, 1)
    } else {
        (1, 0)
    };
    let (l_small, l_large) = (eig.eigenvalues[small], eig.eigenvalues[large]);
    if !(l_small > 0.0 && rhs > 0.0) {
        return None;
    }
    // The major axis goes along the eigenvector with the smaller eigenvalue.
    let v = eig.eigenvectors.column(small);
    let mut angle = v[1].atan2(v[0]);
    if angle > FRAC_PI_2 {
        angle -= PI;
    } else if angle <= -FRAC_PI_2 {
        angle += PI;
    }
    let ellipse = Ellipse {
        centre: [x0, y0],
        semi_major: (rhs / l_small).sqrt(),
        semi_minor: (rhs / l_large).sqrt(),
        angle_rad: angle,
    };
    let finite = ellipse.centre.iter().all(|v| v.is_finite())
        && ellipse.semi_major.is_finite()
        && ellipse.semi_minor > 0.0;
    finite.then_some(ellipse)
}

#[cfg(test)]
mod tests;
