//! Levenberg–Marquardt least squares after Moré (1978, "The Levenberg–Marquardt
//! algorithm: implementation and theory", Lecture Notes in Mathematics 630): the step
//! solves the damped problem min ‖J h + r‖² + μ‖D h‖² by QR (never the normal
//! equations, which square the condition number), D is Moré's adaptive column scaling
//! D_j = max(D_j, ‖J_j‖), and μ follows the gain ratio with Nielsen's (1999) update,
//! which acts as the trust-region control. The covariance of the parameters is
//! (JᵀJ)⁻¹·s² with s² = Σr²/(m − n). [`minimize_bounded`] adds per-parameter bounds by
//! smooth transformation (see [`bounds`]).

mod bounds;
#[cfg(test)]
mod tests;

pub use bounds::{Bounds, Limit, minimize_bounded};

use super::FitError;
use nalgebra::{DMatrix, DVector};

/// A least-squares problem: residuals r(p) of length `residual_count`, optionally with an
/// analytic Jacobian.
pub trait LeastSquares {
    /// Number of residuals m.
    fn residual_count(&self) -> usize;

    /// Fills `r` (length m) with the residuals at `p`; returns false where the model
    /// cannot be evaluated (the step is then rejected as if it increased the cost).
    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool;

    /// Fills `jac` (m × n) with ∂r_i/∂p_j. The default uses forward differences; models
    /// with a cheap analytic Jacobian should override it.
    fn jacobian(&self, p: &[f64], r: &[f64], jac: &mut DMatrix<f64>) -> bool {
        forward_difference_jacobian(self, p, r, jac)
    }
}

/// Forward-difference Jacobian with steps √ε·max(|p_j|, 1e-8·scale) (common practice).
pub fn forward_difference_jacobian<P: LeastSquares + ?Sized>(
    problem: &P,
    p: &[f64],
    r: &[f64],
    jac: &mut DMatrix<f64>,
) -> bool {
    let m = r.len();
    let mut pp = p.to_vec();
    let mut rr = vec![0.0; m];
    let eps = f64::EPSILON.sqrt();
    for j in 0..p.len() {
        let h = eps * p[j].abs().max(eps);
        pp[j] = p[j] + h;
        if !problem.residuals(&pp, &mut rr) {
            // One-sided failure: try the other side before giving up.
            pp[j] = p[j] - h;
            if !problem.residuals(&pp, &mut rr) {
                return false;
            }
            for i in 0..m {
                jac[(i, j)] = (r[i] - rr[i]) / h;
            }
        } else {
            for i in 0..m {
                jac[(i, j)] = (rr[i] - r[i]) / h;
            }
        }
        pp[j] = p[j];
    }
    true
}

/// Stopping tolerances and limits.
#[derive(Debug, Clone, Copy)]
pub struct LmOptions {
    /// Stop when both the actual and predicted relative reductions of Σr² are below this.
    pub ftol: f64,
    /// Stop when the scaled step is below xtol·(‖D p‖ + xtol).
    pub xtol: f64,
    /// Stop when the largest scaled gradient component is below this.
    pub gtol: f64,
    /// Most Jacobian evaluations (iterations).
    pub max_iterations: usize,
}

impl Default for LmOptions {
    fn default() -> Self {
        // MINPACK's defaults for ftol/xtol are √ε; tighter values cost a few iterations
        // and matter for the certified NIST StRD digits.
        LmOptions {
            ftol: 1e-15,
            xtol: 1e-15,
            gtol: 1e-15,
            max_iterations: 400,
        }
    }
}

/// Which convergence test stopped the iteration.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Convergence {
    /// The sum of squares stopped decreasing (relative reduction below ftol).
    SmallReduction,
    /// The step became negligible compared with the parameters.
    SmallStep,
    /// The gradient vanished.
    SmallGradient,
    /// The residuals are all zero.
    ZeroResidual,
}

/// The outcome of a converged fit.
#[derive(Debug, Clone)]
pub struct LmReport {
    /// Fitted parameters.
    pub params: Vec<f64>,
    /// Residual sum of squares Σr².
    pub cost: f64,
    /// Residuals at the solution.
    pub residuals: Vec<f64>,
    /// Iterations used.
    pub iterations: usize,
    /// Why it stopped.
    pub reason: Convergence,
    /// (JᵀJ)⁻¹ at the solution; None when J is rank deficient there.
    pub inverse_jtj: Option<DMatrix<f64>>,
    /// s² = Σr²/(m − n).
    pub s2: f64,
    /// Parameters that ended on a bound of [`minimize_bounded`] (always empty from
    /// [`minimize`]); when any has, no covariance is reported.
    pub at_bound: Vec<usize>,
}

