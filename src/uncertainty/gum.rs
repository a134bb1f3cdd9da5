//! First-order propagation (JCGM 100:2008 §5, eq. 13 in matrix form: U_y = J U_x Jᵀ) with
//! sensitivity coefficients by central differences, and the uncertainty budget.

use nalgebra::DMatrix;
use rayon::prelude::*;

use super::{Correlation, Input, UncertaintyError, check_inputs, check_semidefinite};

/// One line of an uncertainty budget.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BudgetLine {
    /// The input's name, or the group's name for a group of inputs.
    pub input: String,
    /// Sensitivity coefficient ∂y/∂xᵢ; `None` for a group.
    pub sensitivity: Option<f64>,
    /// Contribution |cᵢ|·u(xᵢ) to u(y), in the output's unit; for a group, that of all its
    /// members together, (cᵀ U c)^½ over the group's covariance block (the root-sum-square of
    /// the members' contributions when they are uncorrelated).
    pub contribution: f64,
}

/// One output of a propagation.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Estimate {
    /// The model's output at the input estimates.
    pub value: f64,
    /// Combined standard uncertainty, with the correlations.
    pub u: f64,
    /// One line per input or group, in input order (a group where its first member is).
    pub budget: Vec<BudgetLine>,
}

/// The result of [`propagate`].
#[derive(Debug, Clone, PartialEq)]
pub struct Propagation {
    /// One estimate per model output.
    pub outputs: Vec<Estimate>,
    /// Covariance matrix of the outputs (outputs × outputs).
    pub covariance: DMatrix<f64>,
    /// Sensitivity coefficients ∂yₖ/∂xᵢ (outputs × inputs).
    pub jacobian: DMatrix<f64>,
}

impl Propagation {
    /// The correlation coefficient of outputs `a` and `b` (JCGM 100:2008 eq. F.2 read for
    /// outputs), or `None` when an index is out of range or an uncertainty is 0.
    pub fn correlation(&self, a: usize, b: usize) -> Option<f64> {
        let n = self.covariance.nrows();
        if a >= n || b >= n {
            return None;
        }
        let (va, vb) = (self.covariance[(a, a)], self.covariance[(b, b)]);
        (va > 0.0 && vb > 0.0).then(|| self.covariance[(a, b)] / (va * vb).sqrt())
    }
}

/// Step of the central difference for an input with u = 0, relative to |x|.
const ZERO_U_RELATIVE_STEP: f64 = 1e-6;
/// The least step relative to |x|, so that x ± h stay distinct numbers well above round-off.
const MIN_RELATIVE_STEP: f64 = 1e-9;

/// The step h of the central difference (f(x+h) − f(x−h))/2h for an input: u/10, small enough
/// that the curvature of a smooth model over ±h is negligible against its slope over ±u, large
/// enough that a model solved iteratively inside (a least-squares fit converged to a relative
/// tolerance well below u/(10|x|)) differentiates cleanly. An input with u = 0 still gets a
/// sensitivity, with h = 10⁻⁶·|x| (10⁻⁶ when x is 0 too: then no scale is known, and the
/// contribution is 0 whatever the coefficient).
pub fn derivative_step(input: &Input) -> f64 {
    let x = input.value.abs();
    let h = if input.u > 0.0 {
        input.u / 10.0
    } else {
        ZERO_U_RELATIVE_STEP * x
    };
    let h = h.max(MIN_RELATIVE_STEP * x);
    if h > 0.0 { h } else { ZERO_U_RELATIVE_STEP }
}

/// Propagates the inputs' uncertainties through `model` to first order (JCGM 100:2008 §5.1
/// and §5.2, eq. 13): value y = f(x), covariance U_y = J U_x Jᵀ with U_x built from the
/// standard uncertainties and `correlations`, and a budget per output.
///
/// Sensitivities are central differences with [`derivative_step`]. Where the model fails or
/// is not finite on one side of an estimate (a diffraction angle near 90°), a second-order
/// one-sided difference is used instead. A model error at the estimates, or on both sides of
/// one, is returned as is; problems of the inputs, the correlations or the model's outputs
/// come back as [`UncertaintyError`], which `E` must convert from.
pub fn propagate<E>(
    inputs: &[Input],
    correlations: &[Correlation],
    model: impl Fn(&[f64]) -> Result<Vec<f64>, E> + Sync,
) -> Result<Propagation, E>
where
    E: From<UncertaintyError> + Send,
{
    check_inputs(inputs)?;
    let n = inputs.len();
    let r = super::correlation_matrix(n, correlations)?;
    if !correlations.is_empty() {
        check_semidefinite(&r)?;
    }
    let x: Vec<f64> = inputs.iter().map(|i| i.value).collect();
    let y0 = model(&x)?;
    if y0.is_empty() {
        return Err(UncertaintyError::NoOutputs.into());
    }
    if let Some((output, &value)) = y0.iter().enumerate().find(|(_, v)| !v.is_finite()) {
        return Err(UncertaintyError::NonFiniteOutput { output, value }.into());
    }
    let m = y0.len();
    let mut jacobian = DMatrix::zeros(m, n);
    // Inputs are independent evaluations: where each is a re-fit (the profile kinds) they
    // spread over the cores.
    let columns: Vec<Result<Vec<f64>, E>> = (0..n)
        .into_par_iter()
        .map(|k| {
            let mut xk = x.clone();
            sensitivity(&model, &mut xk, k, &inputs[k], &y0)
        })
        .collect();
    for (k, column) in columns.into_iter().enumerate() {
        let column = column?;
        for (o, c) in column.into_iter().enumerate() {
            jacobian[(o, k)] = c;
        }
    }
    let cov_x = DMatrix::from_fn(n, n, |i, j| inputs[i].u * inputs[j].u * r[(i, j)]);
    let covariance = &jacobian * &cov_x * jacobian.transpose();
    let outputs = (0..m)
        .map(|o| Estimate {
            value: y0[o],
            u: covariance[(o, o)].max(0.0).sqrt(),
            budget: budget(inputs, &jacobian, &cov_x, o),
        })
        .collect();
    Ok(Propagation {
        outputs,
        covariance,
        jacobian,
    })
}

