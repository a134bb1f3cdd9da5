//! A single slit's width, or a wire's diameter, from its fringe profile.
//!
//! Fraunhofer diffraction by a slit of width a (Hecht, *Optics*, 5th ed., §10.2.1):
//! I(s) = I0·sinc²(π a s/λ), s = sin θ, with minima at a·sin θ = mλ, m ≠ 0. By Babinet's
//! principle (Born & Wolf, *Principles of Optics*, §8.3.2) an opaque wire of diameter w
//! gives the same pattern as a slit of width w everywhere outside the undiffracted beam.
//!
//! Two estimates are made from every profile: the whole-profile sinc² fit (saturated
//! samples left out) and a fit of the minima positions to x_m = x0 + L·tan(asin(mλ/a)).
//! The slit's result is the profile fit, the minima its cross-check; for the wire the
//! centre is the beam itself, so the result rests on the minima away from it and the
//! profile fit beyond the first minima is the cross-check. The two must agree within their
//! own (fit) uncertainties, or the report warns.

use super::OpticsError;
use super::profile::{
    self, FringeProfile, IntensityModel, Measurands, ProfileFit, Refit, evaluate, fit_profile,
    linear_two, median_step, positive, sinc, sinc2_and_derivative, sine_of_angle,
};
use crate::fit::FitError;
use crate::fit::lm::{LeastSquares, LmOptions, minimize};
use crate::scale::ScreenMap;
use crate::uncertainty::{Estimate, Input, McEstimate, Validation};
use nalgebra::DMatrix;
use std::f64::consts::PI;

/// What diffracts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Obstacle {
    /// An open slit.
    Slit,
    /// An opaque wire or fibre in a wider beam (Babinet's complement of a slit).
    Wire,
}

/// Parameter indices of [`SlitModel`].
pub mod param {
    /// Pattern centre, mm.
    pub const X0: usize = 0;
    /// Peak intensity.
    pub const AMPLITUDE: usize = 1;
    /// Background.
    pub const BACKGROUND: usize = 2;
    /// Background slope per unit (x − x0)/L.
    pub const SLOPE: usize = 3;
    /// a/λ.
    pub const A_OVER_LAMBDA: usize = 4;
    /// Background curvature per unit ((x − x0)/L)².
    pub const CURVATURE: usize = 5;
}

/// The single-slit intensity model over sin θ.
pub struct SlitModel;

impl IntensityModel for SlitModel {
    fn names(&self) -> &'static [&'static str] {
        &[
            "centre_m",
            "amplitude",
            "background",
            "background_slope",
            "a_over_lambda",
            "background_curvature",
        ]
    }

    fn intensity(&self, p: &[f64], s: f64, u: f64) -> f64 {
        p[2] + (p[3] + p[5] * u) * u + p[1] * sinc(PI * p[4] * s).powi(2)
    }

    fn typical(&self, p: &[f64]) -> Vec<f64> {
        let a = p[1].abs().max(1e-6);
        vec![1.0, a, a, a, p[4].abs(), a]
    }

    fn gradient(&self, p: &[f64], s: f64, u: f64, g: &mut [f64]) -> Option<(f64, f64)> {
        let (env, denv) = sinc2_and_derivative(PI * p[4] * s);
        g[1] = env;
        g[2] = 1.0;
        g[3] = u;
        g[4] = p[1] * denv * PI * s;
        g[5] = u * u;
        Some((p[1] * denv * PI * p[4], p[3] + 2.0 * p[5] * u))
    }
}

/// A dark fringe located in the profile.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Minimum {
    /// Order m (a·sin θ = mλ).
    pub order: i32,
    /// Index (fractional) into the profile's samples.
    pub sample: f64,
    /// Screen position along the pattern, mm.
    pub x_mm: f64,
    /// Its standard uncertainty, mm.
    pub u_mm: f64,
}

/// Inputs of a slit or wire measurement.
#[derive(Debug, Clone)]
pub struct SlitInputs {
    /// Slit or wire.
    pub obstacle: Obstacle,
    /// Wavelength, m, named "wavelength".
    pub wavelength: Input,
    /// Aperture-to-screen distance, m, named "distance".
    pub distance: Input,
}

