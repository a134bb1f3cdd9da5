//! Validation of the first-order (GUM uncertainty framework) result by Monte Carlo, after
//! JCGM 101:2008 §8: the endpoints of y ± U_p are compared with those of the Monte Carlo
//! 100p % interval, within the numerical tolerance of the standard uncertainty (§7.9.2).

use super::{Estimate, McEstimate};
use crate::quantity::round_significant;

/// Significant digits regarded as meaningful in a standard uncertainty (JCGM 101:2008 §7.9.2
/// takes 1 or 2; two is what is reported, JCGM 100:2008 §7.2.6).
const MEANINGFUL_DIGITS: usize = 2;

/// The outcome of [`validate`].
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Validation {
    /// Both endpoint differences are within the tolerance: the first-order result stands.
    pub agrees: bool,
    /// The numerical tolerance δ of the Monte Carlo standard uncertainty (§7.9.2).
    pub tolerance: f64,
    /// |y − U − y_low|.
    pub d_low: f64,
    /// |y + U − y_high|.
    pub d_high: f64,
}

/// The numerical tolerance of `z` regarded as meaningful to `digits` significant digits
/// (JCGM 101:2008 §7.9.2): write z as c × 10^ℓ with c a `digits`-digit integer; δ = ½·10^ℓ.
/// 0 for z = 0; NaN for a non-finite z, which then agrees with nothing.
pub fn numerical_tolerance(z: f64, digits: usize) -> f64 {
    if z == 0.0 {
        return 0.0;
    }
    match round_significant(z.abs(), digits) {
        Some((_, last)) => 0.5 * 10f64.powi(last),
        None => f64::NAN,
    }
}

/// Compares the first-order interval `linear.value ± coverage_k·linear.u` with the Monte Carlo
/// 95 % interval (JCGM 101:2008 §8.2): d_low = |y − U − y_low|, d_high = |y + U − y_high|,
/// and agreement when both are at most δ, the numerical tolerance of the Monte Carlo u to two
/// significant digits.
///
/// `coverage_k` must give the same coverage probability as the Monte Carlo interval, 95 %:
/// [`super::K_95_NORMAL`] (1.96) for a normal output, not [`super::K_95`] (2, about 95.45 %),
/// which would differ by 0.04·u even for a linear model and flag it.
pub fn validate(linear: &Estimate, coverage_k: f64, mc: &McEstimate) -> Validation {
    let expanded = coverage_k * linear.u;
    let d_low = (linear.value - expanded - mc.low).abs();
    let d_high = (linear.value + expanded - mc.high).abs();
    let tolerance = numerical_tolerance(mc.u, MEANINGFUL_DIGITS);
    Validation {
        agrees: d_low <= tolerance && d_high <= tolerance,
        tolerance,
        d_low,
        d_high,
    }
}