/// The outcome of one model evaluation away from the estimates.
enum Eval<E> {
    Ok(Vec<f64>),
    /// The model returned an error (kept, to be returned if nothing else works) or
    /// non-finite outputs (`None`).
    Failed(Option<E>),
}

fn eval_at<E: From<UncertaintyError>>(
    model: &impl Fn(&[f64]) -> Result<Vec<f64>, E>,
    x: &mut [f64],
    k: usize,
    xk: f64,
    m: usize,
) -> Result<Eval<E>, E> {
    let saved = x[k];
    x[k] = xk;
    let result = model(x);
    x[k] = saved;
    match result {
        Ok(y) if y.len() != m => Err(UncertaintyError::OutputCount {
            expected: m,
            got: y.len(),
        }
        .into()),
        Ok(y) if y.iter().all(|v| v.is_finite()) => Ok(Eval::Ok(y)),
        Ok(_) => Ok(Eval::Failed(None)),
        Err(e) => Ok(Eval::Failed(Some(e))),
    }
}

/// ∂y/∂x_k for every output.
fn sensitivity<E: From<UncertaintyError>>(
    model: &impl Fn(&[f64]) -> Result<Vec<f64>, E>,
    x: &mut [f64],
    k: usize,
    input: &Input,
    y0: &[f64],
) -> Result<Vec<f64>, E> {
    let m = y0.len();
    let h = derivative_step(input);
    let xk = x[k];
    let (xp, xm) = (xk + h, xk - h);
    let plus = eval_at(model, x, k, xp, m)?;
    let minus = eval_at(model, x, k, xm, m)?;
    Ok(match (plus, minus) {
        // The step actually taken, xp − xm, absorbs the rounding of xk ± h.
        (Eval::Ok(p), Eval::Ok(q)) => (0..m).map(|o| (p[o] - q[o]) / (xp - xm)).collect(),
        (Eval::Ok(p), Eval::Failed(_)) => one_sided(model, x, k, y0, &p, xp - xk, m)?,
        (Eval::Failed(_), Eval::Ok(q)) => one_sided(model, x, k, y0, &q, xm - xk, m)?,
        (Eval::Failed(a), Eval::Failed(b)) => {
            return Err(a.or(b).unwrap_or_else(|| {
                UncertaintyError::NoSensitivity {
                    name: input.name.clone(),
                    step: h,
                }
                .into()
            }));
        }
    })
}

/// A one-sided difference toward the side where the model works, step `s` (signed):
/// (−3f(x) + 4f(x+s) − f(x+2s))/2s, second order like the central difference; first order
/// (f(x+s) − f(x))/s when x + 2s fails too.
fn one_sided<E: From<UncertaintyError>>(
    model: &impl Fn(&[f64]) -> Result<Vec<f64>, E>,
    x: &mut [f64],
    k: usize,
    y0: &[f64],
    y1: &[f64],
    s: f64,
    m: usize,
) -> Result<Vec<f64>, E> {
    Ok(match eval_at(model, x, k, x[k] + 2.0 * s, m)? {
        Eval::Ok(y2) => (0..m)
            .map(|o| (-3.0 * y0[o] + 4.0 * y1[o] - y2[o]) / (2.0 * s))
            .collect(),
        Eval::Failed(_) => (0..m).map(|o| (y1[o] - y0[o]) / s).collect(),
    })
}

/// The budget of output `o`: a line per ungrouped input, one per group.
fn budget(
    inputs: &[Input],
    jacobian: &DMatrix<f64>,
    cov_x: &DMatrix<f64>,
    o: usize,
) -> Vec<BudgetLine> {
    let mut lines = Vec::new();
    let mut groups_done: Vec<&str> = Vec::new();
    for (k, input) in inputs.iter().enumerate() {
        match input.group.as_deref() {
            None => {
                let c = jacobian[(o, k)];
                lines.push(BudgetLine {
                    input: input.name.clone(),
                    sensitivity: Some(c),
                    contribution: (c * input.u).abs(),
                });
            }
            Some(g) if !groups_done.contains(&g) => {
                groups_done.push(g);
                let members: Vec<usize> = (k..inputs.len())
                    .filter(|&i| inputs[i].group.as_deref() == Some(g))
                    .collect();
                let variance: f64 = members
                    .iter()
                    .flat_map(|&a| members.iter().map(move |&b| (a, b)))
                    .map(|(a, b)| jacobian[(o, a)] * jacobian[(o, b)] * cov_x[(a, b)])
                    .sum();
                lines.push(BudgetLine {
                    input: g.to_string(),
                    sensitivity: None,
                    contribution: variance.max(0.0).sqrt(),
                });
            }
            Some(_) => {}
        }
    }
    lines
}
