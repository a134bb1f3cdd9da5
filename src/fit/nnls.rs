//! Non-negative least squares, min ‖Ax − b‖ subject to x ≥ 0, by the active-set method of
//! Lawson & Hanson (1974, *Solving Least Squares Problems*, ch. 23), with Tikhonov
//! regularisation and a choice of its strength by the discrepancy principle.
//!
//! The active-set loop moves the variable with the largest gradient w = Aᵀ(b − Ax) into
//! the positive set, solves the unconstrained problem on that set by Householder QR, and
//! steps back along the segment towards it whenever a variable would turn negative. It
//! ends at the Kuhn–Tucker point: w ≤ 0 where x = 0, w = 0 where x > 0.

use super::FitError;
use nalgebra::{DMatrix, DVector};

/// A non-negative least-squares solution.
#[derive(Debug, Clone, PartialEq)]
pub struct Nnls {
    /// The solution, every entry ≥ 0.
    pub x: DVector<f64>,
    /// ‖Ax − b‖ of the data rows (for the regularised fits, without the penalty rows).
    pub residual_norm: f64,
    /// Outer iterations: how many times a variable entered the positive set.
    pub iterations: usize,
}

/// A regularised solution and how its strength was chosen.
#[derive(Debug, Clone, PartialEq)]
pub struct Regularized {
    /// The chosen λ (0 when no regularisation was possible, see `discrepancy_met`).
    pub lambda: f64,
    /// The solution at that λ; its `residual_norm` is the weighted one.
    pub solution: Nnls,
    /// Weighted χ² = Σ ((Ax − b)ᵢ/σᵢ)² at that λ.
    pub chi2: f64,
    /// The rule that chose λ, for the report.
    pub method: &'static str,
    /// False when even λ = 0 leaves χ² above the number of rows: the stated spreads are
    /// too small for the model (or the model is wrong), and the unregularised fit is
    /// returned.
    pub discrepancy_met: bool,
}

/// The difference operator order [`choose_lambda`] penalises: second differences
/// (curvature), which favour smooth distributions without pulling them towards zero.
pub const CHOOSE_LAMBDA_ORDER: usize = 2;

/// Non-negative least squares by Lawson & Hanson's active-set method.
///
/// Errors: [`FitError::Bounds`] for mismatched or empty dimensions, [`FitError::NonFinite`]
/// for NaN or infinite entries, [`FitError::NotConverged`] after 3n outer iterations
/// (Lawson & Hanson's own cap, from memory; in exact arithmetic the method ends in fewer).
pub fn nnls(a: &DMatrix<f64>, b: &DVector<f64>) -> Result<Nnls, FitError> {
    active_set(a, b, 3 * a.ncols(), "non-negative least squares")
}

/// Tikhonov-regularised NNLS: min ‖Ax − b‖² + λ²‖L x‖² with x ≥ 0, where L is the
/// identity (order 0), first differences (order 1) or second differences (order 2). It is
/// solved as plain NNLS of the augmented system [A; λL] x ≈ [b; 0].
pub fn nnls_regularized(
    a: &DMatrix<f64>,
    b: &DVector<f64>,
    lambda: f64,
    order: usize,
) -> Result<Nnls, FitError> {
    const MODEL: &str = "regularised non-negative least squares";
    if !(lambda >= 0.0 && lambda.is_finite()) {
        return Err(FitError::Bounds {
            model: MODEL,
            reason: format!("λ must be finite and ≥ 0, got {lambda}"),
        });
    }
    let l = difference_operator(a.ncols(), order, MODEL)?;
    if lambda == 0.0 || l.nrows() == 0 {
        return active_set(a, b, 3 * a.ncols(), MODEL);
    }
    check_dimensions(a, b, MODEL)?;
    let (m, n) = a.shape();
    let k = l.nrows();
    let mut aug = DMatrix::zeros(m + k, n);
    aug.rows_mut(0, m).copy_from(a);
    aug.rows_mut(m, k).copy_from(&(l * lambda));
    let mut baug = DVector::zeros(m + k);
    baug.rows_mut(0, m).copy_from(b);
    let mut fit = active_set(&aug, &baug, 3 * n, MODEL)?;
    fit.residual_norm = (a * &fit.x - b).norm();
    Ok(fit)
}

