//! Circles through 2-D points: the algebraic fits of Taubin (1991) and the hyper-accurate
//! fit of Al-Sharadqah & Chernov (Electron. J. Statist. 3:886, 2009), and a geometric
//! refinement by Levenberg–Marquardt that also gives the covariance of centre and radius.
//!
//! Both algebraic fits write the circle as A·z + B·x + C·y + D = 0 with z = x² + y² and
//! solve the generalized eigenproblem M a = η N a for the smallest positive η, where M is
//! the moment matrix of (z, x, y, 1) and N the fit's constraint matrix. The data are first
//! centred on their centroid and scaled to unit RMS radius, which makes the problem well
//! conditioned whatever the units. Kasa's simple fit is left out on purpose: on short arcs
//! it is badly biased towards small radii; these two are not, and the hyper fit has no
//! essential bias at order σ² at all.

use super::FitError;
use super::lm::{self, LeastSquares, LmOptions};
use nalgebra::{DMatrix, Matrix4, SymmetricEigen};

/// A circle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Circle {
    /// Centre (x, y).
    pub centre: [f64; 2],
    /// Radius, > 0.
    pub radius: f64,
}

/// The result of [`refine_circle`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CircleFit {
    /// The fitted circle.
    pub circle: Circle,
    /// Covariance of (centre x, centre y, radius): s²·(JᵀJ)⁻¹ with s² = Σr²/(n − 3);
    /// NaN with exactly three points, where nothing is left to estimate the scatter.
    pub covariance: [[f64; 3]; 3],
    /// RMS of the geometric residuals (distance to the centre − radius).
    pub rms: f64,
    /// Number of points used.
    pub points: usize,
}

/// Taubin's algebraic circle fit (Taubin, IEEE PAMI 13:1115, 1991), with the constraint
/// N = [[4z̄, 0, 0, 0], [0, 1, 0, 0], [0, 0, 1, 0], [0, 0, 0, 0]] on centred data. The
/// singular N eliminates D = −z̄·A, which leaves the smallest right singular vector of
/// the columns ((z − z̄)/(2√z̄), x, y), as in Chernov's published "TaubinSVD".
pub fn fit_circle_taubin(points: &[[f64; 2]]) -> Result<Circle, FitError> {
    const MODEL: &str = "circle (Taubin)";
    let data = Normalized::new(points, MODEL)?;
    let n = data.xy.len();
    let zmean = data.zmean();
    let scale = 2.0 * zmean.sqrt();
    let m = DMatrix::from_fn(n, 3, |i, j| {
        let [x, y] = data.xy[i];
        match j {
            0 => (x * x + y * y - zmean) / scale,
            1 => x,
            _ => y,
        }
    });
    let svd = m.svd(false, true);
    let vt = svd.v_t.ok_or(FitError::Singular { model: MODEL })?;
    let smallest = argmin(svd.singular_values.as_slice());
    let a = vt[(smallest, 0)] / scale;
    let coefficients = [a, vt[(smallest, 1)], vt[(smallest, 2)], -zmean * a];
    data.circle(coefficients, MODEL)
}

/// The hyper-accurate algebraic fit of Al-Sharadqah & Chernov (2009), constraint
/// N = 2·T − P (Taubin's doubled minus Pratt's) = [[8z̄, 0, 0, 2], [0, 1, 0, 0],
/// [0, 0, 1, 0], [2, 0, 0, 0]] on centred data. With Y = (ZᵀZ)^½ from the SVD of the
/// n × 4 design matrix Z, the problem becomes the symmetric Y·N⁻¹·Y b = η b, a = Y⁻¹ b;
/// when Z is numerically singular (points exactly on a circle) its null vector is the
/// answer.
pub fn fit_circle_hyper(points: &[[f64; 2]]) -> Result<Circle, FitError> {
    const MODEL: &str = "circle (hyper-accurate)";
    let data = Normalized::new(points, MODEL)?;
    let n = data.xy.len();
    let zmean = data.zmean();
    // Zero rows leave ZᵀZ unchanged and give the thin SVD all four singular vectors
    // when there are only three points.
    let z = DMatrix::from_fn(n.max(4), 4, |i, j| {
        let Some(&[x, y]) = data.xy.get(i) else {
            return 0.0;
        };
        match j {
            0 => x * x + y * y,
            1 => x,
            2 => y,
            _ => 1.0,
        }
    });
    let svd = z.svd(false, true);
    let vt = svd.v_t.ok_or(FitError::Singular { model: MODEL })?;
    let s = svd.singular_values;
    let (smax, imin) = (s.max(), argmin(s.as_slice()));
    let coefficients: [f64; 4] = if s[imin] < 1e-12 * smax {
        std::array::from_fn(|j| vt[(imin, j)])
    } else {
        let v = Matrix4::from_fn(|i, j| vt[(j, i)]);
        let sigma = Matrix4::from_diagonal(&nalgebra::Vector4::from_fn(|i, _| s[i]));
        let y = v * sigma * v.transpose();
        let y_inv = v
            * sigma
                .try_inverse()
                .ok_or(FitError::Singular { model: MODEL })?
            * v.transpose();
        let n_inv = Matrix4::new(
            0.0,
            0.0,
            0.0,
            0.5, //
            0.0,
            1.0,
            0.0,
            0.0, //
            0.0,
            0.0,
            1.0,
            0.0, //
            0.5,
            0.0,
            0.0,
            -2.0 * zmean,
        );
        let eig = SymmetricEigen::new(y * n_inv * y);
        let best = (0..4)
            .filter(|&k| eig.eigenvalues[k] > 0.0)
            .min_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]))
            .ok_or(FitError::Singular { model: MODEL })?;
        let a = y_inv * eig.eigenvectors.column(best);
        [a[0], a[1], a[2], a[3]]
    };
    data.circle(coefficients, MODEL)
}