impl LmReport {
    /// Parameter covariance (JᵀJ)⁻¹·s², the usual estimate when the residual scale is
    /// unknown.
    pub fn covariance(&self) -> Option<DMatrix<f64>> {
        self.inverse_jtj.as_ref().map(|c| c * self.s2)
    }

    /// Standard uncertainties √diag of [`covariance`](Self::covariance).
    pub fn std_errors(&self) -> Option<Vec<f64>> {
        self.covariance()
            .map(|c| (0..c.nrows()).map(|i| c[(i, i)].max(0.0).sqrt()).collect())
    }
}

/// Largest cosine between the residuals and a Jacobian column that still counts as a
/// minimum when no step lowers the cost. Forward differences leave errors near √ε in J,
/// so true minima sit far below this; a wrong Jacobian or a non-smooth model sits above.
const STALL_COSINE: f64 = 1e-3;

/// Minimises Σ r(p)² from `start`.
///
/// A fit that runs out of iterations, or whose damping grows without bound because no
/// step lowers the cost, returns [`FitError::NotConverged`] saying which and the sum of
/// squares it had reached.
pub fn minimize<P: LeastSquares + ?Sized>(
    problem: &P,
    start: &[f64],
    options: &LmOptions,
    model: &'static str,
) -> Result<LmReport, FitError> {
    let n = start.len();
    let m = problem.residual_count();
    if m < n || n == 0 {
        return Err(FitError::TooFewPoints {
            model,
            got: m,
            need: n.max(1),
        });
    }
    let mut p = DVector::from_column_slice(start);
    let mut r = DVector::zeros(m);
    if !problem.residuals(p.as_slice(), r.as_mut_slice()) || !all_finite(r.as_slice()) {
        return Err(FitError::NonFinite { model });
    }
    let mut cost = r.norm_squared();
    let mut jac = DMatrix::zeros(m, n);
    let mut scale = DVector::<f64>::zeros(n);
    let mut mu = 0.0;
    let mut nu = 2.0;
    let mut trial_p = DVector::zeros(n);
    let mut trial_r = DVector::zeros(m);

    for iteration in 1..=options.max_iterations {
        if cost == 0.0 {
            return finish(problem, p, r, 0.0, iteration, Convergence::ZeroResidual);
        }
        if !problem.jacobian(p.as_slice(), r.as_slice(), &mut jac) || !all_finite(jac.as_slice()) {
            return Err(FitError::NonFinite { model });
        }
        for j in 0..n {
            let norm = jac.column(j).norm();
            scale[j] = scale[j].max(norm);
            if scale[j] == 0.0 {
                scale[j] = 1.0;
            }
        }
        let gradient = jac.transpose() * &r;
        let gmax = (0..n)
            .map(|j| (gradient[j] / scale[j]).abs())
            .fold(0.0, f64::max)
            / cost.sqrt();
        if gmax <= options.gtol {
            return finish(problem, p, r, cost, iteration, Convergence::SmallGradient);
        }
        let qr = jac.clone().qr();
        let rmat = qr.r();
        let qtr = qr.q().transpose() * &r;
        if iteration == 1 {
            // Nielsen's start: μ0 = τ·max diag(JᵀJ), here relative to the scaling.
            mu = 1e-3
                * (0..n)
                    .map(|j| (rmat.column(j).norm_squared()) / (scale[j] * scale[j]))
                    .fold(0.0, f64::max);
        }
        // Inner loop: shrink the trust region (raise μ) until a step reduces the cost.
        loop {
            let Some(step) = damped_step(&rmat, &qtr, &scale, mu) else {
                mu = (mu * nu).max(f64::MIN_POSITIVE);
                nu *= 2.0;
                if !mu.is_finite() {
                    return Err(FitError::Singular { model });
                }
                continue;
            };
            trial_p.copy_from(&p);
            trial_p += &step;
            let ok = problem.residuals(trial_p.as_slice(), trial_r.as_mut_slice())
                && all_finite(trial_r.as_slice());
            let trial_cost = if ok {
                trial_r.norm_squared()
            } else {
                f64::INFINITY
            };
            let jh = &jac * &step;
            let predicted = cost - (&r + &jh).norm_squared();
            let actual = cost - trial_cost;
            let rho = if predicted > 0.0 {
                actual / predicted
            } else {
                -1.0
            };
            let scaled_step = step.component_mul(&scale).norm();
            let scaled_p = p.component_mul(&scale).norm();
            if rho > 0.0 {
                p.copy_from(&trial_p);
                r.copy_from(&trial_r);
                let old_cost = cost;
                cost = trial_cost;
                mu *= (1.0 / 3.0f64).max(1.0 - (2.0 * rho - 1.0).powi(3));
                nu = 2.0;
                if actual.abs() <= options.ftol * old_cost && predicted <= options.ftol * old_cost {
                    return finish(problem, p, r, cost, iteration, Convergence::SmallReduction);
                }
                if scaled_step <= options.xtol * (scaled_p + options.xtol) {
                    return finish(problem, p, r, cost, iteration, Convergence::SmallStep);
                }
                break;
            }
            if scaled_step <= options.xtol * (scaled_p + options.xtol) {
                // The region has shrunk to nothing without a decrease. At a minimum the
                // residuals are orthogonal to J to working precision; if they are not,
                // J disagrees with the residuals and "converged" would be a lie. The
                // exception is residuals already below what J can resolve (√ε of the
                // model's scale ‖D p‖, forward differences' accuracy): near-exact data,
                // where r is rounding noise and its direction means nothing.
                let resolvable = cost.sqrt() > f64::EPSILON.sqrt() * scaled_p;
                if gmax > STALL_COSINE && resolvable {
                    return Err(FitError::NotConverged {
                        model,
                        reason: format!(
                            "no step reduces the sum of squares {cost:.6e} although the \
                             gradient is not small (cosine {gmax:.1e} after {iteration} \
                             iterations): the Jacobian may be wrong or the model not smooth"
                        ),
                    });
                }
                return finish(problem, p, r, cost, iteration, Convergence::SmallStep);
            }
            mu *= nu;
            nu *= 2.0;
            if !mu.is_finite() {
                return Err(FitError::NotConverged {
                    model,
                    reason: format!(
                        "no step reduces the sum of squares (stuck at {cost:.6e} after {iteration} iterations)"
                    ),
                });
            }
        }
    }
    Err(FitError::NotConverged {
        model,
        reason: format!(
            "{} iterations without meeting a convergence test (sum of squares {cost:.6e})",
            options.max_iterations
        ),
    })
}

