//! Two slits: the slit separation d and the slit width a from the whole fringe profile.
//!
//! Fraunhofer diffraction by two slits of width a whose centres are d apart (Hecht,
//! *Optics*, 5th ed., §10.2.2): I(s) = I0·cos²(π d s/λ)·sinc²(π a s/λ), s = sin θ. The fit
//! writes cos² as (1 + V·cos(2π d s/λ + φ))/2: the visibility V < 1 takes up partial
//! coherence and the camera's blur, which wash the fringes out without moving them, and φ a
//! path difference between the slits, which shifts the fringes under the envelope. A
//! background B + B′·u + B″·u², u = (x − x0)/L, takes the room light and the lens's
//! vignetting. Nothing is small-angle: each sample's
//! sin θ comes from its screen position through [`super::profile::sine_of_angle`].
//!
//! Missing orders (d a multiple of a) make every second or third fringe vanish, so the
//! strongest period of the profile can be twice the fringe period: the fit is started at
//! the spectral period, twice and half of it, and the best fit kept.

use super::OpticsError;
use super::profile::{
    self, FringeProfile, IntensityModel, Measurands, ProfileFit, Refit, evaluate, fit_profile,
    linear_two, median_step, positive, sinc, sinc2_and_derivative, sine_of_angle,
};
use crate::fit::spectral::PeriodEstimator;
use crate::scale::ScreenMap;
use crate::uncertainty::{Estimate, Input, McEstimate, Validation};
use rayon::prelude::*;
use std::f64::consts::PI;

/// Parameter indices of [`TwoSlitModel`].
pub mod param {
    /// Pattern centre, mm.
    pub const X0: usize = 0;
    /// Peak intensity I0.
    pub const AMPLITUDE: usize = 1;
    /// Background.
    pub const BACKGROUND: usize = 2;
    /// Background slope per unit (x − x0)/L.
    pub const SLOPE: usize = 3;
    /// Fringe visibility.
    pub const VISIBILITY: usize = 4;
    /// d/λ.
    pub const D_OVER_LAMBDA: usize = 5;
    /// a/λ.
    pub const A_OVER_LAMBDA: usize = 6;
    /// Fringe phase, rad.
    pub const PHASE: usize = 7;
    /// Background curvature per unit ((x − x0)/L)².
    pub const CURVATURE: usize = 8;
}

/// The two-slit intensity model over sin θ.
pub struct TwoSlitModel;

impl IntensityModel for TwoSlitModel {
    fn names(&self) -> &'static [&'static str] {
        &[
            "centre_m",
            "amplitude",
            "background",
            "background_slope",
            "visibility",
            "d_over_lambda",
            "a_over_lambda",
            "phase_rad",
            "background_curvature",
        ]
    }

    fn intensity(&self, p: &[f64], s: f64, u: f64) -> f64 {
        let envelope = sinc(PI * p[6] * s).powi(2);
        let fringes = 0.5 * (1.0 + p[4] * (2.0 * PI * p[5] * s + p[7]).cos());
        p[2] + (p[3] + p[8] * u) * u + p[1] * envelope * fringes
    }

    fn typical(&self, p: &[f64]) -> Vec<f64> {
        let a = p[1].abs().max(1e-6);
        vec![1.0, a, a, a, 0.1, p[5].abs(), p[6].abs(), 0.1, a]
    }

    fn gradient(&self, p: &[f64], s: f64, u: f64, g: &mut [f64]) -> Option<(f64, f64)> {
        let beta = PI * p[6] * s;
        let (env, denv) = sinc2_and_derivative(beta);
        let psi = 2.0 * PI * p[5] * s + p[7];
        let (sin_psi, cos_psi) = psi.sin_cos();
        let fringes = 0.5 * (1.0 + p[4] * cos_psi);
        let dfringes = -0.5 * p[4] * sin_psi;
        g[1] = env * fringes;
        g[2] = 1.0;
        g[3] = u;
        g[4] = p[1] * env * 0.5 * cos_psi;
        g[5] = p[1] * env * dfringes * 2.0 * PI * s;
        g[6] = p[1] * fringes * denv * PI * s;
        g[7] = p[1] * env * dfringes;
        g[8] = u * u;
        let di_ds = p[1] * (denv * PI * p[6] * fringes + env * dfringes * 2.0 * PI * p[5]);
        Some((di_ds, p[3] + 2.0 * p[8] * u))
    }
}

/// Inputs of a two-slit measurement.
#[derive(Debug, Clone)]
pub struct TwoSlitInputs {
    /// Wavelength, m, named "wavelength".
    pub wavelength: Input,
    /// Slits-to-screen distance, m, named "distance".
    pub distance: Input,
}

