//! Propagation of uncertainty after the GUM (JCGM 100:2008): the law of propagation of
//! uncertainty (eq. 13) with sensitivity coefficients from central differences, and a budget
//! of contributions |cᵢ|·u(xᵢ) per input or group of inputs ([`propagate`]). On request, the
//! propagation of distributions by Monte Carlo after JCGM 101:2008 ([`monte_carlo`]), and the
//! check of the first-order result against it (JCGM 101:2008 §8, [`validate`]).
//!
//! A model is any `Fn(&[f64]) -> Result<Vec<f64>, E>` taking the input values in the order of
//! the [`Input`] slice and returning one or more outputs; it may be a least-squares fit inside.

mod gum;
mod monte_carlo;
mod validate;

pub use gum::{BudgetLine, Estimate, Propagation, derivative_step, propagate};
pub use monte_carlo::{
    COVERAGE_PROBABILITY, DEFAULT_TRIALS, MAX_FAILED_FRACTION, McEstimate, MonteCarlo, monte_carlo,
    recommended_trials,
};
pub use validate::{Validation, numerical_tolerance, validate};

use nalgebra::DMatrix;
use thiserror::Error;

/// The GUM coverage factor for about 95 % (95.45 %) with a normal output (JCGM 100:2008
/// §6.3.3), used for the expanded uncertainty that is reported.
pub const K_95: f64 = 2.0;

/// The coverage factor for exactly 95 % with a normal output, the 97.5 % quantile of the
/// standard normal distribution (JCGM 101:2008 §5.6, table in JCGM 100:2008 G.1). Use it,
/// not [`K_95`], to compare with a 95 % Monte Carlo interval in [`validate`].
pub const K_95_NORMAL: f64 = 1.959_963_984_540_054;

/// The probability distribution assigned to an input quantity (JCGM 101:2008 §6.4).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Distribution {
    /// Gaussian with the input's standard uncertainty.
    Normal,
    /// Uniform over value ± a, a = √3·u (JCGM 101:2008 §6.4.2).
    Rectangular,
}

/// One input quantity: its estimate, standard uncertainty and distribution.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Input {
    /// Name shown in the budget ("wavelength", "spot 3 x").
    pub name: String,
    /// Estimate, in the unit the model expects (SI base units by convention).
    pub value: f64,
    /// Standard uncertainty, same unit as `value`.
    pub u: f64,
    /// Distribution, for Monte Carlo; first-order propagation uses only `u`.
    pub distribution: Distribution,
    /// Inputs with the same group are shown as one budget line ("spot positions").
    pub group: Option<String>,
}

impl Input {
    /// A normally distributed input with standard uncertainty `u`.
    pub fn normal(name: impl Into<String>, value: f64, u: f64) -> Self {
        Input {
            name: name.into(),
            value,
            u,
            distribution: Distribution::Normal,
            group: None,
        }
    }

    /// A rectangularly distributed input over `value ± half_width`; its standard uncertainty
    /// is half_width/√3 (JCGM 100:2008 §4.3.7).
    pub fn rectangular(name: impl Into<String>, value: f64, half_width: f64) -> Self {
        Input {
            name: name.into(),
            value,
            u: half_width / 3f64.sqrt(),
            distribution: Distribution::Rectangular,
            group: None,
        }
    }

    /// Puts the input in a budget group.
    pub fn in_group(mut self, group: impl Into<String>) -> Self {
        self.group = Some(group.into());
        self
    }
}

/// A correlation coefficient r(xᵢ, xⱼ) between two inputs, by index into the input slice.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Correlation {
    /// Index of the first input.
    pub i: usize,
    /// Index of the second input.
    pub j: usize,
    /// Correlation coefficient, −1 ≤ r ≤ 1.
    pub r: f64,
}

