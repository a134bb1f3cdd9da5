//! Per-parameter bounds by smooth transformation: the solver works on unconstrained
//! internal parameters q and the model sees p(q), which can never leave its interval.
//! The maps are MINUIT's (F. James, "MINUIT Function Minimization and Error Analysis,
//! Reference Manual", CERN Program Library D506, 1994, section "Parameter limits";
//! the one-sided square-root forms are Minuit2's Sqrt{Low,Up}ParameterTransformation,
//! also given in lmfit's "Bounds Implementation" documentation):
//!
//! - both bounds: p = lo + (hi − lo)(sin q + 1)/2,
//! - lower only:  p = lo − 1 + √(q² + 1),
//! - upper only:  p = hi + 1 − √(q² + 1).
//!
//! The covariance is carried back to p through the transformation's Jacobian,
//! C_p = T·C_q·T with T = diag(dp/dq).

use super::{LeastSquares, LmOptions, LmReport, minimize};
use crate::fit::FitError;
use nalgebra::DMatrix;

/// Internal offset from the stationary point of a bound, where a start on the bound is
/// placed: p then lies about 5e-7 of the interval (or of 1, for one-sided limits) inside.
const NUDGE: f64 = 1e-3;

/// The bound on one parameter.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum Limit {
    /// Unbounded.
    #[default]
    Free,
    /// p ≥ lower.
    Lower(f64),
    /// p ≤ upper.
    Upper(f64),
    /// lower ≤ p ≤ upper.
    Both(f64, f64),
}

impl Limit {
    fn check(&self) -> Result<(), String> {
        match *self {
            Limit::Free => Ok(()),
            Limit::Lower(v) | Limit::Upper(v) if v.is_finite() => Ok(()),
            Limit::Both(lo, hi) if lo.is_finite() && hi.is_finite() && lo < hi => Ok(()),
            other => Err(format!("{other:?} is not a finite, non-empty interval")),
        }
    }

    /// Whether `p` satisfies the limit (bounds included).
    pub fn contains(&self, p: f64) -> bool {
        match *self {
            Limit::Free => p.is_finite(),
            Limit::Lower(lo) => p >= lo,
            Limit::Upper(hi) => p <= hi,
            Limit::Both(lo, hi) => p >= lo && p <= hi,
        }
    }

    /// p(q).
    fn external(&self, q: f64) -> f64 {
        match *self {
            Limit::Free => q,
            Limit::Lower(lo) => lo - 1.0 + (q * q + 1.0).sqrt(),
            Limit::Upper(hi) => hi + 1.0 - (q * q + 1.0).sqrt(),
            Limit::Both(lo, hi) => lo + (hi - lo) * (q.sin() + 1.0) / 2.0,
        }
    }

    /// dp/dq.
    fn derivative(&self, q: f64) -> f64 {
        match *self {
            Limit::Free => 1.0,
            Limit::Lower(_) => q / (q * q + 1.0).sqrt(),
            Limit::Upper(_) => -q / (q * q + 1.0).sqrt(),
            Limit::Both(lo, hi) => (hi - lo) * q.cos() / 2.0,
        }
    }

    /// Whether the parameter sits on its bound: dp/dq, relative to its largest value, is
    /// below the slope at a start placed on the bound.
    fn on_bound(&self, q: f64) -> bool {
        let slope = match *self {
            Limit::Free => 1.0,
            Limit::Lower(_) | Limit::Upper(_) => q.abs() / (q * q + 1.0).sqrt(),
            Limit::Both(..) => q.cos().abs(),
        };
        slope < 0.99 * NUDGE
    }

    /// q(p) for p inside the limit. On a bound dp/dq vanishes and the parameter could
    /// never leave it, so q is moved NUDGE off that stationary point.
    fn internal(&self, p: f64) -> f64 {
        match *self {
            Limit::Free => p,
            Limit::Lower(lo) => ((p - lo + 1.0).powi(2) - 1.0).max(0.0).sqrt().max(NUDGE),
            Limit::Upper(hi) => ((hi - p + 1.0).powi(2) - 1.0).max(0.0).sqrt().max(NUDGE),
            Limit::Both(lo, hi) => {
                let q = (2.0 * (p - lo) / (hi - lo) - 1.0).clamp(-1.0, 1.0).asin();
                q.clamp(
                    -std::f64::consts::FRAC_PI_2 + NUDGE,
                    std::f64::consts::FRAC_PI_2 - NUDGE,
                )
            }
        }
    }
}

