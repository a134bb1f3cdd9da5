//! Straight lines: total least squares through 2-D points (the principal axis of their
//! weighted scatter) and weighted ordinary least squares y = a + b·x with covariance.

use super::FitError;
use nalgebra::{Matrix2, Vector2};

/// A line through `point` with unit `direction`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Line2 {
    /// A point on the line (the weighted centroid of the data).
    pub point: Vector2<f64>,
    /// Unit direction.
    pub direction: Vector2<f64>,
    /// RMS perpendicular distance of the points from the line.
    pub rms_distance: f64,
}

impl Line2 {
    /// Signed position of `p` along the line, measured from `point`.
    pub fn along(&self, p: Vector2<f64>) -> f64 {
        (p - self.point).dot(&self.direction)
    }

    /// Signed perpendicular distance of `p` from the line.
    pub fn across(&self, p: Vector2<f64>) -> f64 {
        let n = Vector2::new(-self.direction.y, self.direction.x);
        (p - self.point).dot(&n)
    }
}

/// Total-least-squares line through weighted points: it minimises the weighted sum of
/// squared perpendicular distances, so it treats x and y alike (unlike y-on-x regression,
/// which fails for steep lines).
pub fn tls_line(points: &[Vector2<f64>], weights: &[f64]) -> Result<Line2, FitError> {
    const MODEL: &str = "total-least-squares line";
    if points.len() < 2 || weights.len() != points.len() {
        return Err(FitError::TooFewPoints {
            model: MODEL,
            got: points.len(),
            need: 2,
        });
    }
    let wsum: f64 = weights.iter().sum();
    if !(wsum > 0.0) {
        return Err(FitError::Singular { model: MODEL });
    }
    let centroid = points
        .iter()
        .zip(weights)
        .fold(Vector2::zeros(), |acc, (p, w)| acc + p * *w)
        / wsum;
    let mut scatter = Matrix2::zeros();
    for (p, w) in points.iter().zip(weights) {
        let d = p - centroid;
        scatter += d * d.transpose() * *w;
    }
    let eig = scatter.symmetric_eigen();
    let (imax, imin) = if eig.eigenvalues[0] >= eig.eigenvalues[1] {
        (0, 1)
    } else {
        (1, 0)
    };
    if !(eig.eigenvalues[imax] > 0.0) {
        return Err(FitError::Singular { model: MODEL });
    }
    let mut direction: Vector2<f64> = eig.eigenvectors.column(imax).into();
    // A canonical sign keeps "along" coordinates stable between calls.
    if direction.x < 0.0 || (direction.x == 0.0 && direction.y < 0.0) {
        direction = -direction;
    }
    let rms_distance = (eig.eigenvalues[imin].max(0.0) / wsum).sqrt();
    Ok(Line2 {
        point: centroid,
        direction,
        rms_distance,
    })
}

/// Result of a weighted straight-line fit y = intercept + slope·x.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LinearFit {
    /// Intercept a.
    pub intercept: f64,
    /// Slope b.
    pub slope: f64,
    /// Covariance of (a, b) from the residual scatter: (XᵀWX)⁻¹·s².
    pub covariance: [[f64; 2]; 2],
    /// Root-mean-square residual (unweighted).
    pub rms_residual: f64,
    /// Weighted residual variance s² = Σ w r² / (n − 2).
    pub s2: f64,
    /// Weighted spread of x about its mean, Σ w (x − x̄)²: with absolute weights
    /// 1/u², the slope's variance from the stated uncertainties alone is 1/sxx.
    pub sxx: f64,
}

/// Weighted least-squares straight line. Weights are relative (the scale of the
/// covariance comes from the residuals), so they only need the right proportions.
pub fn fit_line(x: &[f64], y: &[f64], w: &[f64]) -> Result<LinearFit, FitError> {
    const MODEL: &str = "straight line";
    let n = x.len();
    if n < 3 || y.len() != n || w.len() != n {
        return Err(FitError::TooFewPoints {
            model: MODEL,
            got: n.min(y.len()),
            need: 3,
        });
    }
    let sw: f64 = w.iter().sum();
    let xm = x.iter().zip(w).map(|(a, b)| a * b).sum::<f64>() / sw;
    let ym = y.iter().zip(w).map(|(a, b)| a * b).sum::<f64>() / sw;
    let sxx: f64 = x.iter().zip(w).map(|(a, b)| b * (a - xm).powi(2)).sum();
    if !(sxx > 0.0) || !sw.is_finite() {
        return Err(FitError::Singular { model: MODEL });
    }
    let sxy: f64 = x
        .iter()
        .zip(y)
        .zip(w)
        .map(|((a, c), b)| b * (a - xm) * (c - ym))
        .sum();
    let slope = sxy / sxx;
    let intercept = ym - slope * xm;
    let mut wss = 0.0;
    let mut ss = 0.0;
    for i in 0..n {
        let r = y[i] - intercept - slope * x[i];
        wss += w[i] * r * r;
        ss += r * r;
    }
    let s2 = wss / (n - 2) as f64;
    let var_b = s2 / sxx;
    let var_a = s2 * (1.0 / sw + xm * xm / sxx);
    let cov_ab = -s2 * xm / sxx;
    Ok(LinearFit {
        intercept,
        slope,
        covariance: [[var_a, cov_ab], [cov_ab, var_b]],
        rms_residual: (ss / n as f64).sqrt(),
        s2,
        sxx,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tls_recovers_a_steep_line_that_regression_would_miss() {
        // Points on x = 3 + 0.01 y (nearly vertical): y-on-x regression is ill-posed here.
        let pts: Vec<_> = (0..20)
            .map(|i| Vector2::new(3.0 + 0.01 * i as f64, i as f64))
            .collect();
        let line = tls_line(&pts, &vec![1.0; pts.len()]).unwrap();
        let expected = Vector2::new(0.01, 1.0).normalize();
        assert!((line.direction.dot(&expected).abs() - 1.0).abs() < 1e-12);
        assert!(line.rms_distance < 1e-12);
    }

    #[test]
    fn line_fit_matches_closed_form_textbook_example() {
        // Worked by hand from the normal equations: x̄ = 2, ȳ = 3, Sxx = 10, Sxy = 4.8,
        // so b = 0.48 and a = ȳ − b·x̄ = 2.04.
        let x = [0.0, 1.0, 2.0, 3.0, 4.0];
        let y = [2.1, 2.4, 3.0, 3.6, 3.9];
        let fit = fit_line(&x, &y, &[1.0; 5]).unwrap();
        assert!((fit.slope - 0.48).abs() < 1e-12, "{}", fit.slope);
        assert!((fit.intercept - 2.04).abs() < 1e-12);
        // s² = Σr²/(n−2); var(b) = s²/Sxx.
        let r: Vec<f64> = (0..5).map(|i| y[i] - 2.04 - 0.48 * x[i]).collect();
        let s2 = r.iter().map(|v| v * v).sum::<f64>() / 3.0;
        assert!((fit.covariance[1][1] - s2 / 10.0).abs() < 1e-15);
    }

    #[test]
    fn degenerate_inputs_are_errors_not_nans() {
        assert!(fit_line(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0], &[1.0; 3]).is_err());
        assert!(tls_line(&[Vector2::new(1.0, 1.0)], &[1.0]).is_err());
        let same = vec![Vector2::new(1.0, 1.0); 4];
        assert!(tls_line(&same, &[1.0; 4]).is_err());
    }
}