/// Why an uncertainty evaluation could not be made.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum UncertaintyError {
    /// An input's value or standard uncertainty is unusable.
    #[error("input `{name}`: {problem}")]
    BadInput {
        /// The input's name.
        name: String,
        /// What is wrong.
        problem: String,
    },
    /// A correlation refers to no input, to one input twice, or is out of range.
    #[error("correlation r = {r} between inputs {i} and {j}: {problem}")]
    BadCorrelation {
        /// Index of the first input.
        i: usize,
        /// Index of the second input.
        j: usize,
        /// The coefficient given.
        r: f64,
        /// What is wrong.
        problem: String,
    },
    /// The correlation coefficients cannot all hold at once.
    #[error(
        "the correlation coefficients of the inputs are inconsistent: their matrix is not \
         positive {what}; check the coefficients{hint}"
    )]
    NotPositiveDefinite {
        /// "definite" or "semidefinite".
        what: &'static str,
        /// Extra advice.
        hint: &'static str,
    },
    /// Monte Carlo was asked to correlate an input that is not normal.
    #[error(
        "input `{name}` is correlated with another but is not normal; correlated inputs are \
         sampled from a multivariate normal distribution (JCGM 101:2008 §6.4.8), so give it a \
         normal distribution or drop the correlation"
    )]
    CorrelatedNonNormal {
        /// The input's name.
        name: String,
    },
    /// The model returned no outputs.
    #[error("the model returned no outputs")]
    NoOutputs,
    /// The model returned a different number of outputs at different points.
    #[error("the model returned {got} outputs at one point but {expected} at the estimates")]
    OutputCount {
        /// Number of outputs at the estimates.
        expected: usize,
        /// Number of outputs at another point.
        got: usize,
    },
    /// An output is NaN or infinite at the input estimates.
    #[error("output {output} of the model is {value} at the input estimates")]
    NonFiniteOutput {
        /// Index of the output.
        output: usize,
        /// Its value.
        value: f64,
    },
    /// The model gives no finite outputs on either side of an input's estimate.
    #[error(
        "the sensitivity to `{name}` could not be evaluated: the model's outputs are not \
         finite at {name} ± {step:e}"
    )]
    NoSensitivity {
        /// The input's name.
        name: String,
        /// The step tried.
        step: f64,
    },
    /// The model fails at the input estimates, so Monte Carlo has nothing to start from.
    #[error("the model fails at the input estimates, so the Monte Carlo evaluation cannot start")]
    ModelFailsAtEstimate,
    /// Too few Monte Carlo trials for a 95 % coverage interval.
    #[error(
        "{trials} Monte Carlo trials are too few for a 95 % coverage interval: at least {min} \
         are needed, and JCGM 101:2008 §7.2.2 recommends {recommended}"
    )]
    TooFewTrials {
        /// Trials asked for.
        trials: usize,
        /// The least that gives an interval.
        min: usize,
        /// 10⁴/(1 − p).
        recommended: usize,
    },
    /// The model failed in too many Monte Carlo trials for the result to stand.
    #[error(
        "the model failed in {failed} of {trials} Monte Carlo trials (more than 1 %): the \
         spread of the inputs reaches values where the model has no solution; check the \
         inputs and their uncertainties, or rely on the first-order result"
    )]
    TooManyFailures {
        /// Trials in which the model failed or gave non-finite outputs.
        failed: usize,
        /// Trials run.
        trials: usize,
    },
}

/// Checks that every input has a finite value and a finite, non-negative uncertainty.
fn check_inputs(inputs: &[Input]) -> Result<(), UncertaintyError> {
    for input in inputs {
        let problem = if !input.value.is_finite() {
            format!("the value is {}", input.value)
        } else if !input.u.is_finite() {
            format!("the standard uncertainty is {}", input.u)
        } else if input.u < 0.0 {
            format!("the standard uncertainty {} is negative", input.u)
        } else {
            continue;
        };
        return Err(UncertaintyError::BadInput {
            name: input.name.clone(),
            problem,
        });
    }
    Ok(())
}

/// The correlation matrix of `n` inputs: 1 on the diagonal, the given coefficients off it.
fn correlation_matrix(
    n: usize,
    correlations: &[Correlation],
) -> Result<DMatrix<f64>, UncertaintyError> {
    let mut r = DMatrix::identity(n, n);
    let mut set = DMatrix::from_element(n, n, false);
    for c in correlations {
        let bad = |problem: &str| UncertaintyError::BadCorrelation {
            i: c.i,
            j: c.j,
            r: c.r,
            problem: problem.to_string(),
        };
        if c.i >= n || c.j >= n {
            return Err(bad(&format!("there are only {n} inputs")));
        }
        if c.i == c.j {
            return Err(bad("an input's correlation with itself is 1 by definition"));
        }
        if !c.r.is_finite() || c.r.abs() > 1.0 {
            return Err(bad("a correlation coefficient lies between −1 and 1"));
        }
        if set[(c.i, c.j)] && r[(c.i, c.j)] != c.r {
            return Err(bad("this pair is given twice with different coefficients"));
        }
        r[(c.i, c.j)] = c.r;
        r[(c.j, c.i)] = c.r;
        set[(c.i, c.j)] = true;
        set[(c.j, c.i)] = true;
    }
    Ok(r)
}

/// A correlation matrix must be positive semidefinite for any variance to be ≥ 0.
fn check_semidefinite(r: &DMatrix<f64>) -> Result<(), UncertaintyError> {
    if r.nrows() < 2 {
        return Ok(());
    }
    let min = nalgebra::SymmetricEigen::new(r.clone())
        .eigenvalues
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min);
    // Round-off on a matrix of unit scale is near 1e-15; a real inconsistency is far larger.
    if min >= -1e-10 {
        Ok(())
    } else {
        Err(UncertaintyError::NotPositiveDefinite {
            what: "semidefinite",
            hint: "",
        })
    }
}

#[cfg(test)]
mod tests;