/// Geometric circle fit: minimises Σ (‖pᵢ − c‖ − R)² by Levenberg–Marquardt
/// ([`lm::minimize`]) with the analytic Jacobian, from `start` (typically
/// [`fit_circle_hyper`]). The covariance is the usual s²·(JᵀJ)⁻¹.
pub fn refine_circle(points: &[[f64; 2]], start: Circle) -> Result<CircleFit, FitError> {
    const MODEL: &str = "circle (geometric)";
    check_points(points, MODEL)?;
    if !(start.centre.iter().all(|v| v.is_finite()) && start.radius.is_finite()) {
        return Err(FitError::NonFinite { model: MODEL });
    }
    let problem = Geometric { points };
    let report = lm::minimize(
        &problem,
        &[start.centre[0], start.centre[1], start.radius.abs()],
        &LmOptions::default(),
        MODEL,
    )?;
    let p = &report.params;
    if !(p[2] > 0.0) {
        return Err(FitError::Singular { model: MODEL });
    }
    let cov = report
        .covariance()
        .ok_or(FitError::Singular { model: MODEL })?;
    Ok(CircleFit {
        circle: Circle {
            centre: [p[0], p[1]],
            radius: p[2],
        },
        covariance: std::array::from_fn(|i| std::array::from_fn(|j| cov[(i, j)])),
        rms: (report.cost / points.len() as f64).sqrt(),
        points: points.len(),
    })
}

struct Geometric<'a> {
    points: &'a [[f64; 2]],
}

impl LeastSquares for Geometric<'_> {
    fn residual_count(&self) -> usize {
        self.points.len()
    }

    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        for (ri, [x, y]) in r.iter_mut().zip(self.points) {
            *ri = (x - p[0]).hypot(y - p[1]) - p[2];
        }
        true
    }

    fn jacobian(&self, p: &[f64], _r: &[f64], jac: &mut DMatrix<f64>) -> bool {
        for (i, [x, y]) in self.points.iter().enumerate() {
            let (dx, dy) = (x - p[0], y - p[1]);
            let d = dx.hypot(dy);
            // At the centre itself the distance has no gradient; 0 is its subgradient.
            let (ux, uy) = if d > 0.0 {
                (dx / d, dy / d)
            } else {
                (0.0, 0.0)
            };
            jac[(i, 0)] = -ux;
            jac[(i, 1)] = -uy;
            jac[(i, 2)] = -1.0;
        }
        true
    }
}

fn check_points(points: &[[f64; 2]], model: &'static str) -> Result<(), FitError> {
    if points.len() < 3 {
        return Err(FitError::TooFewPoints {
            model,
            got: points.len(),
            need: 3,
        });
    }
    if points.iter().flatten().any(|v| !v.is_finite()) {
        return Err(FitError::NonFinite { model });
    }
    Ok(())
}

fn argmin(values: &[f64]) -> usize {
    (0..values.len())
        .min_by(|&a, &b| values[a].total_cmp(&values[b]))
        .unwrap_or(0)
}

/// Points centred on their centroid and divided by their RMS distance from it.
struct Normalized {
    xy: Vec<[f64; 2]>,
    centroid: [f64; 2],
    scale: f64,
}

impl Normalized {
    fn new(points: &[[f64; 2]], model: &'static str) -> Result<Self, FitError> {
        check_points(points, model)?;
        let n = points.len() as f64;
        let cx = points.iter().map(|p| p[0]).sum::<f64>() / n;
        let cy = points.iter().map(|p| p[1]).sum::<f64>() / n;
        let ms = points
            .iter()
            .map(|p| (p[0] - cx).powi(2) + (p[1] - cy).powi(2))
            .sum::<f64>()
            / n;
        let scale = ms.sqrt();
        if !(scale > 0.0) || !scale.is_finite() {
            return Err(FitError::Singular { model });
        }
        let xy = points
            .iter()
            .map(|p| [(p[0] - cx) / scale, (p[1] - cy) / scale])
            .collect();
        Ok(Normalized {
            xy,
            centroid: [cx, cy],
            scale,
        })
    }

    fn zmean(&self) -> f64 {
        self.xy.iter().map(|[x, y]| x * x + y * y).sum::<f64>() / self.xy.len() as f64
    }

    /// The circle A·z + B·x + C·y + D = 0 back in the original units. A ≈ 0 is a line
    /// (collinear points), which no circle fits.
    fn circle(&self, [a, b, c, d]: [f64; 4], model: &'static str) -> Result<Circle, FitError> {
        let norm = (a * a + b * b + c * c + d * d).sqrt();
        if !(a.abs() > 1e-12 * norm) {
            return Err(FitError::Singular { model });
        }
        let centre = [-b / (2.0 * a), -c / (2.0 * a)];
        let r2 = (b * b + c * c - 4.0 * a * d) / (4.0 * a * a);
        if !(r2 > 0.0) || !r2.is_finite() {
            return Err(FitError::Singular { model });
        }
        Ok(Circle {
            centre: [
                self.centroid[0] + self.scale * centre[0],
                self.centroid[1] + self.scale * centre[1],
            ],
            radius: self.scale * r2.sqrt(),
        })
    }
}

#[cfg(test)]
mod tests;