/// A solved slit or wire.
#[derive(Debug, Clone)]
pub struct SlitSolution {
    /// The measurand: "width" (slit) or "diameter" (wire).
    pub measurand: &'static str,
    /// Its estimate with budget.
    pub estimate: Estimate,
    /// The cross-check estimate (the minima line for a slit, the profile fit for a
    /// wire), with its budget; None when a slit's minima could not be located.
    pub cross_check: Option<Estimate>,
    /// The profile fit.
    pub fit: ProfileFit,
    /// Whether each profile sample entered the profile fit.
    pub fitted: Vec<bool>,
    /// The model at every profile sample.
    pub model_values: Vec<f64>,
    /// Minima found, by order.
    pub minima: Vec<Minimum>,
    /// The minima fit: [x0 mm, a/λ] with covariance, when there were two or more.
    pub minima_fit: Option<(Vec<f64>, DMatrix<f64>)>,
    /// Monte Carlo check of the measurand, when asked for.
    pub monte_carlo: Option<(McEstimate, Validation)>,
    /// Things the user should know.
    pub warnings: Vec<String>,
}

/// Solves a slit or wire from its profile.
pub fn solve(
    profile: &FringeProfile,
    map: &ScreenMap,
    inputs: &SlitInputs,
    monte_carlo: Option<(usize, u64)>,
) -> Result<SlitSolution, OpticsError> {
    let l = positive(&inputs.distance, "distance")? * 1e3;
    positive(&inputs.wavelength, "wavelength")?;
    let n = profile.x_mm.len();
    if n < 30 || (0..n).filter(|&i| profile.exact(i)).count() < 30 {
        return Err(OpticsError::Unsolvable(
            "too few unsaturated samples in the profile to see its minima".into(),
        ));
    }
    let step = median_step(&profile.x_mm);
    let start = centre_and_core(profile)?;
    // a/λ by a broad scan, from a first minimum at half the profile's extent to one 3 px
    // from the centre; for the wire the beam's spot is kept out of it.
    let extent = (profile.x_mm[n - 1] - profile.x_mm[0]).abs();
    let spot = match inputs.obstacle {
        Obstacle::Slit => 0.0,
        Obstacle::Wire => 1.5 * start.bright_half_width_mm,
    };
    let (sx, sy): (Vec<f64>, Vec<f64>) = (0..n)
        .filter(|&i| profile.exact(i) && (profile.x_mm[i] - start.centre_mm).abs() >= spot)
        .map(|i| (profile.x_mm[i], profile.value[i]))
        .unzip();
    let coarse = scan_width(
        &sx,
        &sy,
        l,
        start.centre_mm,
        (l / (0.5 * extent), l / (3.0 * step)),
        240,
    );
    let q0 = coarse[param::A_OVER_LAMBDA];
    let spacing_mm = l / q0;
    if spacing_mm / step < 3.5 {
        return Err(OpticsError::Unsolvable(format!(
            "fringes closer than 3 px ({:.1} px); move the screen further or come closer",
            spacing_mm / step
        )));
    }
    // For the wire the beam's own spot sits on the central lobe: fit beyond the first
    // minima only, and never take a minimum inside the spot.
    let keep_out_mm = match inputs.obstacle {
        Obstacle::Slit => 0.0,
        Obstacle::Wire => start.bright_half_width_mm.max(0.8 * spacing_mm),
    };
    let fitted: Vec<bool> = (0..n)
        .map(|i| profile.used[i] && (profile.x_mm[i] - start.centre_mm).abs() >= keep_out_mm)
        .collect();
    let samples = profile.samples(|i| fitted[i]);
    let (x, y) = samples.exact();
    let model = SlitModel;
    let p0 = scan_width(&x, &y, l, start.centre_mm, (0.8 * q0, 1.25 * q0), 60);
    let fit = fit_profile(&model, &samples, l, 1.0, &p0, "slit profile").map_err(|e| {
        OpticsError::Unsolvable(format!("the sinc² profile could not be fitted: {e}"))
    })?;
    let mut params = fit.params.clone();
    params[param::A_OVER_LAMBDA] = params[param::A_OVER_LAMBDA].abs();
    if !(params[param::AMPLITUDE] > 0.0) {
        return Err(OpticsError::Unsolvable(
            "the fitted sinc² has no bright centre: the profile does not look like a slit's".into(),
        ));
    }
    let q = params[param::A_OVER_LAMBDA];
    let minima = locate_minima(profile, &params, l, keep_out_mm);
    let mut warnings = Vec::new();
    let minima_fit = if minima.len() >= 2 {
        Some(
            fit_minima(&minima, l, 1.0, &[params[param::X0], q]).map_err(|e| {
                OpticsError::Unsolvable(format!("the minima could not be fitted: {e}"))
            })?,
        )
    } else if inputs.obstacle == Obstacle::Wire {
        return Err(OpticsError::Unsolvable(format!(
            "only {} dark fringe(s) could be located outside the beam's spot; the wire's \
             diameter needs at least two",
            minima.len()
        )));
    } else {
        warnings.push(format!(
            "only {} dark fringe(s) could be located (pencil marks, grid lines or noise over \
             them?): the width rests on the profile fit alone, without the minima cross-check",
            minima.len()
        ));
        None
    };
    // Without minima (slit only) the minima refit below is never propagated.
    let (minima_params, minima_cov) = minima_fit
        .clone()
        .unwrap_or_else(|| (vec![params[param::X0], q], DMatrix::identity(2, 2)));

    // The profile fit's budget, and the minima's.
    let again_profile = |l_mm: f64, factor: f64| -> Result<Vec<f64>, OpticsError> {
        let mut s = params.clone();
        s[0] *= factor;
        fit_profile(&model, &samples, l_mm, factor, &s, "slit profile")
            .map(|f| f.params)
            .map_err(|e| OpticsError::Unsolvable(e.to_string()))
    };
    let again_minima = |l_mm: f64, factor: f64| -> Result<Vec<f64>, OpticsError> {
        fit_minima(
            &minima,
            l_mm,
            factor,
            &[minima_params[0] * factor, minima_params[1]],
        )
        .map(|(p, _)| p)
        .map_err(|e| OpticsError::Unsolvable(e.to_string()))
    };
    let compute = |lambda: f64, _distance: f64, r: &[f64]| vec![lambda * r[0].abs()];
    let profile_measurand = Measurands {
        ratios: &[(param::A_OVER_LAMBDA, "a/λ (profile)")],
        compute: &compute,
    };
    let minima_measurand = Measurands {
        ratios: &[(1, "a/λ (minima)")],
        compute: &compute,
    };
    let profile_refit = Refit {
        params: &params,
        covariance: &fit.covariance,
        again: &again_profile,
    };
    let minima_refit = Refit {
        params: &minima_params,
        covariance: &minima_cov,
        again: &again_minima,
    };
    let (primary, secondary, measurand) = match inputs.obstacle {
        Obstacle::Slit => (
            (&profile_refit, &profile_measurand),
            (&minima_refit, &minima_measurand),
            "width",
        ),
        Obstacle::Wire => (
            (&minima_refit, &minima_measurand),
            (&profile_refit, &profile_measurand),
            "diameter",
        ),
    };
    let (est, monte_carlo) = profile::propagate(
        primary.0,
        &inputs.wavelength,
        &inputs.distance,
        map,
        primary.1,
        monte_carlo,
    )?;
    let cross_check = if minima_fit.is_some() {
        let (check, _) = profile::propagate(
            secondary.0,
            &inputs.wavelength,
            &inputs.distance,
            map,
            secondary.1,
            None,
        )?;
        check.into_iter().next()
    } else {
        None
    };
    let Some(estimate) = est.into_iter().next() else {
        return Err(OpticsError::Unsolvable(
            "propagation returned no estimate".into(),
        ));
    };
    // Compare on the fits' own uncertainties: wavelength, distance and scale are common
    // to both and cancel in the difference.
    let u_fit = |e: &Estimate| {
        e.budget
            .iter()
            .filter(|b| b.input.starts_with("fit:"))
            .map(|b| b.contribution.powi(2))
            .sum::<f64>()
            .sqrt()
    };
    let disagreement = cross_check.as_ref().map(|c| {
        (
            (estimate.value - c.value).abs(),
            u_fit(&estimate).hypot(u_fit(c)),
        )
    });
    if let Some((diff, u_diff)) = disagreement.filter(|(d, u)| *d > 2.0 * u) {
        warnings.push(format!(
            "the sinc² profile fit and the minima disagree by {:.2} % ({:.1}× their combined fit \
             uncertainty): the profile may be distorted by blooming, stray light or a \
             non-uniform beam",
            100.0 * diff / estimate.value,
            diff / u_diff.max(f64::MIN_POSITIVE)
        ));
    }
    warnings.extend(profile::monte_carlo_warning(&monte_carlo));
    let model_values = evaluate(&model, &params, &profile.x_mm, l);
    let fit = ProfileFit { params, ..fit };
    Ok(SlitSolution {
        measurand,
        estimate,
        cross_check,
        fit,
        fitted,
        model_values,
        minima,
        minima_fit,
        monte_carlo,
        warnings,
    })
}