/// Solves min ‖R h + Qᵀr‖² + μ‖D h‖² through the QR factorisation of [R; √μ D].
fn damped_step(
    rmat: &DMatrix<f64>,
    qtr: &DVector<f64>,
    scale: &DVector<f64>,
    mu: f64,
) -> Option<DVector<f64>> {
    let n = scale.len();
    let k = rmat.nrows();
    let mut a = DMatrix::zeros(k + n, n);
    a.view_mut((0, 0), (k, n)).copy_from(rmat);
    let sq = mu.sqrt();
    for j in 0..n {
        a[(k + j, j)] = sq * scale[j];
    }
    let mut b = DVector::zeros(k + n);
    for i in 0..k {
        b[i] = -qtr[i];
    }
    let qr = a.qr();
    let rhs = qr.q().transpose() * b;
    let step = qr.r().solve_upper_triangular(&rhs)?;
    all_finite(step.as_slice()).then_some(step)
}

fn finish<P: LeastSquares + ?Sized>(
    problem: &P,
    p: DVector<f64>,
    r: DVector<f64>,
    cost: f64,
    iterations: usize,
    reason: Convergence,
) -> Result<LmReport, FitError> {
    let n = p.len();
    let m = r.len();
    let mut jac = DMatrix::zeros(m, n);
    let inverse_jtj = if problem.jacobian(p.as_slice(), r.as_slice(), &mut jac) {
        inverse_normal_matrix(&jac)
    } else {
        None
    };
    let dof = m.saturating_sub(n);
    Ok(LmReport {
        params: p.as_slice().to_vec(),
        cost,
        residuals: r.as_slice().to_vec(),
        iterations,
        reason,
        inverse_jtj,
        s2: if dof > 0 { cost / dof as f64 } else { f64::NAN },
        at_bound: Vec::new(),
    })
}

/// (JᵀJ)⁻¹ = R⁻¹R⁻ᵀ from the QR factorisation of J, or None when J is rank deficient
/// (a diagonal of R below 1e-12 of the largest).
pub fn inverse_normal_matrix(jac: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let n = jac.ncols();
    let r = jac.clone().qr().r();
    let dmax = (0..n).map(|i| r[(i, i)].abs()).fold(0.0, f64::max);
    if (0..n).any(|i| !(r[(i, i)].abs() > 1e-12 * dmax)) {
        return None;
    }
    let rinv = r.solve_upper_triangular(&DMatrix::identity(n, n))?;
    Some(&rinv * rinv.transpose())
}

fn all_finite(v: &[f64]) -> bool {
    v.iter().all(|x| x.is_finite())
}