/// Regularised NNLS with λ chosen by the discrepancy principle (Morozov, 1966): the
/// largest λ whose weighted χ² = Σ ((Ax − b)ᵢ/σᵢ)² does not exceed m, the number of rows,
/// with second-difference smoothing ([`CHOOSE_LAMBDA_ORDER`]). λ is searched on a grid
/// of half-decades relative to ‖A/σ‖/‖L‖, then bisected in log λ to 0.1 %.
///
/// Why the discrepancy principle: the rows here are binned ring profiles whose per-bin
/// spread σᵢ is measured, not guessed. With known noise, "fit the data to within their
/// noise and no closer" is the most direct rule and needs no curve-shape heuristic. The
/// L-curve corner is ill-defined when the curve is flat or shows two corners, which
/// non-negativity tends to produce, and generalised cross-validation assumes the noise
/// level unknown and the solution linear in b, neither of which holds under x ≥ 0.
///
/// When χ² > m even at λ = 0 the unregularised NNLS is returned with
/// `discrepancy_met = false`; when χ² ≤ m up to the top of the grid (10⁴ times the
/// reference λ), that top λ is returned.
pub fn choose_lambda(
    a: &DMatrix<f64>,
    b: &DVector<f64>,
    sigma: &DVector<f64>,
) -> Result<Regularized, FitError> {
    const MODEL: &str = "regularisation strength (discrepancy principle)";
    const METHOD: &str = "discrepancy principle (Morozov): largest λ with χ² ≤ m";
    check_dimensions(a, b, MODEL)?;
    let m = a.nrows();
    if sigma.len() != m {
        return Err(FitError::Bounds {
            model: MODEL,
            reason: format!("{} spreads for {m} rows", sigma.len()),
        });
    }
    if let Some(i) = (0..m).find(|&i| !(sigma[i] > 0.0 && sigma[i].is_finite())) {
        return Err(FitError::Bounds {
            model: MODEL,
            reason: format!("spread of row {i} must be finite and > 0, got {}", sigma[i]),
        });
    }
    let aw = DMatrix::from_fn(m, a.ncols(), |i, j| a[(i, j)] / sigma[i]);
    let bw = b.component_div(sigma);
    let target = m as f64;
    let solve = |lambda: f64| -> Result<(Nnls, f64), FitError> {
        let fit = nnls_regularized(&aw, &bw, lambda, CHOOSE_LAMBDA_ORDER)?;
        let chi2 = fit.residual_norm.powi(2);
        Ok((fit, chi2))
    };
    let done = |lambda: f64, (solution, chi2): (Nnls, f64), met: bool| Regularized {
        lambda,
        solution,
        chi2,
        method: METHOD,
        discrepancy_met: met,
    };

    let unregularised = solve(0.0)?;
    if unregularised.1 > target {
        return Ok(done(0.0, unregularised, false));
    }
    let l = difference_operator(a.ncols(), CHOOSE_LAMBDA_ORDER, MODEL)?;
    if l.nrows() == 0 {
        // Too few unknowns for the operator: nothing to regularise.
        return Ok(done(0.0, unregularised, true));
    }
    let reference = aw.norm() / l.norm();
    let (mut lo, mut lo_fit) = (0.0, unregularised);
    let mut hi = None;
    for k in -16..=8 {
        let lambda = reference * 10f64.powf(k as f64 / 2.0);
        let trial = solve(lambda)?;
        if trial.1 > target {
            hi = Some(lambda);
            break;
        }
        (lo, lo_fit) = (lambda, trial);
    }
    let Some(mut hi) = hi else {
        return Ok(done(lo, lo_fit, true));
    };
    if lo == 0.0 {
        // Even the smallest grid λ (10⁻⁸ of the reference) overshoots: χ²(0) sits just
        // below m, and no λ worth the name meets the discrepancy.
        return Ok(done(0.0, lo_fit, true));
    }
    while hi / lo > 1.001 {
        let mid = (lo * hi).sqrt();
        let trial = solve(mid)?;
        if trial.1 > target {
            hi = mid;
        } else {
            (lo, lo_fit) = (mid, trial);
        }
    }
    Ok(done(lo, lo_fit, true))
}

/// The (n − order) × n forward-difference operator of the given order (0, 1 or 2).
fn difference_operator(
    n: usize,
    order: usize,
    model: &'static str,
) -> Result<DMatrix<f64>, FitError> {
    let stencil: &[f64] = match order {
        0 => &[1.0],
        1 => &[-1.0, 1.0],
        2 => &[1.0, -2.0, 1.0],
        _ => {
            return Err(FitError::Bounds {
                model,
                reason: format!("difference order must be 0, 1 or 2, got {order}"),
            });
        }
    };
    let rows = n.saturating_sub(order);
    Ok(DMatrix::from_fn(rows, n, |i, j| {
        j.checked_sub(i)
            .and_then(|k| stencil.get(k))
            .copied()
            .unwrap_or(0.0)
    }))
}