struct Start {
    centre_mm: f64,
    /// Half-width of the bright centre (above a quarter of the peak), mm.
    bright_half_width_mm: f64,
}

/// The centre (brightness centroid of the bright core) and the core's half width.
fn centre_and_core(profile: &FringeProfile) -> Result<Start, OpticsError> {
    let v = &profile.value;
    let x = &profile.x_mm;
    let (imax, &peak) = v
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))
        .ok_or_else(|| OpticsError::Unsolvable("empty profile".into()))?;
    let floor = percentile(v, 0.05);
    let level = floor + 0.25 * (peak - floor);
    let (mut lo, mut hi) = (imax, imax);
    while lo > 0 && v[lo - 1] > level {
        lo -= 1;
    }
    while hi + 1 < v.len() && v[hi + 1] > level {
        hi += 1;
    }
    let (mut sw, mut swx) = (0.0, 0.0);
    for i in lo..=hi {
        let w = v[i] - floor;
        sw += w;
        swx += w * x[i];
    }
    Ok(Start {
        centre_mm: if sw > 0.0 { swx / sw } else { x[imax] },
        bright_half_width_mm: 0.5 * (x[hi] - x[lo]).abs(),
    })
}

fn percentile(v: &[f64], p: f64) -> f64 {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if s.is_empty() {
        return 0.0;
    }
    let k = ((s.len() - 1) as f64 * p) as usize;
    *s.select_nth_unstable_by(k, f64::total_cmp).1
}