/// A solved double slit.
#[derive(Debug, Clone)]
pub struct TwoSlitSolution {
    /// Slit separation d, m.
    pub separation: Estimate,
    /// Slit width a, m.
    pub width: Estimate,
    /// Fringe period on the screen at the pattern centre, λL/d, m.
    pub fringe_period: Estimate,
    /// The profile fit.
    pub fit: ProfileFit,
    /// The model at every profile sample (for the plot).
    pub model_values: Vec<f64>,
    /// Monte Carlo check of the separation, when asked for.
    pub monte_carlo: Option<(McEstimate, Validation)>,
    /// Things the user should know.
    pub warnings: Vec<String>,
}

/// Least samples per fringe period for the fit to see the fringes: below about three the
/// profile aliases (Nyquist is two; common practice keeps a margin).
pub const MIN_SAMPLES_PER_FRINGE: f64 = 3.0;

/// Least fringe visibility to measure: below it the fringes are not resolved (finer than
/// the camera's pixels, which average them out) or the light is not coherent over both slits,
/// and the period the fit finds is an alias (common practice: a usable interferogram shows
/// a contrast of a third or better).
pub const MIN_VISIBILITY: f64 = 0.3;

/// Fringe period of the profile in mm from its spectrum, or None if there is no periodic
/// signal. Only the bright part is transformed (from the first to the last sample above a
/// quarter of the peak over the floor), and periods longer than a third of it are not
/// considered, so the envelope cannot pass for the fringes. Saturated samples keep the
/// clip level, which keeps the fringe train whole.
pub fn spectral_period_mm(profile: &FringeProfile) -> Option<f64> {
    let v = &profile.value;
    let n = v.len();
    if n < 16 {
        return None;
    }
    let peak = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let mut sorted: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    sorted.sort_by(f64::total_cmp);
    let floor = *sorted.get(sorted.len() / 20)?;
    let level = floor + 0.25 * (peak - floor);
    let first = v.iter().position(|&x| x > level)?;
    let last = v.iter().rposition(|&x| x > level)?;
    let len = last + 1 - first;
    if len < 16 {
        return None;
    }
    let step = median_step(&profile.x_mm);
    let mut est = PeriodEstimator::new();
    let period = est.dominant_period(&v[first..=last], 2.0, len as f64 / 3.0)?;
    Some(period.period * step)
}