/// Bounds for every parameter of a fit, built from [`Bounds::free`] and refined per
/// parameter.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Bounds {
    limits: Vec<Limit>,
}

impl Bounds {
    /// No bounds on any of `n` parameters.
    pub fn free(n: usize) -> Self {
        Bounds {
            limits: vec![Limit::Free; n],
        }
    }

    /// Bounds from lower and upper arrays where ±∞ (or NaN) means "no bound", the
    /// convention of most least-squares libraries. The shorter array decides the length.
    pub fn from_arrays(lower: &[f64], upper: &[f64]) -> Self {
        let limits = lower
            .iter()
            .zip(upper)
            .map(|(&lo, &hi)| match (lo.is_finite(), hi.is_finite()) {
                (false, false) => Limit::Free,
                (true, false) => Limit::Lower(lo),
                (false, true) => Limit::Upper(hi),
                (true, true) => Limit::Both(lo, hi),
            })
            .collect();
        Bounds { limits }
    }

    /// Sets the limit of parameter `j`, growing the list with free parameters if needed.
    pub fn with(mut self, j: usize, limit: Limit) -> Self {
        if j >= self.limits.len() {
            self.limits.resize(j + 1, Limit::Free);
        }
        self.limits[j] = limit;
        self
    }

    /// Parameter `j` ≥ `lower`.
    pub fn lower(self, j: usize, lower: f64) -> Self {
        self.with(j, Limit::Lower(lower))
    }

    /// Parameter `j` ≤ `upper`.
    pub fn upper(self, j: usize, upper: f64) -> Self {
        self.with(j, Limit::Upper(upper))
    }

    /// `lower` ≤ parameter `j` ≤ `upper`.
    pub fn between(self, j: usize, lower: f64, upper: f64) -> Self {
        self.with(j, Limit::Both(lower, upper))
    }

    /// The per-parameter limits.
    pub fn limits(&self) -> &[Limit] {
        &self.limits
    }

    fn external(&self, q: &[f64], p: &mut [f64]) {
        for ((l, &qj), pj) in self.limits.iter().zip(q).zip(p) {
            *pj = l.external(qj);
        }
    }
}

/// The problem seen in internal parameters: p(q) goes to the model and the model's
/// Jacobian (analytic or not) is chained with dp/dq.
struct Transformed<'a, P: ?Sized> {
    problem: &'a P,
    bounds: &'a Bounds,
}

impl<P: LeastSquares + ?Sized> LeastSquares for Transformed<'_, P> {
    fn residual_count(&self) -> usize {
        self.problem.residual_count()
    }

    fn residuals(&self, q: &[f64], r: &mut [f64]) -> bool {
        let mut p = vec![0.0; q.len()];
        self.bounds.external(q, &mut p);
        self.problem.residuals(&p, r)
    }

    fn jacobian(&self, q: &[f64], r: &[f64], jac: &mut DMatrix<f64>) -> bool {
        let mut p = vec![0.0; q.len()];
        self.bounds.external(q, &mut p);
        if !self.problem.jacobian(&p, r, jac) {
            return false;
        }
        for (j, (l, &qj)) in self.bounds.limits.iter().zip(q).enumerate() {
            jac.column_mut(j).scale_mut(l.derivative(qj));
        }
        true
    }
}