/// a/λ by a log-spaced scan over `range` in `steps`, amplitude and background solved
/// linearly at each step; the best becomes the fit's start.
fn scan_width(x: &[f64], y: &[f64], l: f64, x0: f64, range: (f64, f64), steps: usize) -> Vec<f64> {
    let (q_lo, q_hi) = range;
    let mut best = (f64::INFINITY, vec![x0, 1.0, 0.0, 0.0, q_lo, 0.0]);
    for k in 0..=steps {
        let q = q_lo * (q_hi / q_lo).powf(k as f64 / steps as f64);
        let shape: Vec<f64> = x
            .iter()
            .map(|&xi| sinc(PI * q * sine_of_angle(xi, x0, l)).powi(2))
            .collect();
        let Some((a, b)) = linear_two(&shape, y) else {
            continue;
        };
        let trial = vec![x0, a, b, 0.0, q, 0.0];
        let c = profile::cost_at(&SlitModel, x, y, l, &trial);
        if a > 0.0 && c < best.0 {
            best = (c, trial);
        }
    }
    best.1
}

/// Each dark fringe where the fitted model puts one, refined on the data by a parabola
/// over the middle half of the dark fringe (sub-sample), with its uncertainty from the
/// parabola's residual scatter. The fitted background is taken off and the 1/sin²θ fall of
/// the envelope undone first: sinc² is lopsided about its zeros (brighter towards the
/// centre) and a parabola through it would lean inwards by several per cent of the
/// spacing at m = ±1, while sin² is symmetric about them. Minima in saturated stretches,
/// inside `keep_out_mm` of the centre, or too shallow to be a minimum are left out.
pub fn locate_minima(profile: &FringeProfile, p: &[f64], l: f64, keep_out_mm: f64) -> Vec<Minimum> {
    let (x0, q) = (p[param::X0], p[param::A_OVER_LAMBDA]);
    let flat = |x: f64, y: f64| {
        let s = sine_of_angle(x, x0, l);
        let u = (x - x0) / l;
        let background = p[param::BACKGROUND] + (p[param::SLOPE] + p[param::CURVATURE] * u) * u;
        (y - background) * (q * s).powi(2)
    };
    let x = &profile.x_mm;
    let n = x.len();
    let step = median_step(x);
    let (xmin, xmax) = (x[0].min(x[n - 1]), x[0].max(x[n - 1]));
    let mut out = Vec::new();
    for side in [-1i32, 1] {
        for k in 1..400 {
            let m = side * k;
            let s = m as f64 / q;
            if s.abs() >= 1.0 {
                break;
            }
            let xm = x0 + l * s / (1.0 - s * s).sqrt();
            if xm < xmin || xm > xmax {
                break;
            }
            if (xm - x0).abs() < keep_out_mm {
                continue;
            }
            // Local spacing of minima here: dx/dm.
            let s2 = (m as f64 + 0.5 * side as f64) / q;
            let spacing = if s2.abs() < 1.0 {
                (x0 + l * s2 / (1.0 - s2 * s2).sqrt() - xm).abs() * 2.0
            } else {
                continue;
            };
            let half = 0.25 * spacing;
            if half / step < 2.0 {
                continue;
            }
            if let Some(min) = refine_minimum(profile, xm, half, m, &flat) {
                out.push(min);
            }
        }
    }
    out.sort_by_key(|m| m.order);
    out
}