/// Solves the double slit from its profile.
pub fn solve(
    profile: &FringeProfile,
    map: &ScreenMap,
    inputs: &TwoSlitInputs,
    monte_carlo: Option<(usize, u64)>,
) -> Result<TwoSlitSolution, OpticsError> {
    let distance_mm = positive(&inputs.distance, "distance")? * 1e3;
    positive(&inputs.wavelength, "wavelength")?;
    let samples = profile.samples(|_| true);
    let (x, y) = samples.exact();
    if x.len() < 30 {
        return Err(OpticsError::Unsolvable(format!(
            "only {} unsaturated samples in the fringe profile; expose for the fringes, not \
             the centre",
            x.len()
        )));
    }
    let period_mm = spectral_period_mm(profile)
        .ok_or_else(|| OpticsError::Unsolvable("the profile shows no periodic fringes".into()))?;
    let model = TwoSlitModel;
    let mut best: Option<ProfileFit> = None;
    let mut failure = None;
    let tries: Vec<_> = [1.0, 2.0, 0.5]
        .par_iter()
        .map(|factor| {
            let start = start_values(&x, &y, distance_mm, period_mm / factor);
            fit_profile(
                &model,
                &samples,
                distance_mm,
                1.0,
                &start,
                "two-slit profile",
            )
        })
        .collect();
    for attempt in tries {
        match attempt {
            Ok(f) if plausible(&f.params) => {
                if best.as_ref().is_none_or(|b| f.cost < b.cost) {
                    best = Some(f);
                }
            }
            Ok(_) => {}
            Err(e) => failure = Some(e),
        }
    }
    let clipped = samples.lower_bound.iter().filter(|c| **c).count();
    let saturation = if clipped * 10 > samples.len() {
        format!(
            "; {:.0} % of the profile is saturated: take the photo with a shorter exposure, \
             less gain or a weaker beam",
            100.0 * clipped as f64 / samples.len() as f64
        )
    } else {
        String::new()
    };
    let Some(mut fit) = best else {
        return Err(OpticsError::Unsolvable(match failure {
            Some(e) => format!("the two-slit model could not be fitted: {e}{saturation}"),
            None => format!(
                "the two-slit fit ended with a slit wider than the separation or a negative \
                 intensity: the profile does not look like two-slit fringes{saturation}"
            ),
        }));
    };
    normalise(&mut fit.params);
    // The envelope's width rests on slowly varying light (speckle, stray light) that the
    // residual correlation underrates: the two sides' disagreement sets a floor.
    if let Some(spread) = profile::side_spread(&model, &samples, distance_mm, &fit.params) {
        let mut spread = spread;
        spread[param::PHASE] = 0.0;
        profile::widen(&mut fit.covariance, &spread);
    }
    let visibility = fit.params[param::VISIBILITY];
    if visibility < MIN_VISIBILITY {
        return Err(OpticsError::Unsolvable(format!(
            "the fringes are washed out (visibility {visibility:.2}): fringes closer than \
             {MIN_SAMPLES_PER_FRINGE:.0} px are not resolved by the camera; move the screen \
             further or come closer (or, if the fringes are visible by eye, the laser is not \
             coherent across both slits)"
        )));
    }
    let mut warnings = Vec::new();
    let d_over_lambda = fit.params[param::D_OVER_LAMBDA];
    let fringe_mm = distance_mm / d_over_lambda;
    let step = median_step(&profile.x_mm);
    if fringe_mm / step < MIN_SAMPLES_PER_FRINGE {
        return Err(OpticsError::Unsolvable(format!(
            "fringes closer than {MIN_SAMPLES_PER_FRINGE:.0} px ({:.1} px); move the screen \
             further or come closer",
            fringe_mm / step
        )));
    }
    let ratio = d_over_lambda / fit.params[param::A_OVER_LAMBDA];
    if (ratio - ratio.round()).abs() < 0.05 && ratio.round() >= 2.0 {
        warnings.push(format!(
            "d/a ≈ {:.0}: every {}th fringe falls on a zero of the envelope (missing orders)",
            ratio.round(),
            ratio.round()
        ));
    }
    let again = |l_mm: f64, factor: f64| -> Result<Vec<f64>, OpticsError> {
        let mut start = fit.params.clone();
        start[0] *= factor;
        fit_profile(&model, &samples, l_mm, factor, &start, "two-slit profile")
            .map(|f| f.params)
            .map_err(|e| OpticsError::Unsolvable(e.to_string()))
    };
    let refit = Refit {
        params: &fit.params,
        covariance: &fit.covariance,
        again: &again,
    };
    let compute = |lambda: f64, distance: f64, r: &[f64]| {
        vec![
            lambda * r[0].abs(),
            lambda * r[1].abs(),
            distance / r[0].abs(),
        ]
    };
    let measurands = Measurands {
        ratios: &[(param::D_OVER_LAMBDA, "d/λ"), (param::A_OVER_LAMBDA, "a/λ")],
        compute: &compute,
    };
    let (estimates, monte_carlo) = profile::propagate(
        &refit,
        &inputs.wavelength,
        &inputs.distance,
        map,
        &measurands,
        monte_carlo,
    )?;
    let mut it = estimates.into_iter();
    let (Some(separation), Some(width), Some(fringe_period)) = (it.next(), it.next(), it.next())
    else {
        return Err(OpticsError::Unsolvable(
            "propagation returned too few outputs".into(),
        ));
    };
    warnings.extend(profile::monte_carlo_warning(&monte_carlo));
    let model_values = evaluate(&model, &fit.params, &profile.x_mm, distance_mm);
    Ok(TwoSlitSolution {
        separation,
        width,
        fringe_period,
        fit,
        model_values,
        monte_carlo,
        warnings,
    })
}

/// A fit is physical when the slit is narrower than the separation and the fringes are
/// bright.
fn plausible(p: &[f64]) -> bool {
    p[param::AMPLITUDE] > 0.0
        && p[param::A_OVER_LAMBDA].abs() < p[param::D_OVER_LAMBDA].abs()
        && p[param::VISIBILITY].abs() <= 1.5
}

/// Signs that the model cannot see: |d/λ|, |a/λ|, and V > 0 (a negative V is a half-period
/// phase).
fn normalise(p: &mut [f64]) {
    p[param::D_OVER_LAMBDA] = p[param::D_OVER_LAMBDA].abs();
    p[param::A_OVER_LAMBDA] = p[param::A_OVER_LAMBDA].abs();
    if p[param::VISIBILITY] < 0.0 {
        p[param::VISIBILITY] = -p[param::VISIBILITY];
        p[param::PHASE] += PI;
    }
    p[param::PHASE] = (p[param::PHASE] + PI).rem_euclid(2.0 * PI) - PI;
}