fn check_dimensions(
    a: &DMatrix<f64>,
    b: &DVector<f64>,
    model: &'static str,
) -> Result<(), FitError> {
    let (m, n) = a.shape();
    if m == 0 || n == 0 || b.len() != m {
        return Err(FitError::Bounds {
            model,
            reason: format!("A is {m} × {n} and b has {} rows", b.len()),
        });
    }
    if a.iter().chain(b.iter()).any(|v| !v.is_finite()) {
        return Err(FitError::NonFinite { model });
    }
    Ok(())
}

/// Lawson & Hanson's algorithm NNLS (1974, §23.3), stopping with NotConverged after `cap`
/// outer iterations.
fn active_set(
    a: &DMatrix<f64>,
    b: &DVector<f64>,
    cap: usize,
    model: &'static str,
) -> Result<Nnls, FitError> {
    check_dimensions(a, b, model)?;
    let n = a.ncols();
    // Gradients below this are rounding: ε·‖A‖·‖b‖ with a safety factor (common practice).
    let tol = 10.0 * f64::EPSILON * n as f64 * a.norm() * b.norm();
    let mut x = DVector::zeros(n);
    let mut positive = vec![false; n];
    // Variables whose entry failed (z_t ≤ 0 or a dependent column): L&H's guard against
    // cycling on rounding, cleared whenever x moves.
    let mut rejected = vec![false; n];
    let mut iterations = 0;
    loop {
        let w = a.tr_mul(&(b - a * &x));
        let entering = (0..n)
            .filter(|&j| !positive[j] && !rejected[j] && w[j] > tol)
            .max_by(|&i, &j| w[i].total_cmp(&w[j]));
        let Some(t) = entering else { break };
        if iterations == cap {
            return Err(FitError::NotConverged {
                model,
                reason: format!("{cap} active-set iterations without meeting the KKT test"),
            });
        }
        iterations += 1;
        positive[t] = true;
        let mut first = true;
        loop {
            let set: Vec<usize> = (0..n).filter(|&j| positive[j]).collect();
            let z = least_squares_on(a, b, &set);
            if first {
                let k = set.iter().position(|&j| j == t).unwrap_or(0);
                if z.as_ref().is_none_or(|z| z[k] <= 0.0) {
                    positive[t] = false;
                    rejected[t] = true;
                    break;
                }
            }
            let Some(z) = z else {
                // Dropping columns from an independent set keeps it independent, so this
                // only happens through rounding on a nearly dependent set.
                return Err(FitError::Singular { model });
            };
            first = false;
            if z.iter().all(|&v| v > 0.0) {
                for (k, &j) in set.iter().enumerate() {
                    x[j] = z[k];
                }
                rejected.fill(false);
                break;
            }
            // Step from x towards z as far as feasibility allows; the variable that
            // reaches zero first leaves the positive set.
            let (mut alpha, mut blocking) = (1.0, set[0]);
            for (k, &j) in set.iter().enumerate() {
                if z[k] <= 0.0 {
                    let ratio = x[j] / (x[j] - z[k]);
                    if ratio < alpha {
                        (alpha, blocking) = (ratio, j);
                    }
                }
            }
            for (k, &j) in set.iter().enumerate() {
                x[j] += alpha * (z[k] - x[j]);
                if j == blocking || x[j] <= 0.0 {
                    x[j] = 0.0;
                    positive[j] = false;
                }
            }
            rejected.fill(false);
        }
    }
    let residual_norm = (a * &x - b).norm();
    Ok(Nnls {
        x,
        residual_norm,
        iterations,
    })
}

/// Unconstrained least squares on the columns `set` by Householder QR; None when a
/// column is numerically dependent on the others.
fn least_squares_on(a: &DMatrix<f64>, b: &DVector<f64>, set: &[usize]) -> Option<DVector<f64>> {
    let sub = a.select_columns(set);
    if sub.nrows() < sub.ncols() {
        return None;
    }
    let qr = sub.clone().qr();
    let r = qr.r();
    for k in 0..set.len() {
        // |R_kk| is the part of column k orthogonal to the earlier ones.
        if !(r[(k, k)].abs() > 1e-12 * sub.column(k).norm()) {
            return None;
        }
    }
    let qtb = qr.q().tr_mul(b);
    r.solve_upper_triangular(&qtb)
}

#[cfg(test)]
mod tests;