fn refine_minimum(
    profile: &FringeProfile,
    xm: f64,
    half: f64,
    order: i32,
    flat: &dyn Fn(f64, f64) -> f64,
) -> Option<Minimum> {
    let idx: Vec<usize> = (0..profile.x_mm.len())
        .filter(|&i| (profile.x_mm[i] - xm).abs() <= half)
        .collect();
    if idx.len() < 5 || idx.iter().any(|&i| !profile.exact(i)) {
        return None;
    }
    // y = c0 + c1·t + c2·t², t = x − xm, by least squares.
    let t: Vec<f64> = idx.iter().map(|&i| profile.x_mm[i] - xm).collect();
    let yv: Vec<f64> = idx
        .iter()
        .map(|&i| flat(profile.x_mm[i], profile.value[i]))
        .collect();
    let a = DMatrix::from_fn(t.len(), 3, |r, c| t[r].powi(c as i32));
    let b = nalgebra::DVector::from_column_slice(&yv);
    let ata = a.transpose() * &a;
    let inv = ata.try_inverse()?;
    let c = &inv * a.transpose() * &b;
    if !(c[2] > 0.0) {
        return None;
    }
    let vertex = -c[1] / (2.0 * c[2]);
    if vertex.abs() > 0.6 * half {
        return None;
    }
    let resid = &a * &c - &b;
    let dof = (t.len() - 3).max(1) as f64;
    let s2 = resid.norm_squared() / dof;
    let cov = inv * s2;
    // Depth: the parabola must rise clearly over the window (else it is noise).
    let rise = c[2] * half * half;
    if !(rise > 3.0 * s2.sqrt()) {
        return None;
    }
    // u(vertex) by first-order propagation of −c1/(2c2).
    let g1 = -1.0 / (2.0 * c[2]);
    let g2 = c[1] / (2.0 * c[2] * c[2]);
    let var = g1 * g1 * cov[(1, 1)] + g2 * g2 * cov[(2, 2)] + 2.0 * g1 * g2 * cov[(1, 2)];
    let x_mm = xm + vertex;
    let i0 = idx[0];
    let frac = (x_mm - profile.x_mm[i0]) / (profile.x_mm[i0 + 1] - profile.x_mm[i0]);
    Some(Minimum {
        order,
        sample: i0 as f64 + frac,
        x_mm,
        // Neighbouring samples' noise is correlated over a few samples (speckle, blur):
        // a factor √3 on the independent-noise value (common practice for a correlation
        // length of about three samples).
        u_mm: var.max(0.0).sqrt() * 3f64.sqrt(),
    })
}

struct MinimaProblem<'a> {
    minima: &'a [Minimum],
    l: f64,
    scale: f64,
}

impl LeastSquares for MinimaProblem<'_> {
    fn residual_count(&self) -> usize {
        self.minima.len()
    }

    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        for (ri, m) in r.iter_mut().zip(self.minima) {
            let s = m.order as f64 / p[1];
            if !(s.abs() < 1.0) {
                return false;
            }
            let x = p[0] + self.l * s / (1.0 - s * s).sqrt();
            *ri = (x - m.x_mm * self.scale) / (m.u_mm * self.scale);
        }
        true
    }
}