/// Minimises Σ r(p)² from `start` with every parameter kept within `bounds`.
///
/// The report's parameters and covariance are those of the original parameters p. A
/// parameter that ends on its bound is listed in [`LmReport::at_bound`] and the
/// covariance is then withheld: the linearised estimate (JᵀJ)⁻¹·s² ignores the
/// constraint and would overstate what the data say about it. Bounds of the wrong length or that are not
/// intervals, and start values outside their bounds, are [`FitError::Bounds`] errors.
pub fn minimize_bounded<P: LeastSquares + ?Sized>(
    problem: &P,
    start: &[f64],
    bounds: &Bounds,
    options: &LmOptions,
    model: &'static str,
) -> Result<LmReport, FitError> {
    let bad = |reason: String| FitError::Bounds { model, reason };
    if bounds.limits.len() != start.len() {
        return Err(bad(format!(
            "{} bounds given for {} parameters",
            bounds.limits.len(),
            start.len()
        )));
    }
    for (j, (l, &p)) in bounds.limits.iter().zip(start).enumerate() {
        l.check()
            .map_err(|e| bad(format!("bound of parameter {j}: {e}")))?;
        if !l.contains(p) {
            return Err(bad(format!(
                "start value {p} of parameter {j} lies outside its bound {l:?}"
            )));
        }
    }
    let q0: Vec<f64> = bounds
        .limits
        .iter()
        .zip(start)
        .map(|(l, &p)| l.internal(p))
        .collect();
    let inner = Transformed { problem, bounds };
    let mut report = minimize(&inner, &q0, options, model)?;
    let q = std::mem::take(&mut report.params);
    let mut p = vec![0.0; q.len()];
    bounds.external(&q, &mut p);
    let t: Vec<f64> = bounds
        .limits
        .iter()
        .zip(&q)
        .map(|(l, &qj)| l.derivative(qj))
        .collect();
    report.params = p;
    report.at_bound = (0..q.len())
        .filter(|&j| bounds.limits[j].on_bound(q[j]))
        .collect();
    report.inverse_jtj = match report.at_bound.is_empty() {
        true => report
            .inverse_jtj
            .map(|c| DMatrix::from_fn(c.nrows(), c.ncols(), |i, j| t[i] * c[(i, j)] * t[j])),
        false => None,
    };
    Ok(report)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn transformations_invert_and_their_derivatives_match_differences() {
        let cases = [
            (Limit::Lower(2.0), 7.5),
            (Limit::Upper(-1.0), -40.0),
            (Limit::Both(-3.0, 5.0), 1.25),
            (Limit::Free, 0.3),
        ];
        for (l, p) in cases {
            let q = l.internal(p);
            assert!(
                (l.external(q) - p).abs() < 1e-12 * p.abs().max(1.0),
                "{l:?}"
            );
            let h = 1e-6;
            let numeric = (l.external(q + h) - l.external(q - h)) / (2.0 * h);
            assert!((numeric - l.derivative(q)).abs() < 1e-8, "{l:?}");
        }
    }

    #[test]
    fn every_internal_value_maps_inside_the_bounds() {
        for l in [Limit::Lower(1.0), Limit::Upper(1.0), Limit::Both(-2.0, 0.5)] {
            for k in -200..=200 {
                let q = k as f64 * 0.37;
                assert!(l.contains(l.external(q)), "{l:?} at q = {q}");
            }
        }
    }

    #[test]
    fn a_start_on_a_bound_is_moved_off_the_stationary_point() {
        for (l, p) in [
            (Limit::Lower(2.0), 2.0),
            (Limit::Upper(2.0), 2.0),
            (Limit::Both(0.0, 1.0), 0.0),
            (Limit::Both(0.0, 1.0), 1.0),
        ] {
            let q = l.internal(p);
            assert!(
                l.derivative(q).abs() > 1e-4 && !l.on_bound(q),
                "{l:?} from {p}"
            );
            assert!((l.external(q) - p).abs() < 1e-6, "{l:?} from {p}");
        }
    }

    #[test]
    fn from_arrays_reads_infinities_as_missing_bounds() {
        let b = Bounds::from_arrays(
            &[f64::NEG_INFINITY, 0.0, f64::NEG_INFINITY, -1.0],
            &[f64::INFINITY, f64::INFINITY, 3.0, 1.0],
        );
        assert_eq!(
            b.limits(),
            &[
                Limit::Free,
                Limit::Lower(0.0),
                Limit::Upper(3.0),
                Limit::Both(-1.0, 1.0)
            ]
        );
        assert_eq!(Bounds::free(2).between(3, 0.0, 1.0).limits().len(), 4);
    }
}
