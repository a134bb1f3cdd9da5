//! Refining the lattice constant(s) over all indexed rings by least squares: 1/d² is
//! linear in 1/a² (and 1/c²), so the fit is linear in those, weighted by the covariance of
//! 1/d² from the rings' own radii. The voltage, distance and scale the rings share cannot
//! average out over rings: the budget follows each of them through to a and c by the chain
//! rule, so they count in full, once (weighting by them as well would bias the estimate,
//! see [`refine_constant`]).

use super::index::{Indexing, MeasuredSpacing};
use super::{Family, Lattice};
use crate::optics::OpticsError;
use crate::uncertainty::{BudgetLine, Estimate, Input};
use nalgebra::DMatrix;

/// Spacings measured together, with the first-order model of their uncertainty:
/// d ≈ d̂ + J·(x − x̂) over independent inputs x (JCGM 100:2008 eq. 13 in matrix form).
#[derive(Debug, Clone, PartialEq)]
pub struct JointSpacings {
    /// The spacings, m.
    pub d_m: Vec<f64>,
    /// The independent inputs they were computed from (voltage, distance, scale, radii).
    pub inputs: Vec<Input>,
    /// ∂dᵢ/∂xₖ, spacings × inputs.
    pub jacobian: DMatrix<f64>,
}

impl JointSpacings {
    /// Covariance of the spacings, m², J·diag(u²)·Jᵀ.
    pub fn covariance(&self) -> DMatrix<f64> {
        let u2 = DMatrix::from_diagonal(&nalgebra::DVector::from_iterator(
            self.inputs.len(),
            self.inputs.iter().map(|i| i.u * i.u),
        ));
        &self.jacobian * u2 * self.jacobian.transpose()
    }

    /// Covariance of the spacings from the inputs that move one spacing alone (the rings'
    /// own radii), m²: what sets their ratios.
    pub fn own_covariance(&self) -> DMatrix<f64> {
        let n = self.d_m.len();
        DMatrix::from_fn(n, n, |i, j| {
            (0..self.inputs.len())
                .filter(|&k| self.own(k, i) && self.own(k, j))
                .map(|k| self.jacobian[(i, k)] * self.jacobian[(j, k)] * self.inputs[k].u.powi(2))
                .sum()
        })
    }

    /// Whether input `k` moves spacing `i` alone.
    fn own(&self, k: usize, i: usize) -> bool {
        let col = self.jacobian.column(k);
        col[i] != 0.0
            && col
                .iter()
                .enumerate()
                .all(|(j, &v)| j == i || v.abs() <= 1e-12 * col[i].abs())
    }

    /// The standard uncertainty of spacing `i` from the inputs that move it alone (its own
    /// radius), m: what changes its ratio to the other spacings.
    pub fn own_u_m(&self, i: usize) -> f64 {
        (0..self.inputs.len())
            .filter(|&k| self.own(k, i))
            .map(|k| (self.jacobian[(i, k)] * self.inputs[k].u).powi(2))
            .sum::<f64>()
            .sqrt()
    }

    /// The spacings with their own uncertainties, for [`super::index_rings`].
    pub fn for_indexing(&self) -> Vec<MeasuredSpacing> {
        (0..self.d_m.len())
            .map(|i| MeasuredSpacing {
                d_m: self.d_m[i],
                u_m: self.own_u_m(i),
            })
            .collect()
    }
}

/// A refined constant compared with a given one.
#[derive(Debug, Clone, PartialEq)]
pub struct Comparison {
    /// "a" or "c".
    pub name: &'static str,
    /// The given value, m.
    pub given_m: f64,
    /// Its standard uncertainty where it was given, m.
    pub given_u_m: Option<f64>,
    /// Refined minus given, m.
    pub difference_m: f64,
    /// The difference over the combined standard uncertainty.
    pub z: f64,
}

/// The outcome of [`refine_constant`].
#[derive(Debug, Clone, PartialEq)]
pub struct Refinement {
    /// Lattice constant a, m, with budget.
    pub a: Estimate,
    /// Lattice constant c, m, where hexagonal rings with l ≠ 0 determine it.
    pub c: Option<Estimate>,
    /// Correlation coefficient of a and c.
    pub correlation_ac: Option<f64>,
    /// χ² of the fit with the full covariance.
    pub chi2: f64,
    /// Degrees of freedom, rings − constants.
    pub dof: usize,
    /// P(χ²_ν ≥ χ²), where ν > 0.
    pub p_value: Option<f64>,
    /// √(χ²/ν) when above 1 (else 1): the factor the rings' own uncertainties were
    /// enlarged by in the budget to match their scatter.
    pub birge_ratio: f64,
    /// d/d_fit − 1 of each ring, in input order.
    pub residuals_rel: Vec<f64>,
    /// The refined constants against the given ones.
    pub comparison: Vec<Comparison>,
    /// Things the user should know.
    pub warnings: Vec<String>,
}