/// Fits x_m = x0 + L·tan(asin(m/q)) to the minima; returns [x0, q] and their covariance,
/// scaled by the Birge ratio when the scatter exceeds the stated uncertainties.
fn fit_minima(
    minima: &[Minimum],
    l: f64,
    scale: f64,
    start: &[f64],
) -> Result<(Vec<f64>, DMatrix<f64>), FitError> {
    let problem = MinimaProblem { minima, l, scale };
    let opts = LmOptions {
        ftol: 1e-13,
        xtol: 1e-13,
        gtol: 1e-13,
        max_iterations: 200,
    };
    let report = minimize(&problem, start, &opts, "minima")?;
    let inv = report
        .inverse_jtj
        .clone()
        .ok_or(FitError::Singular { model: "minima" })?;
    let dof = minima.len().saturating_sub(2);
    let birge2 = if dof > 0 {
        (report.cost / dof as f64).max(1.0)
    } else {
        1.0
    };
    Ok((report.params, inv * birge2))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn textbook_profile(obstacle: Obstacle, a: f64, lambda: f64, l_mm: f64) -> FringeProfile {
        // Hecht §10.2.1's sinc² with the exact angle; for the wire a bright Gaussian beam
        // spot added at the centre, and the centre clipped as a camera would.
        let x: Vec<f64> = (0..4000).map(|i| -80.0 + i as f64 * 0.04).collect();
        let centre = -0.7;
        let mut value = Vec::new();
        for (i, &xi) in x.iter().enumerate() {
            let s = ((xi - centre) / l_mm).atan().sin();
            let b = PI * a * s / lambda;
            let env = if b == 0.0 { 1.0 } else { (b.sin() / b).powi(2) };
            let noise = 0.001 * ((i as f64 * 12.9898).sin() * 43758.5453).fract();
            let spot = match obstacle {
                Obstacle::Slit => 0.0,
                Obstacle::Wire => 30.0 * (-((xi - centre) / 1.5).powi(2)).exp(),
            };
            value.push(0.02 + 4.0 * env + spot + noise);
        }
        let clipped = value.iter().map(|&v| v >= 1.0).collect();
        let value = value.into_iter().map(|v: f64| v.min(1.0)).collect();
        FringeProfile {
            used: vec![true; x.len()],
            x_mm: x,
            value,
            clipped,
        }
    }

    fn inputs(obstacle: Obstacle, lambda: f64, l_mm: f64) -> SlitInputs {
        SlitInputs {
            obstacle,
            wavelength: Input::normal("wavelength", lambda, 0.5e-9),
            distance: Input::normal("distance", l_mm * 1e-3, 2e-3),
        }
    }

    fn map() -> ScreenMap {
        ScreenMap::uniform(crate::scale::ScaleMethod::MmPerPx, 0.04)
            .unwrap()
            .with_component("given", 1e-4)
    }

    #[test]
    fn slit_width_from_a_clipped_sinc2_and_its_minima_agree() {
        let (a, lambda, l) = (0.1e-3, 650e-9, 2000.0);
        let p = textbook_profile(Obstacle::Slit, a, lambda, l);
        let sol = solve(&p, &map(), &inputs(Obstacle::Slit, lambda, l), None).unwrap();
        assert_eq!(sol.measurand, "width");
        assert!(
            (sol.estimate.value / a - 1.0).abs() < 2e-3,
            "{}",
            sol.estimate.value
        );
        assert!(
            (sol.cross_check.as_ref().unwrap().value / a - 1.0).abs() < 2e-3,
            "{:?}",
            sol.cross_check
        );
        assert!(sol.warnings.is_empty(), "{:?}", sol.warnings);
        // The minima sit at a·sin θ = mλ (Hecht §10.2.1).
        for m in &sol.minima {
            let s = ((m.x_mm - sol.fit.params[0]) / l).atan().sin();
            assert!((a * s / lambda - m.order as f64).abs() < 0.02, "{m:?}");
        }
        assert!(
            sol.minima.iter().any(|m| m.order == -1) && sol.minima.iter().any(|m| m.order == 1)
        );
    }

    #[test]
    fn wire_diameter_from_its_minima_with_the_beam_spot_left_out() {
        // AWG 36 wire, 0.127 mm (ASTM B258).
        let (w, lambda, l) = (0.127e-3, 650e-9, 1500.0);
        let p = textbook_profile(Obstacle::Wire, w, lambda, l);
        let sol = solve(&p, &map(), &inputs(Obstacle::Wire, lambda, l), None).unwrap();
        assert_eq!(sol.measurand, "diameter");
        assert!(
            (sol.estimate.value / w - 1.0).abs() < 3e-3,
            "{}",
            sol.estimate.value
        );
        assert!(sol.minima.iter().all(|m| m.order.abs() >= 1));
    }
}