/// Start values: the centre from the brightness centroid moved to the nearest fringe
/// maximum (by the phase of the profile at the fringe frequency), d/λ from the period near
/// the centre, and a/λ by a scan over a < d with the amplitude and background solved
/// linearly at each step.
fn start_values(x: &[f64], y: &[f64], distance_mm: f64, period_mm: f64) -> Vec<f64> {
    let floor = y.iter().copied().fold(f64::INFINITY, f64::min);
    let (mut sw, mut swx) = (0.0, 0.0);
    for (&xi, &yi) in x.iter().zip(y) {
        let w = (yi - floor).max(0.0).powi(2);
        sw += w;
        swx += w * xi;
    }
    let centroid = if sw > 0.0 { swx / sw } else { x[x.len() / 2] };
    let p = distance_mm / period_mm;
    // Phase of the fringes about the centroid, weighted to the bright middle.
    let (mut re, mut im) = (0.0, 0.0);
    let mean = y.iter().sum::<f64>() / y.len() as f64;
    for (&xi, &yi) in x.iter().zip(y) {
        let s = sine_of_angle(xi, centroid, distance_mm);
        let w = (yi - floor).max(0.0);
        let arg = 2.0 * PI * p * s;
        re += w * (yi - mean) * arg.cos();
        im += w * (yi - mean) * arg.sin();
    }
    let psi = im.atan2(re);
    let s_max = psi / (2.0 * PI * p);
    let x0 = centroid + distance_mm * s_max.atan().tan();
    let peak = y.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let mut best = (
        f64::INFINITY,
        vec![x0, peak - floor, floor, 0.0, 0.9, p, p / 3.0, 0.0, 0.0],
    );
    let steps = 48;
    for k in 0..steps {
        let q = p * (1.0 / 15.0) * (15.0f64 / 1.1).powf(k as f64 / (steps - 1) as f64);
        let mut trial = vec![x0, 1.0, 0.0, 0.0, 0.9, p, q, 0.0, 0.0];
        // Linear least squares for amplitude and background with the shape fixed.
        let shape: Vec<f64> = x
            .iter()
            .map(|&xi| {
                let s = sine_of_angle(xi, x0, distance_mm);
                TwoSlitModel.intensity(&trial, s, 0.0) - trial[2]
            })
            .collect();
        let Some((a, b)) = linear_two(&shape, y) else {
            continue;
        };
        trial[1] = a;
        trial[2] = b;
        let c = profile::cost_at(&TwoSlitModel, x, y, distance_mm, &trial);
        if a > 0.0 && c < best.0 {
            best = (c, trial);
        }
    }
    best.1
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A profile written straight from Hecht's two-slit formula (the textbook form, with
    /// the exact angle), solved back: an algebra check of the fit, independent of the
    /// simulator.
    #[test]
    fn recovers_separation_and_width_from_the_textbook_intensity() {
        let (lambda, l_mm, d, a) = (532e-9, 3000.0, 0.25e-3, 0.06e-3);
        let x: Vec<f64> = (0..3000).map(|i| -60.0 + i as f64 * 0.04).collect();
        let centre = 1.3;
        let value: Vec<f64> = x
            .iter()
            .enumerate()
            .map(|(i, &xi)| {
                let s = ((xi - centre) / l_mm).atan().sin();
                let b = PI * a * s / lambda;
                let env = if b == 0.0 { 1.0 } else { (b.sin() / b).powi(2) };
                let noise = 0.002 * ((i as f64 * 12.9898).sin() * 43758.5453).fract();
                0.05 + 0.8 * env * (PI * d * s / lambda).cos().powi(2) + noise
            })
            .collect();
        let profile = FringeProfile {
            used: vec![true; x.len()],
            clipped: vec![false; x.len()],
            x_mm: x,
            value,
        };
        let map = ScreenMap::uniform(crate::scale::ScaleMethod::MmPerPx, 0.04)
            .unwrap()
            .with_component("given", 1e-4);
        let inputs = TwoSlitInputs {
            wavelength: Input::normal("wavelength", lambda, 0.5e-9),
            distance: Input::normal("distance", l_mm * 1e-3, 2e-3),
        };
        let sol = solve(&profile, &map, &inputs, None).unwrap();
        assert!(
            (sol.separation.value / d - 1.0).abs() < 1e-3,
            "{:?}",
            sol.separation.value
        );
        assert!(
            (sol.width.value / a - 1.0).abs() < 1e-2,
            "{:?}",
            sol.width.value
        );
        // λ's 0.1 % dominates d's budget: the wavelength line carries most of it.
        assert!(sol.separation.u > 0.9e-3 * d);
        assert!((sol.fit.params[param::X0] - centre).abs() < 0.01);
    }
}