/// Refines a (and c for hexagonal hk.l, when rings with l ≠ 0 and l = 0 are both
/// indexed) by least squares on 1/d² weighted by the rings' own covariance, with every
/// input, shared or not, in the budget; the constants of `prior`, if any, are only
/// compared with.
pub fn refine_constant(
    spacings: &JointSpacings,
    indexing: &Indexing,
    prior: &Lattice,
) -> Result<Refinement, OpticsError> {
    let n = spacings.d_m.len();
    let refl = &indexing.best.reflections;
    if refl.len() != n || spacings.jacobian.nrows() != n {
        return Err(OpticsError::BadInput(format!(
            "{} spacings, {} indexed reflections and {} Jacobian rows do not match",
            n,
            refl.len(),
            spacings.jacobian.nrows()
        )));
    }
    if spacings.jacobian.ncols() != spacings.inputs.len() {
        return Err(OpticsError::BadInput(
            "the spacings' Jacobian does not match their inputs".into(),
        ));
    }
    if spacings.d_m.iter().any(|d| !(*d > 0.0 && d.is_finite())) {
        return Err(OpticsError::BadInput("spacings must be > 0".into()));
    }
    let family = indexing.family;
    let mut warnings = Vec::new();
    let with_c =
        family == Family::Hex && indexing.c_over_a.is_some() && refl.iter().any(|r| r.l != 0);
    if family == Family::Hex && indexing.c_over_a.is_some() && !with_c {
        warnings.push("c was not refined: no ring with l ≠ 0 was indexed".to_string());
    }
    let p = if with_c { 2 } else { 1 };
    if n < p {
        return Err(OpticsError::Unsolvable(format!(
            "refining a and c needs at least two rings, got {n}"
        )));
    }
    // 1/d² = G·x with x = (1/a²[, 1/c²]).
    let g = DMatrix::from_fn(n, p, |i, j| match (family.is_cubic(), j) {
        (true, _) => refl[i].m as f64,
        (false, 0) => 4.0 / 3.0 * refl[i].m as f64,
        (false, _) => (refl[i].l as f64).powi(2),
    });
    let q = DMatrix::from_fn(n, 1, |i, _| spacings.d_m[i].powi(-2));
    let dq_dd: Vec<f64> = spacings.d_m.iter().map(|d| -2.0 * d.powi(-3)).collect();
    // Weighted by the rings' own uncertainties only. The inputs every ring shares
    // (voltage, distance, scale) scale all spacings together and say nothing about which
    // ring to trust; put into the weights, they pull a GLS estimate below every ring's
    // own value when the rings scatter (Peelle's Pertinent Puzzle; D'Agostini, Nucl.
    // Instrum. Methods A 346:306, 1994). They reach a and c through the chain rule below.
    let cov_d = spacings.own_covariance();
    let cov_q = DMatrix::from_fn(n, n, |i, j| dq_dd[i] * cov_d[(i, j)] * dq_dd[j]);
    let w = cov_q.cholesky().map(|c| c.inverse()).ok_or_else(|| {
        OpticsError::Unsolvable(
            "the spacings' covariance is singular: every ring needs its own radius \
             uncertainty"
                .into(),
        )
    })?;
    let gtw = g.transpose() * &w;
    let normal_inv = (&gtw * &g).try_inverse().ok_or_else(|| {
        OpticsError::Unsolvable(
            "these rings do not determine both a and c (rings with l = 0 and l ≠ 0 are \
             needed)"
                .into(),
        )
    })?;
    let solve = &normal_inv * &gtw; // p × n
    let x = &solve * &q;
    if x.iter().any(|v| !(*v > 0.0)) {
        return Err(OpticsError::Unsolvable(
            "the fitted 1/a² or 1/c² is not positive: the indexing is inconsistent".into(),
        ));
    }
    let resid = &q - &g * &x;
    let chi2 = (resid.transpose() * &w * &resid)[(0, 0)].max(0.0);
    let dof = n - p;
    let p_value = (dof > 0).then(|| super::chi2_survival(chi2, dof));
    let birge_ratio = if dof > 0 {
        (chi2 / dof as f64).sqrt().max(1.0)
    } else {
        1.0
    };
    if p_value.is_some_and(|pv| pv < super::index::FIT_P_MIN) {
        warnings.push(format!(
            "the rings scatter {birge_ratio:.1}× more about the refined lattice than their \
             own uncertainties allow; those were enlarged to match"
        ));
    }
    let fitted = &g * &x;
    let residuals_rel = (0..n)
        .map(|i| (fitted[(i, 0)] / q[(i, 0)]).sqrt() - 1.0)
        .collect();

    // Chain rule: constant k = x_k^(−½), ∂k/∂d_i = −½ k³ · solve[k,i] · dq_i/dd_i, then
    // through the Jacobian to every input.
    let k_inputs = spacings.inputs.len();
    let own: Vec<bool> = (0..k_inputs)
        .map(|k| (0..n).any(|i| spacings.own(k, i)))
        .collect();
    let u_eff: Vec<f64> = spacings
        .inputs
        .iter()
        .zip(&own)
        .map(|(inp, &o)| if o { inp.u * birge_ratio } else { inp.u })
        .collect();
    let mut sens: Vec<Vec<f64>> = Vec::new();
    let mut values = Vec::new();
    for k in 0..p {
        let value = x[(k, 0)].powf(-0.5);
        let dk_dd: Vec<f64> = (0..n)
            .map(|i| -0.5 * value.powi(3) * solve[(k, i)] * dq_dd[i])
            .collect();
        sens.push(
            (0..k_inputs)
                .map(|c| (0..n).map(|i| dk_dd[i] * spacings.jacobian[(i, c)]).sum())
                .collect(),
        );
        values.push(value);
    }
    let estimate = |k: usize| Estimate {
        value: values[k],
        u: sens[k]
            .iter()
            .zip(&u_eff)
            .map(|(s, u)| (s * u).powi(2))
            .sum::<f64>()
            .sqrt(),
        budget: budget(&spacings.inputs, &sens[k], &u_eff),
    };
    let a = estimate(0);
    let c = with_c.then(|| estimate(1));
    let correlation_ac = c.as_ref().and_then(|c| {
        let cov: f64 = (0..k_inputs)
            .map(|k| sens[0][k] * sens[1][k] * u_eff[k] * u_eff[k])
            .sum();
        (a.u > 0.0 && c.u > 0.0).then(|| cov / (a.u * c.u))
    });
    let mut comparison = Vec::new();
    for (name, est, given, given_u) in [
        ("a", Some(&a), prior.a_m, prior.u_a_m),
        ("c", c.as_ref(), prior.c_m, prior.u_c_m),
    ] {
        if let (Some(est), Some(given)) = (est, given) {
            let difference_m = est.value - given;
            let combined = (est.u.powi(2) + given_u.unwrap_or(0.0).powi(2)).sqrt();
            comparison.push(Comparison {
                name,
                given_m: given,
                given_u_m: given_u,
                difference_m,
                z: difference_m / combined,
            });
        }
    }
    Ok(Refinement {
        a,
        c,
        correlation_ac,
        chi2,
        dof,
        p_value,
        birge_ratio,
        residuals_rel,
        comparison,
        warnings,
    })
}

/// A line per input, or one per group of inputs (independent, so in quadrature).
fn budget(inputs: &[Input], sens: &[f64], u: &[f64]) -> Vec<BudgetLine> {
    let mut lines: Vec<BudgetLine> = Vec::new();
    let mut group_lines: Vec<(String, usize, f64)> = Vec::new();
    for (k, input) in inputs.iter().enumerate() {
        let contribution = (sens[k] * u[k]).abs();
        match &input.group {
            None => lines.push(BudgetLine {
                input: input.name.clone(),
                sensitivity: Some(sens[k]),
                contribution,
            }),
            Some(g) => match group_lines.iter_mut().find(|(name, _, _)| name == g) {
                Some((_, _, var)) => *var += contribution * contribution,
                None => {
                    group_lines.push((g.clone(), lines.len(), contribution * contribution));
                    lines.push(BudgetLine {
                        input: g.clone(),
                        sensitivity: None,
                        contribution: 0.0,
                    });
                }
            },
        }
    }
    for (_, at, var) in group_lines {
        lines[at].contribution = var.sqrt();
    }
    lines
}
